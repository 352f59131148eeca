"""The tuning session's plot: f0 after each step against the cumulative change."""

from __future__ import annotations

from collections.abc import Sequence
from pathlib import Path

import numpy as np

from .plots import PALETTE, _figure, _save

__all__ = ["tune_plot"]


def tune_plot(change: Sequence[float], f0_hz: Sequence[float], f0_stderr_hz: Sequence[float],
              target_hz: float, tolerance_hz: float, xlabel: str, path: str | Path) -> Path:
    """f0 (with 2-sigma bars) against the cumulative change, the target and its
    tolerance band shaded."""
    fig, ax = _figure(1, [1.0], (6.4, 3.8))
    x = np.asarray(change, dtype=float)
    y = np.asarray(f0_hz, dtype=float)
    e = 2.0 * np.nan_to_num(np.asarray(f0_stderr_hz, dtype=float))
    ax.axhspan(target_hz - tolerance_hz, target_hz + tolerance_hz, color=PALETTE["band"],
               label=f"target {target_hz:.2f} ± {tolerance_hz:.2f} Hz")
    ax.axhline(target_hz, color=PALETTE["prediction"], linewidth=0.8)
    ax.plot(x, y, color=PALETTE["muted"], linewidth=0.8)
    ax.errorbar(x, y, yerr=e, fmt="o", color=PALETTE["fit"], markersize=4, capsize=2,
                label="measured f0 (±2σ)")
    for i, (xi, yi) in enumerate(zip(x, y, strict=True), start=1):
        ax.annotate(str(i), (xi, yi), textcoords="offset points", xytext=(4, 4), fontsize=7,
                    color=PALETTE["ink"])
    ax.set_xlabel(xlabel)
    ax.set_ylabel("f0 (Hz)")
    ax.set_title("tuning session: f0 after each step", fontsize=10, color=PALETTE["ink"],
                 loc="left")
    ax.legend(fontsize=8, loc="best")
    return _save(fig, path)
