"""One full-duplex PortAudio stream that plays and records on the same clock.

Playing and recording on one stream (one device, one callback) keeps the two
in step sample for sample; two separate streams drift apart with their
clocks. The stream's per-block status flags are kept with the frame where
they happened, so that a take can be judged by where the trouble was.
"""

from __future__ import annotations

import threading
import time
from dataclasses import dataclass, field
from typing import Any

import numpy as np
from numpy.typing import NDArray

from ..errors import InputError
from .devices import DeviceInfo, import_sounddevice

#: Extra wall time allowed beyond the signal's duration before a stream that
#: does not progress is given up (a hung driver), s.
STREAM_TIMEOUT_MARGIN_S = 20.0
#: The stream's suggested latency, s. A measurement needs no low latency (the delay
#: is measured on every take), and large buffers ride out a busy machine: on the
#: loopback under a load of 20 on 2 cores, PortAudio's "low" and "high" settings
#: (9 and 35 ms there) gave a dropout or a silent take in 6 and 4 of 6 takes, 0.2 s
#: in 1 of 16.
STREAM_LATENCY: float | str = 0.2


@dataclass
class RawTake:
    """What one play-and-record produced.

    Attributes
    ----------
    recorded : ndarray, shape (n, channels), float32
        Input channels 1..channels; on an interrupted take only the frames
        recorded before the stop (the rest zeros) and ``frames`` says how many.
    frames : int
        Frames actually recorded.
    status : list of (frame, flags)
        The stream's status flags per block, with the block's first frame
        (e.g. ``"input underflow"``, ``"output underflow"``).
    interrupted : bool
        Ctrl-C stopped it.
    """

    recorded: NDArray[np.float32]
    frames: int
    status: list[tuple[int, str]] = field(default_factory=list)
    interrupted: bool = False
    wall_s: float = 0.0


class TakeInterrupted(Exception):
    """Ctrl-C during a take: the sound was stopped; ``take`` holds what was recorded."""

    def __init__(self, take: RawTake) -> None:
        super().__init__("interrupted")
        self.take = take


def _flags_text(status: Any) -> str:
    names = ("input_underflow", "input_overflow", "output_underflow", "output_overflow",
             "priming_output")
    return ", ".join(n.replace("_", " ") for n in names if getattr(status, n, False))


def play_record(device: DeviceInfo, signal: NDArray[np.floating], rate_hz: float,
                in_channels: int, *, blocksize: int = 0,
                latency: float | str = STREAM_LATENCY) -> RawTake:
    """Play ``signal`` (shape (n, out_channels), full scale 1) and record
    ``in_channels`` inputs for the same n frames, on one full-duplex stream.

    Ctrl-C aborts the stream at once (the sound stops) and raises
    :class:`TakeInterrupted` with what was recorded so far.

    Raises
    ------
    InputError
        The device is busy or refuses the settings (one line with the fix).
    """
    sd = import_sounddevice()
    out = np.ascontiguousarray(signal, dtype=np.float32)
    if out.ndim == 1:
        out = out[:, None]
    n = out.shape[0]
    rec = np.zeros((n, in_channels), dtype=np.float32)
    pos = [0]
    status: list[tuple[int, str]] = []
    done = threading.Event()

    def callback(indata: Any, outdata: Any, frames: int, time_info: Any, st: Any) -> None:
        i = pos[0]
        if st:
            status.append((i, _flags_text(st)))
        k = max(0, min(frames, n - i))
        outdata[:k] = out[i:i + k]
        outdata[k:] = 0
        rec[i:i + k] = indata[:k, :in_channels]
        pos[0] = i + k
        if pos[0] >= n:
            raise sd.CallbackStop

    t0 = time.monotonic()
    try:
        stream = sd.Stream(device=(device.index, device.index), samplerate=rate_hz,
                           channels=(in_channels, out.shape[1]), dtype="float32",
                           blocksize=blocksize, latency=latency, callback=callback,
                           finished_callback=done.set)
    except sd.PortAudioError as exc:
        text = str(exc).splitlines()[0] if str(exc) else "refused"
        low = text.lower()
        if "rate" in low:
            raise InputError("--rate", None, f"device {device.index} {device.name!r} does not "
                             f"take {rate_hz:g} Hz ({text}): use --rate "
                             f"{device.default_rate_hz:g}") from None
        if "unavailable" in low or "busy" in low:
            raise InputError("--device", None, f"device {device.index} {device.name!r} is busy "
                             f"({text}): close the other program using it and retry") from None
        raise InputError("--device", None, f"device {device.index} {device.name!r} could not "
                         f"be opened ({text}): check it is connected and not in use") from None
    interrupted = False
    try:
        stream.start()
        deadline = t0 + n / rate_hz + STREAM_TIMEOUT_MARGIN_S
        while not done.wait(0.05):
            if time.monotonic() > deadline:
                stream.abort()
                raise InputError("--device", None, f"device {device.index} {device.name!r} "
                                 f"stopped responding (recorded {pos[0]} of {n} frames): "
                                 "check the interface")
    except KeyboardInterrupt:
        interrupted = True
        stream.abort()  # the sound stops at once
    finally:
        stream.close()
    take = RawTake(recorded=rec, frames=int(pos[0]), status=status, interrupted=interrupted,
                   wall_s=time.monotonic() - t0)
    if interrupted:
        raise TakeInterrupted(take)
    return take
