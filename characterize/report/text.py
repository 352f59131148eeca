"""Human-readable summary of a result (plain text, units on every figure)."""

from __future__ import annotations

from collections.abc import Sequence
from typing import Any


def flag_lines(flags: Sequence[Any], none: bool = False) -> list[str]:
    """The '  flags:' block of a text summary; ``flags`` are Flag objects or their
    dicts. With ``none``, an empty list prints '  flags: none'."""
    if not flags:
        return ["  flags: none"] if none else []
    rows = [f if isinstance(f, dict) else f.to_dict() for f in flags]
    return ["  flags:"] + [f"    [{f['severity']}] {f['code']}: {f['message']}" for f in rows]


def pm(value: float, stderr: float | None, decimals: int = 2) -> str:
    """'243.2094 ± 0.0016': value and error rounded to two significant digits of the
    error (report.values.pm); ``decimals`` only when there is no error."""
    from .values import pm as _pm

    return _pm(value, stderr, decimals)


def summary(doc: dict[str, Any]) -> str:
    """A short summary from a result document (see docs/result-schema.md): the
    fit with values rounded to their errors, what gain and delay are, the raw and
    corrected values when a correction was applied, the drive level from a
    calibrated channel, the prediction (f0 and Q with its range), the object and
    the flags."""
    from .values import (
        DELAY_MEANING,
        GAIN_MEANING,
        correction_note,
        correction_rows,
        drive_caution,
        drive_rows,
        length_sensitivity_text,
        object_rows,
        q_predicted_text,
    )

    fit = doc["fit"]
    air = doc["air"]
    inp = doc["input"]
    where = [inp["method"]]
    if inp.get("inside_channel") is not None:
        where.append(f"inside channel {inp['inside_channel']}")
    if inp.get("outside_channel") is not None:
        where.append(f"outside channel {inp['outside_channel']}")
    if inp.get("sample_rate_hz") is not None:
        where.append(f"{inp['sample_rate_hz']:g} Hz")
    lines = [
        f"{inp['recording']}: " + ", ".join(where),
        f"  f0   = {pm(fit['f0_hz'], fit['f0_stderr_hz'], 3)} Hz",
        f"  Q    = {pm(fit['q'], fit['q_stderr'])}",
    ]
    if fit.get("method") == "damped-sinusoid":
        decays = fit.get("decays", [])
        lines.append(f"  from {len(decays)} free decay(s) (damped-sinusoid fit, matrix-pencil "
                     "start values)")
    else:
        delay_err = (None if fit.get("delay_stderr_s") is None
                     else 1e6 * fit["delay_stderr_s"])
        lines += [
            f"  gain = {pm(fit['gain'], fit.get('gain_stderr'), 4)} ({GAIN_MEANING})",
            f"  delay = {pm(1e6 * fit['delay_s'], delay_err, 1)} µs ({DELAY_MEANING})",
            f"  fit band {fit['band_hz'][0]:.1f} to {fit['band_hz'][1]:.1f} Hz, "
            f"{fit['n_points']} points, reduced chi-square {fit['reduced_chi2']:.2f}"
            + ("" if fit.get("weighting") != "residuals" else " (errors from the residuals)"),
        ]
        if len(fit.get("modes") or []) > 1:
            lines += [f"  mode {k + 1}: f0 = {pm(m['f0_hz'], m['f0_stderr_hz'], 3)} Hz, "
                      f"Q = {pm(m['q'], m['q_stderr'])}"
                      for k, m in enumerate(fit["modes"])]
    coh = (doc.get("quality") or {}).get("coherence_min_in_band")
    if coh is not None:
        lines.append(f"  coherence in the fit band: lowest {coh:.3f}")
    note = correction_note(doc)
    if note:
        lines.append(f"  {note}")
    for q, raw, corr in correction_rows(doc):
        lines.append(f"    {q}: uncorrected {raw}, corrected {corr}")
    for label, value in drive_rows(doc):
        lines.append(f"  {label}: {value}")
    caution = drive_caution(doc)
    if caution:
        lines.append(f"  {caution}")
    lines += [
        f"  air  {air['temperature_c']:.1f} °C, RH {100 * air['relative_humidity']:.0f} %, "
        f"{air['pressure_pa'] / 1000:.2f} kPa: c = {air['speed_of_sound_m_s']:.2f} m/s",
    ]
    pred, der = doc.get("prediction"), doc.get("derived")
    if pred is not None and der is not None:
        rel = fit["f0_hz"] / pred["f0_hz"] - 1
        leff = pm(1000 * der["effective_neck_length_m"],
                  1000 * der["effective_neck_length_stderr_m"])
        lines += [
            f"  predicted f0 = {pred['f0_hz']:.2f} Hz (measured {100 * rel:+.2f} %), "
            f"L_eff = {1000 * pred['effective_neck_length_m']:.2f} mm",
        ]
        qt = q_predicted_text(pred, doc)
        if qt:
            lines.append(f"  predicted Q  = {qt}; measured {pm(fit['q'], fit['q_stderr'])}")
        lines.append(
            f"  measured L_eff = {leff} mm, end correction "
            f"{pm(1000 * der['end_correction_m'], 1000 * der['end_correction_stderr_m'])} mm = "
            f"{pm(der['end_correction_over_radius'], der.get('end_correction_over_radius_stderr'))}"
            " neck radii")
        lines.append("    (" + length_sensitivity_text(der["effective_neck_length_m"],
                                                     air["temperature_c"], "L_eff") + ")")
    obj_rows = object_rows(doc.get("object"))
    if obj_rows:
        lines.append("  object: " + "; ".join(f"{k} {v}" for k, v in obj_rows
                                              if k != "object")
                     if len(obj_rows) < 2 else
                     "  object " + obj_rows[0][1] + ": " +
                     "; ".join(f"{k} {v}" for k, v in obj_rows[1:]))
    lines += flag_lines(doc.get("flags", []), none=True)
    return "\n".join(lines)
