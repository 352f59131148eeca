"""Hitting a target: trim advice, trim and fill series, matched sets, drive-level studies.

Pure library (no printing, no plotting); the ``trim``, ``series``, ``match``
and ``levels`` commands are thin shells over it. One module per idea:
:mod:`.document` (result documents), :mod:`.trim`, :mod:`.series`,
:mod:`.manifest`, :mod:`.match`, :mod:`.levels`, :mod:`.common` (thresholds);
the straight-line fit lives in :mod:`characterize.stats`.

Contents, by task:

- reading inputs: :func:`load_result` / :func:`result_from_dict` (a fitted
  result document, schema ``characterize.result/1``) -> :class:`ResultSummary`;
  :func:`read_tuning_manifest` (CSV) -> :class:`ManifestRow`; :func:`measure_rows`
  (run the main job on recordings, read result documents) -> measured items
  and failed items; :func:`read_force_table`.
- the straight line: :func:`fit_line` (weighted least squares with
  covariance, leverage and externally studentized residuals) -> :class:`LineFit`.
- :func:`advise_trim` -> :class:`TrimAdvice`: how far to cut the neck (with
  the end correction measured on this object), how much volume to change, or
  what to drill the neck to, with propagated standard errors and warnings.
- :func:`fit_series` -> :class:`SeriesFit`: the Rayleigh series methods (1/f0^2
  linear in the neck length or the filled volume, physics sheet section 9).
- :func:`match_sets` -> :class:`MatchResult`: the K results most alike and
  nearest a target.
- :func:`level_study` -> :class:`LevelStudy`: Q and f0 against cavity SPL and
  the onset of the nonlinear regime; :func:`fit_power_law` ->
  :class:`PowerLawFit`: a steady force against SPL on log axes, compared with
  the square law of a second-order effect.

Everything is SI inside (m, m^2, m^3, Hz, Pa, N, kg); sound levels are dB re
20 uPa (rms). Uncertainties are 1-sigma standard errors propagated to first
order (the law of propagation of uncertainty of JCGM 100:2008, section 5.1.2).
"""

from ..physics.spl import (
    REFERENCE_PRESSURE_PA,
    pressure_to_spl_db,
    spl_to_pressure_pa,
)
from ..stats import (
    LineFit,
    fit_line,
    ratio_with_stderr,
)
from .common import (
    LEVEL_DETECTION_SIGMAS,
    MAX_DIAMETER_CHANGE_FRACTION,
    MAX_VOLUME_CHANGE_FRACTION,
    MIN_POINTS,
    OUTLIER_STUDENTIZED,
    Q_DROP_FRACTION,
    SERIES_TEMPERATURE_SPREAD_K,
    SQUARE_LAW_EXPONENT,
    SQUARE_LAW_SIGMAS,
    STANDARD_GRAVITY_M_S2,
    check_points,
)
from .document import (
    ResultSummary,
    load_result,
    result_from_dict,
    textbook_end_correction_m,
)
from .levels import (
    FORCE_COLUMNS,
    ForceTable,
    LevelPoint,
    LevelStudy,
    PowerLawFit,
    fit_power_law,
    is_force_table,
    level_points,
    level_study,
    neck_displacement_over_diameter,
    read_force_table,
)
from .manifest import (
    BASE_COLUMNS,
    Failure,
    ManifestRow,
    Measured,
    measure_rows,
    read_tuning_manifest,
)
from .match import (
    MatchedSet,
    MatchItem,
    MatchResult,
    match_cost,
    match_sets,
)
from .series import (
    VARY,
    SeriesFit,
    SeriesPoint,
    fit_series,
)
from .trim import (
    DiameterRoute,
    NeckRoute,
    TrimAdvice,
    VolumeRoute,
    advise_trim,
)

__all__ = [
    "OUTLIER_STUDENTIZED",
    "SERIES_TEMPERATURE_SPREAD_K",
    "MAX_VOLUME_CHANGE_FRACTION",
    "MAX_DIAMETER_CHANGE_FRACTION",
    "Q_DROP_FRACTION",
    "LEVEL_DETECTION_SIGMAS",
    "SQUARE_LAW_EXPONENT",
    "SQUARE_LAW_SIGMAS",
    "STANDARD_GRAVITY_M_S2",
    "REFERENCE_PRESSURE_PA",
    "MIN_POINTS",
    "ResultSummary",
    "textbook_end_correction_m",
    "load_result",
    "result_from_dict",
    "LineFit",
    "fit_line",
    "ratio_with_stderr",
    "NeckRoute",
    "VolumeRoute",
    "DiameterRoute",
    "TrimAdvice",
    "advise_trim",
    "check_points",
    "SeriesPoint",
    "SeriesFit",
    "fit_series",
    "ManifestRow",
    "read_tuning_manifest",
    "Measured",
    "Failure",
    "measure_rows",
    "MatchItem",
    "MatchedSet",
    "MatchResult",
    "match_sets",
    "spl_to_pressure_pa",
    "pressure_to_spl_db",
    "neck_displacement_over_diameter",
    "LevelPoint",
    "LevelStudy",
    "level_study",
    "PowerLawFit",
    "fit_power_law",
    "ForceTable",
    "read_force_table",
    "VARY",
    "BASE_COLUMNS",
    "FORCE_COLUMNS",
    "is_force_table",
    "level_points",
    "match_cost",
]
