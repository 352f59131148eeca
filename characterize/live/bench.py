"""A bench: something that plays a signal and records the microphones.

Two kinds behind one interface (:class:`Bench`): a real audio device through
PortAudio (:class:`DeviceBench`) and the simulated bench
(:class:`~characterize.live.simbench.SimulatedBench`). ``measure`` and
``tune`` only talk to this interface.
"""

from __future__ import annotations

import math
from typing import Any, Protocol

import numpy as np
from numpy.typing import NDArray

from ..errors import InputError
from .devices import DeviceInfo, check_rate
from .stream import RawTake, play_record

#: Rates a bench is asked for when none is given and the device has no default.
FALLBACK_RATE_HZ = 48000.0


class Bench(Protocol):
    """What ``measure`` needs from a device."""

    kind: str  # "device" or "simulated"
    name: str
    host_api: str
    index: int | None
    default_rate_hz: float
    inputs: int
    outputs: int

    def check(self, rate_hz: float, inputs: int, outputs: int) -> None:
        """Raise InputError when the rate or channel counts cannot be used."""

    def play_record(self, signal: NDArray[np.floating], rate_hz: float,
                    in_channels: int) -> RawTake:
        """Play ``signal`` (n, outputs) and record ``in_channels`` inputs on one clock."""

    def describe(self) -> dict[str, Any]:
        """Device, host API and the like, for the take's sidecar."""


class DeviceBench:
    """A real audio device (full duplex, one stream)."""

    kind = "device"

    def __init__(self, device: DeviceInfo) -> None:
        self.device = device
        self.name = device.name
        self.host_api = device.host_api
        self.index: int | None = device.index
        self.default_rate_hz = device.default_rate_hz or FALLBACK_RATE_HZ
        self.inputs = device.max_input_channels
        self.outputs = device.max_output_channels

    def check(self, rate_hz: float, inputs: int, outputs: int) -> None:
        check_rate(self.device, rate_hz, inputs, outputs)

    def play_record(self, signal: NDArray[np.floating], rate_hz: float,
                    in_channels: int) -> RawTake:
        return play_record(self.device, signal, rate_hz, in_channels)

    def describe(self) -> dict[str, Any]:
        return {"kind": self.kind, "index": self.index, "name": self.name,
                "host_api": self.host_api, "max_input_channels": self.inputs,
                "max_output_channels": self.outputs, "default_rate_hz": self.default_rate_hz}


#: ``--device simulate:KEY=VALUE,...`` keys -> SimulatedBench arguments.
SIMULATE_KEYS = {"end_correction": "end_correction_factor", "volume": "volume_factor",
                 "q": "q_factor", "dropouts": "dropout_probability"}


def parse_simulate(spec: str) -> dict[str, float] | None:
    """``simulate`` or ``simulate:end_correction=1.2,volume=0.98,q=1,dropouts=0`` ->
    keyword arguments of the simulated bench; None when ``spec`` is not a simulation."""
    head, _, rest = spec.strip().partition(":")
    if head.lower() != "simulate":
        return None
    kw: dict[str, float] = {}
    for item in filter(None, (x.strip() for x in rest.split(","))):
        key, eq, value = item.partition("=")
        if not eq or key.strip() not in SIMULATE_KEYS:
            raise InputError("--device", None, f"simulate takes {', '.join(SIMULATE_KEYS)} "
                             f"(e.g. simulate:end_correction=1.2), got {item!r}")
        try:
            v = float(value)
        except ValueError:
            raise InputError("--device", None, f"{key}: expected a number, got {value!r}") \
                from None
        if not (math.isfinite(v) and v >= 0) or (key != "dropouts" and v == 0) \
                or (key == "dropouts" and v > 1):
            raise InputError("--device", None, f"{key}: out of range: {value!r}")
        kw[SIMULATE_KEYS[key.strip()]] = v
    return kw


def open_bench(spec: str | None, *, inputs: int, outputs: int, object_path: Any = None,
               seed: int = 0) -> Bench:
    """The bench for ``--device``: ``simulate[:KEY=VALUE,...]`` for the simulated
    bench (needs the object file; keys in :data:`SIMULATE_KEYS`), else a device
    number or name (None: the default device)."""
    sim = parse_simulate(spec) if spec is not None else None
    if sim is not None:
        from .simbench import SimulatedBench

        return SimulatedBench.from_object_file(object_path, seed=seed, **sim)
    from .devices import find_device

    return DeviceBench(find_device(spec, inputs=inputs, outputs=outputs))
