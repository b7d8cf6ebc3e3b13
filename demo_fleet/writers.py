"""Write one simulated month in each export layout with DuckDB COPY (no Python loop per row).

Numbers are formatted from integers or with fixed printf formats so the bytes never depend
on float repr; rows keep the simulator's sorted order (DuckDB preserves insertion order).
"""

from __future__ import annotations

from pathlib import Path

import duckdb
import numpy as np
import pandas as pd
import pyarrow as pa

from demo_fleet.checks import CHECK_TYPES, OUTCOMES, truncate3
from demo_fleet.scenario import LEVELS, ZONES, Scenario

MG_PER_L = 1000.0 / 210.0            # 1 g/210L = 4.7619 mg/L (unit definitions, common practice)
UG_PER_100ML = MG_PER_L * 100.0      # 1 g/210L = 476.19 ug/100mL
LAYOUT_CODES = {"canonical": 0, "mgl": 1, "ugdl": 2, "local": 3}

CANONICAL_COLUMNS = ("instrument_id", "measured_at", "lot_id", "check_type", "target", "measured", "units",
                     "simulator_temp_c", "pressure_kpa", "site_id", "operator_id", "outcome")


def local_epoch(sc: Scenario, t: np.ndarray, zone: np.ndarray) -> np.ndarray:
    """Local wall-clock time, as epoch seconds of a naive timestamp, of UTC instants `t` per zone index."""
    out = np.empty_like(t)
    for z, name in enumerate(ZONES):
        sel = zone == z
        if sel.any():
            idx = pd.DatetimeIndex(pd.to_datetime(t[sel], unit="s", utc=True)).tz_convert(name).tz_localize(None)
            out[sel] = idx.as_unit("s").asi8
    return out


def _coded(codes: np.ndarray, labels) -> pa.DictionaryArray:
    """Text column as dictionary codes: no string per row is built in Python."""
    return pa.DictionaryArray.from_arrays(pa.array(codes, type=pa.int32()), pa.array(np.asarray(labels, dtype=str)))


def month_table(sc: Scenario, m: dict[str, np.ndarray]) -> pa.Table:
    """The month's rows as an Arrow table of integers and floats, with local time and layout."""
    zone = sc.site_zone[m["site"]]
    local = local_epoch(sc, m["t"], zone)
    offset_min = (local - m["t"]) // 60
    return pa.table({
        "instrument_id": _coded(m["unit"], sc.instruments["instrument_id"]),
        "site_id": _coded(m["site"], sc.sites["site_id"]),
        "tz": _coded(m["site"], sc.sites["time_zone"]),
        "lot_id": _coded(m["lot"], sc.lots["lot_id"]),
        "operator_id": _coded(m["operator"], sc.operator_codes),
        "check_type": _coded(m["check_type"], CHECK_TYPES),
        "outcome": _coded(m["outcome"], OUTCOMES),
        "kind": m["kind"],
        "layout": np.array([LAYOUT_CODES[x] for x in sc.site_layout])[m["site"]],
        "local_ts": local.astype("datetime64[s]"), "offset_min": offset_min,
        "target_milli": np.rint(np.asarray(LEVELS)[m["level"]] * 1000).astype(np.int64),
        "measured_milli": m["measured_milli"],
        "mgl_milli": truncate3(m["reading"] * MG_PER_L),
        "ug_deci": np.floor(m["reading"] * UG_PER_100ML * 10.0 + 1e-7).astype(np.int64),
        "temp_c": m["temp_c"], "pressure_kpa": m["pressure_kpa"],
        "held_back": m.get("held_back", np.zeros(len(m["t"]), dtype=bool)),
    })



_ISO_OFFSET = """strftime(m.local_ts, '%Y-%m-%dT%H:%M:%S')
  || CASE WHEN m.offset_min < 0 THEN '-' ELSE '+' END
  || lpad(CAST(abs(m.offset_min) // 60 AS VARCHAR), 2, '0') || ':'
  || lpad(CAST(abs(m.offset_min) % 60 AS VARCHAR), 2, '0')"""

_TEMP = "CASE WHEN m.kind = 0 THEN printf('%.2f', m.temp_c) END"
_PRESS = "CASE WHEN m.kind = 1 THEN printf('%.1f', m.pressure_kpa) END"

SELECTS = {
    "canonical": f"""SELECT instrument_id, {_ISO_OFFSET} AS measured_at, lot_id, check_type,
  printf('%.3f', m.target_milli / 1000.0) AS target, printf('%.3f', m.measured_milli / 1000.0) AS measured,
  'g/210L' AS units, {_TEMP} AS simulator_temp_c, {_PRESS} AS pressure_kpa, site_id, operator_id, outcome""",
    "mgl": f"""SELECT instrument_id AS DeviceNo, strftime(m.local_ts, '%d.%m.%Y %H:%M:%S') AS LocalTime,
  lot_id AS Batch,
  CASE check_type WHEN 'control' THEN 'CTRL' WHEN 'daily' THEN 'DAY' WHEN 'verification' THEN 'VER' ELSE 'CAL' END AS Kind,
  replace(printf('%.5f', m.target_milli / 1000.0 * {MG_PER_L!r}), '.', ',') AS Nominal,
  replace(printf('%.3f', m.mgl_milli / 1000.0), '.', ',') AS Reading,
  replace({_TEMP}, '.', ',') AS BathTemp, replace({_PRESS}, '.', ',') AS BaroKPa,
  site_id AS Location, operator_id AS Operator,
  CASE outcome WHEN 'pass' THEN 'OK' WHEN 'fail' THEN 'FAIL' WHEN 'aborted' THEN 'ABORT' ELSE 'INV' END AS Result""",
    "ugdl": f"""SELECT instrument_id AS serial, strftime(m.local_ts, '%m/%d/%Y %H:%M:%S') AS time, tz,
  lot_id AS solution_lot, check_type AS test,
  printf('%.3f', m.target_milli / 1000.0 * {UG_PER_100ML!r}) AS target_ug,
  printf('%.1f', m.ug_deci / 10.0) AS result_ug, {_TEMP} AS sim_temp, {_PRESS} AS pressure,
  site_id AS site, operator_id AS op,
  CASE outcome WHEN 'pass' THEN 'P' WHEN 'fail' THEN 'F' WHEN 'aborted' THEN 'A' ELSE 'X' END AS status""",
    "local": f"""SELECT instrument_id, strftime(m.local_ts, '%Y-%m-%d %H:%M:%S') AS local_time, lot_id, check_type,
  printf('%.3f', m.target_milli / 1000.0) AS target, printf('%.3f', m.measured_milli / 1000.0) AS measured,
  'g/210L' AS units, {_TEMP} AS simulator_temp_c, {_PRESS} AS pressure_kpa, site_id, operator_id, outcome""",
}
DELIMITERS = {"canonical": ",", "mgl": ";", "ugdl": ",", "local": ","}


def copy_rows(con: duckdb.DuckDBPyConnection, layout: str, where: str, path: Path) -> int:
    """Write the rows of registered table `month` matching `where` in `layout` to `path`; return the count."""
    path.parent.mkdir(parents=True, exist_ok=True)
    sql = f"{SELECTS[layout]} FROM month m WHERE {where}"     # a filtered scan keeps insertion order
    delim = DELIMITERS[layout]
    target = path.as_posix().replace("'", "''")
    con.execute(f"COPY ({sql}) TO '{target}' (HEADER, DELIMITER '{delim}', QUOTE '\"')").fetchall()
    return con.execute(f"SELECT count(*) FROM month m WHERE {where}").fetchall()[0][0]
