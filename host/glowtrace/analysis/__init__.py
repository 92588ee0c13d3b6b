"""Measuring a start-up curve: model-free metrics, a fitted thermal model,
the flash indicator and predictions at rated conditions.
docs/ANALYSIS.md says how every figure is computed."""

ANALYSIS_VERSION = "1.0"
