"""`glowtrace demo`: an invented repair shop's morning at the bench, captured
through the simulated tester (the real firmware under micropython) into a demo
database. Shop, customers and tube labels are invented for this project."""

from dataclasses import dataclass
from pathlib import Path
from urllib.parse import urlencode

from .convert import summary
from .procedure import run_capture
from .store import Store

SHOP = "Kestrel Street Valve Bench (an invented repair shop)"


@dataclass(frozen=True)
class DemoTube:
    label: str
    tube_type: str
    customer: str
    section: str
    sim: dict
    range: str = "low"


DEMO_TUBES = [
    DemoTube("KS-0117-V1", "12AX7", "Orla Venn, practice amplifier", "AB",
             {"tube": "12AX7", "serial": "0117", "ambient_c": 21.5, "seed": 11}),
    DemoTube("KS-0117-V2", "12AX7", "Orla Venn, practice amplifier", "A",
             {"tube": "12AX7", "serial": "0117", "ambient_c": 21.6, "seed": 12,
              "flash_b": 0.12, "light": 1}),
    DemoTube("KS-0117-V2", "12AX7", "Orla Venn, practice amplifier", "B",
             {"tube": "12AX7", "serial": "0117", "ambient_c": 21.6, "seed": 13,
              "flash_b": 0.12, "light": 1}),
    DemoTube("KS-0122-V5", "6V6", "Marek Doyle-Ashby, hi-fi amplifier", "A",
             {"tube": "6V6", "serial": "0122", "ambient_c": 22.4, "seed": 21}),
    DemoTube("KS-0122-V7", "5U4GB", "Marek Doyle-Ashby, hi-fi amplifier", "A",
             {"tube": "5U4GB", "serial": "0122", "ambient_c": 22.4, "seed": 22},
             range="high"),
    DemoTube("KS-0130-V3", "12BA6", "Juniper Hall radio club, table radio", "A",
             {"tube": "12BA6", "serial": "0130", "ambient_c": 19.8, "seed": 31}),
]


def demo_url(t: DemoTube) -> str:
    return "glowsim://?" + urlencode(t.sim)


def run_demo(db_path: Path, progress=None) -> list[dict]:
    """Capture every demo tube into a fresh database at db_path; returns one
    summary per stored capture."""
    if db_path.exists():
        db_path.unlink()
    rows = []
    with Store(db_path) as store:
        for n, t in enumerate(DEMO_TUBES, 1):
            if progress:
                progress(n, len(DEMO_TUBES), t)
            raw = run_capture(demo_url(t), store, t.label, t.section,
                              {"range": t.range, "max_s": 40},
                              tube_type=t.tube_type, notes=t.customer)
            s = summary(raw)
            s.update(type=t.tube_type, customer=t.customer)
            rows.append(s)
        stored = {r["uuid"]: r for r in store.list_captures()}
    for r in rows:
        r["stored_bytes"] = stored[r["uuid"]]["sample_bytes"]
    return rows
