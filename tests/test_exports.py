"""Exports: the spreadsheet formula-injection guard (OWASP "CSV Injection"), HTML escaping and a
self-contained report."""

import csv
import re
from pathlib import Path

import pytest

from estimator.accounts.costs import DEMO_PRICES
from estimator.planning.audit import audit
from estimator.planning.exports import neutralise, write_csv, write_xlsx
from estimator.planning.html_report import report_html, write_html
from estimator.planning.svg_charts import svg_bars

DATA = Path(__file__).parent / "data"


@pytest.mark.parametrize("text", ["=1+1", "+1", "-1", "@SUM(A1)", "\tx", "\rx"])
def test_formula_triggers_are_neutralised(text):
    # OWASP CSV Injection: cells starting with = + - @ tab or CR are prefixed with a single quote.
    assert neutralise(text) == "'" + text


def test_plain_text_and_numbers_are_kept():
    assert neutralise("Theatre 1") == "Theatre 1"
    assert neutralise(-3.5) == -3.5


@pytest.fixture(scope="module")
def injected():
    return audit(DATA / "audit_injection.csv", prices=DEMO_PRICES)


def test_csv_export_guards_user_cells(injected, tmp_path):
    path = write_csv(injected, tmp_path / "cases.csv")
    with path.open(encoding="utf-8", newline="") as fh:
        rows = list(csv.DictReader(line for line in fh if not line.startswith("#")))
    ids = {r["case id"] for r in rows}
    assert ids == {'\'=HYPERLINK("http://example.invalid")', "'+cmd"}
    assert all(
        not v.startswith(("=", "+", "@"))
        for r in rows
        for v in r.values()
        if v and not v[0].isdigit() and not v.startswith("-")
    )
    assert {r["room"] for r in rows} == {"'@SUM(A1:A2)", "<script>alert(1)</script>"}
    assert any("[kg CO2e, IPCC AR6 GWP100]" in k for k in rows[0])


def test_csv_export_leads_with_the_caution_and_the_generator(injected, tmp_path):
    # Issue 18: CSV exports carry the caution and the generator line (program, version) as leading
    # "# " lines; the package's own reader and pandas' comment="#" both read the table after them.
    import pandas as pd

    from estimator import __version__
    from estimator.caution import CAUTION
    from estimator.planning.exports import read_csv_export

    path = write_csv(injected, tmp_path / "cases.csv")
    lines = path.read_text(encoding="utf-8").splitlines()
    assert lines[0] == f"# caution: {CAUTION}"
    assert lines[1] == f"# made by: lowflow-estimator {__version__} (lowflow audit)"
    table = read_csv_export(path)
    assert "case id" in table.columns and not lines[2].startswith("#")
    assert len(table) == len(injected.cases)
    assert len(pd.read_csv(path, comment="#")) == len(injected.cases)


def test_xlsx_about_sheet_names_the_generator(injected, tmp_path):
    from openpyxl import load_workbook

    from estimator import __version__
    from estimator.caution import CAUTION

    about = dict(load_workbook(write_xlsx(injected, tmp_path / "a.xlsx"))["about"].iter_rows(values_only=True))
    assert about["caution"] == CAUTION
    assert about["made by"] == f"lowflow-estimator {__version__} (lowflow audit)"


def test_xlsx_export_has_no_formulas(injected, tmp_path):
    from openpyxl import load_workbook

    path = write_xlsx(injected, tmp_path / "audit.xlsx")
    wb = load_workbook(path)
    assert {"cases", "rooms", "months", "kpis", "rejections", "about"} <= set(wb.sheetnames)
    for ws in wb.worksheets:
        for row in ws.iter_rows():
            for cell in row:
                assert cell.data_type != "f", (ws.title, cell.coordinate, cell.value)
    values = [c.value for c in wb["cases"]["A"]]
    assert '\'=HYPERLINK("http://example.invalid")' in values


def test_html_report_escapes_and_is_self_contained(injected, tmp_path):
    text = write_html(injected, tmp_path / "r.html").read_text(encoding="utf-8")
    assert "<script" not in text.lower()
    assert "&lt;script&gt;alert(1)&lt;/script&gt;" in text
    assert "<svg" in text
    # No external resources: no src/href attributes, no stylesheet links, no @import; the only URL is the
    # SVG namespace identifier and the escaped user text.
    assert not re.search(r"\s(src|href)\s*=", text)
    assert "<link" not in text and "@import" not in text
    assert "Planning and audit aid only" in text


def test_svg_bars_escape_labels():
    svg = svg_bars(["<b>&"], [2.0], "mL", "a < b")
    assert "&lt;b&gt;&amp;" in svg and "a &lt; b" in svg


def test_report_shows_counterfactual_when_present(injected):
    import dataclasses

    cf = {
        "policy": {"name": "<i>policy</i>"},
        "method": "m",
        "baseline": "recorded",
        "skipped": [],
        "totals": {
            "cases": 1,
            "baseline": {k: {"magnitude": 2.0} for k in ("agent_liquid", "fresh_gas", "co2e")},
            "policy": {k: {"magnitude": 1.0} for k in ("agent_liquid", "fresh_gas", "co2e")},
        },
    }
    text = report_html(dataclasses.replace(injected, counterfactual=cf))
    assert "Counterfactual: &lt;i&gt;policy&lt;/i&gt;" in text


def test_tables_report_escapes_everything_and_carries_the_caution():
    # OWASP XSS prevention (output encoding): no text of the input may become markup.
    import pandas as pd

    from estimator.caution import CAUTION
    from estimator.planning.html_report import tables_report_html

    evil = "<script>alert(1)</script>"
    page = tables_report_html(
        evil, {evil: pd.DataFrame({evil: [evil], "v": [1.5]})}, notes=[evil], warnings=[(evil, evil)]
    )
    assert "<script>" not in page
    # <title> and <h1>, the note, the section heading, the column, the cell, the warning code and text
    assert page.count("&lt;script&gt;") == 8
    assert html_text(CAUTION) in page


def html_text(text: str) -> str:
    import html

    return html.escape(text)
