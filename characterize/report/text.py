"""Human-readable summary of a result (plain text, units on every figure)."""

from __future__ import annotations

from typing import Any


def flag_lines(flags: list[Any], none: bool = False) -> list[str]:
    """The '  flags:' block of a text summary; ``flags`` are Flag objects or their
    dicts. With ``none``, an empty list prints '  flags: none'."""
    if not flags:
        return ["  flags: none"] if none else []
    rows = [f if isinstance(f, dict) else f.to_dict() for f in flags]
    return ["  flags:"] + [f"    [{f['severity']}] {f['code']}: {f['message']}" for f in rows]


def pm(value: float, stderr: float | None, decimals: int = 2) -> str:
    """'7.67 ± 0.00031': the value to fixed decimals, the error to two significant
    digits (so a small error does not print as 0.00)."""
    if stderr is None:
        return f"{value:.{decimals}f}"
    return f"{value:.{decimals}f} ± {stderr:.2g}"


def summary(doc: dict[str, Any]) -> str:
    """A short summary from a result document (see docs/result-schema.md)."""
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
        lines += [
            f"  gain = {fit['gain']:.4f}, delay = {1e6 * fit['delay_s']:.1f} ± "
            f"{1e6 * (fit['delay_stderr_s'] or 0.0):.1f} µs",
            f"  fit band {fit['band_hz'][0]:.1f} to {fit['band_hz'][1]:.1f} Hz, "
            f"{fit['n_points']} points, reduced chi-square {fit['reduced_chi2']:.2f}"
            + ("" if fit.get("weighting") != "residuals" else " (errors from the residuals)"),
        ]
        if len(fit.get("modes") or []) > 1:
            lines += [f"  mode {k + 1}: f0 = {pm(m['f0_hz'], m['f0_stderr_hz'], 3)} Hz, "
                      f"Q = {pm(m['q'], m['q_stderr'])}"
                      for k, m in enumerate(fit["modes"])]
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
            f"  measured L_eff = {leff} mm, "
            f"end correction {1000 * der['end_correction_m']:.2f} mm = "
            f"{der['end_correction_over_radius']:.2f} neck radii",
        ]
    lines += flag_lines(doc.get("flags", []), none=True)
    return "\n".join(lines)
