"""The outputs: what a person reads or hands on.

Plots of start-up curves and metric trends (a figure with matplotlib, a
terminal chart with plotext), the HTML report for a customer and the dealer's
stock list (JSON rows, CSV). It may import every room before it (`judgement`,
`analysis`, `logbook`, `tester`) and the shared top-level modules; never
procedures or cli."""
