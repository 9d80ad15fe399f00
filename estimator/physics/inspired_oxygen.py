"""Inspired oxygen at the site: PiO2 from FiO2 and barometric pressure, and the sea-level threshold check.

The oxygen the lungs receive is set by its partial pressure in the humidified tracheal gas,

.. math:: P_{iO_2} = F_{iO_2} \\, (P_B - P_{H_2O}),

with :math:`P_{H_2O}` = 47 mmHg = 6.27 kPa, saturated water vapour at 37 degC
(:data:`estimator.constants.WATER_VAPOUR_37C_KPA`). At a site of lower barometric pressure
:math:`P_B` the same oxygen fraction gives less oxygen. A fraction threshold (such as FiO2 0.30 at
low flow) is read here as the PiO2 it gives at sea level (101.325 kPa); the fraction that gives that
PiO2 at the site is the threshold divided by :math:`(P_B - P_{H_2O}) / (101.325 - P_{H_2O})`. Reading
a threshold as a sea-level PiO2 is the package's rule (no published threshold for altitude is held).

The site's barometric pressure comes from :func:`estimator.physics.site.site_from_inputs`.

References
----------
.. [1] West JB. Respiratory Physiology: The Essentials. Lippincott Williams & Wilkins (inspired
   PO2 = FiO2 (PB - 47 mmHg) at 37 degC; edition, chapter and page from memory).
"""

from __future__ import annotations

from typing import Any

import numpy as np
import pint

from ..constants import WATER_VAPOUR_37C_KPA
from ..units import Q_, STANDARD_ATMOSPHERE

#: Saturated water vapour pressure at 37 degC, 47 mmHg = 6.27 kPa (West; estimator.constants).
WATER_VAPOUR_37C = Q_(WATER_VAPOUR_37C_KPA, "kPa")


def inspired_oxygen_partial_pressure(fio2: Any, ambient: pint.Quantity, water_vapour: bool = True) -> pint.Quantity:
    """Inspired oxygen partial pressure PiO2 = FiO2 (PB - PH2O) [kPa].

    Parameters
    ----------
    fio2 : float, numpy.ndarray or pint.Quantity [-]
        Dry-gas oxygen fraction, 0 to 1.
    ambient : pint.Quantity [kPa]
        Absolute barometric pressure PB.
    water_vapour : bool
        Subtract the saturated water vapour pressure at 37 degC (47 mmHg, 6.27 kPa), i.e. tracheal gas;
        ``False`` gives the PO2 of the dry gas.

    Returns
    -------
    pint.Quantity [kPa]
        PiO2; a plain float magnitude for a scalar ``fio2``, an array for an array.

    References
    ----------
    West JB. Respiratory Physiology: The Essentials. Lippincott Williams & Wilkins (PiO2 = FiO2
    (PB - 47 mmHg); edition and page from memory).

    Examples
    --------
    >>> round(inspired_oxygen_partial_pressure(0.30, Q_(101.325, "kPa")).magnitude, 2)
    28.52
    >>> round(inspired_oxygen_partial_pressure(0.30, Q_(101.325, "kPa"), water_vapour=False).magnitude, 2)
    30.4
    """
    f = fio2.to("dimensionless").magnitude if isinstance(fio2, pint.Quantity) else np.asarray(fio2, dtype=float)
    dry = ambient.to("kPa").magnitude - (WATER_VAPOUR_37C.magnitude if water_vapour else 0.0)
    pio2 = np.asarray(f * dry, dtype=float)
    return Q_(float(pio2) if pio2.ndim == 0 else pio2, "kPa")


def sea_level_equivalent_fraction(fio2: Any, ambient: pint.Quantity) -> Any:
    """The oxygen fraction [-] that gives, at sea level, the PiO2 that ``fio2`` gives at ``ambient``.

    Parameters
    ----------
    fio2 : float or numpy.ndarray [-]
        Dry-gas oxygen fraction at the site.
    ambient : pint.Quantity [kPa]
        Absolute barometric pressure at the site.

    Returns
    -------
    float or numpy.ndarray [-]
        FiO2 x (PB - PH2O) / (101.325 kPa - PH2O): below ``fio2`` where the pressure is lower.

    References
    ----------
    West JB. Respiratory Physiology: The Essentials (PiO2 = FiO2 (PB - 47 mmHg); from memory), at the
    ISO 2533:1975 sea-level pressure 101.325 kPa.

    Examples
    --------
    >>> round(float(sea_level_equivalent_fraction(0.30, Q_(70.109, "kPa"))), 3)
    0.201
    """
    sea = inspired_oxygen_partial_pressure(1.0, STANDARD_ATMOSPHERE)
    return (inspired_oxygen_partial_pressure(fio2, ambient) / sea).to("dimensionless").magnitude


def fraction_for_sea_level_threshold(threshold: Any, ambient: pint.Quantity) -> Any:
    """The oxygen fraction [-] needed at ``ambient`` to match the sea-level PiO2 of ``threshold``.

    Parameters
    ----------
    threshold : float or numpy.ndarray [-]
        Oxygen fraction read as a sea-level PiO2 (for example 0.30).
    ambient : pint.Quantity [kPa]
        Absolute barometric pressure at the site.

    Returns
    -------
    float or numpy.ndarray [-]
        ``threshold`` divided by :func:`sea_level_equivalent_fraction` of pure oxygen; above 1 where
        even pure oxygen cannot reach that PiO2.

    References
    ----------
    West JB. Respiratory Physiology: The Essentials (PiO2 = FiO2 (PB - 47 mmHg); from memory). Reading a
    threshold as a sea-level PiO2 is the package's rule (common practice, no source).

    Examples
    --------
    >>> round(float(fraction_for_sea_level_threshold(0.30, Q_(70.109, "kPa"))), 3)
    0.447
    """
    return np.asarray(threshold, dtype=float) / sea_level_equivalent_fraction(1.0, ambient)


def check_inspired_oxygen(fio2: Any, threshold: Any, ambient: pint.Quantity) -> list[tuple[str, str]]:
    """Warn when an oxygen fraction that meets ``threshold`` at sea level falls short at this site.

    The threshold (for example FiO2 0.30 at low flow) is read as a sea-level PiO2. A fraction at or
    above the threshold whose PiO2 here is below that sea-level PiO2 gets code
    ``PIO2_BELOW_SEA_LEVEL_THRESHOLD``; a site where even pure oxygen cannot reach it gets
    ``PIO2_THRESHOLD_UNREACHABLE``. Fractions already below the threshold are the caller's
    ordinary low-oxygen finding and are not repeated here.

    Parameters
    ----------
    fio2 : float or numpy.ndarray [-]
        Inspired oxygen fraction(s) of the case.
    threshold : float [-]
        The oxygen fraction threshold, read as a sea-level PiO2.
    ambient : pint.Quantity [kPa]
        Absolute barometric pressure at the site.

    Returns
    -------
    list of (str, str)
        ``(code, message)`` pairs; empty when the site changes nothing.

    References
    ----------
    West JB. Respiratory Physiology: The Essentials (PiO2 = FiO2 (PB - 47 mmHg); from memory). The
    sea-level reading of the threshold is the package's rule (common practice, no source).

    Examples
    --------
    >>> [c for c, _ in check_inspired_oxygen(0.35, 0.30, Q_(70.109, "kPa"))]
    ['PIO2_BELOW_SEA_LEVEL_THRESHOLD']
    >>> check_inspired_oxygen(0.35, 0.30, Q_(101.325, "kPa"))
    []
    """
    f = np.asarray(fio2, dtype=float)
    thr = float(threshold)
    need = float(fraction_for_sea_level_threshold(thr, ambient))
    sea_pio2 = float(inspired_oxygen_partial_pressure(thr, STANDARD_ATMOSPHERE).magnitude)
    out: list[tuple[str, str]] = []
    if need > 1.0:
        out.append(
            (
                "PIO2_THRESHOLD_UNREACHABLE",
                f"at {ambient.to('kPa').magnitude:.1f} kPa even 100 % oxygen "
                f"gives a PiO2 below {sea_pio2:.1f} kPa, the sea-level PiO2 of FiO2 {thr:.2f}",
            )
        )
    short = (f >= thr) & (f < need)
    if np.any(short):
        out.append(
            (
                "PIO2_BELOW_SEA_LEVEL_THRESHOLD",
                f"FiO2 {float(np.min(f[short])):.2f} meets the {thr:.2f} threshold but at "
                f"{ambient.to('kPa').magnitude:.1f} kPa gives PiO2 below {sea_pio2:.1f} kPa (its sea-level value); "
                f"FiO2 {min(need, 1.0):.2f} is needed for the same PiO2",
            )
        )
    return out
