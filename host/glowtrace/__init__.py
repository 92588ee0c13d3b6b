"""glowtrace: a bench instrument and logbook for vacuum-tube heaters."""

__version__ = "0.1.0"
