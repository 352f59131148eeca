"""Plots of the tuning studies: series lines, Q and f0 against level, force power laws.

Same look as :mod:`characterize.report.plots` (its palette and figure helpers);
matplotlib is imported inside those helpers only.
"""

from __future__ import annotations

from pathlib import Path
from typing import TYPE_CHECKING

import numpy as np

from .plots import PALETTE, _figure, _save, frequency_axis, legend_outside

if TYPE_CHECKING:
    from ..tuning import LevelStudy, PowerLawFit, SeriesFit

__all__ = ["series_plot", "levels_plot", "power_law_plot"]


def _title(ax: object, text: str) -> None:
    ax.set_title(text, fontsize=10, color=PALETTE["ink"], loc="left")  # type: ignore[attr-defined]


def series_plot(fit: SeriesFit, path: str | Path) -> Path:
    """1/f0^2 against the varied value with the weighted line (extended to its
    zero crossing for a trim series, where it meets -delta), outliers ringed,
    and the studentized residuals below."""
    trim = fit.vary == "neck-length"
    scale_x, xlabel = (1e3, "neck length L (mm)") if trim else (1e6, "filled volume v (mL)")
    x = np.array([p.value for p in fit.points]) * scale_x
    y = np.array(fit.inverse_f0_squared_s2) * 1e6  # ms^2
    sy = np.array(fit.inverse_f0_squared_stderr_s2) * 1e6
    t = np.array(fit.line.studentized)
    line = fit.line
    if trim and np.isfinite(fit.end_correction_m):
        x_lo = min(-fit.end_correction_m * scale_x, x.min())
    else:
        x_lo = x.min() - 0.05 * np.ptp(x)
    x_hi = x.max() + 0.05 * np.ptp(x)
    xx = np.linspace(x_lo, x_hi, 200)
    yy = line(xx / scale_x) * 1e6

    fig, (ax, ax_r) = _figure(2, [3, 1.2], (7.0, 5.4))
    ax.plot(xx, yy, color=PALETTE["fit"], lw=1.5, label="weighted line")
    ax.errorbar(x, y, yerr=sy, fmt="o", ms=4, color=PALETTE["ink"], ecolor=PALETTE["ink"],
                capsize=2, label=f"measured (f0 at c = {fit.reference_speed_of_sound_m_s:.2f} m/s)")
    out = np.isfinite(t) & (np.abs(t) > 3)
    if np.any(out):
        ax.plot(x[out], y[out], "o", ms=11, mfc="none", mec=PALETTE["fit"], label="outlier")
    if trim and np.isfinite(fit.end_correction_m):
        d_mm = fit.end_correction_m * 1e3
        ax.axvline(-d_mm, color=PALETTE["prediction"], ls="--", lw=1.1,
                   label=f"-δ = -{d_mm:.2f} ± {fit.end_correction_stderr_m * 1e3:.2f} mm")
        ax.axvline(0, color=PALETTE["muted"], lw=0.7)
        ax.axhline(0, color=PALETTE["muted"], lw=0.7)
        title = "trim series: 1/f0² = (4π²V/(S c²)) (L + δ)"
    else:
        title = "fill series: 1/f0² = (4π²L_eff/(S c²)) (V0 − v)"
    _title(ax, title)
    ax.set_ylabel("1/f0² (ms²)")
    ax_r.axhline(0, color=PALETTE["muted"], lw=0.8)
    for lim in (-3, 3):
        ax_r.axhline(lim, color=PALETTE["band"], lw=1.0)
    if np.any(np.isfinite(t)):
        ax_r.plot(x, t, "o", ms=4, color=PALETTE["ink"])
        ax_r.set_ylabel("studentized residual")
    else:
        ax_r.plot(x, np.array(line.normalized_residuals), "o", ms=4, color=PALETTE["ink"])
        ax_r.set_ylabel("residual (σ)")
    ax_r.set_xlabel(xlabel)
    legend_outside(fig, [ax, ax_r])
    return _save(fig, path)


def levels_plot(study: LevelStudy, path: str | Path) -> Path:
    """Q (with the fitted level model and the onset) and f0 against cavity SPL."""
    spl = np.array([p.spl_db for p in study.points])
    q = np.array([p.q for p in study.points])
    sq = np.array([p.q_stderr for p in study.points])
    f0 = np.array([p.f0_hz for p in study.points])
    sf = np.array([p.f0_stderr_hz for p in study.points])
    fig, (ax_q, ax_f) = _figure(2, [3, 2], (7.0, 5.6))
    lo, hi = spl.min() - 3, spl.max() + 3
    if np.isfinite(study.onset_spl_db):
        lo, hi = min(lo, study.onset_spl_db - 3), max(hi, study.onset_spl_db + 3)
    ss = np.linspace(lo, hi, 300)
    ax_q.plot(ss, study.q_model(ss), color=PALETTE["fit"], lw=1.5,
              label="1/Q = 1/Q0 + β p (fitted)")
    ax_q.axhline(study.q_small_signal, color=PALETTE["muted"], lw=0.8, ls=":",
                 label=f"Q0 = {study.q_small_signal:.2f} ± {study.q_small_signal_stderr:.2f}")
    ax_q.axhline((1 - study.q_drop_fraction) * study.q_small_signal, color=PALETTE["muted"],
                 lw=0.8, ls="--", label=f"Q0 − {100 * study.q_drop_fraction:.0f} %")
    if np.isfinite(study.onset_spl_db):
        ax_q.axvspan(study.onset_spl_db - study.onset_spl_stderr_db,
                     study.onset_spl_db + study.onset_spl_stderr_db, color=PALETTE["band"],
                     alpha=0.7, lw=0)
        ax_q.axvline(study.onset_spl_db, color=PALETTE["prediction"], ls="--", lw=1.1,
                     label=f"onset {study.onset_spl_db:.2f} ± {study.onset_spl_stderr_db:.2f} dB")
    ax_q.errorbar(spl, q, yerr=sq, fmt="o", ms=4, color=PALETTE["ink"], capsize=2,
                  label="measured")
    ax_q.set_ylabel("Q")
    _title(ax_q, "drive-level study: Q and f0 against cavity SPL")
    ax_f.errorbar(spl, f0, yerr=sf, fmt="o-", ms=4, lw=0.8, color=PALETTE["ink"], capsize=2)
    ax_f.set_ylabel("f0 (Hz)")
    ax_f.set_xlabel("cavity SPL (dB re 20 µPa)")
    legend_outside(fig, [ax_q, ax_f])
    return _save(fig, path)


def power_law_plot(fit: PowerLawFit, path: str | Path) -> Path:
    """Force against RMS cavity pressure on log axes, with the fitted power law and
    a square law through the same middle point for comparison."""
    from ..tuning import pressure_to_spl_db, spl_to_pressure_pa

    p = spl_to_pressure_pa(np.array(fit.spl_db))
    force = np.array(fit.force_n)
    se = np.array(fit.force_stderr_n)
    fig, ax = _figure(1, [1], (6.4, 4.6))
    pp = np.geomspace(p.min() / 1.3, p.max() * 1.3, 100)
    ax.plot(pp, fit.coefficient_n * pp**fit.exponent, color=PALETTE["fit"], lw=1.5,
            label=f"fit: n = {fit.exponent:.3f} ± {fit.exponent_stderr:.3f}")
    mid = np.exp(np.mean(np.log(p)))
    f_mid = fit.coefficient_n * mid**fit.exponent
    ax.plot(pp, f_mid * (pp / mid) ** 2, "--", color=PALETTE["prediction"], lw=1.1,
            label="square law, n = 2 (tenfold per 10 dB)")
    if np.all(np.isfinite(se)):
        ax.errorbar(p, force, yerr=se, fmt="o", ms=4, color=PALETTE["ink"], capsize=2,
                    label="measured")
    else:
        ax.plot(p, force, "o", ms=4, color=PALETTE["ink"], label="measured")
    ax.set_xscale("log")
    ax.set_yscale("log")
    ax.set_xlabel("cavity pressure, rms (Pa)")
    top = ax.secondary_xaxis("top", functions=(pressure_to_spl_db, spl_to_pressure_pa))
    top.set_xlabel("cavity SPL (dB re 20 µPa)", fontsize=8, color=PALETTE["muted"])
    top.tick_params(colors=PALETTE["muted"], labelsize=8)
    from matplotlib.ticker import FuncFormatter, MultipleLocator

    top.xaxis.set_major_locator(MultipleLocator(10.0))  # dB: every 10 dB
    top.xaxis.set_major_formatter(FuncFormatter(lambda v, _pos: f"{v:g}"))
    ax.set_ylabel("steady force (N)")
    _title(ax, "steady force against drive level")
    frequency_axis(ax)
    frequency_axis(ax, "y")
    legend_outside(fig, [ax])
    return _save(fig, path)
