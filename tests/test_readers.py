"""Readers: the file scan, and the fast path (DuckDB's CSV parser) against the line-by-line path."""

from __future__ import annotations

from datetime import datetime, timedelta, timezone
from pathlib import Path

import pytest

from pipeline.db import open_database
from pipeline.settings import Settings
from pipeline.sources import ingest, readers
from pipeline.sources.ingest import ingest_file, ingest_paths, iter_ingest
from pipeline.sources.profiles import CANONICAL
from ingest_fixture import HEADER, INSTRUMENTS, good_row, write_reference

KEY = b"test-key"


@pytest.mark.parametrize("data, lines, clean", [
    (b"a,b\n1,2\n", 2, True),
    (b"a,b\n1,2", 2, True),                 # last line without a line break counts
    (b"a,b\r\n1,2\r\n", 2, True),           # CR LF throughout
    (b"a,b\n1,2\r\n3,4\n", 3, False),       # a stray CR LF in an LF file
    (b"a,b\n1\r2\n", 2, False),             # a lone CR
    (b"", 0, True),
])
def test_scan_counts_lines_and_line_endings(tmp_path, data, lines, clean):
    path = tmp_path / "f.csv"
    path.write_bytes(data)
    scan = readers.scan_file(path)
    assert (scan.lines, scan.clean_endings) == (lines, clean)
    # FIPS 180-4 SHA-256, through Python's hashlib (general-purpose reference library)
    import hashlib
    assert scan.sha256 == hashlib.sha256(data).hexdigest()


@pytest.mark.parametrize("data, padded", [
    (b"a,b\n1,2\n", False),
    (b"a,b\n1 ,2\n", True),
    (b"a,b\n1, 2\n", True),
    (b"a,b\n 1,2\n", True),
    (b"a,b\n1,2 \n", True),
    (b"a,b\n1,\t2\n", True),
    (b"a,b\n1 x,2\n", False),               # a space inside a field is data, not padding
])
def test_scan_finds_padded_fields(tmp_path, data, padded):
    path = tmp_path / "f.csv"
    path.write_bytes(data)
    assert readers.scan_file(path).padded is padded


def test_scan_finds_padding_across_a_block_boundary(tmp_path):
    path = tmp_path / "f.csv"
    head = b"a,b\n" + b"x" * ((1 << 20) - 5) + b","     # the comma is the last byte of the first block
    path.write_bytes(head + b" 2\n")
    assert path.read_bytes()[(1 << 20) - 1:(1 << 20) + 1] == b", "
    assert readers.scan_file(path).padded


def _fleet_file(path: Path, n: int) -> dict[int, str]:
    """n rows (over two DuckDB row groups) with bad rows at known lines and one exact repeat at the
    end; returns {line: reason} of the bad rows."""
    start = datetime(2026, 1, 1, tzinfo=timezone.utc)
    bad, rows = {}, []
    for i in range(n):
        at = (start + timedelta(seconds=i)).isoformat()
        lot, measured = "L1", f"0.0{79 + i % 3}"
        if i % 50_000 == 7:
            lot = "NOPE"
            bad[i + 2] = "unknown_lot"
        elif i % 50_000 == 11:
            measured = "abc"
            bad[i + 2] = "unparsable_field"
        rows.append(f"U{1 + i % 2},{at},{lot},control,0.080,{measured},g/210L,34.00,,S-1,OP-{i % 7},pass")
    rows.append(rows[0])
    path.write_text(HEADER + "\n".join(rows) + "\n", encoding="utf-8")
    return bad


def _contents(con):
    checks = con.execute("SELECT * EXCLUDE (file_id) FROM checks ORDER BY check_id").fetchall()
    quarantine = con.execute("SELECT line, field, reason, raw_line FROM quarantine ORDER BY line, field").fetchall()
    ledger = con.execute("SELECT rows_read, rows_stored, rows_duplicate, rows_quarantined FROM ingest_ledger "
                         "WHERE table_name = 'checks'").fetchall()
    return checks, quarantine, ledger


@pytest.fixture
def two_databases(tmp_path, monkeypatch):
    monkeypatch.setenv("BREATHFLEET_OPERATOR_KEY", KEY.decode())
    cons = []
    for name in ("fast", "lines"):
        con = open_database(tmp_path / f"{name}.duckdb")
        ingest_paths(con, write_reference(tmp_path), Settings())
        cons.append(con)
    yield tmp_path, cons
    for con in cons:
        con.close()


@pytest.mark.parametrize("parse_ahead", [True, False], ids=["parsed-ahead", "parsed-by-writer"])
def test_fast_path_stores_and_quarantines_what_the_line_path_does(two_databases, parse_ahead):
    tmp, (fast, lines) = two_databases
    path = tmp / "checks.csv"
    bad = _fleet_file(path, 260_000)
    now = datetime.now(timezone.utc)
    if parse_ahead:   # as iter_ingest's worker threads do it
        prepared = ingest._read_ahead(path, CANONICAL, None, ingest._reference_snapshot(fast), Settings(), now, KEY)
        assert prepared.parsed is not None and prepared.parsed.rows.num_rows == 260_001
    else:
        prepared = readers.prepare_file(path, CANONICAL)
        assert prepared.parsed is None
    assert prepared.records is not None and prepared.records.num_rows == 260_001
    ingest_file(fast, path, Settings(), now=now, prepared=prepared)
    ingest_file(lines, path, Settings(), prepared=readers.Prepared(path, prepared.scan, prepared.header, None))
    got_fast, got_lines = _contents(fast), _contents(lines)
    assert got_fast == got_lines
    checks, quarantine, ledger = got_fast
    # every bad row is quarantined at its physical line (header = line 1), with that line's text
    text = path.read_text(encoding="utf-8").split("\n")
    assert {(q[0], q[2]) for q in quarantine} == set(bad.items())
    assert all(q[3] == text[q[0] - 1] for q in quarantine)
    assert ledger == [(260_001, 260_001 - len(bad) - 1, 1, len(bad))]
    assert all(c[-1] not in bad for c in checks)


def test_a_clean_file_parsed_ahead_is_stored_without_reading_its_records(two_databases):
    tmp, (con, lines) = two_databases
    path = tmp / "clean.csv"
    path.write_text(HEADER + "\n".join(good_row(i) for i in range(300)) + "\n", encoding="utf-8")
    now = datetime.now(timezone.utc)
    prepared = ingest._read_ahead(path, CANONICAL, None, ingest._reference_snapshot(con), Settings(), now, KEY)
    assert prepared.records is None and prepared.parsed.bad == 0 and prepared.parsed.rows.num_rows == 300
    result = ingest_file(con, path, Settings(), now=now, prepared=prepared)
    ingest_file(lines, path, Settings(), now=now, prepared=readers.Prepared(path, prepared.scan, prepared.header, None))
    assert (result.rows_read, result.rows_stored, result.rows_quarantined) == (300, 300, 0)
    assert _contents(con) == _contents(lines)


def test_check_ids_unique_and_increasing_in_ingest_order(two_databases):
    tmp, (con, _) = two_databases
    files = []
    for k in range(3):
        p = tmp / f"c{k}.csv"
        p.write_text(HEADER + "\n".join(good_row(i + 1000 * k) for i in range(500)) + "\n", encoding="utf-8")
        files.append(p)
    results = list(iter_ingest(con, files, Settings()))
    assert [r.rows_stored for r in results] == [500, 500, 500]
    n, distinct, ordered = con.execute("""
        SELECT count(*), count(DISTINCT check_id),
               bool_and(check_id > prev) FROM (SELECT check_id, lag(check_id, 1, 0) OVER (ORDER BY file_id, line) AS prev
                                               FROM checks)""").fetchone()
    assert n == distinct == 1500 and ordered


def test_files_parsed_ahead_see_reference_tables_ingested_before_them(tmp_path, monkeypatch):
    """One run: an instruments file that moves U1's entry into service after the checks, then two
    check files. The check files were read and parsed ahead while the old date held (when the
    rows were fine); the writer must parse them again and quarantine them."""
    monkeypatch.setenv("BREATHFLEET_OPERATOR_KEY", KEY.decode())
    con = open_database(tmp_path / "db.duckdb")
    ingest_paths(con, write_reference(tmp_path), Settings())
    later = tmp_path / "update" / "instruments.csv"
    later.parent.mkdir()
    later.write_text(INSTRUMENTS.replace("U1,fuel_cell,Model A,S-1,North,2024-01-01",
                                         "U1,fuel_cell,Model A,S-1,North,2026-06-01"), encoding="utf-8")
    checks = []
    for k in range(2):
        p = tmp_path / f"c{k}.csv"
        p.write_text(HEADER + "\n".join(good_row(i + 100 * k) for i in range(50)) + "\n", encoding="utf-8")
        checks.append(p)
    results = list(iter_ingest(con, [later] + checks, Settings()))
    assert [(r.table, r.rows_stored, r.rows_quarantined) for r in results] == [
        ("instruments", 1, 0), ("checks", 0, 50), ("checks", 0, 50)]
    assert con.execute("SELECT DISTINCT reason FROM quarantine").fetchall() == [("before_in_service",)]
    con.close()


def test_padded_fields_are_trimmed_on_the_fast_path(two_databases):
    tmp, (con, _) = two_databases
    path = tmp / "padded.csv"
    path.write_text(HEADER + " " + good_row(1).replace(",L1,", ", L1 ,") + "\n", encoding="utf-8")
    prepared = readers.prepare_file(path, CANONICAL)
    assert prepared.scan.padded and prepared.records is not None
    result = ingest_file(con, path, Settings(), prepared=prepared)
    assert (result.rows_stored, result.rows_quarantined) == (1, 0)
    assert con.execute("SELECT instrument_id, lot_id FROM checks").fetchall() == [("U1", "L1")]


def test_scan_finds_lines_that_are_not_utf8(tmp_path):
    # the UTF-8 byte sequences of RFC 3629 (section 4), through Python's codecs
    path = tmp_path / "f.csv"
    path.write_bytes(b"a,b\n1,\xc3\xa9\n2,\xff\n3,x\n4,\xe2\x82\n")   # valid e-acute; 0xff; a cut euro sign
    assert readers.scan_file(path).unreadable == (3, 5)
    # Latin-1 decodes every byte (Python's codecs, the reference for the encodings)
    assert readers.scan_file(path, encoding="latin-1").unreadable == ()


def test_scan_decodes_a_character_split_across_a_block_boundary(tmp_path):
    path = tmp_path / "f.csv"
    head = b"a,b\n" + b"x" * ((1 << 20) - 6) + b","
    path.write_bytes(head + "€\n".encode("utf-8"))     # the euro sign's 3 bytes straddle the 1 MiB boundary
    assert path.read_bytes()[(1 << 20) - 1:(1 << 20) + 2] == "€".encode("utf-8")
    assert readers.scan_file(path).unreadable == ()


def test_lines_that_are_not_text_are_quarantined_and_the_rest_stored(two_databases):
    tmp, (con, _) = two_databases
    rows = [good_row(i).encode() for i in range(6)]
    rows[2] = rows[2].replace(b"OP-", b"OP\xff-")           # operator_id, line 4
    rows[4] = rows[4].replace(b",L1,", b",L\xc3,")           # lot_id, line 6 (a cut two-byte sequence)
    path = tmp / "bytes.csv"
    path.write_bytes(HEADER.encode() + b"\n".join(rows) + b"\n")
    result = list(iter_ingest(con, [path], Settings()))[0]
    assert (result.rows_read, result.rows_stored, result.rows_duplicate, result.rows_quarantined) == (6, 4, 0, 2)
    got = con.execute("SELECT line, field, reason, message, raw_line FROM quarantine ORDER BY line").fetchall()
    assert [(g[0], g[1], g[2]) for g in got] == [(4, "operator_id", "malformed_line"), (6, "lot_id", "malformed_line")]
    assert got[0][3].startswith("not valid utf-8 text: byte 0xff") and "OP\\xff-" in got[0][4]
    assert con.execute("SELECT count(*) FROM checks WHERE line IN (4, 6)").fetchone()[0] == 0


@pytest.mark.parametrize("ending", [b"\r\n", b"\n"])
def test_a_stray_carriage_return_keeps_line_numbers_and_its_line_is_quarantined(two_databases, ending):
    """An LF file with one CR LF line, and one line holding a CR inside it: DuckDB's line reader
    would split there; the lines after must keep their physical numbers."""
    tmp, (con, _) = two_databases
    rows = [good_row(i).encode() for i in range(6)]
    rows[1] += b"\r"                                       # line 3 ends in CR LF
    rows[3] = rows[3].replace(b",S-1,", b",S-\r1,")         # line 5: a CR inside the site_id
    path = tmp / "cr.csv"
    path.write_bytes(HEADER.encode() + b"\n".join(rows) + ending)
    scan = readers.scan_file(path)
    assert (scan.lines, scan.clean_endings, scan.unreadable) == (7, False, (5,))
    result = list(iter_ingest(con, [path], Settings()))[0]
    assert (result.rows_read, result.rows_stored, result.rows_quarantined) == (6, 5, 1)
    assert con.execute("SELECT list(line ORDER BY line) FROM checks").fetchone()[0] == [2, 3, 4, 6, 7]
    assert con.execute("SELECT line, field, reason FROM quarantine").fetchall() == [(5, "site_id", "malformed_line")]


@pytest.mark.parametrize("line_break", [b"\n", b"\r\n", b"\r"])
def test_a_byte_order_mark_and_any_one_line_break_are_read(two_databases, line_break):
    tmp, (con, _) = two_databases
    path = tmp / "bom.csv"
    text = HEADER + "\n".join(good_row(i) for i in range(5)) + "\n"
    path.write_bytes(b"\xef\xbb\xbf" + text.encode().replace(b"\n", line_break))   # UTF-8 BOM (Unicode 15, 23.8)
    result = list(iter_ingest(con, [path], Settings()))[0]
    assert (result.rows_read, result.rows_stored, result.rows_quarantined) == (5, 5, 0)
    assert con.execute("SELECT list(line ORDER BY line) FROM checks").fetchone()[0] == [2, 3, 4, 5, 6]


def test_both_paths_trim_padding_inside_quotes(two_databases):
    """The fast path trims a padded file's fields after DuckDB's parser removed the quotes; the line
    path must store the same values."""
    tmp, (fast, lines) = two_databases
    path = tmp / "quoted.csv"
    path.write_text(HEADER + good_row(1).replace(",L1,", ',"  L1 ",').replace(",OP-1,", ',"OP-1 ",') + "\n",
                    encoding="utf-8")
    prepared = readers.prepare_file(path, CANONICAL)
    assert prepared.records is not None and prepared.scan.padded
    ingest_file(fast, path, Settings(), prepared=prepared)
    ingest_file(lines, path, Settings(), prepared=readers.Prepared(path, prepared.scan, prepared.header, None))
    assert _contents(fast) == _contents(lines)
    assert fast.execute("SELECT lot_id FROM checks").fetchall() == [("L1",)]
