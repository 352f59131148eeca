"""The simulated bench: a seeded "true" object behind the same interface as a device.

Built on the project's measurement-chain simulator (:mod:`characterize.simulate`):
what is played on output 1 goes through the loudspeaker and the room
(:func:`~characterize.simulate.speaker_room_response`) to the mouth, where the
outside microphone hears it; the inside microphone hears it through the
resonator (:func:`~characterize.simulate.true_transfer`). Both get the
microphones' noise, the device's latency (which changes between takes in steps
of a block, like the loopback measured in shared/reference), a dead start of
zeros, and hard clipping at full scale.

The true object differs from the object file a little, as real ones do: its
lumped-equivalent end correction and its cavity volume are off by a few
percent (seeded), so the geometry's prediction is off by a few tenths of a
percent to a percent or two. f0 follows the lumped law with the true values
(Rayleigh 1896): f0 = (c/2pi) sqrt(S/(V (L + delta))). Q is the geometry's
predicted Q (:func:`~characterize.physics.helmholtz.predict`) for the current
shape. Changes typed at the bench (cut the neck, pour in liquid, widen the bore)
are applied to the true object.
"""

from __future__ import annotations

import math
from dataclasses import replace
from pathlib import Path
from typing import Any

import numpy as np
from numpy.typing import NDArray

from ..errors import InputError
from ..physics.air import AirState
from ..physics.geometry import ResonatorObject
from .stream import RawTake

#: Rates the simulated interface accepts, Hz.
SIM_RATES_HZ = (44100.0, 48000.0, 88200.0, 96000.0)
#: Outside microphone's level relative to the output (pressure at the mouth per
#: full-scale output, in full-scale input units): -20 dB.
SIM_OUTSIDE_GAIN = 0.1
#: Inside over outside microphone sensitivity.
SIM_INSIDE_GAIN = 0.8
#: Microphone and preamplifier noise, rms full scale (-100 dBFS).
SIM_NOISE_RMS = 1e-5
#: Latencies at 48 kHz (samples) drawn per take, like the loopback's 515/1029/1540.
SIM_LATENCIES_48K = (515, 1029, 1029, 1029, 1029, 1540)
#: Leading zeros of every recording at 48 kHz (the loopback's 75 ms).
SIM_DEAD_START_48K = 3584
#: Zeros inserted by a simulated dropout, at 48 kHz.
SIM_GAP_48K = 2048
#: Spread of the true end correction and volume about the object file's (uniform, +-).
SIM_SPREAD = 0.03


class SimulatedBench:
    """A simulated two-microphone bench around one object.

    Parameters
    ----------
    obj : ResonatorObject
        The object file's description (nominal).
    air : AirState
        The bench's air.
    seed : int
        Seeds the true object's deviations, the latencies, the noise and the
        dropouts.
    end_correction_factor, volume_factor : float, optional
        True / textbook end correction and true / nominal volume; default drawn
        uniformly within +-:data:`SIM_SPREAD`.
    q_factor : float
        True Q over the predicted one.
    dropout_probability : float
        Chance that a take gets a gap of zeros mid-recording.
    dropout_takes, silent_takes : iterable of int
        Takes (counted from 1 over every play) that get a gap, or come back all
        zeros, for tests.
    """

    kind = "simulated"
    host_api = "simulation"
    index: int | None = None
    default_rate_hz = 48000.0
    inputs = 2
    outputs = 2

    def __init__(self, obj: ResonatorObject, air: AirState, *, seed: int = 0,
                 end_correction_factor: float | None = None,
                 volume_factor: float | None = None, q_factor: float = 1.0,
                 dropout_probability: float = 0.02, dropout_takes: Any = (),
                 silent_takes: Any = ()) -> None:
        from ..physics.helmholtz import predict

        if obj.kind != "helmholtz":
            raise InputError(obj.source_path, "kind", "the simulated bench models Helmholtz "
                             f"resonators, not a {obj.kind!r}")
        self.name = f"simulated bench ({obj.name})"
        self.rng = np.random.default_rng(seed)
        self.seed = seed
        self.nominal = obj
        self.air = air
        e_d = end_correction_factor if end_correction_factor is not None else \
            1.0 + self.rng.uniform(-SIM_SPREAD, SIM_SPREAD)
        e_v = volume_factor if volume_factor is not None else \
            1.0 + self.rng.uniform(-SIM_SPREAD, SIM_SPREAD)
        pred = predict(obj, air)
        #: true lumped-equivalent end correction over the neck radius
        self.k_true = pred.end_correction_m * e_d / obj.neck.radius_m
        self.end_correction_factor = e_d
        self.volume_factor = e_v
        self.q_factor = q_factor
        self.length_m = obj.neck.length_m
        self.diameter_m = obj.neck.diameter_m
        self.volume_m3 = obj.cavity.volume_m3 * e_v
        self.dropout_probability = dropout_probability
        self.dropout_takes = set(dropout_takes)
        self.silent_takes = set(silent_takes)
        self.plays = 0
        self.changes: list[tuple[str, float]] = []

    @classmethod
    def from_object_file(cls, path: str | Path | None, *, seed: int = 0,
                         **kw: Any) -> SimulatedBench:
        if path is None:
            raise InputError("--device", None, "simulate needs --object OBJECT.toml (the "
                             "simulated bench measures that object)")
        from ..objectfile import load_object
        from ..physics.conditions import resolve_air

        obj = load_object(path)
        air, _ = resolve_air(obj)
        return cls(obj, air, seed=seed, **kw)

    # ------------------------------------------------------------------ truth
    def current_object(self) -> ResonatorObject:
        """The nominal description with the true neck length and diameter (the
        volume and end correction stay nominal: they are what is not known)."""
        o = self.nominal
        return replace(o, neck=replace(o.neck, length_m=self.length_m,
                                       diameter_m=self.diameter_m))

    @property
    def end_correction_m(self) -> float:
        return self.k_true * self.diameter_m / 2.0

    def truth(self) -> dict[str, float]:
        """The true f0 (lumped law with the true values) and Q now."""
        from ..physics.helmholtz import helmholtz_f0_hz, predict

        o = self.current_object()
        area = o.neck.count * math.pi * (self.diameter_m / 2.0) ** 2 if \
            o.neck.shape != "slot" else o.neck.area_m2
        f0 = helmholtz_f0_hz(self.air.speed_of_sound_m_s, area, self.volume_m3,
                             self.length_m + self.end_correction_m)
        q = predict(o, self.air).q_predicted * self.q_factor
        return {"f0_hz": f0, "q": q, "end_correction_m": self.end_correction_m,
                "volume_m3": self.volume_m3, "neck_length_m": self.length_m,
                "neck_diameter_m": self.diameter_m,
                "end_correction_factor": self.end_correction_factor,
                "volume_factor": self.volume_factor, "seed": self.seed}

    def apply_change(self, route: str, amount: float) -> None:
        """A change made at the bench: ``neck`` cut by ``amount`` m (negative:
        lengthened), ``volume`` liquid added ``amount`` m^3 (negative: removed),
        ``diameter`` bore widened by ``amount`` m."""
        if route == "neck":
            if not 0 < self.length_m - amount:
                raise InputError("change", None, f"cutting {amount * 1e3:.2f} mm leaves no neck "
                                 f"({self.length_m * 1e3:.2f} mm long)")
            self.length_m -= amount
        elif route == "volume":
            if not 0 < self.volume_m3 - amount:
                raise InputError("change", None, "that leaves no cavity")
            self.volume_m3 -= amount
        elif route == "diameter":
            if not 0 < self.diameter_m + amount:
                raise InputError("change", None, "that closes the bore")
            self.diameter_m += amount
        else:
            raise ValueError(route)
        self.changes.append((route, amount))

    # --------------------------------------------------------------- the bench
    def check(self, rate_hz: float, inputs: int, outputs: int) -> None:
        if float(rate_hz) not in SIM_RATES_HZ:
            raise InputError("--rate", None, f"the simulated bench does not take {rate_hz:g} "
                             "Hz: use one of " + ", ".join(f"{r:g}" for r in SIM_RATES_HZ))
        if inputs > self.inputs:
            raise InputError("--device", None, f"the simulated bench has {self.inputs} input "
                             f"channels but {inputs} are needed (--inside/--outside)")
        if outputs > self.outputs:
            raise InputError("--device", None, f"the simulated bench has {self.outputs} "
                             f"output channels but {outputs} are needed (--output)")

    def describe(self) -> dict[str, Any]:
        return {"kind": self.kind, "index": None, "name": self.name,
                "host_api": self.host_api, "max_input_channels": self.inputs,
                "max_output_channels": self.outputs, "default_rate_hz": self.default_rate_hz,
                "seed": self.seed}

    def play_record(self, signal: NDArray[np.floating], rate_hz: float,
                    in_channels: int) -> RawTake:
        """Output 1 drives the loudspeaker; input 1 is the inside microphone,
        input 2 the outside one."""
        from scipy.fft import irfft, next_fast_len, rfft

        from ..simulate import Setup, speaker_room_response, true_transfer

        self.plays += 1
        fs = float(rate_hz)
        x = np.asarray(signal, dtype=np.float64)
        x = x[:, 0] if x.ndim == 2 else x
        n = x.size
        scale = fs / 48000.0
        rec = np.zeros((n, in_channels), dtype=np.float32)
        if self.plays in self.silent_takes:
            return RawTake(rec, n, [(0, "input underflow")])
        truth = self.truth()
        setup = Setup(f0_hz=truth["f0_hz"], q=truth["q"], rate_hz=fs,
                      gain_inside=SIM_INSIDE_GAIN, gain_outside=1.0)
        latency = int(round(self.rng.choice(SIM_LATENCIES_48K) * scale))
        tau = truth["q"] / (math.pi * truth["f0_hz"])
        n_fft = next_fast_len(n + latency + int(40 * tau * fs) + int(0.1 * fs), real=True)
        f = np.fft.rfftfreq(n_fft, 1 / fs).astype(np.float64)
        spec = rfft(x, n_fft) * speaker_room_response(setup, f) * SIM_OUTSIDE_GAIN
        outside = irfft(spec, n_fft)
        inside = irfft(spec * true_transfer(setup, f), n_fft)
        mics = np.stack([inside, outside], axis=1)[:n]
        mics = np.concatenate([np.zeros((latency, 2)), mics])[:n]
        mics += SIM_NOISE_RMS * self.rng.standard_normal(mics.shape)
        dead = min(n, int(round(SIM_DEAD_START_48K * scale)))
        mics[:dead] = 0.0
        status = [(0, "input underflow")]
        if self.plays in self.dropout_takes or self.rng.random() < self.dropout_probability:
            at = int(self.rng.uniform(0.3, 0.7) * n)
            gap = int(round(SIM_GAP_48K * scale))
            mics = np.concatenate([mics[:at], np.zeros((gap, 2)), mics[at:]])[:n]
        np.clip(mics, -1.0, 1.0, out=mics)
        rec[:, :min(2, in_channels)] = mics[:, :min(2, in_channels)]
        return RawTake(rec, n, status)
