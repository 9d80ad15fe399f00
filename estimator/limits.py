"""The registry of warning codes and safety thresholds, each with its meaning and source.

Every code the package emits (case warnings, flow-floor binding limits and advisories, supply,
forecast and audit notes) is listed once in :data:`CODES`, and every threshold that decides a
warning, a flow floor or an audit flag is defined once below with its source. The engine, the
flow floor, the forecast and the audit import the thresholds from here; the test
``tests/test_codes.py`` checks that every code emitted anywhere in the package is registered here
and that a test produces each one.

Severities
----------
* ``binding``: a limit of the flow floor (``lowflow safe-flow``); the lowest flow fails it.
* ``advisory``: a flow-floor advisory on the plan (what to monitor, deference to local practice).
* ``warning``: a model or input warning in a result's ``warnings`` list (case, supply, forecast,
  audit, MAC and flowmeter calculators).

References
----------
.. [1] Baum JA, Aitkenhead AR. Low-flow anaesthesia. Anaesthesia 1995;50(Suppl):37-44 (inspired O2
   of at least 30 % at low flow; from memory).
.. [2] Sevoflurane US prescribing information: fresh gas below 1 L/min not recommended; exposure at
   1 to < 2 L/min not above 2 MAC-hours (compound A).
.. [3] ISO 80601-2-13 (anaesthetic workstations): anti-hypoxic O2/N2O proportioning, at least 25 %
   O2 (from memory).
.. [4] Stoelting RK, Longnecker DE, Eger EI II. Anesthesiology 1970;33:5; Katoh T et al.
   Anesthesiology 1993;79:1027 (MAC-awake about 0.3 MAC; from memory).
.. [5] Fang ZX, Eger EI II, Laster MJ et al. Anesth Analg 1995;80:1187-93 (carbon monoxide from
   desiccated absorbent).
.. [6] Mapleson WW. Br J Anaesth 1996;76:179 (age correction of MAC fitted from 1 year up).

Examples
--------
>>> CODES["INSPIRED_OXYGEN_LOW"].severity
'warning'
>>> INSPIRED_OXYGEN_FLOOR
0.3
"""

from __future__ import annotations

from dataclasses import dataclass

# --- thresholds ------------------------------------------------------------------------------------

#: Inspired O2 fraction kept at low flow: the engine's INSPIRED_OXYGEN_LOW warning, the default
#: threshold of the flow floor and the audit's flag (Baum and Aitkenhead 1995, from memory).
INSPIRED_OXYGEN_FLOOR = 0.30
#: Below room air a mixture is hypoxic (HYPOXIC_INSPIRED_MIXTURE); no flow-floor threshold may go
#: below it (definition: the O2 fraction of dry room air, 0.2095, rounded).
HYPOXIC_FRACTION = 0.21
#: Inspired O2 is judged from this case time on [min]: over the first minute a circuit of room air is
#: still filling with fresh gas at any flow (a modelling choice). The warnings, a case's lowest inspired
#: O2, the batch engine (estimator.numerics.rkc) and the flow floor all judge from it.
INSPIRED_OXYGEN_SETTLE = 1.0
#: End-tidal within this share of the hold target counts as reached (common practice, no source:
#: agent analysers read to about +-0.1 vol% or 5 % of reading, ISO 80601-2-55).
TARGET_BAND = 0.02
#: Default time allowed to reach an end-tidal target [min] (common practice, no source).
TARGET_REACH_WITHIN = 15.0
#: Default wash-out target at emergence [MAC]: about MAC-awake (Stoelting 1970; Katoh 1993, from memory).
WASH_OUT_TARGET = 0.3
#: Default time allowed for the wash-out [min] (common practice, no source).
WASH_OUT_WITHIN = 10.0
#: Lowest O2 share of O2 + N2O (anti-hypoxic proportioning, ISO 80601-2-13, from memory).
MINIMUM_OXYGEN_SHARE = 0.25
#: Sevoflurane US label: no fresh gas below this flow [L/min].
LABEL_MINIMUM_FLOW = 1.0
#: Sevoflurane US label: at 1 to below this flow [L/min] at most LABEL_MAC_HOURS.
LABEL_MIDDLE_FLOW = 2.0
#: Sevoflurane US label: MAC-hours allowed at 1 to < 2 L/min.
LABEL_MAC_HOURS = 2.0
#: Sevoflurane below this fresh-gas flow [L/min] gets the COMPOUND_A advisory (the label's 2 L/min).
COMPOUND_A_FLOW = 2.0
#: Low flow in the sense of Baum and Aitkenhead 1995 [L/min] (NITROGEN_ACCUMULATION is judged there).
LOW_FLOW = 1.0
#: Inspired N2 above this share at low flow counts as accumulation (common practice, no source).
NITROGEN_LIMIT = 0.10
#: Inspired argon above this share is flagged (common practice, no source: it lowers inspired O2 by as much).
ARGON_LIMIT = 0.05
#: Accuracy of a calibrated flowmeter tube, share of reading (common practice, no source).
FLOWMETER_ACCURACY = 0.025
#: Flowmeter readings [L/min] below this are flagged (a sticking float; common practice, no source).
LOW_READING = 0.1
#: Site elevation [m] above which a warning is given (common practice, no source: the highest
#: permanent settlements lie near 5100 m).
HABITATION_LIMIT = 6000.0
#: Room temperatures [degC] usual for anaesthetic equipment; outside them SITE_TEMPERATURE_UNUSUAL
#: (common practice, no source).
TEMPERATURE_USUAL = (10.0, 40.0)
#: An N2O gauge below this share of the vapour pressure gets NITROUS_OXIDE_GAUGE_LOW (common practice,
#: no source: a gauge reads to a few per cent, a colder cylinder a little lower).
NITROUS_OXIDE_GAUGE_SHARE = 0.9
#: A case-mix duration law that loses more than this share to its limits gets DURATION_TRUNCATED (our choice).
TRUNCATED_SHARE = 0.01
#: Weights [kg] over which the physiological power laws are taken as validated (adult and
#: older-child clinical use; Lowe and Ernst 1981 applied Brody's law to adults and children).
VALIDATED_WEIGHT = (10.0, 150.0)
#: Outside this range [kg] a weight is refused as not a human patient (a preterm neonate to the
#: heaviest adults; common practice, no source). One range for the scenario, the API and case mixes.
SANE_WEIGHT = (0.5, 300.0)
#: Ages [year] accepted anywhere a patient's age is read (common practice, no source).
SANE_AGE = (0.0, 120.0)
#: Youngest age [year] of Mapleson's age correction of MAC (Mapleson 1996).
MAPLESON_VALID_FROM = 1.0
#: Beyond this time [min] the square-root laws are flagged (our choice: 4 h).
SQUARE_ROOT_LAW_LIMIT = 240.0
#: Fewest cases with end-tidal data a department's uptake factor may rest on (common practice, no
#: source: a bootstrap interval over fewer than about 20 cases is itself unstable).
CALIBRATION_MINIMUM_CASES = 20
#: Uptake factors the published checks support: the Lowe's-law check of tests/test_engine_world.py
#: accepts the model's uptake within 45 % (twice the published CV of closed-circuit agent use,
#: 22.6 %, see README "Patient spread"), so a factor beyond 1/1.45 to 1.45 asks more of the model
#: than its validation shows (derived).
UPTAKE_FACTOR_SUPPORTED = (1.0 / 1.45, 1.45)
#: Below this many simulated weeks the forecast's P99 is flagged as rough (about 1 week in 100 lies above it).
FEW_WEEKS = 100


# --- codes -------------------------------------------------------------------------------------------


@dataclass(frozen=True)
class Code:
    """One warning, advisory or binding code.

    Attributes
    ----------
    name : str
        The code as it appears in ``warnings`` / ``binding`` (UPPER_SNAKE).
    severity : str
        ``binding``, ``advisory`` or ``warning``.
    meaning : str
        One line in plain words.
    source : str
        Where the rule comes from, or "common practice, no source", or "model" (a property of the
        model or the input, no clinical rule).
    safety : bool
        A clinical safety limit (tested one-sided: it goes away under the safe counterpart).
    """

    name: str
    severity: str
    meaning: str
    source: str
    safety: bool = False


_BA = "Baum and Aitkenhead 1995 (from memory)"
_LABEL = "sevoflurane US prescribing information"
_NONE = "common practice, no source"

_TABLE: tuple[tuple[str, str, str, str, bool], ...] = (
    # Flow floor: binding limits.
    ("INSPIRED_O2", "binding", "inspired O2 would fall below the threshold", _BA, True),
    (
        "GAS_BALANCE",
        "binding",
        "fresh gas would not cover uptake, leak and unreturned sample gas (the bag empties)",
        "model",
        True,
    ),
    ("TARGET_REACH", "binding", "the end-tidal target would not be reached in time", _NONE, False),
    ("TARGET_HOLD", "binding", "the end-tidal target could not be held with the dial at its maximum", "model", False),
    (
        "WASH_OUT",
        "binding",
        "with the dial at 0 the end-tidal MAC would not fall to the wash-out target in time",
        "Stoelting 1970; Katoh 1993",
        False,
    ),
    ("BASAL_O2", "binding", "the O2 flow would be below the machine's basal O2 flow", "machine setting", True),
    (
        "O2_PROPORTION",
        "binding",
        "the O2 share of O2/N2O would be below the anti-hypoxic minimum",
        "ISO 80601-2-13 (from memory)",
        True,
    ),
    ("FLOWMETER_RANGE", "binding", "a flow would exceed the flowmeter's range", "machine setting", False),
    (
        "LABEL_SEVOFLURANE_US",
        "binding",
        "the sevoflurane US label rule (>= 1 L/min; <= 2 MAC-hours at 1 to < 2 L/min)",
        _LABEL,
        True,
    ),
    ("FLOWMETER_MINIMUM", "binding", "the lowest setting of the flowmeter scale", "machine setting", False),
    ("NO_FRESH_GAS", "binding", "the phase has no fresh gas, so no floor can be set", "model", False),
    # Flow floor: advisories.
    ("NO_SAFE_FLOOR", "advisory", "no setting on the flowmeter scale meets every limit", "model", True),
    ("LABEL_RULE_BREACHED", "advisory", "the plan breaches the sevoflurane US label rule", _LABEL, True),
    ("COMPOUND_A", "advisory", "sevoflurane below 2 L/min: compound A in strong-base absorbents", _LABEL, True),
    ("CARBON_MONOXIDE_DRY_ABSORBENT", "advisory", "CO from desiccated absorbent", "Fang 1995", True),
    ("NITROGEN_ACCUMULATION", "advisory", "N2 from the patient builds up at low flow", _NONE, True),
    ("ARGON_ACCUMULATION", "advisory", "argon from concentrator O2 builds up at low flow", _NONE, True),
    # Case engine (also advisories of the flow floor and forecast counts).
    ("INSPIRED_OXYGEN_LOW", "warning", "inspired O2 below the threshold kept at low flow (default 30 %)", _BA, True),
    ("HYPOXIC_INSPIRED_MIXTURE", "warning", "inspired O2 below 21 %: a hypoxic mixture", "room air", True),
    ("VOLUME_DEFICIT", "warning", "fresh gas short of uptake, leak and sample loss: the bag empties", "model", True),
    ("TARGET_NOT_REACHED", "warning", "the end-tidal target is not reached in the phase", "model", False),
    ("TARGET_NOT_HELD", "warning", "the end-tidal target cannot be held with the dial at maximum", "model", False),
    ("DIAL_AT_MAXIMUM", "warning", "the dial sits at the vaporizer maximum for part of a hold", "model", False),
    ("FLOWMETER_ACCURACY", "warning", "flows from flowmeter readings carry a +-2.5 % band", _NONE, False),
    # Site, vaporizer, MAC, flowmeter, closed forms, patient.
    ("SITE_ABOVE_HABITATION", "warning", "site elevation above 6000 m", _NONE, False),
    ("SITE_TEMPERATURE_UNUSUAL", "warning", "room temperature outside 10-40 degC", _NONE, False),
    (
        "PIO2_BELOW_SEA_LEVEL_THRESHOLD",
        "warning",
        "the fraction gives a lower PiO2 at the site than at sea level",
        "West",
        True,
    ),
    ("PIO2_THRESHOLD_UNREACHABLE", "warning", "no O2 fraction reaches the sea-level PiO2 at the site", "West", True),
    (
        "SETTING_ABOVE_FLOOR_FAILS",
        "warning",
        "a settable mix above the floor breaks a limit (less O2 in the mix)",
        "model",
        True,
    ),
    ("DIAL_UNREACHABLE", "warning", "the vaporizer cannot deliver the fraction asked for", "model", False),
    ("DIAL_ABOVE_VAPORIZER_MAX", "warning", "the dial needed is above the vaporizer maximum", "model", False),
    ("AGE_BELOW_MAPLESON_RANGE", "warning", "age below 1 year, outside Mapleson's fit", "Mapleson 1996", False),
    ("NITROUS_OXIDE_EXCEEDS_TOTAL", "warning", "the N2O alone exceeds the total MAC asked for", "model", False),
    ("END_TIDAL_ABOVE_VAPORIZER_MAX", "warning", "the end-tidal needed is above the vaporizer maximum", "model", False),
    ("MIXTURE_ABOVE_100_PERCENT", "warning", "agent plus N2O exceed 100 %", "model", False),
    ("OXYGEN_BELOW_AIR", "warning", "the O2 left beside agent and N2O is below room air", "room air", True),
    ("FLOWMETER_LOW_READING", "warning", "a reading below 0.1 L/min (sticking float)", _NONE, False),
    ("FLOWMETER_OTHER_GAS", "warning", "a tube read with a gas other than its calibration gas", "model", False),
    ("SQUARE_ROOT_LAW_LONG", "warning", "the square-root law beyond 4 h", "our choice", False),
    ("SEVERINGHAUS_WEIGHT_SCALED", "warning", "Severinghaus' N2O uptake scaled from 70 kg", "Severinghaus 1954", False),
    (
        "SEVERINGHAUS_FRACTION_SCALED",
        "warning",
        "Severinghaus' N2O uptake scaled from 65-75 %",
        "Severinghaus 1954",
        False,
    ),
    (
        "PATIENT_WEIGHT_OUTSIDE_VALIDATED",
        "warning",
        "weight outside 10-150 kg, where the power laws hold",
        "Lowe 1981",
        False,
    ),
    # Carbon.
    ("ABSORBENT_SUPPLY_NOT_COUNTED", "warning", "no sourced supply-carbon factor for absorbent", "model", False),
    # Cylinders and supply.
    ("NO_RESERVE", "warning", "no change-out reserve pressure set for a cylinder", _NONE, False),
    ("BELOW_RESERVE", "warning", "a cylinder is at or below its reserve", "model", False),
    ("NITROUS_OXIDE_OVERFILLED", "warning", "N2O above the usual filling ratio", "filling ratio (from memory)", False),
    ("NITROUS_OXIDE_SUPERCRITICAL", "warning", "N2O cylinder above its critical temperature", "CoolProp", False),
    ("NITROUS_OXIDE_NO_LIQUID", "warning", "the weight implies no liquid N2O is left", "CoolProp", False),
    ("NITROUS_OXIDE_GAUGE_LOW", "warning", "N2O gauge below the vapour pressure", "CoolProp", False),
    ("CONCENTRATOR_PURITY_LOW", "warning", "concentrator product below Oxygen 93 per cent", "Ph. Eur.", True),
    ("NOT_TRACKED", "warning", "an item left out of the supply analysis", "model", False),
    ("ABSORBENT_NOT_TRACKED", "warning", "the cases load absorbent but the inventory lists none", "model", False),
    ("NO_STOCK", "warning", "the plan uses an item the inventory lists none of", "model", False),
    ("SUPPLY_UNDER_ONE_DAY", "warning", "a supply fails within one day", "model", True),
    ("STOCK_BACKED_UP", "warning", "a stock runs out and the next source takes over", "model", False),
    ("NO_BOTTLENECK", "warning", "no supply runs out under this plan", "model", False),
    ("REORDER_OVERDUE", "warning", "the bottleneck runs out before lead time plus safety stock", "model", True),
    # Forecast.
    ("DURATION_TRUNCATED", "warning", "a case-mix duration law is truncated by more than 1 %", "model", False),
    ("FEW_WEEKS", "warning", "too few simulated weeks for a stable P99", "model", False),
    ("CASES_CUT_SHORT", "warning", "cases ended part-way through the template's fixed phases", "model", False),
    ("UNPRICED_ITEMS", "warning", "items used but not priced", "model", False),
    ("ORDER_SIZE_EMPTY", "warning", "an order unit holds nothing usable", "model", False),
    # Calibration of the uptake factor on a department's log.
    (
        "UPTAKE_FACTOR_UNSUPPORTED",
        "warning",
        "the department's uptake factor lies outside the range the published checks support",
        "derived (Lowe's-law check)",
        False,
    ),
    (
        "CALIBRATION_AGENT_ABSENT",
        "warning",
        "the calibration file has no factor for this agent (1 used)",
        "model",
        False,
    ),
    (
        "FLOOR_FACTOR_RAISED",
        "warning",
        "the flow floor used uptake factor 1, not the department's lower factor (the safe side)",
        "model",
        True,
    ),
    # Audit log, audit and policy.
    ("UNUSED_COLUMNS", "warning", "log columns not used by the audit", "model", False),
    ("TIME_NOT_ORDERED", "warning", "log samples out of time order (sorted)", "model", False),
    ("DUPLICATE_TIME", "warning", "log samples repeat a time (the later holds)", "model", False),
    ("LONG_SAMPLE_GAP", "warning", "gaps between samples longer than the limit", "model", False),
    ("NO_ROWS_USED", "warning", "no row of the log could be used", "model", False),
    ("SINGLE_SAMPLE_CASE", "warning", "cases with one sample and no duration", "model", False),
    ("MAC_HOURS_UNAVAILABLE", "warning", "no end-tidal or age column: no MAC-hours", "model", False),
    ("MAC_HOURS_INCOMPLETE", "warning", "cases lack end-tidal or age in some samples", "model", False),
    ("PATIENT_DEFAULTS", "warning", "a policy default stood in for a missing patient value", "model", False),
    ("POLICY_CASE_WARNINGS", "warning", "the engine warned for some policy cases", "model", False),
    ("CASES_SKIPPED", "warning", "cases not re-run under the policy", "model", False),
    (
        "TIME_NOT_ELAPSED",
        "warning",
        "numeric log times beyond +-1,000,000 min (Unix seconds?): those rows rejected",
        "model",
        False,
    ),
    (
        "PATIENT_VALUE_VARIES",
        "warning",
        "a case's rows give more than one patient weight or age (the first is used)",
        "model",
        False,
    ),
)

#: Every code the package emits, by name.
CODES: dict[str, Code] = {row[0]: Code(*row) for row in _TABLE}
#: Former names of codes merged so that one event has one code (former -> current), for readers of
#: older JSON output; the package emits only the current names.
RENAMED = {
    "HYPOXIC_MIXTURE_RISK": "INSPIRED_OXYGEN_LOW",
    "LOW_INSPIRED_OXYGEN": "INSPIRED_OXYGEN_LOW",
    "TARGET_UNREACHABLE": "TARGET_NOT_REACHED",
    "nitrous_oxide_supercritical": "NITROUS_OXIDE_SUPERCRITICAL",
}


def code(name: str) -> str:
    """The registered code ``name`` (KeyError for an unregistered one).

    >>> code("COMPOUND_A")
    'COMPOUND_A'
    """
    return CODES[name].name


def codes_of(severity: str) -> tuple[str, ...]:
    """Codes of one severity, in registry order.

    >>> codes_of("binding")[:2]
    ('INSPIRED_O2', 'GAS_BALANCE')
    """
    return tuple(c.name for c in CODES.values() if c.severity == severity)
