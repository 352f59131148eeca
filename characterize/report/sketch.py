"""A to-scale sketch of an object: cavity, neck(s), end conditions and the
end corrections (``characterize predict --sketch out.png``).

The outline is computed from the geometry (:mod:`characterize.physics`);
matplotlib is imported lazily through :mod:`.plots` (palette, figure and
atomic save).
"""

from __future__ import annotations

import math
from pathlib import Path
from typing import TYPE_CHECKING

if TYPE_CHECKING:
    from ..physics.geometry import ResonatorObject
    from ..physics.helmholtz import Prediction

__all__ = ["sketch_object"]


def _cavity_outline(obj: ResonatorObject) -> tuple[list[tuple[float, float]], float, str]:
    """Closed polyline of the cavity's side view (mm, bottom at y = 0), its
    top height (mm) and a label."""
    from ..physics.geometry import section_parts

    cav = obj.cavity
    lin = math.sqrt(cav.area_scale)
    if cav.shape in ("cylinder", "tube"):
        assert cav.diameter_m is not None and cav.length_m is not None
        r, h = 500.0 * cav.diameter_m * lin, 1e3 * cav.length_m
        if obj.kind == "tube" and obj.neck.inner_end != "closed":
            return [(-r, h), (-r, 0.0), (None, None), (r, 0.0), (r, h)], h, (  # type: ignore[list-item]
                f"tube d {1e3 * cav.diameter_m:.1f} x L {h:.1f} mm, open at both ends")
        if obj.kind == "tube":
            return [(-r, h), (-r, 0.0), (r, 0.0), (r, h)], h, (
                f"tube d {1e3 * cav.diameter_m:.1f} x L {h:.1f} mm, closed end")
        return [(-r, h), (-r, 0.0), (r, 0.0), (r, h)], h, (
            f"cylinder d {2 * r:.1f} x {h:.1f} mm")
    if cav.shape == "box":
        assert cav.width_m and cav.depth_m and cav.height_m
        r, h = 500.0 * cav.width_m * lin, 1e3 * cav.height_m
        return [(-r, h), (-r, 0.0), (r, 0.0), (r, h)], h, (
            f"box {1e3 * cav.width_m:.0f} x {1e3 * cav.depth_m:.0f} x {h:.0f} mm "
            "(w x d x h; side view)")
    if cav.shape == "profile":
        pts_l: list[tuple[float, float]] = []
        y = 0.0
        for sec in cav.sections:
            d0, d1, ln = section_parts(sec)
            pts_l += [(-500.0 * d0 * lin, y), (-500.0 * d1 * lin, y + 1e3 * ln)]
            y += 1e3 * ln
        right = [(-x, yy) for x, yy in pts_l]
        return list(reversed(pts_l)) + right, y, (
            f"profile, {len(cav.sections)} sections, axial length {y:.1f} mm")
    if cav.shape == "ellipsoid":
        a, _, c = (500.0 * x for x in cav.semi_axes_m)
        a *= lin
        return ([(a * math.sin(t), c - c * math.cos(t))
                 for t in [2 * math.pi * i / 180 for i in range(181)]], 2 * c,
                "ellipsoid, semi-axes " + " x ".join(f"{1e3 * x:.1f}" for x in cav.semi_axes_m)
                + " mm (side view: a across, c along the axis)")
    if cav.shape == "elliptic-cylinder":
        assert cav.length_m is not None
        a, b = (1e3 * x * lin for x in cav.semi_axes_m)
        h = 1e3 * cav.length_m
        return [(-a, h), (-a, 0.0), (a, 0.0), (a, h)], h, (
            f"elliptic cylinder, semi-axes {a:.1f} x {b:.1f} mm, {h:.1f} mm long "
            "(side view across a)")
    if cav.shape == "sphere":
        assert cav.diameter_m is not None
        r = 500.0 * cav.diameter_m * lin
        return ([(r * math.sin(t), r - r * math.cos(t))
                 for t in [2 * math.pi * i / 180 for i in range(181)]], 2 * r,
                f"sphere d {2 * r:.1f} mm")
    # volume only: the cylinder as tall as it is wide that has the volume
    r = 1e3 * (cav.volume_m3 / (2.0 * math.pi)) ** (1.0 / 3.0)
    return [(-r, 2 * r), (-r, 0.0), (r, 0.0), (r, 2 * r)], 2 * r, (
        "volume only (drawn as a cylinder as tall as wide)")


def sketch_object(obj: ResonatorObject, path: str | Path,
                  prediction: Prediction | None = None) -> Path:
    """Draw ``obj`` to scale and write a PNG (or any suffix matplotlib knows).

    Side view in mm: the cavity's outline (solid; dashed when only its
    volume is known), the neck(s), a flange drawn as a wall where an end is
    flanged, and the end corrections as dotted extensions of the air
    column, labelled with their lengths. With a prediction, f0 and Q are
    in the title.

    Parameters
    ----------
    obj : ResonatorObject
    path : path
        Output file; written atomically.
    prediction : Prediction, optional

    Returns
    -------
    pathlib.Path
    """
    from ..physics.helmholtz import neck_end_corrections
    from .plots import PALETTE, _figure, _save

    neck = obj.neck
    ends = neck_end_corrections(obj)
    outline, top, label = _cavity_outline(obj)
    fig, ax = _figure(1, [1.0], (6.4, 6.0))
    ax.grid(False)
    dashed = obj.cavity.shape == "volume"
    xs = [x for x, _ in outline if x is not None]
    part: list[tuple[float, float]] = []
    labelled = False
    for pt in [*outline, (None, None)]:
        if pt[0] is None:
            if part:
                px, py = zip(*part, strict=True)
                ax.plot(px, py, color=PALETTE["ink"], lw=2.0, ls="--" if dashed else "-",
                        label=None if labelled else label)
                labelled = True
            part = []
        else:
            part.append((float(pt[0]), float(pt[1] or 0.0)))
    half_w = 1e3 * (neck.width_m if neck.shape == "slot" and neck.width_m else
                    neck.diameter_m) / 2.0
    length = 1e3 * neck.length_m
    curved = obj.cavity.shape in ("sphere", "ellipsoid")
    top_half = abs(outline[0][0]) if not curved else half_w
    cavity_half = max(abs(x) for x in xs)
    if obj.kind == "tube":
        centres = [0.0]
        y0 = top - length
    else:
        n = neck.count
        spacing = max(2.2 * half_w, 2.0 * top_half / (n + 1)) if n > 1 else 0.0
        centres = [spacing * (i - (n - 1) / 2.0) for i in range(n)]
        protrude = 0.35 * length if neck.inner_end == "unflanged" else 0.0
        y0 = top - protrude
    y1 = y0 + length
    wall = max(0.6, 0.08 * half_w)
    # the neck's radius along its length, from the inner end (y0) up to the mouth
    if neck.sections:
        # (height, radius) down the sections, given from the outside end inwards
        pts: list[tuple[float, float]] = []
        y = y1
        for d0, d1, ln in neck.sections:
            pts += [(y, 500.0 * d0), (y - 1e3 * ln, 500.0 * d1)]
            y -= 1e3 * ln
    else:
        pts = [(y1, half_w), (y0, half_w)]
    ys_neck = [q[0] for q in pts]
    for i, xc in enumerate(centres):
        for side in (-1, 1):
            ax.plot([xc + side * (r + wall / 2) for _, r in pts], ys_neck, color=PALETTE["ink"],
                    lw=2.0)
        ax.fill_betweenx(ys_neck, [xc - r for _, r in pts], [xc + r for _, r in pts],
                         color=PALETTE["band"], alpha=0.6, lw=0,
                         label="neck air" if i == 0 else None)
        d_out = 1e3 * ends.outer_m
        ax.fill_between([xc - half_w, xc + half_w], y1, y1 + d_out, color=PALETTE["fit"],
                        alpha=0.25, lw=0, hatch="...",
                        label=f"outer end correction {d_out:.2f} mm ({ends.outer_source})"
                        if i == 0 else None)
        r_in = pts[-1][1]
        if ends.inner_m > 0:
            d_in = 1e3 * ends.inner_m
            y_in = 0.0 if obj.kind == "tube" else y0
            which = "far end" if obj.kind == "tube" else "inner end"
            ax.fill_between([xc - r_in, xc + r_in], y_in - d_in, y_in, color=PALETTE["prediction"],
                            alpha=0.25, lw=0, hatch="...",
                            label=f"{which} correction {d_in:.2f} mm ({ends.inner_source})"
                            if i == 0 else None)
    span = max(cavity_half, half_w * 4)
    if neck.outer_end == "flanged":
        ax.plot([-1.4 * span, 1.4 * span], [y1, y1], color=PALETTE["muted"], lw=3.0,
                label="flange (baffle) at the mouth")
    if obj.kind == "tube" and neck.inner_end == "flanged":
        ax.plot([-1.4 * span, 1.4 * span], [0.0, 0.0], color=PALETTE["muted"], lw=3.0,
                label="flange (baffle) at the far end")
    if obj.kind != "tube" and not curved:
        # the cavity's top face around the openings
        ax.plot([-top_half, top_half], [top, top], color=PALETTE["ink"], lw=2.0,
                ls="--" if dashed else "-")
    what = f"{neck.count} x " if neck.count > 1 else ""
    if neck.sections:
        dims = (f"profile, mouth d {1e3 * neck.diameter_m:.1f} mm, inner d "
                f"{1e3 * neck.inner_diameter_m:.1f} mm")
    elif neck.shape == "slot":
        dims = f"slot {1e3 * neck.width_m:.1f} x {1e3 * neck.height_m:.1f} mm"  # type: ignore[operator]
    else:
        dims = f"{neck.shape} d {1e3 * neck.diameter_m:.1f} mm"
    note = ax.annotate(f"{what}{dims}, L {length:.1f} mm\nouter {neck.outer_end}"
                + (f", inner {neck.inner_end}" if obj.kind != "tube" else
                   "" if neck.inner_end == "closed" else f", far end {neck.inner_end}"),
                xy=(0.0, y1 + 1e3 * ends.outer_m), xytext=(0, 8),
                textcoords="offset points", fontsize=8, color=PALETTE["ink"], va="bottom",
                ha="center")
    title = f"{obj.name}"
    if prediction is not None:
        lo_q, hi_q = sorted(prediction.q_predicted_range)
        title += (f": f0 {prediction.f0_hz:.1f} Hz, Q {prediction.q_predicted:.0f} "
                  f"({lo_q:.0f} to {hi_q:.0f}; {prediction.model})")
    ax.set_title(title, fontsize=10, color=PALETTE["ink"], loc="left")
    ax.set_aspect("equal", adjustable="datalim")
    ax.set_xlabel("width (mm)")
    ax.set_ylabel("height above the bottom (mm)")
    from ..report.plots import legend_outside

    legend_outside(fig, [ax])
    _clear_title(fig, ax, note)
    return _save(fig, path)


def _clear_title(fig: object, ax: object, note: object, tries: int = 12) -> None:
    """Raise the top of the plot until the neck's label sits inside the axes,
    clear of the title (it is placed above the mouth, in data coordinates)."""
    for _ in range(tries):
        fig.canvas.draw()  # type: ignore[attr-defined]
        r = fig.canvas.get_renderer()  # type: ignore[attr-defined]
        nb = note.get_window_extent(r)  # type: ignore[attr-defined]
        ab = ax.get_window_extent(r)  # type: ignore[attr-defined]
        tb = ax.title.get_window_extent(r)  # type: ignore[attr-defined]
        if nb.y1 <= ab.y1 - 2 and not nb.overlaps(tb):
            return
        lo, hi = ax.get_ylim()  # type: ignore[attr-defined]
        # an invisible point above the top: the limits follow it (the equal
        # aspect adjusts the data limits, so they are not set directly)
        ax.plot([0.0], [hi + 0.15 * (hi - lo)], alpha=0.0)  # type: ignore[attr-defined]
        ax.autoscale_view()  # type: ignore[attr-defined]
