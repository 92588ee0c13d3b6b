"""The logbook: the SQLite file and the records in it.

The store (migrations, one transaction per capture, lossless samples), owners
and tubes, and moving logbooks between benches (export, merge). It stores what
the tester room produced, so it may import `tester` and the shared top-level
modules, nothing later in the flow."""
