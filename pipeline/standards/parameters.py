"""Settings that the view `check_results` needs, written into small tables.

The view reads `standards_parameters` (one row), `standards_compensating` and
`tolerance_rules`. They are written here from the frozen StandardsSettings, with named
parameters, never by formatting SQL. Call `sync_standards_settings(con, settings)` in every
writer (ingest, analyse, model, queue) before it reads `check_results`; readers of a
snapshot see the values of the writer that published it.
"""

from __future__ import annotations

import duckdb

from pipeline.errors import InputError
from pipeline.settings import Settings, StandardsSettings, ToleranceRule


def level_milli(level: float) -> int:
    """A level in 0.001 g/210L steps, the key tolerance rules are matched on (0 = any level)."""
    return int(round(level * 1000))


def validate_tolerance_rules(rules: tuple[ToleranceRule, ...]) -> None:
    """Refuse a rule set the view cannot apply unambiguously.

    Raises:
        InputError: no default rule (no check_type, no level), two rules for the same
            check type and level, or a negative absolute or relative width.
    """
    seen: set[tuple[str, int]] = set()
    for i, rule in enumerate(rules):
        key = (rule.check_type, level_milli(rule.level))
        field = f"standards.tolerance_rules[{i}]"
        if key in seen:
            raise InputError(f"two tolerance rules for check_type '{rule.check_type}' and level "
                             f"{rule.level}; keep one", field=field)
        if rule.absolute < 0 or rule.relative < 0:
            raise InputError("tolerance widths must not be negative", field=field)
        seen.add(key)
    if ("", 0) not in seen:
        raise InputError("tolerance_rules needs one default rule with neither check_type nor level",
                         field="standards.tolerance_rules")


def sync_standards_settings(con: duckdb.DuckDBPyConnection, settings: Settings | StandardsSettings, *,
                            own_transaction: bool = True) -> None:
    """Write the standards settings into standards_parameters, standards_compensating and tolerance_rules.

    Idempotent; runs in one transaction. Call it before reading `check_results` in any writer:
    it also brings the table check_results up to date (pipeline.check_results).

    Parameters:
        con: a writable connection with the schema migrated.
        settings: the whole Settings or its `standards` section.
        own_transaction: False when the caller has already begun a transaction (DuckDB has no
            nested transactions); the caller then commits or rolls back the writes.

    Raises:
        InputError: the tolerance rule set is ambiguous or has no default (see validate_tolerance_rules).
    """
    digest = settings.digest() if isinstance(settings, Settings) else None
    std = settings.standards if isinstance(settings, Settings) else settings
    validate_tolerance_rules(std.tolerance_rules)
    from pipeline.check_results import refresh_check_results

    if not own_transaction:  # the caller's transaction holds the writes; it commits or rolls back
        _write(con, std, digest)
        refresh_check_results(con, in_transaction=True)
        return
    con.execute("BEGIN TRANSACTION")
    try:
        _write(con, std, digest)
        refresh_check_results(con, in_transaction=True)
        con.execute("COMMIT")
    except BaseException:
        con.execute("ROLLBACK")
        raise


def _stored(con: duckdb.DuckDBPyConnection) -> tuple:
    """What the three settings tables hold now, in the shape _wanted gives."""
    params = con.execute("SELECT simulator_nominal_c, simulator_window_c, correct_wet_bath_temperature, "
                         "correct_dry_gas_pressure, wet_bath_temperature_coefficient, reference_pressure_kpa, "
                         "settings_digest FROM standards_parameters WHERE parameters_id = 1").fetchone()
    comp = con.execute("SELECT applies_to, name FROM standards_compensating ORDER BY ALL").fetchall()
    rules = con.execute("SELECT rule_id, check_type, level_milli, absolute, relative FROM tolerance_rules "
                        "ORDER BY rule_id").fetchall()
    return params, comp, rules


def _wanted(std: StandardsSettings, digest: str | None) -> tuple:
    params = (std.simulator_nominal_c, std.simulator_window_c, std.correct_wet_bath_temperature,
              std.correct_dry_gas_pressure, std.wet_bath_temperature_coefficient, std.reference_pressure_kpa, digest)
    comp = sorted([("technology", n) for n in set(std.pressure_compensating_technologies)]
                  + [("model", n) for n in set(std.pressure_compensating_models)])
    rules = [(i, r.check_type, level_milli(r.level), r.absolute, r.relative) for i, r in enumerate(std.tolerance_rules)]
    return params, comp, rules


def _write(con: duckdb.DuckDBPyConnection, std: StandardsSettings, digest: str | None) -> None:
    if _stored(con) == _wanted(std, digest):   # unchanged: no writes (a writer syncs on every run)
        return
    con.execute(
        "UPDATE standards_parameters SET simulator_nominal_c = $nominal, simulator_window_c = $window, "
        "correct_wet_bath_temperature = $wet, correct_dry_gas_pressure = $dry, "
        "wet_bath_temperature_coefficient = $coef, reference_pressure_kpa = $pref, "
        "settings_digest = $digest, synced_at = current_timestamp WHERE parameters_id = 1",
        {"nominal": std.simulator_nominal_c, "window": std.simulator_window_c,
         "wet": std.correct_wet_bath_temperature, "dry": std.correct_dry_gas_pressure,
         "coef": std.wet_bath_temperature_coefficient, "pref": std.reference_pressure_kpa,
         "digest": digest})
    con.execute("DELETE FROM standards_compensating")
    for applies_to, names in (("technology", std.pressure_compensating_technologies),
                              ("model", std.pressure_compensating_models)):
        for name in sorted(set(names)):
            con.execute("INSERT INTO standards_compensating VALUES ($applies_to, $name)",
                        {"applies_to": applies_to, "name": name})
    con.execute("DELETE FROM tolerance_rules")
    for rule_id, rule in enumerate(std.tolerance_rules):
        con.execute("INSERT INTO tolerance_rules VALUES ($rule_id, $check_type, $level_milli, $absolute, $relative)",
                    {"rule_id": rule_id, "check_type": rule.check_type,
                     "level_milli": level_milli(rule.level), "absolute": rule.absolute,
                     "relative": rule.relative})
