r"""The case-mix file of the demand forecast (``lowflow forecast``): schema, TOML and CSV readers.

A case mix lists case types, each with its cases a week, a duration distribution, patient weight
and age distributions and a fresh-gas policy: a scenario file whose last phase stretches to each
drawn duration, or inline template keys (wash-in flow and time, maintenance flow, carrier gas,
end-tidal hold or dial). Unknown keys are errors; every error is an
:class:`~estimator.errors.InputError` naming the row, e.g. ``case_types[2].duration_p90``.

Distributions (all stated, none silent):

* counts a week: Poisson with the given mean, or ``count = "fixed"`` (whole numbers);
* duration: log-normal from the median and the 90th percentile (sigma = ln(P90 / median) / z0.90,
  z0.90 = 1.2816), truncated to ``duration_min``-``duration_max`` (default 1 min to 24 h, the
  model's limit); or a fixed ``duration``;
* weight and age: normal truncated to ``[min, max]`` (default mean +- 3 SD), or a point when the
  SD is 0 or missing.

Examples
--------
>>> mix = load_casemix('''
... weeks = 4
... seed = 7
... [[case_types]]
... name = "hernia repair"
... per_week = 12
... agent = "sevoflurane"
... duration_median = "60 min"
... duration_p90 = "100 min"
... weight_mean = "80 kg"
... weight_sd = "12 kg"
... ''')
>>> ct = mix.case_types[0]
>>> ct.name, ct.mean_per_week, ct.weight.kind, round(ct.weight.low)
('hernia repair', 12.0, 'normal', 44)
>>> load_casemix('[[case_types]]\nname = "x"\nper_week = 2\nagent = "sevoflurane"\n'
...              'weight_mean = "70 kg"\nduration_median = "60 min"\nduration_p90 = "50 min"')
Traceback (most recent call last):
...
estimator.errors.InputError: case_types[0].duration_p90: got '50 min'; expected at least the median, 60 min
"""

from __future__ import annotations

import csv
import io
import math
import re
import tomllib
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, Literal

import numpy as np
from pydantic import BaseModel, ConfigDict, StrictInt, ValidationError
from scipy.special import ndtr, ndtri

from .batch import CaseTemplate, case_template
from .costs import Prices, parse_prices
from .errors import InputError, read_text_file
from .limits import MAPLESON_VALID_FROM as MAPLESON_MIN_AGE
from .limits import TRUNCATED_SHARE
from .physiology import SANE_WEIGHT, VALIDATED_WEIGHT
from .properties import AGENTS, CO2E_BASES
from .scenario import input_error_from_validation, load_scenario, scenario_from_dict
from .units import Q_, check_range, parse_quantity

Value = str | int | float
#: z of the 90th percentile of the standard normal (scipy.special.ndtri(0.9)).
Z90 = float(ndtri(0.9))
#: Durations the model accepts [min] (a scenario lasts at most 24 h).
DURATION_LIMITS = (1.0, 24 * 60.0)
AGE_LIMITS = (0.0, 120.0)
#: Bottle size used for orders when none is given: 250 mL (common practice, no source).
DEFAULT_BOTTLE = "250 mL"
#: Patient keys a case-mix template may not override: they are per patient, not per case type.
_PER_PATIENT = (
    "oxygen_consumption",
    "carbon_dioxide_production",
    "cardiac_output",
    "alveolar_ventilation",
    "minute_ventilation",
    "frc",
)


class _Strict(BaseModel):
    model_config = ConfigDict(extra="forbid", frozen=True)


class CaseTypeInput(_Strict):
    """One ``[[case_types]]`` row; see the module docstring and the README for every key."""

    name: str
    per_week: float | None = None
    per_weekday: list[float] | None = None
    count: Literal["poisson", "fixed"] = "poisson"
    scenario: str | None = None
    agent: str | None = None
    wash_in_flow: Value | None = None
    wash_in_time: Value | None = None
    maintenance_flow: Value | None = None
    oxygen_fraction: Value | None = None
    balance: Literal["air", "nitrous_oxide"] | None = None
    end_tidal_target: Value | None = None
    vaporizer: Value | None = None
    duration: Value | None = None
    duration_median: Value | None = None
    duration_p90: Value | None = None
    duration_min: Value | None = None
    duration_max: Value | None = None
    weight_mean: Value | None = None
    weight_sd: Value | None = None
    weight_min: Value | None = None
    weight_max: Value | None = None
    age_mean: Value | None = None
    age_sd: Value | None = None
    age_min: Value | None = None
    age_max: Value | None = None


class CylinderSize(_Strict):
    """A cylinder size for orders: compressed by pressure, or nitrous oxide by weight."""

    water_capacity: Value | None = None
    pressure: Value | None = None
    temperature: Value = "15 degC"
    reserve_pressure: Value | None = None
    gross_weight: Value | None = None
    tare_weight: Value | None = None
    reserve_weight: Value | None = None


class OrdersInput(_Strict):
    """``[orders]``: pack sizes; items without a size are reported without an order."""

    oxygen_cylinder: CylinderSize | None = None
    air_cylinder: CylinderSize | None = None
    nitrous_oxide_cylinder: CylinderSize | None = None
    bottle_volume: Value = DEFAULT_BOTTLE
    bottle_volumes: dict[str, Value] = {}
    absorbent_pack: Value | None = None


class CaseMixInput(_Strict):
    """The case-mix file."""

    title: str = ""
    weeks: StrictInt = 52
    seed: StrictInt | None = None
    cover: Value = "95 %"
    co2e_basis: str = "ar6_gwp100"
    nitrous_oxide_manifold_loss: Value = 0.0
    case_types: list[CaseTypeInput] = []
    case_types_file: str | None = None
    prices: dict[str, Any] | None = None
    orders: OrdersInput = OrdersInput()


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


@dataclass(frozen=True)
class CaseType:
    """A validated case type, ready for the demand forecast."""

    name: str
    agent: str
    mean_per_week: float
    fixed: bool
    template: CaseTemplate
    duration: Distribution
    weight: Distribution
    age: Distribution


@dataclass(frozen=True)
class CaseMix:
    """A validated case-mix file (see :func:`load_casemix`)."""

    title: str
    weeks: int
    seed: int | None
    cover: float
    co2e_basis: str
    manifold_loss: float
    case_types: tuple[CaseType, ...]
    prices: Prices | None
    orders: OrdersInput
    warnings: tuple[tuple[str, str], ...] = field(default=())


def _q(value: Value | None, where: str, dim: str, unit: str, lo: float, hi: float) -> float | None:
    if value is None:
        return None
    q = parse_quantity(value, where, dim, default_unit=unit)
    check_range(q.to(unit), where, Q_(lo, unit), Q_(hi, unit), value=value)
    return float(q.to(unit).magnitude)


def _normal(
    row: CaseTypeInput, key: str, where: str, dim: str, unit: str, limits: tuple[float, float], default: float
) -> Distribution:
    f = f"{where}.{key}"
    mean = _q(getattr(row, f"{key}_mean"), f"{f}_mean", dim, unit, *limits)
    sd = _q(getattr(row, f"{key}_sd"), f"{f}_sd", dim, unit, 0.0, limits[1]) or 0.0
    if mean is None:
        if sd or getattr(row, f"{key}_min") is not None or getattr(row, f"{key}_max") is not None:
            raise InputError(f"{f}_mean", None, f"a mean {key} beside {key}_sd, {key}_min or {key}_max")
        mean = default
    if sd == 0.0:
        return Distribution("point", mean, 0.0, mean, mean)
    lo = _q(getattr(row, f"{key}_min"), f"{f}_min", dim, unit, *limits)
    hi = _q(getattr(row, f"{key}_max"), f"{f}_max", dim, unit, *limits)
    lo = max(limits[0], mean - 3 * sd) if lo is None else lo
    hi = min(limits[1], mean + 3 * sd) if hi is None else hi
    if not lo < hi:
        raise InputError(f"{f}_max", getattr(row, f"{key}_max"), f"above {key}_min, {lo:g} {unit}")
    if not lo <= mean <= hi:
        raise InputError(
            f"{f}_mean", getattr(row, f"{key}_mean"), f"within {key}_min to {key}_max, {lo:g} to {hi:g} {unit}"
        )
    return Distribution("normal", mean, sd, lo, hi)


def _duration(row: CaseTypeInput, where: str, fallback: float | None) -> Distribution:
    lim = DURATION_LIMITS
    fixed = _q(row.duration, f"{where}.duration", "time", "min", *lim)
    med = _q(row.duration_median, f"{where}.duration_median", "time", "min", *lim)
    p90 = _q(row.duration_p90, f"{where}.duration_p90", "time", "min", *lim)
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
    lo = _q(row.duration_min, f"{where}.duration_min", "time", "min", *lim) or lim[0]
    hi = _q(row.duration_max, f"{where}.duration_max", "time", "min", *lim) or lim[1]
    if not lo < med < hi:
        raise InputError(
            f"{where}.duration_max" if med >= hi else f"{where}.duration_min",
            row.duration_max if med >= hi else row.duration_min,
            f"duration_min below and duration_max above the median, {med:g} min",
        )
    return Distribution("lognormal", math.log(med), math.log(p90 / med) / Z90, lo, hi)


def _count(row: CaseTypeInput, where: str) -> float:
    if (row.per_week is None) == (row.per_weekday is None):
        raise InputError(f"{where}.per_week", row.per_week, "exactly one of per_week or per_weekday")
    values = [row.per_week] if row.per_week is not None else list(row.per_weekday)
    key = "per_week" if row.per_week is not None else "per_weekday"
    if row.per_weekday is not None and not 1 <= len(values) <= 7:
        raise InputError(f"{where}.per_weekday", values, "1 to 7 numbers, one per working day")
    for v in values:
        if not math.isfinite(v) or v < 0 or v > 10000:
            raise InputError(f"{where}.{key}", v, "0 to 10000 cases")
        if row.count == "fixed" and v != int(v):
            raise InputError(f"{where}.{key}", v, 'a whole number of cases with count = "fixed"')
    return float(sum(values))


def _inline(row: CaseTypeInput, where: str, weight: float, age: float) -> dict[str, Any]:
    if row.agent is None:
        raise InputError(
            f"{where}.agent", "(missing)", "an agent (" + ", ".join(sorted(AGENTS)) + ") or a scenario file"
        )
    if row.end_tidal_target is not None and row.vaporizer is not None:
        raise InputError(f"{where}.vaporizer", row.vaporizer, "either end_tidal_target or vaporizer, not both")
    drive = (
        {"vaporizer": row.vaporizer}
        if row.vaporizer is not None
        else {"end_tidal_target": row.end_tidal_target or "1 MAC"}
    )
    gas = {"oxygen_fraction": row.oxygen_fraction or "50 %", "balance": row.balance or "air"}
    wash = {"duration": row.wash_in_time or "10 min", "total_flow": row.wash_in_flow or "6 L/min"}
    keep = {"duration": "60 min", "total_flow": row.maintenance_flow or "0.5 L/min"}
    return {
        "title": row.name,
        "patient": {"weight": f"{weight} kg", "age": f"{age} year"},
        "agent": {"name": row.agent},
        "phases": [{**wash, **gas, **drive, "label": "wash-in"}, {**keep, **gas, **drive, "label": "maintenance"}],
    }


_INLINE = (
    "agent",
    "wash_in_flow",
    "wash_in_time",
    "maintenance_flow",
    "oxygen_fraction",
    "balance",
    "end_tidal_target",
    "vaporizer",
)


def _prefixed(exc: InputError, where: str) -> InputError:
    return InputError(f"{where}.{exc.field}", exc.value, exc.expected)


def case_type(row: CaseTypeInput, where: str, base_dir: Path) -> tuple[CaseType, list[tuple[str, str]]]:
    """Validate one row into a :class:`CaseType` (and load-time warnings)."""
    mean = _count(row, where)
    notes: list[tuple[str, str]] = []
    if row.scenario is not None:
        used = [k for k in _INLINE if getattr(row, k) is not None]
        if used:
            raise InputError(
                f"{where}.{used[0]}", getattr(row, used[0]), "no inline template keys beside a scenario file"
            )
        path = (base_dir / row.scenario).resolve()
        if not path.is_file():
            raise InputError(
                f"{where}.scenario", row.scenario, "an existing scenario TOML file (relative to the case-mix file)"
            )
        try:
            sc = load_scenario(path)
        except InputError as exc:
            raise _prefixed(exc, f"{where}.scenario") from None
        over = [k for k in _PER_PATIENT if getattr(sc.patient, k) is not None]
        if over:
            raise InputError(
                f"{where}.scenario",
                row.scenario,
                f"a template without patient.{over[0]}: the "
                "case mix draws each patient's weight, and the Brody laws scale from it",
            )
        w0, a0 = sc.patient.weight.to("kg").magnitude, sc.patient.age.to("year").magnitude
    else:
        w0 = _q(row.weight_mean, f"{where}.weight_mean", "mass", "kg", *SANE_WEIGHT)
        if w0 is None:
            raise InputError(f"{where}.weight_mean", "(missing)", "a weight (an inline template has no patient)")
        a0 = _q(row.age_mean, f"{where}.age_mean", "age", "year", *AGE_LIMITS)
        a0 = 40.0 if a0 is None else a0  # the scenario default age
        try:
            sc = scenario_from_dict(_inline(row, where, w0, a0))
        except InputError as exc:
            raise InputError(f"{where}.{_inline_key(exc.field)}", exc.value, exc.expected) from None
    weight = _normal(row, "weight", where, "mass", "kg", SANE_WEIGHT, w0)
    age = _normal(row, "age", where, "age", "year", AGE_LIMITS, a0)
    fallback = sc.duration.to("min").magnitude if row.scenario is not None else None
    duration = _duration(row, where, fallback)
    if weight.low < VALIDATED_WEIGHT[0] or weight.high > VALIDATED_WEIGHT[1]:
        span = (
            f"weight {weight.low:g} kg is"
            if weight.kind == "point"
            else f"weights {weight.low:g}-{weight.high:g} kg reach"
        )
        notes.append(
            (
                "PATIENT_WEIGHT_OUTSIDE_VALIDATED",
                f"{row.name}: {span} outside {VALIDATED_WEIGHT[0]:g}-{VALIDATED_WEIGHT[1]:g} kg, where the weight power "
                "laws are taken as validated; treat those cases as rough",
            )
        )
    if age.low < MAPLESON_MIN_AGE:
        notes.append(
            (
                "AGE_BELOW_MAPLESON_RANGE",
                f"{row.name}: ages from {age.low:g} years; Mapleson's age correction of MAC is fitted from 1 year up",
            )
        )
    if duration.truncated_mass() > TRUNCATED_SHARE:
        notes.append(
            (
                "DURATION_TRUNCATED",
                f"{row.name}: the duration distribution is truncated to "
                f"{duration.low:g}-{duration.high:g} min, which removes {100 * duration.truncated_mass():.1f} % "
                "of the log-normal",
            )
        )
    ct = CaseType(row.name, sc.agent.name, mean, row.count == "fixed", case_template(sc), duration, weight, age)
    return ct, notes


def _inline_key(field_name: str) -> str:
    """Map a field of the generated scenario back to the inline key that set it."""
    for pattern, key in (
        (r"phases\[0\]\.(duration)", "wash_in_time"),
        (r"phases\[0\]\.total_flow", "wash_in_flow"),
        (r"phases\[1\]\.total_flow", "maintenance_flow"),
        (r"agent", "agent"),
    ):
        if re.match(pattern, field_name):
            return key
    tail = field_name.rsplit(".", 1)[-1]
    return tail if tail in _INLINE else field_name


def casemix_from_dict(data: dict[str, Any], base_dir: Path | str = ".") -> CaseMix:
    """Validate a parsed case-mix document (paths relative to ``base_dir``)."""
    base = Path(base_dir)
    try:
        raw = CaseMixInput.model_validate(data)
    except ValidationError as exc:
        raise input_error_from_validation(exc) from None
    if not 1 <= raw.weeks <= 1040:
        raise InputError("weeks", raw.weeks, "1 to 1040 weeks")
    if raw.seed is not None and raw.seed < 0:
        raise InputError("seed", raw.seed, "a whole number of 0 or more")
    cover = _q(raw.cover, "cover", "fraction", "percent", 50.0, 99.9) / 100.0
    if raw.co2e_basis not in CO2E_BASES:
        raise InputError("co2e_basis", raw.co2e_basis, "one of " + ", ".join(CO2E_BASES))
    loss = _q(raw.nitrous_oxide_manifold_loss, "nitrous_oxide_manifold_loss", "fraction", "", 0.0, 0.99)
    rows = list(raw.case_types)
    if raw.case_types_file is not None:
        rows += read_case_types_csv(base / raw.case_types_file, start=len(rows))
    if not rows:
        raise InputError("case_types", "(none)", "at least one [[case_types]] row (or case_types_file)")
    types, notes = [], []
    for i, row in enumerate(rows):
        ct, n = case_type(row, f"case_types[{i}]", base)
        types.append(ct)
        notes += n
    prices = parse_prices(raw.prices) if raw.prices else None
    return CaseMix(
        raw.title, raw.weeks, raw.seed, cover, raw.co2e_basis, loss, tuple(types), prices, raw.orders, tuple(notes)
    )


def read_case_types_csv(source: Path | str, start: int = 0) -> list[CaseTypeInput]:
    r"""Case-type rows from CSV: one column per key, an optional unit in brackets in the header
    (``duration_median [min]``), empty cells not given, ``per_weekday`` as numbers split by ``;``.

    >>> rows = read_case_types_csv("name,per_week,agent,weight_mean [kg]\nhip,5,sevoflurane,82\n")
    >>> rows[0].weight_mean
    '82 kg'
    """
    text = (
        read_text_file(source, "case_types_file", "an existing CSV file") if isinstance(source, Path) else str(source)
    )
    reader = csv.reader(io.StringIO(text))
    try:
        header = next(reader)
    except StopIteration:
        raise InputError("case_types_file", str(source), "a CSV file with a header row") from None
    cols = []
    for h in header:
        m = re.match(r"^\s*([A-Za-z0-9_]+)\s*(?:\[(.*)\])?\s*$", h)
        if m is None:
            raise InputError("case_types_file", h, "header cells such as 'duration_median [min]'")
        cols.append((m.group(1), (m.group(2) or "").strip()))
    out = []
    for i, cells in enumerate(reader):
        if not any(x.strip() for x in cells):
            continue
        where = f"case_types[{start + len(out)}]"
        if len(cells) != len(cols):
            raise InputError(where, f"{len(cells)} cells", f"{len(cols)} cells as in the header (line {i + 2})")
        row: dict[str, Any] = {}
        for (key, unit), cell in zip(cols, cells, strict=True):
            cell = cell.strip()
            if not cell:
                continue
            if key == "per_weekday":
                row[key] = [_number(x, f"{where}.{key}") for x in cell.split(";")]
            elif key in ("per_week",):
                row[key] = _number(cell, f"{where}.{key}")
            else:
                row[key] = f"{cell} {unit}" if unit else cell
        try:
            out.append(CaseTypeInput.model_validate(row))
        except ValidationError as exc:
            raise input_error_from_validation(exc, where) from None
    return out


def _number(text: str, where: str) -> float:
    try:
        return float(text)
    except ValueError:
        raise InputError(where, text, "a number") from None


def load_casemix(source: str | Path) -> CaseMix:
    """Read a case mix from a TOML or CSV file, or from TOML text.

    Raises
    ------
    InputError
        On unreadable TOML or CSV, or any invalid field (named with its row).
    """
    if isinstance(source, Path) or (
        isinstance(source, str) and "\n" not in source and source.endswith((".toml", ".csv"))
    ):
        path = Path(source)
        expected = "an existing case-mix file (.toml or .csv)"
        if path.suffix.lower() == ".csv":
            if not path.is_file():
                raise InputError("casemix", str(source), expected)
            return casemix_from_dict({"case_types_file": path.name}, path.parent)
        text, base = read_text_file(path, "casemix", expected), path.parent
    else:
        text, base = str(source), Path(".")
    try:
        data = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise InputError("casemix", "(file)", f"valid TOML ({exc})") from None
    return casemix_from_dict(data, base)
