"""Ingest source files into the database: one transaction and one ledger row per file.

Every file is read by DuckDB's own readers as text (no Python loop per row), staged in a
temporary table with its physical line numbers, then parsed and validated in SQL. Each
problem of a row becomes a quarantine row; good rows are converted to g/210L and UTC,
exact duplicates are skipped and counted, and the ledger keeps
rows_read = rows_stored + rows_duplicate + rows_quarantined.
"""

from __future__ import annotations

import functools
import re
import threading
from collections import deque
from collections.abc import Callable, Iterable, Iterator
from concurrent.futures import ThreadPoolExecutor
from dataclasses import asdict, dataclass, replace
from datetime import datetime, timezone
from pathlib import Path

import duckdb

from pipeline import __version__
from pipeline.errors import InputError, QuarantineReason as Q
from pipeline.settings import Settings
from pipeline.sources.profiles import (CANONICAL, CANONICAL_COLUMNS, CHECK_TYPES, OUTCOMES, TABLES,
                                       SourceProfile)
from pipeline.sources.pseudonymise import operator_key, pseudonymise
from pipeline.sources.readers import (Prepared, Staged, csv_records, fast_path_fits, file_format, prepare_file,
                                      raw_lines, read_header, readable_copy, scan_source, stage_records,
                                      stage_source, unreadable_lines, unstage)
from pipeline.units import _SPELLINGS, TO_STORAGE


@dataclass(frozen=True)
class FileResult:
    """The ledger row of one ingested file."""

    file_id: int
    path: str
    table: str
    profile: str
    rows_read: int
    rows_stored: int
    rows_duplicate: int
    rows_quarantined: int
    started_at: str
    finished_at: str

    def as_dict(self) -> dict:
        return asdict(self)


@dataclass(frozen=True)
class ParsedAhead:
    """A checks file parsed by a worker thread (`_read_ahead`): _p and what storing it needs."""

    rows: object                  # pyarrow.Table: _p (the stored columns and the _bad flag)
    bad: int                      # rows flagged bad
    span: tuple                   # of the good rows: (first at_utc, last at_utc, count, distinct duplicate keys)
    operators: tuple[list, list]  # distinct operator codes of the file and their keyed hashes


def detect_table(path: Path, columns: list[str], profile: SourceProfile, table: str | None) -> str:
    """--table, else the profile's table, else the file name (sites.csv), else the header."""
    if table:
        if table not in TABLES:
            raise InputError(f"unknown table '{table}' (one of {', '.join(TABLES)})", file=str(path))
        return table
    if profile.table:
        return profile.table
    if path.stem in TABLES:
        return path.stem
    for name, cols in CANONICAL_COLUMNS.items():
        if set(cols) == set(columns):
            return name
    return "checks"


def _used(sql: str, params: dict | None) -> dict | None:
    """Only the $parameters the statement names (DuckDB rejects extra ones)."""
    used = set(re.findall(r"\$([a-z_]+)", sql))
    return {k: v for k, v in (params or {}).items() if k in used} or None


def _exec(con: duckdb.DuckDBPyConnection, sql: str, params: dict | None = None):
    """Execute with only the $parameters the statement names."""
    return con.execute(sql, _used(sql, params))


def _num(col: str, decimal: str) -> str:
    return f"TRY_CAST(replace({col}, ',', '.') AS DOUBLE)" if decimal == "," else f"TRY_CAST({col} AS DOUBLE)"


def _mapping_tables(con: duckdb.DuckDBPyConnection, profile: SourceProfile) -> None:
    for macro in _LOCAL_TIME_MACROS:
        con.execute(macro)
    units = list(_SPELLINGS.items())
    con.execute("CREATE OR REPLACE TEMP TABLE _units AS SELECT unnest($s) AS spelling, unnest($k) AS ukey, "
                "unnest($f) AS factor",
                {"s": [s for s, _ in units], "k": [k for _, k in units], "f": [TO_STORAGE[k] for _, k in units]})
    for name, canon, spell in (("_check_types", CHECK_TYPES, profile.check_type),
                               ("_outcomes", OUTCOMES, profile.outcome)):
        pairs = {c: c for c in canon}
        for c, spellings in spell.items():
            for s in spellings:
                pairs[s.strip().lower()] = c
        con.execute(f"CREATE OR REPLACE TEMP TABLE {name} AS SELECT unnest($s) AS spelling, unnest($c) AS canon",
                    {"s": list(pairs), "c": list(pairs.values())})


# (field, reason, condition over _p, message) for checks; conditions apply only to well-formed rows.
_CHECK_RULES = [
    ("instrument_id", Q.MISSING_FIELD, "instrument_id IS NULL", "'instrument_id is missing'"),
    ("measured_at", Q.MISSING_FIELD, "measured_at IS NULL", "'measured_at is missing'"),
    ("lot_id", Q.MISSING_FIELD, "lot_id IS NULL", "'lot_id is missing'"),
    ("check_type", Q.MISSING_FIELD, "check_type IS NULL", "'check_type is missing'"),
    ("target", Q.MISSING_FIELD, "target IS NULL", "'target is missing'"),
    ("measured", Q.MISSING_FIELD, "measured IS NULL", "'measured is missing'"),
    ("units", Q.MISSING_FIELD, "units_eff IS NULL", "'units is missing'"),
    ("target", Q.UNPARSABLE_FIELD, "target IS NOT NULL AND target_n IS NULL", "'target is not a number'"),
    ("measured", Q.UNPARSABLE_FIELD, "measured IS NOT NULL AND measured_n IS NULL", "'measured is not a number'"),
    ("simulator_temp_c", Q.UNPARSABLE_FIELD, "simulator_temp_c IS NOT NULL AND temp_n IS NULL",
     "'simulator_temp_c is not a number'"),
    ("pressure_kpa", Q.UNPARSABLE_FIELD, "pressure_kpa IS NOT NULL AND pressure_n IS NULL",
     "'pressure_kpa is not a number'"),
    ("units", Q.UNKNOWN_UNIT, "units_eff IS NOT NULL AND factor IS NULL",
     "'unknown unit (g/210L, mg/L or ug/100mL)'"),
    ("measured_at", Q.UNPARSABLE_FIELD, "measured_at IS NOT NULL AND local_at IS NULL AND offset_at IS NULL",
     "'timestamp cannot be parsed'"),
    ("time_zone", Q.MISSING_FIELD, "local_at IS NOT NULL AND zone_raw IS NULL",
     "'no time zone for a local timestamp'"),
    ("time_zone", Q.UNPARSABLE_FIELD, "local_at IS NOT NULL AND zone_raw IS NOT NULL AND zone IS NULL",
     "'unknown IANA time zone'"),
    ("measured_at", Q.NONEXISTENT_LOCAL_TIME, "gap", "'local time does not exist in ' || zone || ' (daylight-saving gap)'"),
    ("measured_at", Q.AMBIGUOUS_LOCAL_TIME, "overlap", "'local time is ambiguous in ' || zone || ' (daylight-saving overlap)'"),
    ("measured", Q.OUT_OF_RANGE, "measured_g < $mmin OR measured_g > $mmax",
     "'measured ' || round(measured_g, 4) || ' g/210L is outside the physical range'"),
    ("target", Q.OUT_OF_RANGE, "target_g <= 0 OR target_g > $mmax",
     "'target ' || round(target_g, 4) || ' g/210L is outside the physical range'"),
    ("measured_at", Q.FUTURE_TIMESTAMP, "at_utc > $future", "'timestamp is in the future'"),
    ("measured_at", Q.BEFORE_IN_SERVICE, "at_utc < in_service_on",
     "'before the instrument entered service on ' || in_service_on"),
    ("lot_id", Q.UNKNOWN_LOT, "lot_id IS NOT NULL AND NOT lot_known", "'lot not in the lots table'"),
    ("instrument_id", Q.UNKNOWN_INSTRUMENT, "instrument_id IS NOT NULL AND NOT inst_known",
     "'instrument not in the instruments table'"),
    ("check_type", Q.UNKNOWN_CHECK_TYPE, "check_type IS NOT NULL AND ct IS NULL", "'unknown check type'"),
    ("outcome", Q.UNKNOWN_OUTCOME, "outcome IS NOT NULL AND oc IS NULL", "'unknown outcome'"),
]


# Where the parsed-checks relation filters _src (see _checks_relation).
_WHERE = "/* where */"
# The columns of _p that _store_checks inserts.
_STORED = "line, instrument_id, at_utc, lot_id, ct, target_g, measured_g, units_eff, temp_n, pressure_n, site_id, operator_id, oc"


def _rule_conditions(rules) -> list[str]:
    """SQL per rule: the row breaks it (never NULL)."""
    return [f"coalesce(({cond}), false)" for _, _, cond, _ in rules]


def _bad_condition(rules) -> str:
    """SQL: the row is malformed or breaks one of `rules`."""
    return f"_malformed OR (NOT _malformed AND ({' OR '.join(_rule_conditions(rules)) or 'false'}))"


def _parse_checks(con: duckdb.DuckDBPyConnection, profile: SourceProfile, settings: Settings,
                  now: datetime, parsed=None, mapped: bool = False) -> tuple[dict, str | None]:
    """Create _p: the stored columns of every check and its _bad flag (one pass over _src).

    `parsed` is that same _p computed ahead by `_read_ahead` (a ParsedAhead); _p is then a view
    over its rows. Returns the rules' parameters and the SQL relation of the bad rows with every parsed
    column (None when there are none), which the quarantine reads: it recomputes the parse for
    those rows only, so _p stays narrow. `mapped`: con holds the profile's mapping tables already.
    """
    relation, params = _checks_relation(profile)
    params |= _rule_parameters(settings, now)
    if parsed is not None:
        con.register("_parsed", parsed.rows)
        con.execute("CREATE OR REPLACE TEMP VIEW _p AS SELECT * FROM _parsed")
        bad = parsed.bad
    else:
        if not mapped:
            _mapping_tables(con, profile)
            mapped = True
        _exec(con, f"CREATE OR REPLACE TEMP TABLE _p AS {_parsed_select(relation)}", params)
        bad = con.execute("SELECT count(*) FROM _p WHERE _bad").fetchall()[0][0]
    if not bad:
        return params, None
    if not mapped:   # the quarantine parses the bad rows again
        _mapping_tables(con, profile)
    return params, "(" + relation.replace(_WHERE, "WHERE line IN (SELECT line FROM _p WHERE _bad)") + ")"


def _rule_parameters(settings: Settings, now: datetime) -> dict:
    """The $parameters of the checks rules: physical range and the latest acceptable time."""
    return {"mmin": settings.ingest.measured_min, "mmax": settings.ingest.measured_max,
            "future": (now.replace(tzinfo=None) if now.tzinfo is None
                       else now.astimezone(timezone.utc).replace(tzinfo=None))
            + _hours(settings.ingest.future_tolerance_hours)}


def _parsed_select(relation: str) -> str:
    """SQL of _p from the relation of `_checks_relation`: the stored columns and the _bad flag."""
    return f"SELECT {_STORED}, {_bad_condition(_CHECK_RULES)} AS _bad FROM ({relation.replace(_WHERE, '')})"


def _checks_relation(profile: SourceProfile) -> tuple[str, dict]:
    """SQL of every parsed column of the checks in _src (filtered at _WHERE), and its parameters.

    It joins the mapping tables (`_mapping_tables`) and the reference tables.
    """
    d = profile.decimal
    if profile.time_zone_column:
        zone_expr = "s._tz"
    elif profile.time_zone_from_site:
        zone_expr = "site.time_zone"
    elif profile.time_zone:
        zone_expr = "$zone"
    else:
        zone_expr = "site.time_zone"   # canonical files: the site's zone for a time without offset
    has_offset = r"regexp_matches(s.measured_at, '(Z|[+-]\d\d(:?\d\d)?)$')"
    local = (f"try_strptime(s.measured_at, $tfmt)" if profile.time_format
             else f"CASE WHEN NOT {has_offset} THEN TRY_CAST(s.measured_at AS TIMESTAMP) END")
    offset = ("NULL::TIMESTAMP" if profile.time_format
              else f"CASE WHEN {has_offset} THEN TRY_CAST(s.measured_at AS TIMESTAMPTZ) AT TIME ZONE 'UTC' END")
    params = {"zone": profile.time_zone, "units": profile.units}
    if profile.time_format:
        params["tfmt"] = profile.time_format
    p1 = f"""
        SELECT s.*, {_num('s.target', d)} AS target_n, {_num('s.measured', d)} AS measured_n,
               {_num('s.simulator_temp_c', d)} AS temp_n, {_num('s.pressure_kpa', d)} AS pressure_n,
               u.factor, ct.canon AS ct, oc.canon AS oc,
               {local} AS local_at, {offset} AS offset_at,
               {zone_expr} AS zone_raw, z.name AS zone,
               i.in_service_on, i.instrument_id IS NOT NULL AS inst_known
        FROM (SELECT *, coalesce(units, $units) AS units_eff FROM _src {_WHERE}) s
        LEFT JOIN _units u ON lower(trim(s.units_eff)) = u.spelling
        LEFT JOIN _check_types ct ON lower(s.check_type) = ct.spelling
        LEFT JOIN _outcomes oc ON lower(s.outcome) = oc.spelling
        LEFT JOIN instruments i ON i.instrument_id = s.instrument_id
        LEFT JOIN sites site ON site.site_id = s.site_id
        LEFT JOIN (SELECT name FROM pg_timezone_names()) z ON z.name = {zone_expr}
    """
    # local -> UTC; a round trip that does not return the same wall time is a gap, one that has a
    # second UTC instant an hour (or half an hour) away with the same wall time is an overlap.
    # When every time is local (a time_format), conversions are the costly part, so they run per
    # local-time bucket: a bucket whose first and last instant have the same status and UTC offset
    # holds no transition (the IANA database has no two transitions within minutes of each other),
    # so its rows take that offset; rows of a bucket with a transition inside are converted one by
    # one. ISO times are converted row by row, which costs nothing for those with an offset.
    per_row = """
        b AS (
          SELECT p1.*, coalesce(_local_gap(zone, local_at), false) AS gap,
                 coalesce(_local_overlap(zone, local_at), false) AS overlap,
                 local_at + _local_offset(zone, local_at) AS _local_utc
          FROM p1)"""
    bucketed = f"""
        a AS (SELECT *, time_bucket(INTERVAL '{LOCAL_TIME_BUCKET}', local_at) AS _b FROM p1),
        buckets AS (
          SELECT zone, _b, _local_gap(zone, _b) AS gap0, _local_overlap(zone, _b) AS overlap0,
                 _local_offset(zone, _b) AS offset0,
                 _local_gap(zone, _e) = gap0 AND _local_overlap(zone, _e) = overlap0
                   AND _local_offset(zone, _e) = offset0 AS plain
          FROM (SELECT DISTINCT zone, _b, _b + INTERVAL '{LOCAL_TIME_BUCKET}' - INTERVAL 1 MICROSECOND AS _e
                FROM a WHERE _b IS NOT NULL AND zone IS NOT NULL)),
        b AS (
          SELECT a.* EXCLUDE (_b),
            CASE WHEN k.plain THEN k.gap0 ELSE coalesce(_local_gap(a.zone, a.local_at), false) END AS gap,
            CASE WHEN k.plain THEN k.overlap0 ELSE coalesce(_local_overlap(a.zone, a.local_at), false) END AS overlap,
            a.local_at + CASE WHEN k.plain THEN k.offset0 ELSE _local_offset(a.zone, a.local_at) END AS _local_utc
          FROM a LEFT JOIN buckets k ON k.zone = a.zone AND k._b = a._b)"""
    return f"""
        WITH p1 AS ({p1}),{bucketed if profile.time_format else per_row}
        SELECT b.* EXCLUDE (_local_utc),
               coalesce(offset_at, CASE WHEN NOT gap AND NOT overlap THEN _local_utc END) AS at_utc,
               target_n * factor AS target_g, measured_n * factor AS measured_g,
               l.lot_id IS NOT NULL AS lot_known
        FROM b LEFT JOIN lots l ON l.lot_id = b.lot_id
    """, params


# Local wall time -> status and UTC offset, as temporary macros (one definition for buckets and rows).
_LOCAL_TIME_MACROS = [
    "CREATE OR REPLACE TEMP MACRO _local_offset(zone, l) AS (timezone(zone, l) AT TIME ZONE 'UTC') - l",
    "CREATE OR REPLACE TEMP MACRO _local_gap(zone, l) AS timezone(zone, timezone(zone, l)) <> l",
    """CREATE OR REPLACE TEMP MACRO _local_overlap(zone, l) AS timezone(zone, timezone(zone, l)) = l AND (
         timezone(zone, timezone(zone, l) + INTERVAL 1 HOUR) = l OR timezone(zone, timezone(zone, l) - INTERVAL 1 HOUR) = l
         OR timezone(zone, timezone(zone, l) + INTERVAL 30 MINUTE) = l
         OR timezone(zone, timezone(zone, l) - INTERVAL 30 MINUTE) = l)""",
]
# Width of the local-time buckets that share one time-zone conversion (tests narrow it to force
# transitions inside buckets).
LOCAL_TIME_BUCKET = "15 minutes"


def _hours(h: float):
    from datetime import timedelta
    return timedelta(hours=h)


def _quarantine(con: duckdb.DuckDBPyConnection, file_id: int, rules, params: dict, staged: Staged,
                source: str | None = "_p", value_columns: dict[str, str] | None = None) -> int:
    """Write one quarantine row per problem; mark bad rows in _bad(line). Returns rows quarantined.

    `source` is the relation holding the bad rows with every parsed column; None: there are none.
    """
    if source is None:
        con.execute("CREATE OR REPLACE TEMP TABLE _bad (line BIGINT)")
        return 0
    conds = _rule_conditions(rules)
    _exec(con, f"CREATE OR REPLACE TEMP TABLE _flagged AS SELECT * FROM {source} WHERE {_bad_condition(rules)}", params)
    parts = [f"SELECT line, NULL AS field, _raw AS value, 'malformed_line' AS reason, "
             f"{staged.malformed_message} AS message FROM _flagged WHERE _malformed"]
    for (field, reason, _, message), cond in zip(rules, conds):
        value = (value_columns or {}).get(field, field)
        parts.append(f"SELECT line, '{field}', {value}, '{reason.value}', {message} FROM _flagged "
                     f"WHERE NOT _malformed AND {cond}")
    _exec(con, "CREATE OR REPLACE TEMP TABLE _problems AS " + " UNION ALL ".join(parts), params)
    con.execute("CREATE OR REPLACE TEMP TABLE _bad AS SELECT line FROM _flagged")
    bad = con.execute("SELECT count(*) FROM _bad").fetchone()[0]
    if bad:
        con.execute(f"""INSERT INTO quarantine (file_id, line, field, value, reason, message, raw_line)
                        SELECT $fid, p.line, p.field, p.value, p.reason, p.message, s._raw
                        FROM _problems p JOIN {raw_lines(con, staged, '_bad')} s USING (line) ORDER BY p.line""",
                    {"fid": file_id})
    return bad


def _store_checks(con, file_id: int, key: bytes, ahead: ParsedAhead | None = None) -> int:
    """Insert the good rows of _p that are not exact duplicates; return how many were stored.

    check_id = the highest stored id + the row's line: unique, increasing in ingest order (with
    gaps where rows were quarantined or skipped), and no sort is needed. The in-file duplicate
    window runs only when the file holds duplicates (a cheaper DISTINCT count finds out). A file
    parsed ahead with no bad row brings that count and its operators' hashes along.
    """
    if ahead is not None and ahead.bad == 0:
        (lo, hi, rows, distinct), (codes, hashed) = ahead.span, ahead.operators
    else:
        lo, hi, rows, distinct = con.execute(f"SELECT {_span('true')} FROM _p ANTI JOIN _bad USING (line)").fetchone()
        codes = [r[0] for r in con.execute("SELECT DISTINCT operator_id FROM _p WHERE operator_id IS NOT NULL").fetchall()]
        hashed = _hashed_operators(codes, key)
    con.execute("CREATE OR REPLACE TEMP TABLE _ops AS SELECT unnest($c) AS code, unnest($h) AS hashed",
                {"c": codes, "h": hashed})
    firsts = ("" if rows == distinct else
              "QUALIFY row_number() OVER (PARTITION BY instrument_id, at_utc, lot_id, ct, measured_g ORDER BY line) = 1")
    base = con.execute("SELECT coalesce(max(check_id), 0) FROM checks").fetchone()[0]
    return con.execute(f"""
        INSERT INTO checks (check_id, instrument_id, measured_at, lot_id, check_type, target, measured, units,
                            simulator_temp_c, pressure_kpa, site_id, operator_id, outcome, file_id, line)
        WITH firsts AS (
          SELECT * FROM _p ANTI JOIN _bad USING (line) {firsts}),
        existing AS (   -- stored checks of this file's time span and instruments
          SELECT instrument_id, measured_at, lot_id, check_type, measured FROM checks
          WHERE measured_at BETWEEN $lo AND $hi AND instrument_id IN (SELECT instrument_id FROM _p))
        SELECT $base + f.line, f.instrument_id, f.at_utc, f.lot_id, f.ct, f.target_g, f.measured_g, f.units_eff,
               f.temp_n, f.pressure_n, f.site_id, o.hashed, f.oc, $fid, f.line
        FROM firsts f
        ANTI JOIN existing e
          ON e.instrument_id = f.instrument_id AND e.measured_at = f.at_utc AND e.lot_id = f.lot_id
         AND e.check_type = f.ct AND e.measured = f.measured_g
        LEFT JOIN _ops o ON o.code = f.operator_id
    """, {"lo": lo, "hi": hi, "fid": file_id, "base": base}).fetchone()[0]


def _span(good: str) -> str:
    """SQL aggregates over the rows of _p where `good` holds: first and last time, count, and count of
    distinct duplicate keys. The keys are counted by hash: a collision can only lower the count,
    which runs the exact duplicate window, so it costs time, never a wrong result."""
    f = f" FILTER (WHERE {good})"
    return (f"min(at_utc){f}, max(at_utc){f}, count(*){f}, "
            f"count(DISTINCT hash(instrument_id, at_utc, lot_id, ct, measured_g)){f}")


def _hashed_operators(codes: list, key: bytes) -> list:
    return [_pseudonymise_cached(c, key) for c in codes]


@functools.lru_cache(maxsize=1 << 16)
def _pseudonymise_cached(code: str, key: bytes) -> str:
    """pseudonymise, remembered: the same operators recur in file after file."""
    return pseudonymise(code, key)


# Reference tables: (column, SQL type); key columns; required columns.
_REF_TYPES = {
    "sites": {"latitude": "DOUBLE", "longitude": "DOUBLE", "elevation_m": "DOUBLE"},
    "instruments": {"in_service_on": "DATE", "latitude": "DOUBLE", "longitude": "DOUBLE"},
    "lots": {"target": "DOUBLE", "expanded_uncertainty": "DOUBLE", "certified_on": "DATE", "expires_on": "DATE"},
    "service_events": {"event_at": "TIMESTAMPTZ"},
}
_REF_KEYS = {"sites": ["site_id"], "instruments": ["instrument_id"], "lots": ["lot_id"],
             "service_events": ["instrument_id", "event_at", "event_type"]}
_REF_REQUIRED = {"sites": ["site_id", "time_zone"], "instruments": ["instrument_id", "technology"],
                 "lots": ["lot_id", "standard_kind", "target", "units"],
                 "service_events": ["instrument_id", "event_at", "event_type"]}


def _parse_reference(con, profile: SourceProfile, table: str) -> list:
    """Create _p from the staged records of a reference table; return its quarantine rules."""
    _mapping_tables(con, profile)
    types = _REF_TYPES[table]
    cols = list(CANONICAL_COLUMNS[table])
    conv, rules = [], []
    for c in cols:
        t = types.get(c)
        if t == "DOUBLE":
            conv.append(f"{_num('s.' + c, profile.decimal)} AS {c}_v")
        elif t == "TIMESTAMPTZ":
            conv.append(f"TRY_CAST(s.{c} AS TIMESTAMPTZ) AT TIME ZONE 'UTC' AS {c}_v")
        elif t:
            conv.append(f"TRY_CAST(s.{c} AS {t}) AS {c}_v")
        else:
            conv.append(f"s.{c} AS {c}_v")
        if c in _REF_REQUIRED[table]:
            rules.append((c, Q.MISSING_FIELD, f"{c} IS NULL", f"'{c} is missing'"))
        if t:
            rules.append((c, Q.UNPARSABLE_FIELD, f"{c} IS NOT NULL AND {c}_v IS NULL", f"'{c} cannot be parsed'"))
    extra = ""
    if table == "sites":
        extra = ", z.name IS NOT NULL AS zone_ok"
        rules.append(("time_zone", Q.UNPARSABLE_FIELD, "time_zone IS NOT NULL AND NOT zone_ok", "'unknown IANA time zone'"))
    if table == "lots":
        extra = ", u.factor, u.ukey"
        rules.append(("units", Q.UNKNOWN_UNIT, "units IS NOT NULL AND factor IS NULL", "'unknown unit'"))
    joins = {"sites": "LEFT JOIN (SELECT name FROM pg_timezone_names()) z ON z.name = s.time_zone",
             "lots": "LEFT JOIN _units u ON lower(trim(s.units)) = u.spelling"}.get(table, "")
    con.execute(f"CREATE OR REPLACE TEMP TABLE _p AS SELECT s.*, {', '.join(conv)}{extra} FROM _src s {joins}")
    return rules


def _store_reference(con, table: str) -> tuple[int, int]:
    """Insert or replace the changed good rows of _p; return (stored, unchanged)."""
    cols = list(CANONICAL_COLUMNS[table])
    values = []
    for c in cols:
        if table == "lots" and c in ("target", "expanded_uncertainty"):
            values.append(f"{c}_v * factor AS {c}")
        else:
            values.append(f"{c}_v AS {c}")
    con.execute(f"""CREATE OR REPLACE TEMP TABLE _ref AS
        SELECT {', '.join(values)} FROM _p ANTI JOIN _bad USING (line)
        QUALIFY row_number() OVER (PARTITION BY {', '.join(c + '_v' for c in _REF_KEYS[table])} ORDER BY line DESC) = 1""")
    good = con.execute("SELECT count(*) FROM _p ANTI JOIN _bad USING (line)").fetchone()[0]
    col_list = ", ".join(cols)
    con.execute(f"CREATE OR REPLACE TEMP TABLE _changed AS SELECT {col_list} FROM _ref "
                f"EXCEPT SELECT {col_list} FROM {table}")
    stored = con.execute("SELECT count(*) FROM _changed").fetchone()[0]
    con.execute(f"INSERT OR REPLACE INTO {table} ({col_list}) SELECT {col_list} FROM _changed")
    return stored, good - stored


def _parse(con, profile: SourceProfile, table: str, settings: Settings,
           now: datetime, parsed=None) -> tuple[list, dict, str | None]:
    """Create _p (parsed records) from _src; return the quarantine rules, their parameters and the
    relation the quarantine reads the bad rows from."""
    if table == "checks":
        params, bad_rows = _parse_checks(con, profile, settings, now, parsed)
        return _CHECK_RULES, params, bad_rows
    return _parse_reference(con, profile, table), {}, "_p"


def ingest_file(con: duckdb.DuckDBPyConnection, path: str | Path, settings: Settings,
                profile: SourceProfile | None = None, table: str | None = None,
                now: datetime | None = None, key: bytes | None = None,
                prepared: Prepared | None = None) -> FileResult:
    """Ingest one file as one transaction and return its ledger row.

    `prepared` is the file read ahead by `prepare_file` (iter_ingest does that in a second
    thread, and parses it when it can); without it the file is prepared here.
    """
    path = Path(path)
    profile = profile or CANONICAL
    if not path.is_file():
        raise InputError("cannot read file: no such file", file=str(path))
    if prepared is None or prepared.path != path:
        try:
            prepared = prepare_file(path, profile)
        except OSError as exc:
            raise InputError(f"cannot read file: {exc.strerror}", file=str(path)) from exc
    now = now or datetime.now(timezone.utc)
    started = datetime.now(timezone.utc).replace(tzinfo=None)
    table = detect_table(path, prepared.header, profile, table)
    if key is None:
        key = operator_key(settings.ingest.operator_key_file)
    staged = None
    # Lines that are not text, and mixed line endings: staged from a copy with every line ending in
    # LF and the unreadable lines empty (same line numbers); those lines are quarantined as they are.
    unreadable = unreadable_lines(path, profile.encoding) if prepared.scan.unreadable else []
    copy = readable_copy(path, prepared.scan.unreadable) if unreadable or not prepared.scan.clean_endings else None
    con.execute("BEGIN TRANSACTION")
    try:
        file_id = con.execute("SELECT coalesce(max(file_id), 0) + 1 FROM ingest_ledger").fetchall()[0][0]
        parsed = prepared.parsed if table == "checks" else None
        if parsed is not None and prepared.records is None:   # parsed ahead, no bad row: nothing to stage
            read = parsed.rows.num_rows
        else:
            staged = stage_source(con, replace(prepared, path=copy) if copy else prepared, profile, table)
            read = con.execute("SELECT count(*) FROM _src").fetchall()[0][0]
        rules, params, bad_rows = _parse(con, profile, table, settings, now, parsed)
        quarantined = _quarantine(con, file_id, rules, params, staged, source=bad_rows,
                                  value_columns={"time_zone": "zone_raw"} if table == "checks" else None)
        if unreadable:
            con.execute("""INSERT INTO quarantine (file_id, line, field, value, reason, message, raw_line)
                           SELECT $fid, unnest($l), unnest($f), NULL, $r, unnest($m), unnest($t)""",
                        {"fid": file_id, "r": Q.MALFORMED_LINE.value, "l": [u.line for u in unreadable],
                         "f": [u.field(prepared.header, profile.delimiter) for u in unreadable],
                         "m": [u.message for u in unreadable], "t": [u.text for u in unreadable]})
            read += len(unreadable)
            quarantined += len(unreadable)
        if table == "checks":
            stored = _store_checks(con, file_id, key, parsed)
            duplicate = read - quarantined - stored
        else:
            stored, duplicate = _store_reference(con, table)
        finished = datetime.now(timezone.utc).replace(tzinfo=None)
        con.execute("""INSERT INTO ingest_ledger VALUES ($fid, $path, $sha, $table, $profile, $read, $stored,
                       $dup, $q, $started, $finished, $ver)""",
                    {"fid": file_id, "path": str(path.resolve()), "sha": prepared.scan.sha256, "table": table,
                     "profile": profile.name, "read": read, "stored": stored, "dup": duplicate,
                     "q": quarantined, "started": started, "finished": finished, "ver": __version__})
        unstage(con, staged)
        _drop_parsed(con, parsed)
        for t in ("_p1", "_flagged", "_problems", "_bad", "_ops", "_ref", "_changed", "_raw_lines"):
            con.execute(f"DROP TABLE IF EXISTS {t}")
        con.execute("COMMIT")
    except BaseException:
        con.execute("ROLLBACK")
        if staged is not None and staged.fast:
            con.unregister("_records")
        if prepared.parsed is not None and table == "checks":
            con.unregister("_parsed")
        raise
    finally:
        if copy is not None:
            copy.unlink(missing_ok=True)
    return FileResult(file_id, str(path.resolve()), table, profile.name, read, stored, duplicate, quarantined,
                      started.isoformat(), finished.isoformat())


def _drop_parsed(con: duckdb.DuckDBPyConnection, parsed) -> None:
    """Drop _p: the view over a file parsed ahead, or the table parsed here."""
    if parsed is not None:
        con.execute("DROP VIEW IF EXISTS _p")
        con.unregister("_parsed")
    else:
        con.execute("DROP TABLE IF EXISTS _p")


def expand_paths(paths: Iterable[str | Path]) -> list[Path]:
    """Files named, and the files inside directories named (sorted)."""
    out: list[Path] = []
    for p in paths:
        p = Path(p)
        if p.is_dir():
            out.extend(sorted(q for q in p.rglob("*") if q.is_file()
                              and q.suffix.lower() in (".csv", ".jsonl", ".ndjson", ".parquet", ".txt")))
        else:
            out.append(p)
    return out


# What the checks parse joins besides the file: the reference columns it reads.
_REFERENCE_COLUMNS = {"instruments": "instrument_id, in_service_on", "sites": "site_id, time_zone",
                      "lots": "lot_id"}
# Files read (and parsed) ahead of the one being stored, each in its own worker thread.
READ_AHEAD = 2


def _reference_snapshot(con: duckdb.DuckDBPyConnection) -> dict:
    """The reference columns the checks parse joins, as pyarrow tables (small: one row per unit, site, lot).

    Read through a cursor (a connection of its own) between files, so it sees what is committed.
    """
    with con.cursor() as cur:
        return {name: cur.sql(f"SELECT {cols} FROM {name}").to_arrow_table()   # noqa: S608 - fixed names
                for name, cols in _REFERENCE_COLUMNS.items()}


def _worker_connection() -> duckdb.DuckDBPyConnection:
    """This worker thread's private in-memory DuckDB (opening one costs 10-20 ms, so it is kept)."""
    mem = getattr(_WORKER, "con", None)
    if mem is None:
        mem = _WORKER.con = duckdb.connect()
        # The records are the left side of every join of the parse and the reference tables the
        # small right side; DuckDB would otherwise build its hash tables on the records when the
        # small side is a Python (Arrow) scan, tripling the parse's time.
        mem.execute("SET disabled_optimizers = 'build_side_probe_side'")
    return mem


_WORKER = threading.local()


def _read_ahead(path: Path, profile: SourceProfile, table: str | None, reference: dict | None,
                settings: Settings, now: datetime, key: bytes) -> Prepared | None:
    """Prepare a file in a worker thread and, for a checks file fit for the fast path, parse it too.

    The parse is `_parse_checks`'s own SQL, run in the thread's private in-memory DuckDB straight
    from DuckDB's CSV parser into Arrow (no intermediate copy of the text fields), joining
    `reference` (a snapshot of the reference columns the parse joins), with the facts
    `_store_checks` needs (a ParsedAhead), so the writer connection only quarantines and stores.
    The records themselves are read only when some row is bad (the quarantine reads them). None
    on any problem: ingest_file then prepares (and parses) the file itself and reports the
    problem in the usual way.
    """
    mem = _worker_connection()
    try:
        scan = scan_source(path, profile)
        header = read_header(path, profile) if file_format(path, profile) == "csv" else []
        if (reference is None or not fast_path_fits(path, profile, scan)
                or detect_table(path, header, profile, table) != "checks"):
            return prepare_file(path, profile, mem, scan)
        for name, rows in reference.items():
            mem.register(name, rows)
        stage_records(mem, csv_records(path, header, profile), header, scan.padded, profile, "checks")
        if getattr(_WORKER, "mapped", None) is not profile:
            _mapping_tables(mem, profile)
            _WORKER.mapped = profile
        relation, params = _checks_relation(profile)
        sql = _parsed_select(relation)
        rows = mem.sql(sql, params=_used(sql, params | _rule_parameters(settings, now))).to_arrow_table()
        if rows.num_rows + 1 != scan.lines:   # the parser skipped or joined lines: the writer stages line by line
            return Prepared(path, scan, header, None)
        mem.register("_p", rows)
        bad, *span, codes = mem.execute(
            f"SELECT count(*) FILTER (WHERE _bad), {_span('NOT _bad')}, "
            "list(DISTINCT operator_id) FILTER (WHERE operator_id IS NOT NULL) FROM _p").fetchall()[0]
        records = prepare_file(path, profile, mem, scan).records if bad else None
        if bad and records is None:
            return Prepared(path, scan, header, None)
        return Prepared(path, scan, header, records,
                        ParsedAhead(rows, bad, tuple(span), (codes, _hashed_operators(codes, key))))
    except Exception:   # noqa: BLE001 - ingest_file prepares the file itself and reports any problem
        return None
    finally:
        mem.execute("DROP VIEW IF EXISTS _src")
        mem.unregister("_p")


def iter_ingest(con: duckdb.DuckDBPyConnection, files: list[Path], settings: Settings,
                profile: SourceProfile | None = None, table: str | None = None,
                key: bytes | None = None) -> Iterator[FileResult]:
    """Ingest files in order, each committed on its own, yielding each ledger row.

    While one file is quarantined and stored, worker threads read and parse the next ones
    (`_read_ahead`: hash, line count, DuckDB's CSV reader, the checks parse), so both cores
    work the way a single read_csv over many files uses them. The parse ahead joins a snapshot
    of the reference tables; after a file that changes them, the snapshot is taken again and
    files parsed with the old one are parsed again by the writer. A fatal error leaves earlier
    files committed.
    """
    profile = profile or CANONICAL
    key = key if key is not None else operator_key(settings.ingest.operator_key_file)
    now = datetime.now(timezone.utc)
    reference, version = _reference_snapshot(con), 0
    with ThreadPoolExecutor(max_workers=READ_AHEAD, thread_name_prefix="ingest-read-ahead") as pool:
        ahead: deque = deque()
        submitted = 0
        for path in files:
            while submitted < len(files) and len(ahead) < READ_AHEAD:
                ahead.append((version, pool.submit(_read_ahead, files[submitted], profile, table, reference,
                                                   settings, now, key)))
                submitted += 1
            parsed_with, future = ahead.popleft()
            prepared = future.result()
            if prepared is not None and parsed_with != version:
                prepared = replace(prepared, parsed=None)
            result = ingest_file(con, path, settings, profile, table, now=now, key=key, prepared=prepared)
            if result.table != "checks":
                reference, version = _reference_snapshot(con), version + 1
            yield result


def ingest_paths(con: duckdb.DuckDBPyConnection, paths: Iterable[str | Path], settings: Settings,
                 profile: SourceProfile | None = None, table: str | None = None,
                 on_file: Callable[[FileResult], None] | None = None) -> list[FileResult]:
    """Ingest files in order, each committed on its own; a fatal error leaves earlier files committed."""
    results = []
    for result in iter_ingest(con, expand_paths(paths), settings, profile, table):
        results.append(result)
        if on_file:
            on_file(result)
    return results
