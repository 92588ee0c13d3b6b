"""How a capture and its figures read on the terminal: labels and units for
every analysis figure, and the one rendering used by `capture`, `show` and
`analyze`, so the same figure reads the same everywhere."""

from rich.text import Text

from . import console as ui
from .tables import Col, fit, hanging, pairs

# analysis keys -> (label, unit); order is the order shown
FIGURES = {
    "peak_current_a": ("peak current", "A"),
    "cold_resistance_ohm": ("cold resistance, at the test", "ohm"),
    "cold_resistance_20c_ohm": ("cold resistance at 20 C", "ohm"),
    "hot_current_a": ("hot current", "A"),
    "hot_resistance_ohm": ("hot resistance", "ohm"),
    "hot_power_w": ("hot power", "W"),
    "hot_cold_ratio": ("hot / cold resistance", "x"),
    "inrush_ratio": ("inrush: peak / hot current", "x"),
    "warmup_50_s": ("warm-up to 50 %", "s"),
    "warmup_90_s": ("warm-up to 90 %", "s"),
    "settle_1pct_s": ("hot current within 1 %, from switch-on", "s"),
    "settling_181_s": ("settling time, IEEE 181 (1 % of amplitude)", "s"),
    "cold_start_ok": ("cold start", ""),
    "flash_index": ("flash index", ""),
    "light_overshoot": ("light peak / settled", "x"),
    "rated_peak_current_a": ("peak at rated voltage, stiff supply", "A"),
    "rated_hot_current_a": ("hot current at rated voltage", "A"),
    "rated_inrush_ratio": ("inrush at rated voltage, 20 C (over hot current)", "x"),
    "rated_warmup_90_s": ("warm-up to 90 % at rated voltage", "s"),
    "rated_settle_1pct_s": ("hot-current settling (1 %) at rated voltage", "s"),
    "rated_basis": ("rated-voltage figures from", ""),
    "series_warmup_s": ("series-string warm-up (to 80 %)", "s"),
    "hot_wire_temperature_k": ("hot wire temperature (mean)", "K"),
    "hot_wire_temperature_u_k": ("its uncertainty (tungsten tables)", "K"),
    "rated_volts": ("rated volts (section)", "V"),
    "rated_amps": ("rated amps (section)", "A"),
    "ambient_c": ("room temperature", "C"),
    "heater_fault": ("heater fault", ""),
    "not_judged": ("not judged", ""),
    "analysis_version": ("analysis version", ""),
    "type": ("type", ""),
}
NOT_FIGURES = ("warnings", "thermal_model")


def figures_table(columns: dict, title: str | None = None, digits: int = 5) -> None:
    """Every figure the analysis gave, one column per entry of columns
    (header -> figures: "section A", or "value" for one curve), with label,
    unit and the JSON key (left out first when the terminal is narrow)."""
    heads = list(columns)
    keys = [k for k in FIGURES if any(k in columns[h] for h in heads)]
    keys += [k for h in heads for k in columns[h]
             if k not in FIGURES and k not in NOT_FIGURES and k not in keys]
    cols = [Col("figure"), *[Col(h, justify="right") for h in heads], Col("unit"),
            Col("JSON key", priority=1)]
    rows = []
    for k in keys:
        label, unit = FIGURES.get(k, (k, ""))
        rows.append([label, *[ui.fmt(columns[h].get(k), digits) for h in heads], unit, k])
    fit(ui.out, cols, rows, title=title, note_dropped=False)


def warnings(lines: list[str]) -> None:
    """Warnings on stderr, each wrapping under itself."""
    if lines:
        hanging(ui.err, [Text(w, style=ui.WARN) for w in lines], bullet="! ")


def _when(at: str | None) -> str:
    return at[:19].replace("T", " ") + " UTC" if at else "-"


def calibration_line(cal: dict | None) -> str:
    if not cal or cal.get("source") != "calibrated":
        return "none: nominal front-end numbers"
    ref = cal.get("reference") or {}
    parts = [_when(cal.get("at")), f"calibrated on {cal.get('board', 'the tester')}"]
    if ref.get("ohms"):
        parts.append(f"against {ref['ohms']:g} ohm ({100 * ref.get('tolerance', 0):g} %)")
    if cal.get("supply_v"):
        parts.append(f"supply read as {cal['supply_v']:g} V")
    return ", ".join(parts)


def gains_table(cal: dict | None) -> None:
    if not cal or not cal.get("channels"):
        return
    rows = []
    for ch, v in cal["channels"].items():
        for rng, g in (v.items() if "gain" not in v else [("-", v)]):
            rows.append([ch, rng, f"{g['gain']:.5f}", f"{g['offset_codes']:.2f}",
                         f"{100 * g['u_gain']:.2f} %"])
    fit(ui.out, [Col("channel"), Col("range"), Col("gain", justify="right"),
                 Col("offset, codes", justify="right"),
                 Col("uncertainty (k=1)", justify="right", priority=1)], rows,
        title="calibration gains")


def capture_summary(s: dict, details: bool = False, figures: dict | None = None) -> None:
    """A stored capture: what it is, how it ended, its raw facts, then the
    analysis's figures per section (figures: every figure per section, else
    the summary's key figures) and every warning."""
    secs = s.get("section") or ""
    rows = [("capture", s["uuid"]), ("tube", f"{s.get('tube') or '-'}, section "
                                             f"{' and '.join(secs) or '-'}"),
            ("started", _when(s.get("started_at")))]
    if s.get("source") == "import":
        rows.append(("source", f"imported from {s.get('file')}"))
    else:
        end = s.get("end_reason") or "no end record"
        if s.get("trip"):
            end += f" (trip: {s['trip']})"
        if s.get("duration_s") is not None:
            end += f" after {s['duration_s']:g} s"
        rows.append(("end", end))
        rows.append(("whole", "yes" if s.get("complete", True) else
                     Text(f"no: {s.get('incomplete_reason')}", style=ui.WARN)))
    rows.append(("samples", f"{s.get('sets', s.get('n_sets'))} sets"))
    if s.get("ambient_c") is not None:
        rows.append(("room temperature", f"{s['ambient_c']:g} C"))
    if s.get("supply_v") is not None:
        rows.append(("supply", f"{s['supply_v']:g} V (median after switch-on)"))
    for sec in secs:
        if f"peak_a_{sec}" in s:
            end_a = s.get(f"final_a_{sec}")
            rows.append((f"section {sec} current",
                         f"peak {s[f'peak_a_{sec}']:g} A, at the end "
                         + (f"{end_a:g} A" if end_a is not None else "- (cut short)")))
    if s.get("glow_peak_over_settled") is not None:
        low = "light" in (s.get("clipped_channels") or [])
        rows.append(("light peak / settled", f"{'at least ' if low else ''}"
                                             f"{s['glow_peak_over_settled']:g}x (raw light channel)"))
    if details:
        if s.get("board"):
            rows.append(("tester", f"{s['board']}, firmware {s.get('firmware')}"))
        if "calibration" in s:
            rows.append(("calibration", calibration_line(s["calibration"])))
        p = s.get("params") or {}
        if p:
            rows.append(("settings", f"range {p.get('range', 'low')}, longest "
                                     f"{p.get('max_s', '-')} s, end when within "
                                     f"{100 * p.get('settle_band', 0):g} % of the final "
                                     f"current for {p.get('settle_hold_s', '-')} s"))
        link = s.get("link") or {}
        if link:
            rows.append(("link", f"{link.get('frames')} frames, {link.get('bad_frames')} bad, "
                                 f"{link.get('lost_frames')} lost, "
                                 f"{link.get('bytes_in', 0) / 1000:.1f} kB received"))
    if s.get("database"):
        rows.append(("stored in", s["database"]))
    pairs(ui.out, rows)
    if details:
        gains_table(s.get("calibration"))
    analysis = figures or s.get("analysis") or {}
    if analysis:
        figures_table({f"section {sec}": m for sec, m in analysis.items()}, title="analysis",
                      digits=4)
        if s.get("section_imbalance") is not None:
            ui.out.print(f"section imbalance (hot current): {s['section_imbalance']:.3g}")
    warnings([f"section {x}: {w}" for x, m in analysis.items() for w in m.get("warnings", [])]
             + list(s.get("warnings", [])))
