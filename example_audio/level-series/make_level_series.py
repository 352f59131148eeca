"""Regenerate the level-series example (demo data, simulated).

Scenario (invented for the demo): before the Saltmarsh Sound Garden's "loud
hour" installation, listening jar 04 (the bundled example_audio/listening-jar-04)
was measured at seven drive levels, from 96 to 136 dB inside the cavity, read
off a calibrated inside microphone. At the higher levels the jar also stood on a
milligram balance: the mean jet flow out of the neck adds a steady force, read
as excess mass at 126 to 144 dB (balance.csv).

CAUTION: these levels need hearing protection, short exposures and the local
occupational-noise rules; see docs/tuning.md.

The truth (``truth.json``):

- Q at each level from the physics sheet's quasi-steady estimate (section 6):
  1/Q = 1/Q0 + (4 / (3 pi C_d^2)) xi / L_eff with discharge coefficient 0.8,
  xi = V p_c / (rho c^2 S) the neck displacement amplitude;
- f0 rises by 0.1 xi/d (invented for the demo, a small level dependence);
- the balance reads a force 0.5 rho S u0^2 (u0 = omega xi, an order-of-magnitude
  estimate of the jet thrust, invented for the demo), converted to mass with
  standard gravity, plus 1 mg of reading noise.

Recordings: :mod:`characterize.simulate`, 16 kHz, 16-bit FLAC (the simulator
normalises the recorded level, so the SPL is given in the manifest).

Run from the repository root:  python example_audio/level-series/make_level_series.py
"""

from __future__ import annotations

import json
import math
from pathlib import Path

import numpy as np
import soundfile as sf

from characterize.excitation import SweepParams, make_sweep, sidecar_text
from characterize.objectfile import load_object
from characterize.physics.air import air_state
from characterize.physics.helmholtz import derive_from_f0
from characterize.simulate import Setup, simulate, write_recording
from characterize.tuning import STANDARD_GRAVITY_M_S2, neck_displacement_over_diameter

HERE = Path(__file__).resolve().parent
OBJECT = HERE.parent / "listening-jar-04.toml"
RATE_HZ = 16000.0
SWEEP = SweepParams(start_hz=40.0, stop_hz=2000.0, duration_s=1.5, rate_hz=RATE_HZ,
                    level_dbfs=-12.0, fade_in_s=0.05, fade_out_s=0.01, tail_s=0.8)
LEVELS_DB = (96.0, 104.0, 112.0, 118.0, 124.0, 130.0, 136.0)
BALANCE_DB = (126.0, 129.0, 132.0, 135.0, 138.0, 141.0, 144.0)
Q0 = 38.0
#: small-signal f0 of the jar, Hz (the bundled listening-jar-04 example's truth,
#: rounded; fixed here so the demo does not move when the predictions improve)
F0_SMALL_SIGNAL_HZ = 243.2
DISCHARGE_COEFFICIENT = 0.8
BALANCE_NOISE_KG = 1e-6


def main() -> None:
    sweep = make_sweep(SWEEP)
    sf.write(HERE / "sweep-16k.wav", sweep.samples, int(RATE_HZ), subtype="PCM_16")
    (HERE / "sweep-16k.toml").write_text(sidecar_text(SWEEP), encoding="utf-8")
    obj = load_object(OBJECT)
    air = air_state(**obj.air.air_state_kwargs())
    f0_small = F0_SMALL_SIGNAL_HZ
    l_eff = derive_from_f0(f0_small, 0.0, obj, air).effective_neck_length_m
    d = obj.neck.diameter_m
    rows = ["id,recording,object,sweep,spl_db,note"]
    levels: list[dict[str, object]] = []
    truth: dict[str, object] = {"object": "../listening-jar-04.toml", "q0": Q0,
                                "f0_small_signal_hz": f0_small,
                                "discharge_coefficient": DISCHARGE_COEFFICIENT, "levels": levels}
    for seed, spl in enumerate(LEVELS_DB):
        xd = neck_displacement_over_diameter(spl, f0_small, obj, air)
        inv_q = 1.0 / Q0 + 4.0 / (3.0 * math.pi * DISCHARGE_COEFFICIENT**2) * xd * d / l_eff
        q = 1.0 / inv_q
        f0 = f0_small * (1.0 + 0.1 * xd)
        setup = Setup(f0_hz=f0, q=q, rate_hz=RATE_HZ, snr_db=34.0, sweep=SWEEP,
                      gain_inside=1.0, gain_outside=0.82, delay_s=55e-6)
        data, _ = simulate(setup, seed=400 + seed)
        name = f"jar04-{spl:.0f}dB"
        write_recording(str(HERE / f"{name}.flac"), data, RATE_HZ, "PCM_16")
        rows.append(f"{name},{name}.flac,../listening-jar-04.toml,sweep-16k.wav,{spl:.1f},")
        levels.append({"id": name, "spl_db": spl, "f0_hz": f0, "q": q,
                       "displacement_over_diameter": xd})
    rows[1] += "small signal"
    (HERE / "manifest.csv").write_text("\n".join(rows) + "\n", encoding="utf-8")
    rng = np.random.default_rng(44)
    lines = ["spl_db,excess_mass_kg,excess_mass_stderr_kg,note"]
    omega = 2.0 * math.pi * f0_small
    for spl in BALANCE_DB:
        xi = neck_displacement_over_diameter(spl, f0_small, obj, air) * d
        force = 0.5 * air.density_kg_m3 * obj.neck.area_m2 * (omega * xi) ** 2
        mass = force / STANDARD_GRAVITY_M_S2 + BALANCE_NOISE_KG * rng.standard_normal()
        lines.append(f"{spl:.1f},{mass:.6f},{BALANCE_NOISE_KG:.6f},")
    lines[1] += "balance tared with the drive off"
    (HERE / "balance.csv").write_text("\n".join(lines) + "\n", encoding="utf-8")
    (HERE / "truth.json").write_text(json.dumps(truth, indent=2) + "\n", encoding="utf-8")


if __name__ == "__main__":
    main()
