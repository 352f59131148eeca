"""Microphone calibration: sensitivity from a calibrator tone, relative
gain and phase from a microphone swap, and the calibration file.

- :func:`analyze_tone`, :func:`sensitivity_from_tone` -- a sound calibrator's
  tone (94 dB SPL = 1.00237 Pa rms, IEC 60942) recorded on one channel gives
  that channel's sensitivity in full scale per pascal.
- :func:`relative_from_swap` -- two inside/outside transfer functions measured
  with the microphones exchanged give the true ratio and the channels'
  relative sensitivity (the switching technique of ISO 10534-2).
- :func:`write_calibration`, :func:`read_calibration` -- the small TOML file
  that ``fit --calibration`` reads (schema ``characterize.calibration/1``).

Sensitivities are in full scale per pascal (FS/Pa): p(t) = x(t) / K.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from pathlib import Path
from typing import TYPE_CHECKING, Any

from .errors import InputError
from .fileio import atomic_write_text, check_writable, read_toml
from .physics.spl import REFERENCE_PRESSURE_PA, spl_to_pressure_pa

if TYPE_CHECKING:
    import numpy as np
    from numpy.typing import NDArray

__all__ = [
    "SCHEMA",
    "REFERENCE_PRESSURE_PA",
    "BLOCK_S",
    "MIN_STABLE_S",
    "MIN_PURITY",
    "STABILITY_DB",
    "ToneReading",
    "ChannelCalibration",
    "RelativeCalibration",
    "Calibration",
    "analyze_tone",
    "sensitivity_from_tone",
    "relative_from_swap",
    "write_calibration",
    "read_calibration",
]

SCHEMA = "characterize.calibration/1"
#: Length of the blocks whose tone level is compared, s.
BLOCK_S = 0.1
#: Shortest stretch of stable tone accepted, s. Calibrators settle within a
#: second or two of being switched on and hold their level within about
#: 0.1 dB (class 1; IEC 60942 tolerances UNVERIFIED here, see the physics
#: sheet section 10), so a 1 s stretch within the band below is ample.
MIN_STABLE_S = 1.0
#: Fraction of the block power the tone must carry (noise and distortion at
#: least 10 dB below it; common practice for a calibrator in a quiet room).
MIN_PURITY = 0.9
#: Largest level spread (max - min of the 0.1 s blocks) in a stable stretch, dB.
STABILITY_DB = 0.4
#: Peak at or above this is treated as clipped (full scale = 1).
CLIP_PEAK = 0.999


@dataclass(frozen=True, slots=True)
class ToneReading:
    """A calibrator tone found in a recording.

    Attributes
    ----------
    frequency_hz : float
        Tone frequency, Hz.
    rms_fs : float
        RMS of the tone over the stable stretch, full scale (1 = full scale peak).
    level_dbfs : float
        20 log10(rms_fs), dB re full scale (a full-scale sine is -3.01 dBFS).
    start_s, stable_s : float
        Start and length of the stable stretch used, s.
    spread_db : float
        Level spread (max - min of its 0.1 s blocks) over the stretch, dB.
    purity : float
        Fraction of the stretch's power in the tone, 1.
    """

    frequency_hz: float
    rms_fs: float
    level_dbfs: float
    start_s: float
    stable_s: float
    spread_db: float
    purity: float

    def to_dict(self) -> dict[str, float]:
        return {k: float(getattr(self, k)) for k in self.__slots__}  # type: ignore[attr-defined]


def _tone_frequency(x: NDArray[np.float64], rate_hz: float) -> float:
    import numpy as np

    n = x.size
    spec = np.abs(np.fft.rfft(x * np.hanning(n)))
    f = np.fft.rfftfreq(n, 1.0 / rate_hz)
    spec[f < 20.0] = 0.0
    k = int(np.argmax(spec))
    if 0 < k < spec.size - 1:
        a, b, c = np.log(spec[k - 1 : k + 2] + 1e-300)
        denom = a - 2 * b + c
        shift = 0.5 * (a - c) / denom if denom != 0 else 0.0
    else:
        shift = 0.0
    return float((k + shift) * rate_hz / n)


def analyze_tone(samples: NDArray[np.float64], rate_hz: float, *, source: str = "recording",
                 field_name: str | None = None) -> ToneReading:
    """Find the longest stretch of one stable tone and measure its RMS.

    Steps: the tone frequency from the Hann-windowed spectrum of the whole
    recording (peak above 20 Hz, parabolic interpolation of the log
    magnitude); in blocks of :data:`BLOCK_S`, the tone's amplitude by least
    squares on a sine and cosine at that frequency (plus an offset); the
    longest run of consecutive blocks whose tone carries at least
    :data:`MIN_PURITY` of the power and whose levels spread by at most
    :data:`STABILITY_DB`. It must last :data:`MIN_STABLE_S`.

    Parameters
    ----------
    samples : ndarray
        One channel, full scale 1.
    rate_hz : float
        Sample rate, Hz.
    source, field_name : str
        Named in the error (the file and e.g. ``"--channel 1"``).

    Returns
    -------
    ToneReading

    Raises
    ------
    InputError
        Too short, clipped, silent, or no stable tone.
    """
    import numpy as np

    x = np.asarray(samples, dtype=np.float64).ravel()
    if not (isinstance(rate_hz, (int, float)) and rate_hz > 0):
        raise ValueError(f"rate_hz must be > 0, got {rate_hz!r}")
    n_block = int(round(BLOCK_S * rate_hz))
    need = int(math.ceil(MIN_STABLE_S / BLOCK_S))
    if x.size < need * n_block:
        raise InputError(source, field_name, f"no stable tone: the recording is "
                         f"{x.size / rate_hz:.2f} s long, need at least {MIN_STABLE_S:g} s "
                         "of the calibrator's tone")
    if not np.all(np.isfinite(x)):
        raise InputError(source, field_name, "samples are not finite")
    peak = float(np.max(np.abs(x)))
    if peak <= 1e-6:
        raise InputError(source, field_name, "no stable tone: the channel is silent")
    if peak >= CLIP_PEAK:
        raise InputError(source, field_name, f"the tone is clipped (peak {peak:.4f} of full "
                         "scale): lower the input gain and record it again")
    f_tone = _tone_frequency(x, float(rate_hz))
    n_blocks = x.size // n_block
    blocks = x[: n_blocks * n_block].reshape(n_blocks, n_block)
    t = np.arange(n_block) / rate_hz
    basis = np.stack([np.cos(2 * np.pi * f_tone * t), np.sin(2 * np.pi * f_tone * t),
                      np.ones(n_block)], axis=1)
    # each block has its own phase: shift the basis by the block's start time
    starts = np.arange(n_blocks) * n_block / rate_hz
    tone_ms = np.empty(n_blocks)
    total_ms = np.empty(n_blocks)
    pinv = np.linalg.pinv(basis)
    for i in range(n_blocks):
        y = blocks[i]
        coef = pinv @ y
        tone_ms[i] = 0.5 * (coef[0] ** 2 + coef[1] ** 2)
        total_ms[i] = float(np.mean((y - coef[2]) ** 2))
    purity = np.where(total_ms > 0, tone_ms / np.maximum(total_ms, 1e-300), 0.0)
    level = 10.0 * np.log10(np.maximum(tone_ms, 1e-300))
    ok = purity >= MIN_PURITY
    best = (0, 0)  # (start block, length)
    for i in range(n_blocks):
        if not ok[i]:
            continue
        lo = hi = level[i]
        j = i
        while j < n_blocks and ok[j]:
            lo, hi = min(lo, level[j]), max(hi, level[j])
            if hi - lo > STABILITY_DB:
                break
            j += 1
        if j - i > best[1]:
            best = (i, j - i)
        if best[1] >= n_blocks - i:
            break
    i0, length = best
    if length < need:
        raise InputError(
            source, field_name,
            f"no stable tone: the longest stretch where one tone ({f_tone:.1f} Hz) carries "
            f"{100 * MIN_PURITY:g} % of the power with its level within {STABILITY_DB:g} dB "
            f"lasts {length * BLOCK_S:.1f} s, need {MIN_STABLE_S:g} s (hold the calibrator "
            "steady on the microphone and record again)")
    sel = slice(i0, i0 + length)
    rms = math.sqrt(float(np.mean(tone_ms[sel])))
    return ToneReading(
        frequency_hz=f_tone, rms_fs=rms, level_dbfs=20.0 * math.log10(rms),
        start_s=float(starts[i0]), stable_s=length * BLOCK_S,
        spread_db=float(np.max(level[sel]) - np.min(level[sel])),
        purity=float(np.sum(tone_ms[sel]) / np.sum(total_ms[sel])),
    )


def sensitivity_from_tone(samples: NDArray[np.float64], rate_hz: float, level_db: float = 94.0,
                          *, source: str = "recording", field_name: str | None = None) -> float:
    r"""Channel sensitivity from a calibrator tone, full scale per pascal.

    .. math::

        K = \frac{x_\text{rms}}{p_0\,10^{L/20}},\qquad p_0 = 20\ \mu\text{Pa}

    with :math:`x_\text{rms}` the tone's RMS from :func:`analyze_tone`. A
    tone at -26 dBFS rms for 94 dB gives K = 0.0500 FS/Pa. The calibrator's
    level holds only for the microphone types and adaptors it was specified
    for; pistonphones need a static-pressure correction (not applied).

    Parameters
    ----------
    samples : ndarray
        One channel, full scale 1.
    rate_hz : float
        Sample rate, Hz.
    level_db : float
        The calibrator's level, dB SPL re 20 uPa (94 dB = 1 Pa; 114 dB = 10 Pa).
    source, field_name : str
        Named in errors.

    Returns
    -------
    float
        K, full scale per pascal.

    Raises
    ------
    InputError
        No stable tone (see :func:`analyze_tone`).

    References
    ----------
    IEC 60942:2017, *Electroacoustics -- Sound calibrators* (edition from
    memory); physics sheet section 10.
    """
    if isinstance(level_db, bool) or not isinstance(level_db, (int, float)) or not math.isfinite(
            level_db):
        raise ValueError(f"level_db must be a finite number, got {level_db!r}")
    return analyze_tone(samples, rate_hz, source=source, field_name=field_name).rms_fs / float(
        spl_to_pressure_pa(level_db))


def relative_from_swap(h_i: NDArray[np.complex128], h_ii: NDArray[np.complex128]
                       ) -> tuple[NDArray[np.complex128], NDArray[np.complex128]]:
    r"""True transfer function and channel mismatch from a microphone swap.

    Configuration I: microphone A (channel a) inside, B (channel b) outside,
    :math:`H_I = H\,s_a/s_b`. Configuration II, microphones exchanged (each
    still on its own channel) and H read inside-position over
    outside-position: :math:`H_{II} = H\,s_b/s_a`. Hence

    .. math::

        H = \sqrt{H_I H_{II}},\qquad \frac{s_a}{s_b} = \sqrt{H_I / H_{II}}

    with magnitudes as geometric means and phases as half sums and half
    differences of the unwrapped phases (so no branch of the square root is
    lost across frequency).

    Parameters
    ----------
    h_i, h_ii : ndarray of complex
        The two measured ratios on the same frequency grid.

    Returns
    -------
    h, mismatch : ndarray of complex
        H and :math:`s_a/s_b`.

    References
    ----------
    ISO 10534-2:1998, *Acoustics -- Determination of sound absorption
    coefficient and impedance in impedance tubes -- Part 2: Transfer-function
    method*, the microphone-switching calibration (clause from memory);
    physics sheet section 10.
    """
    import numpy as np

    a = np.asarray(h_i, dtype=np.complex128)
    b = np.asarray(h_ii, dtype=np.complex128)
    if a.shape != b.shape:
        raise ValueError(f"h_i {a.shape} and h_ii {b.shape} must have the same shape")
    pa, pb = np.unwrap(np.angle(a)), np.unwrap(np.angle(b))
    ma, mb = np.abs(a), np.abs(b)
    h = np.sqrt(ma * mb) * np.exp(0.5j * (pa + pb))
    mismatch = np.sqrt(ma / mb) * np.exp(0.5j * (pa - pb))
    return h, mismatch


@dataclass(frozen=True, slots=True)
class ChannelCalibration:
    """One channel's absolute sensitivity.

    Attributes
    ----------
    channel : int
        Channel number (from 1).
    sensitivity_fs_per_pa : float
        K, full scale per pascal.
    level_db : float
        Calibrator level used, dB SPL.
    tone_hz : float
        Calibrator frequency found, Hz.
    recording : str
        The recording it came from.
    """

    channel: int
    sensitivity_fs_per_pa: float
    level_db: float
    tone_hz: float
    recording: str = ""

    @property
    def sensitivity_db_re_fs_per_pa(self) -> float:
        """20 log10(K), dB re 1 FS/Pa."""
        return 20.0 * math.log10(self.sensitivity_fs_per_pa)


@dataclass(frozen=True, slots=True)
class RelativeCalibration:
    """Relative sensitivity s_a/s_b of two channels against frequency.

    Attributes
    ----------
    channel_a, channel_b : int
        The channels (from 1); a was inside in configuration I.
    freqs_hz : tuple of float
        Frequencies, Hz (increasing).
    ratio_magnitude : tuple of float
        |s_a/s_b|, 1.
    ratio_phase_deg : tuple of float
        Phase of s_a/s_b, degrees (unwrapped).
    recordings : tuple of str
        The two recordings.
    """

    channel_a: int
    channel_b: int
    freqs_hz: tuple[float, ...]
    ratio_magnitude: tuple[float, ...]
    ratio_phase_deg: tuple[float, ...]
    recordings: tuple[str, ...] = ()

    def ratio(self, freqs_hz: NDArray[np.float64]) -> NDArray[np.complex128]:
        """s_a/s_b at ``freqs_hz``: magnitude and phase interpolated linearly
        in log frequency, held constant beyond the measured band."""
        import numpy as np

        f = np.asarray(freqs_hz, dtype=np.float64)
        lf = np.log(np.maximum(np.asarray(self.freqs_hz), 1e-12))
        x = np.log(np.maximum(f, 1e-12))
        mag = np.interp(x, lf, np.asarray(self.ratio_magnitude))
        ph = np.interp(x, lf, np.radians(np.asarray(self.ratio_phase_deg)))
        return mag * np.exp(1j * ph)

    def correction(self, freqs_hz: NDArray[np.float64], inside: int, outside: int
                   ) -> NDArray[np.complex128]:
        """Factor to DIVIDE a measured inside/outside ratio by.

        Raises
        ------
        InputError
            The channels are not the pair this calibration is for.
        """
        r = self.ratio(freqs_hz)
        if (inside, outside) == (self.channel_a, self.channel_b):
            return r
        if (inside, outside) == (self.channel_b, self.channel_a):
            return 1.0 / r
        raise InputError("--calibration", "relative",
                         f"is for channels {self.channel_a} and {self.channel_b}, not "
                         f"inside {inside} / outside {outside}")


@dataclass(frozen=True)
class Calibration:
    """A calibration file's content.

    Attributes
    ----------
    channels : dict of int to ChannelCalibration
    relative : RelativeCalibration or None
    source_path : str
    created : str
    """

    channels: dict[int, ChannelCalibration] = field(default_factory=dict)
    relative: RelativeCalibration | None = None
    source_path: str = ""
    created: str = ""

    def sensitivity(self, channel: int) -> float:
        """K of ``channel`` (FS/Pa); InputError if the file has none for it."""
        if channel not in self.channels:
            have = ", ".join(str(c) for c in sorted(self.channels)) or "none"
            raise InputError(self.source_path or "--calibration", f"channels.{channel}",
                             f"no sensitivity for channel {channel} (channels in the file: "
                             f"{have}); run characterize calibrate with --channel {channel}")
        return self.channels[channel].sensitivity_fs_per_pa

    def pressure_pa(self, amplitude_fs: float, channel: int) -> float:
        """A full-scale amplitude (peak or rms) as pascals (same kind)."""
        return amplitude_fs / self.sensitivity(channel)

    def with_channel(self, cal: ChannelCalibration) -> Calibration:
        channels = dict(self.channels)
        channels[cal.channel] = cal
        return Calibration(channels, self.relative, self.source_path, self.created)

    def with_relative(self, rel: RelativeCalibration) -> Calibration:
        return Calibration(dict(self.channels), rel, self.source_path, self.created)


def _fmt(x: float) -> str:
    return repr(float(x))


def _str(s: str) -> str:
    return '"' + s.replace("\\", "\\\\").replace('"', '\\"') + '"'


def calibration_text(cal: Calibration) -> str:
    """The calibration file's TOML text."""
    import datetime as _dt

    created = cal.created or _dt.datetime.now(_dt.timezone.utc).strftime("%Y-%m-%dT%H:%M:%SZ")
    lines = ["# characterize calibration file: channel sensitivities (full scale per pascal)",
             "# and the relative gain and phase of two channels (microphone swap)",
             f"schema = {_str(SCHEMA)}", f"created = {_str(created)}", ""]
    for ch in sorted(cal.channels):
        c = cal.channels[ch]
        lines += [f"[channels.{ch}]",
                  f"sensitivity_fs_per_pa = {_fmt(c.sensitivity_fs_per_pa)}",
                  f"level_db = {_fmt(c.level_db)}",
                  f"tone_hz = {_fmt(c.tone_hz)}",
                  f"recording = {_str(c.recording)}", ""]
    if cal.relative is not None:
        r = cal.relative
        lines += ["[relative]", f"channel_a = {r.channel_a}", f"channel_b = {r.channel_b}",
                  "recordings = [" + ", ".join(_str(s) for s in r.recordings) + "]",
                  "freqs_hz = [" + ", ".join(_fmt(x) for x in r.freqs_hz) + "]",
                  "ratio_magnitude = [" + ", ".join(_fmt(x) for x in r.ratio_magnitude) + "]",
                  "ratio_phase_deg = [" + ", ".join(_fmt(x) for x in r.ratio_phase_deg) + "]",
                  ""]
    return "\n".join(lines)


def write_calibration(path: str | Path, calibration: Calibration, *, force: bool = False
                      ) -> Path:
    """Write ``calibration`` atomically to ``path`` (TOML).

    Raises
    ------
    InputError
        ``path`` exists and ``force`` is false, or is a directory.
    """
    check_writable(path, force=force, what="calibration file")
    return atomic_write_text(path, calibration_text(calibration))


def _number(value: Any, source: str, field: str, positive: bool = False) -> float:
    if isinstance(value, bool) or not isinstance(value, (int, float)) or not math.isfinite(value):
        raise InputError(source, field, f"expected a number, got {value!r}")
    if positive and value <= 0:
        raise InputError(source, field, f"must be greater than zero, got {value!r}")
    return float(value)


def _int(value: Any, source: str, field: str) -> int:
    if isinstance(value, bool) or not isinstance(value, int) or value < 1:
        raise InputError(source, field, f"expected a channel number >= 1, got {value!r}")
    return int(value)


def read_calibration(path: str | Path) -> Calibration:
    """Read a calibration file written by :func:`write_calibration`.

    Raises
    ------
    InputError
        Missing, unreadable or malformed file (one line naming the field).
    """
    if Path(path).is_dir():  # 'calibrate --out DIR' writes DIR/calibration.toml
        path = Path(path) / "calibration.toml"
    source = str(path)
    data = read_toml(path, "a calibration file")
    if data.get("schema") != SCHEMA:
        raise InputError(source, "schema", f"expected {SCHEMA!r}, got {data.get('schema')!r} "
                         "(write the file with characterize calibrate)")
    allowed = {"schema", "created", "channels", "relative"}
    for key in data:
        if key not in allowed:
            raise InputError(source, key, f"unknown key; allowed: {', '.join(sorted(allowed))}")
    channels: dict[int, ChannelCalibration] = {}
    raw_channels = data.get("channels", {})
    if not isinstance(raw_channels, dict):
        raise InputError(source, "channels", "expected tables [channels.N]")
    for key, table in raw_channels.items():
        where = f"channels.{key}"
        if not key.isdigit() or int(key) < 1 or not isinstance(table, dict):
            raise InputError(source, where, "expected a table [channels.N] with N >= 1")
        for k in ("sensitivity_fs_per_pa", "level_db", "tone_hz"):
            if k not in table:
                raise InputError(source, f"{where}.{k}", "missing required field")
        channels[int(key)] = ChannelCalibration(
            channel=int(key),
            sensitivity_fs_per_pa=_number(table["sensitivity_fs_per_pa"], source,
                                          f"{where}.sensitivity_fs_per_pa", positive=True),
            level_db=_number(table["level_db"], source, f"{where}.level_db"),
            tone_hz=_number(table["tone_hz"], source, f"{where}.tone_hz", positive=True),
            recording=str(table.get("recording", "")),
        )
    relative = None
    if "relative" in data:
        r = data["relative"]
        if not isinstance(r, dict):
            raise InputError(source, "relative", "expected a table [relative]")
        for k in ("channel_a", "channel_b", "freqs_hz", "ratio_magnitude", "ratio_phase_deg"):
            if k not in r:
                raise InputError(source, f"relative.{k}", "missing required field")
        arrays = {}
        for k in ("freqs_hz", "ratio_magnitude", "ratio_phase_deg"):
            v = r[k]
            if not isinstance(v, list) or not v:
                raise InputError(source, f"relative.{k}", "expected a non-empty list of numbers")
            arrays[k] = tuple(_number(x, source, f"relative.{k}") for x in v)
        n = {len(a) for a in arrays.values()}
        if len(n) != 1:
            raise InputError(source, "relative", "freqs_hz, ratio_magnitude and "
                             "ratio_phase_deg must have the same length")
        f = arrays["freqs_hz"]
        if any(b <= a for a, b in zip(f, f[1:], strict=False)) or f[0] <= 0:
            raise InputError(source, "relative.freqs_hz", "must be positive and increasing")
        if any(m <= 0 for m in arrays["ratio_magnitude"]):
            raise InputError(source, "relative.ratio_magnitude", "must be greater than zero")
        a_ch = _int(r["channel_a"], source, "relative.channel_a")
        b_ch = _int(r["channel_b"], source, "relative.channel_b")
        if a_ch == b_ch:
            raise InputError(source, "relative", "channel_a and channel_b must differ")
        relative = RelativeCalibration(a_ch, b_ch, f, arrays["ratio_magnitude"],
                                       arrays["ratio_phase_deg"],
                                       tuple(str(s) for s in r.get("recordings", [])))
    return Calibration(channels, relative, source, str(data.get("created", "")))
