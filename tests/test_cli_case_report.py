"""``lowflow case FILE --report``: the plan's format follows the file's suffix (HTML or PDF); a PDF
needs the pdf extra, and without it the error says how to install it (consistency)."""

import sys

import pytest
from contract_helpers import SCENARIO, run

from estimator.caution import CAUTION


@pytest.fixture
def scenario(tmp_path):
    f = tmp_path / "s.toml"
    f.write_text(SCENARIO)
    return f


@pytest.mark.parametrize("name", ["plan.html", "plan.htm", "plan.HTML"])
def test_an_html_suffix_writes_the_html_plan(scenario, tmp_path, capsys, name):
    code, _, err = run(capsys, "case", str(scenario), "--report", str(tmp_path / name))
    assert code == 0, err
    page = (tmp_path / name).read_text(encoding="utf-8")
    assert page.startswith("<!DOCTYPE html>") and CAUTION[:40] in page


def test_a_pdf_suffix_writes_the_pdf_plan(scenario, tmp_path, capsys):
    pytest.importorskip("fpdf")
    target = tmp_path / "plan.pdf"
    code, _, err = run(capsys, "case", str(scenario), "--report", str(target))
    assert code == 0, err
    pdf = target.read_bytes()
    assert pdf.startswith(b"%PDF-") and pdf.count(b"/Type /Page\n") >= 1
    assert b"/Title (Case plan: sevoflurane)" in pdf


@pytest.mark.parametrize("name", ["plan.txt", "plan", "plan.pdf.bak"])
def test_another_suffix_is_an_error_naming_the_option_the_value_and_the_suffixes(scenario, tmp_path, capsys, name):
    target = tmp_path / name
    code, out, err = run(capsys, "case", str(scenario), "--report", str(target))
    assert code == 2 and not target.exists()
    assert "--report" in err and repr(str(target)) in err
    assert all(s in err for s in (".html", ".htm", ".pdf")) and len(err.strip().splitlines()) == 1


def test_without_the_pdf_extra_a_pdf_plan_is_one_line_naming_the_extra(scenario, tmp_path, capsys, monkeypatch):
    monkeypatch.setitem(sys.modules, "fpdf", None)  # import fpdf now raises ImportError, as when not installed
    target = tmp_path / "plan.pdf"
    code, out, err = run(capsys, "case", str(scenario), "--report", str(target))
    assert code == 2 and not target.exists() and out == ""
    lines = err.strip().splitlines()
    assert len(lines) == 1 and "--report" in lines[0]
    assert 'pip install "lowflow-estimator[pdf]"' in lines[0]
    # The HTML plan needs nothing more.
    assert run(capsys, "case", str(scenario), "--report", str(tmp_path / "plan.html"))[0] == 0


def test_the_library_call_without_the_extra_names_it_too(monkeypatch):
    from estimator.errors import InputError
    from estimator.planning.case_plan import CasePlan
    from estimator.planning.case_plan_pdf import plan_pdf

    monkeypatch.setitem(sys.modules, "fpdf", None)
    with pytest.raises(InputError, match=r"lowflow-estimator\[pdf\]"):
        plan_pdf(CasePlan("t", [], {}, [], "monitor"))
