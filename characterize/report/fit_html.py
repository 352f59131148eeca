"""report.html for one fit: a self-contained page (no network, no scripts) to file.

Same rules as the batch report (:mod:`.html`): Jinja2 with autoescaping for
every user-provided string, a Content-Security-Policy that allows only
embedded images, real table headers, alt text, flags written out in words.
"""

from __future__ import annotations

import base64
import datetime as _dt
from pathlib import Path
from typing import Any

from .. import __version__
from ..fileio import atomic_write_text
from .html import CSP

_TEMPLATE = """<!DOCTYPE html>
<html lang="en">
<head>
<meta charset="utf-8">
<meta name="viewport" content="width=device-width, initial-scale=1">
<meta http-equiv="Content-Security-Policy" content="{{ csp|safe }}">
<meta name="generator" content="characterize {{ version }}">
<title>Fit report: {{ name }}</title>
<style>
body { background: #fbf8f1; color: #1c1c1c; font: 15px/1.45 system-ui, sans-serif;
       max-width: 60rem; margin: 0 auto; padding: 1rem; }
h1, h2 { color: #1f3b5b; } table { border-collapse: collapse; margin: .5rem 0 1rem; }
th, td { text-align: left; padding: .25rem .6rem; border-bottom: 1px solid #d9d2c3; }
th[scope=col] { background: #1f3b5b; color: #fff; } td.num { text-align: right; }
img { max-width: 100%; height: auto; } .sev { font-weight: 600; }
@media print { body { max-width: none; } }
</style>
</head>
<body>
<header>
<p>characterize fit report</p>
<h1>{{ name }}</h1>
<p>{{ recording }} &middot; {{ method }} &middot; written {{ when }} by characterize {{ version }}</p>
</header>
<main>
<h2>Result</h2>
<table>
<caption>Fitted damped oscillator (1-sigma standard errors)</caption>
<thead><tr><th scope="col">quantity</th><th scope="col">value</th><th scope="col">standard error</th></tr></thead>
<tbody>
{% for r in rows %}<tr><th scope="row">{{ r[0] }}</th><td class="num">{{ r[1] }}</td><td class="num">{{ r[2] }}</td></tr>
{% endfor %}</tbody>
</table>
<h2>Flags</h2>
{% if flags %}<ul>{% for f in flags %}<li><span class="sev">{{ f.severity|upper }}</span> {{ f.code }}: {{ f.message }}</li>{% endfor %}</ul>
{% else %}<p>None: no check raised a flag.</p>{% endif %}
{% if image %}<h2>Response</h2>
<figure><img src="data:image/png;base64,{{ image }}" alt="Magnitude and phase of the measured inside/outside transfer function of {{ name }} with the fitted model{{ ' and the geometry prediction' if predicted else '' }}, the fit band shaded, and the normalised residuals below">
<figcaption>Measured H (points), fit (line){{ ', geometry prediction (dashed)' if predicted else '' }}; fit band shaded.</figcaption></figure>{% endif %}
<h2>Settings</h2>
<table><tbody>
{% for k, v in settings %}<tr><th scope="row">{{ k }}</th><td>{{ v }}</td></tr>
{% endfor %}</tbody></table>
</main>
</body>
</html>
"""


def _fmt(v: Any, spec: str) -> str:
    if v is None:
        return "—"
    try:
        return format(float(v), spec)
    except (TypeError, ValueError):
        return str(v)


def render_fit_html(doc: dict[str, Any], png: bytes | None = None) -> str:
    """The page for one result document (and its response plot as PNG bytes)."""
    import jinja2

    fit, inp, air = doc["fit"], doc["input"], doc["air"]
    obj = doc.get("object") or {}
    rows = [("f0 (Hz)", _fmt(fit["f0_hz"], ".3f"), _fmt(fit.get("f0_stderr_hz"), ".2g")),
            ("Q", _fmt(fit["q"], ".2f"), _fmt(fit.get("q_stderr"), ".2g")),
            ("gain", _fmt(fit.get("gain"), ".4f"), _fmt(fit.get("gain_stderr"), ".2g")),
            ("delay (µs)", _fmt(1e6 * (fit.get("delay_s") or 0.0), ".1f"),
             _fmt(None if fit.get("delay_stderr_s") is None else 1e6 * fit["delay_stderr_s"],
                  ".2g")),
            ("reduced chi-square", _fmt(fit.get("reduced_chi2"), ".2f"), "")]
    pred, der = doc.get("prediction"), doc.get("derived")
    if pred is not None and der is not None:
        rows += [("predicted f0 (Hz)", _fmt(pred["f0_hz"], ".2f"), ""),
                 ("measured effective neck length (mm)",
                  _fmt(1000 * der["effective_neck_length_m"], ".2f"),
                  _fmt(1000 * der["effective_neck_length_stderr_m"], ".2g")),
                 ("measured end correction (neck radii)",
                  _fmt(der["end_correction_over_radius"], ".2f"),
                  _fmt(der.get("end_correction_over_radius_stderr"), ".2g"))]
    settings = [("recording", inp["recording"]), ("method", inp["method"]),
                ("channels", f"inside {inp.get('inside_channel')}, "
                             f"outside {inp.get('outside_channel')}"),
                ("sweep", inp.get("sweep") or "—"),
                ("fit band (Hz)", " to ".join(_fmt(b, ".1f") for b in fit.get("band_hz", []))),
                ("air", f"{_fmt(air['temperature_c'], '.1f')} °C, RH "
                        f"{_fmt(100 * air['relative_humidity'], '.0f')} %, "
                        f"{_fmt(air['pressure_pa'] / 1000, '.2f')} kPa, c = "
                        f"{_fmt(air['speed_of_sound_m_s'], '.2f')} m/s"),
                ("object file", obj.get("source_path") or "—")]
    env = jinja2.Environment(autoescape=True, undefined=jinja2.StrictUndefined)
    return env.from_string(_TEMPLATE).render(
        csp=CSP, version=__version__, name=obj.get("name") or Path(inp["recording"]).name,
        recording=inp["recording"], method=inp["method"],
        when=_dt.datetime.now(_dt.timezone.utc).strftime("%Y-%m-%d %H:%M UTC"),
        rows=rows, flags=doc.get("flags", []), settings=settings,
        image=None if png is None else base64.b64encode(png).decode("ascii"),
        predicted=pred is not None)


def write_fit_html(path: str | Path, doc: dict[str, Any], png_path: str | Path | None) -> Path:
    png = Path(png_path).read_bytes() if png_path is not None and Path(png_path).exists() else None
    return atomic_write_text(path, render_fit_html(doc, png))
