"""The ``tune`` loop at the bench: measure, advise, log the change made, again.

Each step measures the object as it is now (:func:`characterize.live.measure.measure`)
and asks the trim logic (:func:`characterize.tuning.advise_trim`, with the end
correction measured on this object at this step) for the change that reaches
the target. Once three or more different states of the varied quantity have
been measured, the series method (:func:`characterize.tuning.fit_series`,
Rayleigh's 1/f0^2 line over the steps) refines the advice: its line is solved
for the target directly, so it carries the end correction (and the volume)
measured over the whole session rather than at one step.

Pure library: the command reads the lines and prints; this module keeps the
session folder:

- ``step-01/`` ... each step's object file (the geometry after the changes so
  far), takes, sweep and ``result.json`` (the result document with its
  ``measurement`` block and a ``tune`` block);
- ``log.csv``: one row per step and per change made;
- ``tune.png``: f0 against the cumulative change, with the target band;
- ``session.json``: the summary.
"""

from __future__ import annotations

import csv
import io
import json
import math
from collections.abc import Callable
from dataclasses import dataclass, field, replace
from pathlib import Path
from typing import Any

from ..errors import FitError, InputError
from .measure import Measurement, MeasureSettings, measure

ROUTES = ("neck", "volume", "diameter")
#: Steps at distinct values of the varied quantity before the series refines the advice.
SERIES_MIN_STEPS = 3
#: Default --tolerance.
DEFAULT_TOLERANCE = "5 cents"
LOG_COLUMNS = ("step", "event", "f0_hz", "f0_stderr_hz", "q", "q_stderr", "target_hz",
               "distance_hz", "distance_cents", "advised", "advised_stderr", "advice_from",
               "change", "cumulative_change", "unit", "result")


def cents(f_hz: float, ref_hz: float) -> float:
    """Interval from ``ref_hz`` to ``f_hz`` in cents (1200 log2(f/ref))."""
    return 1200.0 * math.log2(f_hz / ref_hz)


def parse_tolerance(text: str, target_hz: float) -> float:
    """--tolerance: '5 cents', '0.5 Hz', '0.2 %' or a bare number of Hz -> Hz."""
    t = str(text).strip().lower()
    try:
        if t.endswith("cents") or t.endswith("cent"):
            c = float(t.rsplit("cent", 1)[0])
            value = target_hz * (2.0 ** (c / 1200.0) - 1.0)
        elif t.endswith("%"):
            value = target_hz * float(t[:-1]) / 100.0
        elif t.endswith("hz"):
            value = float(t[:-2])
        else:
            value = float(t)
    except ValueError:
        raise InputError("--tolerance", None, f"expected '5 cents', '0.5 Hz' or '0.2 %', got "
                         f"{text!r}") from None
    if not (math.isfinite(value) and value > 0):
        raise InputError("--tolerance", None, f"must be > 0, got {text!r}")
    return value


def route_unit(route: str) -> tuple[str, str, float]:
    """(quantity kind for units.parse_quantity, display unit, SI -> display factor)."""
    return ("volume", "mL", 1e6) if route == "volume" else ("length", "mm", 1e3)


def parse_change(text: str, route: str) -> float:
    """A typed change: '1.5 mm' (neck: cut; diameter: widened) or '20 mL'
    (volume: liquid added) -> SI. A bare number is in the route's display unit."""
    from ..units import parse_quantity

    kind, unit, factor = route_unit(route)
    t = text.strip()
    try:
        return float(t) / factor
    except ValueError:
        pass
    return parse_quantity(t, kind, "input", "change", positive=False)


@dataclass
class Step:
    """One measurement of the session."""

    number: int
    folder: Path
    measurement: Measurement
    f0_hz: float
    f0_stderr_hz: float
    q: float
    q_stderr: float
    target_hz: float
    within: bool
    advice: Any  # tuning.TrimAdvice
    advised: float  # the route's change (SI; see parse_change for the sign)
    advised_stderr: float
    advice_from: str  # "trim" or "series"
    value: float  # the varied quantity now (neck length, liquid added, bore), SI
    cumulative: float  # total change made before this step, SI
    series: Any = None  # tuning.SeriesFit when used
    notes: list[str] = field(default_factory=list)

    @property
    def distance_hz(self) -> float:
        return self.f0_hz - self.target_hz

    @property
    def distance_cents(self) -> float:
        return cents(self.f0_hz, self.target_hz)


def _toml_value(v: Any) -> str:
    if isinstance(v, bool):
        return "true" if v else "false"
    if isinstance(v, (int, float)):
        return repr(v)
    if isinstance(v, (list, tuple)):
        return "[" + ", ".join(_toml_value(x) for x in v) + "]"
    return json.dumps(str(v))


def object_toml(data: dict[str, Any]) -> str:
    """TOML text of an object-file mapping (:meth:`ResonatorObject.to_file_data`)."""
    head = [f"{k} = {_toml_value(v)}" for k, v in data.items() if not isinstance(v, dict)]
    lines = ["# written by characterize tune: the geometry after the changes so far"] + head
    for k, v in data.items():
        if isinstance(v, dict):
            lines.append(f"[{k}]")
            lines += [f"{kk} = {_toml_value(vv)}" for kk, vv in v.items()]
    return "\n".join(lines) + "\n"


class TuneSession:
    """A tuning session at one bench (see the module docstring).

    Parameters
    ----------
    bench : Bench
        The device or the simulated bench.
    object_path : path
        The object file as the session starts.
    target_hz : float
        Target f0, Hz.
    route : str
        ``"neck"`` (cut the neck), ``"volume"`` (add liquid) or ``"diameter"``
        (widen the bore).
    tolerance_hz : float
        Stop when |f0 - target| is within this, Hz.
    out_dir : path
        The session folder (created; must be new or empty).
    settings : MeasureSettings
        How each step measures.
    say : callable
        Progress lines (retries, level changes).
    """

    def __init__(self, bench: Any, object_path: str | Path, target_hz: float, route: str,
                 tolerance_hz: float, out_dir: str | Path, settings: MeasureSettings,
                 say: Callable[[str], None] = lambda text: None) -> None:
        from ..objectfile import load_object

        if route not in ROUTES:
            raise InputError("--route", None, f"must be one of {', '.join(ROUTES)}, got "
                             f"{route!r}")
        if not (math.isfinite(target_hz) and target_hz > 0):
            raise InputError("--target", None, f"must be a frequency > 0 Hz, got {target_hz!r}")
        self.bench, self.target_hz, self.route = bench, float(target_hz), route
        self.tolerance_hz, self.settings, self.say = tolerance_hz, settings, say
        self.out = Path(out_dir)
        if self.out.exists() and (not self.out.is_dir() or any(self.out.iterdir())):
            raise InputError(str(self.out), None, "the session folder exists and is not "
                             "empty: give a new --out")
        self.obj = load_object(object_path)
        if self.obj.kind != "helmholtz":
            raise InputError(str(object_path), "kind", "tune works on Helmholtz resonators")
        if route == "diameter" and self.obj.neck.shape == "slot":
            raise InputError("--route", None, "the diameter route needs a round neck or hole")
        self.object_path = Path(object_path)
        self.steps: list[Step] = []
        self.folders = 0
        self.cumulative = 0.0
        self.log_rows: list[dict[str, Any]] = []
        self.out.mkdir(parents=True, exist_ok=True)

    # ------------------------------------------------------------- geometry
    def _value(self) -> float:
        if self.route == "neck":
            return self.obj.neck.length_m
        if self.route == "diameter":
            return self.obj.neck.diameter_m
        return self.cumulative  # liquid added so far

    def _write_object(self, folder: Path) -> Path:
        from ..fileio import atomic_write_text
        from ..objectfile import load_object

        data = self.obj.to_file_data()
        path = folder / "object.toml"
        atomic_write_text(path, object_toml(data))
        try:
            load_object(path)
        except InputError:
            # a shaped cavity whose volume moved beyond the shape's tolerance: keep
            # the volume only
            cav = data["cavity"]
            data["cavity"] = {"volume": f"{self.obj.cavity.volume_m3!r} m**3"}
            for key in ("shape", "diameter", "length", "width", "depth", "height", "sections"):
                cav.pop(key, None)
            atomic_write_text(path, object_toml(data))
            load_object(path)
        return path

    def record_change(self, amount: float) -> None:
        """The change just made (SI; neck: length cut, volume: liquid added,
        diameter: bore widened): logged, applied to the geometry, and on the
        simulated bench to the simulated object."""
        o = self.obj
        if self.route == "neck":
            new = o.neck.length_m - amount
            if not new > 0:
                raise InputError("change", None, f"cutting {amount * 1e3:.2f} mm leaves no neck "
                                 f"({o.neck.length_m * 1e3:.2f} mm long)")
            self.obj = replace(o, neck=replace(o.neck, length_m=new))
        elif self.route == "diameter":
            new = o.neck.diameter_m + amount
            if not new > 0:
                raise InputError("change", None, "that closes the bore")
            self.obj = replace(o, neck=replace(o.neck, diameter_m=new))
        else:
            new = o.cavity.volume_m3 - amount
            if not new > 0:
                raise InputError("change", None, "that leaves no cavity")
            self.obj = replace(o, cavity=replace(o.cavity, volume_m3=new, volume_source="given"))
        if hasattr(self.bench, "apply_change"):
            self.bench.apply_change(self.route, amount)
        self.cumulative += amount
        _, unit, k = route_unit(self.route)
        self._log({"step": self.folders, "event": "change", "change": amount * k,
                   "cumulative_change": self.cumulative * k, "unit": unit})

    # ---------------------------------------------------------------- steps
    def measure_step(self) -> Step:
        """Measure now, advise, write the step's folder and the log."""
        from ..report.document import write_document
        from ..tuning import advise_trim, result_from_dict

        self.folders += 1  # a step that failed keeps its folder (and its takes)
        k = self.folders
        folder = self.out / f"step-{k:02d}"
        folder.mkdir(parents=True, exist_ok=True)
        obj_path = self._write_object(folder)
        m = measure(self.bench, obj_path, self.settings, folder, say=self.say)
        doc = m.document()
        fit = m.result.fit
        summary = result_from_dict(doc, str(folder / "result.json"))
        advice = advise_trim(summary, self.target_hz)
        advised, se = self._advised(advice)
        step = Step(number=k, folder=folder, measurement=m, f0_hz=fit.f0_hz,
                    f0_stderr_hz=fit.f0_stderr_hz, q=fit.q, q_stderr=fit.q_stderr,
                    target_hz=self.target_hz,
                    within=abs(fit.f0_hz - self.target_hz) <= self.tolerance_hz,
                    advice=advice, advised=advised, advised_stderr=se, advice_from="trim",
                    value=self._value(), cumulative=self.cumulative)
        self.steps.append(step)
        self._refine(step)
        _, unit, kf = route_unit(self.route)
        doc["tune"] = {"step": k, "target_hz": self.target_hz, "route": self.route,
                       "tolerance_hz": self.tolerance_hz, "distance_hz": step.distance_hz,
                       "distance_cents": step.distance_cents, "within_tolerance": step.within,
                       "advised_change_si": step.advised,
                       "advised_change_stderr_si": step.advised_stderr,
                       "advice_from": step.advice_from, "cumulative_change_si": self.cumulative,
                       "trim": advice.to_dict(),
                       "series": None if step.series is None else step.series.to_dict(),
                       "notes": step.notes}
        write_document(folder / "result.json", doc)
        self._log({"step": k, "event": "measure", "f0_hz": step.f0_hz,
                   "f0_stderr_hz": step.f0_stderr_hz, "q": step.q, "q_stderr": step.q_stderr,
                   "target_hz": self.target_hz, "distance_hz": step.distance_hz,
                   "distance_cents": step.distance_cents, "advised": step.advised * kf,
                   "advised_stderr": step.advised_stderr * kf, "advice_from": step.advice_from,
                   "cumulative_change": self.cumulative * kf, "unit": unit,
                   "result": str(folder / "result.json")})
        self.plot()
        return step

    def _advised(self, advice: Any) -> tuple[float, float]:
        if self.route == "neck":
            return advice.neck.cut_m, advice.neck.cut_stderr_m
        if self.route == "volume":
            return advice.volume.water_to_add_m3, advice.volume.change_stderr_m3
        return advice.diameter.change_m, advice.diameter.new_diameter_stderr_m

    def _refine(self, step: Step) -> None:
        """Once there are SERIES_MIN_STEPS distinct values: advise from the series line."""
        if self.route == "diameter":
            return
        from ..tuning import SeriesPoint, fit_series

        latest: dict[float, Step] = {}
        for s in self.steps:
            latest[round(s.value, 12)] = s
        if len(latest) < SERIES_MIN_STEPS:
            return
        pts = []
        for s in latest.values():
            air = s.measurement.result.air
            pts.append(SeriesPoint(id=f"step-{s.number:02d}", value=s.value, f0_hz=s.f0_hz,
                                   f0_stderr_hz=s.f0_stderr_hz,
                                   speed_of_sound_m_s=air.speed_of_sound_m_s,
                                   temperature_c=air.temperature_c, source=str(s.folder)))
        vary = "neck-length" if self.route == "neck" else "volume"
        try:
            series = fit_series(pts, vary, self.obj if self.route == "neck" else None,
                                source=str(self.out))
        except (FitError, InputError) as exc:
            step.notes.append(f"series not used: {exc}")
            return
        line = series.line
        b, a = line.slope, line.intercept
        var_b, var_a = line.covariance[0][0], line.covariance[1][1]
        cov = line.cov_slope_intercept
        # the target at the series' reference speed of sound
        c_now = step.measurement.result.air.speed_of_sound_m_s
        f_t = self.target_hz * series.reference_speed_of_sound_m_s / c_now
        y_t = 1.0 / f_t**2
        v_t = (y_t - a) / b
        var = (var_a + v_t**2 * var_b + 2.0 * v_t * cov) / b**2
        se = math.sqrt(var) if var > 0 else math.nan
        advised = step.value - v_t if self.route == "neck" else v_t - step.value
        if not math.isfinite(advised):
            return
        step.series, step.advised, step.advised_stderr = series, advised, se
        step.advice_from = "series"

    def auto_change(self, step: Step) -> float | None:
        """On the simulated bench: make the advised change (returns it), or None
        when it cannot be made on this route (no advice, or a neck to lengthen)."""
        a = step.advised
        if not math.isfinite(a) or (self.route == "neck" and a <= 0):
            return None
        self.record_change(a)
        return a

    # ------------------------------------------------------------- outputs
    def _log(self, row: dict[str, Any]) -> None:
        from ..fileio import atomic_write_text

        self.log_rows.append(row)
        buf = io.StringIO()
        w = csv.DictWriter(buf, fieldnames=LOG_COLUMNS, lineterminator="\n")
        w.writeheader()
        for r in self.log_rows:
            w.writerow({c: (f"{v:.6g}" if isinstance(v, float) else v)
                        for c, v in r.items()})
        atomic_write_text(self.out / "log.csv", buf.getvalue())

    def plot(self) -> Path | None:
        if not self.steps:
            return None
        from ..report.live_plots import tune_plot

        _, unit, k = route_unit(self.route)
        what = {"neck": "neck cut", "volume": "liquid added", "diameter": "bore widened"}
        return tune_plot([s.cumulative * k for s in self.steps], [s.f0_hz for s in self.steps],
                         [s.f0_stderr_hz for s in self.steps], self.target_hz,
                         self.tolerance_hz, f"cumulative {what[self.route]} ({unit})",
                         self.out / "tune.png")

    def summary(self) -> dict[str, Any]:
        """The session's summary (also written to session.json)."""
        from ..report.document import write_document

        _, unit, k = route_unit(self.route)
        last = self.steps[-1] if self.steps else None
        d: dict[str, Any] = {
            "schema": "characterize.tune/1", "object": str(self.object_path),
            "route": self.route, "target_hz": self.target_hz, "tolerance_hz": self.tolerance_hz,
            "steps": len(self.steps), "cumulative_change": self.cumulative * k, "unit": unit,
            "reached": bool(last is not None and last.within),
            "final": None if last is None else {
                "f0_hz": last.f0_hz, "f0_stderr_hz": last.f0_stderr_hz, "q": last.q,
                "q_stderr": last.q_stderr, "distance_hz": last.distance_hz,
                "distance_cents": last.distance_cents, "result": str(last.folder / "result.json")},
            "start_f0_hz": None if not self.steps else self.steps[0].f0_hz,
            "series_end_correction_m": None if last is None or last.series is None
            else last.series.end_correction_m,
            "series_end_correction_stderr_m": None if last is None or last.series is None
            else last.series.end_correction_stderr_m,
        }
        truth = getattr(self.bench, "truth", None)
        if callable(truth):
            d["simulated_truth"] = truth()
        write_document(self.out / "session.json", d)
        return d
