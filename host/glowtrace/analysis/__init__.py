"""The analysis: measuring a start-up curve (docs/ANALYSIS.md is its
specification).

Curves from a capture or a CSV file, model-free figures and warnings, the
fitted thermal model and its tungsten physics (`physics/`), predictions at
rated voltage, and the runner that analyses stored captures. It reads the
logbook and the tester's raw captures, so it may import `logbook`, `tester` and
the shared top-level modules; never judgement, outputs, procedures or cli."""

ANALYSIS_VERSION = "2.2"
