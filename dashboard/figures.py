"""Pure chart builders: DataFrame in, Altair chart out. No Streamlit, no SQL, no statistics.

Palette: Okabe & Ito (2008), "Color Universal Design", eight colours distinguishable by
readers with the common forms of colour-vision deficiency. Every state is also told apart
by shape or position, and each page shows the same numbers as a table.
"""

from __future__ import annotations

import threading

import altair as alt
import pandas as pd

OKABE_ITO = {
    "black": "#000000", "orange": "#E69F00", "sky_blue": "#56B4E9", "green": "#009E73",
    "yellow": "#F0E442", "blue": "#0072B2", "vermillion": "#D55E00", "purple": "#CC79A7",
    "grey": "#999999",
}
STATE_COLOURS = {
    "in control": OKABE_ITO["blue"],
    "signal": OKABE_ITO["orange"],
    "out of tolerance": OKABE_ITO["vermillion"],
    "not charted": OKABE_ITO["grey"],
}
STATE_SHAPES = {"in control": "circle", "signal": "triangle-up", "out of tolerance": "diamond",
                "not charted": "square"}
VERDICT_COLOURS = {"agrees": OKABE_ITO["blue"], "watch": OKABE_ITO["orange"], "off": OKABE_ITO["vermillion"]}
EVENT_COLOURS = {"calibration": OKABE_ITO["green"], "sensor_replacement": OKABE_ITO["green"],
                 "solution_change": OKABE_ITO["sky_blue"], "lot_change": OKABE_ITO["purple"],
                 "repair": OKABE_ITO["black"], "out_of_service": OKABE_ITO["grey"],
                 "return_to_service": OKABE_ITO["grey"]}
WIDTH = "container"
_SPEC_LOCK = threading.Lock()  # Altair's data transformer and theme are process-wide settings


def vega_lite_spec(chart: alt.TopLevelMixin) -> dict:
    """The chart as a Vega-Lite dict, its data as named DataFrames under "datasets" (one per
    distinct frame), without Altair's JSON-schema validation and without a theme's config.

    st.altair_chart validates every spec against the Vega-Lite schema on each render: for a
    layered control chart that is about half of its 0.1-0.2 s in Python. The builders here are
    fixed code, so the tests validate their output once (tests/test_dashboard_app.py) and the
    server skips it. Streamlit serialises the DataFrames to Arrow as it does for Altair charts.
    """
    datasets: dict[str, pd.DataFrame] = {}
    names: dict[int, str] = {}

    def keep(data):
        name = names.setdefault(id(data), f"data-{len(names)}")
        datasets[name] = data
        return {"name": name}

    with _SPEC_LOCK:
        alt.data_transformers.register("breathfleet_named", keep)
        with alt.data_transformers.enable("breathfleet_named"), alt.theme.enable("none"):
            spec = chart.to_dict(validate=False)
    spec["datasets"] = {**spec.get("datasets", {}), **datasets}
    return spec


def _tips(*items) -> list[alt.Tooltip]:
    """Tooltip channels from shorthands ("field:type") or Tooltip objects. Channel objects, not bare
    strings: Altair resolves each bare shorthand against its whole schema (milliseconds apiece)."""
    return [i if isinstance(i, alt.Tooltip) else alt.Tooltip(i) for i in items]


def _scale(mapping: dict[str, str], present: pd.Series | None = None) -> alt.Scale:
    keys = [k for k in mapping if present is None or k in set(present)]
    return alt.Scale(domain=keys, range=[mapping[k] for k in keys])


def state_by_region(counts: pd.DataFrame) -> alt.Chart:
    """Stacked bars: units per region, split by state (columns region, state, units)."""
    return alt.Chart(counts).mark_bar().encode(
        y=alt.Y("region:N", title="region", sort="-x"),
        x=alt.X("units:Q", title="units", stack="zero", axis=alt.Axis(tickMinStep=1, format="d")),
        color=alt.Color("state:N", scale=_scale(STATE_COLOURS), title="state",
                        legend=alt.Legend(orient="top")),
        order=alt.Order("state_order:Q"),
        tooltip=_tips("region:N", "state:N", "units:Q"),
    ).transform_calculate(
        state_order="indexof(['out of tolerance','signal','in control','not charted'], datum.state)",
    ).properties(width=WIDTH, height=alt.Step(22), title="Units by region and state")


def unit_tiles(states: pd.DataFrame) -> alt.Chart:
    """One mark per unit, rows by site: colour and shape both give the state."""
    return alt.Chart(states).mark_point(filled=True, size=70).encode(
        x=alt.X("position:O", title=None, axis=None),
        y=alt.Y("site_id:N", title="site"),
        color=alt.Color("state:N", scale=_scale(STATE_COLOURS), title="state",
                        legend=alt.Legend(orient="top")),
        shape=alt.Shape("state:N", scale=_scale(STATE_SHAPES), legend=None),
        tooltip=_tips("instrument_id:N", "site_id:N", "state:N", "recent_signals:Q", "last_check_at:T"),
    ).transform_window(
        position="rank()", groupby=["site_id"], sort=[alt.SortField("instrument_id")],
    ).properties(width=WIDTH, height=alt.Step(16), title="Every unit, by site")


def fleet_trend(trend: pd.DataFrame, tolerance_pct: float) -> alt.LayerChart:
    """Weekly fleet mean relative error with its 10-90 % band, per standard kind, and the tolerance."""
    base = alt.Chart(trend).encode(x=alt.X("week:T", title="week"))
    colour = alt.Color("standard_kind:N", title="standard",
                       scale=alt.Scale(range=[OKABE_ITO["blue"], OKABE_ITO["orange"], OKABE_ITO["green"]]))
    band = base.mark_area(opacity=0.2).encode(y=alt.Y("p10_pct:Q"), y2=alt.Y2("p90_pct"), color=colour)
    line = base.mark_line(point=alt.OverlayMarkDef(size=12)).encode(
        y=alt.Y("mean_pct:Q", title="relative error (%)"), color=colour,
        tooltip=_tips("week:T", "standard_kind:N", alt.Tooltip("mean_pct:Q", format=".2f"),
                 alt.Tooltip("p10_pct:Q", format=".2f"), alt.Tooltip("p90_pct:Q", format=".2f"), "n_checks:Q"))
    return alt.layer(band, line, _tolerance_rules(tolerance_pct)).properties(
        width=WIDTH, height=260, title="Fleet relative error by week (line: mean; band: 10th-90th percentile)")


def _tolerance_rules(tolerance_pct: float) -> alt.Chart:
    limits = pd.DataFrame({"y": [-tolerance_pct, tolerance_pct], "what": ["tolerance", "tolerance"]})
    return alt.Chart(limits).mark_rule(strokeDash=[6, 3], color=OKABE_ITO["vermillion"]).encode(
        y=alt.Y("y:Q"), tooltip=_tips(alt.Tooltip("y:Q", title="tolerance (%)")))


def _event_rules(events: pd.DataFrame | None) -> list[alt.Chart]:
    if events is None or events.empty:
        return []
    return [alt.Chart(events).mark_rule(strokeWidth=1.5, opacity=0.7).encode(
        x=alt.X("event_at:T"),
        color=alt.Color("event_type:N", scale=_scale(EVENT_COLOURS, events["event_type"]), title="event"),
        strokeDash=alt.StrokeDash("event_type:N", legend=None),
        tooltip=_tips("event_at:T", "event_type:N", "notes:N"))]


def merge_windows(signals: pd.DataFrame) -> pd.DataFrame:
    """Signals' impact windows (onset to signal) merged where they overlap: one span per run of
    overlapping windows, with its number of signals and the rules that fired. Run rules signal
    on many consecutive checks, and drawn one by one their windows pile up into hundreds of
    rectangles over the same span (each one work for the browser, none visible on its own)."""
    if signals.empty:
        return pd.DataFrame(columns=["onset_at", "measured_at", "n_signals", "rules"])
    data = signals.assign(onset_at=signals["onset_at"].fillna(signals["measured_at"]))
    data = data.sort_values(["onset_at", "measured_at"]).reset_index(drop=True)
    data["span"] = (data["onset_at"] > data["measured_at"].cummax().shift()).cumsum()
    span = data.groupby("span")
    return pd.DataFrame({
        "onset_at": span["onset_at"].min(), "measured_at": span["measured_at"].max(),
        "n_signals": span.size(), "rules": _joined(data, "span", "rule"),
    }).reset_index(drop=True)


def _joined(data: pd.DataFrame, by: str, column: str) -> pd.Series:
    """The distinct values of `column` per `by`, sorted and joined by commas. Plain Python: the
    frames are a few hundred rows, where pandas' per-call overhead dominates."""
    seen: dict = {}
    for key, value in zip(data[by].tolist(), data[column].astype(str).tolist()):
        seen.setdefault(key, set()).add(value)
    return pd.Series({key: ", ".join(sorted(values)) for key, values in seen.items()}, dtype=object)


def _signal_windows(signals: pd.DataFrame | None, chart: str | None = None) -> list[alt.Chart]:
    """Shaded impact windows of a chart's signals (all charts' when chart is None), merged where they overlap."""
    if signals is None or signals.empty:
        return []
    data = signals if chart is None else signals[signals["chart"] == chart]
    if data.empty:
        return []
    return [alt.Chart(merge_windows(data)).mark_rect(opacity=0.15, color=OKABE_ITO["orange"]).encode(
        x=alt.X("onset_at:T"), x2=alt.X2("measured_at"),
        tooltip=_tips(alt.Tooltip("onset_at:T", title="impact from"), alt.Tooltip("measured_at:T", title="to"),
                      alt.Tooltip("n_signals:Q", title="signals"), "rules:N"))]


def _flagged_points(data: pd.DataFrame, value: str, beyond: pd.Series, signals: pd.DataFrame | None,
                    chart: str, tips: list) -> list[alt.Chart]:
    """Markers on the checks beyond a limit or where the chart signalled, with their values; the
    line itself carries no point marks (hundreds of them, one per check, at a pixel apart)."""
    fired = pd.Series(False, index=data.index)
    rules = pd.Series("", index=data.index)
    if signals is not None and not signals.empty and "check_id" in data:
        by_check = _joined(signals[signals["chart"] == chart], "check_id", "rule")
        rules = data["check_id"].map(by_check).astype(object)
        fired = rules.notna()
        rules = rules.where(fired, "")
    flag = beyond.to_numpy() | fired.to_numpy()
    if not flag.any():
        return []
    marks = data[flag].assign(flag=beyond[flag].map({True: "beyond a limit", False: "signal"}), rule=rules[flag])
    states = ["beyond a limit", "signal"]
    return [alt.Chart(marks).mark_point(filled=True, size=40).encode(
        x=alt.X("measured_at:T"), y=alt.Y(f"{value}:Q"),
        color=alt.Color("flag:N", title="marked", scale=alt.Scale(domain=states, range=[OKABE_ITO["vermillion"],
                                                                                        OKABE_ITO["orange"]])),
        shape=alt.Shape("flag:N", title="marked", scale=alt.Scale(domain=states, range=["diamond", "triangle-up"])),
        tooltip=_tips(*tips, "flag:N", "rule:N"))]


def relative_error_chart(checks: pd.DataFrame, tolerance_pct: float, events: pd.DataFrame | None = None,
                         signals: pd.DataFrame | None = None) -> alt.LayerChart:
    """A unit's checks at one level as relative error (%), pass/fail by shape, tolerance band, events."""
    points = alt.Chart(checks).mark_point(filled=True, size=28).encode(
        x=alt.X("measured_at:T", title="measured at (UTC)"),
        y=alt.Y("relative_error_pct:Q", title="relative error (%)"),
        shape=alt.Shape("verdict:N", scale=alt.Scale(domain=["pass", "fail"], range=["circle", "cross"])),
        color=alt.Color("verdict:N", scale=alt.Scale(domain=["pass", "fail"],
                                                      range=[OKABE_ITO["blue"], OKABE_ITO["vermillion"]])),
        tooltip=_tips("measured_at:T", "lot_id:N", "check_type:N", "measured:Q", "expected:Q",
                      alt.Tooltip("relative_error_pct:Q", format=".2f"), "verdict:N", "outcome:N"))
    layers = [*_signal_windows(signals), points, _tolerance_rules(tolerance_pct), *_event_rules(events)]
    return alt.layer(*layers).resolve_scale(color="independent", shape="independent").properties(
        width=WIDTH, height=240, title="Checks: relative error against tolerance")


LINE_BUCKETS = 400  # a line chart draws at most 2 points per bucket: about one per pixel column


def thin_line(data: pd.DataFrame, value: str, buckets: int = LINE_BUCKETS,
              keep: list[str] | None = None) -> pd.DataFrame:
    """Min-max decimation of a time series for drawing: in each of `buckets` equal spans of rows (in
    time order), keep the rows with the lowest and highest `value`, the first and last row, and every
    row where a column in `keep` is true (e.g. beyond a limit). A line through these rows covers the
    same pixels as one through every row, with a fraction of the marks for the browser to draw.
    Source: common practice in plotting dense time series (min/max per pixel column)."""
    if len(data) <= 2 * buckets:
        return data
    data = data.sort_values("measured_at").reset_index(drop=True)
    bucket = (data.index.to_numpy() * buckets) // len(data)
    series = data[value].fillna(0.0)
    grouped = series.groupby(bucket)
    rows = set(grouped.idxmin()) | set(grouped.idxmax()) | {0, len(data) - 1}
    for column in keep or []:
        rows |= set(data.index[data[column].fillna(False).astype(bool)])
    return data.loc[sorted(rows)]


def _steps(points: pd.DataFrame, column: str) -> pd.DataFrame:
    """The rows of a limit series where its value changes (and the last row): drawn as a step line
    ("step-after") they give the same picture as every row, with a handful of points instead of thousands.
    Values are compared to 5 decimals, far below a pixel."""
    data = points[["measured_at", column]].sort_values("measured_at")
    value = data[column].round(5)
    keep = value.ne(value.shift()) | value.ne(value.shift(-1))
    keep.iloc[-1:] = True
    return data[keep.to_numpy()]


def _limit_lines(points: pd.DataFrame, value: str, limits: list[str], y_title: str, title: str,
                 events: pd.DataFrame | None, signals: pd.DataFrame | None, chart: str) -> alt.LayerChart:
    x = alt.X("measured_at:T", title="measured at (UTC)")
    data = points[[c for c in ("check_id", "measured_at", value, *limits) if c in points]]
    beyond = (data[value] < data[limits[0]]) if len(limits) == 2 else pd.Series(False, index=data.index)
    beyond = (beyond | (data[value] > data[limits[-1]])).fillna(False)
    drawn = thin_line(data[["measured_at", value]].assign(_beyond=beyond), value, keep=["_beyond"])
    line = alt.Chart(drawn.drop(columns="_beyond")).mark_line(color=OKABE_ITO["blue"], strokeWidth=1).encode(
        x=x, y=alt.Y(f"{value}:Q", title=y_title))
    rules = [alt.Chart(_steps(points, c)).mark_line(color=OKABE_ITO["vermillion"], strokeDash=[5, 3],
                                                    interpolate="step-after").encode(x=x, y=alt.Y(f"{c}:Q"))
             for c in limits]
    tips = ["measured_at:T", *[alt.Tooltip(f"{c}:Q", format=".3f") for c in [value, *limits]]]
    marks = _flagged_points(data, value, beyond, signals, chart, tips)
    # properties passed to the layer itself: each .properties() or .resolve_scale() deep-copies every layer
    return alt.layer(*_signal_windows(signals, chart), line, *rules, *marks, *_event_rules(events),
                     resolve=alt.Resolve(scale=alt.ScaleResolveMap(color="independent", shape="independent")),
                     width=WIDTH, height=200, title=title)


def individuals_chart(points, events=None, signals=None) -> alt.LayerChart:
    """Individuals chart of the standardised relative error z with its limits."""
    return _limit_lines(points, "z", ["ind_lcl", "ind_ucl"], "z (standardised)",
                        "Individuals (standardised relative error)", events, signals, "individuals")


def moving_range_chart(points, events=None, signals=None) -> alt.LayerChart:
    """Moving range chart with its upper limit."""
    return _limit_lines(points, "moving_range", ["mr_ucl"], "moving range", "Moving range",
                        events, signals, "moving_range")


def cusum_chart(points: pd.DataFrame, h: float | None, events=None, signals=None) -> alt.LayerChart:
    """Upper and lower CUSUM (lower drawn negative) with the decision interval +/- h."""
    long = pd.concat([
        thin_line(points[["measured_at"]].assign(side="upper", value=points["cusum_upper"]), "value"),
        thin_line(points[["measured_at"]].assign(side="lower", value=-points["cusum_lower"].abs()), "value"),
    ])
    base = alt.Chart(long).mark_line(strokeWidth=1).encode(
        x=alt.X("measured_at:T", title="measured at (UTC)"), y=alt.Y("value:Q", title="CUSUM (sigma units)"),
        color=alt.Color("side:N", scale=alt.Scale(domain=["upper", "lower"],
                                                   range=[OKABE_ITO["blue"], OKABE_ITO["green"]])),
        strokeDash=alt.StrokeDash("side:N", legend=None))
    layers = [*_signal_windows(signals, "cusum"), base]
    own = None if signals is None or "check_id" not in points else signals[signals["chart"] == "cusum"]
    if own is not None and not own.empty:  # a marker on the side that crossed h, at each signal
        hit = points[["check_id", "measured_at", "cusum_upper", "cusum_lower"]].merge(
            own[["check_id", "rule", "direction"]], on="check_id")
        hit = hit.assign(value=hit["cusum_upper"].where(hit["direction"].ne("down"), -hit["cusum_lower"].abs()))
        layers.append(alt.Chart(hit).mark_point(filled=True, size=40, shape="triangle-up",
                                                color=OKABE_ITO["orange"]).encode(
            x=alt.X("measured_at:T"), y=alt.Y("value:Q"),
            tooltip=_tips("measured_at:T", "rule:N", "direction:N", alt.Tooltip("value:Q", format=".2f"))))
    if h is not None:
        hlines = pd.DataFrame({"y": [h, -h]})
        layers.append(alt.Chart(hlines).mark_rule(color=OKABE_ITO["vermillion"], strokeDash=[5, 3])
                      .encode(y=alt.Y("y:Q")))
    layers += _event_rules(events)
    return alt.layer(*layers).resolve_scale(color="independent").properties(
        width=WIDTH, height=200, title="CUSUM (upper and lower) with decision interval")


def ewma_chart(points, events=None, signals=None) -> alt.LayerChart:
    """EWMA of the standardised relative error with its time-varying limits."""
    return _limit_lines(points, "ewma", ["ewma_lcl", "ewma_ucl"], "EWMA (z)", "EWMA", events, signals, "ewma")


def forecast_chart(forecast: pd.DataFrame, tolerance_pct: float) -> alt.LayerChart:
    """Projected bias (%) with its 95 % band against the tolerance."""
    data = forecast.assign(low=forecast["bias_pct"] - 1.959964 * forecast["se_pct"],
                           high=forecast["bias_pct"] + 1.959964 * forecast["se_pct"])
    base = alt.Chart(data).encode(x=alt.X("at:T", title="date"))
    band = base.mark_area(opacity=0.25, color=OKABE_ITO["sky_blue"]).encode(y=alt.Y("low:Q"), y2=alt.Y2("high"))
    line = base.mark_line(color=OKABE_ITO["blue"]).encode(
        y=alt.Y("bias_pct:Q", title="projected bias (%)"),
        tooltip=_tips("at:T", alt.Tooltip("bias_pct:Q", format=".2f"), alt.Tooltip("low:Q", format=".2f"),
                 alt.Tooltip("high:Q", format=".2f")))
    return alt.layer(band, line, _tolerance_rules(tolerance_pct)).properties(
        width=WIDTH, height=200, title="Forecast of bias to tolerance (95 % band, linear drift)")


def funnel_chart(units: pd.DataFrame, limits: pd.DataFrame) -> alt.LayerChart:
    """Funnel plot: each unit's mean relative error against its number of checks, with 95 % and
    99.8 % limits around the fleet mean. Source: Spiegelhalter (2005), Stat Med 24:1185-1202."""
    x = alt.X("n_checks:Q", title="number of checks", scale=alt.Scale(type="log"))
    lim = alt.Chart(limits).encode(x=x)
    layers = [
        lim.mark_line(color=OKABE_ITO["grey"]).encode(y=alt.Y("target_pct:Q")),
        lim.mark_line(color=OKABE_ITO["orange"], strokeDash=[6, 3]).encode(y=alt.Y("lower95:Q")),
        lim.mark_line(color=OKABE_ITO["orange"], strokeDash=[6, 3]).encode(y=alt.Y("upper95:Q")),
        lim.mark_line(color=OKABE_ITO["vermillion"]).encode(y=alt.Y("lower998:Q")),
        lim.mark_line(color=OKABE_ITO["vermillion"]).encode(y=alt.Y("upper998:Q")),
    ]
    band = units.assign(band=pd.cut(units["z"].abs(), [-1, 1.959964, 3.090232, float("inf")],
                                    labels=["inside 95 %", "outside 95 %", "outside 99.8 %"]).astype(str))
    layers.append(alt.Chart(band).mark_point(filled=True, size=36, opacity=0.8).encode(
        x=x, y=alt.Y("mean_pct:Q", title="mean relative error (%)"),
        color=alt.Color("band:N", title="position", scale=alt.Scale(
            domain=["inside 95 %", "outside 95 %", "outside 99.8 %"],
            range=[OKABE_ITO["blue"], OKABE_ITO["orange"], OKABE_ITO["vermillion"]])),
        shape=alt.Shape("band:N", scale=alt.Scale(domain=["inside 95 %", "outside 95 %", "outside 99.8 %"],
                                                   range=["circle", "triangle-up", "diamond"]), legend=None),
        tooltip=_tips("instrument_id:N", "region:N", "technology:N", "n_checks:Q",
                 alt.Tooltip("mean_pct:Q", format=".2f"), alt.Tooltip("z:Q", format=".2f"))))
    return alt.layer(*layers).properties(width=WIDTH, height=380,
                                         title="Units' mean relative error by number of checks")


def lot_effects_chart(effects: pd.DataFrame) -> alt.LayerChart:
    """Each lot's effect (%) with its interval, coloured and shaped by verdict."""
    y = alt.Y("lot_id:N", title="lot", sort=alt.SortField("effect_pct"))
    base = alt.Chart(effects).encode(y=y)
    colour = alt.Color("verdict:N", scale=_scale(VERDICT_COLOURS), title="verdict")
    return alt.layer(
        base.mark_rule(strokeWidth=2).encode(x=alt.X("ci_low_pct:Q", title="lot effect (%)"), x2=alt.X2("ci_high_pct"),
                                             color=colour),
        base.mark_point(filled=True, size=60).encode(
            x=alt.X("effect_pct:Q"), color=colour,
            shape=alt.Shape("verdict:N", scale=alt.Scale(domain=["agrees", "watch", "off"],
                                                          range=["circle", "triangle-up", "diamond"])),
            tooltip=_tips("lot_id:N", "standard_kind:N", alt.Tooltip("effect_pct:Q", format=".2f"),
                     alt.Tooltip("ci_low_pct:Q", format=".2f"), alt.Tooltip("ci_high_pct:Q", format=".2f"),
                     "verdict:N", "n_units:Q", "n_checks:Q")),
        alt.Chart(pd.DataFrame({"x": [0.0]})).mark_rule(color=OKABE_ITO["grey"]).encode(x=alt.X("x:Q")),
    ).properties(width=WIDTH, height=alt.Step(18), title="Lot effects with 95 % intervals")


def quarantine_chart(reasons: pd.DataFrame) -> alt.Chart:
    """Quarantined rows by reason."""
    return alt.Chart(reasons).mark_bar(color=OKABE_ITO["vermillion"]).encode(
        y=alt.Y("reason:N", sort="-x", title="reason"), x=alt.X("n_rows:Q", title="rows quarantined"),
        tooltip=_tips("reason:N", "n_rows:Q", "n_problems:Q", "n_files:Q"),
    ).properties(width=WIDTH, height=alt.Step(22), title="Quarantined rows by reason")


def event_strip(events: pd.DataFrame) -> alt.Chart:
    """Service events and lot changes on a time axis, one row per kind."""
    return alt.Chart(events).mark_tick(thickness=2, size=14).encode(
        x=alt.X("event_at:T", title="time (UTC)"), y=alt.Y("event_type:N", title=None),
        color=alt.Color("event_type:N", scale=_scale(EVENT_COLOURS, events["event_type"]), legend=None),
        tooltip=_tips("event_at:T", "event_type:N", "notes:N"),
    ).properties(width=WIDTH, height=alt.Step(18), title="Service events and lot changes")
