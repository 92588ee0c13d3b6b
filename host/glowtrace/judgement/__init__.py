"""The judgement: each tube section against its own history, each tube against
its type (docs/SCORING.md is the specification).

Control charts and trend statistics for short series, and the scoring that
turns them into a status, reasons and a grade. It reads the figures the
analysis stored, so it may import `analysis`, `logbook`, `tester` and the
shared top-level modules; never outputs, procedures or cli."""
