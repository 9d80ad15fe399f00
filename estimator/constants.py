"""Physical constants and standard conditions, each defined once with its source (plain floats).

The kernel, the cylinders, the gas-mixture properties, the PiO2 checks and the accounting take these
numbers from here; ``estimator.units`` wraps the standard conditions as pint quantities.

References
----------
.. [1] CODATA 2018 (Tiesinga E et al., Rev Mod Phys 2021;93:025010): R = N_A k, exact since the
   2019 SI.
.. [2] West JB. Respiratory Physiology: The Essentials (saturated water vapour at 37 degC, 47 mmHg,
   the value of respiratory physiology; IAPWS-95 water gives 6.28 kPa, 0.2 % higher, see
   tests/test_site.py).
.. [3] 1 atm = 101.325 kPa and 0 degC = 273.15 K by definition; 1 mmHg = 101.325/760 kPa.

Examples
--------
>>> round(MOLAR_VOLUME_STPD, 3), round(MOLAR_VOLUME_REFERENCE, 3)
(22.414, 23.645)
>>> round(WATER_VAPOUR_37C_KPA, 3)
6.266
"""

from __future__ import annotations

#: Molar gas constant [J/(mol K)] (CODATA 2018, exact).
GAS_CONSTANT = 8.314462618
#: Standard atmosphere [kPa] (1 atm, by definition).
STANDARD_PRESSURE_KPA = 101.325
#: 0 degC [K] (by definition).
ZERO_CELSIUS_K = 273.15
#: The package's gas-volume reference temperature [degC] and [K]: 15 degC, the convention for cylinder contents.
REFERENCE_TEMPERATURE_C = 15.0
REFERENCE_TEMPERATURE_K = ZERO_CELSIUS_K + REFERENCE_TEMPERATURE_C
#: Body temperature [K]: 37 degC.
BODY_TEMPERATURE_K = ZERO_CELSIUS_K + 37.0
#: One mmHg [kPa] (1 Torr = 1 atm / 760, by definition; the conventional mmHg differs by 1e-7).
MMHG_KPA = STANDARD_PRESSURE_KPA / 760.0
#: Saturated water-vapour pressure at 37 degC [kPa]: 47 mmHg (West), for BTPS gas and PiO2.
WATER_VAPOUR_37C_KPA = 47.0 * MMHG_KPA
#: Ideal-gas molar volume at STPD (0 degC, 101.325 kPa) [L/mol], for metabolic rates given STPD.
MOLAR_VOLUME_STPD = GAS_CONSTANT * ZERO_CELSIUS_K / STANDARD_PRESSURE_KPA
#: Ideal-gas molar volume at the package reference (15 degC, 101.325 kPa) [L/mol].
MOLAR_VOLUME_REFERENCE = GAS_CONSTANT * REFERENCE_TEMPERATURE_K / STANDARD_PRESSURE_KPA
