"""``characterize predict OBJECT.toml``: what the geometry predicts.

Prints f0, the next modes, the predicted Q and every intermediate figure
(air, areas, volumes, each end correction, effective length, acoustic mass,
compliance, each resistance), with units; ``--json`` prints the document,
``--out`` writes it, ``--sketch`` draws the object.
"""

from __future__ import annotations

from pathlib import Path
from typing import Any

import click

from ._errors import handles_errors
from ._params import air_options

PREDICTION_SCHEMA = "characterize.prediction/1"


class _Co2(click.ParamType):
    """CO2 as a fraction, a percent or ppm ("400 ppm")."""

    name = "CO2"

    def convert(self, value: Any, param: Any, ctx: Any) -> float:
        from ..errors import InputError
        from ..objectfile import parse_co2

        if isinstance(value, float):
            return value
        try:
            return parse_co2(value, "option", "--co2")
        except InputError as exc:
            self.fail(exc.expected, param, ctx)


def prediction_document(obj: Any, air: Any, sources: dict[str, str], pred: Any) -> dict[str, Any]:
    """The ``predict --json`` document."""
    from .._version import __version__
    air_d = air.to_dict()
    air_d["sources"] = dict(sources)
    return {"schema": PREDICTION_SCHEMA, "tool_version": __version__, "object": obj.to_dict(),
            "air": air_d, "prediction": pred.to_dict()}


def _mm(x: float | None) -> str:
    return "-" if x is None else f"{1e3 * x:.3f} mm"


def _neck_profile_lines(neck: Any) -> list[str]:
    if not neck.sections:
        return []
    parts = ", ".join(
        f"{1e3 * d0:.2f}" + ("" if d0 == d1 else f"->{1e3 * d1:.2f}") + f" mm x {1e3 * ln:.2f} mm"
        for d0, d1, ln in neck.sections)
    return [f"            profile (outside in): {parts}; inner d = {_mm(neck.inner_diameter_m)}; "
            f"mass length S∫dx/S(x) = {_mm(neck.mass_length_m)}"]


def prediction_text(obj: Any, air: Any, sources: dict[str, str], pred: Any) -> str:
    """Human-readable report, units on every figure."""
    cav, neck = obj.cavity, obj.neck
    names = {"temperature_c": "temperature", "relative_humidity": "humidity",
             "pressure_pa": "pressure", "co2_fraction": "CO2"}
    src = ", ".join(f"{names.get(k, k)}: {v}" for k, v in sources.items() if v != "default")
    lines = [
        f"{obj.name}: {obj.kind}" + (f", cavity {cav.shape}" if obj.kind == "helmholtz" else (
            ", closed-open" if neck.inner_end == "closed" else
            f", open at both ends ({neck.outer_end} mouth, {neck.inner_end} far end)")),
        f"  air       {air.temperature_c:.2f} °C, RH {100 * air.relative_humidity:.1f} %, "
        f"{air.pressure_pa / 1e3:.3f} kPa, CO2 {1e6 * air.co2_fraction:.0f} ppm"
        + (f" (from {src})" if src else " (defaults)"),
        f"            c = {air.speed_of_sound_m_s:.3f} m/s, rho = {air.density_kg_m3:.5f} kg/m³, "
        f"mu = {air.viscosity_pa_s:.4e} Pa·s, gamma = {air.gamma:.5f}, Pr = {air.prandtl:.4f}",
        f"  cavity    V = {1e6 * cav.volume_m3:.3f} mL ({cav.volume_source}), axial length "
        f"{_mm(cav.axial_length_m)}, wall area {1e4 * pred.wall_area_m2:.2f} cm²",
        f"  neck      {neck.shape}, {neck.count} x d = {_mm(neck.diameter_m)}"
        + (f" ({_mm(neck.width_m)} x {_mm(neck.height_m)})" if neck.shape == "slot" else "")
        + f", L = {_mm(neck.length_m)}, S = {1e6 * pred.neck_area_m2:.3f} mm² total",
        *_neck_profile_lines(neck),
        f"  ends      outer ({neck.outer_end}) {_mm(pred.outer_end_correction_m)}, "
        + (f"inner ({neck.inner_end}) {_mm(pred.inner_end_correction_m)} "
           f"[Ingard 1953 form: {_mm(pred.inner_end_correction_alternative_m)}]"
           if obj.kind != "tube" else f"far end ({neck.inner_end}) "
           f"{_mm(pred.inner_end_correction_m)}"),
        f"  lengths   L' = L + ends = {_mm(pred.geometric_effective_length_m)}; cavity inertia "
        f"+{_mm(pred.cavity_inertia_length_m)}; neck compliance "
        f"{1e6 * pred.neck_compliance_volume_m3:.3f} mL",
        f"  elements  M = {pred.acoustic_mass_kg_m4:.3f} kg/m⁴, C = "
        f"{pred.compliance_m3_pa:.4e} m³/Pa",
        f"  layers    delta_v = {_mm(pred.viscous_boundary_layer_m)}, delta_t = "
        f"{_mm(pred.thermal_boundary_layer_m)}; f0 shift "
        f"{100 * pred.boundary_layer_shift_viscous:+.3f} % (viscous), "
        f"{100 * pred.boundary_layer_shift_thermal:+.3f} % (thermal)",
        "  f0        lumped {:.3f} Hz, corrected lumped {:.3f} Hz, distributed {} "
        "-> {:.3f} Hz ({})".format(
            pred.f0_lumped_hz, pred.f0_corrected_lumped_hz,
            "-" if pred.f0_distributed_hz is None else f"{pred.f0_distributed_hz:.3f} Hz",
            pred.f0_hz, pred.model),
        f"            lumped-equivalent L_eff = {_mm(pred.effective_neck_length_m)}, end "
        f"correction {_mm(pred.end_correction_m)} = "
        f"{pred.end_correction_m / neck.radius_m:.3f} a; ka = {pred.ka:.4f}",
    ]
    if pred.modes_hz:
        pairs = zip(pred.modes_hz, pred.modes_q, strict=True)
        modes = ", ".join(f"{f:.1f} Hz (Q {q:.0f})" for f, q in pairs)
        limit = ("" if pred.mode_limit_hz is None
                 else f" (1-D valid below {pred.mode_limit_hz:.0f} Hz)")
        lines.append(f"  modes     {modes}{limit}")
    lines += [
        f"  Q         {pred.q_predicted:.2f} with the end losses (range "
        f"{pred.q_predicted_range[0]:.1f} to {pred.q_predicted_range[1]:.1f}: viscous end "
        "term 2a .. no end losses); "
        f"smooth walls {pred.q_smooth_wall:.2f}; end losses alone {pred.q_end_losses:.0f}; "
        f"without radiation {pred.q_without_radiation:.2f}",
        "            lumped terms: " + ", ".join(
            f"{name.replace('_', ' ')} {q:.4g}" for name, q, _ in pred.q_terms),
        f"            end walls {1e4 * pred.end_wall_area_m2:.2f} cm² (thermal end term); "
        f"viscous end term {_mm(pred.viscous_end_term_m)} per opening",
        f"  R, G      R_rad = {pred.radiation_resistance_pa_s_m3:.4g}, R_neck = "
        f"{pred.viscous_resistance_neck_pa_s_m3:.4g}, R_cavity = "
        f"{pred.viscous_resistance_cavity_pa_s_m3:.4g} Pa·s/m³; G_cavity = "
        f"{pred.thermal_conductance_cavity_m3_pa_s:.4g}, G_neck = "
        f"{pred.thermal_conductance_neck_m3_pa_s:.4g} m³/(Pa·s)",
        "  sources   " + "; ".join(f"{name.replace('_', ' ')}: {src}"
                                    for name, _, src in pred.q_terms),
        f"  mismatch  suggested f0 tolerance {100 * pred.f0_tolerance:.1f} %",
    ]
    lines += [f"  note      {n}" for n in pred.notes]
    return "\n".join(lines)


@click.command(short_help="Predict f0, the next modes and Q from an object file.")
@click.argument("object_path", metavar="OBJECT", type=click.Path(path_type=Path))
@air_options
@click.option("--co2", "co2_fraction", type=_Co2(), default=None,
              help="CO2 ('400 ppm', '0.04 %' or a fraction); overrides the object file.")
@click.option("--json", "as_json", is_flag=True, help="Print the prediction document (JSON).")
@click.option("--out", "out_dir", type=click.Path(file_okay=False, path_type=Path),
              help="Write DIR/prediction.json (the document) and DIR/sketch.png.")
@click.option("--sketch", "sketch_path", type=click.Path(dir_okay=False, path_type=Path),
              help="Draw the object with its dimensions and end corrections (PNG).")
@click.option("--force", is_flag=True, help="Overwrite the files in --out and --sketch.")
@handles_errors
def predict(object_path: Path, temperature_c: float | None, relative_humidity: float | None,
            pressure_pa: float | None, co2_fraction: float | None, as_json: bool,
            out_dir: Path | None, sketch_path: Path | None, force: bool) -> None:
    """Predict f0, the next modes and Q of the resonator in OBJECT (TOML)."""
    from ..errors import InputError
    from ..fileio import check_writable, out_folder
    from ..objectfile import load_object
    from ..physics.helmholtz import predict as predict_object

    if sketch_path is not None and sketch_path.suffix.lower() not in (".png", ".svg", ".pdf"):
        raise InputError(str(sketch_path), "--sketch", "give a .png, .svg or .pdf file name")
    out_path = sketch_in_out = None
    if out_dir is not None:
        out_path, sketch_in_out = out_folder(out_dir, ["prediction.json", "sketch.png"],
                                             force=force)
    if sketch_path is not None:
        check_writable(sketch_path, force=force)
    obj = load_object(object_path)
    from ..physics.conditions import resolve_air

    air, sources = resolve_air(obj, temperature_c=temperature_c,
                               relative_humidity=relative_humidity, pressure_pa=pressure_pa,
                               co2_fraction=co2_fraction)
    pred = predict_object(obj, air)
    from ..checks import check_geometry

    warnings = check_geometry(obj, pred)
    doc = prediction_document(obj, air, sources, pred)
    doc["flags"] = [f.to_dict() for f in warnings]
    if out_path is not None or as_json:
        from ..report.document import to_json, write_document

        if out_path is not None:
            write_document(out_path, doc)
        if as_json:
            click.echo(to_json(doc), nl=False)
    if not as_json:
        click.echo(prediction_text(obj, air, sources, pred))
        from ..report.text import flag_lines

        for line in flag_lines(warnings):
            click.echo(line)
    for sk in (sketch_in_out, sketch_path):
        if sk is not None:
            from ..report.sketch import sketch_object

            sketch_object(obj, sk, pred)
    if not as_json:
        for p in (out_path, sketch_in_out, sketch_path):
            if p is not None:
                click.echo(f"wrote {p}")
