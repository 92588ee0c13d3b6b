"""Circuits around heaters: a tube's fitted thermal model (wire, sleeve,
exposed share) driven by a circuit instead of the measured current, to size
a soft start on the tube itself (docs/CIRCUITS.md is the specification).

It reads fitted models from the analysis and the logbook, so it may import
`analysis`, `logbook`, `tester` and the shared top-level modules; never
judgement, outputs, procedures or cli."""
