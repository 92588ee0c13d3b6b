"""`glowtrace demo`: an invented repair shop's morning at the bench, captured
through the simulated tester (the real firmware under micropython) into a demo
database, with the same tubes' earlier visits laid down first so that the
logbook has a history to judge. Shop, customers, equipment and tube labels
are invented for this project."""

import os
import shutil
from concurrent.futures import ThreadPoolExecutor
from dataclasses import dataclass, field
from datetime import datetime, timedelta, timezone
from pathlib import Path
from urllib.parse import urlencode

from .. import config
from ..logbook import records
from ..judgement import scoring
from ..tester.convert import summary
from .capture import STORE_WAIT_S, analyze_after_storing, capture_unstored, store_or_keep
from ..tester.sim import with_load
from ..logbook.store import Store

SHOP = "Quillwhistle Valve Bench (an invented repair shop)"

CUSTOMERS = {
    "Ysolde Marrin": "practice amplifier, brought in for crackle",
    "Teodor Pashkelly": "hi-fi amplifier, yearly check",
    "Tallowquince wireless circle": "table radio, series-string heaters",
}


@dataclass(frozen=True)
class DemoTube:
    label: str
    tube_type: str
    owner: str
    section: str
    sim: dict
    range: str = "low"
    # earlier visits: (days ago, simulator settings that differ then)
    history: list = field(default_factory=list)


DEMO_TUBES = [
    DemoTube("QW-0117-V1", "12AX7", "Ysolde Marrin", "AB",
             {"tube": "12AX7", "ambient_c": 21.5, "seed": 11},
             history=[(180, {"ambient_c": 19.0}), (120, {"ambient_c": 24.5}),
                      (60, {"ambient_c": 20.5})]),
    DemoTube("QW-0117-V2", "12AX7", "Ysolde Marrin", "A",
             {"tube": "12AX7", "ambient_c": 21.6, "seed": 12,
              "flash_b": 0.12, "light": 1}),
    # section B of V2 flashes, and has been flashing more at every visit
    DemoTube("QW-0117-V2", "12AX7", "Ysolde Marrin", "B",
             {"tube": "12AX7", "ambient_c": 21.6, "seed": 13,
              "flash_b": 0.12, "light": 1},
             history=[(150, {"flash_b": 0.01}), (120, {"flash_b": 0.03}),
                      (90, {"flash_b": 0.05}), (60, {"flash_b": 0.07}),
                      (30, {"flash_b": 0.09})]),
    DemoTube("QW-0122-V5", "6V6", "Teodor Pashkelly", "A",
             {"tube": "6V6", "ambient_c": 22.4, "seed": 21}),
    DemoTube("QW-0122-V7", "5U4GB", "Teodor Pashkelly", "A",
             {"tube": "5U4GB", "ambient_c": 22.4, "seed": 22},
             range="high"),
    DemoTube("QW-0130-V3", "12BA6", "Tallowquince wireless circle", "A",
             {"tube": "12BA6", "ambient_c": 19.8, "seed": 31}),
]


def demo_url(settings: dict) -> str:
    return "glowsim://?" + urlencode(settings)


def _record(store: Store) -> None:
    for name, equipment in CUSTOMERS.items():
        records.add_owner(store, name, notes=equipment)
    for t in DEMO_TUBES:
        if records.get_tube(store, t.label) is None:
            records.add_tube(store, t.label, t.tube_type, t.owner,
                             notes=CUSTOMERS[t.owner].split(",")[0])


SIDE_BY_SIDE = max(2, min(4, os.cpu_count() or 1))  # simulated testers at once
TESTER = {"serial": "QW01"}  # the shop has one tester; every visit uses it


def _calibrate(state_dir: Path) -> dict:
    """The shop calibrates its (simulated) tester first: socket empty, then a
    4.7 ohm reference in each section; the result stays on the board."""
    from ..tester.calibration import Reference, fixture_testers, run
    url = demo_url(dict(TESTER, state_dir=str(state_dir)))
    with fixture_testers(lambda step: with_load(url, 4.7 if step == "reference" else None)) \
            as get_tester:
        return run(get_tester, supply_v=6.3, meter_tol=0.005, ref=Reference(4.7, 0.01))


def run_demo(db_path: Path, progress=None) -> dict:
    """Calibration, earlier visits, then today's captures, into a fresh
    database at db_path. Returns today's summaries and every tube's
    assessment."""
    if db_path.exists():
        db_path.unlink()
    state_dir = db_path.with_name(db_path.stem + "-tester")
    shutil.rmtree(state_dir, ignore_errors=True)
    state_dir.mkdir(parents=True)
    if progress:
        progress(0, 0, None, "calibration")
    cal = _calibrate(state_dir)
    tester = dict(TESTER, state_dir=str(state_dir))
    today = datetime.now(timezone.utc)
    jobs = []
    for t in DEMO_TUBES:
        for n, (days, change) in enumerate(t.history):
            when = (today - timedelta(days=days)).isoformat(timespec="milliseconds")
            jobs.append((t, dict(t.sim, seed=t.sim["seed"] * 100 + n, **change, **tester), when))
    jobs += [(t, dict(t.sim, **tester), None) for t in DEMO_TUBES]
    rows = []

    def take(job):
        t, sim, when = job
        return capture_unstored(demo_url(sim), t.label, t.section,
                                {"range": t.range, "max_s": 40}, started_at=when)
    with Store(db_path) as store, ThreadPoolExecutor(SIDE_BY_SIDE) as pool:
        store.save_calibration(cal)
        _record(store)
        # the simulated testers run side by side (each its own micropython
        # process); captures are stored and analysed in order as they come
        for n, ((t, sim, when), raw) in enumerate(zip(jobs, pool.map(take, jobs)), 1):
            if progress:
                progress(n, len(jobs), t, when)
            store_or_keep(store, raw, None, None, STORE_WAIT_S)
            raw.analysis = analyze_after_storing(store, raw)
            if when is None:
                s = summary(raw)
                s.update(type=t.tube_type, customer=t.owner)
                rows.append(s)
        stored = {r["uuid"]: r for r in store.list_captures()}
        tubes = scoring.assess_fleet(store, config.load())
    for r in rows:
        r["stored_bytes"] = stored[r["uuid"]]["sample_bytes"]
    return {"captures": rows, "tubes": tubes, "calibration": cal}
