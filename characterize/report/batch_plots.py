"""Batch plots: histograms of f0 and Q with the tolerance band, and an
individuals control chart of f0 in manifest order.

Same look as :mod:`characterize.report.plots` (its ``_figure``, ``_save`` and
``PALETTE``); matplotlib is imported inside the functions. Pass and fail are
told apart by fill and hatching as well as by colour, so the plots survive
black-and-white printing.

Each ``draw_*`` function draws into one Axes (the PDF report puts it on a
page); ``*_figure`` makes it a figure of its own, and :func:`write_batch_plots`
saves those as PNG for the HTML report.
"""

from __future__ import annotations

from pathlib import Path
from typing import TYPE_CHECKING, Any

import numpy as np

from .plots import PALETTE, _figure, _save

if TYPE_CHECKING:
    from ..batchdata import BatchSummary

#: File names of the batch plots under DIR/plots/.
PLOT_FILES = {"f0_histogram": "f0-histogram.png", "q_histogram": "q-histogram.png",
              "control_chart": "f0-control-chart.png"}

_SIZE = (7.2, 3.6)


def _values(summary: BatchSummary, key: str, lo: float | None, hi: float | None
            ) -> tuple[list[float], list[float]]:
    """(inside, outside) the limits ``lo``..``hi``: the values of ``key`` over items
    with a result, split by the quantity shown (an item that failed on Q is not
    drawn red in the f0 histogram when its f0 is within tolerance)."""
    ok: list[float] = []
    bad: list[float] = []
    for it in summary.items:
        v = getattr(it, key)
        if it.status == "error" or v is None or not np.isfinite(v):
            continue
        inside = (lo is None or v >= lo) and (hi is None or v <= hi)
        (ok if inside else bad).append(float(v))
    return ok, bad


def _no_data(ax: Any, what: str) -> None:
    ax.text(0.5, 0.5, f"no {what}: no item has a result", transform=ax.transAxes,
            ha="center", va="center", color=PALETTE["muted"], fontsize=9)


def _edges(values: list[float], lo: float | None, hi: float | None) -> Any:
    data = np.asarray(values, dtype=float)
    span = [float(data.min()), float(data.max())]
    for lim in (lo, hi):
        if lim is not None:
            span = [min(span[0], lim), max(span[1], lim)]
    width = span[1] - span[0]
    if width <= 0:
        width = max(abs(span[0]) * 0.01, 1e-9)
    pad = 0.08 * width
    n_bins = int(np.clip(round(3 * np.sqrt(data.size)), 8, 50))
    return np.linspace(span[0] - pad, span[1] + pad, n_bins + 1)


def _histogram(ax: Any, ok: list[float], bad: list[float], lo: float | None, hi: float | None,
               target: float | None, band_label: str) -> None:
    allv = ok + bad
    ax.set_axisbelow(True)
    edges = _edges(allv, lo, hi)
    x_lo, x_hi = float(edges[0]), float(edges[-1])
    if lo is not None or hi is not None:
        ax.axvspan(lo if lo is not None else x_lo, hi if hi is not None else x_hi,
                   color=PALETTE["band"], alpha=0.7, lw=0, label=band_label)
    ax.hist([ok, bad], bins=edges, stacked=True, color=[PALETTE["ink"], PALETTE["fit"]],
            edgecolor=PALETTE["paper"], linewidth=0.6,
            label=[f"within limits ({len(ok)})", f"outside ({len(bad)})"])
    for patch in ax.containers[-1].patches if ax.containers else []:
        patch.set_hatch("////")
        patch.set_edgecolor(PALETTE["paper"])
    if target is not None:
        ax.axvline(target, color=PALETTE["prediction"], ls="--", lw=1.2, label="target")
    ax.set_xlim(x_lo, x_hi)
    ax.set_ylabel("items (count)")
    ax.yaxis.get_major_locator().set_params(integer=True)
    # under the axis label, outside the data (the pad is in font sizes: 4.5 x 7 pt)
    ax.legend(fontsize=7, frameon=False, loc="upper left", bbox_to_anchor=(0.0, 0.0),
              borderaxespad=4.5, ncol=4)


def draw_f0_histogram(ax: Any, summary: BatchSummary) -> None:
    """Histogram of f0 (Hz): items with f0 within tolerance solid, outside it
    hatched, the tolerance band shaded and the target dashed."""
    spec = summary.spec
    ok, bad = _values(summary, "f0_hz", spec.f0_lower_hz, spec.f0_upper_hz)
    if ok or bad:
        _histogram(ax, ok, bad, spec.f0_lower_hz, spec.f0_upper_hz, spec.f0_target_hz,
                   f"tolerance {spec.f0_lower_hz:.1f} to {spec.f0_upper_hz:.1f} Hz")
    else:
        _no_data(ax, "f0")
    ax.set_xlabel("f0 (Hz)")
    ax.set_title(f"f0 of {len(ok) + len(bad)} items", fontsize=10, color=PALETTE["ink"],
                 loc="left")


def draw_q_histogram(ax: Any, summary: BatchSummary) -> None:
    """Histogram of Q (dimensionless) with the allowed range shaded."""
    spec = summary.spec
    ok, bad = _values(summary, "q", spec.q_min, spec.q_max)
    if spec.q_min is None and spec.q_max is None:
        label = "no Q limits"
    elif spec.q_max is None:
        label = f"allowed Q ≥ {spec.q_min:g}"
    elif spec.q_min is None:
        label = f"allowed Q ≤ {spec.q_max:g}"
    else:
        label = f"allowed Q {spec.q_min:g} to {spec.q_max:g}"
    if ok or bad:
        _histogram(ax, ok, bad, spec.q_min, spec.q_max, None, label)
    else:
        _no_data(ax, "Q")
    ax.set_xlabel("Q")
    ax.set_title(f"Q of {len(ok) + len(bad)} items", fontsize=10, color=PALETTE["ink"],
                 loc="left")


def draw_control_chart(ax: Any, summary: BatchSummary) -> None:
    """Individuals control chart of f0 (Hz) in manifest order: centre line and
    3-sigma control limits (sigma from the mean moving range), the tolerance
    band shaded; failed items as crosses, points beyond the control limits
    ringed, items without a result marked along the bottom."""
    spec, st = summary.spec, summary.stats
    ax.axhspan(spec.f0_lower_hz, spec.f0_upper_hz, color=PALETTE["band"], alpha=0.7, lw=0,
               label=f"tolerance ±{spec.f0_tolerance_hz:.2f} Hz")
    pts = [(it.index, float(it.f0_hz), it.status) for it in summary.items
           if it.status != "error" and it.f0_hz is not None and np.isfinite(it.f0_hz)]
    n = len(summary.items)
    if pts:
        x = np.array([p[0] for p in pts])
        y = np.array([p[1] for p in pts])
        ok = np.array([p[2] == "pass" for p in pts])
        ax.plot(x, y, "-", color=PALETTE["muted"], lw=0.8)
        ax.plot(x[ok], y[ok], "o", ms=5, color=PALETTE["ink"], label="pass")
        if np.any(~ok):
            ax.plot(x[~ok], y[~ok], "X", ms=7, color=PALETTE["fit"], label="fail")
        if st.control_centre_hz is not None:
            ax.axhline(st.control_centre_hz, color=PALETTE["ink"], lw=1.0,
                       label=f"mean {st.control_centre_hz:.2f} Hz")
            for lim, lab in ((st.control_ucl_hz, "control limits (±3σ, moving range)"),
                             (st.control_lcl_hz, None)):
                ax.axhline(lim, color=PALETTE["prediction"], ls=":", lw=1.3, label=lab)
            beyond = (y > st.control_ucl_hz) | (y < st.control_lcl_hz)
            if np.any(beyond):
                ax.plot(x[beyond], y[beyond], "o", ms=12, mfc="none", mec=PALETTE["fit"],
                        mew=1.2, label="beyond control limits")
        lo = min(float(y.min()), spec.f0_lower_hz, st.control_lcl_hz or np.inf)
        hi = max(float(y.max()), spec.f0_upper_hz, st.control_ucl_hz or -np.inf)
    else:
        _no_data(ax, "f0")
        lo, hi = spec.f0_lower_hz, spec.f0_upper_hz
    pad = 0.08 * (hi - lo)
    ax.set_ylim(lo - 2 * pad, hi + pad)
    errs = [it.index for it in summary.items if it.status == "error"]
    if errs:
        ax.plot(errs, [lo - 1.5 * pad] * len(errs), "v", ms=6, color=PALETTE["muted"],
                label=f"no result ({len(errs)})")
    ax.set_xlim(0.5, n + 0.5)
    ax.xaxis.get_major_locator().set_params(integer=True)
    ax.set_xlabel("item (manifest order)")
    ax.set_ylabel("f0 (Hz)")
    ax.set_title("f0 control chart (individuals)", fontsize=10, color=PALETTE["ink"],
                 loc="left")
    ax.legend(fontsize=7, frameon=False, loc="upper left", bbox_to_anchor=(1.0, 1.0))


#: name -> drawing function (into one matplotlib Axes).
DRAW = {"f0_histogram": draw_f0_histogram, "q_histogram": draw_q_histogram,
        "control_chart": draw_control_chart}


def batch_figure(name: str, summary: BatchSummary, size: tuple[float, float] = _SIZE) -> Any:
    """One batch plot as its own figure (``name`` one of :data:`DRAW`)."""
    if name not in DRAW:
        raise ValueError(f"name must be one of {sorted(DRAW)}, got {name!r}")
    fig, ax = _figure(1, [1], size)
    DRAW[name](ax, summary)
    fig.tight_layout()
    return fig


def f0_histogram_figure(summary: BatchSummary) -> Any:
    return batch_figure("f0_histogram", summary)


def q_histogram_figure(summary: BatchSummary) -> Any:
    return batch_figure("q_histogram", summary)


def control_chart_figure(summary: BatchSummary) -> Any:
    return batch_figure("control_chart", summary, (7.2, 3.8))


FIGURES = {"f0_histogram": f0_histogram_figure, "q_histogram": q_histogram_figure,
           "control_chart": control_chart_figure}


def write_batch_plots(summary: BatchSummary, plots_dir: str | Path) -> dict[str, Path]:
    """Save the batch plots as PNG under ``plots_dir``; returns name -> path."""
    d = Path(plots_dir)
    return {name: _save(make(summary), d / PLOT_FILES[name]) for name, make in FIGURES.items()}
