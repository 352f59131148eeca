"""Regenerate the bundled example recordings (demo data, simulated).

Scenario (invented for the demo): the Saltmarsh Sound Garden, a community
sound-sculpture project, builds resonant "listening jars" from reclaimed glass
and tunes the plant-room silencer and the loudspeaker boxes of its visitor
hut. Each example is a simulated two-microphone measurement made with
:mod:`characterize.simulate`; ``truth.json`` records what was simulated.

Run from the repository root:  python example_audio/make_examples.py
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

OBJECTS = {
    "listening-jar-04": """\
name = "listening-jar-04"
# reclaimed preserving jar, neck formed from a ground-glass collar
[cavity]
volume = "480 mL"
[neck]
diameter = "24 mm"
length = "28 mm"
outer_end = "unflanged"
inner_end = "flanged"
[air]
temperature = "21 degC"
relative_humidity = 0.45
pressure = "101.1 kPa"
""",
    "absorber-cell-b2": """\
name = "absorber-cell-b2"
# one cell of the plant-room silencer panel: a short tube through an 18 mm board
[cavity]
volume = "1.6 L"
[neck]
diameter = "16 mm"
length = "18 mm"
outer_end = "flanged"
inner_end = "flanged"
[air]
temperature = "17.5 degC"
relative_humidity = "60 %"
""",
    "port-check-k1": """\
name = "port-check-k1"
# visitor-hut loudspeaker box, front port flush with the baffle
[cavity]
volume = "9 L"
[neck]
diameter = "50 mm"
length = "110 mm"
outer_end = "flanged"
inner_end = "unflanged"
[air]
temperature = "23 degC"
relative_humidity = 0.4
""",
}

# how far each real object sits from the lumped formula, and its Q (demo truth)
TRUTH = {
    "listening-jar-04": {"f0_factor": 0.975, "q": 38.0, "excitation": "sweep",
                         "order": (0, 1), "subtype": "PCM_24"},
    "absorber-cell-b2": {"f0_factor": 0.962, "q": 9.0, "excitation": "noise",
                         "order": (0, 1), "subtype": "PCM_16", "rate_hz": 44100.0},
    "port-check-k1": {"f0_factor": 0.985, "q": 12.0, "excitation": "sweep",
                      "order": (1, 0), "subtype": "PCM_24"},
}

SWEEP = SweepParams(start_hz=20.0, stop_hz=3000.0, duration_s=3.0, rate_hz=48000.0,
                    level_dbfs=-12.0, fade_in_s=0.05, fade_out_s=0.01, tail_s=1.5)


def main() -> None:
    sweep = make_sweep(SWEEP)
    sf.write(HERE / "sweep-48k.wav", sweep.samples, int(SWEEP.rate_hz), subtype="PCM_24")
    (HERE / "sweep-48k.toml").write_text(sidecar_text(SWEEP), encoding="utf-8")
    truth = {}
    for seed, (name, text) in enumerate(OBJECTS.items()):
        obj_path = HERE / f"{name}.toml"
        obj_path.write_text(text, encoding="utf-8")
        obj = load_object(obj_path)
        air = air_state(**obj.air.air_state_kwargs())
        t = TRUTH[name]
        f0 = predict(obj, air).f0_hz * t["f0_factor"]
        rate = t.get("rate_hz", SWEEP.rate_hz)
        setup = Setup(f0_hz=f0, q=t["q"], rate_hz=rate, snr_db=35.0, excitation=t["excitation"],
                      sweep=SWEEP if t["excitation"] == "sweep" else None,
                      noise_duration_s=6.0, gain_inside=1.0, gain_outside=0.82,
                      delay_s=55e-6 + 20e-6 * seed)
        data, _ = simulate(setup, seed=100 + seed)
        out = HERE / f"{name}.flac"
        write_recording(str(out), data, rate, t["subtype"], order=t["order"])
        inside, outside = (1, 2) if t["order"] == (0, 1) else (2, 1)
        truth[name] = {"recording": out.name, "object": obj_path.name,
                       "sweep": "sweep-48k.wav" if t["excitation"] == "sweep" else None,
                       "inside": inside, "outside": outside, "f0_hz": f0, "q": t["q"],
                       "gain": setup.gain, "delay_s": setup.delay_s, "snr_db": setup.snr_db,
                       "rate_hz": rate}
    (HERE / "truth.json").write_text(json.dumps(truth, indent=2) + "\n", encoding="utf-8")


if __name__ == "__main__":
    main()
