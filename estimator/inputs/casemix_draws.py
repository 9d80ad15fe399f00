"""The stated distributions of a case type: counts a week, duration, weight and age.

Every numeric key of a ``[[case_types]]`` row that describes a distribution is read and
range-checked here (:mod:`estimator.planning.casemix` reads the file). The laws:

* counts a week: Poisson with the given mean, or fixed whole numbers; 0 to
  :data:`MAX_PER_WEEK` cases a week per case type;
* duration: log-normal from the median and the 90th percentile (sigma = ln(P90 / median) / z0.90,
  z0.90 = 1.2816), truncated to ``duration_min``-``duration_max`` (default 1 min to 24 h, the
  model's limit); or a fixed ``duration``;
* weight and age: normal truncated to ``[min, max]`` (default mean +- 3 SD), or a point when the
  SD is 0 or missing.

References
----------
.. [1] Johnson NL, Kotz S, Balakrishnan N. Continuous Univariate Distributions, vol. 1, 2nd ed.
   Wiley 1994, ch. 13 (truncated normal) and ch. 14 (log-normal quantiles); from memory.

Examples
--------
>>> d = Distribution("normal", 80.0, 12.0, 44.0, 116.0)
>>> x = d.sample(np.random.default_rng(1), 1000)
>>> bool(x.min() >= 44.0 and x.max() <= 116.0)
True
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any, Literal, overload

import numpy as np
from scipy.special import ndtr, ndtri

from ..errors import InputError
from ..limits import SANE_AGE
from ..units import Q_, check_range, parse_quantity

#: z of the 90th percentile of the standard normal (scipy.special.ndtri(0.9)).
Z90 = float(ndtri(0.9))
#: Durations the model accepts [min] (a scenario lasts at most 24 h).
DURATION_LIMITS = (1.0, 24 * 60.0)
#: Ages a case type may draw [year] (the scenario's patient age range).
AGE_LIMITS = SANE_AGE
#: Most cases a week of one case type (a practical limit: a busy suite of 50 theatres runs a few
#: thousand cases a week; common practice, no source).
MAX_PER_WEEK = 10000.0


@dataclass(frozen=True)
class Distribution:
    """A stated distribution: ``point``, ``normal`` or ``lognormal`` (on the log scale), truncated
    to ``[low, high]``.

    >>> d = Distribution("lognormal", math.log(90.0), math.log(150 / 90) / Z90, 1.0, 1440.0)
    >>> x = d.sample(np.random.default_rng(0), 20000)
    >>> round(float(np.median(x)) / 10), round(float(np.percentile(x, 90)) / 10)
    (9, 15)
    """

    kind: Literal["point", "normal", "lognormal"]
    loc: float
    scale: float
    low: float
    high: float

    def _z(self, x: float) -> float:
        v = math.log(x) if self.kind == "lognormal" else x
        return (v - self.loc) / self.scale

    def truncated_mass(self) -> float:
        """Share of the untruncated distribution outside ``[low, high]``."""
        if self.kind == "point":
            return 0.0
        return float(1.0 - (ndtr(self._z(self.high)) - ndtr(self._z(self.low))))

    def sample(self, rng: np.random.Generator, n: int) -> np.ndarray:
        """``n`` draws by inverse-CDF sampling within the truncation bounds."""
        if self.kind == "point":
            return np.full(n, self.loc)
        lo, hi = ndtr(self._z(self.low)), ndtr(self._z(self.high))
        v = self.loc + self.scale * ndtri(lo + (hi - lo) * rng.random(n))
        x = np.exp(v) if self.kind == "lognormal" else v
        return np.clip(x, self.low, self.high)  # rounding only: ndtri(ndtr(z)) may exceed z by 1 ulp

    @property
    def mean(self) -> float:
        """Mean of the untruncated law (the stated centre; for a log-normal exp(mu + sigma^2 / 2))."""
        if self.kind == "lognormal":
            return float(min(max(math.exp(self.loc + self.scale**2 / 2), self.low), self.high))
        return self.loc


@overload
def quantity_in(value: None, where: str, dim: str, unit: str, lo: float, hi: float) -> None: ...
@overload
def quantity_in(value: str | float, where: str, dim: str, unit: str, lo: float, hi: float) -> float: ...
def quantity_in(value: Any, where: str, dim: str, unit: str, lo: float, hi: float) -> float | None:
    """A case-mix value in ``unit`` checked against ``lo``-``hi`` (None when not given)."""
    if value is None:
        return None
    q = parse_quantity(value, where, dim, default_unit=unit)
    check_range(q.to(unit), where, Q_(lo, unit), Q_(hi, unit), value=value)
    return float(q.to(unit).magnitude)


def normal_law(
    row: Any, key: str, where: str, dim: str, unit: str, limits: tuple[float, float], default: float
) -> Distribution:
    """The weight or age law of a row (``key`` = ``weight`` or ``age``): a point, or a normal
    truncated to ``[min, max]`` (default mean +- 3 SD within ``limits``), in ``unit``."""
    f = f"{where}.{key}"
    mean = quantity_in(getattr(row, f"{key}_mean"), f"{f}_mean", dim, unit, *limits)
    sd = quantity_in(getattr(row, f"{key}_sd"), f"{f}_sd", dim, unit, 0.0, limits[1]) or 0.0
    if mean is None:
        if sd or getattr(row, f"{key}_min") is not None or getattr(row, f"{key}_max") is not None:
            raise InputError(f"{f}_mean", None, f"a mean {key} beside {key}_sd, {key}_min or {key}_max")
        mean = default
    if sd == 0.0:
        return Distribution("point", mean, 0.0, mean, mean)
    lo = quantity_in(getattr(row, f"{key}_min"), f"{f}_min", dim, unit, *limits)
    hi = quantity_in(getattr(row, f"{key}_max"), f"{f}_max", dim, unit, *limits)
    lo = max(limits[0], mean - 3 * sd) if lo is None else lo
    hi = min(limits[1], mean + 3 * sd) if hi is None else hi
    if not lo < hi:
        raise InputError(f"{f}_max", getattr(row, f"{key}_max"), f"above {key}_min, {lo:g} {unit}")
    if not lo <= mean <= hi:
        raise InputError(
            f"{f}_mean", getattr(row, f"{key}_mean"), f"within {key}_min to {key}_max, {lo:g} to {hi:g} {unit}"
        )
    return Distribution("normal", mean, sd, lo, hi)


def duration_law(row: Any, where: str, fallback: float | None) -> Distribution:
    """The duration law of a row [min]: fixed, or log-normal from the median and P90, truncated;
    ``fallback`` is the template's own length when the row gives none (a scenario file)."""
    lim = DURATION_LIMITS
    fixed = quantity_in(row.duration, f"{where}.duration", "time", "min", *lim)
    med = quantity_in(row.duration_median, f"{where}.duration_median", "time", "min", *lim)
    p90 = quantity_in(row.duration_p90, f"{where}.duration_p90", "time", "min", *lim)
    if fixed is not None:
        if med is not None or p90 is not None:
            raise InputError(f"{where}.duration", row.duration, "either duration or duration_median with duration_p90")
        return Distribution("point", fixed, 0.0, fixed, fixed)
    if med is None or p90 is None:
        if med is None and p90 is None and fallback is not None:
            return Distribution("point", fallback, 0.0, fallback, fallback)
        key = "duration_median" if med is None else "duration_p90"
        raise InputError(f"{where}.{key}", "(missing)", "duration_median and duration_p90 together, or duration")
    if p90 < med:
        raise InputError(f"{where}.duration_p90", row.duration_p90, f"at least the median, {med:g} min")
    if p90 == med:
        return Distribution("point", med, 0.0, med, med)
    lo = quantity_in(row.duration_min, f"{where}.duration_min", "time", "min", *lim) or lim[0]
    hi = quantity_in(row.duration_max, f"{where}.duration_max", "time", "min", *lim) or lim[1]
    if not lo < med < hi:
        raise InputError(
            f"{where}.duration_max" if med >= hi else f"{where}.duration_min",
            row.duration_max if med >= hi else row.duration_min,
            f"duration_min below and duration_max above the median, {med:g} min",
        )
    return Distribution("lognormal", math.log(med), math.log(p90 / med) / Z90, lo, hi)


def weekly_count(row: Any, where: str) -> float:
    """Mean cases a week of a row (``per_week``, or the sum of ``per_weekday``), range-checked."""
    if (row.per_week is None) == (row.per_weekday is None):
        raise InputError(f"{where}.per_week", row.per_week, "exactly one of per_week or per_weekday")
    values = [row.per_week] if row.per_week is not None else list(row.per_weekday)
    key = "per_week" if row.per_week is not None else "per_weekday"
    if row.per_weekday is not None and not 1 <= len(values) <= 7:
        raise InputError(f"{where}.per_weekday", values, "1 to 7 numbers, one per working day")
    for v in values:
        if not math.isfinite(v) or v < 0 or v > MAX_PER_WEEK:
            raise InputError(f"{where}.{key}", v, f"0 to {MAX_PER_WEEK:g} cases")
        if row.count == "fixed" and v != int(v):
            raise InputError(f"{where}.{key}", v, 'a whole number of cases with count = "fixed"')
    return float(sum(values))
