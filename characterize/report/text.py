"""Human-readable summary of a result (plain text, units on every figure)."""

from __future__ import annotations

from typing import Any


def summary(doc: dict[str, Any]) -> str:
    """A short summary from a result document (see docs/result-schema.md)."""
    fit = doc["fit"]
    air = doc["air"]
    inp = doc["input"]
    lines = [
        f"{inp['recording']}: {inp['method']}, channels inside={inp['inside_channel']} "
        f"outside={inp['outside_channel']}, {inp['sample_rate_hz']:g} Hz",
        f"  f0   = {fit['f0_hz']:.3f} ± {fit['f0_stderr_hz']:.3f} Hz",
        f"  Q    = {fit['q']:.2f} ± {fit['q_stderr']:.2f}",
        f"  gain = {fit['gain']:.4f} (inside/outside), delay = "
        f"{1e6 * fit['delay_s']:.1f} ± {1e6 * fit['delay_stderr_s']:.1f} µs",
        f"  fit band {fit['band_hz'][0]:.1f} to {fit['band_hz'][1]:.1f} Hz, "
        f"{fit['n_points']} points, reduced chi-square {fit['reduced_chi2']:.2f}",
        f"  air  {air['temperature_c']:.1f} °C, RH {100 * air['relative_humidity']:.0f} %, "
        f"{air['pressure_pa'] / 1000:.2f} kPa: c = {air['speed_of_sound_m_s']:.2f} m/s",
    ]
    pred, der = doc.get("prediction"), doc.get("derived")
    if pred is not None and der is not None:
        rel = fit["f0_hz"] / pred["f0_hz"] - 1
        lines += [
            f"  predicted f0 = {pred['f0_hz']:.2f} Hz (measured {100 * rel:+.2f} %), "
            f"L_eff = {1000 * pred['effective_neck_length_m']:.2f} mm",
            f"  measured L_eff = {1000 * der['effective_neck_length_m']:.2f} ± "
            f"{1000 * der['effective_neck_length_stderr_m']:.2f} mm, end correction "
            f"{1000 * der['end_correction_m']:.2f} mm = "
            f"{der['end_correction_over_radius']:.2f} neck radii",
        ]
    flags = doc.get("flags", [])
    if flags:
        lines.append("  flags:")
        lines += [f"    [{f['severity']}] {f['code']}: {f['message']}" for f in flags]
    else:
        lines.append("  flags: none")
    return "\n".join(lines)
