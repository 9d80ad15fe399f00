"""Altair time-course charts with labelled axes and units."""

from __future__ import annotations

import altair as alt
import pandas as pd

#: Our palette (also in .streamlit/config.toml): deep teal, amber, slate, coral.
PALETTE = ("#0f6e6e", "#d08c1b", "#51607a", "#c8553d", "#6a994e")


def time_course(frame: pd.DataFrame, columns: dict[str, str], y_title: str, *, height: int = 210,
                rule: float | None = None, rule_label: str = "", step: bool = False) -> alt.Chart:
    """Lines of ``columns`` (frame column -> legend name) against ``time [min]``."""
    data = frame[["time [min]", *columns]].rename(columns={"time [min]": "time", **columns})
    long = data.melt("time", var_name="series", value_name="value").dropna()
    line = alt.Chart(long).mark_line(strokeWidth=2.2, interpolate="step-after" if step else "linear").encode(
        x=alt.X("time:Q", title="time [min]"),
        y=alt.Y("value:Q", title=y_title, scale=alt.Scale(zero=True)),
        color=alt.Color("series:N", title=None, scale=alt.Scale(range=list(PALETTE)),
                        legend=alt.Legend(orient="top", labelLimit=260)),
        tooltip=[alt.Tooltip("time:Q", title="time [min]", format=".1f"), "series:N",
                 alt.Tooltip("value:Q", title=y_title, format=".3g")],
    )
    layers = [line]
    if rule is not None:
        ref = pd.DataFrame({"value": [rule], "label": [rule_label]})
        layers.append(alt.Chart(ref).mark_rule(strokeDash=[5, 4], color="#8a8f98").encode(y="value:Q"))
        layers.append(alt.Chart(ref).mark_text(align="left", dx=4, dy=-6, color="#5b6170", fontSize=11)
                      .encode(y="value:Q", x=alt.value(4), text="label:N"))
    return alt.layer(*layers).properties(height=height)


def bars(frame: pd.DataFrame, x: str, y: str, x_title: str, y_title: str, color: str = PALETTE[0]) -> alt.Chart:
    """A simple bar chart with labelled axes."""
    return alt.Chart(frame).mark_bar(color=color).encode(
        x=alt.X(f"{x}:N", title=x_title, sort=None), y=alt.Y(f"{y}:Q", title=y_title),
        tooltip=[x, alt.Tooltip(f"{y}:Q", format=".3g")]).properties(height=240)
