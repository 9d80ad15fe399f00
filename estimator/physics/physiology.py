"""Patient scaling: Brody power laws, the alveolar ventilation equation, lung and tissue volumes.

Volumes scale with body mass, flows with mass^0.75 (Brody 1945, as used for anaesthesia by Lowe and
Ernst 1981), so time constants scale with mass^0.25. Every value can be overridden.

References
----------
.. [1] Brody S. Bioenergetics and Growth. Reinhold, New York 1945.
.. [2] Lowe HJ, Ernst EA. The Quantitative Practice of Anesthesia: Use of Closed Circuit.
   Williams & Wilkins, Baltimore 1981 (VO2 = 10 kg^0.75, VCO2 = 8 kg^0.75 mL/min, Q = 2 kg^0.75 dL/min).
.. [3] Eger EI II. Anesthetic Uptake and Action. Williams & Wilkins 1974 (tissue groups of a 70 kg adult).
.. [4] West JB. Respiratory Physiology: The Essentials (alveolar ventilation equation, VA = 0.863 VCO2 / PaCO2).
.. [5] Levitt DG. Heterogeneity of human adipose blood flow. BMC Clin Pharmacol 2007;7:1.
.. [6] Eger EI II, Saidman LJ. Illustrations of inhaled anesthetic uptake, including intertissue
   diffusion to and from fat. Anesth Analg 2005;100:1020-33.
"""

from __future__ import annotations

from dataclasses import dataclass, field, replace
from typing import Any

import pint

from ..errors import InputError
from ..limits import SANE_AGE, SANE_WEIGHT, VALIDATED_WEIGHT
from ..properties import TISSUES, physiology_value
from ..units import Q_, check_range, parse_quantity

#: Brody's coefficients at mass^0.75 (Lowe and Ernst 1981): mL/min STPD, mL/min STPD, dL/min.
BRODY_OXYGEN = 10.0
BRODY_CARBON_DIOXIDE = 8.0
BRODY_CARDIAC_OUTPUT = 2.0
#: Alveolar ventilation equation constant (L/min BTPS x mmHg per mL/min STPD), West.
ALVEOLAR_CONSTANT = 0.863


#: Tissue groups of the 70 kg reference adult: volume [L] and share of cardiac output
#: (Eger EI II, Anesthetic Uptake and Action, 1974; from memory). Vessel-poor group: no perfusion.
REFERENCE_MASS = 70.0
TISSUE_VOLUME_70KG = {"vrg": 6.0, "muscle": 33.0, "fat": 14.5, "vpg": 12.5}
TISSUE_FLOW_SHARE = {"vrg": 0.75, "muscle": 0.19, "fat": 0.06, "vpg": 0.0}
#: Model compartments in state order (estimator.physics.circuit), the tissue group whose partition coefficient
#: each uses, and the lean tissue that feeds each fat-next-to-lean compartment by diffusion.
COMPARTMENTS = ("vrg", "muscle", "fat_fast", "fat_slow", "vpg", "fat_vrg", "fat_muscle")
COMPARTMENT_TISSUE = {
    "vrg": "vrg",
    "muscle": "muscle",
    "fat_fast": "fat",
    "fat_slow": "fat",
    "vpg": "vpg",
    "fat_vrg": "fat",
    "fat_muscle": "fat",
}
DIFFUSION_DONOR = {"fat_vrg": "vrg", "fat_muscle": "muscle"}
#: Blood volume 70 mL/kg split 30 % arterial / 70 % venous (common practice, no source).
BLOOD_VOLUME_PER_KG = 0.070
ARTERIAL_SHARE = 0.30
#: FRC supine under general anaesthesia, about 30-35 mL/kg (from memory, no source read).
FRC_PER_KG = 0.030
#: Anatomical dead space about 2.2 mL/kg (Radford 1955, from memory) and alveolar dead space as a
#: share of the alveolar part of each breath under anaesthesia, about 10 % (from memory).
ANATOMICAL_DEAD_SPACE_PER_KG = 0.0022
ALVEOLAR_DEAD_SPACE_SHARE = 0.10
#: Hepatic blood flow share of cardiac output, about 25 % (from memory), part of the vessel-rich group.
HEPATIC_FLOW_SHARE = 0.25


@dataclass(frozen=True)
class Patient:
    """Physiological parameters of one patient, all pint quantities.

    Attributes
    ----------
    weight : [kg]
    age : [year]
    oxygen_consumption, carbon_dioxide_production : [mL/min] STPD
    cardiac_output : [L/min]
    alveolar_ventilation : [L/min] BTPS, perfused alveoli only
    minute_ventilation : [L/min] BTPS, what the ventilator delivers from the circuit
    frc : [L] BTPS
    tissue_volume, tissue_flow : dict of [L], [L/min] (blood flow), per compartment (:data:`COMPARTMENTS`)
    tissue_diffusion : dict of [L/min]
        Intertissue diffusion clearance into each fat-next-to-lean compartment [L of lean tissue/min].
    arterial_volume, venous_volume : [L] of blood
    alveolar_dead_space_share : float [-], share of end-tidal gas from unperfused alveoli (inspired gas)
    respiratory_rate : [1/min]
    warnings : list of (code, message)
    """

    weight: pint.Quantity
    age: pint.Quantity
    oxygen_consumption: pint.Quantity
    carbon_dioxide_production: pint.Quantity
    cardiac_output: pint.Quantity
    alveolar_ventilation: pint.Quantity
    minute_ventilation: pint.Quantity
    frc: pint.Quantity
    tissue_volume: dict[str, pint.Quantity]
    tissue_flow: dict[str, pint.Quantity]
    arterial_volume: pint.Quantity
    venous_volume: pint.Quantity
    alveolar_dead_space_share: float
    respiratory_rate: pint.Quantity
    hepatic_flow: pint.Quantity
    warnings: tuple[tuple[str, str], ...] = field(default=())
    tissue_diffusion: dict[str, pint.Quantity] = field(default_factory=dict)

    def with_overrides(self, **kw: Any) -> Patient:
        """A copy with fields replaced (quantities in any compatible unit)."""
        return replace(self, **kw)


def brody_oxygen_consumption(weight_kg: float) -> float:
    """O2 consumption under anaesthesia [mL/min STPD] = 10 kg^0.75 (Brody; Lowe and Ernst 1981).

    Parameters
    ----------
    weight_kg : float [kg]

    Returns
    -------
    float [mL/min] STPD

    References
    ----------
    Lowe HJ, Ernst EA 1981 (from memory), after Brody S. Bioenergetics and Growth, 1945.

    Examples
    --------
    >>> round(brody_oxygen_consumption(70), 1)
    242.0
    """
    return BRODY_OXYGEN * weight_kg**0.75


def brody_carbon_dioxide_production(weight_kg: float) -> float:
    """CO2 production [mL/min STPD] = 8 kg^0.75 (Lowe and Ernst 1981), respiratory quotient 0.8.

    Parameters
    ----------
    weight_kg : float [kg]

    Returns
    -------
    float [mL/min] STPD

    References
    ----------
    Lowe HJ, Ernst EA 1981 (from memory), after Brody S. Bioenergetics and Growth, 1945.

    Examples
    --------
    >>> round(brody_carbon_dioxide_production(70), 1)
    193.6
    """
    return BRODY_CARBON_DIOXIDE * weight_kg**0.75


def brody_cardiac_output(weight_kg: float) -> float:
    """Cardiac output [L/min] = 2 kg^0.75 dL/min (Lowe and Ernst 1981).

    Parameters
    ----------
    weight_kg : float [kg]

    Returns
    -------
    float [L/min]

    References
    ----------
    Lowe HJ, Ernst EA 1981 (from memory), after Brody S. Bioenergetics and Growth, 1945.

    Examples
    --------
    >>> round(brody_cardiac_output(70), 2)
    4.84
    """
    return BRODY_CARDIAC_OUTPUT * weight_kg**0.75 / 10.0


def alveolar_ventilation(vco2_ml_min: float, paco2_mmhg: float = 40.0) -> float:
    """Alveolar ventilation [L/min BTPS] from the alveolar ventilation equation.

    VA = 0.863 VCO2 / PaCO2; the constant converts STPD to BTPS and holds at any barometric pressure.

    Parameters
    ----------
    vco2_ml_min : float [mL/min] STPD
    paco2_mmhg : float [mmHg]

    Returns
    -------
    float [L/min] BTPS

    References
    ----------
    West JB. Respiratory Physiology: The Essentials (from memory).

    Examples
    --------
    >>> round(alveolar_ventilation(193.6, 40), 2)
    4.18
    """
    if paco2_mmhg <= 0:
        raise InputError("patient.target_paco2", paco2_mmhg, "above 0 mmHg (usually 35 to 45 mmHg)")
    return ALVEOLAR_CONSTANT * vco2_ml_min / paco2_mmhg


def fat_split(fat_volume: float, fat_flow: float, weight_kg: float) -> dict[str, tuple[float, float, float]]:
    """Split Eger's fat group into the compartments of the late-uptake structure.

    Fat next to the vessel-rich organs and muscle (reference-man volumes) is unperfused, fed by diffusion
    from that lean tissue (clearance scaled with mass^0.75); the rest is perfused in two compartments with
    Levitt's flows per kg (1 L fat as 1 kg), split to carry Eger's fat-group flow at 70 kg.

    Parameters
    ----------
    fat_volume : float [L] of the fat group
    fat_flow : float [L/min] of the fat group
    weight_kg : float [kg], body mass (scales the diffusion clearances)

    Returns
    -------
    dict
        compartment -> (volume [L], blood flow [L/min], diffusion clearance [L/min]).

    References
    ----------
    Levitt DG. BMC Clin Pharmacol 2007;7:1; Eger EI II, Saidman LJ. Anesth Analg 2005;100:1020-33; ICRP
    Publication 23, 1975 (fat by site; from memory). The diffusion rate is fitted, no published value.

    Examples
    --------
    >>> s = fat_split(14.5, 0.29, 70.0)
    >>> round(sum(v for v, _, _ in s.values()), 6), round(sum(q for _, q, _ in s.values()), 6)
    (14.5, 0.29)
    """
    high = physiology_value("adipose_flow_high").to("L/min/kg").magnitude
    low = physiology_value("adipose_flow_low").to("L/min/kg").magnitude
    ref_v = TISSUE_VOLUME_70KG["fat"]
    ref_q = TISSUE_FLOW_SHARE["fat"] * brody_cardiac_output(REFERENCE_MASS)
    next_vrg = physiology_value("fat_next_to_vrg").to("L").magnitude / ref_v
    next_muscle = physiology_value("fat_next_to_muscle").to("L").magnitude / ref_v
    perfused = 1.0 - next_vrg - next_muscle
    fast = (ref_q / (ref_v * perfused) - low) / (high - low)  # share of perfused fat at the high flow
    flow_fast = fast * high / (fast * high + (1.0 - fast) * low)  # its share of the fat flow
    rate = physiology_value("intertissue_rate").to("1/min").magnitude
    diff = rate * (REFERENCE_MASS / weight_kg) ** 0.25
    return {
        "fat_fast": (fat_volume * perfused * fast, fat_flow * flow_fast, 0.0),
        "fat_slow": (fat_volume * perfused * (1.0 - fast), fat_flow * (1.0 - flow_fast), 0.0),
        "fat_vrg": (fat_volume * next_vrg, 0.0, diff * fat_volume * next_vrg),
        "fat_muscle": (fat_volume * next_muscle, 0.0, diff * fat_volume * next_muscle),
    }


def patient_parameters(
    weight: Any,
    age: Any = "40 year",
    *,
    oxygen_consumption: Any = None,
    carbon_dioxide_production: Any = None,
    cardiac_output: Any = None,
    alveolar_ventilation_: Any = None,
    minute_ventilation: Any = None,
    frc: Any = None,
    target_paco2: Any = "40 mmHg",
    respiratory_rate: Any = "12 /min",
    tissue_volume: dict[str, Any] | None = None,
    tissue_flow_share: dict[str, float] | None = None,
    alveolar_dead_space_share: float = ALVEOLAR_DEAD_SPACE_SHARE,
) -> Patient:
    """Build a :class:`Patient` from weight (and age) by Brody scaling, with optional overrides.

    Parameters
    ----------
    weight : str, float or Quantity [kg]
        Body mass; a bare number is kg. 0.5 to 300 kg accepted; outside 10 to 150 kg a warning.
    age : str, float or Quantity [year]
        Age; a bare number is years (used for MAC, not for scaling).
    oxygen_consumption, carbon_dioxide_production : optional [mL/min] STPD overrides.
    cardiac_output : optional [L/min].
    alveolar_ventilation_ : optional [L/min] BTPS; default from ``target_paco2``.
    minute_ventilation : optional [L/min]; default alveolar plus alveolar and anatomical dead space.
    frc : optional [L]; default 30 mL/kg.
    target_paco2 : [mmHg], default 40.
    respiratory_rate : [1/min], default 12.
    tissue_volume : optional dict of group -> volume.
    tissue_flow_share : optional dict of group -> share of cardiac output (must sum to <= 1).

    Returns
    -------
    Patient

    References
    ----------
    Lowe HJ, Ernst EA 1981 and Brody 1945 (flows); Eger EI II 1974 (tissue groups); West JB (alveolar ventilation).

    Examples
    --------
    >>> p = patient_parameters("70 kg", "40 years")
    >>> round(p.alveolar_ventilation.to("L/min").magnitude, 2)
    4.18
    >>> round(sum(p.tissue_volume[t].to("L").magnitude for t in COMPARTMENTS if t.startswith("fat")), 1)
    14.5
    """
    w = parse_quantity(weight, "patient.weight", "mass", default_unit="kg")
    check_range(w, "patient.weight", Q_(SANE_WEIGHT[0], "kg"), Q_(SANE_WEIGHT[1], "kg"), value=weight)
    a = parse_quantity(age, "patient.age", "age", default_unit="year")
    check_range(a, "patient.age", Q_(SANE_AGE[0], "year"), Q_(SANE_AGE[1], "year"), value=age)
    kg = w.to("kg").magnitude
    notes: list[tuple[str, str]] = []
    if not VALIDATED_WEIGHT[0] <= kg <= VALIDATED_WEIGHT[1]:
        msg = (
            f"patient weight {kg:g} kg is outside {VALIDATED_WEIGHT[0]:g}-{VALIDATED_WEIGHT[1]:g} kg, "
            "the range over which the weight power laws are taken as validated; treat the results as rough"
        )
        notes.append(("PATIENT_WEIGHT_OUTSIDE_VALIDATED", msg))

    def opt(value: Any, name: str, dim: str, default: float, unit: str) -> pint.Quantity:
        if value is None:
            return Q_(default, unit)
        q = parse_quantity(value, f"patient.{name}", dim, default_unit=unit)
        check_range(q, f"patient.{name}", Q_(0, unit), Q_(1e6, unit), low_inclusive=False, value=value)
        return q.to(unit)

    vo2 = opt(oxygen_consumption, "oxygen_consumption", "flow", brody_oxygen_consumption(kg), "mL/min")
    vco2 = opt(
        carbon_dioxide_production, "carbon_dioxide_production", "flow", brody_carbon_dioxide_production(kg), "mL/min"
    )
    co = opt(cardiac_output, "cardiac_output", "flow", brody_cardiac_output(kg), "L/min")
    paco2 = parse_quantity(target_paco2, "patient.target_paco2", "pressure", default_unit="mmHg")
    check_range(paco2, "patient.target_paco2", Q_(20, "mmHg"), Q_(80, "mmHg"), value=target_paco2)
    va = opt(
        alveolar_ventilation_,
        "alveolar_ventilation",
        "flow",
        alveolar_ventilation(vco2.magnitude, paco2.to("mmHg").magnitude),
        "L/min",
    )
    rr = parse_quantity(respiratory_rate, "patient.respiratory_rate", "rate", default_unit="1/min")
    check_range(rr, "patient.respiratory_rate", Q_(2, "1/min"), Q_(80, "1/min"), value=respiratory_rate)
    if not 0 <= alveolar_dead_space_share < 0.9:
        raise InputError("patient.alveolar_dead_space_share", alveolar_dead_space_share, "0 to 0.9")
    dead = ANATOMICAL_DEAD_SPACE_PER_KG * kg * rr.to("1/min").magnitude
    ve_default = va.magnitude / (1.0 - alveolar_dead_space_share) + dead
    ve = opt(minute_ventilation, "minute_ventilation", "flow", ve_default, "L/min")
    if ve.magnitude < va.magnitude:
        raise InputError(
            "patient.minute_ventilation",
            minute_ventilation,
            f"at least the alveolar ventilation, {va.magnitude:.2f} L/min",
        )
    frc_q = opt(frc, "frc", "volume", FRC_PER_KG * kg, "L")

    scale = kg / REFERENCE_MASS
    vols = {t: Q_(TISSUE_VOLUME_70KG[t] * scale, "L") for t in TISSUES}
    for t, v in (tissue_volume or {}).items():
        if t not in TISSUES:
            raise InputError("patient.tissue_volume", t, "one of " + ", ".join(TISSUES))
        vols[t] = opt(v, f"tissue_volume.{t}", "volume", 0.0, "L")
    shares = dict(TISSUE_FLOW_SHARE)
    for t, s in (tissue_flow_share or {}).items():
        if t not in TISSUES:
            raise InputError("patient.tissue_flow_share", t, "one of " + ", ".join(TISSUES))
        shares[t] = float(s)
    if any(s < 0 for s in shares.values()) or sum(shares.values()) > 1.0 + 1e-9:
        raise InputError("patient.tissue_flow_share", shares, "shares of at least 0 summing to at most 1")
    flows = {t: co * shares[t] for t in TISSUES}
    split = fat_split(vols["fat"].to("L").magnitude, flows["fat"].to("L/min").magnitude, kg)
    comp_v = {t: vols[t].to("L") for t in ("vrg", "muscle", "vpg")}
    comp_q = {t: flows[t].to("L/min") for t in ("vrg", "muscle", "vpg")}
    diffusion = {}
    for name, (v, q, d) in split.items():
        comp_v[name], comp_q[name] = Q_(v, "L"), Q_(q, "L/min")
        if name in DIFFUSION_DONOR:
            diffusion[name] = Q_(d, "L/min")
    blood = BLOOD_VOLUME_PER_KG * kg
    return Patient(
        weight=w.to("kg"),
        age=a.to("year"),
        oxygen_consumption=vo2,
        carbon_dioxide_production=vco2,
        cardiac_output=co,
        alveolar_ventilation=va,
        minute_ventilation=ve,
        frc=frc_q,
        tissue_volume={t: comp_v[t] for t in COMPARTMENTS},
        tissue_flow={t: comp_q[t] for t in COMPARTMENTS},
        tissue_diffusion=diffusion,
        arterial_volume=Q_(blood * ARTERIAL_SHARE, "L"),
        venous_volume=Q_(blood * (1 - ARTERIAL_SHARE), "L"),
        alveolar_dead_space_share=float(alveolar_dead_space_share),
        respiratory_rate=rr,
        hepatic_flow=co * HEPATIC_FLOW_SHARE,
        warnings=tuple(notes),
    )
