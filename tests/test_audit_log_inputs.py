"""Audit-log inputs: text is never a path, physical line numbers, short rows, epoch times,
per-case patient values and the range of the time column."""

from __future__ import annotations

import io
import os
from pathlib import Path

import pytest

from estimator.cli import main
from estimator.errors import InputError
from estimator.inputs.audit_log import MAX_ELAPSED_MIN, log_from_text, read_log
from estimator.planning.audit import audit

HEADER = "case_id,time,oxygen_flow,air_flow,nitrous_oxide_flow,agent,vaporizer_setting,room,patient_weight"
GOOD = "A,{t},1,1,0,sevoflurane,2,theatre 1,70"
MULTILINE = 'A,0,1,1,0,sevoflurane,2,"theatre 1\nnorth wing",70'  # one record over lines 2-3


def _codes(log):
    return {code for code, _ in log.warnings}


# ------------------------------------------------------------------ text is never a path
def test_text_is_never_a_path(tmp_path, monkeypatch):
    monkeypatch.chdir(tmp_path)
    (tmp_path / "log.csv").write_text(HEADER + "\n" + GOOD.format(t=0) + "\n")
    text = HEADER + "\n" + GOOD.format(t=0) + "\n"
    with pytest.raises(InputError) as err:
        read_log(text)  # a str given to the path reader is a path, and this one is text
    assert "log_from_text" in err.value.expected
    with pytest.raises(InputError) as err:
        log_from_text("log.csv")  # text: a header without the columns, never opened
    assert "missing" in str(err.value)
    assert read_log("log.csv").rows["used"] == 1
    assert read_log(Path("log.csv")).rows["used"] == 1


def test_uploads_by_type():
    data = (HEADER + "\n" + GOOD.format(t=0) + "\n").encode()
    for source in (data, io.BytesIO(data), io.StringIO(data.decode())):
        assert read_log(source).rows["used"] == 1
    with pytest.raises(InputError) as err:
        read_log(b"\xff\xfe" + data)
    assert err.value.field == "log"


@pytest.mark.skipif(not os.path.exists("/dev/zero"), reason="needs /dev/zero")
def test_a_device_is_refused_unread():
    with pytest.raises(InputError) as err:
        read_log("/dev/zero")  # reading it would never end
    assert err.value.field == "log"


# ------------------------------------------------------------------ physical line numbers (item 4)
def _with_multiline(extra_wide_row: bool) -> str:
    rows = [HEADER, MULTILINE, GOOD.format(t=5), "A,x,1,1,0,sevoflurane,2,theatre 1,70"]
    if extra_wide_row:
        rows.append(GOOD.format(t=9) + ",surplus")
    return "\n".join(rows) + "\n"


@pytest.mark.parametrize("slow", [False, True], ids=["fast reader", "slow reader"])
def test_rejections_name_the_physical_line(slow):
    # The quoted room spans lines 2-3, so the bad time is on line 5 (the 4th record). The fast C
    # reader numbered records, reporting line 4; a row with a surplus cell sends the file to the
    # slow csv reader, which must agree.
    log = log_from_text(_with_multiline(slow))
    lines = dict(log.rejections)
    assert "time" in lines[5] and 4 not in lines
    if slow:
        assert "fields where the header has" in lines[6]
    assert log.samples["line"].tolist() == [2, 4]


# ------------------------------------------------------------------ short rows (item 5)
@pytest.mark.parametrize("wide", [False, True], ids=["no long row", "with a long row"])
def test_short_rows_follow_one_rule(wide):
    # A row without its trailing optional cells (room, patient_weight) reads them as empty,
    # whatever the other rows look like; a row with more cells than the header is rejected.
    rows = [HEADER, GOOD.format(t=0), "A,5,1,1,0,sevoflurane,2", "A,10,1,1,0,sevoflurane"]
    if wide:
        rows.append(GOOD.format(t=20) + ",surplus")
    log = log_from_text("\n".join(rows) + "\n")
    lines = dict(log.rejections)
    assert 3 not in lines  # short, optional cells missing: used
    assert lines[4] == "vaporizer_setting: empty"  # a required cell missing: rejected, by its line
    assert log.rows["used"] == 2
    if wide:
        assert "10 fields where the header has 9" in lines[5]


# ------------------------------------------------------------------ epoch times, time range (items 6, 9)
@pytest.mark.parametrize("t", ["1700000000", "1e300", "-2e6"])
def test_times_beyond_any_case_are_refused(t):
    log = log_from_text(f"{HEADER}\n{GOOD.format(t=0)}\nB,{t},1,1,0,sevoflurane,2,,\nB,{t}1,1,1,0,sevoflurane,2,,\n")
    lines = dict(log.rejections)
    assert set(lines) == {3, 4} and "Unix" in lines[3] and f"{MAX_ELAPSED_MIN:g}" in lines[3]
    message = dict(log.warnings)["TIME_NOT_ELAPSED"]
    assert "'B'" in message and "time" in message


def test_epoch_seconds_in_the_cli_are_named(capsys, tmp_path):
    path = tmp_path / "log.csv"
    path.write_text(f"{HEADER}\nC7,1700000000,1,1,0,sevoflurane,2,,\nC7,1700000060,1,1,0,sevoflurane,2,,\n")
    with pytest.raises(SystemExit):
        main(["audit", str(path)])
    out = capsys.readouterr().out
    assert "TIME_NOT_ELAPSED" in out and "'C7'" in out


def test_two_weights_in_one_case_are_named():
    log = log_from_text(f"{HEADER}\nA,0,1,1,0,sevoflurane,2,t1,70\nA,5,1,1,0,sevoflurane,2,t1,82\nB,0,1,1,0,,0,t1,60\n")
    message = dict(log.warnings)["PATIENT_VALUE_VARIES"]
    assert message.startswith("patient_weight:") and "'A'" in message and "70-82 kg" in message
    assert "'B'" not in message
    assert audit(log).cases["patient_weight_kg"].tolist() == [70.0, 60.0]
