"""Statistics shared by tuning and batch: the weighted least-squares straight
line (:func:`fit_line`) and the ratio of two uncertain numbers."""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import asdict, dataclass
from typing import Any

import numpy as np
from numpy.typing import NDArray


def is_finite_number(x: Any) -> bool:
    """True for an int or float that is neither NaN nor infinite (None, text and
    other types are not numbers here)."""
    return isinstance(x, (int, float)) and math.isfinite(x)


@dataclass(frozen=True)
class LineFit:
    r"""A straight line y = slope x + intercept fitted by (weighted) least squares.

    Attributes
    ----------
    slope, intercept : float
        Fitted coefficients (units of y/x and of y).
    slope_stderr, intercept_stderr : float
        Their standard errors (from ``covariance``).
    covariance : ((float, float), (float, float))
        Covariance of (slope, intercept), scaled by ``stderr_scale`` squared.
    chi2 : float
        Sum of squared weighted residuals.
    dof : int
        Degrees of freedom, n - 2.
    reduced_chi2 : float
        chi2 / dof (NaN for dof 0).
    stderr_scale : float
        sqrt(max(1, reduced chi2)) with stated errors (errors are never
        scaled down, as in the main fit); sqrt(reduced chi2) without them.
    weighting : str
        ``"stated-errors"`` (weights 1/sigma^2) or ``"residuals"`` (equal
        weights, errors from the scatter).
    residuals : tuple of float
        y - fitted y, units of y.
    normalized_residuals : tuple of float
        Residuals over their stated sigma (over 1 without weights).
    leverage : tuple of float
        Diagonal of the hat matrix.
    studentized : tuple of float
        Externally studentized residuals (NaN with fewer than 4 points).
    """

    slope: float
    intercept: float
    slope_stderr: float
    intercept_stderr: float
    covariance: tuple[tuple[float, float], tuple[float, float]]
    chi2: float
    dof: int
    reduced_chi2: float
    stderr_scale: float
    weighting: str
    residuals: tuple[float, ...]
    normalized_residuals: tuple[float, ...]
    leverage: tuple[float, ...]
    studentized: tuple[float, ...]

    @property
    def cov_slope_intercept(self) -> float:
        return self.covariance[0][1]

    def __call__(self, x: Any) -> Any:
        return self.slope * np.asarray(x, dtype=float) + self.intercept

    def to_dict(self) -> dict[str, Any]:
        d = asdict(self)
        d["covariance"] = [list(map(float, row)) for row in self.covariance]
        for k in ("residuals", "normalized_residuals", "leverage", "studentized"):
            d[k] = [float(v) for v in d[k]]
        return d


def fit_line(x: Sequence[float] | NDArray[np.floating], y: Sequence[float] | NDArray[np.floating],
             sigma: Sequence[float] | NDArray[np.floating] | None = None) -> LineFit:
    r"""Fit y = b x + a by weighted least squares, with diagnostics.

    With weights :math:`w_i = 1/\sigma_i^2` and design matrix
    :math:`X = [x\ 1]`, the estimate and its covariance are

    .. math::

        \hat\beta = (X^T W X)^{-1} X^T W y, \qquad
        \operatorname{cov}\hat\beta = s^2 (X^T W X)^{-1}

    with :math:`s^2 = \max(1, \chi^2/(n-2))` when the :math:`\sigma_i` are
    stated and :math:`s^2 = \chi^2/(n-2)` without them (equal weights: the
    ordinary least-squares line, whose errors equal ``scipy.stats.linregress``).
    The leverages are :math:`h_i = w_i x_i^T (X^T W X)^{-1} x_i` and the
    externally studentized residuals

    .. math::

        t_i = \frac{e_i\sqrt{w_i}}{s_{(i)}\sqrt{1 - h_i}},\qquad
        s_{(i)}^2 = \frac{\chi^2 - w_i e_i^2/(1 - h_i)}{n - 3}

    where, with stated errors, :math:`s_{(i)}^2` is floored at 1 (a point is
    judged against its own stated error unless the other points scatter more).

    Parameters
    ----------
    x, y : sequence of float
        At least three points, x not all equal (any units).
    sigma : sequence of float, optional
        Standard errors of y (units of y), all finite and > 0. Without them,
        equal weights and errors from the residuals.

    Returns
    -------
    LineFit

    Raises
    ------
    ValueError
        Fewer than three points, mismatched lengths, non-finite values, x all
        equal, or sigma not finite and > 0.

    References
    ----------
    P. R. Bevington, D. K. Robinson, *Data Reduction and Error Analysis for
    the Physical Sciences*, 3rd ed. (2003), ch. 6 (weighted straight-line fit;
    chapter from memory). D. A. Belsley, E. Kuh, R. E. Welsch, *Regression
    Diagnostics* (1980), ch. 2 (leverage and externally studentized residuals;
    chapter from memory).
    """
    xa = np.asarray(x, dtype=float)
    ya = np.asarray(y, dtype=float)
    n = xa.size
    if xa.ndim != 1 or ya.shape != xa.shape:
        raise ValueError(f"x and y must be 1-D of equal length, got {xa.shape} and {ya.shape}")
    if n < 3:
        raise ValueError(f"a line fit needs at least 3 points, got {n}")
    if not (np.all(np.isfinite(xa)) and np.all(np.isfinite(ya))):
        raise ValueError("x and y must be finite")
    if np.ptp(xa) == 0:
        raise ValueError("x values are all equal")
    if sigma is None:
        w = np.ones(n)
        weighting = "residuals"
    else:
        sa = np.asarray(sigma, dtype=float)
        if sa.shape != xa.shape or not np.all(np.isfinite(sa)) or np.any(sa <= 0):
            raise ValueError("sigma must have the length of x and be finite and > 0")
        w = 1.0 / sa**2
        weighting = "stated-errors"
    # Centre and scale x for conditioning; transform back exactly.
    x0 = float(np.sum(w * xa) / np.sum(w))
    xs = float(np.sqrt(np.sum(w * (xa - x0) ** 2) / np.sum(w)))
    u = (xa - x0) / xs
    sw = np.sqrt(w)
    design = np.column_stack([u, np.ones(n)])
    coef, *_ = np.linalg.lstsq(design * sw[:, None], ya * sw, rcond=None)
    cov_u = np.linalg.inv((design * w[:, None]).T @ design)
    # back to (slope, intercept) in x: slope = c0/xs, intercept = c1 - c0 x0/xs
    jac = np.array([[1.0 / xs, 0.0], [-x0 / xs, 1.0]])
    slope, intercept = jac @ coef
    cov_unscaled = jac @ cov_u @ jac.T
    resid = ya - (slope * xa + intercept)
    chi2 = float(np.sum(w * resid**2))
    dof = n - 2
    red = chi2 / dof
    scale2 = max(1.0, red) if weighting == "stated-errors" else red
    cov = cov_unscaled * scale2
    lev = w * np.einsum("ij,jk,ik->i", design, cov_u, design)
    norm = resid * sw
    if n >= 4:
        with np.errstate(divide="ignore", invalid="ignore"):
            s2_del = (chi2 - w * resid**2 / (1.0 - lev)) / (n - 3)
            if weighting == "stated-errors":
                s2_del = np.maximum(s2_del, 1.0)
            stud = norm / np.sqrt(s2_del * (1.0 - lev))
        stud = np.where(np.isfinite(stud), stud, np.nan)
    else:
        stud = np.full(n, np.nan)
    return LineFit(
        slope=float(slope), intercept=float(intercept),
        slope_stderr=float(math.sqrt(cov[0, 0])), intercept_stderr=float(math.sqrt(cov[1, 1])),
        covariance=((float(cov[0, 0]), float(cov[0, 1])), (float(cov[1, 0]), float(cov[1, 1]))),
        chi2=chi2, dof=dof, reduced_chi2=float(red), stderr_scale=float(math.sqrt(scale2)),
        weighting=weighting, residuals=tuple(map(float, resid)),
        normalized_residuals=tuple(map(float, norm)), leverage=tuple(map(float, lev)),
        studentized=tuple(map(float, stud)),
    )


def ratio_with_stderr(num: float, den: float, var_num: float, var_den: float,
                      cov: float) -> tuple[float, float]:
    r"""A ratio r = num/den and its first-order standard error.

    .. math::

        \sigma_r^2 = \frac{\sigma_n^2}{d^2} + \frac{n^2\sigma_d^2}{d^4}
            - \frac{2 n \operatorname{cov}(n, d)}{d^3}

    (the physics sheet's section 9 error formula for the end correction
    :math:`\delta = a/b`).

    References
    ----------
    JCGM 100:2008, *Evaluation of measurement data -- Guide to the expression
    of uncertainty in measurement*, section 5.2.2 (correlated input
    quantities; section from memory).
    """
    r = num / den
    var = var_num / den**2 + num**2 * var_den / den**4 - 2.0 * num * cov / den**3
    return r, math.sqrt(max(var, 0.0))


#: Modified z-score beyond which a value is an outlier (Iglewicz & Hoaglin 1993).
OUTLIER_MODIFIED_Z = 3.5


#: d2 for moving ranges of two (control-chart constant, common practice).
D2_MOVING_RANGE = 1.128


def sample_std(values: Sequence[float]) -> float | None:
    """Sample standard deviation (n - 1 in the denominator); None for n < 2."""
    n = len(values)
    if n < 2:
        return None
    m = sum(values) / n
    return math.sqrt(sum((v - m) ** 2 for v in values) / (n - 1))


def process_capability(values: Sequence[float], lower: float, upper: float
                       ) -> tuple[float | None, float | None]:
    r"""Process capability indices Cp and Cpk of values against two limits.

    .. math::

        C_p = \frac{USL - LSL}{6 s}, \qquad
        C_{pk} = \frac{\min(USL - \bar x,\ \bar x - LSL)}{3 s}

    with :math:`\bar x` the mean and :math:`s` the sample standard deviation
    (n - 1), the usual formula in quality engineering (common practice; with
    the overall s, some texts call the same number Ppk).

    Parameters
    ----------
    values : sequence of float
        Measured values (here f0 in Hz).
    lower, upper : float
        Specification limits LSL and USL, same unit as the values.

    Returns
    -------
    (Cp, Cpk) : floats (dimensionless), or None when fewer than two values or
    no spread.

    References
    ----------
    Kane, V. E. (1986). Process capability indices. Journal of Quality
    Technology 18(1), 41-52.
    """
    s = sample_std(values)
    if s is None or s == 0:
        return None, None
    m = sum(values) / len(values)
    return (upper - lower) / (6 * s), min(upper - m, m - lower) / (3 * s)


def modified_z_scores(values: Sequence[float]) -> list[float] | None:
    r"""Modified z-scores for outlier labelling.

    .. math::

        M_i = \frac{0.6745\,(x_i - \tilde x)}{\mathrm{MAD}}, \qquad
        \mathrm{MAD} = \operatorname{median}_i |x_i - \tilde x|

    with :math:`\tilde x` the median; :math:`|M_i| > 3.5` labels an outlier.

    Returns None when there are fewer than three values or the MAD is zero.

    References
    ----------
    Iglewicz, B. and Hoaglin, D. C. (1993). How to Detect and Handle
    Outliers. ASQC Basic References in Quality Control, vol. 16.
    """
    if len(values) < 3:
        return None
    med = _median(values)
    mad = _median([abs(v - med) for v in values])
    if mad == 0:
        return None
    return [0.6745 * (v - med) / mad for v in values]


def _median(values: Sequence[float]) -> float:
    s = sorted(values)
    n = len(s)
    return s[n // 2] if n % 2 else 0.5 * (s[n // 2 - 1] + s[n // 2])


def individuals_limits(values: Sequence[float]) -> tuple[float, float, float, float] | None:
    r"""Shewhart individuals control chart: centre line and 3-sigma limits.

    .. math::

        \hat\sigma = \frac{\overline{MR}}{d_2}, \quad d_2 = 1.128, \qquad
        UCL, LCL = \bar x \pm 3\hat\sigma

    with :math:`\overline{MR}` the mean moving range of successive values (in
    manifest order). Returns ``(centre, lcl, ucl, sigma)`` in the values'
    unit, or None for fewer than two values.

    References
    ----------
    Montgomery, D. C. (2009). Introduction to Statistical Quality Control,
    6th ed., Wiley, section 6.4 (control charts for individual measurements);
    d2 = 1.128 for subgroups of two from its Appendix VI (from memory).
    """
    if len(values) < 2:
        return None
    mr = sum(abs(b - a) for a, b in zip(values[:-1], values[1:], strict=True)) / (len(values) - 1)
    sigma = mr / D2_MOVING_RANGE
    c = sum(values) / len(values)
    return c, c - 3 * sigma, c + 3 * sigma, sigma
