"""The audit log read in blocks gives what one read of the whole log gives: rows read, used and
rejected, physical line numbers, messages, warnings, samples and the audit itself.

The invented log below has three cases of 40 samples each (elapsed times and ISO 8601 timestamps),
rejected rows throughout, a row wider than the header, a short row, a blank line, a quoted room
spanning two lines, a case that changes its kind of time, a Unix time, samples out of order and a
weight that changes within a case. Read in blocks of 64 to 2000 bytes, every row and every
rejected row lies at or next to a block border for some block size, and every case crosses
borders.
"""

from __future__ import annotations

import io

import numpy as np
import pandas as pd
import pytest

from estimator.inputs.audit_log import log_from_text, read_log
from estimator.inputs.audit_source import LogSource
from estimator.planning.audit import audit

HEADER = (
    "case_id,time,oxygen_flow [mL/min],air_flow,nitrous_oxide_flow,agent,vaporizer_setting,"
    "end_tidal_agent,room,patient_weight,patient_age,note"
)


def _log() -> str:
    rows = [HEADER]
    for k in range(40):
        rows.append(
            f"E1,{k * 2.5},{500 + 10 * k},0.5,0,sevoflurane,{2 + k % 3 * 0.1:.1f},1.5,North 1,{70 + k // 30},50,"
        )
        minute = f"{k // 2:02d}:{k % 2 * 30:02d}"
        rows.append(f"T2,2025-03-0{1 + k // 20}T07:{minute}Z,1000,1,0,isoflurane,1.2,1.0,South 2,82,61,x")
        rows.append(f" E3 ,{k},800,1.2,0.5,Desflurane,5,,,,,")
        if k % 7 == 3:
            rows.append(f"E1,{k * 2.5 + 1},-5,0.5,0,sevoflurane,2,1.5,North 1,70,50,")  # refused: negative flow
        if k % 11 == 5:
            rows.append(f"E3,{k}.5,800,abc,0,xenon,5,,,,,")  # refused: two reasons
        if k % 13 == 6:
            rows.append(f"T2,{k},1000,1,0,isoflurane,1.2,1.0,South 2,82,61,x")  # refused: elapsed in a timestamp case
    rows[20] += ",surplus"  # 13 cells where the header has 12
    rows[31] = "E1,1,500"  # short: required cells missing
    rows[45] = ""  # blank line
    rows[50] = 'E1,51,500,0.5,0,sevoflurane,2,1.5,"North\n1",70,50,'  # a room over two lines
    rows[60] = "E3,1700000000,800,1.2,0.5,desflurane,5,,,,,"  # a Unix time
    rows[70], rows[73] = rows[73], rows[70]  # out of time order
    return "\n".join(rows) + "\n"


LOG = _log()
SIZES = list(range(64, 400, 23)) + [1000, 2000]


def _same(a, b) -> None:
    assert a.rows == b.rows
    assert a.rejections == b.rejections
    assert a.warnings == b.warnings
    assert (a.case_ids, a.case_start, a.case_room, a.case_month) == (
        b.case_ids,
        b.case_start,
        b.case_room,
        b.case_month,
    )
    assert a.agent_names == b.agent_names and a.units == b.units
    np.testing.assert_array_equal(a.case_weight, b.case_weight)
    np.testing.assert_array_equal(a.case_age, b.case_age)
    pd.testing.assert_frame_equal(a.samples, b.samples, check_exact=True)


def test_the_log_exercises_every_rule():
    whole = log_from_text(LOG)
    reasons = " | ".join(m for _, m in whole.rejections)
    for part in ("fields where the header has", "empty line", "empty", "mixes elapsed times", "Unix", "xenon"):
        assert part in reasons
    lines = dict(whole.rejections)  # list index i is physical line i + 1, one more after the two-line room
    assert "13 fields where the header has 12" in lines[21] and lines[46] == "empty line"
    assert "vaporizer_setting: empty" in lines[32] and "Unix" in lines[62]
    codes = {c for c, _ in whole.warnings}
    assert {"TIME_NOT_ELAPSED", "TIME_NOT_ORDERED", "PATIENT_VALUE_VARIES", "UNUSED_COLUMNS"} <= codes
    assert whole.rows["read"] == whole.rows["used"] + whole.rows["rejected"]
    assert whole.case_ids == ["E1", "T2", "E3"]
    assert len(list(LogSource.of_text(LOG, block_bytes=SIZES[0]).blocks())) > 50


@pytest.mark.parametrize("size", SIZES)
def test_blocks_give_the_one_shot_result(size):
    _same(log_from_text(LOG, block_bytes=size), log_from_text(LOG))


def test_every_source_type_in_blocks(tmp_path):
    whole = log_from_text(LOG)
    path = tmp_path / "log.csv"
    path.write_bytes(LOG.encode())
    data = LOG.encode()
    for source in (path, str(path), data, io.BytesIO(data), io.StringIO(LOG)):
        _same(read_log(source, block_bytes=97), whole)


@pytest.mark.parametrize("eol", ["\r\n", "\r"])
def test_line_ends_other_than_newline(eol):
    text = LOG.replace("\n", eol).replace(f'"North{eol}1"', '"North\n1"')
    whole = log_from_text(LOG)
    for size in (71, 150, 10_000):
        log = log_from_text(text, block_bytes=size)
        _same(log, whole)


def test_audit_totals_do_not_depend_on_the_block_size():
    whole = audit(log_from_text(LOG))
    for size in (64, 131):
        part = audit(log_from_text(LOG, block_bytes=size))
        pd.testing.assert_frame_equal(part.cases, whole.cases, check_exact=True)
        assert part.totals == whole.totals and part.warnings == whole.warnings


def test_a_case_after_2262_keeps_its_start():
    # Starts are formatted from microseconds (datetime64[us], +-290 000 years), not nanoseconds,
    # whose range ends in 2262.
    log = log_from_text(
        "case_id,time,oxygen_flow,air_flow,nitrous_oxide_flow,agent,vaporizer_setting\n"
        "F,2300-01-01T08:00:00Z,1,1,0,sevoflurane,2\nF,2300-01-01T08:30:00.25Z,1,1,0,sevoflurane,2\n"
    )
    assert log.case_start == ["2300-01-01T08:00:00+00:00"] and log.case_month == ["2300-01"]
    assert log.samples["t_min"].tolist() == pytest.approx([0.0, 30.0 + 0.25 / 60], abs=1e-6)  # float minutes since 1970


@pytest.mark.parametrize("first_cell", ["A", "0"])
def test_a_first_row_wider_than_the_header_is_refused_not_shifted(first_cell):
    # The C reader takes the extra cells of a first row for an index (also when the ids are
    # 0, 1, ... and the index looks like a plain row count); such a row is refused like any other.
    head = "case_id,time,oxygen_flow,air_flow,nitrous_oxide_flow,agent,vaporizer_setting"
    log = log_from_text(f"{head}\n{first_cell},0,1,1,0,sevoflurane,2,surplus\n1,5,1,1,0,sevoflurane,2\n")
    assert log.rejections == [(2, "8 fields where the header has 7")]
    assert log.case_ids == ["1"] and log.samples["oxygen"].tolist() == [1.0]


def test_carriage_return_line_ends_around_a_quoted_newline():
    # Lines end in \r; the quoted room holds a \n: the bad row starts on physical line 4.
    head = "case_id,time,oxygen_flow,air_flow,nitrous_oxide_flow,agent,vaporizer_setting,room"
    log = log_from_text(f'{head}\rA,0,1,1,0,sevoflurane,2,"North\n1"\rA,x,1,1,0,sevoflurane,2,N\r')
    assert [line for line, _ in log.rejections] == [4] and log.rows["used"] == 1
