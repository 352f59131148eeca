"""report.html: one self-contained page (no network, no scripts) for a batch.

Jinja2 with autoescaping renders every user-provided string (ids, notes, file
names, spec name) as text; a Content-Security-Policy forbids scripts and any
load that is not an embedded ``data:`` image, so even a string that slipped
through could not run or call out. Plots are PNG embedded as base64.

Accessibility and reading: real ``<th>`` headers with ``scope``, a caption,
alt text on every image, pass/fail written out with a symbol (colour is only
a second cue), a layout that reflows on a phone (the wide table scrolls in
its own box) and print rules (no scroll box, sections kept whole).
"""

from __future__ import annotations

import base64
import math
from pathlib import Path
from typing import TYPE_CHECKING, Any

from .._version import __version__
from ..fileio import atomic_write_text

if TYPE_CHECKING:
    from ..batchdata import BatchSummary

STATUS_TEXT = {"pass": "✓ PASS", "fail": "✗ FAIL", "error": "⚠ ERROR"}

CSP = "default-src 'none'; img-src data:; style-src 'unsafe-inline'"

#: The start of every report page: UTF-8, phone viewport, the CSP, the generator.
HEAD = """<!DOCTYPE html>
<html lang="en">
<head>
<meta charset="utf-8">
<meta name="viewport" content="width=device-width, initial-scale=1">
<meta http-equiv="Content-Security-Policy" content="{{ csp|safe }}">
<meta name="generator" content="characterize {{ version }}">
"""

_TEMPLATE = HEAD + """<title>Batch report: {{ spec.name }}</title>
<style>
:root { --paper: #fbf8f1; --ink: #1f3b5b; --fit: #d4462a; --band: #eadcb5;
        --grid: #d9d2c3; --muted: #5e574b; --pass: #2f6b3a; }
* { box-sizing: border-box; }
body { margin: 0; background: var(--paper); color: #222; line-height: 1.45;
       font: 16px/1.45 system-ui, -apple-system, "Segoe UI", Roboto, sans-serif; }
header, main, footer { max-width: 68rem; margin: 0 auto; padding: 0 1rem; }
header { padding-top: 1rem; border-bottom: 2px solid var(--ink); }
h1 { color: var(--ink); font-size: 1.5rem; margin: .3rem 0; overflow-wrap: anywhere; }
h2 { color: var(--ink); font-size: 1.2rem; margin-top: 2rem;
     border-bottom: 1px solid var(--grid); }
h3 { font-size: 1.05rem; margin: 0 0 .4rem; overflow-wrap: anywhere; }
.lead { font-size: 1.1rem; }
dl.meta { display: grid; grid-template-columns: max-content 1fr; gap: .15rem 1rem;
          margin: .6rem 0 1rem; }
dl.meta dt { font-weight: 600; color: var(--muted); }
dl.meta dd { margin: 0; overflow-wrap: anywhere; }
.scroll { overflow-x: auto; border: 1px solid var(--grid); background: #fff; }
table { border-collapse: collapse; width: 100%; font-size: .9rem; }
caption { text-align: left; padding: .4rem .5rem; color: var(--muted); caption-side: top; }
th, td { padding: .3rem .5rem; border-bottom: 1px solid var(--grid); text-align: left;
         vertical-align: top; }
thead th { background: var(--ink); color: #fff; position: sticky; top: 0; }
td.num { text-align: right; font-variant-numeric: tabular-nums; white-space: nowrap; }
tbody th { font-weight: 600; overflow-wrap: anywhere; min-width: 6rem; }
.status { font-weight: 700; white-space: nowrap; padding: .05rem .35rem;
          border-radius: .2rem; border: 1px solid currentColor; }
.status-pass { color: var(--pass); }
.status-fail { color: var(--fit); border-style: double; border-width: 3px; }
.status-error { color: #7a4f00; border-style: dashed; }
tr.row-fail, tr.row-error { background: #fbeee9; }
.reasons { margin: 0; padding-left: 1.1rem; }
.small { font-size: .85rem; color: var(--muted); }
table.stats { width: auto; min-width: 18rem; }
.cols { display: flex; flex-wrap: wrap; gap: 0 2rem; align-items: flex-start; }
.cols > div { flex: 1 1 18rem; }
table.stats td { text-align: right; font-variant-numeric: tabular-nums; }
figure { margin: 1rem 0; }
figure img, article img { max-width: 100%; height: auto; display: block;
                          border: 1px solid var(--grid); background: var(--paper); }
figcaption { font-size: .85rem; color: var(--muted); }
article { border-top: 1px solid var(--grid); padding: 1rem 0; }
a { color: var(--ink); }
footer { margin-top: 2rem; padding-bottom: 2rem; color: var(--muted); font-size: .85rem; }
@media (max-width: 40rem) {
  body { font-size: 15px; }
  dl.meta { grid-template-columns: 1fr; }
  dl.meta dd { margin-bottom: .3rem; }
  table { font-size: .8rem; }
}
@media print {
  body { background: #fff; font-size: 10pt; }
  header, main, footer { max-width: none; }
  .scroll { overflow: visible; border: 0; }
  thead th { position: static; background: #fff; color: #000; border-bottom: 2px solid #000; }
  tr.row-fail, tr.row-error { background: none; }
  a { color: inherit; text-decoration: none; }
  article, figure, table.stats { break-inside: avoid; }
  #each { break-before: page; }
}
</style>
</head>
<body>
<header>
<p class="small">characterize batch report</p>
<h1>{{ spec.name }}</h1>
<p class="lead"><strong>{{ counts.n_pass }} of {{ counts.n_items }} passed</strong>
({{ pass_rate }}); {{ counts.n_fail }} failed the spec, {{ counts.n_error }} without a
result.</p>
<dl class="meta">
<dt>Measured</dt><dd>{{ counts.n_items }} items from {{ manifest }}
 ({{ methods }})</dd>
<dt>When</dt><dd>batch run {{ run.started }} to {{ run.finished }};
 report written {{ written }}</dd>
<dt>Spec</dt><dd>{{ spec.path }}</dd>
<dt>f0</dt><dd>target {{ target }}, tolerance ±{{ tolerance }}
 ({{ spec.f0_tolerance_text }}): {{ band }}</dd>
<dt>Q</dt><dd>{{ q_limits }}</dd>
<dt>Prediction</dt><dd>{{ mismatch_rule }}</dd>
<dt>Flags that fail</dt><dd>{{ fail_flags }}</dd>
<dt>Flags that warn</dt><dd>{{ warn_flags }}</dd>
<dt>Object</dt><dd>{{ object_text }}</dd>
<dt>Defaults</dt><dd>{{ defaults }}</dd>
<dt>Run</dt><dd>{{ run_text }}; characterize {{ version }}</dd>
</dl>
</header>
<main>
<nav aria-label="Sections" class="small"><a href="#summary">Summary</a> ·
<a href="#items">Items</a> · <a href="#spread">Spread</a> ·
<a href="#each">Each item</a></nav>

<section id="summary" aria-labelledby="summary-h">
<h2 id="summary-h">Summary</h2>
<div class="cols">
<table class="stats">
<caption>Batch statistics over the {{ counts.n_analyzed }} items with a result</caption>
<thead><tr><th scope="col">quantity</th><th scope="col">value</th></tr></thead>
<tbody>
{% for label, value in stats_rows %}<tr><th scope="row">{{ label }}</th><td>{{ value }}</td></tr>
{% endfor %}</tbody>
</table>
<div>
{% if outliers %}
<table class="stats" id="outliers-table">
<caption>Outliers</caption>
<thead><tr><th scope="col">item</th><th scope="col">quantity</th><th scope="col">value</th>
<th scope="col">modified z</th></tr></thead>
<tbody>
{% for o in outliers %}<tr><th scope="row"><a href="#item-{{ o.index }}">{{ o.id }}</a></th>
<td>{{ o.quantity }}</td><td>{{ o.value }}</td><td>{{ o.z }}</td></tr>
{% endfor %}</tbody>
</table>
{% else %}<p>No outliers.</p>{% endif %}
<p class="small">Cpk = min(USL − mean, mean − LSL) / (3 s) against the f0 tolerance, with the
sample standard deviation s (common practice in quality engineering; Kane 1986). Control
limits: individuals chart, σ from the mean moving range / 1.128 (Montgomery 2009).
Outliers: modified z-score beyond {{ outlier_z }} (Iglewicz &amp; Hoaglin 1993).</p>
</div>
</div>
</section>

<section id="items" aria-labelledby="items-h">
<h2 id="items-h">Items</h2>
<div class="scroll" role="region" aria-labelledby="items-caption" tabindex="0">
<table id="items-table">
<caption id="items-caption">{{ counts.n_items }} items in manifest order; status against the
spec ({{ band }} for f0)</caption>
<thead><tr>
<th scope="col">#</th><th scope="col">id</th><th scope="col">status</th>
<th scope="col">f0 (Hz)</th><th scope="col">f0 − target (%)</th><th scope="col">Q</th>
<th scope="col">vs prediction (%)</th><th scope="col">why / warnings</th>
<th scope="col">recording</th><th scope="col">note</th>
</tr></thead>
<tbody>
{% for it in items %}<tr class="row-{{ it.status }}">
<td class="num">{{ it.index }}</td>
<th scope="row"><a href="#item-{{ it.index }}">{{ it.id }}</a></th>
<td><span class="status status-{{ it.status }}">{{ it.status_text }}</span></td>
<td class="num">{{ it.f0 }}</td><td class="num">{{ it.dev }}</td><td class="num">{{ it.q }}</td>
<td class="num">{{ it.mismatch }}</td>
<td>{% if it.reasons %}<ul class="reasons">
{% for r in it.reasons %}<li>{{ r }}</li>{% endfor %}</ul>{% endif %}
{% if it.warnings %}<span class="small">warnings: {{ it.warnings|join("; ") }}</span>
{% endif %}
{% if it.outlier %}<span class="small">outlier in {{ it.outlier }}</span>{% endif %}</td>
<td class="small">{{ it.recording }}</td><td>{{ it.note }}</td>
</tr>
{% endfor %}</tbody>
</table>
</div>
</section>

<section id="spread" aria-labelledby="spread-h">
<h2 id="spread-h">Spread</h2>
{% for fig in figures %}<figure>
<img src="data:image/png;base64,{{ fig.data }}" alt="{{ fig.alt }}"
 width="{{ fig.width }}" height="{{ fig.height }}">
<figcaption>{{ fig.caption }}</figcaption>
</figure>
{% endfor %}
</section>

<section id="each" aria-labelledby="each-h">
<h2 id="each-h">Each item</h2>
{% for it in items %}<article id="item-{{ it.index }}" aria-labelledby="item-h-{{ it.index }}">
<h3 id="item-h-{{ it.index }}">{{ it.index }}. {{ it.id }} —
<span class="status status-{{ it.status }}">{{ it.status_text }}</span></h3>
<p>{% if it.status != "error" %}f0 {{ it.f0 }} ± {{ it.f0_se }} Hz,
Q {{ it.q }} ± {{ it.q_se }}{% if it.pred %}, predicted f0 {{ it.pred }} Hz
({{ it.mismatch }} %){% endif %}{% if it.pred_q %}, predicted Q {{ it.pred_q }}{% endif %};
{% endif %}recording
<span class="small">{{ it.recording }}</span>{% if it.note %}; note: {{ it.note }}{% endif %}</p>
{% if it.reasons %}<ul class="reasons">
{% for r in it.reasons %}<li>{{ r }}</li>{% endfor %}</ul>{% endif %}
{% if it.warnings %}<p class="small">warnings: {{ it.warnings|join("; ") }}</p>{% endif %}
{% if it.img %}<img src="data:image/png;base64,{{ it.img }}" alt="{{ it.alt }}"
 width="{{ it.img_w }}" height="{{ it.img_h }}">
{% elif it.status != "error" %}<p class="small">No response plot for this item.</p>{% endif %}
</article>
{% endfor %}
</section>
</main>
<footer>
<p>Written by characterize {{ version }} from the item documents in items/ (schema
characterize.result/1); the same content is in report.pdf, summary.csv and summary.json.</p>
</footer>
</body>
</html>
"""


def _f(v: float | None, fmt: str) -> str:
    if v is None or (isinstance(v, float) and not math.isfinite(v)):
        return "—"
    return format(v, fmt)


def _png_size(data: bytes) -> tuple[int, int]:
    """Width and height from a PNG's IHDR chunk (0, 0 if not a PNG)."""
    if data[:8] != b"\x89PNG\r\n\x1a\n" or len(data) < 24:
        return 0, 0
    return int.from_bytes(data[16:20], "big"), int.from_bytes(data[20:24], "big")


def _flag_list(codes: tuple[str, ...]) -> str:
    return ", ".join(codes) if codes else "none listed"


def context(summary: BatchSummary, out_dir: str | Path, figures: dict[str, bytes], *,
            embed: bool = True) -> dict[str, Any]:
    """Everything the template shows, as display strings (units in the labels).

    ``embed=False`` leaves the item plots out (``plot`` keeps their path).
    """
    from ..batchdata import timestamp_now
    from ..stats import OUTLIER_MODIFIED_Z
    from .values import object_text_from_file, q_predicted_text

    spec, st = summary.spec, summary.stats
    out = Path(out_dir)
    target = spec.f0_target_hz
    items = []
    for it in summary.items:
        dev = None if it.f0_hz is None else 100 * (it.f0_hz - target) / target
        img = b""
        if it.plot and embed:
            try:
                img = (out / it.plot).read_bytes()
            except OSError:
                img = b""
        w, h = _png_size(img)
        items.append({
            "index": it.index, "id": it.id, "status": it.status,
            "status_text": STATUS_TEXT[it.status], "f0": _f(it.f0_hz, ".2f"),
            "f0_se": _f(it.f0_stderr_hz, ".3f"), "q": _f(it.q, ".1f"),
            "q_se": _f(it.q_stderr, ".2f"), "dev": _f(dev, "+.2f"),
            "pred": None if it.predicted_f0_hz is None else _f(it.predicted_f0_hz, ".2f"),
            "pred_q": q_predicted_text({"q_predicted": it.predicted_q,
                                        "q_predicted_range": it.predicted_q_range}),
            "mismatch": _f(None if it.mismatch is None else 100 * it.mismatch, "+.2f"),
            "reasons": list(it.reasons), "warnings": list(it.warnings),
            "outlier": ", ".join(it.outlier), "recording": it.recording, "note": it.note,
            "plot": it.plot,
            "img": base64.b64encode(img).decode("ascii") if w else "", "img_w": w, "img_h": h,
            "alt": (f"Response of item {it.id}: measured inside/outside transfer function "
                    f"(magnitude, phase and fit residuals against frequency in Hz) with the "
                    f"fitted model, f0 {_f(it.f0_hz, '.2f')} Hz, Q {_f(it.q, '.1f')}"),
        })
    counts = {"n_items": st.n_items, "n_pass": st.n_pass, "n_fail": st.n_fail,
              "n_error": st.n_error, "n_analyzed": st.n_analyzed}
    stats_rows = [
        ("items", str(st.n_items)), ("passed", str(st.n_pass)),
        ("failed the spec", str(st.n_fail)), ("without a result", str(st.n_error)),
        ("pass rate", f"{100 * st.pass_rate:.1f} %"),
        ("f0 mean (Hz)", _f(st.f0_mean_hz, ".3f")),
        ("f0 standard deviation (Hz)", _f(st.f0_std_hz, ".3f")),
        ("f0 range (Hz)", f"{_f(st.f0_min_hz, '.2f')} to {_f(st.f0_max_hz, '.2f')}"),
        ("Q mean", _f(st.q_mean, ".2f")), ("Q standard deviation", _f(st.q_std, ".2f")),
        ("Q range", f"{_f(st.q_min, '.1f')} to {_f(st.q_max, '.1f')}"),
        ("Cp (f0)", _f(st.cp, ".2f")), ("Cpk (f0)", _f(st.cpk, ".2f")),
        ("f0 control limits (Hz)",
         f"{_f(st.control_lcl_hz, '.2f')} to {_f(st.control_ucl_hz, '.2f')}"),
    ]
    band = f"{spec.f0_lower_hz:.2f} to {spec.f0_upper_hz:.2f} Hz"
    n_an = st.n_analyzed
    fig_meta = {
        "f0_histogram": (
            f"Histogram of f0 in Hz for the {n_an} items with a result: f0 within tolerance "
            f"solid, outside it hatched; tolerance band {band} shaded, target "
            f"{target:.2f} Hz dashed; mean {_f(st.f0_mean_hz, '.2f')} Hz, standard deviation "
            f"{_f(st.f0_std_hz, '.3f')} Hz.",
            "f0 of the items with a result, against the tolerance band."),
        "q_histogram": (
            f"Histogram of Q for the {n_an} items with a result: Q within the limits solid, "
            f"outside them hatched; "
            f"allowed range shaded; mean {_f(st.q_mean, '.2f')}, standard deviation "
            f"{_f(st.q_std, '.2f')}.",
            "Q of the items with a result, against the allowed range."),
        "control_chart": (
            f"Control chart of f0 in Hz against manifest order for {n_an} items: centre line "
            f"{_f(st.control_centre_hz, '.2f')} Hz, control limits "
            f"{_f(st.control_lcl_hz, '.2f')} to {_f(st.control_ucl_hz, '.2f')} Hz, tolerance "
            f"band {band} shaded; failed items as crosses, items without a result as "
            f"triangles along the bottom.",
            "f0 in manifest order (individuals chart, 3-sigma limits from the moving range)."),
    }
    figs = []
    for name, (alt, caption) in fig_meta.items():
        data = figures.get(name, b"")
        w, h = _png_size(data)
        figs.append({"name": name, "data": base64.b64encode(data).decode("ascii"), "alt": alt,
                     "caption": caption, "width": w, "height": h})
    methods: dict[str, int] = {}
    for it in summary.items:
        if it.method:
            methods[it.method] = methods.get(it.method, 0) + 1
    run = summary.run
    if spec.q_min is None and spec.q_max is None:
        q_limits = "no limits"
    else:
        q_limits = " and ".join(
            x for x in (None if spec.q_min is None else f"at least {spec.q_min:g}",
                        None if spec.q_max is None else f"at most {spec.q_max:g}") if x)
    defaults = (f"object {spec.default_object or 'none'}, sweep "
                f"{spec.default_sweep or 'none (cross-spectral H1)'}, channels inside "
                f"{spec.default_inside}, outside {spec.default_outside}")
    return {
        "csp": CSP, "version": __version__, "spec": spec, "counts": counts,
        "pass_rate": f"pass rate {100 * st.pass_rate:.1f} %", "manifest": summary.manifest,
        "methods": ", ".join(f"{k}: {v}" for k, v in methods.items()) or "no results",
        "run": {"started": run.get("started", "—"), "finished": run.get("finished", "—")},
        "written": timestamp_now(), "target": f"{target:.2f} Hz",
        "tolerance": f"{spec.f0_tolerance_hz:.2f} Hz", "band": band, "q_limits": q_limits,
        "mismatch_rule": ("not checked" if spec.max_mismatch is None else
                          f"measured f0 within ±{100 * spec.max_mismatch:g} % of the "
                          "geometry's prediction"),
        "fail_flags": _flag_list(spec.fail_flags) + " (and any flag of severity error)",
        "warn_flags": _flag_list(spec.warn_flags) + " (and any other warning)",
        "defaults": defaults, "object_text": object_text_from_file(spec.default_object),
        "run_text": (f"{run.get('workers', 0)} worker processes, "
                     f"{run.get('computed_items', 0)} items computed, "
                     f"{run.get('kept_items', 0)} kept from an earlier run"),
        "stats_rows": stats_rows, "outlier_z": f"{OUTLIER_MODIFIED_Z:g}",
        "outliers": [{"id": o.id, "index": o.index, "quantity": "f0 (Hz)" if o.quantity == "f0"
                      else "Q", "value": f"{o.value:.3f}", "z": f"{o.modified_z:+.1f}"}
                     for o in st.outliers],
        "items": items, "figures": figs,
    }


def render_batch_html(summary: BatchSummary, out_dir: str | Path,
                      figures: dict[str, bytes]) -> str:
    """The report page as a string (``figures``: batch plot name -> PNG bytes)."""
    import jinja2

    env = jinja2.Environment(autoescape=True, undefined=jinja2.StrictUndefined,
                             trim_blocks=False, lstrip_blocks=False)
    return env.from_string(_TEMPLATE).render(**context(summary, out_dir, figures))


def write_batch_html(summary: BatchSummary, out_dir: str | Path, path: str | Path) -> Path:
    """Draw the batch plots (DIR/plots/*.png) and write the report page atomically."""
    from .batch_plots import write_batch_plots

    plots = write_batch_plots(summary, Path(out_dir) / "plots")
    figures = {name: p.read_bytes() for name, p in plots.items()}
    return atomic_write_text(path, render_batch_html(summary, out_dir, figures))
