"""The invented program: agency, regions, sites, instruments, lots, schedules and planted faults.

Everything here is drawn from one seeded generator, so the same arguments give the same
program. Nothing refers to a real product, agency or place name; time zones are real IANA
names because the ingest must convert them.
"""

from __future__ import annotations

from dataclasses import dataclass
from datetime import date, datetime, timedelta, timezone

import numpy as np
import pandas as pd

AGENCY = "Veloria State Bureau of Breath Alcohol Testing (invented)"

DUBOWSKI_COEFFICIENT = 0.06583      # per deg C: K proportional to exp(0.06583 T), Dubowski (1979)
SIMULATOR_NOMINAL_C = 34.0
REFERENCE_PRESSURE_KPA = 101.325
LEVELS = (0.040, 0.080, 0.150)      # g/210L; index 1 is the everyday level
DAY = 86400
MONTH_S = 30 * DAY

# code, name, time zones, elevation range (m), share of sites, layout of its exports
REGIONS = (
    ("KH", "Kestrel Highlands", ("America/Denver",), (1600, 2400), 0.28, "canonical"),
    ("CV", "Corrin Valley", ("America/Denver",), (1100, 1900), 0.27, "canonical"),
    ("TC", "Tollmere Coast", ("America/New_York",), (0, 250), 0.17, "mgl"),
    ("SB", "Saltreach Basin", ("America/Los_Angeles", "America/Phoenix"), (50, 1200), 0.12, "ugdl"),
    ("AP", "Amberline Plains", ("America/Chicago",), (150, 450), 0.16, "local"),
)
ZONES = ("America/Denver", "America/New_York", "America/Los_Angeles", "America/Phoenix", "America/Chicago")
TECHNOLOGIES = ("fuel_cell", "infrared", "dual")
MODELS = {"fuel_cell": "Veltrix FC-4", "infrared": "Veltrix IR-7", "dual": "Veltrix DX-2"}
SUPPLIERS = ("Northgate Reference Laboratory (invented)", "Corvale Standards Co. (invented)")
KINDS = ("wet_bath", "dry_gas")


def standard_pressure_kpa(elevation_m: np.ndarray | float) -> np.ndarray | float:
    """Barometric pressure of the standard atmosphere at an elevation.

    Source: ICAO standard atmosphere (ISO 2533), troposphere: P = 101.325 (1 - 2.25577e-5 h)^5.25588.
    """
    return REFERENCE_PRESSURE_KPA * (1.0 - 2.25577e-5 * np.asarray(elevation_m, dtype=float)) ** 5.25588


def month_starts(end: date, months: int) -> list[date]:
    """First days of the `months` calendar months ending with the month of `end`."""
    y, m = end.year, end.month
    out = []
    for _ in range(months):
        out.append(date(y, m, 1))
        y, m = (y, m - 1) if m > 1 else (y - 1, 12)
    return out[::-1]


def epoch_s(d: date) -> int:
    return int(datetime(d.year, d.month, d.day, tzinfo=timezone.utc).timestamp())


@dataclass(frozen=True)
class Scenario:
    """The invented program as arrays indexed by site, unit and lot, plus the planted faults."""

    seed: int
    start: date
    end: date                      # last day with checks (inclusive)
    t0: int                        # epoch seconds of start (UTC midnight)
    t_end: int                     # epoch seconds of end + 1 day
    sites: pd.DataFrame
    instruments: pd.DataFrame
    lots: pd.DataFrame
    site_zone: np.ndarray          # zone index per site
    site_layout: np.ndarray        # layout name per site
    site_busy: np.ndarray
    site_pressure: np.ndarray      # (n_sites, n_days) true daily pressure, kPa
    unit_site: np.ndarray
    unit_kind: np.ndarray          # 0 wet bath, 1 dry gas
    unit_tech: np.ndarray          # index into TECHNOLOGIES
    unit_in_service: np.ndarray    # epoch s of in-service date
    unit_sd: np.ndarray            # relative repeatability sd
    unit_slope: np.ndarray         # healthy drift, relative per 30 days
    unit_depletion: np.ndarray     # relative loss per check since solution change (wet bath)
    unit_abort_rate: np.ndarray
    unit_control_rate: np.ndarray  # controls per day
    unit_stop: np.ndarray          # epoch s after which the unit reports nothing (silent), else t_end
    unit_gap: tuple[int, int, int] # (unit, from, to): out of service window with events
    cal_unit: np.ndarray           # baselines, sorted by unit then start: the unit
    cal_start: np.ndarray          # epoch s when the baseline started (calibration time)
    cal_b0: np.ndarray             # bias right after that calibration
    cal_kind: np.ndarray           # 'calibration' | 'sensor_replacement' | 'initial'
    lot_table: np.ndarray          # (2 kinds, 3 levels, n_quarters, 2 variants) -> lot index
    lot_true: np.ndarray           # true concentration per lot at reference conditions, g/210L
    drift: pd.DataFrame            # instrument index, onset, fixed_at, slope per 30 days
    step: tuple[int, int, float]   # unit, at, size
    noisy: int
    heater: tuple[int, int, int]   # unit, from, to
    abort_unit: int
    operator_codes: np.ndarray     # opaque codes
    site_op_start: np.ndarray
    site_op_count: np.ndarray
    midnight_utc: np.ndarray       # (n_zones, n_days + 1) epoch s of local midnight

    @property
    def n_units(self) -> int:
        return len(self.unit_site)


def _local_midnights(start: date, n_days: int) -> np.ndarray:
    days = pd.date_range(start, periods=n_days, freq="D")
    out = np.empty((len(ZONES), n_days), dtype=np.int64)
    for z, zone in enumerate(ZONES):
        out[z] = days.tz_localize(zone).tz_convert("UTC").as_unit("s").asi8
    return out


def build_scenario(instruments: int, months: int, seed: int, end: date) -> Scenario:
    """Draw the invented program for `instruments` units over `months` months ending on `end`."""
    rng = np.random.default_rng([seed, 7001])
    start = month_starts(end, months)[0]
    t0, t_end = epoch_s(start), epoch_s(end) + DAY
    n_days = (end - start).days + 1
    span = t_end - t0

    # sites --------------------------------------------------------------------------------
    n_sites = max(len(REGIONS), int(round(instruments / 2.6)))
    shares = np.array([r[4] for r in REGIONS])
    site_region = np.sort(np.concatenate([np.arange(len(REGIONS)),
                                          rng.choice(len(REGIONS), n_sites - len(REGIONS), p=shares)]))
    site_zone = np.empty(n_sites, dtype=np.int64)
    elev = np.empty(n_sites)
    site_ids, region_names, layouts = [], [], []
    counters = {}
    for s, r in enumerate(site_region):
        code, name, zones, (lo, hi), _, layout = REGIONS[r]
        counters[code] = counters.get(code, 0) + 1
        site_ids.append(f"{code}-{100 + 7 * counters[code]:03d}")
        region_names.append(name)
        layouts.append(layout)
        site_zone[s] = ZONES.index(zones[counters[code] % len(zones)])
        elev[s] = rng.uniform(lo, hi)
    elev = np.round(elev, 0)
    lat = np.round(rng.uniform(36.0, 44.0, n_sites), 4)
    lon = np.round(rng.uniform(-112.0, -96.0, n_sites), 4)
    site_busy = rng.lognormal(0.0, 0.6, n_sites)
    site_busy /= site_busy.mean()
    sites = pd.DataFrame({
        "site_id": site_ids, "region": region_names, "time_zone": [ZONES[z] for z in site_zone],
        "latitude": lat, "longitude": lon, "elevation_m": elev,
    })

    # weather: an AR(1) per site around the standard-atmosphere pressure
    base_p = standard_pressure_kpa(elev)
    w = np.zeros((n_sites, n_days))
    shocks = rng.normal(0.0, 0.45, (n_sites, n_days))
    w[:, 0] = shocks[:, 0] / 0.6
    for d in range(1, n_days):
        w[:, d] = 0.8 * w[:, d - 1] + shocks[:, d]
    site_pressure = base_p[:, None] + w

    # units --------------------------------------------------------------------------------
    n = instruments
    unit_site = np.concatenate([np.arange(min(n, n_sites)),
                                rng.choice(n_sites, max(0, n - n_sites), p=site_busy / site_busy.sum())])
    unit_site = np.sort(unit_site[:n])
    unit_tech = rng.choice(3, n, p=[0.55, 0.35, 0.10])
    dry_p = np.where(elev[unit_site] > 1500, 0.7, 0.4)
    unit_kind = (rng.random(n) < dry_p).astype(np.int64)
    serials = rng.choice(900000, n, replace=False) + 100000
    prefix = np.array(["FC", "IR", "DX"])[unit_tech]
    instrument_ids = np.array([f"{p}{s:06d}" for p, s in zip(prefix, serials)])
    in_service = t0 - rng.integers(200, 2000, n) * DAY
    newcomers = rng.choice(n, max(1, n // 40), replace=False)
    in_service[newcomers] = t0 + (rng.uniform(0.15, 0.45, len(newcomers)) * span // DAY).astype(np.int64) * DAY
    unit_sd = rng.uniform(0.010, 0.015, n)
    unit_slope = np.where(unit_tech == 0, rng.normal(-0.001, 0.001, n), rng.normal(0.0, 0.001, n))
    unit_depletion = rng.uniform(0.0002, 0.0005, n)
    unit_abort = np.full(n, 0.003)
    unit_control = site_busy[unit_site] * rng.uniform(0.8, 1.2, n)
    unit_control *= 1.45 / unit_control.mean()                 # ~80 checks per unit-month over the fleet
    unit_stop = np.full(n, t_end, dtype=np.int64)

    # planted faults: distinct established units ------------------------------------------
    established = np.setdiff1d(np.arange(n), newcomers)
    order = rng.permutation(established)
    site_count = np.bincount(unit_site, minlength=n_sites)
    fc = [u for u in order if unit_tech[u] == 0]
    n_drift = max(2, n // 60)
    drift_units = fc[:n_drift] if len(fc) >= n_drift else list(order[:n_drift])
    used = set(int(u) for u in drift_units)

    def take(pred) -> int:
        for u in order:
            if int(u) not in used and pred(int(u)):
                used.add(int(u))
                return int(u)
        for u in order:
            if int(u) not in used:
                used.add(int(u))
                return int(u)
        raise ValueError("too few instruments for the planted faults (need at least 12)")

    step_unit = take(lambda u: True)
    noisy_unit = take(lambda u: True)
    heater_unit = take(lambda u: unit_kind[u] == 0)
    unit_kind[heater_unit] = 0
    silent_unit = take(lambda u: site_count[unit_site[u]] >= 2)
    abort_unit = take(lambda u: True)
    gap_unit = take(lambda u: True)

    unit_sd[noisy_unit] = 0.045
    unit_abort[abort_unit] = 0.07
    silent_from = t_end - min(45 * DAY, int(0.35 * span)) // DAY * DAY
    unit_stop[silent_unit] = silent_from + 13 * 3600
    gap_from = t0 + int(0.4 * span) // DAY * DAY + 9 * 3600
    unit_gap = (gap_unit, gap_from, gap_from + 10 * DAY)

    frac = rng.uniform(0.1, 0.8, len(drift_units))
    frac[0] = 0.15                                         # one early onset, so even short runs show a trend
    slope = -rng.uniform(0.01, 0.03, len(drift_units))
    frac[-1], slope[-1] = 0.8, -0.012                      # one still drifting at the end (not yet replaced)
    onset = t0 + (frac * span).astype(np.int64)
    fixed = onset + (0.06 / -slope * MONTH_S).astype(np.int64)
    fixed = (fixed // DAY) * DAY + 11 * 3600                                 # sensor replaced mid-day
    drift = pd.DataFrame({"unit": np.array(drift_units, dtype=np.int64), "onset": onset,
                          "fixed_at": np.where(fixed < t_end, fixed, -1), "slope": slope})
    step_at = t0 + int(0.5 * span) + 14 * 3600
    step = (step_unit, step_at, 0.045)
    h_from = t0 + int(0.55 * span) // DAY * DAY
    heater = (heater_unit, h_from, min(t_end, h_from + 35 * DAY))

    # calibrations: every 6-12 months, none inside a planted fault's window
    interval = rng.uniform(180, 365, n) * DAY
    phase = rng.uniform(0, 1, n) * interval
    protect = {int(u): (int(o) - 30 * DAY, int(f if f > 0 else t_end)) for u, o, f in
               zip(drift["unit"], drift["onset"], drift["fixed_at"])}
    protect[step_unit] = (step_at - 30 * DAY, t_end)
    protect[heater_unit] = (heater[1] - 5 * DAY, heater[2] + 5 * DAY)
    cu, cs, ck = [], [], []
    for u in range(n):
        first = t0 - int(phase[u])
        times = [first + int(k * interval[u]) for k in range(0, 6)]
        for k, t in enumerate(times):
            t = (t // DAY) * DAY + int(rng.integers(15, 21)) * 3600        # ~08:00-14:00 in the US
            if t >= t_end:
                break
            if k > 0 and (t < in_service[u] or (u in protect and protect[u][0] <= t <= protect[u][1])):
                continue
            if k > 0 and t < t0:
                continue
            cu.append(u), cs.append(t), ck.append("initial" if k == 0 else "calibration")
    for u, f in zip(drift["unit"], drift["fixed_at"]):
        if f > 0:
            cu.append(int(u)), cs.append(int(f)), ck.append("sensor_replacement")
    cal = pd.DataFrame({"u": cu, "s": cs, "k": ck}).sort_values(["u", "s"], kind="stable")
    cal_b0 = rng.normal(0.0, 0.004, len(cal))

    # lots: per kind and level a new pair every quarter --------------------------------------
    n_q = (months + 2) // 3
    lot_rows, lot_true = [], []
    lot_table = np.empty((2, 3, n_q, 2), dtype=np.int64)
    starts = month_starts(end, months)
    # wet bath: a past quarter (found in the history); dry gas: the last quarter, still in use at the end,
    # so the queue has current readings that a bad lot explains
    bad = {(0, 1, max(0, n_q - 2), 0): 0.035, (1, 1, n_q - 1, 1): -0.03}
    for k in range(2):
        for li, level in enumerate(LEVELS):
            for q in range(n_q):
                q_start = starts[3 * q]
                for v in range(2):
                    idx = len(lot_rows)
                    lot_table[k, li, q, v] = idx
                    certified = q_start - timedelta(days=int(rng.integers(20, 60)))
                    life = 365 if k == 0 else 3 * 365
                    lot_id = f"{'WB' if k == 0 else 'DG'}{int(level * 1000):03d}-{q_start:%y%m}-{'AB'[v]}"
                    lot_rows.append({
                        "lot_id": lot_id, "standard_kind": KINDS[k], "target": level, "units": "g/210L",
                        "expanded_uncertainty": round(level * (0.02 if k == 0 else 0.015), 4),
                        "certified_on": certified.isoformat(),
                        "expires_on": (certified + timedelta(days=life)).isoformat(),
                        "supplier": SUPPLIERS[(v + q) % 2],
                    })
                    lot_true.append(level * (1.0 + bad.get((k, li, q, v), rng.normal(0.0, 0.003))))
    lots = pd.DataFrame(lot_rows)
    instruments_df = pd.DataFrame({
        "instrument_id": instrument_ids, "technology": np.array(TECHNOLOGIES)[unit_tech],
        "model": [MODELS[TECHNOLOGIES[t]] for t in unit_tech], "site_id": np.array(site_ids)[unit_site],
        "region": np.array(region_names)[unit_site],
        "in_service_on": pd.to_datetime(in_service, unit="s").strftime("%Y-%m-%d"),
        "latitude": lat[unit_site], "longitude": lon[unit_site],
    })

    # operators: opaque codes, a pool per site
    op_count = rng.integers(3, 13, n_sites)
    op_start = np.concatenate([[0], np.cumsum(op_count)[:-1]])
    pool = np.arange(1000, 10000) if op_count.sum() <= 4000 else np.arange(10000, 100000)
    codes = rng.choice(pool, int(op_count.sum()), replace=False)
    operator_codes = np.array([f"OP-{c}" for c in codes])

    return Scenario(
        seed=seed, start=start, end=end, t0=t0, t_end=t_end, sites=sites, instruments=instruments_df,
        lots=lots, site_zone=site_zone, site_layout=np.array(layouts), site_busy=site_busy,
        site_pressure=site_pressure, unit_site=unit_site, unit_kind=unit_kind, unit_tech=unit_tech,
        unit_in_service=in_service, unit_sd=unit_sd, unit_slope=unit_slope, unit_depletion=unit_depletion,
        unit_abort_rate=unit_abort, unit_control_rate=unit_control, unit_stop=unit_stop, unit_gap=unit_gap,
        cal_unit=cal["u"].to_numpy(np.int64), cal_start=cal["s"].to_numpy(np.int64), cal_b0=cal_b0,
        cal_kind=cal["k"].to_numpy(), lot_table=lot_table, lot_true=np.array(lot_true), drift=drift,
        step=step, noisy=noisy_unit, heater=heater, abort_unit=abort_unit,
        operator_codes=operator_codes, site_op_start=op_start, site_op_count=op_count,
        midnight_utc=_local_midnights(start, n_days + 1),
    )
