"""Patient spread: the same plan run for many patients drawn from published between-patient variation.

A planned case describes the typical patient of its weight and age. Real patients differ in cardiac
output, metabolic rate, the agent's blood/gas and tissue/blood coefficients and body fat at the same
weight; each of these is drawn as a lognormal factor with median 1 and a published coefficient of
variation (``estimator/data/spread.toml``, with source and confidence), and applied to the engine's
parameter vector through the ``adjust`` hook of :func:`estimator.simulation.engine.simulate` (and of
:func:`estimator.simulation.batch.run_batch` for the demand forecast). Draws come from a seeded numpy
``Generator``: the same seed gives the same patients.

:func:`simulate_spread` runs the single-case engine once per patient (about 7 ms a case, so 100
patients take about a second) and reports P5, P50 and P95 of the totals and per-time percentile
bands of the main series.

References
----------
.. [1] Esper T, Wehner M, Meinecke CD, Rueffert H. Anesth Analg 2015;120:45-50 (blood/gas spread).
.. [2] Carlsson M et al. J Cardiovasc Magn Reson 2012;14:51 (cardiac index spread).
.. [3] Limpert E, Stahel WA, Abbt M. Log-normal distributions across the sciences. BioScience
   2001;51:341-52 (sigma of the log = sqrt(ln(1 + CV^2))).

Examples
--------
>>> import numpy as np
>>> f = draw_factors("sevoflurane", 2000, np.random.default_rng(1))
>>> f.shape
(2000, 5)
>>> bool(abs(np.median(f[:, 0]) - 1) < 0.02)
True
"""

from __future__ import annotations

import tomllib
from dataclasses import dataclass
from functools import cache, partial
from importlib import resources
from typing import Any

import numpy as np

from ..errors import InputError
from ..physics import circuit as c
from ..physics.physiology import COMPARTMENT_TISSUE, COMPARTMENTS
from ..units import Q_

#: Factors in column order of :func:`draw_factors`.
FACTORS = ("cardiac_output", "metabolic_rate", "blood_gas", "tissue_blood", "fat_volume")
#: Totals reported with a spread: the keys of ``CaseResult.totals`` and their units.
SPREAD_TOTALS = {"agent_liquid": "mL", "oxygen": "L", "nitrous_oxide": "L", "co2e": "kg"}
#: Series given as percentile bands: column of ``CaseResult.series`` -> key in the result.
SPREAD_SERIES = {
    "end_tidal_agent [%]": "end_tidal_agent",
    "inspired_oxygen [%]": "inspired_oxygen",
    "agent_liquid_cumulative [mL]": "agent_liquid_cumulative",
}
#: Percentiles reported.
PERCENTILES = {"p05": 5.0, "p50": 50.0, "p95": 95.0}
#: Model compartments that are fat (perfused, and fed by diffusion from lean tissue): the fat factor
#: scales all of them.
FAT_COMPARTMENTS = tuple(k for k, t in enumerate(COMPARTMENTS) if COMPARTMENT_TISSUE[t] == "fat")
#: Patients per run accepted by :func:`simulate_spread` (10,000 would take over a minute).
MAX_PATIENTS = 5000
#: Range of the spread multiplier (1 = the published spreads); above 1.5 a fat group drawn at the
#: truncation could exceed the muscle group it is taken from.
SCALE_RANGE = (0.0, 1.5)


@dataclass(frozen=True)
class Spread:
    """One factor's distribution: lognormal, median 1, coefficient of variation ``cv``."""

    name: str
    cv: float
    source: str
    confidence: str
    derivation: str

    @property
    def sigma(self) -> float:
        """Standard deviation of the log of the factor: sqrt(ln(1 + cv^2)) (Limpert et al. 2001)."""
        return float(np.sqrt(np.log1p(self.cv**2)))


@cache
def _data() -> dict[str, Any]:
    text = resources.files("estimator").joinpath("data/spread.toml").read_text(encoding="utf-8")
    data = tomllib.loads(text)
    for name, entry in data["factors"].items():
        for rec in entry.values() if name == "blood_gas" else [entry]:
            if rec.get("source") not in data["sources"] or rec.get("confidence") not in tuple("VSMDC"):
                raise RuntimeError(f"spread.toml [{name}]: every spread needs a known source and a confidence code")
    return data


def sources() -> dict[str, str]:
    """Source keys of the spread data file and their full citations.

    Returns
    -------
    dict of str -> str

    Examples
    --------
    >>> sources()["esper2015"].split(".")[0]
    'Esper T, Wehner M, Meinecke CD, Rueffert H'
    """
    return dict(_data()["sources"])


def distributions(agent: str) -> dict[str, Spread]:
    """The distributions used for a patient receiving ``agent``, in :data:`FACTORS` order.

    Parameters
    ----------
    agent : str
        An agent with a blood/gas spread in ``spread.toml``.

    Returns
    -------
    dict of str -> Spread
        Each factor's coefficient of variation [-] with its source.

    References
    ----------
    ``data/spread.toml``: Esper T et al. Anesth Analg 2015;120:45-50 and Katoh T et al. Br J Anaesth
    1992;69:259 (blood/gas); Carlsson M et al. J Cardiovasc Magn Reson 2012;14:51 (cardiac output);
    Briesenick L et al. Anesth Analg 2023 (metabolic rate); Kelly TL et al. PLoS One 2009;4:e7038 (fat;
    its SD from memory).

    Examples
    --------
    >>> d = distributions("desflurane")
    >>> d["blood_gas"].cv, d["blood_gas"].source
    (0.07, 'esper2015')
    """
    data = _data()["factors"]
    if agent not in data["blood_gas"]:
        raise InputError("agent.name", agent, "one of " + ", ".join(sorted(data["blood_gas"])))
    out = {}
    for name in FACTORS:
        rec = data[name][agent] if name == "blood_gas" else data[name]
        out[name] = Spread(name, float(rec["cv"]), rec["source"], rec["confidence"], rec["derivation"])
    return out


def draw_factors(agent: str, n: int, rng: np.random.Generator, scale: float = 1.0) -> np.ndarray:
    """Draw ``n`` patients' factors, shape (n, len(FACTORS)), each lognormal with median 1.

    Parameters
    ----------
    agent : str
    n : int
    rng : numpy.random.Generator
    scale : float [-]
        Multiplies every sigma (0 = every patient typical, 1 = the published spreads).

    Returns
    -------
    numpy.ndarray, shape (n, 5) [-]
        Factors in :data:`FACTORS` order.

    Notes
    -----
    Standard normal draws beyond the file's ``truncate`` (3 SD) are drawn again, a stated truncation.

    References
    ----------
    Limpert E, Stahel WA, Abbt M. BioScience 2001;51:341-52 (sigma of the log = sqrt(ln(1 + CV^2)));
    coefficients of variation as :func:`distributions`.

    Examples
    --------
    >>> f = draw_factors("sevoflurane", 3, np.random.default_rng(0), scale=0.0)
    >>> f.tolist() == np.ones((3, 5)).tolist()
    True
    """
    if not SCALE_RANGE[0] <= scale <= SCALE_RANGE[1]:
        raise InputError("spread.scale", scale, f"{SCALE_RANGE[0]:g} to {SCALE_RANGE[1]:g}")
    cut = float(_data()["truncate"])
    sig = np.array([s.sigma for s in distributions(agent).values()]) * scale
    z = rng.standard_normal((n, len(FACTORS)))
    bad = np.abs(z) > cut
    while bad.any():
        z[bad] = rng.standard_normal(int(bad.sum()))
        bad = np.abs(z) > cut
    return np.exp(z * sig)


def apply_factors(p: np.ndarray, f: np.ndarray) -> np.ndarray:
    """Parameter vectors ``p`` (shape (..., NP)) of patients with factors ``f`` (shape (..., 5)).

    Cardiac output scales every tissue and hepatic flow; the metabolic rate scales O2 consumption,
    CO2 production and with it alveolar ventilation (and its alveolar dead-space part); the agent's
    blood/gas and tissue/blood coefficients scale; every fat compartment grows or shrinks (with the
    diffusion clearance of the fat next to lean tissue, which is per litre of that fat) and the muscle
    group gives up or takes the same volume; fat blood flows keep their share of cardiac output.

    Parameters
    ----------
    p : numpy.ndarray, shape (..., NP)
        Parameter vectors [internal units of :mod:`estimator.physics.circuit`].
    f : numpy.ndarray, shape (..., 5) [-]
        Factors in :data:`FACTORS` order.

    Returns
    -------
    numpy.ndarray, shape (..., NP)
        A new array.

    Examples
    --------
    >>> from estimator.physics.circuit import NP, P_Q
    >>> p = np.ones(NP)
    >>> float(apply_factors(p, np.array([1.2, 1, 1, 1, 1]))[P_Q])
    1.2
    """
    p = np.array(p, dtype=float, copy=True)
    f = np.asarray(f, dtype=float)
    co, met, bg, tb, fat = (f[..., i] for i in range(len(FACTORS)))
    p[..., c.P_Q] *= co
    p[..., c.P_QH] *= co
    p[..., c.P_QT : c.P_QT + c.NT] *= co[..., None]
    for idx in (c.P_VO2, c.P_VCO2, c.P_VA, c.P_VDALV):
        p[..., idx] *= met
    b = c.BODY.index(c.AGENT)
    p[..., c.P_LAMBDA + b] *= bg
    p[..., c.P_LAMBDA_T + c.NT * b : c.P_LAMBDA_T + c.NT * (b + 1)] *= tb[..., None]
    km = c.P_VT + COMPARTMENTS.index("muscle")
    grown = np.zeros_like(fat)
    for k in FAT_COMPARTMENTS:
        grown = grown + p[..., c.P_VT + k] * (fat - 1.0)
        p[..., c.P_VT + k] *= fat
        p[..., c.P_DIFF + k] *= fat  # diffusion clearance is per litre of the fat next to lean tissue
    if np.any(p[..., km] - grown <= 0.0):
        raise InputError("spread.fat_volume", float(np.max(fat)), "a fat group smaller than fat plus muscle")
    p[..., km] -= grown
    return p


@dataclass
class SpreadResult:
    """Percentiles over simulated patients (see :func:`simulate_spread`).

    Attributes
    ----------
    n, seed, scale : the run's size, seed and spread multiplier
    totals : dict of key -> numpy array of the n patients' totals (units in :data:`SPREAD_TOTALS`)
    time : numpy array [min]
    bands : dict of series key -> {"p05", "p50", "p95": numpy arrays over time}
    typical : dict of key -> the typical patient's total
    """

    n: int
    seed: int
    scale: float
    totals: dict[str, np.ndarray]
    time: np.ndarray
    bands: dict[str, dict[str, np.ndarray]]
    typical: dict[str, float]
    agent: str

    def percentiles(self, key: str) -> dict[str, float]:
        """P5, P50 and P95 of one total."""
        return {k: float(np.percentile(self.totals[key], q)) for k, q in PERCENTILES.items()}

    def to_json(self) -> dict[str, Any]:
        """The ``spread`` object of ``lowflow case --spread N --json``."""
        from ..jsonout import jsonable

        out: dict[str, Any] = {"patients": self.n, "seed": self.seed, "scale": self.scale}
        for key, unit in SPREAD_TOTALS.items():
            out[key] = {k: Q_(v, unit) for k, v in self.percentiles(key).items()}
        series: dict[str, Any] = {"time": self.time.tolist(), "units": {"time": "min"}}
        for col, key in SPREAD_SERIES.items():
            series["units"][key] = col.split("[")[1].rstrip("]")
            series[key] = {k: v.tolist() for k, v in self.bands[key].items()}
        out["series"] = series
        out["distributions"] = {
            name: {"cv": s.cv, "source": sources()[s.source], "confidence": s.confidence}
            for name, s in distributions(self.agent).items()
        }
        return jsonable(out)

    def band_text(self, key: str) -> str:
        """'P5-P95 a-b unit' for the text summary."""
        pc = self.percentiles(key)
        return f"P5-P95 {pc['p05']:.2f}-{pc['p95']:.2f} {SPREAD_TOTALS[key]}"


def simulate_spread(scenario, n: int, *, seed: int | None = None, scale: float = 1.0) -> SpreadResult:
    """Simulate ``n`` patients drawn from the published between-patient variation.

    Parameters
    ----------
    scenario : Scenario
    n : int
        Patients, 1 to :data:`MAX_PATIENTS`.
    seed : int, optional
        Seed of the random generator; without one a fresh seed is drawn and reported.
    scale : float [-]
        Multiplies every spread (1 = as published, 0 = every patient typical).

    Returns
    -------
    SpreadResult

    References
    ----------
    ``data/spread.toml``: Esper T et al. Anesth Analg 2015;120:45-50 and Katoh T et al. Br J Anaesth
    1992;69:259 (blood/gas); Carlsson M et al. J Cardiovasc Magn Reson 2012;14:51 (cardiac output);
    Briesenick L et al. Anesth Analg 2023 (metabolic rate); Kelly TL et al. PLoS One 2009;4:e7038 (fat;
    its SD from memory).

    Examples
    --------
    >>> from estimator.inputs.scenario import scenario_from_dict
    >>> s = scenario_from_dict({"patient": {"weight": "70 kg"}, "agent": {"name": "sevoflurane"},
    ...     "phases": [{"duration": "30 min", "oxygen": "0.5 L/min", "air": "0.5 L/min",
    ...                 "end_tidal_target": "1 MAC"}]})
    >>> r = simulate_spread(s, 20, seed=1)
    >>> pc = r.percentiles("agent_liquid")
    >>> bool(pc["p05"] < pc["p50"] < pc["p95"])
    True
    """
    from .engine import simulate

    if isinstance(n, bool) or not isinstance(n, int | np.integer) or not 1 <= n <= MAX_PATIENTS:
        raise InputError("spread", n, f"a whole number of patients from 1 to {MAX_PATIENTS}")
    if seed is None:
        seed = int(np.random.SeedSequence().generate_state(1)[0])  # a fresh 32-bit seed, reported
    if isinstance(seed, bool) or not isinstance(seed, int | np.integer) or seed < 0:
        raise InputError("seed", seed, "a whole number of 0 or more")
    rng = np.random.default_rng(seed)
    factors = draw_factors(scenario.agent.name, int(n), rng, scale)
    typical = simulate(scenario)
    totals = {k: np.empty(n) for k in SPREAD_TOTALS}
    columns = {key: np.empty((n, len(typical.series))) for key in SPREAD_SERIES.values()}
    # Every patient shares the typical patient's built physiology (the factors act on the parameter
    # vector) and needs no cost: both are taken out of the loop (about 16 ms a patient).
    plain = scenario.model_copy(update={"prices": None})
    for i, row in enumerate(factors):
        r = simulate(plain, patient=typical.patient, adjust=partial(apply_factors, f=row))
        for key, unit in SPREAD_TOTALS.items():
            totals[key][i] = r.totals[key].to(unit).magnitude
        for col, key in SPREAD_SERIES.items():
            columns[key][i] = r.series[col].to_numpy()
    bands = {key: {k: np.percentile(v, q, axis=0) for k, q in PERCENTILES.items()} for key, v in columns.items()}
    typ = {k: float(typical.totals[k].to(u).magnitude) for k, u in SPREAD_TOTALS.items()}
    time = typical.series["time [min]"].to_numpy()
    return SpreadResult(int(n), int(seed), float(scale), totals, time, bands, typ, scenario.agent.name)


def forecast_adjuster(agent: str, n: int, rng: np.random.Generator):
    """An ``adjust`` callable for :func:`estimator.simulation.batch.run_batch`: ``n`` patients' factors drawn
    now from ``rng``, applied to each chunk of parameter arrays (shape (m, phases, NP)).

    Parameters
    ----------
    agent : str
    n : int
        Patients (cases) of the batch.
    rng : numpy.random.Generator

    Returns
    -------
    callable
        ``adjust(p, rows)``: parameter arrays of the cases ``rows`` with their patients' factors.

    References
    ----------
    As :func:`draw_factors`.

    Examples
    --------
    >>> from estimator.physics.circuit import NP, P_Q
    >>> adjust = forecast_adjuster("sevoflurane", 4, np.random.default_rng(0))
    >>> out = adjust(np.ones((2, 1, NP)), slice(0, 2))
    >>> out.shape == (2, 1, NP), bool(out[0, 0, P_Q] != 1.0)
    (True, True)
    """
    factors = draw_factors(agent, n, rng)

    def adjust(p: np.ndarray, rows: slice) -> np.ndarray:
        return apply_factors(p, factors[rows][:, None, :])

    return adjust
