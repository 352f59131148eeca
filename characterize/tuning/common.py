"""What the tuning modules share: the thresholds (documented in docs/tuning.md),
the point-count check of every study, and two small helpers."""

from __future__ import annotations

from collections.abc import Iterable, Sequence

from ..checks import Flag
from ..errors import InputError

# --------------------------------------------------------------------------
# Thresholds (documented in docs/tuning.md)
# --------------------------------------------------------------------------

#: A point whose externally studentized residual exceeds this is flagged as an
#: outlier (3 is common practice in regression diagnostics).
OUTLIER_STUDENTIZED = 3.0
#: A series whose air temperature spans more than this (K) is flagged: 1/f0^2
#: changes by about -0.34 %/K (physics sheet section 9), so the per-point
#: correction to a common speed of sound matters and the temperatures must be right.
SERIES_TEMPERATURE_SPREAD_K = 0.5
#: Volume changes beyond this fraction of the cavity are outside what the lumped
#: model promises (the cavity's shape, not only its volume, changes).
MAX_VOLUME_CHANGE_FRACTION = 0.5
#: Diameter changes beyond this fraction assume too much of the measured end
#: correction ratio (which is taken to scale with the radius).
MAX_DIAMETER_CHANGE_FRACTION = 0.5
#: The onset of the nonlinear regime: the level where Q has dropped by this
#: fraction from its small-signal value (the issue's definition).
Q_DROP_FRACTION = 0.10
#: The growth of 1/Q with level must exceed this many standard errors to count
#: as detected.
LEVEL_DETECTION_SIGMAS = 2.0
#: A force from a second-order effect grows as the square of the acoustic
#: pressure (common practice), i.e. tenfold for every 10 dB.
SQUARE_LAW_EXPONENT = 2.0
#: The fitted exponent is called consistent with the square law within this
#: many standard errors (about 95 % coverage; common practice).
SQUARE_LAW_SIGMAS = 2.0
#: Standard acceleration of gravity, m/s^2 (3rd CGPM, 1901).
STANDARD_GRAVITY_M_S2 = 9.80665
#: Fewest points a series, a level study or a power-law fit accepts.
MIN_POINTS = 3



def _flags_dicts(flags: Iterable[Flag]) -> list[dict[str, str]]:
    return [f.to_dict() for f in flags]


def check_points(values: Sequence[float], ids: Sequence[str], source: str, what: str) -> None:
    """At least :data:`MIN_POINTS` points, with distinct values of the varied quantity.

    Raises
    ------
    InputError
        Too few points, or two points with the same value (both named).
    """
    if len(values) < MIN_POINTS:
        raise InputError(source, None, f"a {what} needs at least {MIN_POINTS} points, got "
                         f"{len(values)}")
    seen: dict[float, str] = {}
    for v, i in zip(values, ids, strict=False):
        key = round(float(v), 12)
        if key in seen:
            raise InputError(source, what, f"duplicate value {v:.6g} (items {seen[key]!r} and "
                             f"{i!r}); each point must change the varied quantity")
        seen[key] = i
