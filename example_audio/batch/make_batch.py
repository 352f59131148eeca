"""Regenerate the bundled example batch (demo data, simulated).

Scenario (invented for the demo): the Saltmarsh Sound Garden's volunteers cast
a production run of twelve "listening jars" from one mould for the reed-bed
walk. Each jar is measured with the same sweep and two microphones before it
is mounted; the run must sit within 2 % of the 243 Hz design note. Three jars
miss: one whose neck was ground too short (sharp), one with a thick collar
(flat) and one with a hairline crack (low Q). One recording was cut off when
the recorder's card was pulled mid-take. All recordings are simulated with
:mod:`characterize.simulate`; ``truth.json`` records what was simulated.

Short recordings at 16 kHz, 16-bit FLAC, so the folder stays small.

Run from the repository root:  python example_audio/batch/make_batch.py
"""

from __future__ import annotations

import json
from pathlib import Path

import soundfile as sf

from characterize.excitation import SweepParams, make_sweep, sidecar_text
from characterize.objectfile import load_object
from characterize.physics.air import air_state
from characterize.physics.helmholtz import predict
from characterize.simulate import Setup, simulate, write_recording

HERE = Path(__file__).resolve().parent
RATE_HZ = 16000.0
SWEEP = SweepParams(start_hz=40.0, stop_hz=2000.0, duration_s=1.4, rate_hz=RATE_HZ,
                    level_dbfs=-12.0, fade_in_s=0.05, fade_out_s=0.01, tail_s=0.7)

OBJECT = """\
name = "reed-walk-jar"
# the run's mould: reclaimed-glass jar with a ground collar for a neck
[cavity]
volume = "480 mL"
[neck]
diameter = "24 mm"
length = "28 mm"
outer_end = "unflanged"
inner_end = "flanged"
[air]
temperature = "19 degC"
relative_humidity = 0.55
pressure = "101.2 kPa"
"""

SPEC = """\
# Acceptance spec for the reed-walk listening jars (Saltmarsh Sound Garden)
name = "Reed-walk listening jars, casting run 3"

[f0]
target = "243 Hz"     # the design note
tolerance = "2 %"     # or an absolute width such as "4 Hz"

[q]
min = 25              # below this the jar rings too briefly (cracks, loose collar)
max = 70

[prediction]
max_mismatch = "6 %"  # measured f0 against the mould's geometry

[flags]
fail = ["clipping", "poor-fit", "out-of-band", "window-too-short"]
warn = ["f0-mismatch", "end-correction-implausible", "no-noise-estimate", "polarity-inverted"]

[defaults]            # for manifest cells left empty; paths relative to this file
object = "reed-walk-jar.toml"
sweep = "sweep-16k.wav"
inside = 1
outside = 2
"""

#: id -> (f0 as a factor of the design's real f0, Q, note); None: broken recording
JARS: dict[str, tuple[float, float, str] | None] = {
    "jar-01": (1.000, 38.0, ""),
    "jar-02": (1.004, 36.0, ""),
    "jar-03": (0.994, 40.0, ""),
    "jar-04": (1.034, 37.0, 'neck ground 2 mm short ("sharp" by ear)'),
    "jar-05": (1.002, 39.0, ""),
    "jar-06": (0.997, 35.0, "bubble in the shoulder"),
    "jar-07": (0.992, 14.0, "hairline crack near the base, found after firing"),
    "jar-08": (1.007, 38.0, ""),
    "jar-09": None,
    "jar-10": (0.969, 41.0, "thick collar, poured twice"),
    "jar-11": (1.001, 41.0, ""),
    "jar-12": (0.998, 37.0, ""),
}

#: the mould's real f0 relative to the lumped prediction (demo truth, as in make_examples.py)
F0_FACTOR = 0.975


def main() -> None:
    sweep = make_sweep(SWEEP)
    sf.write(HERE / "sweep-16k.wav", sweep.samples, int(RATE_HZ), subtype="PCM_16")
    (HERE / "sweep-16k.toml").write_text(sidecar_text(SWEEP), encoding="utf-8")
    obj_path = HERE / "reed-walk-jar.toml"
    obj_path.write_text(OBJECT, encoding="utf-8")
    (HERE / "spec.toml").write_text(SPEC, encoding="utf-8")
    obj = load_object(obj_path)
    f_design = predict(obj, air_state(**obj.air.air_state_kwargs())).f0_hz * F0_FACTOR
    truth: dict[str, object] = {}
    rows = ["id,recording,object,inside,outside,sweep,note"]
    for k, (jar_id, spec) in enumerate(JARS.items()):
        rec = HERE / f"{jar_id}.flac"
        if spec is None:
            # the take was cut off: a full recording, truncated to its first 0.3 s
            setup = Setup(f0_hz=f_design, q=38.0, rate_hz=RATE_HZ, snr_db=35.0, sweep=SWEEP)
            data, _ = simulate(setup, seed=900)
            write_recording(str(rec), data[: int(0.3 * RATE_HZ)], RATE_HZ, "PCM_16")
            note = "recorder card pulled out mid-take"
            truth[jar_id] = {"recording": rec.name, "broken": note}
        else:
            factor, q, note = spec
            setup = Setup(f0_hz=f_design * factor, q=q, rate_hz=RATE_HZ, snr_db=38.0,
                          sweep=SWEEP, gain_inside=1.0 + 0.03 * (k % 4), gain_outside=0.85,
                          delay_s=50e-6 + 5e-6 * k)
            data, _ = simulate(setup, seed=300 + k)
            write_recording(str(rec), data, RATE_HZ, "PCM_16")
            truth[jar_id] = {"recording": rec.name, "f0_hz": setup.f0_hz, "q": q,
                             "gain": setup.gain, "delay_s": setup.delay_s,
                             "snr_db": setup.snr_db}
        quoted = f'"{note.replace(chr(34), chr(34) * 2)}"' if note else ""
        rows.append(f"{jar_id},{rec.name},,,,,{quoted}")
    (HERE / "manifest.csv").write_text("\n".join(rows) + "\n", encoding="utf-8")
    (HERE / "truth.json").write_text(json.dumps({"design_f0_hz": f_design, "rate_hz": RATE_HZ,
                                                 "items": truth}, indent=2) + "\n",
                                     encoding="utf-8")


if __name__ == "__main__":
    main()
