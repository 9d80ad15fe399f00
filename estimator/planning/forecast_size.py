"""How big a demand forecast is before it runs: expected cases, case-hours and run time, and the limits.

A forecast runs every drawn case through the batch engine, so its run time grows with the number
of cases and their length. Before drawing, the expected number of cases is ``weeks`` times the sum
of the case types' means a week, and the expected case-hours weight each case type by its mean
duration. A forecast expecting more than :data:`MAX_CASES` cases is refused unless the caller
allows more (``max_cases``; ``lowflow forecast --max-cases``), up to :data:`CASE_CEILING`.

The run-time estimate divides the case-hours by :data:`CASE_HOURS_PER_SECOND`, the batch engine's
throughput measured on a shared 2-core machine (about 5,800 four-hour cases a second, 23,000
case-hours a second, rounded down; ``benchmarks/bench_batch.py`` measures it on yours). It is an
estimate, not a promise: a busy machine is slower.

Examples
--------
>>> from estimator.planning.casemix import casemix_from_text
>>> mix = casemix_from_text('''
... [[case_types]]
... name = "day cases"
... per_week = 40
... agent = "sevoflurane"
... duration = "90 min"
... weight_mean = "75 kg"
... ''')
>>> size = forecast_size(mix, 52)
>>> size.cases, size.case_hours, round(size.seconds, 2)
(2080, 3120.0, 0.16)
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

from ..errors import InputError

#: Most expected cases a forecast runs unless allowed more (about a minute or two of batch work).
MAX_CASES = 1_000_000
#: Most expected cases a forecast runs at all (about 30 min at the measured throughput).
CASE_CEILING = 20_000_000
#: Batch throughput for the estimate [case-hours/s]: measured 23,000 on a shared 2-core machine,
#: rounded down.
CASE_HOURS_PER_SECOND = 20_000.0


@dataclass(frozen=True)
class ForecastSize:
    """Expected cases, case-hours and run time [s] of a forecast."""

    cases: int
    case_hours: float
    seconds: float

    def text(self, weeks: int) -> str:
        """One line for the user, e.g. before a long run."""
        return (
            f"Simulating about {self.cases:,} cases ({weeks} weeks, {self.case_hours:,.0f} case-hours): "
            f"about {_duration(self.seconds)} at {CASE_HOURS_PER_SECOND:,.0f} case-hours a second"
        )


def _duration(seconds: float) -> str:
    return f"{seconds:.0f} s" if seconds < 120 else f"{seconds / 60:.0f} min"


def forecast_size(mix: Any, weeks: int) -> ForecastSize:
    """Expected cases, case-hours and run time of ``weeks`` simulated weeks of a case mix."""
    cases = sum(ct.mean_per_week for ct in mix.case_types) * weeks
    hours = sum(ct.mean_per_week * ct.duration.mean / 60.0 for ct in mix.case_types) * weeks
    return ForecastSize(int(round(cases)), float(hours), float(hours / CASE_HOURS_PER_SECOND))


def check_size(mix: Any, weeks: int, max_cases: int = MAX_CASES) -> ForecastSize:
    """The forecast's size, or an InputError when it expects more than ``max_cases`` cases.

    >>> from types import SimpleNamespace as NS
    >>> big = NS(case_types=[NS(mean_per_week=10000.0, duration=NS(mean=240.0))])
    >>> check_size(big, 1000)  # doctest: +ELLIPSIS
    Traceback (most recent call last):
    ...
    estimator.errors.InputError: forecast cases: got 10000000; expected at most 1000000 expected cases ...
    """
    if isinstance(max_cases, bool) or not isinstance(max_cases, int) or not 1 <= max_cases <= CASE_CEILING:
        raise InputError("max_cases", max_cases, f"a whole number from 1 to {CASE_CEILING}")
    size = forecast_size(mix, weeks)
    if size.cases > max_cases:
        raise InputError(
            "forecast cases",
            size.cases,
            f"at most {max_cases} expected cases (fewer weeks or cases a week, or allow more with "
            f"--max-cases up to {CASE_CEILING}); this one would take about {_duration(size.seconds)}",
        )
    return size
