"""Plots (the only matplotlib user; imported inside functions, Agg backend).

One look across the project: a warm paper background, ink-blue data, a
vermilion fit, a violet dashed prediction and a sand-coloured fit band.
"""

from __future__ import annotations

from pathlib import Path
from typing import TYPE_CHECKING, Any

import numpy as np

from ..fileio import atomic_write

if TYPE_CHECKING:
    from ..pipeline import Result

PALETTE = {
    "paper": "#fbf8f1",
    "ink": "#1f3b5b",
    "fit": "#d4462a",
    "prediction": "#6a4c93",
    "band": "#eadcb5",
    "grid": "#d9d2c3",
    "muted": "#7d7566",
}


def _figure(nrows: int, heights: list[float], size: tuple[float, float]) -> tuple[Any, Any]:
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    fig, axes = plt.subplots(nrows, 1, figsize=size, sharex=True,
                             gridspec_kw={"height_ratios": heights}, facecolor=PALETTE["paper"])
    for ax in np.atleast_1d(axes):
        ax.set_facecolor(PALETTE["paper"])
        ax.grid(True, color=PALETTE["grid"], linewidth=0.6)
        for side in ("top", "right"):
            ax.spines[side].set_visible(False)
        ax.tick_params(colors=PALETTE["muted"], labelsize=8)
    return fig, axes


def frequency_axis(ax: Any, axis: str = "x") -> None:
    """Ticks an acoustician reads on a logarithmic frequency axis: 1-2-5 steps
    (20, 50, 100, 200 Hz ...) as plain numbers, with unlabelled minor ticks at
    the other integers; more steps (1-1.5-2-3-5-7) on spans under one decade."""
    from matplotlib.ticker import FixedLocator, FuncFormatter, LogLocator, NullFormatter

    a = ax.xaxis if axis == "x" else ax.yaxis
    lo, hi = sorted(ax.get_xlim() if axis == "x" else ax.get_ylim())
    if lo <= 0 or hi <= lo:
        return
    span = hi / lo
    steps = ((1.0, 2.0, 5.0) if span > 8 else (1.0, 1.5, 2.0, 3.0, 5.0, 7.0) if span > 3
             else (1.0, 1.2, 1.5, 2.0, 2.5, 3.0, 4.0, 5.0, 6.0, 7.0, 8.0))
    ticks = [m * 10.0 ** e for e in range(int(np.floor(np.log10(lo))) - 1,
                                          int(np.ceil(np.log10(hi))) + 1)
             for m in steps]
    ticks = [t for t in ticks if lo <= t <= hi]
    a.set_major_locator(FixedLocator(ticks))
    a.set_major_formatter(FuncFormatter(lambda v, _pos: f"{v:g}"))
    a.set_minor_locator(LogLocator(base=10, subs=tuple(range(1, 10))))
    a.set_minor_formatter(NullFormatter())


def legend_outside(fig: Any, axes: Any, fontsize: float = 7) -> Any:
    """One legend for the entries of ``axes`` (an axes or a list), placed under the
    lowest of them, outside every data area, in as many columns as fit the
    figure's width; the figure is laid out around it."""
    axes = list(np.atleast_1d(axes))
    handles, labels = [], []
    for ax in axes:
        hh, ll = ax.get_legend_handles_labels()
        handles += hh
        labels += ll
    fig.tight_layout()
    if not handles:
        return None
    bottom = fig.subplotpars.bottom
    h_in = fig.get_size_inches()[1]
    for ncol in range(min(3, len(labels)), 0, -1):
        rows = -(-len(labels) // ncol)
        room = (0.17 * rows + 0.12) / h_in  # the legend's height as a fraction of the figure
        fig.subplots_adjust(bottom=bottom + room)
        low = min(axes, key=lambda a: a.get_position().y0)
        pos = low.get_position()
        leg = fig.legend(handles, labels, loc="upper left", ncol=ncol, fontsize=fontsize,
                         frameon=False, bbox_to_anchor=(0.01, pos.y0 - 0.42 / h_in))
        fig.canvas.draw()
        box = leg.get_window_extent()
        # a margin: text is a little wider at the saved resolution (font hinting)
        if box.x1 <= 0.97 * fig.bbox.x1 and box.y0 >= fig.bbox.y0 or ncol == 1:
            return leg
        leg.remove()
    return None


def _save(fig: Any, path: str | Path) -> Path:
    import matplotlib.pyplot as plt

    def w(tmp: str) -> None:
        fig.savefig(tmp, dpi=110, format=Path(path).suffix.lstrip(".") or "png",
                    facecolor=PALETTE["paper"])

    try:
        return atomic_write(path, w)
    finally:
        plt.close(fig)


def _q_text(pred: Any) -> str:
    lo, hi = sorted(pred.q_predicted_range)
    return f"{pred.q_predicted:.3g}, {lo:.3g} to {hi:.3g}"


def warm_up() -> None:
    """Load matplotlib's Agg backend and fonts once, drawing a throw-away figure
    (a batch's worker processes then start warm)."""
    import io

    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    fig = plt.figure(figsize=(1, 1))
    fig.text(0.5, 0.5, "f0 (Hz)")
    fig.savefig(io.BytesIO(), format="png")
    plt.close(fig)


def response_plot(result: Result, path: str | Path) -> Path:
    """Magnitude and phase of the measured H with the fit and the prediction
    overlaid, the fit band shaded, and the normalised residuals below."""
    from ..fitting.models import inside_outside

    tf, fit = result.transfer, result.fit
    assert tf is not None, "response_plot needs a result with a transfer function"
    lo_b, hi_b = fit.band_hz
    span_lo = max(tf.excited_band_hz[0], fit.f0_hz - 4 * (fit.f0_hz - lo_b))
    span_hi = min(tf.excited_band_hz[1], fit.f0_hz + 4 * (hi_b - fit.f0_hz))
    sel = (tf.freqs_hz >= span_lo) & (tf.freqs_hz <= span_hi)
    f = tf.freqs_hz[sel]
    h = tf.h[sel]
    if f.size > 3000:
        keep = np.linspace(0, f.size - 1, 3000).round().astype(int)
        f, h = f[keep], h[keep]
    ff = np.linspace(f[0], f[-1], 2000) if f.size else np.array([fit.f0_hz])
    sign = -1.0 if fit.polarity_inverted else 1.0
    model = result.model(ff)
    unwrap = np.exp(2j * np.pi * f * fit.delay_s) * sign  # show phase without the delay
    unwrap_m = np.exp(2j * np.pi * ff * fit.delay_s) * sign

    coh = None
    if tf.coherence is not None:
        coh = np.asarray(tf.coherence)[sel]
        if coh.size > 3000:
            coh = coh[np.linspace(0, coh.size - 1, 3000).round().astype(int)]
    if coh is None:
        fig, (ax_m, ax_p, ax_r) = _figure(3, [3, 2, 1.3], (7.2, 7.0))
        panels: tuple[Any, ...] = (ax_m, ax_p, ax_r)
    else:
        fig, (ax_m, ax_p, ax_c, ax_r) = _figure(4, [3, 2, 1.3, 1.3], (7.2, 8.2))
        panels = (ax_m, ax_p, ax_c, ax_r)
        ax_c.plot(f, coh, ".", ms=2.5, color=PALETTE["ink"], label="coherence")
        from ..checks import LOW_COHERENCE, UNDERSTATED_ERRORS_COHERENCE

        ax_c.axhline(UNDERSTATED_ERRORS_COHERENCE, color=PALETTE["prediction"], ls=":", lw=1.1,
                     label=f"{UNDERSTATED_ERRORS_COHERENCE:g}: errors understated below")
        ax_c.axhline(LOW_COHERENCE, color=PALETTE["fit"], ls="--", lw=1.1,
                     label=f"{LOW_COHERENCE:g}: low-coherence below")
        ax_c.set_ylim(max(0.0, min(0.7, float(np.nanmin(coh)) - 0.05) if coh.size else 0.0),
                      1.02)
        ax_c.set_ylabel("coherence γ²")
    for ax in panels:
        ax.axvspan(lo_b, hi_b, color=PALETTE["band"], alpha=0.6, lw=0,
                   label="fit band" if ax is ax_m else None)
    ax_m.plot(f, 20 * np.log10(np.abs(h)), ".", ms=2.5, color=PALETTE["ink"], label="measured")
    ax_m.plot(ff, 20 * np.log10(np.abs(model)), color=PALETTE["fit"], lw=1.6,
              label=f"fit: f0 {fit.f0_hz:.2f} Hz, Q {fit.q:.1f}")
    if result.prediction is not None and result.modes_fit is None:
        pred = inside_outside(ff, result.prediction.f0_hz, fit.q, fit.gain, fit.delay_s, sign)
        ax_m.plot(ff, 20 * np.log10(np.abs(pred)), "--", color=PALETTE["prediction"], lw=1.3,
                  label=f"geometry: f0 {result.prediction.f0_hz:.2f} Hz (drawn with the fitted "
                        f"Q and gain; predicted Q {_q_text(result.prediction)})")
        ax_p.plot(ff, np.degrees(np.angle(pred * unwrap_m)), "--",
                  color=PALETTE["prediction"], lw=1.3)
    ax_m.set_ylabel("|H| inside/outside (dB)")
    name = result.object.name if result.object is not None else Path(result.input.recording).name
    ax_m.set_title(f"{name}: inside/outside transfer function", fontsize=10,
                   color=PALETTE["ink"], loc="left")
    ax_p.plot(f, np.degrees(np.angle(h * unwrap)), ".", ms=2.5, color=PALETTE["ink"])
    ax_p.plot(ff, np.degrees(np.angle(model * unwrap_m)), color=PALETTE["fit"], lw=1.6)
    ax_p.set_ylabel("phase, delay removed (°)")
    ax_p.set_ylim(-190, 10)
    in_band = (f >= lo_b) & (f <= hi_b)
    fb, hb = f[in_band], h[in_band]
    if fb.size:
        idx = np.searchsorted(tf.freqs_hz, fb)
        mb = result.model(fb)
        sig = tf.sigma(np.abs(mb), idx) / np.sqrt(2)
        with np.errstate(divide="ignore", invalid="ignore"):
            r = (hb - mb) / sig
        ax_r.plot(fb, r.real, ".", ms=2.5, color=PALETTE["ink"], label="residual, real part")
        ax_r.plot(fb, r.imag, ".", ms=2.5, color=PALETTE["fit"],
                  label="residual, imaginary part")
        ax_r.axhline(0, color=PALETTE["muted"], lw=0.8)
    ax_r.set_ylabel("residual (σ)")
    ax_r.set_xlabel("frequency (Hz)")
    if f.size and f[0] > 0:
        ax_r.set_xscale("log")
        ax_r.set_xlim(f[0], f[-1])
        frequency_axis(ax_r)
    # one legend for every panel, under the figure (never over the data)
    legend_outside(fig, panels)
    return _save(fig, path)


def decay_plot(result: Result, path: str | Path) -> Path:
    """Free decays: the recorded signal of each decay with the fitted envelope."""
    x = result.signal
    fs = result.input.sample_rate_hz
    assert fs is not None, "decay_plot needs a result from a recording"
    decays = result.decays
    n = max(1, len(decays))
    fig, axes = _figure(n, [1.0] * n, (7.2, 1.0 + 1.8 * n))
    for ax, d in zip(np.atleast_1d(axes), decays, strict=False):  # one empty axis when no decays
        i0 = int(d["start_s"] * fs)
        i1 = i0 + int(d["length_s"] * fs)
        t = np.arange(i1 - i0) / fs
        seg = x[i0:i1] if x is not None else np.zeros(t.size)
        tau = d["q"] / (np.pi * d["f0_hz"])
        env = d["amplitude"] * np.exp(-t / tau)
        first = ax is np.atleast_1d(axes)[0]
        ax.plot(1000 * t, seg, color=PALETTE["ink"], lw=0.6,
                label="recorded" if first else None)
        ax.plot(1000 * t, env, color=PALETTE["fit"], lw=1.4,
                label="fitted envelope" if first else None)
        ax.plot(1000 * t, -env, color=PALETTE["fit"], lw=1.4)
        ax.set_ylabel("pressure (full scale)")
        ax.set_title(f"decay at {d['start_s']:.3f} s: f0 {d['f0_hz']:.2f} Hz, Q {d['q']:.1f}",
                     fontsize=9, loc="left", color=PALETTE["ink"])
    np.atleast_1d(axes)[-1].set_xlabel("time after the start of the fitted stretch (ms)")
    legend_outside(fig, axes)
    return _save(fig, path)
