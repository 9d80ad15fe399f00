"""One calibration summary row an agent (estimator.planning.calibration_report.calibration_rows), and the
faces that format it: the audit's text summary, its HTML report, its workbook sheet and the app's tables
(consistency checks between faces of one result, not a validation)."""

from __future__ import annotations

import pytest

from estimator.planning.calibration_report import calibration_frames, calibration_html, calibration_rows, file_rows

#: A check and calibration of two agents: one calibrated outside the supported range, one refused.
DOC = {
    "prediction_check": {
        "method": "m",
        "agents": {
            "sevoflurane": {"cases": 30, "median_ratio": 1.58, "low": 1.5, "high": 1.66},
            "isoflurane": {"cases": 3, "median_ratio": 0.9},
        },
        "cases": [],
        "skipped": [],
    },
    "calibration": {
        "method": "m",
        "agents": {"sevoflurane": {"factor": 1.6, "low": 1.52, "high": 1.7, "cases": 28, "supported": [0.69, 1.45]}},
        "refused": {"isoflurane": "3 usable case(s); at least 20 are needed"},
        "excluded": [],
        "warnings": [],
    },
}


def test_rows_carry_the_values_code_and_reason():
    sevo, iso = calibration_rows(DOC)
    assert (sevo.agent, sevo.factor, sevo.low, sevo.high, sevo.cases) == ("sevoflurane", 1.6, 1.52, 1.7, 28)
    assert (sevo.checked, sevo.median_ratio, sevo.ratio_low, sevo.ratio_high) == (30, 1.58, 1.5, 1.66)
    assert sevo.code == "UPTAKE_FACTOR_UNSUPPORTED" and sevo.status == "calibrated" and sevo.reason == ""
    assert iso.factor is None and iso.code is None and iso.status == "not calibrated"
    assert iso.reason.startswith("3 usable case(s)") and iso.ratio_low is None


def test_every_face_shows_the_rows():
    from estimator.cli.audit import _calibration_lines

    text = "\n".join(_calibration_lines(DOC))
    assert (
        "sevoflurane: 30 cases, ratio 1.58 (1.50-1.66); uptake factor 1.60 (95 % interval 1.52-1.70, 28 cases)" in text
    )
    assert "isoflurane: 3 cases, ratio 0.900 (n/a); not calibrated: 3 usable case(s)" in text
    page = calibration_html(DOC)
    assert "<td>sevoflurane</td><td>30</td><td>1.58 (1.50-1.66)</td><td>1.60 (1.52-1.70; 28 cases)</td>" in page
    assert "<td>isoflurane</td><td>3</td><td>0.90 (n/a)</td><td>not calibrated: 3 usable case(s)" in page
    sheet = calibration_frames(DOC)["calibration"]
    assert list(sheet["uptake factor"].fillna(-1)) == [1.6, -1]
    assert list(sheet["not calibrated because"]) == ["", DOC["calibration"]["refused"]["isoflurane"]]


@pytest.mark.parametrize(("factor", "code"), [(1.2, None), (0.6, "UPTAKE_FACTOR_UNSUPPORTED")])
def test_file_rows_flag_a_factor_outside_the_supported_range(factor, code):
    from calibration_helpers import calibration

    (row,) = file_rows(calibration(factor))
    assert row.factor == factor and row.cases == 40 and row.code == code and row.checked is None
