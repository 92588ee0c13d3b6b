"""Running ngspice in batch mode for the circuit checks."""

import re
import shutil
import subprocess
from pathlib import Path

import pytest

SCHEMATICS = Path(__file__).resolve().parent.parent / "schematics"
NGSPICE = shutil.which("ngspice")
needs_ngspice = pytest.mark.skipif(
    NGSPICE is None, reason="ngspice is not installed (Debian package ngspice; .ci/run "
                            "installs it): circuit checks skipped")


def run(deck: str, tmp_path) -> dict:
    """Run a deck that ends in a .control block of `meas` lines; returns the
    measured values by name."""
    path = tmp_path / "deck.cir"
    path.write_text(deck.replace("@LIB@", str(SCHEMATICS / "frontend.lib")))
    r = subprocess.run([NGSPICE, "-b", str(path)], capture_output=True, text=True,
                       timeout=120, cwd=SCHEMATICS)
    out = r.stdout + r.stderr
    if r.returncode != 0 or "rror" in out.replace("errors", ""):
        raise AssertionError(f"ngspice failed:\n{out[-3000:]}")
    vals = {}
    for m in re.finditer(r"^(\w+)\s*=\s*([-+0-9.eE]+)", out, re.M):
        vals[m.group(1).lower()] = float(m.group(2))
    return vals
