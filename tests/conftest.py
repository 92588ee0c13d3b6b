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


@pytest.fixture(scope="session")
def demo_run(tmp_path_factory):
    """The demo run once through the real command, as a user runs it:
    (database path, its --json output). Tests read it, never change it."""
    import json
    import subprocess
    home = tmp_path_factory.mktemp("demo")
    env = dict(os.environ, XDG_DATA_HOME=str(home / "xdg"), GLOWTRACE_DB=str(home / "x.db"))
    db = home / "demo.db"
    r = subprocess.run([str(Path(sys.executable).parent / "glowtrace"), "demo", "--db", str(db),
                        "--json"], capture_output=True, text=True, timeout=300, env=env)
    assert r.returncode == 0, r.stderr
    return db, json.loads(r.stdout)
