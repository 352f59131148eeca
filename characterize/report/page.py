"""One-document reports (a fit, a series, a level study) as HTML and as PDF.

A :class:`Page` holds what such a report shows, already as display strings
(units in the labels): a title, lead sentences, an optional caution, tables,
one figure, the flags and the settings. :func:`render_html` turns it into a
self-contained page under the batch report's rules (:mod:`.html`: Jinja2 with
autoescaping for every user-provided string, the same Content-Security-Policy,
real ``<th>`` headers with ``scope``, alt text, flags written out in words);
:func:`write_pdf` draws the same content on A4 pages with matplotlib's
PdfPages, in the batch PDF's frame (:mod:`.pdf`: running head, "page i of N",
mathtext off for user text).
"""

from __future__ import annotations

import base64
import datetime as _dt
import math
import textwrap
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from .._version import __version__
from ..fileio import atomic_write, atomic_write_text
from .html import CSP, HEAD, _png_size


@dataclass(frozen=True)
class Table:
    """A table: the first cell of each row is its row header."""

    caption: str
    columns: tuple[str, ...]
    rows: tuple[tuple[str, ...], ...]


@dataclass(frozen=True)
class Figure:
    """A PNG image with its alt text (what it shows, in words) and caption."""

    png: bytes
    alt: str
    caption: str


@dataclass(frozen=True)
class Page:
    """Everything a one-document report shows (see the module docstring).

    ``flags`` are Flag objects or their dicts; ``settings`` (label, value)
    pairs; ``caution`` is shown before everything else when given.
    """

    kind: str
    title: str
    subtitle: str
    lead: tuple[str, ...] = ()
    caution: str | None = None
    tables: tuple[Table, ...] = ()
    figure: Figure | None = None
    flags: tuple[Any, ...] = ()
    settings: tuple[tuple[str, str], ...] = ()
    written: str = field(default_factory=lambda: _dt.datetime.now(_dt.timezone.utc)
                         .strftime("%Y-%m-%d %H:%M UTC"))

    def flag_dicts(self) -> list[dict[str, Any]]:
        return [f if isinstance(f, dict) else f.to_dict() for f in self.flags]


def fmt(v: Any, spec: str) -> str:
    """``format(v, spec)``; an em dash for None, NaN and infinities."""
    if v is None:
        return "—"
    try:
        x = float(v)
    except (TypeError, ValueError):
        return str(v)
    return format(x, spec) if math.isfinite(x) else "—"


def png_bytes(path: str | Path | None) -> bytes | None:
    """The bytes of a PNG file, or None when there is none."""
    if path is None:
        return None
    try:
        return Path(path).read_bytes()
    except OSError:
        return None


_TEMPLATE = HEAD + """<title>{{ kind|capitalize }}: {{ title }}</title>
<style>
body { background: #fbf8f1; color: #1c1c1c; font: 15px/1.45 system-ui, sans-serif;
       max-width: 60rem; margin: 0 auto; padding: 1rem; }
h1, h2 { color: #1f3b5b; } h1 { overflow-wrap: anywhere; }
table { border-collapse: collapse; margin: .5rem 0 1rem; }
caption { text-align: left; color: #5e574b; padding: .2rem 0; }
th, td { text-align: left; padding: .25rem .6rem; border-bottom: 1px solid #d9d2c3; }
th[scope=col] { background: #1f3b5b; color: #fff; } td.num { text-align: right; }
.scroll { overflow-x: auto; }
img { max-width: 100%; height: auto; } .sev { font-weight: 600; }
.caution { border: 2px solid #d4462a; background: #fbeee9; padding: .5rem .8rem; }
@media print { body { max-width: none; } .scroll { overflow: visible; } }
</style>
</head>
<body>
<header>
<p>characterize {{ kind }}</p>
<h1>{{ title }}</h1>
<p>{{ subtitle }} &middot; written {{ written }} by characterize {{ version }}</p>
</header>
<main>
{% if caution %}<p class="caution" role="note"><strong>{{ caution }}</strong></p>
{% endif %}{% for line in lead %}<p>{{ line }}</p>
{% endfor %}{% for t in tables %}<div class="scroll"><table>
<caption>{{ t.caption }}</caption>
<thead><tr>{% for c in t.columns %}<th scope="col">{{ c }}</th>{% endfor %}</tr></thead>
<tbody>
{% for r in t.rows %}<tr><th scope="row">{{ r[0] }}</th>
{%- for c in r[1:] %}<td class="num">{{ c }}</td>{% endfor %}</tr>
{% endfor %}</tbody>
</table></div>
{% endfor %}<h2>Flags</h2>
{% if flags %}<ul>{% for f in flags %}<li><span class="sev">{{ f.severity|upper }}</span>
{{ f.code }}: {{ f.message }}</li>{% endfor %}</ul>
{% else %}<p>None: no check raised a flag.</p>{% endif %}
{% if image %}<h2>Plot</h2>
<figure><img src="data:image/png;base64,{{ image }}" alt="{{ figure.alt }}"
{%- if width %} width="{{ width }}" height="{{ height }}"{% endif %}>
<figcaption>{{ figure.caption }}</figcaption></figure>
{% endif %}{% if settings %}<h2>Settings</h2>
<table><tbody>
{% for k, v in settings %}<tr><th scope="row">{{ k }}</th><td>{{ v }}</td></tr>
{% endfor %}</tbody></table>
{% endif %}</main>
</body>
</html>
"""


def render_html(page: Page) -> str:
    """The page as one self-contained HTML string (the figure embedded as a data URI)."""
    import jinja2

    png = page.figure.png if page.figure is not None else b""
    w, h = _png_size(png)
    env = jinja2.Environment(autoescape=True, undefined=jinja2.StrictUndefined)
    return env.from_string(_TEMPLATE).render(
        csp=CSP, version=__version__, kind=page.kind, title=page.title,
        subtitle=page.subtitle, written=page.written, caution=page.caution,
        lead=page.lead, tables=page.tables, flags=page.flag_dicts(),
        settings=page.settings, figure=page.figure,
        image=base64.b64encode(png).decode("ascii") if png else None, width=w, height=h)


def write_html(path: str | Path, page: Page) -> Path:
    """Write :func:`render_html` atomically."""
    return atomic_write_text(path, render_html(page))


# ------------------------------------------------------------------------ PDF

#: Text lines on one A4 page of a one-document PDF (8.5 pt, 0.0165 of the page each).
PDF_LINES_PER_PAGE = 52
_WRAP = 100  # characters a line at 8.5 pt across the page
PDF_HEADING_MIN = 10  # narrowest table column (characters) before its heading wraps
#: Characters of a monospace table line at 7.2 pt across the page's text width
#: (0.86 of 8.27 in = 511 pt; DejaVu Sans Mono advances 0.602 em: 118 characters),
#: with a margin.
PDF_TABLE_CHARS = 110
_LINE_DY = 0.0165  # height of an 8.5 pt line, as a fraction of the page
_TEXT_HEIGHT = 0.945 - 0.05  # from the first line's top to above the page number


def _column_widths(natural: list[int], budget: int) -> list[int]:
    """Column widths (characters) within ``budget`` (2 spaces between columns):
    the natural widths when they fit, else the widest columns narrowed in turn,
    never below PDF_HEADING_MIN."""
    widths = list(natural)
    while sum(widths) + 2 * (len(widths) - 1) > budget:
        k = max(range(len(widths)), key=lambda i: widths[i])
        if widths[k] <= PDF_HEADING_MIN:
            break
        widths[k] -= 1
    return widths


def _table_lines(t: Table) -> list[tuple[str, dict[str, Any]]]:
    """A table as monospace lines: each column as wide as its widest cell, narrowed
    to fit the page when needed; a cell longer than its column wraps onto more
    lines of its row (nothing is cut); headings wrap the same way."""
    ncol = len(t.columns)
    natural = [max([len(r[k]) for r in t.rows if k < len(r)]
                   + [min(len(t.columns[k]), 18), PDF_HEADING_MIN // 2])
               for k in range(ncol)]
    widths = _column_widths(natural, PDF_TABLE_CHARS)

    def wrap(text: str, w: int) -> list[str]:
        return textwrap.wrap(text, w, break_long_words=True, break_on_hyphens=False) or [""]

    def lines_of(cells: tuple[str, ...] | list[str]) -> list[str]:
        parts = [wrap(c, w) for c, w in zip(cells, widths, strict=False)]
        parts += [[""]] * (ncol - len(parts))
        out = []
        for i in range(max(len(p) for p in parts)):
            out.append("  ".join(format(p[i] if i < len(p) else "",
                                        f"{'<' if k == 0 else '>'}{widths[k]}")
                                 for k, p in enumerate(parts)).rstrip())
        return out

    mono = {"family": "DejaVu Sans Mono", "fontsize": 7.2}
    out: list[tuple[str, dict[str, Any]]] = [(w, {"weight": "bold"})
                                             for w in textwrap.wrap(t.caption, _WRAP - 10)]
    out += [(ln, {**mono, "weight": "bold"}) for ln in lines_of(t.columns)]
    for r in t.rows:
        out += [(ln, mono) for ln in lines_of(r)]
    return out + [("", {})]


def _line_height(kw: dict[str, Any]) -> float:
    return _LINE_DY * kw.get("fontsize", 8.5) / 8.5


def _pdf_chunks(lines: list[tuple[str, dict[str, Any]]]
                ) -> list[list[tuple[str, dict[str, Any]]]]:
    """The text lines cut into pages by their heights (a heading takes more room)."""
    chunks: list[list[tuple[str, dict[str, Any]]]] = [[]]
    used = 0.0
    for ln in lines:
        h = _line_height(ln[1])
        if used + h > _TEXT_HEIGHT and chunks[-1]:
            chunks.append([])
            used = 0.0
        chunks[-1].append(ln)
        used += h
    return chunks


def _pdf_lines(page: Page) -> list[tuple[str, dict[str, Any]]]:
    from .plots import PALETTE

    def para(text: str, kw: dict[str, Any] | None = None, indent: str = "",
             width: int = _WRAP) -> list[tuple[str, dict[str, Any]]]:
        return [(w, kw or {}) for w in textwrap.wrap(text, width, subsequent_indent=indent)
                or [""]]

    lines: list[tuple[str, dict[str, Any]]] = [
        (f"characterize {page.kind}", {"color": PALETTE["muted"]}),
    ]
    lines += [(w, {"fontsize": 15, "color": PALETTE["ink"], "weight": "bold"})
              for w in textwrap.wrap(page.title, 55, break_long_words=True) or [""]]
    lines.append(("", {}))
    lines += para(f"{page.subtitle}; written {page.written} by characterize {__version__}",
                  {"color": PALETTE["muted"]})
    lines.append(("", {}))
    if page.caution:
        lines += para(page.caution, {"color": PALETTE["fit"], "weight": "bold"}, width=95)
        lines.append(("", {}))
    for text in page.lead:
        lines += para(text, indent="  ")
    lines.append(("", {}))
    for t in page.tables:
        lines += _table_lines(t)
    lines.append(("Flags", {"fontsize": 11, "color": PALETTE["ink"], "weight": "bold"}))
    flags = page.flag_dicts()
    if not flags:
        lines.append(("None: no check raised a flag.", {}))
    for f in flags:
        lines += para(f"{f['severity'].upper()} {f['code']}: {f['message']}", indent="    ")
    if page.settings:
        lines += [("", {}), ("Settings", {"fontsize": 11, "color": PALETTE["ink"],
                                          "weight": "bold"})]
        for k, v in page.settings:
            lines += para(f"{k}: {v}", indent="    ")
    return lines


def pdf_page_count(page: Page) -> int:
    """Pages :func:`write_pdf` writes: the text pages, and one for the figure."""
    return len(_pdf_chunks(_pdf_lines(page))) + (page.figure is not None)


def write_pdf(path: str | Path, page: Page) -> Path:
    """Write the page as an A4 PDF atomically: the text first (tables as
    monospace lines), then the figure on a page of its own with its caption
    and alt text."""
    import matplotlib.pyplot as plt
    from matplotlib.backends.backend_pdf import PdfPages

    from .pdf import _new_page, _write_lines
    from .plots import PALETTE

    lines = _pdf_lines(page)
    chunks = _pdf_chunks(lines)
    total = pdf_page_count(page)
    head = f"characterize {page.kind}: {page.title}"[:95]

    def frame(fig: Any, number: int) -> None:
        fig.text(0.06, 0.975, head, fontsize=7.5, color=PALETTE["muted"], va="top",
                 parse_math=False)
        fig.text(0.5, 0.018, f"page {number} of {total}", fontsize=8, ha="center",
                 color=PALETTE["muted"])

    def w(tmp: str) -> None:
        with PdfPages(tmp, metadata={"Title": f"{page.kind}: {page.title}",
                                     "Creator": f"characterize {__version__}"}) as pdf:
            number = 0
            for chunk in chunks:
                fig = _new_page()
                number += 1
                frame(fig, number)
                _write_lines(fig, 0.07, 0.945, chunk)
                pdf.savefig(fig, facecolor=fig.get_facecolor())
                plt.close(fig)
            if page.figure is not None:
                fig = _new_page()
                number += 1
                frame(fig, number)
                img = _decode_png(page.figure.png)
                if img is not None:
                    h_in = min(0.6, 0.86 * img.shape[0] / img.shape[1] * 8.27 / 11.69)
                    ax = fig.add_axes((0.07, 0.93 - h_in, 0.86, h_in))
                    ax.set_axis_off()
                    ax.imshow(img, interpolation="antialiased")
                    y = 0.91 - h_in
                else:
                    y = 0.93
                _write_lines(fig, 0.07, y, [(t, {}) for t in
                                            textwrap.wrap(page.figure.caption, _WRAP)]
                             + [("", {})] + [(t, {"color": PALETTE["muted"]}) for t in
                                             textwrap.wrap(page.figure.alt, _WRAP)])
                pdf.savefig(fig, facecolor=fig.get_facecolor())
                plt.close(fig)
            if number != total:  # pragma: no cover  (layout bug guard)
                raise RuntimeError(f"wrote {number} pages, planned {total}")

    return atomic_write(path, w)


def _decode_png(data: bytes) -> Any:
    import io

    import numpy as np
    from PIL import Image

    try:
        with Image.open(io.BytesIO(data)) as im:
            return np.asarray(im.convert("RGB"))
    except (OSError, ValueError):
        return None
