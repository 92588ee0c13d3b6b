import os
import sys
from pathlib import Path

import pytest

# tests/fw holds MicroPython test modules: test_firmware_unix.py runs them
# under the micropython executable, pytest must not import them itself
collect_ignore = ["fw"]

REPO = Path(__file__).resolve().parent.parent
sys.path.insert(0, str(REPO / "host"))

from glowtrace import paths  # noqa: E402


@pytest.fixture(scope="session")
def micropython():
    return paths.micropython_executable()


@pytest.fixture
def db_path(tmp_path):
    return tmp_path / "bench.db"


@pytest.fixture(autouse=True)
def _no_user_db(tmp_path, monkeypatch):
    # never touch the developer's own logbook
    monkeypatch.setenv("GLOWTRACE_DB", str(tmp_path / "default.db"))
    monkeypatch.setenv("XDG_DATA_HOME", str(tmp_path / "xdg"))
    os.environ.setdefault("COLUMNS", "160")
