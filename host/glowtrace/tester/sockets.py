"""Which socket of the tester, wired how, takes a tube type's heater
(fixtures_hw/sockets.json; the board lists the sockets fitted in its
front-end numbers as `sockets_fitted`)."""

import json
from dataclasses import dataclass
from functools import lru_cache

from .. import paths
from ..catalogue import TubeType
from ..errors import GlowtraceError


class WiringError(GlowtraceError):
    pass


@dataclass(frozen=True)
class Wiring:
    socket: str
    wiring: str
    supply_pin: int
    section_pins: dict      # section -> pin
    supply_v: float         # what to set the heater supply to
    section_a: float        # rated current per section

    def describe(self) -> str:
        secs = ", ".join(f"pin {p} to section {s}" for s, p in self.section_pins.items())
        return (f"{self.socket} socket, wiring '{self.wiring}': pin {self.supply_pin} to the "
                f"heater supply, {secs}; set the supply to {self.supply_v:g} V")


@lru_cache(maxsize=1)
def bases() -> dict:
    with open(paths.require(paths.FIXTURES_DIR / "sockets.json")) as f:
        return json.load(f)["bases"]


def wiring_for(t: TubeType, fitted: list[str] | None = None,
               supply_max_v: float | None = None) -> Wiring:
    """The socket and wiring for this type's heater, or a WiringError that
    says why none fits."""
    if t.base not in bases():
        raise WiringError(f"no socket definition for base {t.base!r} of {t.name}")
    if fitted is not None and t.base not in fitted:
        raise WiringError(f"a {t.name} needs a {t.base} socket; this tester has "
                          f"{', '.join(fitted) or 'none'}")
    pins = set(t.heater_pins)
    sec = t.section_rating()
    need = sec.volts
    if supply_max_v is not None and need > supply_max_v:
        raise WiringError(f"a {t.name} heater needs {need:g} V, above this tester's "
                          f"{supply_max_v:g} V supply limit: " + variant_hint(need))
    for name, w in bases()[t.base]["wirings"].items():
        secs = {s: int(p) for s, p in w["sections"].items()}
        if t.centre_tapped and w["supply_pin"] == t.centre_tap_pin and set(secs.values()) == pins:
            return Wiring(t.base, name, w["supply_pin"], secs, t.parallel.volts, sec.amps)
        if not t.centre_tapped and len(secs) == 1 and {w["supply_pin"], *secs.values()} == pins:
            return Wiring(t.base, name, w["supply_pin"], secs, t.heater.volts, sec.amps)
    raise WiringError(f"no wiring of the {t.base} socket reaches the {t.name}'s heater pins "
                      f"{'-'.join(str(p) for p in t.heater_pins)}")


@lru_cache(maxsize=1)
def variant_limits() -> dict:
    """The reference tester's variants and the supply each takes, V."""
    out = {}
    for name, path in paths.FRONTEND_VARIANTS.items():
        with open(paths.require(path)) as f:
            out[name] = json.load(f)["limits"]["supply_v_max"]
    return out


def variant_for(volts: float) -> str | None:
    """The smallest variant whose supply takes these volts, or None."""
    fits = [n for n, v in sorted(variant_limits().items(), key=lambda kv: kv[1]) if volts <= v]
    return fits[0] if fits else None


def variant_hint(volts: float) -> str:
    v = variant_for(volts)
    if v is None:
        top = max(variant_limits().values())
        return (f"no variant of the reference tester takes it ({top:g} V at most, below "
                "the usual 60 V DC limit of safety extra-low voltage)")
    return (f"the {v} variant of the tester takes it (schematics/BUILD.md, "
            f"`glowtrace firmware install --variant {v}`)")


# a cold heater draws up to about 7.2 times its rated current at switch-on
# (published range 2.7-7.2 x, audioXpress Sept. 2004)
INRUSH_MAX_X = 7.2


def range_for(t: TubeType, frontend: dict) -> str:
    """The current range for this type: low unless its inrush can reach the
    low range's over-current trip (95 % of full scale)."""
    low = frontend["current_ranges"]["low"]
    full_scale = frontend["adc"]["vref_v"] * low["amps_per_volt"]
    return "high" if t.section_rating().amps * INRUSH_MAX_X > 0.95 * full_scale else "low"


def check_for_tester(t: TubeType, sections: str, frontend: dict) -> Wiring:
    """The wiring a capture of these sections needs, on the tester whose
    front-end numbers are given (sockets fitted, supply limit)."""
    w = wiring_for(t, frontend.get("sockets_fitted"),
                   frontend.get("limits", {}).get("supply_v_max"))
    missing = [s for s in sections if s not in w.section_pins]
    if missing:
        raise WiringError(f"the {t.name} wired as '{w.wiring}' has section(s) "
                          f"{', '.join(w.section_pins)}; there is no section "
                          f"{', '.join(missing)}")
    return w
