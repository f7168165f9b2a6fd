"""Regional curves: bankfull width, depth, area and discharge as power laws of the
drainage area across a run's reaches, y = a·A^b, fitted by least squares on
logarithms.

The fit is ordinary least squares of ln y on ln A (statsmodels OLS), the usual way
regional hydraulic-geometry curves are fitted (Leopold, L. B. & Maddock, T., 1953,
USGS Professional Paper 252; Bieger, K. et al., 2015, JAWRA 51(3)). With s the
standard error of the regression in log space, n reaches, m the mean of ln A,
S = Σ(ln A − m)² and t the 0.975 quantile of Student's t with n − 2 degrees of
freedom, the 95 % bands at an area A are (Draper, N. R. & Smith, H., 1998, Applied
Regression Analysis, 3rd ed., §3.1 [memory]; statsmodels ``get_prediction``):

    mean:        exp( ln a + b ln A ± t s √(1/n + (ln A − m)²/S) )
    prediction:  exp( ln a + b ln A ± t s √(1 + 1/n + (ln A − m)²/S) )

Back-transformed by exp, the fitted line a·A^b is the *median* of y at A (the
geometric mean), not its arithmetic mean; no retransformation bias correction is
applied (the curve is the central value that regional curves report). The mean
band is the band of that median.

Arrays in, small dataclasses out; units are whatever the caller passes (the run
passes SI: m, m², m³/s against km²).
"""

from __future__ import annotations

from collections import Counter
from dataclasses import dataclass, field

import numpy as np

# the run's variables: name -> reach-row key (SI), and the power of length in its unit
VARIABLES = {"width": "top_width", "depth": "bankfull_depth", "area": "flow_area",
             "discharge": "discharge"}
LENGTH_POWER = {"width": 1, "depth": 1, "area": 2, "discharge": 3}
ALPHA = 0.05          # 95 % bands
MIN_REACHES = 3       # a line through two points has no residual: no band, no R²


@dataclass(frozen=True)
class LineFit:
    """Ordinary least squares y = intercept + slope·x with its band parameters:
    ``std_error`` (s, the residual standard deviation), ``x_mean`` (m), ``x_ss``
    (S = Σ(x − m)²), ``t`` (the 1 − alpha/2 quantile of Student's t, n − 2 df)."""

    intercept: float
    slope: float
    r_squared: float
    std_error: float
    n: int
    x_mean: float
    x_ss: float
    t: float
    se_intercept: float
    se_slope: float

    def band(self, x, which: str = "mean"):
        """(centre, lower, upper) at ``x``: the band of the mean line (``"mean"``)
        or of a new observation (``"obs"``), in the closed form of the module
        docstring."""
        x = np.asarray(x, dtype=float)
        centre = self.intercept + self.slope * x
        extra = 1.0 if which == "obs" else 0.0
        half = self.t * self.std_error * np.sqrt(extra + 1.0 / self.n
                                                 + (x - self.x_mean) ** 2 / self.x_ss)
        return centre, centre - half, centre + half


def fit_line(x, y, alpha: float = ALPHA) -> LineFit:
    """OLS of ``y`` on ``x`` with an intercept (statsmodels), at least 3 points and
    two distinct x. The band parameters come from the same fit."""
    import statsmodels.api as sm
    from scipy import stats

    x = np.asarray(x, dtype=float)
    y = np.asarray(y, dtype=float)
    res = sm.OLS(y, sm.add_constant(x, has_constant="add")).fit()
    n = int(x.size)
    return LineFit(intercept=float(res.params[0]), slope=float(res.params[1]),
                   r_squared=float(res.rsquared), std_error=float(np.sqrt(res.scale)), n=n,
                   x_mean=float(x.mean()), x_ss=float(((x - x.mean()) ** 2).sum()),
                   t=float(stats.t.ppf(1.0 - alpha / 2.0, n - 2)),
                   se_intercept=float(res.bse[0]), se_slope=float(res.bse[1]))


def prediction_frame(x, y, at, alpha: float = ALPHA):
    """statsmodels' own bands of the OLS of ``y`` on ``x`` at ``at``
    (``get_prediction(...).summary_frame(alpha)``: mean, mean_ci_lower/upper,
    obs_ci_lower/upper); the reference the closed form is checked against."""
    import statsmodels.api as sm

    res = sm.OLS(np.asarray(y, float), sm.add_constant(np.asarray(x, float),
                                                       has_constant="add")).fit()
    at = sm.add_constant(np.asarray(at, float), has_constant="add")
    return res.get_prediction(at).summary_frame(alpha=alpha)


@dataclass(frozen=True)
class PowerFit:
    """One variable's regional curve y = coefficient·A^exponent, or why there is
    none (``why``; coefficient and the rest NaN). ``left_out``: {reason: reaches}
    of the reaches that did not enter; ``line``: the fit in log space (ln y on ln A)
    for the bands; ``area_min``/``area_max``: the range of the fitted areas."""

    variable: str
    n_reaches: int
    left_out: dict = field(default_factory=dict)
    line: LineFit | None = None
    why: str = ""
    area_min: float = float("nan")
    area_max: float = float("nan")

    @property
    def fitted(self) -> bool:
        return self.line is not None

    @property
    def coefficient(self) -> float:
        return float(np.exp(self.line.intercept)) if self.line else float("nan")

    @property
    def exponent(self) -> float:
        return self.line.slope if self.line else float("nan")

    @property
    def r_squared(self) -> float:
        return self.line.r_squared if self.line else float("nan")

    @property
    def std_error(self) -> float:
        """Standard error of the regression of ln y on ln A (natural log)."""
        return self.line.std_error if self.line else float("nan")

    def predict(self, area, which: str = "mean"):
        """(median, lower, upper) of y at ``area`` (same unit as the fit): the curve
        and its back-transformed 95 % band (``"mean"`` or ``"obs"``)."""
        c, lo, hi = self.line.band(np.log(np.asarray(area, dtype=float)), which)
        return np.exp(c), np.exp(lo), np.exp(hi)

    def left_out_text(self) -> str:
        return "; ".join(f"{k} {why}" for why, k in self.left_out.items())


def usable(area, value, status) -> tuple[np.ndarray, np.ndarray]:
    """Which reaches enter a fit, and why each other one does not.

    area (n,) drainage areas, value (n,) the reach's bankfull figure (NaN where the
    reach has none: its trusted picks were too few), status (n,) reach statuses.
    A reach enters when its status is ``ok``, its figure is finite and > 0 and its
    drainage area is finite and > 0. Returns (mask, reason): the first reason that
    applies, in that order ("status <status>", "no trusted figure", "no drainage
    area"), "" for a reach that enters."""
    area = np.asarray(area, dtype=float)
    value = np.asarray(value, dtype=float)
    status = np.asarray(status, dtype=object).astype(str)
    with np.errstate(invalid="ignore"):
        has_value = np.isfinite(value) & (value > 0)
        has_area = np.isfinite(area) & (area > 0)
    ok = status == "ok"
    reason = np.where(~ok, np.char.add("status ", status),
                      np.where(~has_value, "no trusted figure",
                               np.where(~has_area, "no drainage area", "")))
    return ok & has_value & has_area, reason.astype(object)


def fit_power(variable: str, area, value, status, alpha: float = ALPHA) -> PowerFit:
    """The regional curve of one variable over the reaches (arrays as in
    :func:`usable`): log–log OLS of the reaches that enter, or no fit with the
    reason when fewer than :data:`MIN_REACHES` enter or their areas are all
    equal."""
    use, reason = usable(area, value, status)
    left = dict(sorted(Counter(r for r in reason if r).items()))
    k = int(use.sum())
    if k < MIN_REACHES:
        return PowerFit(variable, k, left,
                        why=f"too few reaches: {k} usable, at least {MIN_REACHES} needed")
    a = np.asarray(area, dtype=float)[use]
    if np.ptp(np.log(a)) == 0:
        return PowerFit(variable, k, left, why="every usable reach has the same drainage area")
    line = fit_line(np.log(a), np.log(np.asarray(value, dtype=float)[use]), alpha)
    return PowerFit(variable, k, left, line, "", float(a.min()), float(a.max()))


def outside_band(fit: PowerFit, area, value) -> np.ndarray:
    """(n,) True where a reach's figure lies outside the fit's 95 % prediction band
    at its own drainage area (False where it has no figure or no fit). The band is
    the one of the fit the reach entered (not leave-one-out): at the stated rate,
    about 1 reach in 20 lies outside by chance."""
    area = np.asarray(area, dtype=float)
    value = np.asarray(value, dtype=float)
    if not fit.fitted:
        return np.zeros(area.size, bool)
    with np.errstate(invalid="ignore", divide="ignore"):
        good = np.isfinite(area) & (area > 0) & np.isfinite(value) & (value > 0)
        _c, lo, hi = fit.line.band(np.log(np.where(good, area, 1.0)), "obs")
        lv = np.log(np.where(good, value, 1.0))
    return good & ((lv < lo) | (lv > hi))


def curve_ratio(area, value, coefficient, exponent, area_min=0.0, area_max=np.inf):
    """(ratio, in_range): observed / curve at each reach's area, ratio =
    value / (coefficient·area^exponent), NaN outside [area_min, area_max] (the
    curve's valid range) or where the reach has no figure or area."""
    area = np.asarray(area, dtype=float)
    value = np.asarray(value, dtype=float)
    with np.errstate(invalid="ignore", divide="ignore"):
        inside = np.isfinite(area) & (area >= area_min) & (area <= area_max) & (area > 0)
        ratio = value / (coefficient * np.where(inside, area, 1.0) ** exponent)
    return np.where(inside & np.isfinite(value) & (value > 0), ratio, np.nan), inside
