"""The app's door to the file contracts: the same loaders the command line uses, fed text, never paths.

A page holds the parsed document (a plain dict in the TOML contract) and the text of every file that
document names (scenario files of an inventory or a case mix, a case-types CSV). Before it runs, it
hands the document to the loader of its contract here: the loader the ``lowflow`` verb calls, so an
unknown key, a value out of range or a missing file gives the same InputError as on the command line.

Files named inside a document are looked up only among the files the user gave alongside it (or the
demo folder's files for a demo), by name; a name is never opened as a path on the server.
"""

from __future__ import annotations

import functools
import tempfile
from collections.abc import Iterator
from contextlib import contextmanager
from pathlib import Path
from typing import Any

import tomli_w

from estimator.contracts import toml_from_text
from estimator.errors import InputError


def _shipped(*parts: str) -> Path:
    """A file or folder of the checkout (``demo_cases``, ``docs``), or its copy inside the installed
    package (the wheel carries both under ``estimator_app/``)."""
    here = Path(__file__).resolve().parent
    checkout = here.parent.joinpath(*parts)
    return checkout if checkout.exists() else here.joinpath(*parts)


#: The demo inputs the app opens on: the demo_cases/ folder (invented sites and cases).
DEMO_DIR = _shipped("demo_cases")

#: The top-level key of a scenario or case mix naming a department's calibration file.
CALIBRATION_KEY = "calibration"

#: A case plan or case type naming one of these runs the case on the case planner page.
PLANNER_NAMES = ("case planner", "case_planner.toml")


def toml_text(doc: dict[str, Any]) -> str:
    """TOML text of a document (``None`` values dropped: TOML has no null)."""
    return tomli_w.dumps(_clean(doc))


def _clean(value: Any) -> Any:
    if isinstance(value, dict):
        return {k: _clean(v) for k, v in value.items() if v is not None}
    if isinstance(value, list):
        return [_clean(v) for v in value]
    return value


def parse_toml(text: str, field: str) -> dict[str, Any]:
    """A TOML document from text; InputError naming ``field`` if it is not TOML.

    The command line's one TOML reader (:func:`estimator.contracts.toml_from_text`), so an uploaded
    file's error reads as the command line's and never quotes the file.
    """
    return toml_from_text(text, field)


def referenced(kind: str, doc: dict[str, Any]) -> list[str]:
    """Names of the files a document refers to (scenario files, a case-types CSV)."""
    if kind == "inventory":
        rows = doc.get("demand", {}).get("cases", []) if isinstance(doc.get("demand"), dict) else []
        names = [r.get("scenario") for r in rows if isinstance(r, dict)]
    elif kind == "casemix":
        names = [r.get("scenario") for r in doc.get("case_types", []) if isinstance(r, dict)]
        names.append(doc.get("case_types_file"))
    else:
        names = []
    return [str(n) for n in names if isinstance(n, str) and n]


def demo_files(kind: str) -> dict[str, str]:
    """Text of the demo folder's files that a demo of ``kind`` may name, by file name."""
    return {p.name: p.read_text(encoding="utf-8") for p in sorted(DEMO_DIR.glob("*.toml")) if kind != "scenario"}


@contextmanager
def folder(files: dict[str, str], planner_text: str | None = None) -> Iterator[Path]:
    """A private temporary folder holding ``files`` (name -> text) and the planner's case under its names.

    The loaders resolve a file named in a document against this folder, as the command line resolves
    it against the document's own folder; nothing else on the server is reachable through it.
    """
    with tempfile.TemporaryDirectory(prefix="lowflow-app-") as tmp:
        base = Path(tmp)
        if planner_text is not None:
            for name in PLANNER_NAMES:
                (base / name).write_text(planner_text, encoding="utf-8")
        for name, text in files.items():
            safe = Path(name).name
            if safe and safe == name:
                (base / safe).write_text(text, encoding="utf-8")
        yield base


def named_calibration(doc: dict[str, Any]) -> str | None:
    """The calibration file a scenario or case mix names (its top-level ``calibration`` key), or None."""
    name = doc.get(CALIBRATION_KEY)
    return name if isinstance(name, str) and name else None


def run_text(doc: dict[str, Any]) -> str:
    """TOML text of a document as the engine runs it in the app: without its ``calibration`` key, whose
    file the user uploads (the key stays in the document and in the file saved)."""
    return toml_text({k: v for k, v in doc.items() if k != CALIBRATION_KEY})


def calibration_text(text: str) -> Any:
    """The calibration of TOML text (:func:`estimator.inputs.calibration_file.calibration_from_text`), parsed
    once per distinct text; each call gets its own copy (the parsed file is shared by every session)."""
    return _calibration(text).model_copy(deep=True)


@functools.lru_cache(maxsize=32)
def _calibration(text: str) -> Any:
    from estimator.inputs.calibration_file import calibration_from_text

    return calibration_from_text(text)


@functools.lru_cache(maxsize=64)
def _scenario_parts(text: str) -> tuple[str, str | None]:
    """A scenario file's text as the engine runs it in the app (without its ``calibration`` key) and the
    calibration file it names; the text as given if it names none or is not TOML (the run names the fault)."""
    try:
        doc = parse_toml(text, "scenario")
    except InputError:
        return text, None
    name = named_calibration(doc)
    return (text, None) if name is None else (run_text(doc), name)


def calibrations_named(files: dict[str, str]) -> dict[str, str]:
    """The calibration file each scenario file among ``files`` names (scenario file -> calibration file)."""
    out = {}
    for name, text in files.items():
        cal = _scenario_parts(text)[1] if name.lower().endswith(".toml") else None
        if cal is not None:
            out[name] = cal
    return out


def given_files(kind: str, doc: dict[str, Any], named: dict[str, str]) -> dict[str, str]:
    """The files among ``named`` (name -> text) that a document names, with the calibration files its
    scenario files name (as ``lowflow supply`` reads the file beside each scenario)."""
    wanted = set(referenced(kind, doc))
    given = {k: v for k, v in named.items() if k in wanted}
    if kind == "inventory":
        wanted.update(calibrations_named(given).values())
    return {k: v for k, v in named.items() if k in wanted}


def missing_calibrations(scenarios: dict[str, str], files: dict[str, str]) -> dict[str, str]:
    """Scenario file -> the calibration file it names, for each one not among ``files``."""
    return {s: cal for s, cal in calibrations_named(scenarios).items() if cal not in files}


def case_runs(scenarios: dict[str, str], files: dict[str, str]) -> tuple[tuple[str, str, str | None], ...]:
    """Each scenario of an inventory's case plans as the app runs it, sorted by file name: (name, text without
    its ``calibration`` key, text of the calibration file it names among ``files``, or None); InputError
    naming a calibration file not given (never a run without it)."""
    runs = []
    for name, text in sorted(scenarios.items()):
        run, cal = _scenario_parts(text)
        if cal is not None and cal not in files:
            raise InputError(f"{name}: {CALIBRATION_KEY}", cal, "the calibration file it names, given with it")
        runs.append((name, run, None if cal is None else files[cal]))
    return tuple(runs)


def load_scenario_text(text: str, calibration: str | None = None) -> Any:
    """The scenario of TOML text: :func:`estimator.inputs.scenario.scenario_from_text`, as ``lowflow case`` reads it,
    with a calibration's text attached as ``--calibration`` attaches its file
    (:func:`estimator.inputs.calibration_file.with_calibration`)."""
    from estimator.inputs.calibration_file import with_calibration
    from estimator.inputs.scenario import scenario_from_text

    scenario = scenario_from_text(text)
    return scenario if calibration is None else with_calibration(scenario, calibration_text(calibration))


def load_inventory_text(text: str, base_dir: Path | None = None) -> Any:
    """The inventory of TOML text: :func:`estimator.inputs.inventory_file.inventory_from_text` (unknown keys refused)."""
    from estimator.inputs.inventory_file import inventory_from_text

    return inventory_from_text(text, base_dir=base_dir)


def load_casemix_text(text: str, base_dir: Path, calibration: str | None = None) -> Any:
    """The case mix of TOML text: :func:`estimator.planning.casemix.casemix_from_text`; named files only inside
    ``base_dir``; a calibration's text applied as ``lowflow forecast --calibration`` applies its file
    (:func:`estimator.planning.calibration.calibrated_mix`)."""
    from estimator.planning.casemix import casemix_from_text

    mix = casemix_from_text(text, base_dir, confine=True)
    if calibration is None:
        return mix
    from estimator.planning.calibration import calibrated_mix

    return calibrated_mix(mix, calibration_text(calibration))


def load_prices_text(text: str) -> Any:
    """Prices of TOML text (:func:`estimator.accounts.costs.prices_from_text`, as ``--prices`` reads a file), or None."""
    from estimator.accounts.costs import prices_from_text

    return prices_from_text(text) if text else None


def load_policy_text(text: str) -> Any:
    """A low-flow policy of TOML text (:func:`estimator.planning.audit_policy.policy_from_text`, as ``--policy``)."""
    from estimator.planning.audit_policy import policy_from_text

    return policy_from_text(text)


def load_log_text(text: str) -> Any:
    """An audit log of CSV text (:func:`estimator.inputs.audit_log.log_from_text`), never taken for a path."""
    from estimator.inputs.audit_log import log_from_text

    return log_from_text(text)


def case_scenarios(doc: dict[str, Any], files: dict[str, str], planner_text: str) -> dict[str, str]:
    """Scenario text of every case plan of an inventory, by file name: a file given with the inventory,
    else the planner's case for ``case planner``; InputError naming the plan for any other name."""
    out = {}
    for k, plan in enumerate(doc.get("demand", {}).get("cases", [])):
        name = str(plan.get("scenario", "")) if isinstance(plan, dict) else ""
        if name in files:
            out[Path(name).name] = files[name]
        elif name in PLANNER_NAMES:
            out[Path(name).name] = planner_text
        else:
            raise InputError(
                f"demand.cases[{k}].scenario",
                name,
                "a scenario file given with the inventory (or 'case planner' for the case planner's case)",
            )
    return out


def check(kind: str, doc: dict[str, Any], files: dict[str, str], planner_text: str) -> None:
    """Run the command line's loader of ``kind`` on a document: InputError exactly where the CLI gives one."""
    text = run_text(doc)  # a named calibration file is the app's own upload (estimator_app.calibration_use)
    if kind == "scenario":
        load_scenario_text(text)
    elif kind == "inventory":
        load_inventory_text(text)
        for cal in calibrations_named(case_scenarios(doc, files, planner_text)).values():
            if cal in files:  # a calibration given with the inventory: its contract, at load
                calibration_text(files[cal])
    elif kind == "casemix":
        with folder(files, planner_text) as base:
            load_casemix_text(text, base)
    else:  # pragma: no cover - a programming error
        raise ValueError(kind)
