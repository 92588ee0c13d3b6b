"""The procedures: jobs that run several rooms in order for one task at the
bench, and always leave things safe.

A capture (tester -> logbook -> analysis, the heater off whatever happens), an
import of a curve from another instrument (file -> logbook -> analysis) and
the demo. They chain the rooms, so this room comes after all of them: it may
import every room but `cli`."""
