"""Display values shared by the text summary, the HTML and the PDF reports.

Every value with a standard error is rounded to it: the error to two
significant digits and the value to the same decimal place (common practice in
reporting measurements; JCGM 100:2008, GUM, 7.2.6: "the numerical values of the
estimate y and its standard uncertainty u(y) should not be given with an
excessive number of digits", usually two significant digits of u). CSV and JSON
keep full precision.

Also here: the object as rows (name, shape, every dimension with its unit, the
air), the raw and corrected values when a correction was applied, the drive
level from a calibrated inside channel, and the one-phrase meanings of gain and
delay.
"""

from __future__ import annotations

import math
from typing import Any

#: What the fitted gain and delay are, in one phrase each.
GAIN_MEANING = "|H| well below f0, the two channels' level ratio"
DELAY_MEANING = "how much later the inside channel hears the sound than the outside one"

#: Cavity SPL (dB re 20 µPa) from which a report carries the drive-level caution
#: (the level studies' threshold, report.tuning_report.CAUTION_SPL_DB).
DRIVE_CAUTION_SPL_DB = 110.0


def _finite(x: Any) -> bool:
    try:
        return x is not None and math.isfinite(float(x))
    except (TypeError, ValueError):
        return False


def error_decimals(stderr: float) -> int:
    """Decimal places that keep two significant digits of ``stderr`` (negative
    when the error is 100 or more: the value is rounded to tens, hundreds...)."""
    return 1 - math.floor(math.log10(abs(stderr)))


def rounded(value: float, stderr: float | None, fallback: int = 3) -> tuple[str, str]:
    """``(value, error)`` as strings, both rounded to two significant digits of the
    error; without a usable error, the value to ``fallback`` decimals and "—"."""
    if not _finite(value):
        return "—", "—"
    if not _finite(stderr) or stderr == 0:
        return f"{value:.{fallback}f}", "—"
    assert stderr is not None  # a finite number here
    d = error_decimals(float(stderr))
    if d >= 0:
        return f"{value:.{d}f}", f"{stderr:.{d}f}"
    q = 10.0 ** (-d)
    return f"{round(value / q) * q:.0f}", f"{round(stderr / q) * q:.0f}"


def pm(value: float, stderr: float | None, fallback: int = 3) -> str:
    """'243.2094 ± 0.0016': value and error rounded to two significant digits of
    the error (:func:`rounded`); the value alone when there is no error."""
    v, e = rounded(value, stderr, fallback)
    return v if e == "—" else f"{v} ± {e}"


# ------------------------------------------------------------------ the object

_CAVITY_LENGTHS = (("diameter_m", "diameter"), ("length_m", "length"), ("width_m", "width"),
                   ("depth_m", "depth"), ("height_m", "height"))
_NECK_LENGTHS = (("diameter_m", "diameter"), ("width_m", "width"), ("height_m", "height"),
                 ("length_m", "length"), ("outer_end_correction_m", "outer end correction"),
                 ("inner_end_correction_m", "inner end correction"))


def _mm(x: float) -> str:
    return f"{1e3 * x:.4g} mm"


def object_rows(obj: dict[str, Any] | None, air: dict[str, Any] | None = None
                ) -> list[tuple[str, str]]:
    """The object (an object document, ``Result.to_dict()['object']``) as (label,
    value with unit) rows: name, kind, the cavity's shape and every dimension
    given, the neck's, and the air the result was computed for."""
    if not obj:
        return []
    rows: list[tuple[str, str]] = [("object", str(obj.get("name") or "—")),
                                   ("kind", str(obj.get("kind") or "—"))]
    cav = obj.get("cavity") or {}
    if cav:
        rows.append(("cavity shape", str(cav.get("shape") or "—")))
        if _finite(cav.get("volume_m3")):
            src = cav.get("volume_source")
            rows.append(("cavity volume", f"{1e6 * cav['volume_m3']:.4g} mL"
                         + (f" ({src})" if src else "")))
        for key, label in _CAVITY_LENGTHS:
            if _finite(cav.get(key)):
                rows.append((f"cavity {label}", _mm(cav[key])))
        if cav.get("sections_m"):
            secs = "; ".join(f"d {_mm(d)} x {_mm(h)}" for d, h in cav["sections_m"])
            rows.append(("cavity sections (diameter x height)", secs))
        if _finite(cav.get("water_mass_kg")):
            t = cav.get("water_temperature_c")
            rows.append(("water fill", f"{1e3 * cav['water_mass_kg']:.4g} g"
                         + (f" at {t:.1f} °C" if _finite(t) else "")))
    neck = obj.get("neck") or {}
    if neck:
        count = neck.get("count") or 1
        rows.append(("neck shape", f"{neck.get('shape', '—')}" + (f", {count} of them"
                                                                  if count != 1 else "")))
        for key, label in _NECK_LENGTHS:
            if key == "diameter_m" and neck.get("shape") == "slot":
                continue
            if _finite(neck.get(key)):
                rows.append((f"neck {label}", _mm(neck[key])))
        rows.append(("neck ends", f"outer {neck.get('outer_end', '—')}, inner "
                                  f"{neck.get('inner_end', '—')}"))
    if air:
        rows.append(("air", air_text(air)))
    return rows


def air_text(air: dict[str, Any]) -> str:
    """'21.0 °C, RH 45 %, 101.10 kPa, c = 344.55 m/s'."""
    parts = []
    if _finite(air.get("temperature_c")):
        parts.append(f"{air['temperature_c']:.1f} °C")
    if _finite(air.get("relative_humidity")):
        parts.append(f"RH {100 * air['relative_humidity']:.0f} %")
    if _finite(air.get("pressure_pa")):
        parts.append(f"{air['pressure_pa'] / 1e3:.2f} kPa")
    if _finite(air.get("speed_of_sound_m_s")):
        parts.append(f"c = {air['speed_of_sound_m_s']:.2f} m/s")
    return ", ".join(parts) or "—"


# ------------------------------------------------------- corrections, drive

def correction_rows(doc: dict[str, Any]) -> list[tuple[str, str, str]]:
    """(quantity, uncorrected, corrected) rows when the outside microphone's
    radiation was corrected (fit --outside-distance); else none."""
    om = doc.get("outside_microphone") or {}
    raw = om.get("uncorrected")
    if not om.get("correction_applied") or not raw:
        return []
    fit = doc["fit"]
    return [("f0 (Hz)", pm(raw["f0_hz"], raw.get("f0_stderr_hz")),
             pm(fit["f0_hz"], fit.get("f0_stderr_hz"))),
            ("Q", pm(raw["q"], raw.get("q_stderr")), pm(fit["q"], fit.get("q_stderr")))]


def correction_note(doc: dict[str, Any]) -> str | None:
    """One line saying which corrections were applied to the fitted values."""
    om = doc.get("outside_microphone") or {}
    parts = []
    if om.get("correction_applied"):
        parts.append(f"outside-microphone radiation ({1e3 * om['distance_m']:.0f} mm from "
                     "the mouth)")
    cal = (doc.get("input") or {}).get("calibration") or doc.get("calibration")
    if doc.get("drive") is not None or cal:
        parts.append("inside-channel calibration")
    if not parts:
        return None
    return "correction applied: " + " and ".join(parts)


def drive_rows(doc: dict[str, Any]) -> list[tuple[str, str]]:
    """The drive level from a calibrated inside channel: cavity SPL and pressure,
    and with the geometry the neck's particle displacement and velocity."""
    d = doc.get("drive")
    if not d:
        return []
    rows = []
    if _finite(d.get("cavity_spl_db")):
        rows.append(("cavity SPL", f"{d['cavity_spl_db']:.1f} dB re 20 µPa"))
    if _finite(d.get("cavity_pressure_amplitude_pa")):
        rows.append(("cavity pressure amplitude", f"{d['cavity_pressure_amplitude_pa']:.4g} Pa"))
    if _finite(d.get("displacement_m")):
        rows.append(("neck particle displacement", f"{1e3 * d['displacement_m']:.3g} mm"
                     + (f" ({d['displacement_over_diameter']:.2g} of the diameter)"
                        if _finite(d.get("displacement_over_diameter")) else "")))
    if _finite(d.get("velocity_m_s")):
        rows.append(("neck particle velocity", f"{d['velocity_m_s']:.3g} m/s"))
    if _finite(d.get("onset_cavity_spl_db")):
        rows.append(("nonlinear onset (cavity SPL)", f"{d['onset_cavity_spl_db']:.1f} dB"))
    return rows


def drive_caution(doc: dict[str, Any]) -> str | None:
    """The drive-level caution when the cavity level calls for it."""
    d = doc.get("drive") or {}
    spl = d.get("cavity_spl_db")
    if not _finite(spl) or float(spl) < DRIVE_CAUTION_SPL_DB:  # type: ignore[arg-type]
        return None
    return (f"CAUTION: the cavity reached {spl:.0f} dB SPL in this measurement, and near "
            "the loudspeaker the level can pass 110 dB. Wear hearing protection, keep "
            "exposures short (e.g. NIOSH: 85 dB(A) for 8 h, 3 dB exchange rate, about 1.5 min "
            "at 110 dB(A)), step the level up from low, never leave a drive running "
            "unattended, and follow your local occupational-noise regulations and licensed "
            "practice, which take precedence.")


def q_predicted_text(pred: dict[str, Any] | None, doc: dict[str, Any] | None = None
                     ) -> str | None:
    """'61 (range 51.3 to 67.4)': the predicted Q with its range, and, when the
    outside microphone's radiation was not corrected, the Q without radiation
    damping that such a measurement reads (checks.q_interval)."""
    if not pred or not _finite(pred.get("q_predicted")):
        return None
    rng = [x for x in pred.get("q_predicted_range") or () if _finite(x)]
    txt = f"{pred['q_predicted']:.3g}"
    if rng:
        txt += f" (range {min(rng):.3g} to {max(rng):.3g})"
    om = (doc or {}).get("outside_microphone")
    if om is not None and not om.get("correction_applied") and _finite(
            pred.get("q_without_radiation")):
        txt += (f"; {pred['q_without_radiation']:.3g} without radiation damping, what an "
                "uncorrected outside microphone reads")
    return txt


def length_sensitivity_text(length_m: float, temperature_c: float, what: str) -> str:
    """What the statistical error leaves out, with its size: a length L from the
    lumped law L = S c^2 / ((2 pi f0)^2 V) moves by L/T per kelvin of air
    temperature (c^2 is proportional to T, ideal gas), by 1 % per 1 % of cavity
    volume and by 2 % per 1 % of neck diameter (S ~ d^2) (Helmholtz 1863;
    Rayleigh, The Theory of Sound, 1896, §303)."""
    t_k = temperature_c + 273.15
    return (f"errors are the fit's only; the geometry's and the temperature's come on top: "
            f"1 K of air temperature moves {what} by {1e3 * abs(length_m) / t_k:.2g} mm, 1 % "
            f"of cavity volume by {1e3 * abs(length_m) * 0.01:.2g} mm, 1 % of neck diameter "
            f"by {1e3 * abs(length_m) * 0.02:.2g} mm")


def object_text_from_file(path: str | None) -> str:
    """One line describing the object in an object file (name, shape, every
    dimension with its unit), for reports that only know its path (a batch's
    default object); the path alone when it cannot be read."""
    if not path:
        return "none named (each item's own object file)"
    try:
        from ..objectfile import load_object

        rows = object_rows(load_object(path).to_dict())
    except Exception:  # a report is still written; the item results say what failed
        return str(path)
    return f"{rows[0][1]}: " + "; ".join(f"{k} {v}" for k, v in rows[1:]) + f" ({path})"
