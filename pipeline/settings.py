"""One frozen settings object, loaded from TOML and passed explicitly.

Each section is a frozen dataclass; a feature owns its section. Unknown keys are
rejected with an InputError naming the file and the key, so a typo never falls back
to a default silently. Lists in TOML become tuples so the object stays hashable.
"""

from __future__ import annotations

import dataclasses
import hashlib
import json
import tomllib
import types
import typing
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from pipeline.errors import InputError


@dataclass(frozen=True)
class IngestSettings:
    """How source files are read and validated."""

    # Physical range of a breath alcohol result in g/210L; outside it a row is quarantined.
    measured_min: float = 0.0
    measured_max: float = 0.6
    # A check stamped more than this far past the time of ingest is quarantined.
    future_tolerance_hours: float = 24.0
    # Local file with the key for the keyed hash of operator codes; never stored in the database.
    operator_key_file: str = "~/.config/breathfleet/operator.key"


@dataclass(frozen=True)
class ToleranceRule:
    """An acceptance window: |measured - expected| <= max(absolute, relative * expected).

    `check_type` and `level` narrow where the rule applies; empty means any.
    """

    absolute: float = 0.005
    relative: float = 0.05
    check_type: str = ""
    level: float = 0.0


@dataclass(frozen=True)
class StandardsSettings:
    """Expected values of reference standards and acceptance tolerance."""

    simulator_nominal_c: float = 34.0
    simulator_window_c: float = 0.2
    correct_wet_bath_temperature: bool = True
    correct_dry_gas_pressure: bool = True
    # Technologies or models that compensate for barometric pressure themselves.
    pressure_compensating_technologies: tuple[str, ...] = ()
    pressure_compensating_models: tuple[str, ...] = ()
    # Rules are tried from the most specific (type and level) to the default.
    tolerance_rules: tuple[ToleranceRule, ...] = (ToleranceRule(),)
    # Dubowski (1979): K_a/w x 10^3 = 0.04145 exp(0.06583 T); only the exponent scales a lot
    # certified at simulator_nominal_c to the logged temperature.
    wet_bath_temperature_coefficient: float = 0.06583
    # Vapour (g/210L) per solution (g/100 mL) at the nominal temperature; common practice 0.100/0.121.
    wet_bath_solution_to_vapour: float = 0.100 / 0.121
    reference_pressure_kpa: float = 101.325
    # Uncertainty budget inputs (standard uncertainties unless said otherwise).
    simulator_thermometer_u_c: float = 0.05          # logged simulator temperature, deg C
    barometer_u_kpa: float = 0.3                     # logged barometric pressure, kPa
    elevation_pressure_u_kpa: float = 1.5            # weather around the standard-atmosphere value, kPa
    result_resolution: float = 0.001                 # g/210L step of reported results
    results_truncated: bool = True                   # truncated (not rounded) to the step


@dataclass(frozen=True)
class ChartSettings:
    """Control chart design and baselines."""

    own_baseline_min_checks: int = 20
    target_arl0: float = 500.0
    shift_sigma: float = 1.0
    run_rules: str = "western_electric"      # western_electric | nelson
    rules: tuple[str, ...] = ()              # subset of the set's rules (WE1.., N1..); empty = all
    fleet_fdr_q: float = 0.05                # Benjamini-Hochberg q over each run's signals
    cusum_headstart: float = 0.0             # FIR headstart (sigma) at each segment start
    replicate_window_minutes: float = 10.0   # checks of one unit, level and type this close form an X-bar/S group
    verification_window_minutes: float = 60.0  # verification checks of a unit this close form one linearity session


@dataclass(frozen=True)
class ModelSettings:
    """Fleet mixed-effects model and lot verdicts."""

    window_days: int = 365
    # Lot verdicts (pipeline/models/lot_verdicts.py): "off" when the 95 % interval excludes 0
    # and |effect| > lot_off_effect_pct; "watch" when the interval excludes 0 and |effect| >
    # lot_watch_effect_pct, or when the interval still reaches past +/- lot_off_effect_pct.
    lot_off_effect_pct: float = 2.0
    lot_watch_effect_pct: float = 1.0
    confidence: float = 0.95
    # New-lot acceptance: Wald's two-sided SPRT, H0 effect 0 vs H1 |effect| = acceptance_delta_pct.
    acceptance_delta_pct: float = 2.0
    acceptance_alpha: float = 0.01      # chance of rejecting a lot that agrees (split over both sides)
    acceptance_beta: float = 0.01       # chance of accepting a lot that is off by delta
    acceptance_max_checks: int = 2000   # first checks per lot the rule looks at
    diagnostics_sample: int = 200000    # checks sampled for residual diagnostics
    # DuckDB memory limit while the model reads check_results (it spills to disk beyond it);
    # the connection's own limit is restored afterwards. Empty keeps the connection's limit.
    duckdb_memory_limit: str = "2GB"


@dataclass(frozen=True)
class QueueSettings:
    """Service queue evidence and horizons."""

    calibration_interval_days: int = 365
    silence_days: int = 14
    # Days to a unit's next scheduled check or visit: the horizon of the breach probability.
    horizon_days: int = 30
    # Tolerance in percent is max(relative, absolute / reference_level) of the default rule.
    reference_level: float = 0.080
    rate_window_days: int = 90          # aborted/invalid rates (Laney p' chart) over this window
    signal_window_days: int = 30        # chart signals this recent count as active
    # Charts whose signals count as evidence: the persistent-shift detectors; single-point run rules
    # on a large fleet fire often and stay visible on the unit page and in the digest.
    signal_charts: tuple[str, ...] = ("cusum", "ewma")
    lot_window_days: int = 60           # lots a unit used this recently can explain its readings
    # Evidence beyond the forecast, each as a probability of breach before the next visit; they are
    # combined with the forecast as independent causes: P = 1 - prod(1 - p_i).
    p_out_of_tolerance: float = 0.9     # a check on the unit's last day failed our verdict
    # An active CUSUM/EWMA signal switches the forecast to the line through the unit's checks since
    # the change (lot-adjusted; its slope shrunk toward its drift before), weighted by how often such
    # a signal marks a real change: P = (1 - w) P_model + w P_post_change.
    p_signal_fleet: float = 0.9         # w for a signal significant across the fleet (BH q 0.05)
    p_signal_local: float = 0.5         # w for a signal not significant across the fleet
    post_change_min_checks: int = 10    # fewer checks since the onset: the last this many
    post_change_min_days: int = 30      # the post-change line looks back at least this far (a stable slope)
    post_change_max_days: int = 90      # the post-change line looks back at most this far
    # Each unit's repeatability at the reference level (moving ranges over rate_window_days) is shrunk
    # toward the fleet model's residual variance of its technology with this many prior degrees of freedom.
    repeatability_prior_df: float = 20.0
    repeatability_flag_ratio: float = 2.25   # a reason is given when the unit's variance exceeds the prior's by this
    p_calibration_overdue: float = 0.2
    p_silent: float = 0.15
    p_attribute: float = 0.15           # aborted/invalid rate above its Laney p' limit
    # A lot verdict 'off' that matches the direction of the unit's readings multiplies the evidence it
    # explains by this factor (the out-of-tolerance cause; for signals, the weight of the hypothesis that
    # the shift seen on that lot's checks is the unit's own): the lot is the problem.
    lot_explained_factor: float = 0.2
    shrink_to_fleet: bool = True        # empirical Bayes shrinkage of bias and drift before ranking
    rank_simulations: int = 200         # draws for the rank intervals
    rank_seed: int = 20261


@dataclass(frozen=True)
class SmtpSettings:
    """Where the weekly digest is mailed."""

    host: str = "localhost"
    port: int = 25
    sender: str = "breathfleet@localhost"
    recipients: tuple[str, ...] = ()
    starttls: bool = False
    username: str = ""
    password_file: str = ""


@dataclass(frozen=True)
class Settings:
    """All settings of one breathfleet installation."""

    ingest: IngestSettings = field(default_factory=IngestSettings)
    standards: StandardsSettings = field(default_factory=StandardsSettings)
    charts: ChartSettings = field(default_factory=ChartSettings)
    model: ModelSettings = field(default_factory=ModelSettings)
    queue: QueueSettings = field(default_factory=QueueSettings)
    smtp: SmtpSettings = field(default_factory=SmtpSettings)

    def as_dict(self) -> dict[str, Any]:
        """Plain nested dict, for recording with results."""
        return dataclasses.asdict(self)

    def digest(self) -> str:
        """Short SHA-256 of the settings, recorded in report headers."""
        text = json.dumps(self.as_dict(), sort_keys=True, default=str)
        return hashlib.sha256(text.encode()).hexdigest()[:16]


def load_settings(path: str | Path | None = None) -> Settings:
    """Load settings from a TOML file; None gives the defaults.

    Raises:
        InputError: the file cannot be read or parsed, holds an unknown key, or a value of the wrong type.
    """
    if path is None:
        return Settings()
    path = Path(path)
    try:
        raw = tomllib.loads(path.read_text(encoding="utf-8"))
    except OSError as exc:
        raise InputError(f"cannot read settings file: {exc.strerror}", file=str(path)) from exc
    except tomllib.TOMLDecodeError as exc:
        raise InputError(f"settings file is not valid TOML: {exc}", file=str(path)) from exc
    return build_dataclass(Settings, raw, file=str(path), prefix="")


def build_dataclass(cls: type, raw: dict[str, Any], *, file: str, prefix: str) -> Any:
    """Build a frozen dataclass from a TOML table, rejecting unknown keys by name."""
    hints = typing.get_type_hints(cls)
    known = {f.name for f in dataclasses.fields(cls)}
    values: dict[str, Any] = {}
    for key, value in raw.items():
        dotted = f"{prefix}{key}"
        if key not in known:
            raise InputError(f"unknown key '{dotted}'; known keys here: {', '.join(sorted(known))}",
                             file=file, field=dotted)
        values[key] = _coerce(hints[key], value, file=file, dotted=dotted)
    return cls(**values)


def _coerce(hint: Any, value: Any, *, file: str, dotted: str) -> Any:
    origin = typing.get_origin(hint)
    if dataclasses.is_dataclass(hint):
        if not isinstance(value, dict):
            raise InputError(f"'{dotted}' must be a table", file=file, field=dotted)
        return build_dataclass(hint, value, file=file, prefix=f"{dotted}.")
    if origin is tuple:
        (item_hint, _ellipsis) = typing.get_args(hint)
        if not isinstance(value, list):
            raise InputError(f"'{dotted}' must be a list", file=file, field=dotted)
        return tuple(_coerce(item_hint, v, file=file, dotted=f"{dotted}[{i}]") for i, v in enumerate(value))
    if origin in (typing.Union, types.UnionType):
        return value
    if hint is float and isinstance(value, int) and not isinstance(value, bool):
        return float(value)
    if isinstance(hint, type) and not isinstance(value, hint):
        raise InputError(f"'{dotted}' must be of type {hint.__name__}, got {value!r}", file=file, field=dotted)
    return value
