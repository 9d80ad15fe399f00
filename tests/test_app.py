"""The Streamlit pages, driven by streamlit's AppTest: inputs set, outputs checked against the world.

Each test runs one page (the shared frame plus the page) in a headless script runner with the real
engine. Checks use facts outside the app: unit definitions, published laws the outputs must follow
in direction (more flow, more agent), the ISO standard atmosphere, and the package's own CLI text.
"""

from __future__ import annotations

import io
import sys
import tomllib
from pathlib import Path

import pytest

if str(Path(__file__).resolve().parents[1]) not in sys.path:  # app.py runs from the repository root
    sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

import tomli_w  # noqa: E402
from app_helpers import ROOT, TIMEOUT, assert_clean, metric, number, page, show_view  # noqa: E402
from streamlit.testing.v1 import AppTest  # noqa: E402

from estimator.cli import CAUTION  # noqa: E402
from estimator_app import demo  # noqa: E402
from estimator_app.common import MAX_UPLOAD_BYTES, csv_bytes, read_upload, xlsx_bytes  # noqa: E402

#: 1 lb = 0.45359237 kg exactly (International Yard and Pound Agreement, 1959).
KG_PER_LB = 0.45359237


def test_app_opens_on_the_demo_case_with_the_caution():
    # The app must open on a useful demo with no input, the caution first (CLI text is the reference).
    at = AppTest.from_file(str(ROOT / "app.py"), default_timeout=TIMEOUT).run()
    assert_clean(at)
    assert at.title[0].value == "Case planner"
    assert at.warning[0].value == CAUTION
    assert "Kestrel" in at.text_input[0].value  # demo_cases/kestrel_lap_chole.toml
    assert number(metric(at, "Liquid agent")) > 0


@pytest.fixture(scope="module")
def planner() -> AppTest:
    return page("case_planner")


def test_case_planner_shows_engine_totals_and_downloads(planner):
    assert_clean(planner)
    assert planner.warning[0].value == CAUTION
    # The demo (demo_cases/kestrel_lap_chole.toml) holds 1 MAC end-tidal over 78 min of wash-in and
    # maintenance, then washes out for 8 min with the dial at 0: MAC-hours above (78 - 8)/60 = 1.17 (the
    # wash-in takes minutes) and below 86/60 = 1.43 (end-tidal never exceeds the 1 MAC hold).
    assert 70 / 60 < number(metric(planner, "MAC-hours")) < 86 / 60
    assert [t.label for t in planner.tabs] == ["Time course", "Phases and dial", "All totals", "Downloads"]
    assert {b.label for b in planner.get("download_button")} == {"Save scenario (TOML)"}  # the views are drawn lazily
    show_view(planner, "Downloads")
    assert_clean(planner)
    labels = {b.label for b in planner.get("download_button")}
    assert {"Download CSV", "Download XLSX", "Download JSON", "Save scenario (TOML)"} <= labels
    show_view(planner, "Time course")
    phases = [t.value for t in planner.text_input if t.key.startswith("case.phases")]
    assert phases == ["wash-in", "maintenance", "emergence"]


def test_heavier_patient_takes_up_more_agent(planner):
    # Brody scaling (Lowe and Ernst 1981): cardiac output, hence agent uptake at a given end-tidal
    # target, rises as weight^0.75; a 60 % heavier patient must use more liquid agent.
    before = number(metric(planner, "Liquid agent"))
    planner.number_input(key="case.weight.0.kg").set_value(130.0).run()
    assert_clean(planner)
    assert number(metric(planner, "Liquid agent")) > before


def test_higher_maintenance_flow_uses_more_agent_and_oxygen():
    # Dion 1992 and Baum and Aitkenhead 1995: at the same end-tidal target, vapour delivered grows with
    # fresh-gas flow (more is vented through the APL valve); oxygen used grows with the O2 flow.
    base = page("case_planner")
    doc = demo.scenario()
    doc["phases"][1].update(oxygen="1.5 L/min", air="1.5 L/min")
    high = page("case_planner", doc)
    assert_clean(high)
    assert number(metric(high, "Liquid agent")) > 1.2 * number(metric(base, "Liquid agent"))
    assert number(metric(high, "Oxygen")) > number(metric(base, "Oxygen"))
    assert number(metric(high, "Mean fresh-gas flow")) > number(metric(base, "Mean fresh-gas flow"))


def test_display_units_follow_their_definitions(planner):
    # 1 L = 1000 mL (SI); 1 lb = 0.45359237 kg (1959 agreement). Changing the display unit changes the
    # number shown, never the model result.
    at = page("case_planner")
    lpm = number(metric(at, "Mean fresh-gas flow"))
    at.selectbox(key="unit.flow").set_value("mL/min").run()
    at.selectbox(key="unit.mass").set_value("lb").run()
    assert_clean(at)
    # L/min is shown to 0.01 L/min, so the mL/min figure agrees within half that step, 5 mL/min.
    assert number(metric(at, "Mean fresh-gas flow")) == pytest.approx(1000 * lpm, abs=5.0)
    # Editors show four figures (estimator.display): 171.96 lb reads 172.0.
    assert at.number_input(key="case.weight.0.lb").value == pytest.approx(78 / KG_PER_LB, abs=0.05)
    assert metric(at, "Mean fresh-gas flow").endswith("mL/min")


def test_scenario_upload_replaces_the_case_and_bad_files_are_refused():
    at = page("case_planner")
    doc = demo.scenario()
    doc["title"] = "Riverbend Cottage Hospital - knee arthroscopy"
    doc["patient"]["weight"] = "61 kg"
    at.sidebar.get("file_uploader")[0].set_value(("case.toml", tomli_w.dumps(doc).encode(), "application/toml"))
    at.run()
    assert_clean(at)
    assert at.text_input[0].value.startswith("Riverbend")
    assert at.number_input(key="case.weight.1.kg").value == pytest.approx(61.0)
    # A weight outside the scenario range is refused with the field named, never clamped.
    doc["patient"]["weight"] = "900 kg"
    at.sidebar.get("file_uploader")[0].set_value(("bad.toml", tomli_w.dumps(doc).encode(), "application/toml"))
    at.run()
    assert any("patient.weight" in e.value for e in at.error)
    assert at.text_input[0].value.startswith("Riverbend")  # the loaded case stays


def test_upload_size_is_checked_on_the_bytes():
    class Big:
        name = "big.csv"

        def getvalue(self) -> bytes:
            return b"x" * (MAX_UPLOAD_BYTES + 1)

    from estimator.errors import InputError

    with pytest.raises(InputError, match="at most 21 MB|at most 20 MB"):
        read_upload(Big(), "audit log")


def test_exports_are_safe_and_readable():
    # OWASP "CSV Injection": text starting with = + - @ must not reach a spreadsheet as a formula.
    import pandas as pd
    from openpyxl import load_workbook

    frame = pd.DataFrame({"case": ['=HYPERLINK("x")', "plain"], "value": [1.5, 2.0]})
    assert b"'=HYPERLINK" in csv_bytes(frame)
    ws = load_workbook(io.BytesIO(xlsx_bytes({"cases": frame})))["cases"]
    assert ws["A2"].value.startswith("'=") and ws["A2"].data_type == "s"
    assert ws["B3"].value == 2.0


def test_downloads_carry_the_caution_and_the_generator():
    # Issue 18: the CSV leads with "# " lines (caution, program and version); the workbook has an
    # "about" sheet with the same; the table itself reads back unchanged.
    import pandas as pd
    from openpyxl import load_workbook

    from estimator import __version__
    from estimator.caution import CAUTION
    from estimator.planning.exports import read_csv_export

    frame = pd.DataFrame({"room": ["OR #2"], "value": [1.5]})
    text = csv_bytes(frame, "lowflow app: case result").decode("utf-8")
    assert text.startswith(f"# caution: {CAUTION}\n# made by: lowflow-estimator {__version__} (lowflow app: case")
    pd.testing.assert_frame_equal(read_csv_export(io.StringIO(text)), frame)
    about = load_workbook(io.BytesIO(xlsx_bytes({"cases": frame}, "lowflow app: x")))["about"]
    assert dict(about.iter_rows(values_only=True))["caution"] == CAUTION


def test_saved_scenario_is_toml_the_engine_accepts(planner):
    from estimator.inputs.scenario import scenario_from_text

    doc = planner.session_state["scenario"]
    scen = scenario_from_text(tomli_w.dumps(doc))
    assert scen.patient.weight.to("kg").magnitude > 0
    assert tomllib.loads(tomli_w.dumps(doc))["agent"]["name"] == "sevoflurane"


def floor_table(at):
    """The flow floor page's per-phase table (the recommended schedule's table comes before it)."""
    return next(d.value for d in at.dataframe if "flow floor [L/min]" in d.value.columns)


def test_flow_floor_page_and_a_stricter_threshold():
    at = page("flow_floor")
    assert_clean(at)
    assert at.warning[0].value == CAUTION
    table = floor_table(at)
    floor = table["flow floor [L/min]"].to_numpy()
    planned = table["planned [L/min]"].to_numpy()
    assert (floor <= planned + 1e-9).all()  # the demo plan is safe, so its floor is at or below it
    # A stricter inspired-O2 limit can only keep or raise each floor (the limit is monotone in flow).
    at.number_input(key="floor.thr.0").set_value(50.0).run()
    assert_clean(at)
    strict = floor_table(at)["flow floor [L/min]"].to_numpy()
    assert (strict >= floor - 1e-9).all() and (strict > floor + 1e-9).any()


def test_flow_floor_page_less_time_to_wash_out_raises_the_emergence_floor():
    # The demo's emergence (dial at 0) is bound by the wash-out limit; less time for it needs more
    # fresh gas (a well-mixed circuit washes out faster at higher flow, common practice).
    at = page("flow_floor")
    table = floor_table(at)
    emergence = table.iloc[-1]
    assert emergence["binding limit"] == "WASH_OUT"
    at.number_input(key="floor.washin.0").set_value(5.0).run()
    assert_clean(at)
    assert floor_table(at).iloc[-1]["flow floor [L/min]"] > emergence["flow floor [L/min]"]


def test_audit_page_reports_rejections_kpis_and_counterfactual():
    at = page("fresh_gas_audit")
    assert_clean(at)
    # The demo log (demo_cases/kestrel_audit_log.csv, written by make_audit_log.py) has three faulty
    # rows on purpose, at physical lines 42, 402 and 802 (the header is line 1), and 452 cases.
    rejected = next(d.value for d in at.dataframe if "line" in d.value.columns)
    assert list(rejected["line"]) == [42, 402, 802]
    assert metric(at, "Cases") == "452"
    labels = {b.label for b in at.get("download_button")}
    assert {"Cases (CSV)", "Workbook (XLSX)", "Report (HTML)", "JSON"} <= labels
    at.toggle(key="audit.cf").set_value(True).run(timeout=300)
    assert_clean(at)
    # The demo policy (0.5 L/min) is below the log's recorded maintenance flows (mean about 1.2 L/min).
    assert number(metric(at, "Sevoflurane saved")) > 0
    assert number(metric(at, "Desflurane saved")) > 0


def test_audit_upload_of_a_small_log():
    at = page("fresh_gas_audit")
    log = (
        "case_id,time,oxygen_flow,air_flow,nitrous_oxide_flow,agent,vaporizer_setting\n"
        "A,0,1,1,0,sevoflurane,2\nA,60,1,1,0,sevoflurane,2\n"
    )
    at.file_uploader(key="audit.log.upload").set_value(("log.csv", log.encode(), "text/csv"))
    at.selectbox(key="audit.prices.demo").set_value("no prices")
    at.run()
    assert_clean(at)
    assert metric(at, "Cases") == "1"
    # Dion 1992: 2 % of 2 L/min for 60 min, vapour = 2 x 60 x 0.02/0.98 = 2.449 L; liquid = vapour
    # / (molar volume at 15 degC, 23.64 L/mol) x 200.05 g/mol / 1.52 g/mL = 13.6 mL.
    assert number(metric(at, "Sevoflurane (liquid)")) == pytest.approx(13.6, abs=0.6)


def test_site_page_standard_atmosphere_and_calibration_point():
    at = page("site_flowmeter")
    assert_clean(at)
    at.number_input(key="site.elevation").set_value(0.0).run()
    # ISO 2533: 101.325 kPa at sea level; an O2 tube read with O2 at its calibration state (sea level,
    # 20 degC) shows the true flow.
    assert number(metric(at, "Ambient pressure")) == pytest.approx(1.01, abs=0.006)  # bar, 3 figures
    assert number(metric(at, "True flow at the site")) == pytest.approx(1.0, abs=0.005)
    at.number_input(key="site.elevation").set_value(3000.0).run()
    at.selectbox(key="unit.pressure").set_value("kPa").run()
    assert number(metric(at, "Ambient pressure")) == pytest.approx(70.1, abs=0.1)  # ISO 2533 table, 3000 m
    # Lower gas density at altitude: a float reads low, so the true flow exceeds the reading.
    assert number(metric(at, "True flow at the site")) > 1.0


def test_methods_page_lists_sourced_values():
    at = page("methods")
    assert_clean(at)
    values = at.dataframe[0].value
    assert {"species", "property", "value", "confidence", "source"} <= set(values.columns)
    assert "sevoflurane" in set(values["species"])
    assert any("Mapleson" in m.value for m in at.markdown)


def test_methods_page_shows_the_validation_report():
    # The table is the generated docs/VALIDATION.md, row for row (its own count of checks).
    import re

    from estimator_app.pages.methods import VALIDATION_REPORT

    at = page("methods")
    assert_clean(at)
    text = VALIDATION_REPORT.read_text(encoding="utf-8")
    count = int(re.search(r"\((\d+) checks", text).group(1))
    table = next(d.value for d in at.dataframe if "published value" in d.value.columns)
    assert len(table) == count
    assert {"quantity", "value computed", "published value", "source", "tolerance", "pass"} <= set(table.columns)
    # failing and unscored published rows are shown as such (issue 15: known gaps stay visible)
    assert set(table["pass"]) <= {"yes", "no", "not scored"} and "yes" in set(table["pass"])


def test_demand_forecast_mean_cases_follow_poisson_and_more_cases_raise_demand():
    at = page("demand_forecast")
    assert_clean(at)
    assert at.warning[0].value == CAUTION
    # The demo (demo_cases/kestrel_case_mix.toml) draws Poisson counts with means 10 + 3 + 4 + 8 = 25 a
    # week; over its 13 weeks the sample mean has standard error sqrt(25 / 13) = 1.39 (Poisson variance
    # = mean): allow 3 SE.
    assert number(metric(at, "Cases a week (mean)")) == pytest.approx(25.0, abs=3 * (25 / 13) ** 0.5)
    p95 = number(metric(at, "Cases in a P95 week"))
    # Poisson(25): P95 is 33 by the exact distribution (scipy.stats.poisson.ppf(0.95, 25)); the
    # empirical P95 of 13 weeks (the 13th value or between the 12th and 13th) lies between the
    # distribution's P75 and P99.9.
    from scipy.stats import poisson

    assert poisson.ppf(0.75, 25) <= p95 <= poisson.ppf(0.999, 25)
    busier = demo.casemix()
    for row in busier["case_types"]:
        row["per_week"] *= 2
    at2 = AppTest.from_string(
        "from estimator_app.shell import page_main\npage_main('demand_forecast')", default_timeout=TIMEOUT
    )
    at2.session_state["forecast.doc"] = busier
    at2.session_state["forecast.version"] = 0
    at2.run()
    assert_clean(at2)
    assert number(metric(at2, "CO2e a week (P95)")) > 1.5 * number(metric(at, "CO2e a week (P95)"))


def test_the_app_demo_is_the_demo_cases_folder():
    # One demo set: every page opens on a demo_cases/ file, and every TOML file there is offered on
    # the page of its contract and accepted by the command line's loader as the app runs it.
    from estimator_app import contracts

    folder = sorted(p.name for p in (ROOT / "demo_cases").glob("*.toml"))
    offered = sorted(n for k in ("scenario", "inventory", "casemix", "prices", "policy") for n in demo.files_of(k))
    assert offered == folder
    assert demo.files_of("log") == ["kestrel_audit_log.csv"]
    for kind in ("scenario", "inventory", "casemix"):
        for name in demo.files_of(kind):
            doc, named = demo.document(name)
            contracts.check(kind, doc, named, (ROOT / "demo_cases" / demo.DEFAULT["scenario"]).read_text())
    assert demo.scenario() == tomllib.loads((ROOT / "demo_cases" / "kestrel_lap_chole.toml").read_text())


def test_chart_specs_follow_the_vega_lite_schema():
    # The pages draw hand-written specs without validating them on each rerun; check them here
    # against the Vega-Lite v6 JSON schema (an open standard, shipped with altair).
    import numpy as np
    import pandas as pd
    from altair.utils.schemapi import validate_jsonschema
    from altair.vegalite.v6.schema.core import load_schema

    from estimator_app.charts import bars, histogram, time_course

    frame = pd.DataFrame({"time [min]": np.arange(6.0), "a [%]": np.linspace(21, 60, 6), "b": np.nan})
    for spec in (
        time_course(frame, {"a [%]": "A", "b": "B"}, "y [%]", rule=30.0, rule_label="limit"),
        time_course(frame, {"a [%]": "A"}, "y", step=True, x="time [min]"),
        time_course(
            pd.DataFrame({"date": pd.date_range("2026-04-06", periods=3).date, "s": [100.0, 60.0, 10.0]}),
            {"s": "stock"},
            "stock [%]",
            x="date",
            x_type="temporal",
        ),
        histogram(np.arange(10.0), "oxygen a week [L]", "weeks"),
    ):
        validate_jsonschema(spec, load_schema())
        x = (spec["layer"][0] if "layer" in spec else spec)["encoding"]["x"]
        assert x["title"] in ("time [min]", "date", "oxygen a week [L]")
    bars(pd.DataFrame({"k": ["x"], "v": [1.0]}), "k", "v", "kind", "value [mL]").to_dict()  # altair validates


@pytest.mark.parametrize(
    "name", ["case_planner", "flow_floor", "supply_duration", "demand_forecast", "site_flowmeter", "methods"]
)
def test_every_page_offers_csv_xlsx_html_and_json(name):
    # Issue contract: results download as CSV, XLSX, JSON and an HTML report on every page (the
    # audit page has its own four, tested above).
    at = page(name)
    if name == "case_planner":  # its downloads are one of its views, drawn when chosen
        show_view(at, "Downloads")
    assert_clean(at)
    labels = {b.label for b in at.get("download_button")}
    assert {"Download CSV", "Download XLSX", "Report (HTML)", "Download JSON"} <= labels, labels


def test_demand_forecast_draws_a_progress_bar_while_it_runs(monkeypatch):
    # Issue contract: the Monte Carlo shows a progress bar. The batch engine's progress callback
    # (estimator.planning.forecast.forecast(progress=...)) drives it; it ends at 100 % and is then cleared.
    import estimator_app.pages.demand_forecast as page_module

    seen = []
    real = page_module.run_forecast

    def spy(mix_text, named, progress=None, calibration=None):
        def wrapped(fraction):
            seen.append(fraction)
            progress(fraction)

        return real(mix_text + "\n# progress test\n", named, progress=wrapped, calibration=calibration)

    monkeypatch.setattr(page_module, "run_forecast", spy)
    page_module._kept().clear()
    at = page("demand_forecast")
    assert_clean(at)
    assert seen and seen[-1] == 1.0 and all(b >= a for a, b in zip(seen, seen[1:], strict=False))
    assert metric(at, "Cases a week (mean)")
