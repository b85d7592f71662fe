"""The precursor law: next-cycle amplitude from a polar proxy at the minimum before it.

Two laws (:data:`LAWS`), both with Student-t prediction intervals and leave-one-out
hindcast errors:

``"linear"``
    amplitude = intercept + slope x |proxy| by ordinary least squares (two
    parameters; ``through_origin`` leaves out the intercept). With 3-5 calibration
    cycles the slope is poorly known and can come out negative, which contradicts
    the precursor relation: the fit then carries a ``warning``.
``"proportional"``
    ln amplitude = ln k + ln |proxy| + e, e ~ N(0, s^2): one parameter, the
    amplitude proportional to the proxy with a log-normal scatter (the form of the
    polar-field precursor relations of Schatten et al. 1978 and Munoz-Jaramillo
    et al. 2013 through the origin), which few cycles can carry and which never
    predicts a negative amplitude. ln k is the mean of ln(amplitude / |proxy|),
    s its sample standard deviation (n - 1 degrees of freedom), and a new cycle's
    ln amplitude has the predictive standard error s sqrt(1 + 1/n).

References
----------
Schatten, K. H., Scherrer, P. H., Svalgaard, L., & Wilcox, J. M. 1978, GRL 5, 411.
Munoz-Jaramillo, A., Balmaceda, L. A., & DeLuca, E. E. 2013, ApJL 767, L25.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from .errors import SettingsError

__all__ = ["Prediction", "PrecursorFit", "ProportionalFit", "fit_precursor", "LAWS", "DEFAULT_LAW"]

LAWS = ("linear", "proportional")
#: The forecast's default law (chosen on hindcasts: docs/methods.md).
DEFAULT_LAW = "linear"
_P68, _P95 = 0.84134474606854293, 0.975


def sample_summary(values) -> dict:
    """Median and the central 68 % and 95 % ranges of Monte Carlo samples (percentiles)."""
    q = np.percentile(np.asarray(values, dtype=np.float64), [2.5, 16.0, 50.0, 84.0, 97.5])
    return {"median": float(q[2]), "low68": float(q[1]), "high68": float(q[3]),
            "low95": float(q[0]), "high95": float(q[4])}


@dataclass(frozen=True)
class Prediction:
    """A predicted amplitude: the central value and prediction intervals (68 % and 95 %)."""

    median: np.ndarray | np.float64
    low68: np.ndarray | np.float64
    high68: np.ndarray | np.float64
    low95: np.ndarray | np.float64
    high95: np.ndarray | np.float64
    se: np.ndarray | np.float64


@dataclass
class _Fit:
    """What both laws hold: the calibration pairs, coefficients, scatter and leave-one-out errors."""

    proxy: np.ndarray
    amplitude: np.ndarray
    coefficients: np.ndarray
    standard_errors: np.ndarray
    residual_sd: float
    dof: int
    loo_errors: np.ndarray
    labels: list = field(default_factory=list)

    @property
    def loo_rms(self) -> float:
        return float(np.sqrt(np.mean(self.loo_errors**2)))


@dataclass
class PrecursorFit(_Fit):
    """Ordinary least squares of next-cycle amplitude on a polar proxy at minimum.

    Attributes
    ----------
    coefficients : ndarray
        (intercept, slope), or (slope,) through the origin.
    standard_errors : ndarray
    residual_sd : float
        Standard deviation of the residuals, sqrt(RSS / (n - p)).
    dof : int
        n - p.
    loo_errors : ndarray
        Leave-one-out hindcast errors (predicted minus actual), one per cycle.
    """

    through_origin: bool = False
    _inverse: np.ndarray = field(default=None, repr=False)

    @property
    def slope(self) -> float:
        return float(self.coefficients[-1])

    @property
    def intercept(self) -> float:
        return 0.0 if self.through_origin else float(self.coefficients[0])

    def _design(self, x) -> np.ndarray:
        x = np.atleast_1d(np.asarray(x, dtype=np.float64))
        return x[:, None] if self.through_origin else np.column_stack([np.ones_like(x), x])

    @property
    def warning(self) -> str:
        if self.slope <= 0:
            return (f"the fitted slope is {self.slope:.1f} (not positive): the calibration contradicts the "
                    "precursor relation (a stronger polar field, a stronger cycle) and this forecast cannot be "
                    "trusted; try --law proportional or more calibration cycles")
        return ""

    def describe(self) -> str:
        if self.through_origin:
            return f"amplitude = {self.slope:.1f} x proxy"
        return f"amplitude = {self.intercept:.1f} + {self.slope:.1f} x proxy"

    law = "linear"

    def predict(self, x) -> Prediction:
        """Prediction intervals (Student t with ``dof`` degrees of freedom) at proxy value(s) ``x``.

        Parameters
        ----------
        x : float or array-like
            Proxy value(s).

        Returns
        -------
        Prediction
            Its fields have the shape of ``x``: numpy's convention, so a scalar
            ``x`` gives scalars (``numpy.float64``) and an array gives arrays.
        """
        from scipy import stats  # imported here: it costs most of the command's start-up time

        shape = np.shape(x)
        design = self._design(np.ravel(np.asarray(x, dtype=np.float64)))
        mean = design @ self.coefficients
        se = self.residual_sd * np.sqrt(1.0 + np.einsum("ij,jk,ik->i", design, self._inverse, design))
        t68, t95 = stats.t.ppf([_P68, _P95], self.dof)
        fields = (mean, mean - t68 * se, mean + t68 * se, mean - t95 * se, mean + t95 * se, se)
        # reshape(()) then [()] turns a one-value result into a numpy scalar; arrays keep x's shape
        return Prediction(*(np.reshape(f, shape)[()] for f in fields))

    def sample(self, x, rng: np.random.Generator) -> np.ndarray:
        """One draw from the predictive distribution at each proxy value in ``x``."""
        p = self.predict(x)
        return p.median + p.se * rng.standard_t(self.dof, size=np.shape(p.median))



def _ols(x: np.ndarray, y: np.ndarray, through_origin: bool):
    design = x[:, None] if through_origin else np.column_stack([np.ones_like(x), x])
    inverse = np.linalg.inv(design.T @ design)
    beta = inverse @ design.T @ y
    dof = x.size - design.shape[1]
    rss = float(np.sum((y - design @ beta) ** 2))
    s = math.sqrt(rss / dof) if dof > 0 else math.nan  # leave-one-out fits may have no residual freedom
    return beta, np.sqrt(np.diag(inverse)) * s, s, dof, inverse


def fit_precursor(proxy, amplitude, through_origin: bool = False, labels=None, law: str = DEFAULT_LAW):
    """Fit the precursor law: by default amplitude = intercept + slope x proxy (or slope x proxy) by OLS.

    Parameters
    ----------
    proxy, amplitude : array-like
        One pair per calibration cycle: the polar proxy at a minimum (sign is
        dropped: the polar field's sign alternates) and the amplitude of the cycle
        after it.
    through_origin : bool
        Fit without an intercept (linear law).
    law : {"linear", "proportional"}
        See the module notes.

    Returns
    -------
    PrecursorFit or ProportionalFit

    Raises
    ------
    SettingsError
        With fewer than three cycles, or when the pairs hold NaN.
    """
    x = np.abs(np.asarray(proxy, dtype=np.float64))
    y = np.asarray(amplitude, dtype=np.float64)
    if x.shape != y.shape or x.ndim != 1:
        raise SettingsError(f"proxy and amplitude must be 1-D and of equal length ({x.shape} vs {y.shape})")
    if x.size < 3:
        raise SettingsError(
            f"a precursor calibration needs at least three cycles; got {x.size}. Add cycles to the record "
            "or supply a calibration CSV (columns cycle, proxy, next_amplitude, source)"
        )
    if not (np.all(np.isfinite(x)) and np.all(np.isfinite(y))):
        raise SettingsError("calibration pairs hold NaN or inf")
    if law not in LAWS:
        raise SettingsError(f"law {law!r}: expected one of {', '.join(LAWS)}")
    if law == "proportional":
        return _proportional(x, y, labels)
    beta, se, s, dof, inverse = _ols(x, y, through_origin)
    loo = np.empty(x.size)
    for i in range(x.size):
        keep = np.arange(x.size) != i
        b, *_ = _ols(x[keep], y[keep], through_origin)
        loo[i] = (b[0] * x[i] if through_origin else b[0] + b[1] * x[i]) - y[i]
    return PrecursorFit(x, y, beta, se, s, dof, loo, list(labels or []), through_origin=through_origin, _inverse=inverse)


@dataclass
class ProportionalFit(_Fit):
    """ln amplitude = ln k + ln |proxy| + e: the proportional law in log space (see the module notes).

    Attributes
    ----------
    coefficients : ndarray
        (ln k,).
    standard_errors : ndarray
        (standard error of ln k,) = s / sqrt(n).
    residual_sd : float
        s, the standard deviation of ln(amplitude / |proxy|) (log space).
    dof : int
        n - 1.
    loo_errors : ndarray
        Leave-one-out hindcast errors (predicted median minus actual), one per cycle.
    """

    law = "proportional"
    through_origin = True

    @property
    def slope(self) -> float:
        """k: the amplitude per unit of proxy."""
        return float(math.exp(self.coefficients[0]))

    @property
    def intercept(self) -> float:
        return 0.0

    @property
    def warning(self) -> str:
        return ""

    def describe(self) -> str:
        return f"amplitude = {self.slope:.1f} x proxy (log-normal scatter {self.residual_sd:.2f})"

    def predict(self, x) -> Prediction:
        """Prediction intervals at proxy value(s) ``x`` (Student t in log space, ``dof`` degrees of freedom)."""
        from scipy import stats

        shape = np.shape(x)
        log_x = np.log(np.abs(np.ravel(np.asarray(x, dtype=np.float64))))
        centre = self.coefficients[0] + log_x
        se = self.residual_sd * math.sqrt(1.0 + 1.0 / self.proxy.size) * np.ones_like(centre)
        t68, t95 = stats.t.ppf([_P68, _P95], self.dof)
        fields = (np.exp(centre), np.exp(centre - t68 * se), np.exp(centre + t68 * se),
                  np.exp(centre - t95 * se), np.exp(centre + t95 * se), se)
        return Prediction(*(np.reshape(f, shape)[()] for f in fields))

    def sample(self, x, rng: np.random.Generator) -> np.ndarray:
        """One draw from the predictive distribution at each proxy value in ``x``."""
        p = self.predict(x)
        return p.median * np.exp(p.se * rng.standard_t(self.dof, size=np.shape(p.median)))



def _proportional(x: np.ndarray, y: np.ndarray, labels) -> ProportionalFit:
    if np.any(y <= 0) or np.any(x <= 0):
        raise SettingsError("the proportional law needs positive amplitudes and a non-zero proxy in every pair")
    r = np.log(y) - np.log(x)
    n = r.size
    s = float(np.std(r, ddof=1))
    loo = np.array([math.exp(np.mean(np.delete(r, i))) * x[i] - y[i] for i in range(n)])
    return ProportionalFit(x, y, np.array([r.mean()]), np.array([s / math.sqrt(n)]), s, n - 1, loo,
                           list(labels or []))
