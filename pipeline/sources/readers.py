"""Read a source file as text into the staging table `_src`, one row per record, with its line number.

CSV and JSON lines are read by DuckDB's CSV reader as one VARCHAR column per physical line
(`WITH ORDINALITY` gives the line number, the header is line 1), so a bad line is a row to
quarantine, never a reason to fail the file. Blank lines are not records and are skipped.

- CSV: fields are split on the delimiter in SQL (a quote-aware RE2 split for lines that contain
  `"`). A line with an odd number of double quotes opens or closes a quoted field that holds a line
  break (RFC 4180, section 2, rule 6); the lines from one such line to the next are joined into one
  record, numbered by its first line, when the joined text has the header's field count. An odd
  line that cannot be joined so (a quote never closed, or a stray quote) is malformed.
- JSON lines: each line must be one JSON object (`json_valid`, `json_type`); fields are taken by
  JSON pointer, so profile column names stay parameters and never reach SQL text.
- Parquet: DuckDB's reader, every column cast to VARCHAR, line = record number.

`_src` holds: line, _malformed, _raw, the canonical columns as VARCHAR (and _tz), and for a CSV
file with unbalanced quotes _odd. Everything runs in DuckDB: no Python loop per row.

Fast path for the common CSV file (a header line, one record per physical line): DuckDB's own
CSV parser reads the fields directly (RFC 4180 quoting, strict: a wrong field count is an error).
It is taken only when `scan_file` saw clean line endings and the parser returns exactly one record
per line after the header, so `WITH ORDINALITY` + 1 is the physical line number. `prepare_file`
does this without the database, and `_src` is then a view over the prepared records (ingest's
worker threads go further: they parse a checks file straight from `csv_records`). Otherwise the
file is staged as lines as above. The
fast path's `_src` has no `_raw`: `raw_lines` reads the physical lines of the rows that go to
quarantine.
"""

from __future__ import annotations

import codecs
import hashlib
import os
import re
import tempfile
from dataclasses import dataclass
from pathlib import Path

import duckdb

from pipeline.errors import InputError
from pipeline.sources.profiles import CANONICAL_COLUMNS, SourceProfile

# SQL text of the quarantine message of a malformed row in `_src`, by format.
MALFORMED_MESSAGE = {
    "csv": "'wrong number of fields'",
    "csv_quotes": "CASE WHEN _odd THEN 'unbalanced double quote: a quoted field is not closed on this line and no "
           "later line closes it into a row with the header''s field count' ELSE 'wrong number of fields' END",
    "jsonl": "'not a JSON object (malformed JSON line)'",
    "parquet": "'malformed record'",
}

# read_csv as one text column per physical line: no delimiter, quote or escape of its own.
_LINES = ("read_csv($path, columns={'raw': 'VARCHAR'}, delim=chr(1), quote='', escape='', header=false, "
          "auto_detect=false, encoding=$enc, strict_mode=false) WITH ORDINALITY")


@dataclass(frozen=True)
class FileScan:
    """What one pass over a file's bytes tells: its SHA-256, its lines, whether fields are padded."""

    sha256: str
    lines: int            # physical lines (a last line without a line break counts)
    clean_endings: bool   # every line ends in LF, or every one in CR LF, or every one in CR: no stray CR
    padded: bool          # a space or tab next to a delimiter, quote or line break, or a tab anywhere
    unreadable: tuple[int, ...] = ()   # lines that are not text: see `unreadable_lines`


def scan_file(path: Path, delimiter: str = ",", encoding: str | None = "utf-8") -> FileScan:
    """Hash the file, count its line breaks, look for padded fields and check the text decodes, in
    one read (1 MiB blocks).

    Padding is a space next to a field boundary: each block is translated so the delimiter, the
    double quote and CR all read as LF, and then two searches (" \\n", "\\n ") find a space on either
    side of any boundary (half the time of one search per boundary and side). Only blocks that are
    not plain ASCII go through the decoder (of an ASCII-compatible encoding); when one fails, or the
    line endings are mixed, a second pass finds the unreadable lines. `encoding` None: a binary
    format (Parquet), only hashed.
    """
    digest = hashlib.sha256()
    newlines = crs = crlfs = 0
    padded = False
    d = delimiter.encode("utf-8") if len(delimiter.encode("utf-8")) == 1 else None
    bounds = bytes.maketrans(d + b'"\r', b"\n\n\n") if d else None
    last = b""
    decoder = _ascii_compatible_decoder(encoding) if encoding else None
    decodes = True
    with open(path, "rb") as fh:
        for block in iter(lambda: fh.read(1 << 20), b""):
            digest.update(block)
            if encoding is None:
                continue
            if decodes and decoder and (not block.isascii() or decoder.getstate()[0]):
                decodes = _decodes(decoder, block)
            newlines += block.count(b"\n")
            cr = block.count(b"\r")   # single-byte searches are fast; pairs only when needed
            crs += cr
            crlfs += (block.count(b"\r\n") if cr else 0) + (last == b"\r" and block[:1] == b"\n")
            if not padded:
                if bounds is None or b"\t" in block:
                    padded = True
                elif b" " in block or last == b" ":
                    edged = (last + block).translate(bounds)   # with the previous block's last byte
                    padded = b" \n" in edged or b"\n " in edged
            last = block[-1:]
    if encoding is None:
        return FileScan(digest.hexdigest(), 0, True, False)
    if newlines == 0 and crs > 0:   # CR alone ends every line (classic Mac OS)
        lines, clean = crs + (1 if last != b"\r" else 0), True
    else:
        lines, clean = newlines + (1 if last not in (b"", b"\n") else 0), crs == 0 or crs == crlfs == newlines
    if decodes and decoder:
        decodes = _decodes(decoder, b"", final=True)
    unreadable = () if decodes and clean else tuple(u.line for u in unreadable_lines(path, encoding))
    return FileScan(digest.hexdigest(), lines, clean, padded or last == b" ", unreadable)


def _ascii_compatible_decoder(encoding: str):
    """An incremental decoder for `encoding` when ASCII bytes mean ASCII in it (UTF-8, Latin-1,
    Windows-1252 ...), else None (no check)."""
    try:
        if b"\n,;\t\"az09".decode(encoding) != "\n,;\t\"az09":
            return None
        return codecs.getincrementaldecoder(encoding)()
    except (LookupError, UnicodeDecodeError):
        return None


def _decodes(decoder, block: bytes, final: bool = False) -> bool:
    try:
        decoder.decode(block, final)
        return True
    except UnicodeDecodeError:
        return False


@dataclass(frozen=True)
class UnreadableLine:
    """A physical line that cannot be read as text: not valid in the file's encoding, or holding a
    carriage return that is not part of its line break (DuckDB's readers would split the line there)."""

    line: int
    raw: bytes        # without its line break
    at: int           # offset of the first bad byte
    encoding: str

    @property
    def message(self) -> str:
        if self.raw[self.at:self.at + 1] == b"\r":
            return f"a carriage return at byte {self.at + 1} of the line is not part of its line break"
        return (f"not valid {self.encoding} text: byte 0x{self.raw[self.at]:02x} at byte {self.at + 1} "
                "of the line")

    @property
    def text(self) -> str:
        """The line, with bytes that are not text written as \\x escapes."""
        return self.raw.decode(self.encoding, "backslashreplace")

    def field(self, header: list[str], delimiter: str) -> str | None:
        """The column holding the first bad byte (by delimiters before it; quotes not considered)."""
        k = self.raw[:self.at].count(delimiter.encode(self.encoding))
        return header[k] if k < len(header) else None


def _line_body(raw: bytes) -> bytes:
    """A physical line without its line break (LF or CR LF)."""
    body = raw[:-1] if raw.endswith(b"\n") else raw
    return body[:-1] if body.endswith(b"\r") else body


def unreadable_lines(path: Path, encoding: str) -> list[UnreadableLine]:
    """The lines of the file that cannot be read as text (see UnreadableLine)."""
    out = []
    with open(path, "rb") as fh:
        for n, raw in enumerate(fh, 1):
            body = _line_body(raw)
            cr = body.find(b"\r")
            if cr >= 0:
                out.append(UnreadableLine(n, body, cr, encoding))
                continue
            try:
                body.decode(encoding)
            except UnicodeDecodeError as exc:
                out.append(UnreadableLine(n, body, exc.start, encoding))
    return out


def readable_copy(path: Path, unreadable: tuple[int, ...]) -> Path:
    """A temporary copy of the file, every line ending in LF and the `unreadable` lines left empty
    (so line numbers stay those of the file); the caller removes it."""
    skip = set(unreadable)
    fd, name = tempfile.mkstemp(suffix=path.suffix, prefix="breathfleet-")
    with open(path, "rb") as src, os.fdopen(fd, "wb") as dst:
        for n, raw in enumerate(src, 1):
            dst.write((b"" if n in skip else _line_body(raw)) + b"\n")
    return Path(name)


def scan_source(path: Path, profile: SourceProfile) -> FileScan:
    """scan_file with the profile's delimiter, and its encoding for a text format."""
    text = file_format(path, profile) != "parquet"
    return scan_file(path, profile.delimiter, profile.encoding if text else None)


def file_format(path: Path, profile: SourceProfile) -> str:
    """csv, jsonl or parquet: the profile's format, else the file suffix."""
    if profile.format:
        return profile.format
    suffix = path.suffix.lower()
    if suffix in (".jsonl", ".ndjson", ".json"):
        return "jsonl"
    if suffix == ".parquet":
        return "parquet"
    return "csv"


def read_header(path: Path, profile: SourceProfile) -> list[str]:
    """Column names of a CSV file's first line."""
    try:
        with open(path, "rb") as fh:
            head = b""
            while not re.search(b"[\r\n]", head) and (chunk := fh.read(1 << 16)):
                head += chunk
        first = re.split(b"\r|\n", head, maxsplit=1)[0].decode(profile.encoding)
        first = first.removeprefix("\ufeff")   # a byte order mark
    except UnicodeDecodeError as exc:
        raise InputError(f"the header is not valid {profile.encoding} text", file=str(path), line=1) from exc
    except (OSError, LookupError) as exc:
        raise InputError(f"cannot read file: {exc}", file=str(path)) from exc
    return [c.strip().strip('"') for c in first.split(profile.delimiter)]


def _quoted_field_pattern(delim: str) -> str:
    """RE2 pattern whose group 1 is each field of a line with double-quoted fields."""
    d = re.escape(delim)
    return f'(?:^|{d})("(?:[^"]|"")*"|[^{d}"]*)'


def _wanted(profile: SourceProfile, table: str) -> dict[str, str]:
    """Canonical column -> source column name (and _tz -> the profile's zone column)."""
    wanted = list(CANONICAL_COLUMNS[table])
    if table == "checks" and profile.time_zone_column:
        wanted.append("_tz")
    names = {c: profile.source_column(c) for c in wanted}
    if "_tz" in names:
        names["_tz"] = profile.time_zone_column
    return names


@dataclass(frozen=True)
class Staged:
    """How a file was staged in `_src`."""

    path: Path
    encoding: str
    malformed_message: str    # SQL text of the quarantine message of a malformed row
    fast: bool                # the fast path: _src is a view over the prepared records, _raw is empty


@dataclass(frozen=True)
class Prepared:
    """A file read before its transaction: its scan and, on the fast path, its records."""

    path: Path
    scan: FileScan
    header: list[str]
    records: object | None    # pyarrow.Table (line, c1 ... cN), or None: stage line by line
    parsed: object | None = None   # a checks file parsed ahead (ingest.ParsedAhead)


def fast_path_fits(path: Path, profile: SourceProfile, scan: FileScan) -> bool:
    """A CSV file with a header and clean line endings: DuckDB's CSV parser may read its records."""
    return (file_format(path, profile) == "csv" and profile.header and scan.clean_endings and scan.lines > 0
            and not scan.unreadable)


def csv_records(path: Path, header: list[str], profile: SourceProfile) -> str:
    """SQL relation (line, c1 ... cN) of the file's records by DuckDB's CSV parser: RFC 4180
    quoting, strict (a wrong field count is an error), rejected lines skipped, every field text.
    `line` is the physical line only while every line after the header is one record (the
    caller checks that: rows + 1 = lines)."""
    columns = ", ".join(f"'c{i}': 'VARCHAR'" for i in range(1, len(header) + 1))
    return f"""(SELECT ordinality + 1 AS line, *
                FROM read_csv({_literal(str(path))}, columns={{{columns}}}, header=true, auto_detect=false,
                              delim={_literal(profile.delimiter)}, quote='"', escape='"',
                              encoding={_literal(profile.encoding)}, strict_mode=true, null_padding=false,
                              ignore_errors=true)
                WITH ORDINALITY)"""


def _literal(text: str) -> str:
    """A SQL string literal (for a view, which cannot take parameters)."""
    return "'" + text.replace("'", "''") + "'"


def prepare_file(path: Path, profile: SourceProfile, mem: duckdb.DuckDBPyConnection | None = None,
                 scan: FileScan | None = None) -> Prepared:
    """Scan the file (unless `scan` is given) and, when it is a CSV file fit for the fast path, read its records.

    Needs no database: a private in-memory DuckDB runs the CSV reader (`mem`, else a new one), so
    ingest can prepare the next files in worker threads while the current one is stored. The records are
    kept only when the parser read exactly one record per line after the header: it skips a
    line it rejects, and skipped lines, blank lines and quoted line breaks all leave fewer
    records than lines while nothing leaves more.
    """
    scan = scan or scan_source(path, profile)
    header = read_header(path, profile) if file_format(path, profile) == "csv" else []
    if not fast_path_fits(path, profile, scan):
        return Prepared(path, scan, header, None)
    query = f"SELECT * FROM {csv_records(path, header, profile)}"
    try:
        if mem is not None:
            records = mem.sql(query).to_arrow_table()
        else:
            with duckdb.connect() as own:
                records = own.sql(query).to_arrow_table()
    except duckdb.Error:
        return Prepared(path, scan, header, None)
    return Prepared(path, scan, header, records if records.num_rows + 1 == scan.lines else None)


def stage_source(con: duckdb.DuckDBPyConnection, prepared: Prepared, profile: SourceProfile, table: str) -> Staged:
    """Make _src: a view over the prepared records (fast path), else a temp table read line by line."""
    path = prepared.path
    fmt = file_format(path, profile)
    try:
        if fmt == "csv":
            if prepared.records is not None:
                _stage_prepared(con, prepared, profile, table)
                return Staged(path, profile.encoding, MALFORMED_MESSAGE["csv"], fast=True)
            if _stage_csv(con, path, profile, table):
                fmt = "csv_quotes"
        elif fmt == "jsonl":
            _stage_jsonl(con, path, profile, table)
        else:
            _stage_parquet(con, path, profile, table)
    except duckdb.Error as exc:
        raise InputError(f"cannot read file: {str(exc).splitlines()[0]}", file=str(path)) from exc
    return Staged(path, profile.encoding, MALFORMED_MESSAGE[fmt], fast=False)


def _stage_prepared(con: duckdb.DuckDBPyConnection, prepared: Prepared, profile: SourceProfile, table: str) -> None:
    """_src as a temp view over the prepared records."""
    con.register("_records", prepared.records)
    stage_records(con, "_records", prepared.header, prepared.scan.padded, profile, table)


def stage_records(con: duckdb.DuckDBPyConnection, records: str, header: list[str], padded: bool,
                  profile: SourceProfile, table: str) -> None:
    """_src as a temp view over fast-path `records` (a relation: line, c1 ... cN), picking the
    wanted columns by position."""
    index = {name: i + 1 for i, name in enumerate(header)}
    # trim only when some field is padded: trimming every field costs a fifth of the read
    field = "trim(c{})" if padded else "c{}"
    select = [f"NULLIF({field.format(index[src])}, '') AS {col}" if src in index else f"NULL::VARCHAR AS {col}"
              for col, src in _wanted(profile, table).items()]
    con.execute(f"CREATE OR REPLACE TEMP VIEW _src AS SELECT line, false AS _malformed, NULL::VARCHAR AS _raw, "
                f"{', '.join(select)} FROM {records}")


def unstage(con: duckdb.DuckDBPyConnection, staged: Staged | None) -> None:
    """Drop _src (view and records on the fast path, table otherwise)."""
    if staged is not None and staged.fast:
        con.execute("DROP VIEW IF EXISTS _src")
        con.unregister("_records")
    else:
        con.execute("DROP TABLE IF EXISTS _src")


def raw_lines(con: duckdb.DuckDBPyConnection, staged: Staged, lines: str) -> str:
    """SQL relation (line, _raw) holding the physical lines listed in temp table `lines` (column line).

    `_src` holds them when the file was staged line by line; else they are read from the file.
    """
    if not staged.fast:
        return "_src"
    con.execute(f"""CREATE OR REPLACE TEMP TABLE _raw_lines AS
                    SELECT ordinality AS line, rtrim(raw, chr(13)) AS _raw FROM {_LINES}
                    WHERE ordinality IN (SELECT line FROM {lines})""",
                {"path": str(staged.path), "enc": staged.encoding})
    return "_raw_lines"


def _csv_columns(profile: SourceProfile, table: str, header: list[str]) -> list[str]:
    """SELECT expressions picking each wanted column from the split fields _f by position."""
    index = {name: i + 1 for i, name in enumerate(header)}
    select = []
    for col, src in _wanted(profile, table).items():
        i = index.get(src)
        # unquoted, then trimmed like the fast path's fields (padding inside the quotes too)
        expr = f"NULLIF(trim(replace(trim(trim(_f[{i}]), '\"'), '\"\"', '\"')), '')" if i else "NULL::VARCHAR"
        select.append(f"{expr} AS {col}")
    return select


def _stage_csv(con: duckdb.DuckDBPyConnection, path: Path, profile: SourceProfile, table: str) -> bool:
    """Stage a CSV file; True when it has lines with unbalanced quotes (then _src has an _odd column)."""
    header = read_header(path, profile) if profile.header else [str(i) for i in range(1, 10_000)]
    n_fields = len(header) if profile.header else None
    select = _csv_columns(profile, table, header)
    split = """CASE WHEN contains(_raw, '"') THEN regexp_extract_all(_raw, $quoted, 1)
                    ELSE string_split(_raw, $delim) END"""
    params = {"path": str(path), "delim": profile.delimiter, "enc": profile.encoding,
              "quoted": _quoted_field_pattern(profile.delimiter)}
    malformed = f"len(_f) <> {n_fields}" if n_fields else "len(_f) < 0"
    # _f (and so _malformed) is NULL for a blank line and for a line with an odd number of quotes;
    # the quote count runs only on lines that contain a quote, inside the branch that splits them.
    con.execute(
        f"""CREATE OR REPLACE TEMP TABLE _src AS
        SELECT line, {malformed} AS _malformed, _raw, {', '.join(select)}
        FROM (SELECT ordinality AS line, rtrim(raw, chr(13)) AS _raw,
                     CASE WHEN contains(raw, '"')
                          THEN CASE WHEN (length(raw) - length(replace(raw, '"', ''))) % 2 = 0
                                    THEN regexp_extract_all(rtrim(raw, chr(13)), $quoted, 1) END
                          ELSE string_split(rtrim(raw, chr(13)), $delim) END AS _f
              FROM {_LINES})
        WHERE line > {1 if profile.header else 0}""", params)
    # The common file has neither: a scan of one boolean column's validity finds out.
    if not con.execute("SELECT count(*) FROM _src WHERE _malformed IS NULL").fetchone()[0]:
        return False
    con.execute("DELETE FROM _src WHERE _raw IS NULL")   # blank lines are not records
    con.execute("ALTER TABLE _src ADD COLUMN _odd BOOLEAN DEFAULT false")
    if not con.execute("UPDATE _src SET _odd = true WHERE _malformed IS NULL").fetchone()[0]:
        return False
    _join_quoted_line_breaks(con, select, malformed, split, params)
    return True


def _join_quoted_line_breaks(con: duckdb.DuckDBPyConnection, select: list[str], malformed: str, split: str,
                             params: dict) -> None:
    """Join the lines of records whose quoted fields hold line breaks; mark odd lines left over malformed.

    Odd lines pair in order (1st with 2nd, 3rd with 4th, ...): a quoted field opened on one closes on
    the next. A pair whose lines joined (with the line breaks, blank lines included) split to the
    header's field count becomes one record numbered by its first line; otherwise its lines stay
    as they are and the odd ones are malformed.
    """
    con.execute("""
        CREATE OR REPLACE TEMP TABLE _spans AS
        WITH o AS (SELECT line, row_number() OVER (ORDER BY line) AS k FROM _src WHERE _odd)
        SELECT a.line AS first_line, b.line AS last_line FROM o a JOIN o b ON b.k = a.k + 1 WHERE a.k % 2 = 1""")
    con.execute(f"""
        CREATE OR REPLACE TEMP TABLE _joined AS
        SELECT line, last_line, _raw, {', '.join(select)}, {malformed} AS _bad_join
        FROM (SELECT line, last_line, _raw, {split} AS _f
              FROM (SELECT sp.first_line AS line, sp.last_line,
                           string_agg(repeat(chr(10), s.line - coalesce(s.prev, s.line)) || s._raw, '' ORDER BY s.line)
                             AS _raw
                    FROM _spans sp
                    JOIN (SELECT s.line, s._raw, sp2.first_line,
                                 lag(s.line) OVER (PARTITION BY sp2.first_line ORDER BY s.line) AS prev
                          FROM _src s JOIN _spans sp2 ON s.line BETWEEN sp2.first_line AND sp2.last_line) s
                      ON s.first_line = sp.first_line
                    GROUP BY sp.first_line, sp.last_line))""",
                {k: v for k, v in params.items() if k in ("quoted", "delim")})
    con.execute("""DELETE FROM _src WHERE line IN (
                     SELECT s.line FROM _src s JOIN _joined j ON s.line BETWEEN j.line AND j.last_line
                     WHERE NOT j._bad_join)""")
    con.execute("INSERT INTO _src BY NAME SELECT * EXCLUDE (last_line, _bad_join), false AS _malformed, false AS _odd "
                "FROM _joined WHERE NOT _bad_join")
    con.execute("UPDATE _src SET _malformed = true WHERE _odd")
    con.execute("DROP TABLE _spans")
    con.execute("DROP TABLE _joined")


def _stage_jsonl(con: duckdb.DuckDBPyConnection, path: Path, profile: SourceProfile, table: str) -> None:
    names = _wanted(profile, table)
    # JSON pointer (RFC 6901): '~' is written '~0' and '/' is written '~1'
    pointers = ["/" + src.replace("~", "~0").replace("/", "~1") for src in names.values()]
    select = [f"NULLIF(trim(_v[{i + 1}]), '') AS {col}" for i, col in enumerate(names)]
    con.execute(
        f"""CREATE OR REPLACE TEMP TABLE _src AS
        SELECT line, NOT _object AS _malformed, _raw, {', '.join(select)}
        FROM (SELECT line, _raw, _object, json_extract_string(CASE WHEN _object THEN _raw END, $pointers) AS _v
              FROM (SELECT line, _raw, CASE WHEN json_valid(_raw) THEN json_type(_raw) = 'OBJECT' ELSE false END AS _object
                    FROM (SELECT ordinality AS line, rtrim(raw, chr(13)) AS _raw FROM {_LINES})
                    WHERE trim(_raw) <> ''))""",
        {"path": str(path), "enc": profile.encoding, "pointers": pointers})


def _stage_parquet(con: duckdb.DuckDBPyConnection, path: Path, profile: SourceProfile, table: str) -> None:
    reader = "read_parquet($path)"
    cols = [r[0] for r in con.execute(f"DESCRIBE SELECT * FROM {reader}", {"path": str(path)}).fetchall()]
    select = []
    for col, src in _wanted(profile, table).items():
        expr = f'NULLIF(trim(CAST("{src.replace(chr(34), "")}" AS VARCHAR)), \'\')' if src in cols else "NULL::VARCHAR"
        select.append(f"{expr} AS {col}")
    con.execute(
        f"""CREATE OR REPLACE TEMP TABLE _src AS
        SELECT ordinality AS line, false AS _malformed, NULL::VARCHAR AS _raw, {', '.join(select)}
        FROM {reader} WITH ORDINALITY""", {"path": str(path)})
