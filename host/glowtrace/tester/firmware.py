"""`glowtrace firmware install` and `version`: cross-compile the firmware
with mpy-cross, copy it to the board with mpremote, check the handshake.

The manual route, which this automates (README, "A real tester"):
    mpy-cross -march=armv6m firmware/glowfw/*.py firmware/board_rp2.py
    mpremote connect PORT fs mkdir :glowfw
    mpremote connect PORT fs cp firmware/glowfw/*.mpy :glowfw/
    mpremote connect PORT fs cp firmware/board_rp2.mpy firmware/main.py schematics/frontend.json :
    mpremote connect PORT reset
"""

import shutil
import subprocess
import sys
import tempfile
import time
from pathlib import Path

from .. import paths
from ..errors import GlowtraceError, SetupError

ARCH = "armv6m"  # RP2040; the same .mpy files load on the RP2350


def _tool(name: str) -> str:
    here = Path(sys.executable).parent / name
    found = str(here) if here.exists() else shutil.which(name)
    if not found:
        raise SetupError(f"`{name}` was not found: pip install {name}")
    return found


def firmware_version() -> str:
    text = (paths.FIRMWARE_DIR / "glowfw" / "__init__.py").read_text()
    return text.split('VERSION = "', 1)[1].split('"', 1)[0]


def build(out: Path, run=subprocess.run, variant: str = "30V") -> list[tuple[Path, str]]:
    """Compile the firmware into out; (local file, destination on the board),
    with the front-end numbers of the board's variant as /frontend.json."""
    mpy_cross = _tool("mpy-cross")
    fw = paths.require(paths.FIRMWARE_DIR)
    (out / "glowfw").mkdir(parents=True, exist_ok=True)
    files = []
    sources = sorted((fw / "glowfw").glob("*.py")) + [fw / "board_rp2.py"]
    for src in sources:
        rel = src.relative_to(fw).with_suffix(".mpy")
        dest = out / rel
        r = run([mpy_cross, f"-march={ARCH}", "-o", str(dest), str(src)],
                capture_output=True, text=True)
        if r.returncode != 0:
            raise GlowtraceError(f"mpy-cross could not compile {src.name}: "
                                 f"{(r.stderr or r.stdout).strip()}")
        files.append((dest, ":" + rel.as_posix()))
    files.append((fw / "main.py", ":main.py"))
    files.append((paths.require(paths.FRONTEND_VARIANTS[variant]), ":frontend.json"))
    return files


def mpremote_commands(port: str, files: list[tuple[Path, str]]) -> list[list[str]]:
    """The mpremote invocations that put the files on the board and reset it."""
    mp = _tool("mpremote")
    cmds = [[mp, "connect", port, "fs", "mkdir", ":glowfw"]]
    cmds += [[mp, "connect", port, "fs", "cp", str(local), remote] for local, remote in files]
    cmds.append([mp, "connect", port, "reset"])
    return cmds


def _leave_firmware(port: str) -> bool:
    """Ask running glowtrace firmware to reboot to the REPL; False if none answers."""
    from .driver import connect
    try:
        with connect(port, timeout=1.5, tries=1) as t:
            t.enter_repl()
            return True
    except GlowtraceError:
        return False


ANSWER_WAIT_S = 20.0  # a board's restart after the install: USB, the REPL window, imports


def install(port: str, run=subprocess.run, settle_s: float = 3.0, handshake=None,
            progress=print, wait_s: float = ANSWER_WAIT_S, variant: str = "30V") -> dict:
    """Build, copy, reset, and check that the board answers with this version
    (asking again until wait_s has passed: a board takes its time to come
    back, an emulated one ten times as long)."""
    if port.startswith("glowsim://"):
        raise GlowtraceError("the simulated tester runs the firmware from this checkout; "
                             "there is nothing to install")
    want = firmware_version()
    with tempfile.TemporaryDirectory() as d:
        files = build(Path(d), run, variant)
        progress(f"compiled {len(files) - 2} modules for {ARCH}")
        if _leave_firmware(port):
            progress("the running firmware went to the REPL for the install")
            time.sleep(settle_s)
        for cmd in mpremote_commands(port, files):
            r = run(cmd, capture_output=True, text=True)
            is_mkdir = cmd[3:5] == ["fs", "mkdir"]
            if r.returncode != 0 and not (is_mkdir and "exist" in (r.stderr + r.stdout).lower()):
                raise GlowtraceError(f"mpremote failed ({' '.join(cmd[3:])}): "
                                     f"{(r.stderr or r.stdout).strip() or 'no message'}; is the "
                                     "board plugged in, and no other program using the port?")
        progress("copied; the board restarts")
    time.sleep(settle_s)
    deadline = time.monotonic() + wait_s
    hello = (handshake or _handshake)(port)
    while hello is None and time.monotonic() < deadline:
        time.sleep(0.25)  # a port that is gone while the board re-enumerates fails at once
        hello = (handshake or _handshake)(port)
    if hello is None:
        raise GlowtraceError("the board did not answer after the install: see what it says "
                             f"with `mpremote connect {port} repl`")
    if hello.get("firmware") != want:
        raise GlowtraceError(f"the board runs firmware {hello.get('firmware')}, not {want}: "
                             "the copy did not take")
    return hello


def _handshake(port: str) -> dict | None:
    from .ports import probe
    return probe(port, timeout=4.0)
