"""The tube catalogue: ratings against data sheets and its own consistency."""

import pytest

from glowtrace import catalogue
from glowtrace.errors import GlowtraceError

REQUIRED = ("12AX7 12AU7 12AT7 5751 6DJ8 6922 6SN7 6V6 6L6GC EL34 EL84 KT88 6550 300B "
            "2A3 5AR4 5U4GB 5Y3 12AV6 12BA6 12BE6 50C5 35W4 6AU6 6BA6 6AQ5 6X4 EF86 ECL82").split()

# Heater ratings from manufacturers' data sheets, TYPED FROM MEMORY for this
# test (volts, amps; for centre-tapped types the parallel rating).
DATASHEET = {"12AX7": (6.3, 0.3), "12AU7": (6.3, 0.3), "5751": (6.3, 0.35),
             "6DJ8": (6.3, 0.365), "6922": (6.3, 0.3), "6SN7": (6.3, 0.6), "6V6": (6.3, 0.45),
             "6L6GC": (6.3, 0.9), "EL34": (6.3, 1.5), "EL84": (6.3, 0.76), "KT88": (6.3, 1.6),
             "300B": (5.0, 1.2), "2A3": (2.5, 2.5), "5AR4": (5.0, 1.9), "5U4GB": (5.0, 3.0),
             "5Y3": (5.0, 2.0), "50C5": (50.0, 0.15), "35W4": (35.0, 0.15),
             "EF86": (6.3, 0.2), "ECL82": (6.3, 0.78)}


@pytest.fixture(scope="module")
def cat():
    return catalogue.load()


def test_required_types_present(cat):
    for name in REQUIRED:
        assert cat.get(name).name == name


def test_ratings_against_data_sheets(cat):
    for name, (v, a) in DATASHEET.items():
        t = cat.get(name)
        r = t.parallel or t.heater
        assert (r.volts, r.amps) == (v, a), name


def test_centre_tapped_types_are_consistent(cat):
    for name in cat.names():
        t = cat.get(name)
        if t.series:
            assert t.series.amps * 2 == pytest.approx(t.parallel.amps), name
            assert t.series.volts == pytest.approx(2 * t.parallel.volts), name
            assert t.series.watts == pytest.approx(t.parallel.watts), name
            assert t.centre_tap_pin is not None
            sec = t.section_rating()
            assert (sec.volts, sec.amps) == (t.parallel.volts, t.parallel.amps / 2)


def test_series_string_set_adds_up_to_the_mains(cat):
    # common practice for 150 mA series-string radios: the five-tube set of
    # 12BE6, 12BA6, 12AV6, 50C5 and 35W4 has heaters adding up to about the
    # 117-120 V mains it runs from, all at 0.15 A with controlled warm-up
    kit = [cat.get(n) for n in ("12BE6", "12BA6", "12AV6", "50C5", "35W4")]
    assert {t.heater.amps for t in kit} == {0.15}
    assert 115 <= sum(t.heater.volts for t in kit) <= 125
    assert all(t.controlled_warmup_s == 11 for t in kit)


def test_aliases(cat):
    for alias, name in (("ECC83", "12AX7"), ("ecc82", "12AU7"), ("6CA7", "EL34"),
                        ("GZ34", "5AR4"), ("6BQ5", "EL84"), ("E88CC", "6922")):
        assert cat.get(alias).name == name


def test_unknown_type_suggests(cat):
    with pytest.raises(catalogue.UnknownType, match="did you mean 12AX7"):
        cat.get("12AX8")


def test_user_types_merge_over_builtin(tmp_path, monkeypatch):
    f = tmp_path / "mine.toml"
    f.write_text('[types.6J5]\naliases = ["L63"]\nbase = "octal"\n'
                 'heater = {volts = 6.3, amps = 0.3}\nsource = "my own data sheet"\n'
                 '[types.EL34]\nheater = {volts = 6.3, amps = 1.45}\n')
    monkeypatch.setenv("GLOWTRACE_TUBES", str(f))
    cat = catalogue.load()
    assert cat.get("L63").heater.amps == 0.3
    assert cat.get("EL34").heater.amps == 1.45
    assert cat.get("12AX7").series.amps == 0.15


@pytest.mark.parametrize("text,msg", [
    ("[types.X1]\nheater = {volts = 6.3}\n", "numeric volts and amps"),
    ("[types.X1]\nbase = 'B9A'\n", "either heater"),
    ("[types.X1\n", "cannot read"),
])
def test_bad_user_file_gets_a_clear_error(tmp_path, monkeypatch, text, msg):
    f = tmp_path / "bad.toml"
    f.write_text(text)
    monkeypatch.setenv("GLOWTRACE_TUBES", str(f))
    with pytest.raises(GlowtraceError, match=msg):
        catalogue.load()
