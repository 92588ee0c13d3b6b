"""Fleet scoring (judgement/fleet.py, the whole fleet in arrays) gives every
tube the same statuses, flags, reasons and figures as scoring it alone
(score_metric, one tube section at a time)."""

import json
import math
import random
import uuid as uuidlib
from datetime import datetime, timedelta, timezone

import pytest

from glowtrace import config
from glowtrace.analysis import ANALYSIS_VERSION
from glowtrace.judgement import scoring
from glowtrace.logbook.store import Store, metric_rows

TYPES = [("12AX7", 6.2, 0.15), ("EL84", 1.3, 0.76), ("6V6", 2.4, 0.45)]


def _doc(r20, hot, flash, warm):
    m = {"cold_resistance_ohm": r20 * 1.01, "cold_resistance_20c_ohm": r20,
         "hot_current_a": hot, "hot_resistance_ohm": 6.3 / hot, "inrush_ratio": 6.7,
         "warmup_90_s": 9.9 * (1 + flash), "settle_1pct_s": 16.7, "cold_start_ok": not warm,
         "flash_index": flash, "rated_hot_current_a": hot, "rated_inrush_ratio": 6.2,
         "rated_warmup_90_s": 10.1 * (1 + flash), "rated_settle_1pct_s": 17.0,
         "series_warmup_s": round(23.5 * (1 + 2 * flash), 3), "ambient_c": 21.0,
         "warnings": ["not a cold start: still warm"] if warm else []}
    return {"analysis_version": ANALYSIS_VERSION, "sections": {"A": m}}


@pytest.fixture(scope="module")
def fleet_db(tmp_path_factory):
    """150 tubes of three types, 1 to 14 captures each: steady, drifting up
    or down, flashing more, with warm captures, repeated values (ties), a
    capture at the same instant as another, and a user's baseline."""
    rnd = random.Random(7)
    db = tmp_path_factory.mktemp("fleet") / "fleet.db"
    start = datetime(2024, 1, 1, tzinfo=timezone.utc)
    with Store(db) as store, store.transaction() as conn:
        for n in range(150):
            tname, r20_0, hot_0 = TYPES[n % len(TYPES)]
            label = f"FL-{n:03d}"
            conn.execute("INSERT INTO tubes (label, type, created_at) VALUES (?, ?, 'x')",
                         [label, tname])
            kind = n % 5  # steady, drifting up, down, flashing, repeated values
            r20 = r20_0 * rnd.gauss(1, 0.02)
            for k in range(1 + n % 14):
                u = str(uuidlib.UUID(int=rnd.getrandbits(128)))
                days = 30 * k + (0 if (kind == 4 and k == 3) else rnd.random())
                at = (start + timedelta(days=days if k != 4 or kind != 4 else 90)).isoformat()
                drift = {1: 0.01, 2: -0.01}.get(kind, 0.0) * k
                rr = r20 * (1 + drift) * (1.0 if kind == 4 else rnd.gauss(1, 0.002))
                doc = _doc(rr, hot_0 * math.sqrt(r20_0 / rr), 0.004 * k if kind == 3 else 0.0,
                           rnd.random() < 0.06)
                conn.execute("INSERT INTO captures (uuid, tube, section, started_at, "
                             "stored_at, complete, board_id, port, n_sets, n_blocks, params, "
                             "phases, end_record, trip_record, link) VALUES "
                             "(?, ?, 'A', ?, 'x', 1, 'b', 'p', 0, 0, '{}', '[]', '{}', "
                             "'null', '{}')", [u, label, at])
                conn.execute("INSERT INTO analyses VALUES (?, ?, 'x', ?)",
                             [u, ANALYSIS_VERSION, json.dumps(doc)])
                for row in metric_rows(u, ANALYSIS_VERSION, doc, label, at, True):
                    cols = ", ".join(row)
                    conn.execute(f"INSERT INTO section_metrics ({cols}) VALUES "
                                 f"({', '.join('?' * len(row))})", list(row.values()))
        # a user's baseline on one tube: scored the single-tube way in the fleet too
        first = [r[0] for r in conn.execute(
            "SELECT capture_uuid FROM section_metrics WHERE tube = 'FL-013' AND scored = 1 "
            "ORDER BY at LIMIT 2")]
        conn.execute("INSERT INTO baselines VALUES ('FL-013', 'A', ?, 'x')", [json.dumps(first)])
    return db


def _same(a, b, where=""):
    if isinstance(a, float) and isinstance(b, float):
        assert a == pytest.approx(b, rel=1e-9, abs=1e-12), where
    elif isinstance(a, dict):
        assert a.keys() == b.keys(), where
        for k in a:
            _same(a[k], b[k], f"{where}.{k}")
    elif isinstance(a, list):
        assert len(a) == len(b), where
        for k, (x, y) in enumerate(zip(a, b)):
            _same(x, y, f"{where}[{k}]")
    else:
        assert a == b, where


def test_fleet_scores_every_tube_as_it_scores_one(fleet_db):
    cfg = config.load()
    with Store(fleet_db) as store:
        fleet = scoring.assess_fleet(store, cfg)
        alone = [scoring.assess_tube(store, t["tube"], cfg) for t in fleet]
    assert len(fleet) == 150
    statuses = {a["status"] for a in fleet}
    assert {"drifting", "at limit", "steady", "no baseline yet"} <= statuses, statuses
    assert sum(a["drifting"] for a in fleet) >= 20  # the comparison covers flagged tubes
    for f, a in zip(fleet, alone):
        _same(f, a, f["tube"])
