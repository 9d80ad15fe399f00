"""Results of one case: totals as pint quantities, the series (a DataFrame on demand), warnings, JSON.

The result type and the thresholds it is judged by. :func:`estimator.simulation.assemble.build_result` turns
the raw states of :mod:`estimator.physics.circuit` into a :class:`CaseResult`; this module does not load the
compiled model, so a stored result can be read back without it. Gas
litres are free gas at 15 degC and 101.325 kPa (``GAS_VOLUME_REFERENCE``); flows in the series are
ambient litres per minute at the site, as a flowmeter shows them.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import TYPE_CHECKING, Any

import numpy as np
import pint

from ..accounts.accounting import litres_per_mmol  # noqa: F401 (re-exported)
from ..constants import WATER_VAPOUR_37C_KPA
from ..limits import INSPIRED_OXYGEN_FLOOR, INSPIRED_OXYGEN_SETTLE, TARGET_BAND  # noqa: F401 (TARGET_BAND re-exported)
from ..properties import CO2E_BASES
from ..units import GAS_VOLUME_REFERENCE

if TYPE_CHECKING:
    import pandas as pd

    from ..inputs.scenario import Scenario
    from ..physics.physiology import Patient

#: Water-vapour pressure of inspired gas warmed to 37 degC, for PiO2 [kPa] (estimator.constants).
P_H2O = WATER_VAPOUR_37C_KPA
#: Inspired O2 is judged from this case time on [min] (estimator.limits.INSPIRED_OXYGEN_SETTLE).
SETTLE = INSPIRED_OXYGEN_SETTLE


def judged_samples(times: np.ndarray) -> np.ndarray:
    """Which samples inspired O2 is judged at: from ``SETTLE`` on, or the last sample of a case
    shorter than that.

    Parameters
    ----------
    times : numpy.ndarray [min]
        Case times of the samples.

    Returns
    -------
    numpy.ndarray of bool

    Examples
    --------
    >>> judged_samples(np.array([0.0, 0.5, 1.0, 2.0])).tolist(), judged_samples(np.array([0.0, 0.5])).tolist()
    ([False, False, True, True], [False, True])
    """
    judged = np.asarray(times) >= SETTLE
    if not judged.any():
        judged[-1] = True
    return judged


#: Default inspired O2 advisory threshold at low flow (the registry's INSPIRED_OXYGEN_FLOOR).
FIO2_ADVISORY = INSPIRED_OXYGEN_FLOOR

SERIES_UNITS = {
    "time": "min",
    "phase": "",
    "inspired_oxygen": "%",
    "end_tidal_oxygen": "%",
    "inspired_carbon_dioxide": "%",
    "end_tidal_carbon_dioxide": "%",
    "inspired_nitrous_oxide": "%",
    "end_tidal_nitrous_oxide": "%",
    "inspired_nitrogen": "%",
    "end_tidal_nitrogen": "%",
    "inspired_argon": "%",
    "end_tidal_argon": "%",
    "inspired_agent": "%",
    "end_tidal_agent": "%",
    "inspired_oxygen_partial_pressure": "kPa",
    "end_tidal_target": "%",
    "end_tidal_mac": "MAC",
    "vaporizer_setting": "%",
    "delivered_agent": "%",
    "fresh_gas_flow": "L/min",
    "exhaust_flow": "L/min",
    "volume_deficit_flow": "L/min",
    "oxygen_uptake": "mL/min",
    "agent_uptake": "mL/min",
    "nitrous_oxide_uptake": "mL/min",
    "co2_to_absorbent": "mL/min",
    "agent_liquid_cumulative": "mL",
}


@dataclass
class CaseResult:
    """One simulated case.

    Attributes
    ----------
    scenario : Scenario
    patient : Patient
    totals : dict[str, pint.Quantity]
        See the README ("lowflow case") for the keys.
    columns : dict[str, numpy.ndarray]
        The series as plain arrays, one per column: what the summary, the warnings and the JSON read.
    series : pandas.DataFrame
        The same columns as a frame (a property, built at first use: pandas is imported only when a
        caller wants the frame, so ``lowflow case`` without ``--csv`` never loads it). One row per
        output time; column names carry units in brackets.
    warnings : list[tuple[str, str]]
        ``(code, message)`` pairs.
    minimum_inspired_oxygen : pint.Quantity
        Lowest inspired O2 fraction from ``SETTLE`` on (the first minute of a room-air circuit is
        left out, as the warnings leave it out) [dimensionless].
    phases : list[dict]
        Per phase: index, start, end and, for an end-tidal hold, when the target was reached.
    balance : dict[str, dict[str, float]]
        Per species mass balance terms [mmol] (see :meth:`mass_balance`).
    """

    scenario: Scenario
    patient: Patient
    totals: dict[str, pint.Quantity]
    columns: dict[str, np.ndarray]
    warnings: list[tuple[str, str]]
    minimum_inspired_oxygen: pint.Quantity
    phases: list[dict[str, Any]]
    balance: dict[str, dict[str, float]] = field(repr=False, default_factory=dict)
    solver: dict[str, int] = field(default_factory=dict)
    cost: dict[str, Any] | None = None
    flow_reference: str = "ambient litres at 101.325 kPa and 20 degC"
    _frame: Any = field(default=None, init=False, repr=False, compare=False)

    @property
    def series(self) -> pd.DataFrame:
        """The series as a DataFrame, built once from ``columns`` (the arrays) at first use."""
        if self._frame is None:
            import pandas as pd

            self._frame = pd.DataFrame(self.columns)
        return self._frame

    @series.setter
    def series(self, frame: pd.DataFrame) -> None:
        self._frame = frame
        self.columns = {str(k): frame[k].to_numpy() for k in frame.columns}

    def mass_balance(self) -> dict[str, float]:
        """Relative mass-balance error per species.

        delivered (fresh gas + make-up) = uptake + vented + leaked + sampled + absorbed + change in
        circuit and lung content, and uptake = change in body content + metabolised (+ O2 consumed),
        each divided by the delivered amount (or the largest term).
        """
        out = {}
        for name, t in self.balance.items():
            lhs = t["delivered"]
            rhs = t["uptake"] + t["vented"] + t["leaked"] + t["sampled"] + t["absorbed"] + t["stored_gas"]
            body = t["uptake"] - t["stored_body"] - t["metabolised"] - t["consumed"]
            scale = max(abs(v) for v in t.values()) or 1.0
            out[name] = max(abs(lhs - rhs), abs(body) if t["body_tracked"] else 0.0) / scale
        return out

    def to_json(self) -> dict[str, Any]:
        """The ``lowflow case --json`` contract (README, "lowflow case")."""
        from ..jsonout import jsonable
        from .dial_schedule import dial_schedule

        s = self.columns
        units = {k: v for k, v in SERIES_UNITS.items()}
        series = {"units": units}
        for key in SERIES_UNITS:
            col = f"{key} [{SERIES_UNITS[key]}]" if SERIES_UNITS[key] else key
            series[key] = s[col].tolist()
        return jsonable(
            {
                "title": self.scenario.title,
                "agent": self.scenario.agent.name,
                "totals": self.totals,
                "minimum_inspired_oxygen": self.minimum_inspired_oxygen,
                "cost": self.cost,
                "warnings": [{"code": code, "message": msg} for code, msg in self.warnings],
                "phases": self.phases,
                "dial_schedule": dial_schedule(self.columns, self.phases),
                "series": series,
                "gas_volume_reference": GAS_VOLUME_REFERENCE,
                "flow_reference": self.flow_reference,
                "co2e_basis": CO2E_BASES["ar6_gwp100"][1],
            }
        )
