"""Reproduce the fit and the figures of docs/MODEL_LATE_UPTAKE.md (run: ``uv run python docs/late_uptake_figures.py``).

``--fit`` repeats the grid fit of the intertissue clearance to the fit half of the published studies
(tests/data/published/studies.toml, ``fit_half``) and reports the held-out half; ``--yasuda`` gives
the chi-square against the six means of Yasuda et al., Anesthesiology 1991;74:489 (the earlier fit
set); without either the script prints the figures against Eger 1997, Eger 1998, Coetzee 2002 and
Lowe's law, and the issue's mutants. Nothing here is used by the package or the tests.
"""

from __future__ import annotations

import dataclasses
import sys
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

from estimator import properties  # noqa: E402
from estimator.inputs.scenario import scenario_from_dict  # noqa: E402
from estimator.physics import physiology
from estimator.physics.closed_form import lowe_cumulative_uptake  # noqa: E402
from estimator.simulation import engine
from estimator.units import Q_  # noqa: E402

#: Yasuda 1991 (abstract): inspired fraction, FA/FI at 30 min and FA/FA0 after 5 min, mean and SD.
YASUDA = {
    "desflurane": ("2.0 %", 0.90, 0.01, 0.14, 0.02),
    "isoflurane": ("0.4 %", 0.73, 0.03, 0.22, 0.02),
    "halothane": ("0.2 %", 0.58, 0.04, 0.25, 0.02),
}


def case(agent: str, phases: list[dict], age: float = 40.0, **tables) -> engine.CaseResult:
    data = {"patient": {"weight": "70 kg", "age": f"{age} years"}, "agent": {"name": agent}, "phases": phases}
    data["output"] = {"interval": "1 min"}
    data.update(tables)
    return engine.simulate(scenario_from_dict(data))


def at(series, column: str, minutes: float) -> float:
    t = series["time [min]"].to_numpy()
    return float(series[column].to_numpy()[np.searchsorted(t, minutes, side="right") - 1])


def yasuda(agent: str, inspired: str) -> tuple[float, float]:
    """FA/FI at 30 min and FA/FA0 after 5 min of elimination (65 % N2O throughout, open circuit)."""
    gases = {"oxygen": "3.5 L/min", "nitrous_oxide": "6.5 L/min"}
    phases = [
        {"duration": "30 min", **gases, "vaporizer": inspired},
        {"duration": "5 min", **gases, "vaporizer": "0 %"},
    ]
    s = case(agent, phases, age=25, circuit={"inspiratory_fraction": 0.8}).series
    fa0 = s.loc[s["time [min]"] == 30.0, "end_tidal_agent [%]"].iloc[0]
    fi = s.loc[s["time [min]"] == 30.0, "inspired_agent [%]"].iloc[0]
    return fa0 / fi, s["end_tidal_agent [%]"].iloc[-1] / fa0


def set_rate(rate: float) -> None:
    """Replace the intertissue clearance of the data file for this process only."""
    original = properties.physiology_value

    def value(name: str, table: str = "late_uptake"):
        return Q_(rate, "1/min") if name == "intertissue_rate" else original(name, table)

    physiology.physiology_value = value


def fit() -> None:
    """Grid fit of the intertissue clearance to the fit half of tests/data/published/studies.toml.

    Objective: sum over the fit half's scored rows of the squared deviation from the band centre in
    half-widths of the band. The held-out half is reported beside it and never enters the objective.
    """
    sys.path.insert(0, str(Path(__file__).resolve().parents[1] / "tests"))
    import test_validation_published as published

    for rate in (0.03, 0.1, 0.2, 0.25, 0.3, 0.35, 0.4, 0.5, 0.7, 1.0, 2.0, 3.5, 10.0):
        set_rate(rate)
        published._RESULTS.clear()
        objective, counts = 0.0, {True: [0, 0], False: [0, 0]}
        for row in published.ROWS:
            outcome = published.evaluate(row)
            if outcome["passed"] is None:
                continue
            lo, hi, _ = outcome["band"]
            fitted = row["study"] in published.FIT_HALF
            if fitted:
                objective += ((outcome["value"] - (lo + hi) / 2) / ((hi - lo) / 2)) ** 2
            counts[fitted][0] += outcome["passed"]
            counts[fitted][1] += 1
        print(
            f"rate {rate:5.2f} /min  objective {objective:7.3f}  fit half {counts[True][0]}/{counts[True][1]}"
            f"  held out {counts[False][0]}/{counts[False][1]}"
        )


def yasuda_check() -> None:
    """Chi-square against the six Yasuda 1991 means (the earlier fit set), at a few clearances."""
    for rate in (0.1, 0.3, 1.0, 3.5, 10.0):
        set_rate(rate)
        chi, row = 0.0, []
        for agent, (inspired, m1, s1, m2, s2) in YASUDA.items():
            r1, r2 = yasuda(agent, inspired)
            chi += ((r1 - m1) / s1) ** 2 + ((r2 - m2) / s2) ** 2
            row.append(f"{agent} {r1:.3f}/{r2:.3f}")
        print(f"rate {rate:5.1f} /min  chi-square {chi:6.2f}  " + "  ".join(row))


def eger(agent: str) -> list[float]:
    """FI/FA at 10 min to 8 h: 1.25 MAC (age 25) held for 8 h at 2 L/min O2 (Eger 1997; 1998)."""
    s = case(agent, [{"duration": "480 min", "oxygen": "2 L/min", "end_tidal_target": "1.25 MAC"}], age=25).series
    return [at(s, "inspired_agent [%]", t) / at(s, "end_tidal_agent [%]", t) for t in (10, 60, 120, 240, 480)]


def coetzee(flow: float) -> list[float]:
    """Desflurane end-tidal / delivered at 30, 60, 90 min: 10 min at 4 L/min, then ``flow`` (1 MAC held)."""
    half = f"{flow / 2} L/min"
    phases = [
        {"duration": "10 min", "oxygen": "2 L/min", "air": "2 L/min", "end_tidal_target": "1 MAC"},
        {"duration": "80 min", "oxygen": half, "air": half, "end_tidal_target": "1 MAC"},
    ]
    s = case("desflurane", phases).series
    return [at(s, "end_tidal_agent [%]", t) / at(s, "delivered_agent [%]", t) for t in (30, 60, 90)]


def lowe(agent: str) -> list[float]:
    """Model / Lowe cumulative uptake 0-60, 0-120 and 60-120 min at 1.3 MAC, 6 L/min."""
    phases = [{"duration": "120 min", "oxygen": "3 L/min", "air": "3 L/min", "end_tidal_target": "1.3 MAC"}]
    s = case(agent, phases).series
    t, rate = s["time [min]"].to_numpy(), s["agent_uptake [mL/min]"].to_numpy()
    cum = np.concatenate([[0.0], np.cumsum(np.diff(t) * 0.5 * (rate[1:] + rate[:-1]))])

    def model(minutes: float) -> float:
        return float(cum[np.searchsorted(t, minutes, side="right") - 1])

    def law(minutes: float) -> float:
        return lowe_cumulative_uptake(agent, Q_(minutes, "min")).value.to("mL").magnitude

    return [model(60) / law(60), model(120) / law(120), (model(120) - model(60)) / (law(120) - law(60))]


def figures() -> None:
    for agent in ("desflurane", "sevoflurane"):
        print(f"Eger FI/FA {agent:12s} 10 min, 1, 2, 4, 8 h: " + " ".join(f"{v:.3f}" for v in eger(agent)))
    for flow in (0.5, 1.0, 3.0):
        print(f"Coetzee desflurane {flow} L/min ET/FD 30, 60, 90 min: " + " ".join(f"{v:.3f}" for v in coetzee(flow)))
    for agent in ("sevoflurane", "desflurane", "isoflurane"):
        print(f"Lowe {agent:12s} model/law 0-60, 0-120, 60-120 min: " + " ".join(f"{v:.2f}" for v in lowe(agent)))
    mutants = (("sevoflurane", {"blood_gas": 1.30}), ("desflurane", {"blood_gas": 0.546}), ("sevoflurane", "fat"))
    for name, change in mutants:
        old = properties.AGENTS[name]
        if change == "fat":
            tb = {k: v / 2 if k == "fat" else v for k, v in old.tissue_blood.items()}
            properties.AGENTS[name] = dataclasses.replace(old, tissue_blood=tb)
        else:
            properties.AGENTS[name] = dataclasses.replace(old, **change)
        print(
            f"mutant {name} {change}: Eger 8 h {eger(name)[-1]:.4f}; Coetzee 60 min "
            + " ".join(f"{coetzee(f)[1]:.3f}" for f in (0.5, 1.0, 3.0))
        )
        properties.AGENTS[name] = old


if __name__ == "__main__":
    if "--fit" in sys.argv:
        fit()
    elif "--yasuda" in sys.argv:
        yasuda_check()
    else:
        figures()
