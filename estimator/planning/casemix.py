r"""The case-mix file of the demand forecast (``lowflow forecast``): schema, TOML and CSV readers.

A case mix lists case types, each with its cases a week, a duration distribution, patient weight
and age distributions and a fresh-gas policy: a scenario file whose last phase stretches to each
drawn duration, or inline template keys (wash-in flow and time, maintenance flow, carrier gas,
end-tidal hold or dial). Unknown keys are errors; every error is an
:class:`~estimator.errors.InputError` naming the row, e.g. ``case_types[2].duration_p90``.

Readers take a path (:func:`load_casemix`, :func:`read_case_types_csv`) or text
(:func:`casemix_from_text`, :func:`case_types_from_text`), by function, never by guessing from
the content. Files named inside a case mix are read at load time (:mod:`estimator.inputs.casemix_files`);
the distributions are in :mod:`estimator.inputs.casemix_draws`, the inline plan and its O2-safe defaults
in :mod:`estimator.planning.casemix_plan`.

Examples
--------
>>> mix = casemix_from_text('''
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
>>> casemix_from_text('[[case_types]]\nname = "x"\nper_week = 2\nagent = "sevoflurane"\n'
...                   'weight_mean = "70 kg"\nduration_median = "60 min"\nduration_p90 = "50 min"')
Traceback (most recent call last):
...
estimator.errors.InputError: case_types[0].duration_p90: got '50 min'; expected at least the median, 60 min
"""

from __future__ import annotations

import os
import re
import tomllib
from dataclasses import dataclass, field, replace
from pathlib import Path
from typing import Any

from pydantic import ValidationError

from ..accounts.costs import Prices, parse_prices
from ..errors import InputError, read_text_file
from ..inputs.casemix_draws import (
    AGE_LIMITS,
    DURATION_LIMITS,
    Z90,
    Distribution,
    duration_law,
    normal_law,
    quantity_in,
    weekly_count,
)
from ..inputs.casemix_files import case_type_rows, reference_text, referenced_file
from ..inputs.casemix_orders import check_orders
from ..inputs.casemix_schema import DEFAULT_BOTTLE, CaseMixInput, CaseTypeInput, CylinderSize, OrdersInput
from ..inputs.scenario import Scenario, input_error_from_validation, scenario_from_dict
from ..limits import MAPLESON_VALID_FROM as MAPLESON_MIN_AGE
from ..limits import TRUNCATED_SHARE
from ..physics.physiology import SANE_WEIGHT, VALIDATED_WEIGHT
from ..properties import CO2E_BASES
from ..simulation.batch import CaseTemplate, case_template
from .casemix_plan import inline_scenario

#: Weeks a forecast may simulate (20 years).
MAX_WEEKS = 1040
#: Largest seed (numpy seeds are unsigned 64-bit integers; 2**63 - 1 keeps TOML's integer range).
MAX_SEED = 2**63 - 1
#: Patient keys a case-mix template may not override: they are per patient, not per case type.
_PER_PATIENT = (
    "oxygen_consumption",
    "carbon_dioxide_production",
    "cardiac_output",
    "alveolar_ventilation",
    "minute_ventilation",
    "frc",
)


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

    @property
    def scenario(self) -> Scenario:
        """The parsed scenario of the case type (inline templates included)."""
        return self.template.scenario


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
    calibration: Any = None  # a department's Calibration, applied to every template (planning.calibration)
    horizon_weeks: int | None = None  # the planning horizon [weeks], apart from the weeks simulated


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


def _hidden(exc: InputError, where: str, name: str) -> InputError:
    """An error inside a referenced scenario file: the field and what is valid, not the file's text."""
    return InputError(f"{where}.{exc.field}", f"(a value in {Path(name).name})", exc.expected)


def scenario_file(name: str, where: str, base_dir: Path | None, *, confine: bool = False) -> Scenario:
    """The parsed scenario a case type names (resolved relative to ``base_dir``, read at load time)."""
    path = referenced_file(name, where, base_dir, ".toml", "scenario TOML", confine=confine)
    text = reference_text(path, where, "scenario TOML")
    try:
        data = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise InputError(where, name, f"a valid TOML scenario ({exc})") from None
    try:
        return scenario_from_dict(data)
    except InputError as exc:
        raise _hidden(exc, where, name) from None


def case_type(
    row: CaseTypeInput, where: str, scenario: Scenario | None = None
) -> tuple[CaseType, list[tuple[str, str]]]:
    """Validate one row into a :class:`CaseType` (and load-time warnings).

    Parameters
    ----------
    row : CaseTypeInput
    where : str
        The row, e.g. ``case_types[2]``, for errors.
    scenario : Scenario, optional
        The parsed scenario the row names (``row.scenario``), read by the loader; None for an
        inline template.
    """
    mean = weekly_count(row, where)
    notes: list[tuple[str, str]] = []
    if row.scenario is not None:
        used = [k for k in _INLINE if getattr(row, k) is not None]
        if used:
            raise InputError(
                f"{where}.{used[0]}", getattr(row, used[0]), "no inline template keys beside a scenario file"
            )
        if scenario is None:
            raise InputError(f"{where}.scenario", row.scenario, "a scenario read by the case-mix loader")
        sc = scenario
        over = [k for k in _PER_PATIENT if getattr(sc.patient, k) is not None]
        if over:
            raise InputError(
                f"{where}.scenario",
                row.scenario,
                f"a template without patient.{over[0]}: the "
                "case mix draws each patient's weight, and the Brody laws scale from it",
            )
        w0, a0 = sc.patient.weight.to("kg").magnitude, sc.patient.age.to("year").magnitude
        weight = normal_law(row, "weight", where, "mass", "kg", SANE_WEIGHT, w0)
        age = normal_law(row, "age", where, "age", "year", AGE_LIMITS, a0)
    else:
        w0 = quantity_in(row.weight_mean, f"{where}.weight_mean", "mass", "kg", *SANE_WEIGHT)
        if w0 is None:
            raise InputError(f"{where}.weight_mean", "(missing)", "a weight (an inline template has no patient)")
        a0 = quantity_in(row.age_mean, f"{where}.age_mean", "age", "year", *AGE_LIMITS)
        a0 = 40.0 if a0 is None else a0  # the scenario default age
        weight = normal_law(row, "weight", where, "mass", "kg", SANE_WEIGHT, w0)
        age = normal_law(row, "age", where, "age", "year", AGE_LIMITS, a0)
        try:
            sc = scenario_from_dict(inline_scenario(row, where, w0, a0, weight.high))
        except InputError as exc:
            raise InputError(f"{where}.{_inline_key(exc.field)}", exc.value, exc.expected) from None
    fallback = sc.duration.to("min").magnitude if row.scenario is not None else None
    duration = duration_law(row, where, fallback)
    notes += _notes(row.name, weight, age, duration)
    ct = CaseType(row.name, sc.agent.name, mean, row.count == "fixed", case_template(sc), duration, weight, age)
    return ct, notes


def _notes(name: str, weight: Distribution, age: Distribution, duration: Distribution) -> list[tuple[str, str]]:
    notes = []
    if weight.low < VALIDATED_WEIGHT[0] or weight.high > VALIDATED_WEIGHT[1]:
        span = (
            f"weight {weight.low:g} kg is"
            if weight.kind == "point"
            else f"weights {weight.low:g}-{weight.high:g} kg reach"
        )
        notes.append(
            (
                "PATIENT_WEIGHT_OUTSIDE_VALIDATED",
                f"{name}: {span} outside {VALIDATED_WEIGHT[0]:g}-{VALIDATED_WEIGHT[1]:g} kg, where the weight power "
                "laws are taken as validated; treat those cases as rough",
            )
        )
    if age.low < MAPLESON_MIN_AGE:
        notes.append(
            (
                "AGE_BELOW_MAPLESON_RANGE",
                f"{name}: ages from {age.low:g} years; Mapleson's age correction of MAC is fitted from 1 year up",
            )
        )
    if duration.truncated_mass() > TRUNCATED_SHARE:
        notes.append(
            (
                "DURATION_TRUNCATED",
                f"{name}: the duration distribution is truncated to "
                f"{duration.low:g}-{duration.high:g} min, which removes {100 * duration.truncated_mass():.1f} % "
                "of the log-normal",
            )
        )
    return notes


def _inline_key(field_name: str) -> str:
    """Map a field of the generated scenario back to the inline key that set it."""
    for pattern, key in (
        (r"phases\[0\]\.(duration)", "wash_in_time"),
        (r"phases\[0\]\.total_flow", "wash_in_flow"),
        (r"phases\[1\]\.(total_flow|oxygen|air|nitrous_oxide)", "maintenance_flow"),
        (r"agent", "agent"),
    ):
        if re.match(pattern, field_name):
            return key
    tail = field_name.rsplit(".", 1)[-1]
    return tail if tail in _INLINE else field_name


def casemix_from_dict(data: dict[str, Any], base_dir: Path | str | None = None, *, confine: bool = False) -> CaseMix:
    """Validate a parsed case-mix document.

    Parameters
    ----------
    data : dict
        The parsed TOML document.
    base_dir : path, optional
        The folder that file names inside the document (``case_types_file``, a case type's
        ``scenario``) are relative to; without one the document may name no file.
    confine : bool
        Refuse file names that leave ``base_dir`` (for uploaded documents).
    """
    base = None if base_dir is None else Path(base_dir)
    try:
        raw = CaseMixInput.model_validate(data)
    except ValidationError as exc:
        raise input_error_from_validation(exc) from None
    if not 1 <= raw.weeks <= MAX_WEEKS:
        raise InputError("weeks", raw.weeks, f"1 to {MAX_WEEKS} weeks")
    if raw.seed is not None and not 0 <= raw.seed <= MAX_SEED:
        raise InputError("seed", raw.seed, f"a whole number from 0 to {MAX_SEED}")
    cover = quantity_in(raw.cover, "cover", "fraction", "percent", 50.0, 99.9) / 100.0
    if raw.co2e_basis not in CO2E_BASES:
        raise InputError("co2e_basis", raw.co2e_basis, "one of " + ", ".join(CO2E_BASES))
    loss = quantity_in(raw.nitrous_oxide_manifold_loss, "nitrous_oxide_manifold_loss", "fraction", "", 0.0, 0.99)
    rows = list(raw.case_types)
    if raw.case_types_file is not None:
        path = referenced_file(raw.case_types_file, "case_types_file", base, ".csv", "case-types CSV", confine=confine)
        text = reference_text(path, "case_types_file", "case-types CSV")
        rows += case_types_from_text(text, start=len(rows))
    if not rows:
        raise InputError("case_types", "(none)", "at least one [[case_types]] row (or case_types_file)")
    types, notes = [], []
    for i, row in enumerate(rows):
        where = f"case_types[{i}]"
        sc = None if row.scenario is None else scenario_file(row.scenario, f"{where}.scenario", base, confine=confine)
        ct, n = case_type(row, where, sc)
        types.append(ct)
        notes += n
    check_orders(raw.orders)
    prices = parse_prices(raw.prices) if raw.prices else None
    mix = CaseMix(raw.title, raw.weeks, raw.seed, cover, raw.co2e_basis, loss, tuple(types), prices, raw.orders)
    mix = replace(mix, warnings=tuple(notes), horizon_weeks=raw.horizon_weeks)
    from .calibration import calibrated_mix, named_calibration  # a department's uptake factor, if named

    return calibrated_mix(mix, named_calibration(raw.calibration, base, confine)) if raw.calibration else mix


def case_types_from_text(text: str, start: int = 0) -> list[CaseTypeInput]:
    r"""Case-type rows from CSV text (see :func:`estimator.inputs.casemix_files.case_type_rows`).

    >>> rows = case_types_from_text("name,per_week,agent,weight_mean [kg]\nhip,5,sevoflurane,82\n")
    >>> rows[0].weight_mean
    '82 kg'
    """
    out: list[CaseTypeInput] = []
    for row in case_type_rows(str(text), tuple(CaseTypeInput.model_fields), start=start):
        where = f"case_types[{start + len(out)}]"
        try:
            out.append(CaseTypeInput.model_validate(row))
        except ValidationError as exc:
            raise input_error_from_validation(exc, where) from None
    return out


def read_case_types_csv(path: str | os.PathLike[str], start: int = 0) -> list[CaseTypeInput]:
    """Case-type rows from a CSV file (the path is always a path; text goes to
    :func:`case_types_from_text`)."""
    p = _path(path, "case_types_file")
    return case_types_from_text(read_text_file(p, "case_types_file", "an existing CSV file"), start)


def _path(source: Any, field: str) -> Path:
    if isinstance(source, str) and "\n" in source:
        raise InputError(field, "(text)", "a path to a file; pass text to the *_from_text function")
    if not isinstance(source, str | os.PathLike):
        raise InputError(field, type(source).__name__, "a path to a file (str or pathlib.Path)")
    return Path(source)


def casemix_from_text(text: str, base_dir: Path | str | None = None, *, confine: bool = False) -> CaseMix:
    """A case mix from TOML text; file names inside it resolve relative to ``base_dir`` (without
    one the text may name no file).

    Raises
    ------
    InputError
        On invalid TOML or any invalid field (named with its row).
    """
    if not isinstance(text, str):
        raise InputError("casemix", type(text).__name__, "case-mix TOML text (str)")
    try:
        data = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise InputError("casemix", "(text)", f"valid TOML ({exc})") from None
    except RecursionError:
        raise InputError("casemix", "(text)", "TOML nested at most a few levels deep") from None
    return casemix_from_dict(data, base_dir, confine=confine)


def load_casemix(path: str | os.PathLike[str]) -> CaseMix:
    """Read a case mix from a file: TOML, or CSV (one row per case type). The argument is always
    a path; TOML text goes to :func:`casemix_from_text`.

    Raises
    ------
    InputError
        On an unreadable file, invalid TOML or CSV, or any invalid field (named with its row).
    """
    p = _path(path, "casemix")
    expected = "an existing case-mix file (.toml or .csv)"
    if p.suffix.lower() not in (".toml", ".csv"):
        raise InputError("casemix", str(path), expected)
    text = read_text_file(p, "casemix", expected)
    if p.suffix.lower() == ".csv":
        rows = [r.model_dump(exclude_none=True) for r in case_types_from_text(text)]
        return casemix_from_dict({"case_types": rows}, p.parent)
    return casemix_from_text(text, p.parent)


__all__ = [
    "AGE_LIMITS",
    "DEFAULT_BOTTLE",
    "DURATION_LIMITS",
    "Z90",
    "CaseMix",
    "CaseMixInput",
    "CaseType",
    "CaseTypeInput",
    "CylinderSize",
    "Distribution",
    "OrdersInput",
    "case_type",
    "case_types_from_text",
    "casemix_from_dict",
    "casemix_from_text",
    "MAX_WEEKS",
    "load_casemix",
    "read_case_types_csv",
    "scenario_file",
]
