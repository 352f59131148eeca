"""report.pdf: the batch report on A4 pages (matplotlib's PdfPages).

Same content as report.html, paged:

1. cover: what was measured, when, with what settings; batch statistics; outliers;
2. the items table, :data:`ROWS_PER_PAGE` items a page;
3. one page each for the f0 histogram, the Q histogram and the f0 control chart;
4. each item on its own half page (:data:`ITEMS_PER_PAGE` a page): numbers,
   reasons, warnings and its response plot.

Every page carries "page i of N". User text is drawn with mathtext off, so a
``$`` in an id or note prints as written. Page count: :func:`page_count`.
"""

from __future__ import annotations

import math
import textwrap
from pathlib import Path
from typing import TYPE_CHECKING, Any

from .._version import __version__
from ..fileio import atomic_write

if TYPE_CHECKING:
    from ..batchdata import BatchSummary

A4_IN = (8.27, 11.69)
ROWS_PER_PAGE = 34
ITEMS_PER_PAGE = 2
PLOT_PAGES = ("f0_histogram", "q_histogram", "control_chart")
MAX_OUTLIERS_ON_COVER = 14
#: Item plots go into the PDF at this fraction of their pixels: on the page
#: (5.6 in wide) that keeps the PNG's own 110 pixels per inch, and writes faster.
PDF_IMAGE_SCALE = 0.8
_STATUS = {"pass": "PASS", "fail": "FAIL", "error": "ERROR"}


def page_count(n_items: int) -> int:
    """Pages of a report with ``n_items`` items."""
    return (1 + math.ceil(n_items / ROWS_PER_PAGE) + len(PLOT_PAGES)
            + math.ceil(n_items / ITEMS_PER_PAGE))


def _clip(text: str, n: int) -> str:
    return text if len(text) <= n else text[: n - 1] + "…"


def _f(v: float | None, fmt: str) -> str:
    if v is None or (isinstance(v, float) and not math.isfinite(v)):
        return "—"
    return format(v, fmt)


class _Pages:
    """Page frame: running head, "page i of N" and the date on every page."""

    def __init__(self, pdf: Any, summary: BatchSummary, total: int, written: str) -> None:
        self.pdf, self.summary, self.total, self.written = pdf, summary, total, written
        self.number = 0

    def frame(self, fig: Any) -> None:
        from .plots import PALETTE

        self.number += 1
        fig.text(0.06, 0.975, _clip(f"characterize batch report: {self.summary.spec.name}", 95),
                 fontsize=7.5, color=PALETTE["muted"], va="top", parse_math=False)
        fig.text(0.5, 0.018, f"page {self.number} of {self.total}", fontsize=8,
                 ha="center", color=PALETTE["muted"])
        fig.text(0.94, 0.018, self.written, fontsize=7, ha="right", color=PALETTE["muted"])

    def save(self, fig: Any) -> None:
        self.pdf.savefig(fig, facecolor=fig.get_facecolor())


def _new_page() -> Any:
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    from .plots import PALETTE

    return plt.figure(figsize=A4_IN, facecolor=PALETTE["paper"])


def _write_lines(fig: Any, x: float, y: float, lines: list[tuple[str, dict[str, Any]]],
                 dy: float = 0.0165) -> float:
    for text, kw in lines:
        fig.text(x, y, text, va="top", parse_math=False, **{"fontsize": 8.5, **kw})
        y -= dy * kw.get("fontsize", 8.5) / 8.5
    return y


def _cover(pages: _Pages, ctx: dict[str, Any]) -> None:
    import matplotlib.pyplot as plt

    from .plots import PALETTE

    s = pages.summary
    fig = _new_page()
    pages.frame(fig)
    c = ctx["counts"]
    lines: list[tuple[str, dict[str, Any]]] = [
        (_clip(s.spec.name, 60), {"fontsize": 17, "color": PALETTE["ink"], "weight": "bold"}),
        ("", {}),
        (f"{c['n_pass']} of {c['n_items']} passed ({ctx['pass_rate']}); {c['n_fail']} failed "
         f"the spec, {c['n_error']} without a result.", {"fontsize": 11}),
        ("", {}),
    ]
    meta = [
        ("Measured", f"{c['n_items']} items from {ctx['manifest']} ({ctx['methods']})"),
        ("When", f"batch run {ctx['run']['started']} to {ctx['run']['finished']}; "
                 f"report written {ctx['written']}"),
        ("Spec", str(s.spec.path)),
        ("f0", f"target {ctx['target']}, tolerance ±{ctx['tolerance']} "
               f"({s.spec.f0_tolerance_text}): {ctx['band']}"),
        ("Q", ctx["q_limits"]), ("Prediction", ctx["mismatch_rule"]),
        ("Flags that fail", ctx["fail_flags"]), ("Flags that warn", ctx["warn_flags"]),
        ("Object", ctx["object_text"]),
        ("Defaults", ctx["defaults"]),
        ("Run", f"{ctx['run_text']}; characterize {__version__}"),
    ]
    for label, value in meta:
        wrapped = textwrap.wrap(value, 88) or [""]
        lines.append((f"{label}:  {wrapped[0]}", {}))
        lines += [(" " * 8 + w, {}) for w in wrapped[1:]]
    y = _write_lines(fig, 0.08, 0.93, lines)
    y -= 0.02
    fig.text(0.08, y, "Batch statistics (items with a result)", fontsize=11,
             color=PALETTE["ink"], weight="bold", va="top")
    y -= 0.03
    for label, value in ctx["stats_rows"]:
        fig.text(0.10, y, label, fontsize=8.5, va="top")
        fig.text(0.62, y, value, fontsize=8.5, va="top", ha="right")
        y -= 0.0165
    y -= 0.01
    for note in textwrap.wrap(
            "Cpk = min(USL - mean, mean - LSL) / (3 s) against the f0 tolerance, s the sample "
            "standard deviation (common practice in quality engineering; Kane 1986). Control "
            "limits: individuals chart, sigma from the mean moving range / 1.128 (Montgomery "
            f"2009). Outliers: modified z-score beyond {ctx['outlier_z']} (Iglewicz & Hoaglin "
            "1993).", 100):
        fig.text(0.08, y, note, fontsize=7.5, color=PALETTE["muted"], va="top")
        y -= 0.014
    y -= 0.015
    fig.text(0.08, y, "Outliers", fontsize=11, color=PALETTE["ink"], weight="bold", va="top")
    y -= 0.03
    outs = ctx["outliers"]
    if not outs:
        fig.text(0.10, y, "none", fontsize=8.5, va="top")
    for o in outs[:MAX_OUTLIERS_ON_COVER]:
        fig.text(0.10, y, f"{o['index']}. {_clip(o['id'], 40)}: {o['quantity']} {o['value']} "
                 f"(modified z {o['z']})", fontsize=8.5, va="top", parse_math=False)
        y -= 0.0165
    if len(outs) > MAX_OUTLIERS_ON_COVER:
        fig.text(0.10, y, f"... and {len(outs) - MAX_OUTLIERS_ON_COVER} more, marked in the "
                 "items table", fontsize=8.5, va="top")
    pages.save(fig)
    plt.close(fig)


#: Items table: (heading, width in characters, alignment); one monospace line a row.
_COLUMNS = (("#", 4, ">"), ("id", 22, "<"), ("status", 6, "<"), ("f0 (Hz)", 9, ">"),
            ("dev (%)", 7, ">"), ("Q", 6, ">"), ("vs pred %", 9, ">"),
            ("why (first reason)", 46, "<"))


def _row(cells: tuple[str, ...]) -> str:
    return " ".join(format(_clip(c, w), f"{a}{w}") for c, (_, w, a) in
                    zip(cells, _COLUMNS, strict=True)).rstrip()


def _table_pages(pages: _Pages, ctx: dict[str, Any]) -> None:
    """The items table, one monospace text line a row (fast to draw); rows of
    items that did not pass are bold, so the table reads without colour."""
    import matplotlib.pyplot as plt

    from .plots import PALETTE

    items = ctx["items"]
    n_pages = math.ceil(len(items) / ROWS_PER_PAGE)
    mono = {"family": "DejaVu Sans Mono", "fontsize": 7.2, "va": "top", "parse_math": False}
    for p in range(n_pages):
        fig = _new_page()
        pages.frame(fig)
        fig.text(0.06, 0.945, f"Items ({p * ROWS_PER_PAGE + 1} to "
                 f"{min(len(items), (p + 1) * ROWS_PER_PAGE)} of {len(items)}), manifest order; "
                 f"f0 tolerance {ctx['band']}", fontsize=10, color=PALETTE["ink"],
                 weight="bold", va="top")
        y = 0.91
        fig.text(0.05, y, _row(tuple(h for h, _, _ in _COLUMNS)), weight="bold", **mono)
        fig.add_artist(_hline(fig, y - 0.016))
        y -= 0.024
        for it in items[p * ROWS_PER_PAGE:(p + 1) * ROWS_PER_PAGE]:
            why = it["reasons"][0] if it["reasons"] else (
                "warning: " + it["warnings"][0] if it["warnings"] else "")
            if it["outlier"]:
                why = f"outlier in {it['outlier']}; " + why
            if len(it["reasons"]) > 1:
                why = f"(+{len(it['reasons']) - 1}) " + why
            cells = (str(it["index"]), it["id"], _STATUS[it["status"]], it["f0"], it["dev"],
                     it["q"], it["mismatch"], why)
            fig.text(0.05, y, _row(cells), weight="normal" if it["status"] == "pass" else "bold",
                     **mono)
            y -= 0.0245
        fig.text(0.06, 0.04, "Rows in bold did not pass. Full reasons and warnings: the item "
                 "pages below, report.html and summary.csv.", fontsize=7, color=PALETTE["muted"])
        pages.save(fig)
        plt.close(fig)


def _hline(fig: Any, y: float) -> Any:
    from matplotlib.lines import Line2D

    from .plots import PALETTE

    return Line2D([0.05, 0.95], [y, y], transform=fig.transFigure, color=PALETTE["ink"], lw=0.8)


def _plot_pages(pages: _Pages, ctx: dict[str, Any]) -> None:
    import matplotlib.pyplot as plt

    from .batch_plots import DRAW
    from .plots import PALETTE, _figure

    captions = {f["name"]: f for f in ctx["figures"]}
    for name in PLOT_PAGES:
        fig, ax = _figure(1, [1], A4_IN)
        right = 0.72 if name == "control_chart" else 0.92
        fig.subplots_adjust(left=0.12, right=right, top=0.90, bottom=0.52)
        DRAW[name](ax, pages.summary)
        pages.frame(fig)
        y = 0.45
        for line in textwrap.wrap(captions[name]["alt"], 100):
            fig.text(0.12, y, line, fontsize=8.5, va="top", color=PALETTE["ink"])
            y -= 0.018
        pages.save(fig)
        plt.close(fig)


def _item_pages(pages: _Pages, ctx: dict[str, Any], out_dir: Path) -> None:
    """Item pages; one figure reused for all (texts and images swapped). The
    next page's plots are read in a background thread while this one is drawn."""
    from concurrent.futures import ThreadPoolExecutor

    import matplotlib.pyplot as plt
    import numpy as np

    from .plots import PALETTE

    items = ctx["items"]
    fig = _new_page()
    slots = []
    for k in range(ITEMS_PER_PAGE):
        top = 0.95 - k * 0.465
        head = fig.text(0.06, top, "", fontsize=11, weight="bold", color=PALETTE["ink"],
                        va="top", parse_math=False)
        body = fig.text(0.06, top - 0.025, "", fontsize=8, va="top", parse_math=False,
                        linespacing=1.35)
        ax = fig.add_axes((0.16, top - 0.445, 0.68, 0.33))
        ax.set_axis_off()
        im = ax.imshow(np.zeros((2, 2, 3), dtype=np.uint8), interpolation="none")
        slots.append((head, body, ax, im))
    page_no = fig.text(0.5, 0.018, "", fontsize=8, ha="center", color=PALETTE["muted"])
    fig.text(0.06, 0.975, _clip(f"characterize batch report: {pages.summary.spec.name}", 95),
             fontsize=7.5, color=PALETTE["muted"], va="top", parse_math=False)
    fig.text(0.94, 0.018, pages.written, fontsize=7, ha="right", color=PALETTE["muted"])
    n_pages = math.ceil(len(items) / ITEMS_PER_PAGE)

    def read(p: int) -> list[Any]:
        return [_read_png(out_dir, it.get("plot"))
                for it in items[p * ITEMS_PER_PAGE:(p + 1) * ITEMS_PER_PAGE]]

    reader = ThreadPoolExecutor(1)
    try:
        _draw_item_pages(pages, fig, slots, page_no, items, n_pages, reader, read)
    finally:
        reader.shutdown(wait=True, cancel_futures=True)
        plt.close(fig)


def _draw_item_pages(pages: _Pages, fig: Any, slots: list[Any], page_no: Any,
                     items: list[dict[str, Any]], n_pages: int, reader: Any, read: Any) -> None:
    ahead = reader.submit(read, 0) if n_pages else None
    for p in range(n_pages):
        assert ahead is not None
        imgs = ahead.result()
        ahead = reader.submit(read, p + 1) if p + 1 < n_pages else None
        pages.number += 1
        page_no.set_text(f"page {pages.number} of {pages.total}")
        chunk = items[p * ITEMS_PER_PAGE:(p + 1) * ITEMS_PER_PAGE]
        for k, (head, body, ax, im) in enumerate(slots):
            if k >= len(chunk):
                head.set_text("")
                body.set_text("")
                ax.set_visible(False)
                continue
            it = chunk[k]
            head.set_text(_clip(f"{it['index']}. {it['id']}  {_STATUS[it['status']]}", 80))
            body.set_text("\n".join(_item_lines(it)))
            img = imgs[k]
            if img is None:
                ax.set_visible(False)
            else:
                ax.set_visible(True)
                im.set_data(img)
                im.set_extent((-0.5, img.shape[1] - 0.5, img.shape[0] - 0.5, -0.5))
                ax.set_xlim(-0.5, img.shape[1] - 0.5)
                ax.set_ylim(img.shape[0] - 0.5, -0.5)
        pages.save(fig)


def _item_lines(it: dict[str, Any], width: int = 110, max_lines: int = 7) -> list[str]:
    first = (f"f0 {it['f0']} ± {it['f0_se']} Hz ({it['dev']} % from the target), Q {it['q']} "
             f"± {it['q_se']}" + (f", predicted f0 {it['pred']} Hz ({it['mismatch']} %)"
                                  if it["pred"] else "")
             + (f", predicted Q {it['pred_q']}" if it.get("pred_q") else "")
             ) if it["status"] != "error" else ""
    parts = [first] if first else []
    parts.append(f"recording {it['recording']}" + (f"; note: {it['note']}" if it["note"] else ""))
    parts += [f"- {r}" for r in it["reasons"]]
    parts += [f"warning: {w}" for w in it["warnings"]]
    if it["outlier"]:
        parts.append(f"outlier in {it['outlier']}")
    lines: list[str] = []
    for part in parts:
        lines += textwrap.wrap(part, width, subsequent_indent="  ") or [""]
    if len(lines) > max_lines:
        lines = lines[: max_lines - 1] + [f"... ({len(lines) - max_lines + 1} more lines in "
                                          "report.html)"]
    return lines


def _read_png(out_dir: Path, rel: str | None) -> Any:
    if not rel:
        return None
    import numpy as np
    from PIL import Image

    try:
        with Image.open(out_dir / rel) as im:
            rgb = im.convert("RGB")
    except (OSError, ValueError):
        return None
    size = (round(rgb.width * PDF_IMAGE_SCALE), round(rgb.height * PDF_IMAGE_SCALE))
    return np.asarray(rgb.resize(size, Image.Resampling.BOX))


def write_batch_pdf(summary: BatchSummary, out_dir: str | Path, path: str | Path) -> Path:
    """Write report.pdf atomically; the item plots are read from ``out_dir``."""
    from matplotlib.backends.backend_pdf import PdfPages

    from ..batchdata import timestamp_now
    from .html import context

    out = Path(out_dir)
    ctx = context(summary, out, {}, embed=False)
    total = page_count(len(summary.items))
    written = timestamp_now()

    def w(tmp: str) -> None:
        with PdfPages(tmp, metadata={"Title": f"Batch report: {summary.spec.name}",
                                     "Creator": f"characterize {__version__}"}) as pdf:
            pages = _Pages(pdf, summary, total, written)
            _cover(pages, ctx)
            _table_pages(pages, ctx)
            _plot_pages(pages, ctx)
            _item_pages(pages, ctx, out)
            if pages.number != total:  # pragma: no cover  (layout bug guard)
                raise RuntimeError(f"wrote {pages.number} pages, planned {total}")

    return atomic_write(path, w)
