"""Scoring settings (data/scoring.toml, documented there), with the user's
own file merged over them: --config FILE, $GLOWTRACE_SCORING, or
~/.config/glowtrace/scoring.toml."""

import copy
import math
import tomllib
from pathlib import Path

from . import paths
from .errors import GlowtraceError

DEFAULTS = Path(__file__).resolve().parent / "data" / "scoring.toml"
# the figures a tube is judged on: its own, at its rated heater voltage from a
# stiff supply where the bench could have moved them (analysis 2.0)
METRICS = ("cold_resistance_20c_ohm", "rated_hot_current_a", "rated_inrush_ratio",
           "rated_warmup_90_s", "rated_settle_1pct_s", "series_warmup_s", "flash_index")


def _merge(base: dict, over: dict) -> dict:
    out = copy.deepcopy(base)
    for k, v in over.items():
        if isinstance(v, dict) and isinstance(out.get(k), dict):
            out[k] = _merge(out[k], v)
        else:
            out[k] = v
    return out


def user_file() -> Path:
    return paths.user_config_file("GLOWTRACE_SCORING", "scoring.toml")


def _read(path: Path) -> dict:
    try:
        return tomllib.loads(path.read_text())
    except FileNotFoundError:
        raise GlowtraceError(f"no scoring settings file {path}") from None
    except IsADirectoryError:
        raise GlowtraceError(f"scoring settings {path} is a directory, not a file") from None
    except (OSError, UnicodeDecodeError, tomllib.TOMLDecodeError) as e:
        raise GlowtraceError(f"cannot read scoring settings {path}: {e}") from None


def load(path: str | Path | None = None) -> dict:
    defaults = _read(DEFAULTS)
    cfg = defaults
    extra = Path(path) if path else user_file()
    if path or extra.exists():
        cfg = _merge(cfg, _read(extra))
    check(cfg, str(extra), defaults)
    return cfg


def _kind(value) -> str:
    if isinstance(value, bool):
        return "true or false"
    if isinstance(value, (int, float)):
        return "a number"
    if isinstance(value, str):
        return "text"
    if isinstance(value, dict):
        return "a table"
    return "a list" if isinstance(value, list) else type(value).__name__


def _check_kinds(default, value, key: str, need) -> None:
    """Every setting the built-in file has must keep its kind in the user's
    file (a number stays a finite number, text stays text, a table a
    table), so a typing slip is one clear line, not a crash later."""
    want, got = _kind(default), _kind(value)
    need(want == got, f"{key} must be {want}, not {value!r}")
    if got == "a number":
        need(math.isfinite(value), f"{key} must be a finite number, not {value!r}")
    elif got == "a table":
        for k, d in default.items():
            if k in value:
                _check_kinds(d, value[k], f"{key}.{k}", need)
    elif got == "a list" and default and isinstance(default[0], dict):
        fields = {k: v for item in default for k, v in item.items()}
        for n, item in enumerate(value, 1):
            need(isinstance(item, dict), f"{key} entry {n} must be a table")
            for k, v in item.items():
                if k in fields:
                    _check_kinds(fields[k], v, f"{key}[{n}].{k}", need)


def check(cfg: dict, where: str, defaults: dict) -> None:
    """Every value of cfg of the kind the built-in defaults have, and in range."""
    def need(ok: bool, what: str):
        if not ok:
            raise GlowtraceError(f"scoring settings ({where}): {what}")
    for k, d in defaults.items():
        _check_kinds(d, cfg.get(k), k, need)
    need(int(cfg["baseline"]["count"]) >= 1, "baseline.count must be at least 1")
    need(cfg["calibration"]["max_age_days"] > 0, "calibration.max_age_days must be positive")
    ch = cfg["charts"]
    need(0 < ch["ewma_lambda"] <= 1, "charts.ewma_lambda must be in (0, 1]")
    need(ch["cusum_h"] > 0 and ch["cusum_k"] >= 0, "charts.cusum_h > 0 and cusum_k >= 0")
    need(0 < ch["trend_p"] < 1, "charts.trend_p must be in (0, 1)")
    for m in METRICS:
        floor = cfg["noise_floor"].get(m, 0)
        need(_kind(floor) == "a number" and floor > 0, f"noise_floor.{m} must be positive")
        lim = cfg["limits"].get(m, {})
        need(isinstance(lim, dict) and lim.get("direction") in ("up", "down", "both"),
             f"limits.{m}.direction must be up, down or both")
        for k in ("change", "absolute"):
            if k in lim:
                need(_kind(lim[k]) == "a number" and math.isfinite(lim[k]) and lim[k] > 0,
                     f"limits.{m}.{k} must be a positive number")
    need(cfg["grades"] != [], "at least one [[grades]]")
    for g in cfg["grades"]:
        need(isinstance(g.get("name"), str) and g["name"].strip() != "",
             "every grade needs a name")
