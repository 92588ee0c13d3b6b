"""The capture procedure leaves the heater off and keeps what arrived."""

import pytest

from glowtrace.procedures.capture import UserInterrupt, run_capture
from glowtrace.logbook.store import Store
from simhelp import sim_url


def test_ctrl_c_mid_capture_stores_partial_and_confirms_heater_off(db_path):
    def impatient(raw):
        if len(raw.blocks) == 60:
            raise KeyboardInterrupt

    with Store(db_path) as s:
        with pytest.raises(UserInterrupt) as e:
            run_capture(sim_url(tube="12AX7"), s, "KS-5", "A", {}, progress=impatient)
        assert e.value.off_confirmed
        rows = s.list_captures()
        back = s.load_capture(rows[0]["uuid"])
    assert rows[0]["complete"] == 0 and rows[0]["incomplete_reason"] == "interrupted by the user"
    assert len(back.blocks) >= 60


def test_link_dropped_mid_capture_is_recorded(db_path):
    """The tester vanishes (USB unplugged): stored incomplete, reason given."""
    def unplug(raw):
        if len(raw.blocks) == 40:
            progress.port.sim.proc.kill()

    class progress:
        port = None

    import glowtrace.tester.driver as proc  # where the procedure's port is opened
    real_open = proc.open_port

    def spying_open(url):
        progress.port = real_open(url)
        return progress.port
    proc.open_port = spying_open
    try:
        with Store(db_path) as s:
            # paced (20 x real time): a flat-out simulator could put the whole
            # capture in the pty's buffer before the host reads 40 blocks
            raw = run_capture(sim_url(pace=20), s, "KS-6", "A", {}, progress=unplug)
            row = s.list_captures()[0]
    finally:
        proc.open_port = real_open
    assert not raw.complete and "link lost" in raw.incomplete_reason
    assert row["complete"] == 0 and row["n_sets"] > 0
