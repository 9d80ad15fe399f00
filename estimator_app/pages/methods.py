"""Methods and sources: the equations, the references, the sourced values and the model's limits."""

from __future__ import annotations

from pathlib import Path

import pandas as pd
import streamlit as st

from estimator.properties import CONFIDENCE_CODES, source_table
from estimator.units import GAS_VOLUME_REFERENCE

from ..common import downloads
from ..contracts import _shipped

REFERENCES = (
    "Lowe HJ, Ernst EA. The Quantitative Practice of Anesthesia. Williams & Wilkins, 1981 (Brody scaling, "
    "square-root-of-time uptake).",
    "Mapleson WW. Effect of age on MAC in humans: a meta-analysis. Br J Anaesth 1996;76:179.",
    "Nickalls RWD, Mapleson WW. Age-related iso-MAC charts. Br J Anaesth 2003;91:170 (MAC fractions add).",
    "Yasuda N, Targ AG, Eger EI. Solubility of I-653, sevoflurane, isoflurane and halothane in human tissues. "
    "Anesth Analg 1989;69:370.",
    "Yasuda N et al. Kinetics of desflurane, isoflurane and halothane in humans. Anesthesiology 1991;74:489; "
    "Anesth Analg 1991;72:316.",
    "Eger EI. Anesthetic Uptake and Action. Williams & Wilkins, 1974 (tissue groups).",
    "Severinghaus JW. The rate of uptake of nitrous oxide in man. J Clin Invest 1954;33:1183.",
    "Dion P. The cost of anaesthetic vapours. Can J Anaesth 1992;39:633.",
    "Baum JA, Aitkenhead AR. Low-flow anaesthesia. Anaesthesia 1995;50(Suppl):37.",
    "Brattwall M et al. Theory and practice of minimal fresh gas flow anesthesia. Can J Anesth 2012;59:785.",
    "IPCC AR6 WG1 (2021), Chapter 7, Table 7.SM.7 (lifetimes, GWP); Sulbaek Andersen MP et al. Anesth Analg "
    "2012;114:1081.",
    "ISO 2533:1975 Standard atmosphere (ambient pressure from elevation).",
    "Klemenzson GK, Perouansky M. Can J Anaesth 2004;51:616 (ventilator drive gas).",
    "Bell IH et al. CoolProp. Ind Eng Chem Res 2014;53:2498 (real-gas cylinder contents, gas properties).",
)

EQUATIONS = (
    (
        "Brody power laws (patient scaling)",
        r"\dot V_{O_2} = 10\,W^{3/4}\ \mathrm{mL/min},\quad "
        r"\dot V_{CO_2} = 8\,W^{3/4},\quad \dot Q = 2\,W^{3/4}\ \mathrm{dL/min}",
    ),
    ("Mapleson age correction of MAC", r"\mathrm{MAC}(a) = \mathrm{MAC}_{40}\cdot 10^{-0.00269\,(a-40)}"),
    ("Vaporizer output", r"\dot V_{agent} = \dot V_{carrier}\,\frac{D}{1-D}"),
    ("Circle gas balance", r"\dot V_{exhaust} = \dot V_{FG} - \dot V_{uptake} - \dot V_{leak} - \dot V_{sample,lost}"),
    ("Tissue group (perfusion-limited)", r"V_t \lambda_{t/b} \frac{dP_t}{dt} = \dot Q_t\,(P_a - P_t)"),
    (
        "Lowe square-root-of-time (cross-check)",
        r"\dot V_{uptake}(t) = f\,\mathrm{MAC}\,\lambda_{b/g}\,\dot Q\,t^{-1/2}",
    ),
    ("Dion's vapour-cost formula", r"V_{liquid} = \frac{C\,\dot V_{FG}\,t\,M}{2412\,\rho}"),
)

LIMITS = (
    "A planning and audit aid, not a monitor: the patient in theatre differs from the model patient.",
    "Tissue/blood partition coefficients of the muscle and fat groups are partly recalled values (confidence M "
    "below); published solubilities spread 10-15 %.",
    "Perfusion-limited, well-mixed compartments; no shunt, no ventilation-perfusion mismatch, no second-gas "
    "effect beyond what the mass balance carries.",
    "Scenario ranges: weight 0.5-300 kg, flows 0-15 L/min per gas, phases up to 24 h in all; inputs outside "
    "are refused with the field and the valid range, never clamped.",
    "Where the fresh gas does not cover uptake, leak and unreturned sample gas, the bag would empty: the model "
    "flags it (VOLUME_DEFICIT) and counts the make-up gas.",
    f"Gas volumes are {GAS_VOLUME_REFERENCE}; flows are ambient litres at the site.",
    "Sevoflurane labelling on fresh-gas flow and MAC-hours differs between countries: follow local labelling.",
)


#: The validation report, generated from the test suite by ``uv run python docs/make_validation.py``.
VALIDATION_REPORT = _shipped("docs", "VALIDATION.md")


def validation_table(path: Path = VALIDATION_REPORT) -> tuple[pd.DataFrame, str] | None:
    """The rows of the generated validation report and its summary line, or None if it is absent.

    Reads the one Markdown table of ``docs/VALIDATION.md`` (written by docs/make_validation.py):
    quantity, value computed, published value, unit, source, tolerance, pass, test.
    """
    try:
        lines = path.read_text(encoding="utf-8").splitlines()
    except OSError:
        return None
    summary = next((line for line in lines if line.startswith("Generated ")), "")
    rows = [line for line in lines if line.startswith("| ")]
    if len(rows) < 2:
        return None

    def cells(line: str) -> list[str]:
        parts, cell, escaped = [], "", False
        for ch in line.strip()[1:-1]:
            if escaped:
                cell, escaped = cell + ch, False
            elif ch == "\\":
                escaped = True
            elif ch == "|":
                parts.append(cell.strip())
                cell = ""
            else:
                cell += ch
        parts.append(cell.strip())
        return [p.strip("`") for p in parts]

    header = cells(rows[0])
    body = [cells(r) for r in rows[1:] if not set(r.replace("|", "").strip()) <= {"-", " "}]
    return pd.DataFrame([b for b in body if len(b) == len(header)], columns=header), summary


def render() -> None:
    st.title("Methods and sources")
    st.caption("What the model computes, where each number comes from, and where the model stops.")
    st.subheader("Equations")
    for name, latex in EQUATIONS:
        st.markdown(f"**{name}**")
        st.latex(latex)
    st.subheader("Limits of the model")
    for item in LIMITS:
        st.markdown(f"- {item}")
    st.subheader("Sourced values")
    table = pd.DataFrame(source_table())
    st.caption("Confidence: " + "; ".join(f"**{k}** {v}" for k, v in CONFIDENCE_CODES.items()))
    agent_names = sorted(table["species"].unique())
    pick = st.multiselect("Species", agent_names, default=[], key="methods.species", placeholder="all species")
    shown = table[table["species"].isin(pick)] if pick else table
    st.dataframe(shown, hide_index=True, width="stretch")
    st.subheader("Validation")
    st.caption(
        "Each row is a check in the test suite of a model value against a published table or "
        "worked example, a standard, a reference library or a fact of the trade "
        "(docs/VALIDATION.md in the repository)."
    )
    report = validation_table()
    if report is None:
        st.info(
            "The validation report docs/VALIDATION.md is not in this installation; generate it with "
            "`uv run python docs/make_validation.py`."
        )
    else:
        table, summary = report
        st.markdown(summary.replace("`", ""))
        st.dataframe(
            table.drop(columns=["#"], errors="ignore"), hide_index=True, width="stretch", key="methods.validation"
        )
    st.subheader("References")
    for ref in REFERENCES:
        st.markdown(f"- {ref}")
    downloads(
        "sourced_values",
        {"values": table},
        {"values": table.to_dict("records")},
        "methods",
        title="Sourced values",
        notes=["Confidence: " + "; ".join(f"{k} {v}" for k, v in CONFIDENCE_CODES.items())],
    )
