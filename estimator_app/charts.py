"""Altair time-course charts with labelled axes and units."""

from __future__ import annotations

from typing import TYPE_CHECKING, Any

import streamlit as st

if TYPE_CHECKING:  # altair is imported only where a page builds an altair chart
    import altair as alt
    import pandas as pd

#: Our palette (also in .streamlit/config.toml): deep teal, amber, slate, coral.
PALETTE = ("#0f6e6e", "#d08c1b", "#51607a", "#c8553d", "#6a994e")


def time_course(
    frame: pd.DataFrame,
    columns: dict[str, str],
    y_title: str,
    *,
    height: int = 210,
    rule: float | None = None,
    rule_label: str = "",
    step: bool = False,
    x: str = "time [min]",
    x_type: str = "quantitative",
    colours: dict[str, str] | None = None,
) -> dict[str, Any]:
    """Vega-Lite spec: lines of ``columns`` (frame column -> legend name) against column ``x``.

    ``colours`` (legend name -> colour) gives each series a fixed colour, the same on every chart.

    Written as a plain spec rather than through altair's objects: building and validating those
    costs about 30 ms a chart on every rerun; the tests validate these specs against the schema.
    """
    line = {
        "mark": {"type": "line", "strokeWidth": 2.2, "interpolate": "step-after" if step else "linear"},
        "encoding": {
            "x": {"field": "time", "type": x_type, "title": x},
            "y": {"field": "value", "type": "quantitative", "title": y_title, "scale": {"zero": True}},
            "color": {
                "field": "series",
                "type": "nominal",
                "title": None,
                "scale": (
                    {"domain": list(colours), "range": list(colours.values())} if colours else {"range": list(PALETTE)}
                ),
                "legend": {"orient": "top", "labelLimit": 260},
            },
            "tooltip": [
                {
                    "field": "time",
                    "type": x_type,
                    "title": x,
                    **({"format": ".3g"} if x_type == "quantitative" else {}),
                },
                {"field": "series", "type": "nominal"},
                {"field": "value", "type": "quantitative", "title": y_title, "format": ".3g"},
            ],
        },
    }
    layers: list[dict[str, Any]] = [line]
    if rule is not None:
        ref = {"values": [{"value": rule, "label": rule_label}]}
        layers.append(
            {
                "data": ref,
                "mark": {"type": "rule", "strokeDash": [5, 4], "color": "#8a8f98"},
                "encoding": {"y": {"field": "value", "type": "quantitative"}},
            }
        )
        layers.append(
            {
                "data": ref,
                "mark": {"type": "text", "align": "left", "dx": 4, "dy": -6, "color": "#5b6170", "fontSize": 11},
                "encoding": {
                    "y": {"field": "value", "type": "quantitative"},
                    "x": {"value": 4},
                    "text": {"field": "label", "type": "nominal"},
                },
            }
        )
    return {
        "$schema": "https://vega.github.io/schema/vega-lite/v6.json",
        "height": height,
        "data": {"values": long_records(frame, x, columns, temporal=x_type == "temporal")},
        "layer": layers,
    }


def long_records(frame: pd.DataFrame, x: str, columns: dict[str, str], temporal: bool = False) -> list[dict]:
    """Rows ``{"time", "series", "value"}`` of ``columns`` (frame column -> series name) against column
    ``x``, one series after another, rows with a missing value left out (a gap in the line).

    Read straight from the columns' arrays as floats (a tenth of the time of pandas' melt, about 1.5 ms
    a chart on every rerun); every caller's series are numbers (the app tests reach no other kind).

    >>> import pandas as pd
    >>> long_records(pd.DataFrame({"t": [0.0, 1.0], "a": [1.5, float("nan")]}), "t", {"a": "A"})
    [{'time': 0.0, 'series': 'A', 'value': 1.5}]
    """
    times = frame[x].astype(str).tolist() if temporal else frame[x].tolist()  # dates as ISO text for Vega-Lite
    return [
        {"time": t, "series": name, "value": v}
        for column, name in columns.items()
        for t, v in zip(times, frame[column].to_numpy(dtype=float).tolist(), strict=True)
        if v == v and t == t  # NaN is the one value unequal to itself
    ]


def item_colours(names: list[str]) -> dict[str, str]:
    """One fixed colour an item, by its place in the inventory: the same item, the same colour on every chart."""
    return {n: PALETTE[i % len(PALETTE)] for i, n in enumerate(dict.fromkeys(names))}


def date_marks(spec: dict[str, Any], marks: list[tuple[str, str]], band: tuple[str, str, str] | None = None) -> dict:
    """Add dated marks to a time-course spec with dates on x: a labelled dashed rule at each (ISO date,
    label), and a shaded band (start, end, label), e.g. the order lead time."""
    layers = []
    if band is not None:
        start, end, label = band
        layers.append(
            {
                "data": {"values": [{"start": start, "end": end, "label": label}]},
                "mark": {"type": "rect", "color": "#d08c1b", "opacity": 0.15},
                "encoding": {
                    "x": {"field": "start", "type": "temporal"},
                    "x2": {"field": "end"},
                    "tooltip": [{"field": "label", "type": "nominal"}],
                },
            }
        )
    values = [{"at": at, "label": label, "row": 10 + 14 * i} for i, (at, label) in enumerate(marks)]
    if values:
        layers.append(
            {
                "data": {"values": values},
                "mark": {"type": "rule", "strokeDash": [5, 4], "color": "#5b6170"},
                "encoding": {"x": {"field": "at", "type": "temporal"}, "tooltip": [{"field": "label"}]},
            }
        )
        layers.append(
            {
                "data": {"values": values},
                # Horizontal labels, one row each from the top (marks a few days apart do not overlap).
                "mark": {"type": "text", "align": "left", "dx": 4, "fontSize": 11},
                "encoding": {
                    "x": {"field": "at", "type": "temporal"},
                    "y": {"field": "row", "type": "quantitative", "scale": None},
                    "text": {"field": "label", "type": "nominal"},
                    "color": {"value": "#3b4252"},
                },
            }
        )
    labels = [layer for layer in layers if layer["mark"]["type"] == "text"]  # drawn over the lines
    under = [layer for layer in layers if layer["mark"]["type"] != "text"]
    return {**spec, "layer": [*under, *spec["layer"], *labels]}


def histogram(values: Any, x_title: str, y_title: str, height: int = 240) -> dict[str, Any]:
    """Vega-Lite spec: a histogram of ``values`` (at most 30 bins) with labelled axes."""
    return {
        "$schema": "https://vega.github.io/schema/vega-lite/v6.json",
        "height": height,
        "data": {"values": [{"v": float(x)} for x in values]},
        "mark": {"type": "bar", "color": PALETTE[0]},
        "encoding": {
            "x": {"field": "v", "type": "quantitative", "bin": {"maxbins": 30}, "title": x_title},
            # Counts of weeks are whole numbers: whole-number ticks only.
            "y": {
                "aggregate": "count",
                "type": "quantitative",
                "title": y_title,
                "axis": {"tickMinStep": 1, "format": "d"},
            },
        },
    }


def bars(frame: pd.DataFrame, x: str, y: str, x_title: str, y_title: str, color: str = PALETTE[0]) -> alt.Chart:
    """A simple bar chart with labelled axes."""
    import altair as alt

    return (
        alt.Chart(frame)
        .mark_bar(color=color)
        .encode(
            x=alt.X(f"{x}:N", title=x_title, sort=None),
            y=alt.Y(f"{y}:Q", title=y_title),
            tooltip=[x, alt.Tooltip(f"{y}:Q", format=".3g")],
        )
        .properties(height=240)
    )


def show(chart: alt.Chart | dict[str, Any], where: Any = None) -> None:
    """Draw an altair chart or a Vega-Lite spec. Specs are checked against the Vega-Lite schema in
    the tests, not on every rerun (validation costs about 20 ms a chart)."""
    spec = chart if isinstance(chart, dict) else chart.to_dict(validate=False)
    (where or st).vega_lite_chart(spec, width="stretch")


def class_bars(shares: dict[str, float], y_title: str, height: int = 240) -> dict[str, Any]:
    """Vega-Lite spec: one bar a flow class in the flow-class ramp, the class name written on each bar.

    ``shares`` maps class name to a value (a share in %), lowest flow first (its colour order).
    """
    from estimator.planning.flow_classes import FLOW_CLASS_COLOURS

    names = list(shares)
    rows = [{"class": n, "value": float(v) if v == v else 0.0} for n, v in shares.items()]
    top = max([r["value"] for r in rows] + [1e-9])
    x = {
        "field": "class",
        "type": "nominal",
        "sort": names,
        "title": "flow class (Brattwall et al. 2012)",
        "axis": {"labels": False, "ticks": False},  # the name is on each bar
    }
    y = {"field": "value", "type": "quantitative", "title": y_title, "scale": {"domain": [0, 1.15 * top]}}
    colour = {"field": "class", "type": "nominal", "scale": {"domain": names, "range": list(FLOW_CLASS_COLOURS)}}
    return {
        "$schema": "https://vega.github.io/schema/vega-lite/v6.json",
        "height": height,
        "data": {"values": rows},
        "layer": [
            {
                "mark": {"type": "bar", "stroke": "#1b4d74", "strokeWidth": 0.5},
                "encoding": {
                    "x": x,
                    "y": y,
                    "color": {**colour, "legend": None},
                    "tooltip": [
                        {"field": "class", "type": "nominal"},
                        {"field": "value", "type": "quantitative", "title": y_title, "format": ".3g"},
                    ],
                },
            },
            {
                "mark": {"type": "text", "dy": -6, "baseline": "bottom", "color": "#1d2a33", "fontSize": 11},
                "encoding": {"x": x, "y": y, "text": {"field": "class", "type": "nominal"}},
            },
        ],
    }


def case_bars(
    frame: pd.DataFrame, x: str, y: str, colour: str, x_title: str, y_title: str, domain: list[str] | None = None
) -> dict[str, Any]:
    """Vega-Lite spec: one bar a row of ``frame`` (a case), coloured by ``colour`` (the agent), in row order.

    ``domain`` fixes which colour each value gets (the same agent in the same colour on every chart).
    Columns are renamed to plain field names: Vega-Lite reads brackets and dots in a field as a path.
    """
    data = frame[[x, y, colour]].set_axis(["x", "y", "c"], axis=1)
    scale: dict[str, Any] = {"range": list(PALETTE)}
    if domain is not None:
        scale["domain"] = domain
    return {
        "$schema": "https://vega.github.io/schema/vega-lite/v6.json",
        "height": 240,
        "data": {"values": data.to_dict("records")},
        "mark": {"type": "bar"},
        "encoding": {
            "x": {
                "field": "x",
                "type": "nominal",
                "sort": None,
                "title": x_title,
                "axis": {"labels": len(frame) <= 40, "labelAngle": 0 if len(frame) <= 8 else -45},
            },
            "y": {"field": "y", "type": "quantitative", "title": y_title},
            "color": {"field": "c", "type": "nominal", "scale": scale, "legend": {"orient": "top", "title": None}},
            "tooltip": [
                {"field": "x", "type": "nominal", "title": x_title},
                {"field": "c", "type": "nominal", "title": colour},
                {"field": "y", "type": "quantitative", "title": y_title, "format": ".3g"},
            ],
        },
    }
