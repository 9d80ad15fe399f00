"""A printable case plan that leads with what the anaesthetist sets: one plan, two renderings.

Order: the phases with their flows and the vaporizer dial (start, typical, end), the flow floor of
each phase and what limits it, the totals (with P5-P95 when a patient spread was run), the warnings
and the monitoring advice, then the dial every 10 minutes, then the charts (agent, O2, fresh-gas flow,
liquid used). :func:`case_plan` gathers all of it once as a :class:`CasePlan`; :func:`case_plan_html`
renders it as one self-contained HTML page (every text escaped, charts as inline SVG, the clinical
caution: :func:`estimator.planning.html_report.tables_report_html`) and
:func:`estimator.planning.case_plan_pdf.case_plan_pdf` as an A4 PDF (the optional ``pdf`` extra).
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass, field
from typing import Any

import pandas as pd

from ..display import sentence
from ..simulation.dial_schedule import dial_schedule, dial_table
from ..simulation.totals_table import totals_rows
from .html_report import tables_report_html
from .svg_charts import svg_lines

#: What the page says about monitoring, whatever the plan (the caution of the tool, made concrete).
MONITORING = (
    "Monitor inspired O2 continuously with its low alarm set at or above the plan's threshold, and "
    "end-tidal agent with its alarms; watch the reservoir bag, tidal volume and airway pressure at low "
    "flow. Follow local practice and the agent's local labelling."
)

#: Heading of the dial table, shown after the warnings and the monitoring advice.
DIAL_HEADING = "Dial every 10 min"


def _flows(phase: Any) -> tuple[float, float, float]:
    o2, air, n2o = (float(q.to("L/min").magnitude) for q in phase.flows())
    return o2, air, n2o


def plan_tables(result: Any, floor: Any | None = None, band: Any | None = None) -> dict[str, pd.DataFrame]:
    """The plan's tables in the order the page shows them (see the module doc)."""
    sc = result.scenario
    dials = {d["index"]: d for d in dial_schedule(result.series, result.phases)}
    phases = []
    for rep, ph in zip(result.phases, sc.phases, strict=False):
        o2, air, n2o = _flows(ph)
        d = dials.get(rep["index"])
        if d is not None:
            dial = f"hold {ph.end_tidal_target:~P}: {d['dial_start']:.2f} % -> typical {d['dial_median']:.2f} % -> {d['dial_end']:.2f} %"
        else:
            dial = f"fixed {ph.vaporizer.to('percent').magnitude:g} %" if ph.vaporizer is not None else "-"
        phases.append(
            {
                "phase": ph.label or f"phase {rep['index']}",
                "from [min]": round(float(rep["start"].to("min").magnitude), 1),
                "to [min]": round(float(rep["end"].to("min").magnitude), 1),
                "O2 [L/min]": round(o2, 3),
                "air [L/min]": round(air, 3),
                "N2O [L/min]": round(n2o, 3),
                "vaporizer dial": dial,
            }
        )
    tables = {"Phases, flows and the vaporizer dial": pd.DataFrame(phases)}
    if floor is not None:
        tables["Flow floor of each phase"] = pd.DataFrame(
            [
                {
                    "phase": p["label"],
                    "floor [L/min]": None if p["floor"] is None else round(float(p["floor"].to("L/min").magnitude), 2),
                    "limited by": p["binding"] or "-",
                    "why": p["binding_text"],
                }
                for p in floor.phases
            ]
        )
    rows = []
    keyed = {"agent_liquid", "oxygen", "nitrous_oxide", "co2e"}
    for r in totals_rows(result):
        row = {"quantity": sentence(r.label), "value": r.value, "unit": r.unit}
        if band is not None:
            row["P5-P95 over patients"] = band.band_text(r.key) if r.key in keyed else ""
        rows.append(row)
    tables["Totals"] = pd.DataFrame(rows)
    tables[DIAL_HEADING] = dial_table(list(dials.values()))
    return tables


#: The plan's charts: title, y-axis title and series (column of ``CaseResult.series`` -> legend name).
CHARTS = (
    (
        "Agent: end-tidal, inspired and the vaporizer dial",
        "agent [%]",
        {"end_tidal_agent [%]": "end-tidal", "inspired_agent [%]": "inspired", "vaporizer_setting [%]": "dial"},
    ),
    (
        "Oxygen: inspired and end-tidal",
        "O2 [%]",
        {"inspired_oxygen [%]": "inspired", "end_tidal_oxygen [%]": "end-tidal"},
    ),
    ("Fresh-gas flow", "flow [L/min]", {"fresh_gas_flow [L/min]": "fresh gas"}),
    ("Liquid agent used", "liquid [mL]", {"agent_liquid_cumulative [mL]": "liquid agent"}),
)


@dataclass(frozen=True)
class PlanChart:
    """One time-course chart of the plan: its title, axis titles and series (legend name -> values)."""

    title: str
    y_title: str
    x: Sequence[float]
    series: dict[str, Sequence[float]]
    x_title: str = "time [min]"

    def svg(self) -> str:
        """The chart as inline SVG text (:func:`estimator.planning.svg_charts.svg_lines`)."""
        return svg_lines(self.x, self.series, self.x_title, self.y_title, self.title)


def plan_charts(result: Any) -> list[PlanChart]:
    """The plan's charts (:data:`CHARTS`): agent, O2, fresh-gas flow, liquid used; series with no value left out."""
    s = result.series
    out = []
    for title, y_title, columns in CHARTS:
        shown = {name: s[col].tolist() for col, name in columns.items() if col in s and s[col].notna().any()}
        if shown:
            out.append(PlanChart(title, y_title, s["time [min]"].tolist(), shown))
    return out


@dataclass(frozen=True)
class CasePlan:
    """Everything a printable plan shows, in its order; both renderings read this one structure.

    Attributes
    ----------
    title : str
        Heading of the plan.
    notes : list of str
        Lines under the heading: the case (agent, duration, patient), the recommended settable schedule
        and how gas litres are counted.
    tables : dict of str to pandas.DataFrame
        Before the warnings: phases with flows and dial, flow floor (when computed), totals.
    warnings : list of (code, message)
        Model and flow-floor warnings, each once.
    monitoring : str
        The monitoring advice, after the warnings.
    after : dict of str to pandas.DataFrame
        After the monitoring advice: the dial every 10 minutes.
    charts : list of PlanChart
        Last: the time courses.
    """

    title: str
    notes: list[str]
    tables: dict[str, pd.DataFrame]
    warnings: list[tuple[str, str]]
    monitoring: str
    after: dict[str, pd.DataFrame] = field(default_factory=dict)
    charts: list[PlanChart] = field(default_factory=list)


def case_plan(result: Any, floor: Any | None = None, band: Any | None = None) -> CasePlan:
    """The plan of a simulated case (and of its flow floor and patient spread, when given), computed once.

    Parameters
    ----------
    result : estimator.simulation.results.CaseResult
        The simulated case.
    floor : estimator.planning.safety.FloorResult, optional
        Its flow floor (``flow_floor(scenario, grid=False)``): the floor table and the recommended schedule.
    band : estimator.simulation.spread.SpreadResult, optional
        Its patient spread (``simulate_spread``): the P5-P95 column of the totals.

    Returns
    -------
    CasePlan

    Examples
    --------
    >>> import estimator
    >>> sc = estimator.scenario_from_dict({"patient": {"weight": "70 kg"}, "agent": {"name": "sevoflurane"},
    ...     "phases": [{"duration": "20 min", "oxygen": "1 L/min", "air": "1 L/min", "end_tidal_target": "1 MAC"}]})
    >>> plan = case_plan(estimator.simulate(sc))
    >>> list(plan.tables), list(plan.after), len(plan.charts)
    (['Phases, flows and the vaporizer dial', 'Totals'], ['Dial every 10 min'], 4)
    """
    sc = result.scenario
    warnings = [tuple(w) for w in result.warnings] + (
        [] if floor is None else [tuple(w) for w in floor.warnings if w not in result.warnings]
    )
    notes = [
        f"{sc.title or 'Case plan'}: {sc.agent.name}, {result.totals['duration'].to('min').magnitude:.0f} min, "
        f"patient {sc.patient.weight.to('kg').magnitude:g} kg, {sc.patient.age.to('year').magnitude:.3g} years."
    ]
    if floor is not None:
        notes.append(f"Recommended settable schedule: {floor.schedule_text}.")
    notes.append("Gas litres: free gas at 15 degC and 101.325 kPa; flows as a flowmeter at the site shows them.")
    tables = plan_tables(result, floor, band)
    dial = tables.pop(DIAL_HEADING)
    return CasePlan(
        title=f"Case plan: {sc.title or sc.agent.name}",
        notes=notes,
        tables=tables,
        warnings=list(dict.fromkeys((str(c), str(m)) for c, m in warnings)),
        monitoring=MONITORING,
        after={DIAL_HEADING: dial},
        charts=plan_charts(result),
    )


def case_plan_html(result: Any, floor: Any | None = None, band: Any | None = None) -> str:
    """The printable plan of a simulated case as one self-contained HTML page (see :func:`case_plan`).

    Examples
    --------
    >>> import estimator
    >>> sc = estimator.scenario_from_dict({"patient": {"weight": "70 kg"}, "agent": {"name": "sevoflurane"},
    ...     "phases": [{"duration": "20 min", "oxygen": "1 L/min", "air": "1 L/min", "end_tidal_target": "1 MAC"}]})
    >>> page = case_plan_html(estimator.simulate(sc))
    >>> page.index("Phases, flows") < page.index("Totals") < page.index("Warnings") < page.index("Dial every 10 min")
    True
    """
    return plan_html(case_plan(result, floor, band))


def plan_html(plan: CasePlan) -> str:
    """A :class:`CasePlan` as one self-contained HTML page (escaped text, inline SVG charts, the caution)."""
    return tables_report_html(
        plan.title,
        plan.tables,
        notes=plan.notes,
        warnings=plan.warnings,
        advice=[plan.monitoring],
        after=plan.after,
        charts=[c.svg() for c in plan.charts],
    )
