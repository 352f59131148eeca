"""Checks of a take that the pipeline makes before it trusts a fit: inside and
outside channels given the wrong way round, what a player/recorder clock
mismatch leaves in f0, and a one-microphone take whose room stays in the window."""

from __future__ import annotations

import math
from typing import Any

import numpy as np

from .checks import Flag, check_in_band
from .errors import FitError, InputError
from .fitting.fit import fit_transfer
from .transfer import TransferFunction

#: when its top fifth of the excited band (in log frequency) lies this much above
#: its bottom fifth, the channels are suspected to be swapped (H is then 1/H:
#: a notch at f0, rising as f^2 above it).
SWAP_RISE_DB = 6.0


def response_rise_db(tf: TransferFunction) -> float:
    """Median level of |H| in the top fifth of the excited band (log frequency)
    minus that in the bottom fifth (dB); NaN when too few usable bins."""
    from .transfer import peak_search_values

    f = tf.freqs_hz
    lo, hi = tf.excited_band_hz
    h = peak_search_values(tf)
    sel = np.flatnonzero((f >= lo) & (f <= hi) & np.isfinite(h) & (np.abs(h) > 0))
    if sel.size < 20:
        return math.nan
    u = np.log(f[sel])
    a, b = float(u[0]), float(u[-1])
    if b - a <= 0:
        return math.nan
    db = 20 * np.log10(np.abs(h[sel]))
    bottom = db[u <= a + 0.2 * (b - a)]
    top = db[u >= b - 0.2 * (b - a)]
    if bottom.size < 3 or top.size < 3:
        return math.nan
    return float(np.median(top) - np.median(bottom))


def fits_well(tf: TransferFunction) -> bool:
    """A single-mode fit that describes the data (reduced chi-square within the
    poor-fit limit) with its resonance well inside the excited band."""
    from .checks import POOR_FIT_REDUCED_CHI2

    try:
        fit = fit_transfer(tf, None)
    except FitError:
        return False
    return fit.reduced_chi2 <= POOR_FIT_REDUCED_CHI2 and not check_in_band(
        fit, tf.excited_band_hz)


def check_swapped(tf: TransferFunction, transfer_of: Any, inside: int, outside: int
                   ) -> tuple[TransferFunction, list[Flag]]:
    """Inside and outside channels given the wrong way round: H is then the
    reciprocal of an inside/outside ratio, a notch at f0 that rises above it.
    When |H| rises across the band (:data:`SWAP_RISE_DB`) and the given order
    does not fit well (poor, or a resonance not well inside the band: a fit to
    the band limit's edge), the channels are tried the other way round; where
    that gives a falling response that does fit well, the swapped order
    is used and said so (``channels-swapped``); otherwise the flag
    ``channels-maybe-swapped`` says what to try."""
    rise = response_rise_db(tf)
    if not (rise > SWAP_RISE_DB):
        return tf, []
    if fits_well(tf):
        return tf, []  # a rising band that the resonator model describes: nothing to say
    try:
        tf_sw = transfer_of(outside, inside)
    except (FitError, InputError):
        tf_sw = None
    rise_sw = math.nan if tf_sw is None else response_rise_db(tf_sw)
    if tf_sw is not None and rise_sw < -SWAP_RISE_DB:
        if fits_well(tf_sw):
            return tf_sw, [Flag(
                "channels-swapped", "warning",
                f"the inside and outside channels were given the wrong way round (|H| rose "
                f"{rise:.0f} dB across the band, with a notch where a resonator shows a peak); "
                f"fitted with channel {outside} as inside and {inside} as outside: pass "
                f"--inside {outside} --outside {inside}")]
    return tf, [Flag(
        "channels-maybe-swapped", "warning",
        f"|H| rises {rise:.0f} dB across the excited band, where an inside/outside ratio "
        "falls above its resonance: the inside and outside channels may be swapped; try "
        f"--inside {outside} --outside {inside}")]


#: One microphone with a reflection inside the window: a fit whose reduced
#: chi-square exceeds this is refused (the room's ripple is then more than the
#: background follows: up to 10^9 on the simulated room family, where f0 was up
#: to 13 % off; 194 on one anechoic short take that was right: poor-fit warns there).
ROOM_REFUSE_REDUCED_CHI2 = 1000.0


def clock_error(clock: Any) -> float:
    """Relative error of f0 that a clock mismatch leaves: the correction's own
    standard error when corrected; the estimate and its standard error together
    when it is above the threshold and two standard errors but too uncertain to
    correct (f0 may be off by that much); nothing otherwise."""
    if clock is None:
        return 0.0
    if clock.corrected:
        return 1e-6 * float(clock.stderr_ppm)
    if clock.evident:
        return 1e-6 * math.hypot(float(clock.ppm), float(clock.stderr_ppm))
    return 0.0


def refuse_room_in_window(tf: TransferFunction, mf: Any) -> None:
    """One microphone in a room whose reflections arrive while the resonator still
    rings: they stay in the window (ending it before them would cut the ringing),
    so H carries the room's ripple; where even the background chosen from the
    data leaves residuals above the noise, the numbers cannot be trusted (on
    simulated takes f0 was then up to 3 % off at 13 standard errors): refuse."""
    win = tf.window
    if win is None or win.reflection_s is None or win.reflection_s >= win.length_s:
        return
    if mf.reduced_chi2 <= ROOM_REFUSE_REDUCED_CHI2:
        return
    raise FitError(
        f"one microphone in a room: a reflection {1000 * win.reflection_s:.1f} ms after the "
        f"direct sound arrives while the resonator still rings, and the room's ripple across "
        f"the fit band is more than the background model follows (reduced chi-square "
        f"{mf.reduced_chi2:.3g}); record both microphones (the room cancels in their ratio) "
        "or measure in a larger or more absorbent space")
