"""The tube catalogue: heater ratings per type, with aliases.

Built-in data: data/tubes.toml (values typed from memory of data sheets; the
file says so). Users add or correct types in their own TOML file of the same
form: $GLOWTRACE_TUBES, else ~/.config/glowtrace/tubes.toml."""

import difflib
import math
import tomllib
from dataclasses import dataclass
from functools import lru_cache
from pathlib import Path

from . import paths
from .errors import GlowtraceError

BUILTIN = Path(__file__).resolve().parent / "data" / "tubes.toml"


class UnknownType(GlowtraceError):
    pass


@dataclass(frozen=True)
class Rating:
    volts: float
    amps: float

    @property
    def watts(self) -> float:
        return self.volts * self.amps


@dataclass(frozen=True)
class TubeType:
    name: str
    aliases: tuple = ()
    base: str | None = None
    heater: Rating | None = None       # single heater
    series: Rating | None = None       # centre-tapped, halves in series
    parallel: Rating | None = None     # centre-tapped, halves in parallel
    heater_pins: tuple = ()
    centre_tap_pin: int | None = None
    controlled_warmup_s: float | None = None
    filament: bool = False
    tungsten_k: float = 1.0
    hot_current_tolerance: float | None = None  # None: the scoring settings' default
    source: str = ""

    @property
    def centre_tapped(self) -> bool:
        return self.parallel is not None

    def section_rating(self) -> Rating:
        """Rating of what one tester section switches: half of a
        centre-tapped heater at its parallel voltage, else the whole heater."""
        if self.parallel is not None:
            return Rating(self.parallel.volts, self.parallel.amps / 2)
        return self.heater


def _number(x) -> bool:
    return isinstance(x, (int, float)) and not isinstance(x, bool) and math.isfinite(x)


def _rating(d, where: str) -> Rating | None:
    if d is None:
        return None
    if not (isinstance(d, dict) and _number(d.get("volts")) and _number(d.get("amps"))):
        raise GlowtraceError(f"{where}: a rating needs numeric volts and amps "
                             f"({{volts = V, amps = A}}), not {d!r}")
    r = Rating(float(d["volts"]), float(d["amps"]))
    if r.volts <= 0 or r.amps <= 0:
        raise GlowtraceError(f"{where}: volts and amps must be positive")
    return r


def _field(d: dict, key: str, kind, where: str, default=None):
    """d[key] if it is of the expected kind (text, number, list of text,
    list of numbers, true/false), else one clear error."""
    v = d.get(key, default)
    if v is None:
        return default
    ok = {"text": isinstance(v, str), "number": _number(v), "bool": isinstance(v, bool),
          "texts": isinstance(v, list) and all(isinstance(x, str) for x in v),
          "numbers": isinstance(v, list) and all(_number(x) for x in v)}[kind]
    if not ok:
        words = {"text": "text", "number": "a finite number", "bool": "true or false",
                 "texts": "a list of text", "numbers": "a list of numbers"}
        raise GlowtraceError(f"{where}: {key} must be {words[kind]}, not {v!r}")
    return v


def _parse(name: str, d, origin: str) -> TubeType:
    where = f"{origin}, type {name}"
    if not isinstance(d, dict):
        raise GlowtraceError(f"{where}: a type is a table ([types.{name}]), not {d!r}")
    t = TubeType(
        name=name, aliases=tuple(_field(d, "aliases", "texts", where, [])),
        base=_field(d, "base", "text", where),
        heater=_rating(d.get("heater"), where), series=_rating(d.get("series"), where),
        parallel=_rating(d.get("parallel"), where),
        heater_pins=tuple(_field(d, "heater_pins", "numbers", where, [])),
        centre_tap_pin=_field(d, "centre_tap_pin", "number", where),
        controlled_warmup_s=_field(d, "controlled_warmup_s", "number", where),
        filament=_field(d, "filament", "bool", where, False),
        tungsten_k=float(_field(d, "tungsten_k", "number", where, 1.0)),
        hot_current_tolerance=_field(d, "hot_current_tolerance", "number", where),
        source=_field(d, "source", "text", where, origin))
    if (t.heater is None) == (t.parallel is None):
        raise GlowtraceError(f"{where}: give either heater, or series and parallel")
    if (t.series is None) != (t.parallel is None):
        raise GlowtraceError(f"{where}: series and parallel go together")
    if not 0.3 <= t.tungsten_k <= 1.2:
        raise GlowtraceError(f"{where}: tungsten_k must be between 0.3 and 1.2")
    return t


class Catalogue:
    def __init__(self, types: dict):
        self.types = types
        self.index = {}
        for t in types.values():
            for n in (t.name, *t.aliases):
                self.index[n.upper()] = t.name

    @classmethod
    def from_files(cls, files) -> "Catalogue":
        types = {}
        for f in files:
            try:
                data = tomllib.loads(Path(f).read_text())
            except IsADirectoryError:
                raise GlowtraceError(f"tube catalogue {f} is a directory, not a file") from None
            except (OSError, UnicodeDecodeError, tomllib.TOMLDecodeError) as e:
                raise GlowtraceError(f"cannot read tube catalogue {f}: {e}") from None
            types_table = data.get("types", {})
            if not isinstance(types_table, dict):
                raise GlowtraceError(f"tube catalogue {f}: `types` must be tables of types "
                                     f"([types.12AX7] ...), not {types_table!r}")
            for name, d in types_table.items():
                types[str(name)] = _parse(str(name), d, str(f))
        return cls(types)

    def get(self, name: str) -> TubeType:
        key = self.index.get(name.strip().upper())
        if key is None:
            near = difflib.get_close_matches(name.upper(), list(self.index), n=3)
            hint = f" (did you mean {', '.join(near)}?)" if near else ""
            raise UnknownType(f"unknown tube type {name!r}{hint}; `glowtrace types` lists "
                              "them, and you can add your own (see README)")
        return self.types[key]

    def names(self) -> list[str]:
        return sorted(self.types)


def user_file() -> Path:
    return paths.user_config_file("GLOWTRACE_TUBES", "tubes.toml")


@lru_cache(maxsize=4)
def _load(user: str | None) -> Catalogue:
    files = [BUILTIN] + ([Path(user)] if user else [])
    return Catalogue.from_files(files)


def load() -> Catalogue:
    """The built-in catalogue with the user's own types merged over it."""
    u = user_file()
    return _load(str(u) if u.exists() else None)


def listing(cat: "Catalogue | None" = None) -> list[dict]:
    """Every type as a plain record (what `glowtrace types` shows)."""
    cat = cat or load()
    rows = []
    for name in cat.names():
        t = cat.get(name)
        sec = t.section_rating()
        rows.append({"type": t.name, "aliases": list(t.aliases), "base": t.base,
                     "series": [t.series.volts, t.series.amps] if t.series else None,
                     "parallel": [t.parallel.volts, t.parallel.amps] if t.parallel else None,
                     "heater": [t.heater.volts, t.heater.amps] if t.heater else None,
                     "section_volts": sec.volts, "section_amps": sec.amps,
                     "controlled_warmup_s": t.controlled_warmup_s, "filament": t.filament,
                     "source": t.source})
    return rows
