"""Judging one recorded take by itself (pure numpy; no audio device needed).

A stream's status flags alone cannot judge a take: on a sound server's loopback
every block of the device's dead start is flagged "input underflow", and a
dropout mid-recording is flagged only sometimes (shared/reference
audio-loopback note). So the recording itself is checked against the signal
that was played:

- the delay (latency) by cross-correlation with the played signal, every take;
- the device's dead start (the leading run of exact zeros) must end before the
  sweep arrives;
- silence (an all-zero recording, as a device at another rate gives);
- gaps: runs of exact zeros where the sweep was playing, and short windows
  whose level falls far below their neighbours';
- timing slips: the delay measured on each half of the sweep must agree
  (samples dropped or inserted mid-take shift the second half);
- stream status flags inside the sweep's span;
- clipping.

Any of these but clipping makes the take one to repeat; clipping makes the
caller lower the level.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Any

import numpy as np
from numpy.typing import NDArray

from ..excitation import SweepParams

#: A take whose peak on a microphone channel is below this is silent (full scale 1).
SILENT_PEAK = 1e-6
#: A run of at least this many exact zeros inside the sweep is a gap (noise from a
#: real microphone and preamplifier is never exactly zero for this long).
GAP_MIN_RUN = 32
#: Window for the level-drop check, s; a window whose rms falls this many dB below
#: the median of its neighbours' is a dropout.
DROP_WINDOW_S = 0.01
DROP_DB = 30.0
#: The delays measured on the two halves of the sweep may differ by this much plus
#: half the inverse of the half's bandwidth (the correlation's resolution), s.
SLIP_TOLERANCE_S = 0.003
#: The leading zeros may reach this far past the sweep's arrival (its fade-in starts
#: at zero), s.
DEAD_START_SLACK_S = 0.002
#: A peak at or above this (dB below full scale) counts as clipped.
CLIP_DBFS = -0.1
#: Normalised correlation of the outside channel with the played signal below which
#: the sweep is taken as not found (the outside microphone hears something else).
MIN_MATCH = 0.02
#: Stream flags that mean lost or late samples inside the sweep.
BAD_STATUS = ("output underflow", "input overflow", "output overflow", "input underflow")


@dataclass(frozen=True)
class TakeCheck:
    """What a take's own samples say.

    Attributes
    ----------
    delay_samples : int or None
        Lag of the outside channel behind the played signal (the device's
        latency plus the acoustic path), samples; None when not found.
    dead_start_samples : int
        Leading frames that are exactly zero on every channel.
    peaks_dbfs : dict
        Peak of each microphone channel (1-based), dBFS.
    clipped : tuple of int
        Channels that reached full scale.
    problems : tuple of str
        Reasons to repeat the take (empty: a good take).
    retry : str or None
        What to change for the repeat: ``"lead-in"``, ``"post-roll"`` or None
        (just repeat).
    """

    delay_samples: int | None
    dead_start_samples: int
    peaks_dbfs: dict[int, float]
    clipped: tuple[int, ...] = ()
    problems: tuple[str, ...] = ()
    retry: str | None = None
    match: float = math.nan
    half_delays_samples: tuple[int, ...] = ()
    extra: dict[str, Any] = field(default_factory=dict)

    @property
    def ok(self) -> bool:
        return not self.problems and not self.clipped

    def to_dict(self) -> dict[str, Any]:
        return {"delay_samples": self.delay_samples, "dead_start_samples":
                self.dead_start_samples,
                "peaks_dbfs": {str(k): v for k, v in self.peaks_dbfs.items()},
                "clipped_channels": list(self.clipped), "problems": list(self.problems),
                "match": self.match, "half_delays_samples": list(self.half_delays_samples)}


def _db(x: float) -> float:
    return 20.0 * math.log10(x) if x > 0 else -math.inf


def _envelope_xcorr(x: NDArray[np.float64], y: NDArray[np.float64]) -> NDArray[np.float64]:
    """|analytic cross-correlation| of y against x at lags 0..len(y)-1 (y lags x).

    The analytic envelope has no carrier ripple, so its peak does not jump by a
    period at low frequencies."""
    from scipy.fft import fft, ifft, next_fast_len

    n = next_fast_len(x.size + y.size, real=False)
    c = np.conj(fft(x, n)) * fft(y, n)
    c[n // 2 + 1:] = 0.0
    c[1:n // 2] *= 2.0
    r = np.abs(ifft(c))
    return np.asarray(r[:y.size], dtype=np.float64)


def find_delay(played: NDArray[np.floating], recorded: NDArray[np.floating],
               max_lag: int | None = None) -> tuple[int, float]:
    """Delay of ``recorded`` behind ``played`` (samples, >= 0) and the normalised
    height of the correlation peak (1 for an exact delayed copy)."""
    x = np.asarray(played, dtype=np.float64)
    y = np.asarray(recorded, dtype=np.float64)
    r = _envelope_xcorr(x, y)
    if max_lag is not None:
        r = r[:max_lag + 1]
    k = int(np.argmax(r))
    norm = float(np.linalg.norm(x) * np.linalg.norm(y))
    return k, (float(r[k]) / norm if norm > 0 else 0.0)


def _zero_runs(x: NDArray[np.floating], min_run: int) -> list[tuple[int, int]]:
    """(start, length) of every run of exact zeros at least ``min_run`` long."""
    z = np.concatenate([[False], np.asarray(x) == 0, [False]])
    d = np.diff(z.astype(np.int8))
    starts = np.flatnonzero(d == 1)
    ends = np.flatnonzero(d == -1)
    return [(int(s), int(e - s)) for s, e in zip(starts, ends, strict=True)
            if e - s >= min_run]


def check_take(recorded: NDArray[np.floating], played: NDArray[np.floating], rate_hz: float,
               inside: int, outside: int, sweep: SweepParams, sweep_start: int,
               status: list[tuple[int, str]] | None = None) -> TakeCheck:
    """Judge a take (see the module docstring).

    Parameters
    ----------
    recorded : ndarray (n, channels)
        The take, full scale 1.
    played : ndarray (n,)
        What went to the loudspeaker, on the same clock.
    inside, outside : int
        1-based channels of the microphones.
    sweep : SweepParams
        The sweep that was played; it starts at frame ``sweep_start`` of
        ``played`` and lasts ``duration_s``, then ``tail_s`` of silence.
    status : list of (frame, flags)
        The stream's status per block (frames on the played timeline).
    """
    fs = float(rate_hz)
    y = np.asarray(recorded)
    n = y.shape[0]
    chans = (inside, outside)
    peaks = {c: _db(float(np.max(np.abs(y[:, c - 1])))) if n else -math.inf for c in chans}
    problems: list[str] = []
    silent = [c for c in chans if not peaks[c] > _db(SILENT_PEAK)]
    nz = np.flatnonzero(np.any(y != 0, axis=1))
    dead = int(nz[0]) if nz.size else n
    if silent:
        which = " and ".join(str(c) for c in silent)
        problems.append(f"input {which} recorded nothing (all zeros): the device may run at "
                        "another rate, or the microphone is not connected")
        return TakeCheck(None, dead, peaks, (), tuple(problems))
    clip_level = 10 ** (CLIP_DBFS / 20)
    clipped = tuple(c for c in chans if float(np.max(np.abs(y[:, c - 1]))) >= clip_level)
    n_sweep = int(round(sweep.duration_s * fs))
    n_total = n_sweep + int(round(sweep.tail_s * fs))
    x = np.asarray(played, dtype=np.float64)
    yo = np.asarray(y[:, outside - 1], dtype=np.float64)
    delay, match = find_delay(x, yo, max_lag=n - 1)
    retry = None
    if match < MIN_MATCH:
        problems.append(f"the played sweep was not found on the outside channel {outside} "
                        f"(correlation {match:.3f}): check the outside microphone and the "
                        "loudspeaker")
        return TakeCheck(None, dead, peaks, clipped, tuple(problems), match=match)
    s0 = sweep_start + delay
    # the sweep starts from zero (its fade-in), so on a bit-exact path the first
    # non-zero sample comes a little after its arrival: lost only beyond that
    if dead > s0 + int(DEAD_START_SLACK_S * fs):
        problems.append(f"the device's first {1000 * dead / fs:.0f} ms were silent but the "
                        f"sweep arrived after {1000 * s0 / fs:.0f} ms (its start was lost): "
                        "the lead-in is doubled")
        retry = "lead-in"
    if s0 + n_total > n:
        problems.append(f"the latency ({1000 * delay / fs:.0f} ms) pushed the sweep's tail "
                        "past the end of the recording: the post-roll is doubled")
        retry = retry or "post-roll"
    lo, hi = max(s0, dead), min(n, s0 + n_sweep)
    for c in chans:
        # during the sweep always; in the tail too when the channel has real noise
        # (no zero runs before the sweep arrived: a bit-exact loopback's tail is zeros)
        noisy = s0 - dead > GAP_MIN_RUN and not _zero_runs(y[dead:s0, c - 1], GAP_MIN_RUN)
        end = min(n, s0 + n_total) if noisy else hi
        for start, length in _zero_runs(y[lo:end, c - 1], GAP_MIN_RUN):
            problems.append(f"gap: {length} zero samples at {(lo + start) / fs:.3f} s on "
                            f"input {c} (a dropout)")
            break
    # level drops on the outside channel (its level follows the sweep smoothly)
    w = max(8, int(DROP_WINDOW_S * fs))
    edge = int(0.1 * fs) + int(round((sweep.fade_in_s + sweep.fade_out_s) * fs))
    a, b = lo + edge, hi - edge
    if b - a > 12 * w:
        seg = yo[a:a + (b - a) // w * w].reshape(-1, w)
        rms = np.sqrt(np.mean(seg**2, axis=1))
        from scipy.ndimage import median_filter

        ref = median_filter(rms, size=11, mode="nearest")
        with np.errstate(divide="ignore"):
            drop = 20 * np.log10(np.maximum(rms, 1e-30) / np.maximum(ref, 1e-30))
        bad = np.flatnonzero(drop < -DROP_DB)
        if bad.size and not any(p.startswith("gap") for p in problems):
            problems.append(f"dropout: the outside level fell {-float(drop[bad[0]]):.0f} dB at "
                            f"{(a + bad[0] * w) / fs:.3f} s")
    # timing slips: each half of the sweep's delay against the whole take's
    halves: list[int] = []
    if s0 + n_sweep <= n and s0 >= 0:
        f_mid = math.sqrt(sweep.start_hz * sweep.stop_hz)
        search = int(0.25 * fs)
        for (p0, p1), bw in (((0, n_sweep // 2), f_mid - sweep.start_hz),
                             ((n_sweep // 2, n_sweep), sweep.stop_hz - f_mid)):
            xs = x[sweep_start + p0:sweep_start + p1]
            r0 = max(0, sweep_start + p0 + delay - search)
            r1 = min(n, sweep_start + p1 + delay + search)
            lag, _ = find_delay(xs, yo[r0:r1])
            d_half = r0 + lag - (sweep_start + p0)
            halves.append(d_half)
            tol = SLIP_TOLERANCE_S + 0.5 / max(bw, 1e-9)
            if abs(d_half - delay) > tol * fs:
                problems.append(f"timing slip: the delay moved by {d_half - delay:+d} samples "
                                "within the take (samples dropped or inserted)")
                break
    for frame, flags in status or []:
        bad_flags = [f for f in BAD_STATUS if f in flags]
        # frames are on the played timeline; the sweep occupies [sweep_start, +n_total)
        # there and arrives in the recording `delay` later
        in_span = sweep_start <= frame < sweep_start + n_total or s0 <= frame < s0 + n_total
        if bad_flags and in_span:
            if "input underflow" in bad_flags and frame < dead:
                continue
            problems.append(f"the stream reported {', '.join(bad_flags)} at "
                            f"{frame / fs:.3f} s, inside the sweep")
            break
    return TakeCheck(delay, dead, peaks, clipped, tuple(problems), retry, match=match,
                     half_delays_samples=tuple(halves))
