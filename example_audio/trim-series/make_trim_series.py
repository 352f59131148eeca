"""Regenerate the trim-series example (demo data, simulated).

Scenario (invented for the demo): at the Saltmarsh Sound Garden, listening jar
07 is a reclaimed glass carboy with a turned-oak collar as its neck. During one
tuning afternoon in the visitor hut the collar was shortened on the lathe in
4 mm steps, from 44 mm to 24 mm, and the jar measured after each cut while the
hut warmed from 19.6 to 22.4 degC. The last step is bundled as a result
document only (its recording is not kept), to show that manifests may mix both.

The truth: the lumped law with an end correction of 1.32 neck radii (the
textbook ends for this object give 1.46), at each step's air temperature;
``truth.json`` records it. Each recording is a two-microphone measurement made
with :mod:`characterize.simulate` at 16 kHz, 16-bit FLAC.

Run from the repository root:  python example_audio/trim-series/make_trim_series.py
"""

from __future__ import annotations

import json
import math
from pathlib import Path

import soundfile as sf

from characterize.excitation import SweepParams, make_sweep, sidecar_text
from characterize.objectfile import load_object
from characterize.physics.air import air_state
from characterize.physics.helmholtz import helmholtz_f0_hz
from characterize.pipeline import analyze
from characterize.report.document import write_document
from characterize.simulate import Setup, simulate, write_recording

HERE = Path(__file__).resolve().parent
RATE_HZ = 16000.0
SWEEP = SweepParams(start_hz=40.0, stop_hz=2000.0, duration_s=1.5, rate_hz=RATE_HZ,
                    level_dbfs=-12.0, fade_in_s=0.05, fade_out_s=0.01, tail_s=0.8)

OBJECT = """\
name = "listening-jar-07"
# reclaimed glass carboy with a turned-oak collar neck, as first measured
# (the series command takes each step's neck length from the manifest)
[cavity]
volume = "620 mL"
[neck]
diameter = "22 mm"
length = "44 mm"
outer_end = "unflanged"
inner_end = "flanged"
[air]
relative_humidity = 0.55
pressure = "101.2 kPa"
"""

#: (neck length mm, air temperature degC, Q) after each cut
STEPS = [(44, 19.6, 36.0), (40, 20.1, 35.5), (36, 20.7, 35.0), (32, 21.3, 34.2),
         (28, 21.9, 33.5), (24, 22.4, 32.6)]
#: the end correction this jar really has, over the neck radius (demo truth)
TRUE_END_CORRECTION_OVER_RADIUS = 1.32
#: the last step is bundled as a result document only
RESULT_ONLY = {24}


def main() -> None:
    sweep = make_sweep(SWEEP)
    sf.write(HERE / "sweep-16k.wav", sweep.samples, int(RATE_HZ), subtype="PCM_16")
    (HERE / "sweep-16k.toml").write_text(sidecar_text(SWEEP), encoding="utf-8")
    obj_path = HERE / "listening-jar-07.toml"
    obj_path.write_text(OBJECT, encoding="utf-8")
    obj = load_object(obj_path)
    radius = obj.neck.radius_m
    delta = TRUE_END_CORRECTION_OVER_RADIUS * radius
    rows = ["id,recording,result,object,sweep,neck_length,temperature,note"]
    truth = {"object": obj_path.name, "end_correction_m": delta,
             "end_correction_over_radius": TRUE_END_CORRECTION_OVER_RADIUS, "steps": []}
    for seed, (length_mm, temp_c, q) in enumerate(STEPS):
        air = air_state(temperature_c=temp_c, **{k: v for k, v in
                                                 obj.air.air_state_kwargs().items()
                                                 if k != "temperature_c"})
        f0 = helmholtz_f0_hz(air.speed_of_sound_m_s, obj.neck.area_m2, obj.cavity.volume_m3,
                             length_mm * 1e-3 + delta)
        setup = Setup(f0_hz=f0, q=q, rate_hz=RATE_HZ, snr_db=32.0, sweep=SWEEP,
                      gain_inside=1.0, gain_outside=0.85, delay_s=60e-6)
        data, _ = simulate(setup, seed=730 + seed)
        name = f"jar07-L{length_mm}"
        rec = HERE / f"{name}.flac"
        write_recording(str(rec), data, RATE_HZ, "PCM_16")
        if length_mm in RESULT_ONLY:
            res = analyze(rec, object_path=obj_path, sweep_path=HERE / "sweep-16k.wav",
                          temperature_c=temp_c)
            doc = res.to_dict()
            doc["input"]["recording"] = f"{name}.flac (not bundled)"
            # paths relative to this folder, not to the machine that made them
            doc["input"]["sweep"] = "sweep-16k.wav"
            if doc.get("object"):
                doc["object"]["source_path"] = obj_path.name
            write_document(HERE / f"{name}.json", doc)
            rec.unlink()
            rows.append(f"{name},,{name}.json,,,{length_mm} mm,,after the fifth cut "
                        "(result document only)")
        else:
            rows.append(f"{name},{rec.name},,{obj_path.name},sweep-16k.wav,{length_mm} mm,"
                        f"{temp_c} degC,")
        truth["steps"].append({"id": name, "neck_length_m": length_mm * 1e-3,
                               "temperature_c": temp_c,
                               "speed_of_sound_m_s": air.speed_of_sound_m_s, "f0_hz": f0,
                               "q": q})
    rows[1] += "before the first cut"
    (HERE / "manifest.csv").write_text("\n".join(rows) + "\n", encoding="utf-8")
    (HERE / "truth.json").write_text(json.dumps(truth, indent=2) + "\n", encoding="utf-8")
    assert math.isclose(truth["end_correction_over_radius"], TRUE_END_CORRECTION_OVER_RADIUS)


if __name__ == "__main__":
    main()
