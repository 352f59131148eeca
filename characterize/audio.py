"""Reading recordings: format checks, 1-based channels, clipping and silence.

Channels are numbered from 1 on the command line and in files (as audio
interfaces number them); they become 0-based here, once.
"""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path

import numpy as np
from numpy.typing import NDArray

from .errors import InputError

#: A sample at or within this many dB of full scale counts towards clipping.
CLIP_MARGIN_DB = 0.1
#: Consecutive near-full-scale samples that make a clipping run (common practice:
#: a single peak near full scale is not clipping, a flat run is).
CLIP_MIN_RUN = 3
#: A channel whose peak is below this (full scale = 1) is silent.
SILENCE_PEAK = 1e-6
#: Longest recording accepted (s). A measurement needs seconds to minutes; a
#: longer file is refused before it is read (one line, exit 2) rather than
#: filling the memory.
MAX_DURATION_S = 3600.0
#: Most samples (frames x channels) accepted: 2**27, 512 MiB as float32. A
#: 10-minute 96 kHz two-channel recording (115.2 M samples) fits; see
#: benchmarks/bench_memory.py for the peak memory the main job needs per sample.
MAX_SAMPLES = 2**27


@dataclass(frozen=True, slots=True)
class ClipReport:
    """Clipping found in one channel (1-based ``channel``)."""

    channel: int
    clipped_samples: int
    runs: int
    peak_dbfs: float

    @property
    def clipped(self) -> bool:
        return self.runs > 0


@dataclass(frozen=True)
class Recording:
    """A multichannel recording, samples as float (full scale = 1)."""

    path: str
    rate_hz: float
    data: NDArray[np.floating]  # shape (n_samples, n_channels)
    subtype: str
    format: str

    @property
    def n_channels(self) -> int:
        return int(self.data.shape[1])

    @property
    def n_samples(self) -> int:
        return int(self.data.shape[0])

    @property
    def duration_s(self) -> float:
        return self.n_samples / self.rate_hz

    def channel(self, number: int) -> NDArray[np.float64]:
        """Samples of 1-based channel ``number`` as float64 (a copy)."""
        check_channel(self, number, "channel")
        return np.asarray(self.data[:, number - 1], dtype=np.float64)

    def view(self, number: int) -> NDArray[np.floating]:
        """Samples of 1-based channel ``number`` as stored (float32), no copy."""
        check_channel(self, number, "channel")
        return self.data[:, number - 1]


def read_audio(path: str | Path, *, min_channels: int = 1) -> Recording:
    """Read a WAV/FLAC/AIFF (anything libsndfile reads) as float samples.

    Raises :class:`InputError` for a missing, unreadable or non-audio file, an
    empty one, one with fewer than ``min_channels`` channels, or one holding
    NaN or infinite samples.
    """
    import soundfile as sf

    p = Path(path)
    if not p.exists():
        raise InputError(str(p), None, "file not found")
    if p.is_dir():
        raise InputError(str(p), None, "is a directory, expected an audio file")
    if not p.is_file():
        raise InputError(str(p), None, "is not a regular file, expected an audio file")
    try:
        if p.stat().st_size == 0:
            raise InputError(str(p), None, "is empty (0 bytes), expected an audio file")
        info = sf.info(str(p))
        check_size(str(p), int(info.frames), int(info.channels), float(info.samplerate))
        data, rate = sf.read(str(p), dtype="float32", always_2d=True)
    except InputError:
        raise
    except (sf.LibsndfileError, RuntimeError, TypeError, ValueError) as exc:
        msg = " ".join(str(exc).split()) or type(exc).__name__
        raise InputError(str(p), None, f"not a readable audio file ({msg})") from None
    except MemoryError:
        raise InputError(str(p), None, "too large to read into memory") from None
    except OSError as exc:
        raise InputError(str(p), None, f"cannot read: {exc.strerror or exc}") from None
    if data.shape[0] == 0:
        raise InputError(str(p), None, "holds no samples")
    if data.shape[1] < min_channels:
        kind = "mono" if data.shape[1] == 1 else f"{data.shape[1]}-channel"
        raise InputError(str(p), "channels",
                         f"is {kind}; expected at least {min_channels} channels "
                         "(inside and outside microphones)")
    if not np.all(np.isfinite(data)):
        bad = int(np.count_nonzero(~np.isfinite(data)))
        raise InputError(str(p), "samples", f"holds {bad} NaN or infinite samples")
    return Recording(str(p), float(rate), data, info.subtype, info.format)


def _hms(seconds: float) -> str:
    h, rem = divmod(int(round(seconds)), 3600)
    m, s = divmod(rem, 60)
    return f"{h} h {m:02d} min {s:02d} s" if h else f"{m} min {s:02d} s"


def check_size(source: str, frames: int, channels: int, rate_hz: float) -> None:
    """Refuse, before reading, a recording longer than :data:`MAX_DURATION_S`
    or holding more than :data:`MAX_SAMPLES` samples (one-line :class:`InputError`)."""
    if rate_hz > 0 and frames / rate_hz > MAX_DURATION_S:
        raise InputError(source, None,
                         f"is {_hms(frames / rate_hz)} long; the longest recording accepted is "
                         f"{_hms(MAX_DURATION_S)} (audio.MAX_DURATION_S): cut it to the "
                         "measurement")
    if frames * channels > MAX_SAMPLES:
        raise InputError(source, None,
                         f"holds {frames:,} frames x {channels} channels, more than the "
                         f"{MAX_SAMPLES:,} samples accepted (audio.MAX_SAMPLES, "
                         f"{MAX_SAMPLES * 4 / 2**20:.0f} MiB as float32): cut it to the "
                         "measurement or keep only the channels used")


def check_channel(rec: Recording, number: int, option: str) -> int:
    """Validate a 1-based channel number; return the 0-based index."""
    if not isinstance(number, (int, np.integer)) or number < 1 or number > rec.n_channels:
        raise InputError(rec.path, option,
                         f"channel {number} does not exist (the file has channels "
                         f"1..{rec.n_channels})")
    return int(number) - 1


def check_not_silent(rec: Recording, number: int, role: str) -> None:
    """Raise :class:`InputError` when a channel is silent."""
    x = rec.data[:, number - 1]
    hi, lo = float(np.max(x)), float(np.min(x))
    if max(hi, -lo) < SILENCE_PEAK:
        raise InputError(rec.path, f"channel {number}",
                         f"the {role} channel is silent (peak below {SILENCE_PEAK:g} of "
                         "full scale)")
    if hi - lo < SILENCE_PEAK:
        raise InputError(rec.path, f"channel {number}",
                         f"the {role} channel holds only a constant level ({hi:.3g} of full "
                         "scale, no sound): check the microphone and its input")


def clip_report(rec: Recording, number: int) -> ClipReport:
    """Count clipping in a 1-based channel.

    For integer formats a clipping run is ``CLIP_MIN_RUN`` or more consecutive
    samples at or within ``CLIP_MARGIN_DB`` of full scale; for float formats any
    sample beyond +-1 counts as well (it would clip on playback or conversion).
    """
    x = np.abs(rec.data[:, number - 1])  # float32, as stored: no float64 copy
    peak = float(np.max(x))
    peak_dbfs = 20 * np.log10(peak) if peak > 0 else -np.inf
    near = x >= 10 ** (-CLIP_MARGIN_DB / 20)
    runs = 0
    clipped = 0
    if np.any(near):
        edges = np.diff(np.concatenate(([0], near.astype(np.int8), [0])))
        starts = np.flatnonzero(edges == 1)
        stops = np.flatnonzero(edges == -1)
        lengths = stops - starts
        long_runs = lengths >= CLIP_MIN_RUN
        runs = int(np.count_nonzero(long_runs))
        clipped = int(lengths[long_runs].sum())
    if "FLOAT" in rec.subtype or "DOUBLE" in rec.subtype:
        over = int(np.count_nonzero(x > 1.0))
        if over:
            clipped = max(clipped, over)
            runs = max(runs, 1)
    return ClipReport(number, clipped, runs, float(peak_dbfs))
