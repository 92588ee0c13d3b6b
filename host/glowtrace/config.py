"""Scoring settings (data/scoring.toml, documented there), with the user's
own file merged over them: --config FILE, $GLOWTRACE_SCORING, or
~/.config/glowtrace/scoring.toml."""

import copy
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
    except (OSError, tomllib.TOMLDecodeError) as e:
        raise GlowtraceError(f"cannot read scoring settings {path}: {e}") from None


def load(path: str | Path | None = None) -> dict:
    cfg = _read(DEFAULTS)
    extra = Path(path) if path else user_file()
    if path or extra.exists():
        cfg = _merge(cfg, _read(extra))
    check(cfg, str(extra))
    return cfg


def check(cfg: dict, where: str) -> None:
    def need(ok: bool, what: str):
        if not ok:
            raise GlowtraceError(f"scoring settings ({where}): {what}")
    need(int(cfg["baseline"]["count"]) >= 1, "baseline.count must be at least 1")
    ch = cfg["charts"]
    need(0 < ch["ewma_lambda"] <= 1, "charts.ewma_lambda must be in (0, 1]")
    need(ch["cusum_h"] > 0 and ch["cusum_k"] >= 0, "charts.cusum_h > 0 and cusum_k >= 0")
    need(0 < ch["trend_p"] < 1, "charts.trend_p must be in (0, 1)")
    for m in METRICS:
        need(cfg["noise_floor"].get(m, 0) > 0, f"noise_floor.{m} must be positive")
        lim = cfg["limits"].get(m, {})
        need(lim.get("direction") in ("up", "down", "both"),
             f"limits.{m}.direction must be up, down or both")
    need(isinstance(cfg.get("grades"), list) and cfg["grades"], "at least one [[grades]]")
    for g in cfg["grades"]:
        need(bool(g.get("name")), "every grade needs a name")
