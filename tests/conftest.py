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
    (database path, its --json output). Tests read it, never change it.
    Once for the whole session: the first xdist worker to need it runs it
    under a file lock, the others wait and read its result."""
    import fcntl
    import json
    import subprocess
    root = tmp_path_factory.getbasetemp()
    if os.environ.get("PYTEST_XDIST_WORKER"):
        root = root.parent  # shared by the workers of this run
    home = root / "demo-shared"
    home.mkdir(exist_ok=True)
    db, result = home / "demo.db", home / "demo.json"
    with open(home / "lock", "w") as lock:
        fcntl.flock(lock, fcntl.LOCK_EX)
        if not result.exists():
            env = dict(os.environ, XDG_DATA_HOME=str(home / "xdg"),
                       GLOWTRACE_DB=str(home / "x.db"))
            r = subprocess.run([str(Path(sys.executable).parent / "glowtrace"), "demo", "--db",
                                str(db), "--json"], capture_output=True, text=True, timeout=300,
                               env=env)
            assert r.returncode == 0, r.stderr
            result.write_text(r.stdout)
    return db, json.loads(result.read_text())


@pytest.fixture
def cli(capsys):
    """The command run in-process, as main() runs it for the console script:
    cli(*argv) -> (exit status, stdout, stderr). A subprocess proves only the
    entry point more, which test_claims and the demo tests cover."""
    from glowtrace.cli import main

    def run(*argv):
        try:
            rc = main([str(a) for a in argv])
        except SystemExit as e:  # argparse
            rc = e.code
        out, err = capsys.readouterr()
        return rc, out, err
    return run
