"""The firmware's schedule numbers, read from firmware/glowfw/schedule.py
(MicroPython code; it uses nothing CPython lacks)."""

import sys
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent.parent / "firmware"))
from glowfw import schedule  # noqa: E402


def dense_interval_us(n_channels: int) -> int:
    return schedule.build(n_channels, 60_000_000)[0][2]
