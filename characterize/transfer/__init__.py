"""Inside/outside transfer function H(f) = P_inside / P_outside, with a per-bin
noise estimate that becomes the fit weight.

Two estimators, one module each:

- :mod:`.sweep` (:func:`sweep_transfer`): both channels deconvolved by the sweep
  (Farina 2000), one common time window on both impulse responses, then the
  ratio of their spectra.
- :mod:`.cross_spectral` (:func:`cross_spectral_transfer`): H1 = G_xy / G_xx with
  Welch averaging and the ordinary coherence (Bendat & Piersol, *Random Data*,
  4th ed. 2010, ch. 6 and 9), for any broadband excitation.

:mod:`.core` holds what both return and share: :class:`TransferFunction` (with
its noise model), :class:`WindowInfo` and the rough peak search.
"""

from .core import (
    PEAK_MIN_PROMINENCE,
    PEAK_SEARCH_MIN_COHERENCE,
    TransferFunction,
    WindowInfo,
    estimate_peak,
    peak_search_values,
)
from .cross_spectral import (
    MIN_AVERAGES,
    MIN_SEGMENT_S,
    SEGMENT_BANDWIDTHS,
    cross_spectral_transfer,
    hann_power_kernel,
    welch_spectra,
)
from .sweep import (
    HARMONIC_ORDERS_EXCLUDED,
    HARMONIC_ORDERS_THD,
    MIN_WINDOW_S,
    MIN_WINDOW_TIME_CONSTANTS,
    PRE_ONSET_S,
    WINDOW_TIME_CONSTANTS,
    Impulse,
    decay_end,
    find_onset,
    first_reflection,
    harmonic_distortion,
    harmonic_stretches,
    sweep_transfer,
)

__all__ = [
    "HARMONIC_ORDERS_EXCLUDED", "HARMONIC_ORDERS_THD", "MIN_AVERAGES", "MIN_SEGMENT_S",
    "MIN_WINDOW_S", "MIN_WINDOW_TIME_CONSTANTS", "PEAK_MIN_PROMINENCE",
    "PEAK_SEARCH_MIN_COHERENCE", "PRE_ONSET_S", "SEGMENT_BANDWIDTHS", "WINDOW_TIME_CONSTANTS",
    "Impulse", "TransferFunction", "WindowInfo", "cross_spectral_transfer", "decay_end",
    "estimate_peak", "find_onset", "first_reflection", "harmonic_distortion",
    "harmonic_stretches", "hann_power_kernel", "peak_search_values", "sweep_transfer",
    "welch_spectra",
]
