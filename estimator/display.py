"""Numbers and names as people read them: one rounding rule, human names and units, blanks for nothing.

Every page of the app and every report formats its tables and figures here, so "13539.889 L",
"2755.717 psi", "0.5449" or "None" never reach a reader, and a quantity is named the same way
everywhere ("Nitrous oxide", "MAC-h", "L").

Rounding rule: three significant figures, but never fewer than the whole number, so a large value
keeps its units digit (13539.889 -> 13 540) and a small one its three figures (0.5449 -> 0.545).
Three figures is the precision of the model's inputs (flows read off a flowmeter, dial settings,
body weight) and of most published uptake data (common practice, no source).

Examples
--------
>>> text(13539.889, "L"), text(2755.717, "psi"), text(0.5449), text(None), text(float("nan"), "mL")
('13\u202f540 L', '2\u202f756 psi', '0.545', '', '')
>>> text(10, "days"), text(10.0, "days")
('10 days', '10.0 days')
>>> number("13\u202f540 L"), number("-0.545 %")
(13540.0, -0.545)
>>> name("nitrous_oxide"), name("mac_hours"), unit_label("liter"), unit_label("MAC_hour")
('Nitrous oxide', 'MAC-h', 'L', 'MAC-h')
"""

from __future__ import annotations

import math
from typing import TYPE_CHECKING, Any

if TYPE_CHECKING:
    import pandas as pd

#: Significant figures shown (common practice, no source; see the module note).
FIGURES = 3

#: Thousands separator: a narrow no-break space (BIPM SI Brochure, 9th ed. 2019, sec. 5.4, from
#: memory: digits in groups of three set apart by a space, never a comma or point); it never wraps.
THOUSANDS = "\u202f"

#: Human names of keys whose words alone read badly (the rest: underscores to spaces, first letter up).
NAMES = {
    "oxygen": "Oxygen",
    "air": "Air",
    "nitrous_oxide": "Nitrous oxide",
    "mac_hours": "MAC-h",
    "mac_hour": "MAC-h",
    "co2e": "CO2e",
    "fio2": "FiO2",
    "agent_liquid": "Liquid agent",
    "agent_vapour": "Agent vapour",
    "fresh_gas": "Fresh gas",
    "o2": "O2",
    "n2o": "N2O",
}

#: Short unit labels of pint's long names (and of the abbreviations the contracts write).
UNITS = {
    "liter": "L",
    "l": "L",
    "milliliter": "mL",
    "ml": "mL",
    "minute": "min",
    "hour": "h",
    "day": "days",
    "kilogram": "kg",
    "gram": "g",
    "liter / minute": "L/min",
    "milliliter / minute": "mL/min",
    "MAC_hour": "MAC-h",
    "kilogram / MAC_hour": "kg/MAC-h",
    "bar": "bar",
    "kilopascal": "kPa",
    "pound_force_per_square_inch": "psi",
    "percent": "%",
    "year": "years",
    "dimensionless": "",
}


def decimals(value: float, figures: int = FIGURES) -> int:
    """Decimals that show ``figures`` significant figures of ``value`` without dropping whole digits.

    >>> decimals(13539.889), decimals(2.5), decimals(0.5449), decimals(0.0)
    (0, 2, 3, 0)
    """
    if not math.isfinite(value) or value == 0:
        return 0
    return max(0, figures - 1 - math.floor(math.log10(abs(value))))


def rounded(value: Any, figures: int = FIGURES) -> Any:
    """``value`` rounded by the rule (a number stays a number); None and NaN give None; text is kept.

    >>> rounded(13539.889), rounded(0.5449), rounded(None), rounded("x")
    (13540.0, 0.545, None, 'x')
    """
    if value is None or isinstance(value, bool | str):
        return value
    try:
        x = float(value)
    except (TypeError, ValueError):
        return value
    if not math.isfinite(x):
        return None
    return round(x, decimals(x, figures))


def text(value: Any, unit: str = "", figures: int = FIGURES) -> str:
    """``value`` as text by the rounding rule, thousands set apart by a thin space, then the unit.

    None, NaN and blank give an empty string (never "None" or "nan").
    """
    x = rounded(value, figures)
    if x is None or x == "":
        return ""
    if isinstance(x, str | bool):
        return str(x)
    places = (
        0 if isinstance(value, int) or (hasattr(value, "dtype") and value.dtype.kind in "iu") else decimals(x, figures)
    )
    number = f"{x:,.{places}f}".replace(",", THOUSANDS)
    label = unit_label(unit)
    return f"{number} {label}" if label else number


def number(shown: str) -> float:
    """The number at the start of a text made by :func:`text` (thousands separators removed)."""
    import re

    match = re.match(r"-?[\d\u202f]*\.?\d*", shown.strip())
    return float(match.group().replace(THOUSANDS, "")) if match and match.group() else math.nan


def unit_label(unit: str) -> str:
    """Short label of a unit given by pint's long or short name (``"liter / day"`` and ``"l/d"`` -> ``"L/day"``).

    >>> unit_label("liter"), unit_label("l/d"), unit_label("milliliter / day"), unit_label("MAC_hour")
    ('L', 'L/day', 'mL/day', 'MAC-h')
    """
    if unit in UNITS:
        return UNITS[unit]
    parts = [p.strip() for p in unit.replace(" / ", "/").split("/")]
    if len(parts) == 2:
        per = {"d": "day", "day": "day", "min": "min", "h": "h", "hour": "h", "minute": "min"}
        return f"{unit_label(parts[0])}/{per.get(parts[1], unit_label(parts[1]))}"
    return unit


def name(key: str) -> str:
    """Human name of a key (``"nitrous_oxide"`` -> ``"Nitrous oxide"``)."""
    if key in NAMES:
        return NAMES[key]
    words = key.replace("_", " ").strip()
    return words[:1].upper() + words[1:]


def sentence(label: str) -> str:
    """A label as a table's first column reads: first letter up, the rest as written ("CO2e" stays).

    >>> sentence("nitrous oxide"), sentence("CO2 absorbed")
    ('Nitrous oxide', 'CO2 absorbed')
    """
    return label[:1].upper() + label[1:]


def table(frame: pd.DataFrame, figures: int = FIGURES) -> pd.DataFrame:
    """A copy of ``frame`` for reading: numbers rounded by the rule, blanks for None and NaN.

    A numeric column stays numeric (it sorts as numbers) unless it has gaps: a table widget writes a
    missing number as "None", so such a column becomes text by :func:`text`, its gaps blank.

    >>> import pandas as pd
    >>> table(pd.DataFrame({"v": [13539.889, 0.5449], "n": ["a", None], "g": [1.0, None]})).values.tolist()
    [[13540.0, 'a', '1.00'], [0.545, '', '']]
    """
    import pandas as pd

    out = frame.copy()
    for col in out.columns:
        series = out[col]
        if pd.api.types.is_bool_dtype(series):
            continue
        if pd.api.types.is_numeric_dtype(series) and not series.isna().any():
            out[col] = series.map(lambda v: rounded(v, figures)).astype("float64")
        elif pd.api.types.is_numeric_dtype(series):
            out[col] = series.map(lambda v: text(v, figures=figures)).astype(object)
        else:
            out[col] = series.map(lambda v: "" if v is None or (isinstance(v, float) and math.isnan(v)) else v)
    return out


def field_path(field: str) -> str:
    """A dotted field path with rows counted from 1, as a table shows them.

    >>> field_path("demand.cases[0].scenario"), field_path("weeks")
    ('demand.cases (row 1).scenario', 'weeks')
    """
    import re

    return re.sub(r"\[(\d+)\]", lambda m: f" (row {int(m.group(1)) + 1})", field)


__all__ = [
    "FIGURES",
    "NAMES",
    "THOUSANDS",
    "UNITS",
    "decimals",
    "name",
    "number",
    "rounded",
    "sentence",
    "table",
    "text",
    "unit_label",
]
