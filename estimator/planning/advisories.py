"""Safety advisories for a planned case, each with a code, plain words and what to monitor.

Every advisory defers to local practice.

References
----------
.. [1] Sevoflurane US prescribing information: compound A; fresh gas below 1 L/min not recommended,
   at most 2 MAC-hours at 1 to < 2 L/min.
.. [2] Fang ZX, Eger EI, Laster MJ et al. Carbon monoxide production from degradation of desflurane,
   enflurane, isoflurane, halothane, and sevoflurane by soda lime and Baralyme. Anesth Analg
   1995;80:1187-93.
.. [3] Baum JA, Aitkenhead AR. Low-flow anaesthesia. Anaesthesia 1995;50(Suppl):37-44 (N2 build-up
   after short denitrogenation; inspired O2 at low flow).
"""

from __future__ import annotations

from typing import Any

import numpy as np

from ..limits import (
    ARGON_LIMIT,
    COMPOUND_A_FLOW,
    LABEL_MAC_HOURS,
    LABEL_MIDDLE_FLOW,
    LABEL_MINIMUM_FLOW,
    LOW_FLOW,
    NITROGEN_LIMIT,
)
from ..simulation.results import judged_samples

LOCAL = "Follow local practice and the agent's local labelling."


def advisories(scenario, st, plan, floors: list[dict[str, Any]]) -> list[tuple[str, str]]:
    """Advisories for a plan given its simulated result and its flow floors."""
    out: list[tuple[str, str]] = []
    s = plan.series
    fgf = s["fresh_gas_flow [L/min]"].to_numpy()
    t = s["time [min]"].to_numpy()
    judged = judged_samples(t)  # as the case's own warnings judge it (the first minute left out)
    fio2 = s["inspired_oxygen [%]"].to_numpy()[judged] / 100
    codes = {c for c, _ in plan.warnings}
    if fio2.min() < st.threshold:
        out.append(
            (
                "INSPIRED_OXYGEN_LOW",
                f"the plan lets inspired O2 fall to {100 * fio2.min():.1f} % (threshold {100 * st.threshold:.0f} %) "
                f"at {t[judged][np.argmin(fio2)]:.0f} min. Raise the O2 share or the flow; monitor inspired O2 "
                f"continuously with its low alarm set. {LOCAL}",
            )
        )
    if "VOLUME_DEFICIT" in codes:
        out.append(
            (
                "VOLUME_DEFICIT",
                "the planned fresh gas does not cover uptake, leak and unreturned sample gas: the bag or "
                f"bellows empties. Watch the reservoir bag, tidal volume and airway pressure. {LOCAL}",
            )
        )
    for f in floors:
        bad = f.get("failing_above") or []
        if bad and f.get("floor") is not None:
            first = bad[0]
            mix = ", ".join(f"{k.replace('_', ' ')} {v.to('L/min').magnitude:g}" for k, v in first.items())
            out.append(
                (
                    "SETTING_ABOVE_FLOOR_FAILS",
                    f"{f['label']}: the floor is {f['floor'].to('L/min').magnitude:g} L/min, but "
                    f"{len(bad)} settable mix(es) above it break a limit, the lowest {mix} L/min: a higher "
                    "total with less O2 in the mix can lower inspired O2. Keep at least the floor's O2 flow "
                    f"and O2 share. {LOCAL}",
                )
            )
    if codes & {"TARGET_NOT_REACHED"}:
        out.append(
            (
                "TARGET_NOT_REACHED",
                "the planned end-tidal target is not reached in the plan: raise the fresh-gas flow during "
                f"wash-in. Monitor end-tidal agent. {LOCAL}",
            )
        )
    if codes & {"TARGET_NOT_HELD", "DIAL_AT_MAXIMUM"}:
        out.append(
            (
                "DIAL_AT_MAXIMUM",
                "the vaporizer sits at its maximum in the plan, so it cannot correct a fall in end-tidal "
                f"agent. Monitor end-tidal agent; raise the flow rather than rely on the dial. {LOCAL}",
            )
        )
    for f in floors:
        if f["floor"] is None:
            out.append(
                (
                    "NO_SAFE_FLOOR",
                    f"phase {f['index']}: no setting on the flowmeter scale meets every limit "
                    f"({f['binding_text'] or f['binding']}). Review the plan. {LOCAL}",
                )
            )
    if "sevoflurane_us_label" in st.policies and scenario.agent.name == "sevoflurane":
        low = fgf < LABEL_MINIMUM_FLOW - 1e-9
        mid = (fgf >= LABEL_MINIMUM_FLOW - 1e-9) & (fgf < LABEL_MIDDLE_FLOW - 1e-9)
        mac_mid = np.trapezoid(np.where(mid, s["end_tidal_mac [MAC]"], 0.0), t) / 60
        if low.any() or mac_mid > LABEL_MAC_HOURS:
            out.append(
                (
                    "LABEL_RULE_BREACHED",
                    "the plan breaches the sevoflurane US label rule (fresh gas not below 1 L/min; at most "
                    f"2 MAC-hours at 1 to < 2 L/min; plan: {mac_mid:.1f} MAC-hours there). Other countries' "
                    f"labelling differs. {LOCAL}",
                )
            )
    if scenario.agent.name == "sevoflurane" and (fgf < COMPOUND_A_FLOW).any():
        out.append(
            (
                "COMPOUND_A",
                "sevoflurane at low flow: compound A forms in absorbents with strong bases and builds up "
                "more at lower flow. Absorbents without strong bases avoid it; labels differ between "
                f"countries on the lowest flow and MAC-hours. {LOCAL}",
            )
        )
    if scenario.agent.name in ("desflurane", "isoflurane"):
        out.append(
            (
                "CARBON_MONOXIDE_DRY_ABSORBENT",
                f"{scenario.agent.name} with desiccated absorbent produces carbon monoxide (most with "
                "desflurane; Fang 1995). Do not leave fresh gas flowing through an idle machine, change "
                f"absorbent that may have dried, and watch for unexplained carboxyhaemoglobin. {LOCAL}",
            )
        )
    n2 = s["inspired_nitrogen [%]"].to_numpy() / 100
    lowflow = fgf <= LOW_FLOW + 1e-9
    if (lowflow & (n2 > NITROGEN_LIMIT)).any() and not _carries_nitrogen(scenario):
        when = t[np.argmax(lowflow & (n2 > NITROGEN_LIMIT))]
        out.append(
            (
                "NITROGEN_ACCUMULATION",
                f"nitrogen from the patient builds up to {100 * n2[lowflow].max():.0f} % inspired at low flow "
                f"(from {when:.0f} min): the wash-in was too short to clear it. It dilutes O2 and N2O: monitor "
                f"inspired O2 and agent; a brief high-flow flush clears it. {LOCAL}",
            )
        )
    ar = s["inspired_argon [%]"].to_numpy() / 100
    if scenario.site.oxygen_source == "concentrator" and ar.max() > ARGON_LIMIT:
        out.append(
            (
                "ARGON_ACCUMULATION",
                f"argon from concentrator oxygen accumulates at low flow (up to {100 * ar.max():.0f} % inspired); "
                "gas monitors do not show it and it lowers inspired O2 by as much. Monitor inspired O2; flush "
                f"at higher flow from time to time. {LOCAL}",
            )
        )
    return out


def _carries_nitrogen(scenario) -> bool:
    return any(ph.flows()[1].magnitude > 0 for ph in scenario.phases)
