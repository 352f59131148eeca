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

from .. import __version__
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


def _table_lines(t: Table) -> list[tuple[str, dict[str, Any]]]:
    """A table as monospace lines: each column as wide as its widest cell (at most
    28 characters), headings wrapped onto up to three lines to fit."""
    from .pdf import _clip

    widths = [min(28, max([len(r[k]) for r in t.rows if k < len(r)] + [PDF_HEADING_MIN]))
              for k in range(len(t.columns))]
    heads = [textwrap.wrap(c, w)[:3] or [""] for c, w in zip(t.columns, widths, strict=True)]

    def line(r: tuple[str, ...] | list[str]) -> str:
        return "  ".join(format(_clip(c, w), f"{'<' if k == 0 else '>'}{w}")
                         for k, (c, w) in enumerate(zip(r, widths, strict=True))).rstrip()

    mono = {"family": "DejaVu Sans Mono", "fontsize": 7.2}
    out: list[tuple[str, dict[str, Any]]] = [(w, {"weight": "bold"})
                                             for w in textwrap.wrap(t.caption, _WRAP - 10)]
    for i in range(max(len(h) for h in heads)):
        out.append((line([h[i] if i < len(h) else "" for h in heads]),
                    {**mono, "weight": "bold"}))
    out += [(line(r), mono) for r in t.rows]
    return out + [("", {})]


def _pdf_lines(page: Page) -> list[tuple[str, dict[str, Any]]]:
    from .plots import PALETTE

    def para(text: str, kw: dict[str, Any] | None = None, indent: str = "",
             width: int = _WRAP) -> list[tuple[str, dict[str, Any]]]:
        return [(w, kw or {}) for w in textwrap.wrap(text, width, subsequent_indent=indent)
                or [""]]

    lines: list[tuple[str, dict[str, Any]]] = [
        (f"characterize {page.kind}", {"color": PALETTE["muted"]}),
        (page.title[:60], {"fontsize": 15, "color": PALETTE["ink"], "weight": "bold"}),
        ("", {}),
    ]
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
    n = len(_pdf_lines(page))
    return max(1, math.ceil(n / PDF_LINES_PER_PAGE)) + (page.figure is not None)


def write_pdf(path: str | Path, page: Page) -> Path:
    """Write the page as an A4 PDF atomically: the text first (tables as
    monospace lines), then the figure on a page of its own with its caption
    and alt text."""
    import matplotlib.pyplot as plt
    from matplotlib.backends.backend_pdf import PdfPages

    from .pdf import _new_page, _write_lines
    from .plots import PALETTE

    lines = _pdf_lines(page)
    chunks = [lines[i:i + PDF_LINES_PER_PAGE] for i in range(0, len(lines), PDF_LINES_PER_PAGE)]
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
