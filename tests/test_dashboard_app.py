"""The dashboard's fast layer: every page through streamlit.testing.v1.AppTest, on a populated
and on an empty database; filters change content; chart content read from the Vega-Lite spec."""

from __future__ import annotations

import json
import subprocess
import sys
import textwrap
import time
from html.parser import HTMLParser
from pathlib import Path

import duckdb
import pandas as pd
import pyarrow as pa
import pytest
from streamlit.testing.v1 import AppTest

from dashboard import figures
from pipeline.cli.dashboard import dashboard_environment, streamlit_command
from dashboard_fixture import build_empty_db, build_fleet_db

APP = str(Path(__file__).resolve().parent.parent / "dashboard" / "app.py")
PAGES = ["fleet", "queue", "unit", "comparison", "lots", "data_quality", "digest"]
MAX_POINTS = 3000


@pytest.fixture(scope="module")
def fleet_db(tmp_path_factory) -> Path:
    return build_fleet_db(tmp_path_factory.mktemp("fleet") / "fleet.duckdb")


@pytest.fixture(scope="module")
def empty_db(tmp_path_factory) -> Path:
    return build_empty_db(tmp_path_factory.mktemp("empty") / "empty.duckdb")


def run_page(monkeypatch, db: Path, page: str, query: dict | None = None) -> AppTest:
    monkeypatch.setenv("BREATHFLEET_DB", str(db))
    at = AppTest.from_file(APP, default_timeout=60)
    for key, value in (query or {}).items():
        at.query_params[key] = value
    at.switch_page(f"views/{page}.py")
    return at.run()


def charts(at: AppTest) -> list[dict]:
    """Each Vega-Lite chart on the page as its spec, with its datasets decoded to DataFrames."""
    out = []
    for element in at.get("vega_lite_chart"):
        spec = json.loads(element.proto.spec)
        spec["_data"] = {d.name: pa.ipc.open_stream(d.data.data).read_all().to_pandas()
                         for d in element.proto.datasets}
        out.append(spec)
    return out


class _TableRows(HTMLParser):
    """The rows of the HTML tables that frame.table writes (st.html), cell text only."""

    def __init__(self) -> None:
        super().__init__()
        self.rows: list[list[str]] = []
        self._row: list[str] | None = None
        self._cell: list[str] | None = None

    def handle_starttag(self, tag, attrs):
        if tag == "tr":
            self._row = []
        elif tag in ("td", "th") and self._row is not None:
            self._cell = []

    def handle_endtag(self, tag):
        if tag in ("td", "th") and self._cell is not None and self._row is not None:
            self._row.append("".join(self._cell).strip())
            self._cell = None
        elif tag == "tr" and self._row is not None:
            self.rows.append(self._row)
            self._row = None

    def handle_data(self, data):
        if self._cell is not None:
            self._cell.append(data)


def html_tables(at: AppTest) -> list[pd.DataFrame]:
    """Each static table on the page (frame.table), in page order, as text."""
    out = []
    for element in at.get("html"):
        parser = _TableRows()
        parser.feed(element.proto.body)
        if parser.rows:
            out.append(pd.DataFrame(parser.rows[1:], columns=parser.rows[0]))
    return out


def chart_titled(at: AppTest, fragment: str) -> dict:
    found = [c for c in charts(at) if fragment in str(c.get("title", ""))]
    assert found, f"no chart titled like {fragment!r}"
    return found[0]


def fields(spec: dict) -> set[str]:
    text = json.dumps({k: v for k, v in spec.items() if k != "_data"})
    return {f for f in ("ind_lcl", "ind_ucl", "mr_ucl", "ewma_lcl", "ewma_ucl", "lower95", "upper95",
                        "lower998", "upper998", "event_at", "onset_at", "p10_pct") if f'"{f}' in text}


@pytest.mark.parametrize("page", PAGES)
def test_every_page_renders_on_a_populated_database(monkeypatch, fleet_db, page):
    at = run_page(monkeypatch, fleet_db, page)
    assert not at.exception, [e.value for e in at.exception]
    assert not at.error, [e.value for e in at.error]
    captions = " ".join(c.value for c in at.caption)
    # common practice: every report states data range, software version and the cautions line
    assert "Data range: 2026-01-05" in captions
    assert "breathfleet " in captions and "Cautions:" in captions


@pytest.mark.parametrize("page", PAGES)
def test_every_page_renders_on_an_empty_database(monkeypatch, empty_db, page):
    at = run_page(monkeypatch, empty_db, page)
    assert not at.exception, [e.value for e in at.exception]
    assert "Data range: no checks stored yet" in " ".join(c.value for c in at.caption)
    assert any("not computed yet" in i.value for i in at.info)


def test_a_snapshot_from_an_older_version_asks_for_a_run(monkeypatch, tmp_path):
    from pipeline.db import latest_schema_version, snapshot_path

    db = build_fleet_db(tmp_path / "old.duckdb")
    con = duckdb.connect(str(snapshot_path(db)))  # as if published before the newest migration ran
    con.execute("DELETE FROM schema_migrations WHERE version = $v", {"v": latest_schema_version()})
    con.close()
    at = run_page(monkeypatch, db, "unit")
    assert not at.exception and not at.error
    assert f"this version reads schema {latest_schema_version()}" in at.warning[0].value
    assert "breathfleet run --db" in at.warning[0].value
    # a current snapshot shows no such warning (test_every_page_renders_on_a_populated_database)


def test_a_missing_database_file_is_named(monkeypatch, tmp_path):
    at = run_page(monkeypatch, tmp_path / "nowhere.duckdb", "fleet")
    assert not at.exception
    assert "nowhere.duckdb does not exist yet" in at.info[0].value


def test_fleet_counts_and_region_filter(monkeypatch, fleet_db):
    at = run_page(monkeypatch, fleet_db, "fleet")
    metrics = {m.label: m.value for m in at.metric}
    assert metrics["Units"] == "24"
    # the fixture raises EWMA signals on three units in the last days of data
    assert int(metrics["Signal in the last 7 days"]) + int(metrics["Out of tolerance (latest check)"]) >= 3
    all_regions = chart_titled(at, "Units by region")
    assert set(next(iter(all_regions["_data"].values()))["region"]) == {"North Basin", "Coastal Plain", "High Desert"}
    at.selectbox(key="fleet_region").select("High Desert").run()
    one_region = chart_titled(at, "Units by region")
    assert set(next(iter(one_region["_data"].values()))["region"]) == {"High Desert"}
    tiles = chart_titled(at, "Every unit, by site")
    assert len(next(iter(tiles["_data"].values()))) == 8  # 24 units over 3 regions
    trend = chart_titled(at, "Fleet relative error by week")
    assert "p10_pct" in fields(trend)


def test_fleet_lists_the_most_pressing_signals(monkeypatch, fleet_db):
    # Beyond FLEET_SIGNALS_LISTED the overview lists the fleet-significant signals first, then the
    # newest, and says how many the window holds; the region control narrows list and count.
    from dashboard import loaders
    monkeypatch.setattr(loaders, "FLEET_SIGNALS_LISTED", 2)
    at = run_page(monkeypatch, fleet_db, "fleet")

    def listed(page: AppTest) -> pd.DataFrame:
        return next(t for t in html_tables(page) if {"instrument_id", "chart", "fleet_significant"} <= set(t.columns))

    signals = listed(at)
    assert len(signals) == 2
    significant = signals["fleet_significant"].tolist()
    assert significant == sorted(significant, key=lambda v: v != "True")  # fleet-significant first
    within = signals[signals["fleet_significant"] == significant[-1]]["measured_at"].tolist()
    assert within == sorted(within, reverse=True)  # then the newest
    note = next(c.value for c in at.caption if "most pressing are listed" in c.value)
    total = int(note.split(" signals")[0].replace(",", ""))
    assert total >= 3  # the fixture's three recent EWMA signals at least
    region = signals["region"].iloc[0]
    at.selectbox(key="fleet_region").select(region).run()
    assert set(listed(at)["region"]) == {region}


def test_queue_filters_change_the_table(monkeypatch, fleet_db):
    at = run_page(monkeypatch, fleet_db, "queue")
    full = at.dataframe[0].value
    assert len(full) == 24 and list(full["rank"]) == sorted(full["rank"])
    at.multiselect(key="queue_region").select("Coastal Plain").run()
    filtered = at.dataframe[0].value
    assert 0 < len(filtered) < len(full)
    assert set(filtered["region"]) == {"Coastal Plain"}
    at.multiselect(key="queue_technology").select("infrared").run()
    both = at.dataframe[0].value
    assert set(both["technology"]) == {"infrared"} and len(both) < len(filtered)


def test_queue_site_filter_lists_the_sites_of_the_chosen_regions(monkeypatch, fleet_db):
    at = run_page(monkeypatch, fleet_db, "queue")
    site = at.multiselect(key="queue_site_id")
    assert site.disabled and site.options == []  # no region chosen yet
    at.multiselect(key="queue_region").select("Coastal Plain").run()
    in_region = at.dataframe[0].value
    site = at.multiselect(key="queue_site_id")
    assert not site.disabled and set(site.options) == set(in_region["site_id"].astype(str))
    one = sorted(site.options)[0]
    site.select(one).run()
    assert set(at.dataframe[0].value["site_id"].astype(str)) == {one}
    # Without a region the site choice no longer applies: the whole queue is listed again.
    at.multiselect(key="queue_region").unselect("Coastal Plain").run()
    assert not at.exception and len(at.dataframe[0].value) == 24


def test_queue_lists_the_top_of_the_ranking(monkeypatch, fleet_db):
    # Beyond QUEUE_LISTED_ROWS the table lists the first rows in rank order and says so; a
    # selected row still opens that row's unit.
    from dashboard import loaders
    monkeypatch.setattr(loaders, "QUEUE_LISTED_ROWS", 5)
    at = run_page(monkeypatch, fleet_db, "queue")
    listed = at.dataframe[0].value
    assert list(listed["rank"]) == [1, 2, 3, 4, 5]
    assert any("24 of 24 units match the filters; the first 5 in rank order are listed" in c.value
               for c in at.caption)
    at.session_state["queue_table"] = {"selection": {"rows": [4], "columns": []}}
    at.run()
    assert at.title[0].value == "Unit"
    assert f"**{listed['instrument_id'].iloc[4]}**" in at.markdown[0].value


def test_queue_opens_the_chosen_unit(monkeypatch, fleet_db):
    at = run_page(monkeypatch, fleet_db, "queue")
    at.selectbox(key="queue_open_unit").select("TX1005").run()
    at.button(key="queue_open_button").click().run()
    assert at.title[0].value == "Unit"
    assert at.query_params["unit"] == ["TX1005"] or at.query_params["unit"] == "TX1005"
    assert "**TX1005**" in at.markdown[0].value


def test_unit_is_picked_within_its_region(monkeypatch, fleet_db):
    at = run_page(monkeypatch, fleet_db, "unit", {"unit": "TX1005"})
    region = at.selectbox(key="unit_region_TX1005")
    units = at.selectbox(key=f"unit_pick_TX1005_{region.value}")
    assert units.value == "TX1005" and len(units.options) == 8  # 24 units over 3 regions
    other = next(r for r in region.options if r != region.value)
    region.select(other).run()
    first = at.selectbox(key=f"unit_pick_TX1005_{other}").options[0]
    assert first != "TX1005" and f"**{first}**" in at.markdown[0].value and f"region {other}" in at.markdown[0].value
    qp = at.query_params["unit"]
    assert (qp[0] if isinstance(qp, list) else qp) == first


def test_unit_record_period_by_name_or_dates(monkeypatch, fleet_db):
    at = run_page(monkeypatch, fleet_db, "unit", {"unit": "TX1005"})
    assert not at.date_input  # no date boxes until "Chosen dates"
    whole = next(c.value for c in at.caption if c.value.startswith("From "))
    at.radio(key="record_period").set_value("Last 90 days").run()
    recent = next(c.value for c in at.caption if c.value.startswith("From "))
    start, end = (pd.Timestamp(d) for d in recent.split()[1::2])
    assert recent.endswith(whole.split()[-1]) and (end - start).days == 89  # 90 days, both ends counted
    at.radio(key="record_period").set_value("Chosen dates").run()
    assert [d.label for d in at.date_input] == ["From", "To"]
    assert str(at.date_input[0].value) == whole.split()[1] and str(at.date_input[1].value) == whole.split()[-1]


def test_table_alternatives_are_drawn_when_opened(monkeypatch, fleet_db):
    # A closed table alternative sends no table; opening it (its state, as the browser sets it)
    # reruns the page with the table inside.
    at = run_page(monkeypatch, fleet_db, "unit", {"unit": "TX1000"})
    label = "Estimates per baseline period"
    assert label in [e.label for e in at.expander]
    closed = html_tables(at)
    assert not any("bias_pct" in t.columns for t in closed)
    at.session_state[f"table_alternative:{label}"] = True
    at.run()
    opened = [t for t in html_tables(at) if "bias_pct" in t.columns]
    assert len(html_tables(at)) == len(closed) + 1 and len(opened) == 1 and len(opened[0]) >= 1


def test_unit_lists_its_newest_signals(monkeypatch, fleet_db):
    # Beyond UNIT_SIGNALS_LISTED the page lists the newest signals and offers all in a table.
    from dashboard import loaders
    monkeypatch.setattr(loaders, "UNIT_SIGNALS_LISTED", 1)
    at = run_page(monkeypatch, fleet_db, "unit", {"unit": "TX1000"})
    at.radio(key="unit_window").set_value("All").run()
    note = next(c.value for c in at.caption if "signals of this unit" in c.value)
    n = int(note.split()[0])
    assert n >= 2 and note.endswith("; the 1 most recent are listed.")
    listed = [t for t in html_tables(at) if "rule" in t.columns]
    assert len(listed) == 1 and len(listed[0]) == 1
    label = f"All {n} signals in the time shown (table)"
    at.session_state[f"table_alternative:{label}"] = True
    at.run()
    tables = [t for t in html_tables(at) if "rule" in t.columns]
    assert [len(t) for t in tables] == [1, n]
    assert tables[0]["measured_at"].iloc[0] == max(tables[1]["measured_at"])  # the newest is listed


def test_unit_page_charts_carry_limits_events_and_signals(monkeypatch, fleet_db):
    at = run_page(monkeypatch, fleet_db, "unit", {"unit": "TX1000"})
    assert not at.exception
    at.radio(key="unit_window").set_value("All").run()
    individuals = chart_titled(at, "Individuals")
    assert {"ind_lcl", "ind_ucl", "event_at"} <= fields(individuals)
    events = pd.concat([d for d in individuals["_data"].values() if "event_type" in d])
    assert {"calibration", "solution_change", "lot_change"} <= set(events["event_type"])
    assert {"mr_ucl"} <= fields(chart_titled(at, "Moving range"))
    at.radio(key="unit_chart").set_value("EWMA").run()
    assert {"ewma_lcl", "ewma_ucl"} <= fields(chart_titled(at, "EWMA"))
    at.radio(key="unit_chart").set_value("CUSUM").run()
    cusum = chart_titled(at, "CUSUM")
    # the fixture's drifting unit (TX1000) crosses h on its upper CUSUM, so a signal window is drawn
    assert "onset_at" in fields(cusum)
    for spec in charts(at):
        assert all(len(d) <= MAX_POINTS for d in spec["_data"].values())
    sentence = " ".join(m.value for m in at.markdown)
    # the fixture gives TX1000 bias 1.98 % and drift 0.33 %/30 d: (5 - 1.98) / 0.33 * 30 = 275 days
    assert "reaches the ±5 % tolerance" in sentence
    assert "Expanded uncertainty" in [m.label for m in at.metric]


def test_unit_level_choice_changes_the_chart(monkeypatch, fleet_db):
    at = run_page(monkeypatch, fleet_db, "unit", {"unit": "TX1003"})
    at.radio(key="unit_chart").set_value("Relative error").run()
    before = next(iter(chart_titled(at, "Checks: relative error")["_data"].values()))
    other = [v for v in at.selectbox(key="unit_level").options if not v.startswith("0.080")][0]
    at.selectbox(key="unit_level").set_value(float(other.split()[0])).run()
    after = next(iter(chart_titled(at, "Checks: relative error")["_data"].values()))
    assert set(before["level"]) == {0.08} and set(after["level"]) == {0.04}


def test_comparison_funnel_has_limits_and_every_unit(monkeypatch, fleet_db):
    at = run_page(monkeypatch, fleet_db, "comparison")
    funnel = chart_titled(at, "mean relative error by number of checks")
    # Spiegelhalter (2005) Stat Med 24:1185, section 3: limits at 95 % and 99.8 %
    assert {"lower95", "upper95", "lower998", "upper998"} <= fields(funnel)
    data = funnel["_data"].values()
    units = next(d for d in data if "instrument_id" in d)
    assert len(units) == 24
    limits = next(d for d in funnel["_data"].values() if "upper95" in d)
    widths = (limits["upper95"] - limits["lower95"]).to_numpy()
    assert (widths[:-1] >= widths[1:]).all()  # the funnel narrows as n grows


def test_comparison_lists_the_farthest_units_outside(monkeypatch, fleet_db):
    # Beyond OUTSIDE_LISTED the table lists the units farthest from the mean, the CSV holds all.
    from dashboard import loaders
    monkeypatch.setattr(loaders, "OUTSIDE_LISTED", 3)
    at = run_page(monkeypatch, fleet_db, "comparison")
    at.toggle(key="cmp_overdispersed").set_value(False).run()  # binomial-style limits: many units outside
    heading = next(s.value for s in at.subheader if s.value.startswith("Units outside"))
    n_outside = int(heading.split("(")[1].rstrip(")"))
    assert n_outside > 3
    listed = html_tables(at)[-1]
    z = listed["z"].astype(float).abs().tolist()
    assert len(listed) == 3 and z == sorted(z, reverse=True) and min(z) > 1.959964
    assert any(f"The 3 farthest from the fleet mean are listed; the CSV holds all {n_outside}" in c.value
               for c in at.caption)
    assert at.get("download_button")  # the whole list, as CSV


def test_lots_page_shows_verdicts_and_leads_to_units(monkeypatch, fleet_db):
    at = run_page(monkeypatch, fleet_db, "lots")
    effects = chart_titled(at, "Lot effects")
    data = next(d for d in effects["_data"].values() if "verdict" in d)
    assert set(data["verdict"]) == {"agrees", "off"}
    table = html_tables(at)[0]
    assert table.loc[table["lot_id"] == "WB-B1", "state"].item() == "rejected"
    at.selectbox(key="lots_pick").select("WB-B1").run()
    users = html_tables(at)[-1]
    assert set(users["instrument_id"]) == {"TX1000", "TX1004", "TX1008", "TX1012", "TX1016", "TX1020"}
    assert any("6 units used lot WB-B1. Open one:" in c.value for c in at.caption)
    at.button(key="lots_open_unit").click().run()
    assert at.title[0].value == "Unit"


def test_lots_page_lists_the_main_users_of_a_lot(monkeypatch, fleet_db):
    # Beyond LOT_UNITS_LISTED the page lists the units with the most checks on the lot and says so.
    from dashboard import loaders
    monkeypatch.setattr(loaders, "LOT_UNITS_LISTED", 4)
    at = run_page(monkeypatch, fleet_db, "lots")
    at.selectbox(key="lots_pick").select("WB-B1").run()
    users = html_tables(at)[-1]
    assert len(users) == 4
    counts = users["n_checks"].astype(int).tolist()
    assert counts == sorted(counts, reverse=True)
    assert any("6 units used lot WB-B1; the 4 with the most checks on it are listed" in c.value for c in at.caption)
    assert at.selectbox(key="lots_unit").options == users["instrument_id"].tolist()


def test_data_quality_page(monkeypatch, fleet_db):
    at = run_page(monkeypatch, fleet_db, "data_quality")
    reasons = next(iter(chart_titled(at, "Quarantined rows by reason")["_data"].values()))
    assert set(reasons["reason"]) == {"unparsable_field", "out_of_range"}
    at.selectbox(key="dq_reason").select("out_of_range").run()
    samples = [t for t in html_tables(at) if "raw_line" in t.columns]
    assert samples and set(samples[0]["reason"]) == {"out_of_range"}


def test_digest_preview_on_request(monkeypatch, fleet_db):
    at = run_page(monkeypatch, fleet_db, "digest")
    assert not at.exception
    assert "ISO week 2026-W27" in " ".join(c.value for c in at.caption)
    at.button(key="digest_build").click().run()
    assert not at.exception, [e.value for e in at.exception]
    assert not at.warning, [w.value for w in at.warning]
    # the digest step writes html, md and txt; each is offered for download
    assert len(at.get("download_button")) == 3


def test_okabe_ito_palette_marks_states():
    # Okabe M, Ito K (2008) Color Universal Design: the eight colours, vermillion #D55E00, blue #0072B2
    assert figures.STATE_COLOURS["out of tolerance"] == "#D55E00"
    assert figures.STATE_COLOURS["in control"] == "#0072B2"
    assert len(set(figures.STATE_SHAPES.values())) == len(figures.STATE_SHAPES)


def test_new_snapshot_invalidates_cached_loads(tmp_path, monkeypatch):
    import duckdb

    from dashboard import loaders
    from pipeline.db import publish_snapshot
    db = build_fleet_db(tmp_path / "f.duckdb", n_units=3, days=20)
    monkeypatch.setenv("BREATHFLEET_DB", str(db))
    before = loaders.data_range()["n_checks"]
    time.sleep(0.01)
    con = duckdb.connect(str(db))
    con.execute("INSERT INTO checks SELECT check_id + 100000, instrument_id, measured_at + INTERVAL 1 YEAR, lot_id, "
                "check_type, target, measured, units, simulator_temp_c, pressure_kpa, site_id, operator_id, "
                "outcome, file_id, line FROM checks")
    publish_snapshot(con, db)
    con.close()
    assert loaders.data_range()["n_checks"] == 2 * before


WRITER = textwrap.dedent("""
    import sys, time, duckdb
    from pipeline.db import publish_snapshot
    db = sys.argv[1]
    con = duckdb.connect(db)          # holds the write lock for the whole run, like an ingest
    print("locked", flush=True)
    for batch in range(12):
        con.execute("INSERT INTO checks SELECT check_id + $o, instrument_id, measured_at + to_days($d), lot_id, "
                    "check_type, target, measured, units, simulator_temp_c, pressure_kpa, site_id, operator_id, "
                    "outcome, file_id, line FROM checks WHERE check_id < 1000",
                    {"o": 1_000_000 * (batch + 1), "d": 100 * (batch + 1)})
        publish_snapshot(con, db)
        time.sleep(0.15)
    con.close()
""")


def test_dashboard_reads_while_a_writer_ingests(tmp_path, monkeypatch):
    db = build_fleet_db(tmp_path / "busy.duckdb", n_units=6, days=60)
    writer = subprocess.Popen([sys.executable, "-c", WRITER, str(db)], stdout=subprocess.PIPE, text=True,
                              cwd=Path(APP).parent.parent)
    assert writer.stdout.readline().strip() == "locked"
    seen = set()
    try:
        while writer.poll() is None:
            for page in ("fleet", "unit", "data_quality"):
                at = run_page(monkeypatch, db, page)
                assert not at.exception, [e.value for e in at.exception]
                assert not at.error, [e.value for e in at.error]
                seen.add(next(c.value for c in at.caption if c.value.startswith("Data range")))
    finally:
        writer.wait(timeout=30)
    assert writer.returncode == 0
    assert len(seen) >= 2  # the pages followed the writer's published snapshots


def test_cli_serves_headless_on_localhost(tmp_path):
    command = streamlit_command(8642)
    assert command[1:4] == ["-m", "dashboard.serve", "run"]
    assert command[command.index("--server.headless") + 1] == "true"
    assert command[command.index("--server.address") + 1] == "127.0.0.1"
    env = dashboard_environment(tmp_path / "x.duckdb", None)
    assert env["BREATHFLEET_DB"] == str((tmp_path / "x.duckdb").resolve())


def test_cli_names_a_missing_database(tmp_path):
    from click.testing import CliRunner

    from pipeline.cli import main
    result = CliRunner().invoke(main, ["dashboard", "--db", str(tmp_path / "none.duckdb")])
    assert result.exit_code == 1
    assert "none.duckdb: database file does not exist; ingest data first" in result.output


def test_fleet_summaries_equal_the_aggregates_over_every_check(fleet_db):
    """The summary_* tables (pipeline.dashboard_summary, written by the main job) hold what the
    pages used to compute over check_results on every view."""
    import duckdb
    con = duckdb.connect(str(fleet_db), read_only=True)
    try:
        def rows(sql):
            return con.execute(sql).fetchall()
        # common practice: a unit's state follows the verdict of its latest check at each level
        assert rows("SELECT instrument_id, level, n_checks, last_verdict FROM summary_unit_levels ORDER BY 1, 2") == rows(
            "SELECT instrument_id, level, count(*), arg_max(verdict, (measured_at, check_id)) FROM check_results "
            "GROUP BY ALL ORDER BY 1, 2")
        assert rows("SELECT instrument_id, sum(unit_pass_ours_fail + unit_fail_ours_pass) AS n FROM summary_unit_levels "
                    "GROUP BY 1 HAVING n > 0 ORDER BY 1") == rows(
            "SELECT instrument_id, count(*) FROM check_results WHERE outcome IN ('pass', 'fail') "
            "AND verdict IN ('pass', 'fail') AND outcome <> verdict GROUP BY 1 ORDER BY 1")
        assert rows("SELECT week, standard_kind, n_checks, round(p90_pct, 9) FROM summary_weeks ORDER BY 1, 2") == rows(
            "SELECT date_trunc('week', measured_at), coalesce(standard_kind, '(unknown)'), count(*), "
            "round(quantile_cont(relative_error, 0.9) * 100, 9) FROM check_results WHERE relative_error IS NOT NULL "
            "GROUP BY ALL ORDER BY 1, 2")
        assert rows("SELECT lot_id, n_checks, n_units FROM summary_lots ORDER BY 1") == rows(
            "SELECT lot_id, count(*), count(DISTINCT instrument_id) FROM checks GROUP BY 1 ORDER BY 1")
        # Spiegelhalter (2005) Stat Med 24:1185, section 3: each unit's n, mean and within-unit variance
        # over the window ending at the latest check
        assert rows("SELECT instrument_id, n_checks, round(mean_pct, 9), round(var_pct, 9) FROM summary_funnel "
                    "WHERE window_days = 30 AND level = 0.08 ORDER BY 1") == rows(
            "SELECT instrument_id, count(*), round(avg(relative_error * 100), 9), round(var_samp(relative_error * 100), 9) "
            "FROM check_results WHERE level = 0.08 AND relative_error IS NOT NULL "
            "AND measured_at >= (SELECT max(measured_at) FROM checks) - INTERVAL 30 DAY GROUP BY 1 ORDER BY 1")
        state = rows("SELECT checks_through, n_checks FROM summary_state")
        assert state == rows("SELECT max(check_id), count(*) FROM checks")
    finally:
        con.close()


def test_pages_say_when_summaries_lag_the_checks(tmp_path, monkeypatch):
    import duckdb

    from pipeline.db import publish_snapshot
    db = build_fleet_db(tmp_path / "lag.duckdb", n_units=3, days=20)
    con = duckdb.connect(str(db))
    con.execute("INSERT INTO checks SELECT check_id + 100000, instrument_id, measured_at + INTERVAL 1 DAY, lot_id, "
                "check_type, target, measured, units, simulator_temp_c, pressure_kpa, site_id, operator_id, "
                "outcome, file_id, line FROM checks WHERE check_id < 5")
    publish_snapshot(con, db)
    con.close()
    at = run_page(monkeypatch, db, "fleet")
    assert not at.exception
    assert any("as of the last analysis" in c.value for c in at.caption)


def test_fleet_page_asks_for_the_main_job_before_its_summary_exists(tmp_path, monkeypatch):
    import duckdb

    from pipeline.db import publish_snapshot
    db = build_fleet_db(tmp_path / "nosummary.duckdb", n_units=3, days=20)
    con = duckdb.connect(str(db))
    con.execute("DELETE FROM summary_state")
    publish_snapshot(con, db)
    con.close()
    at = run_page(monkeypatch, db, "fleet")
    assert not at.exception
    assert any("breathfleet run" in i.value for i in at.info)


def test_thinned_line_keeps_every_bucket_extreme_and_flagged_rows():
    import numpy as np
    rng = np.random.default_rng(3)
    n = 3000
    data = pd.DataFrame({"measured_at": pd.date_range("2026-01-01", periods=n, freq="h"),
                         "z": np.cumsum(rng.normal(size=n))})
    data["beyond"] = data["z"].abs() > 40
    thin = figures.thin_line(data.sample(frac=1, random_state=1), "z", buckets=100, keep=["beyond"])
    # common practice (min/max decimation per pixel column): each bucket's lowest and highest value
    # survive, so a line through the kept rows spans the same range in every bucket
    buckets = np.arange(n) * 100 // n
    for b in range(100):
        part = data["z"][buckets == b]
        assert part.min() in set(thin["z"]) and part.max() in set(thin["z"])
    assert set(data.loc[data["beyond"], "measured_at"]) <= set(thin["measured_at"])
    assert len(thin) <= 2 * 100 + 2 + int(data["beyond"].sum())
    assert thin["measured_at"].is_monotonic_increasing
    short = data.head(150)
    assert figures.thin_line(short, "z", buckets=100).equals(short)  # short series are drawn whole


def test_limit_steps_keep_every_change():
    points = pd.DataFrame({"measured_at": pd.date_range("2026-01-01", periods=8, freq="D"),
                           "ewma_ucl": [1.0, 1.2, 1.3, 1.3, 1.3, 1.3, 1.5, 1.5]})
    steps = figures._steps(points, "ewma_ucl")
    # common practice: a step-after line through the change points draws the same limit
    redrawn = pd.merge_asof(points[["measured_at"]], steps, on="measured_at")
    assert (redrawn["ewma_ucl"] == points["ewma_ucl"]).all() and len(steps) < len(points)


def test_data_range_from_summaries_equals_the_count_over_every_check(tmp_path):
    import duckdb

    from pipeline.db import sql_text
    db = build_fleet_db(tmp_path / "range.duckdb", n_units=3, days=20)
    con = duckdb.connect(str(db))
    try:
        def both():
            fast = con.execute(sql_text("queries/dashboard_data_range_summary")).fetchone()
            full = con.execute(sql_text("queries/dashboard_data_range")).fetchone()
            return fast, full
        fast, full = both()
        assert fast[:4] == full and fast[4] is True
        # checks stored after the main job, one of them from a unit the summaries do not know yet
        con.execute("INSERT INTO checks SELECT check_id + 100000, CASE WHEN check_id = 0 THEN 'TX9999' "
                    "ELSE instrument_id END, measured_at + INTERVAL 30 DAY, lot_id, check_type, target, measured, "
                    "units, simulator_temp_c, pressure_kpa, site_id, operator_id, outcome, file_id, line "
                    "FROM checks WHERE check_id < 5")
        fast, full = both()
        assert fast[:4] == full and full[3] == 4 and fast[4] is True
        con.execute("DELETE FROM checks WHERE check_id < 100")  # removed since the summaries: not current
        assert both()[0][4] is False
    finally:
        con.close()


def _valid_vega_lite(spec: dict) -> None:
    from altair.utils.schemapi import validate_jsonschema
    from altair.vegalite.v6.schema.core import load_schema
    schema = load_schema()
    validate_jsonschema({k: v for k, v in spec.items() if k != "_data"}, schema, rootschema=schema)


@pytest.mark.parametrize("page,chart", [("fleet", None), ("comparison", None), ("lots", None),
                                        ("data_quality", None), ("unit", "Individuals / moving range"),
                                        ("unit", "CUSUM"), ("unit", "EWMA"), ("unit", "Relative error")])
def test_every_chart_is_valid_vega_lite(monkeypatch, fleet_db, page, chart):
    # the server converts charts without Altair's schema validation (figures.vega_lite_spec): it is done here
    at = run_page(monkeypatch, fleet_db, page, {"unit": "TX1000"} if page == "unit" else None)
    if chart is not None:
        at.radio(key="unit_chart").set_value(chart).run()
    specs = charts(at)
    assert specs
    for spec in specs:
        _valid_vega_lite(spec)
        assert spec["config"]["aria"] is False and spec["usermeta"]["embedOptions"]["renderer"] == "canvas"


def test_unit_page_opens_on_the_latest_90_days(monkeypatch, fleet_db):
    at = run_page(monkeypatch, fleet_db, "unit", {"unit": "TX1000"})
    line = next(d for d in chart_titled(at, "Individuals")["_data"].values() if "z" in d)
    # the fixture's TX1000 has one check a day at 0.080 g/210L for 180 days
    assert 85 <= len(line) <= 91
    assert line["measured_at"].max() - line["measured_at"].min() <= pd.Timedelta(days=90)
    at.radio(key="unit_window").set_value("All").run()
    line = next(d for d in chart_titled(at, "Individuals")["_data"].values() if "z" in d)
    assert len(line) == 180
    assert any("Showing 180 charted checks of the 180" in c.value for c in at.caption)


def test_overlapping_impact_windows_merge_into_spans():
    t = pd.Timestamp("2026-03-01")
    signals = pd.DataFrame({"onset_at": [t, t + pd.Timedelta(days=2), t + pd.Timedelta(days=9)],
                            "measured_at": [t + pd.Timedelta(days=3), t + pd.Timedelta(days=5), t + pd.Timedelta(days=10)],
                            "rule": ["WE2", "WE1", "limit"]})
    spans = figures.merge_windows(signals.iloc[::-1])
    # common practice: overlapping intervals are drawn as their union
    assert spans[["onset_at", "measured_at"]].values.tolist() == [[t, t + pd.Timedelta(days=5)],
                                                                  [t + pd.Timedelta(days=9), t + pd.Timedelta(days=10)]]
    assert spans["n_signals"].tolist() == [2, 1] and spans["rules"].tolist() == ["WE1, WE2", "limit"]


def test_warm_up_fills_every_fleet_wide_query_of_the_pages(monkeypatch, tmp_path):
    # After dashboard.warm.warm_caches (run by the server before it listens), the pages' first
    # views with their default controls run no query on the snapshot; another unit's page does.
    from dashboard import loaders, warm
    db = build_fleet_db(tmp_path / "warm.duckdb", n_units=4, days=30)
    monkeypatch.setenv("BREATHFLEET_DB", str(db))
    steps = warm.warm_caches()
    assert set(steps) >= {"header", "fleet", "queue", "unit", "comparison", "lots", "data quality"}
    ran: list[str] = []
    query_cursor = loaders.SnapshotReader.cursor

    def counting_cursor(self, token):  # every query on the snapshot takes a cursor
        import inspect
        names = [f.frame.f_locals.get("name") for f in inspect.stack()[1:6] if f.function == "_query"]
        ran.append(names[0] if names else "library call")
        return query_cursor(self, token)

    monkeypatch.setattr(loaders.SnapshotReader, "cursor", counting_cursor)
    monkeypatch.setattr(warm, "prefetch_units", lambda units, delay_s=0.0: None)  # the queue's prefetch: its own test
    for page in ("fleet", "queue", "unit", "comparison", "lots", "data_quality", "digest"):
        at = run_page(monkeypatch, db, page)
        assert not at.exception, [e.value for e in at.exception]
    assert ran == []
    at = run_page(monkeypatch, db, "unit", {"unit": "TX1003"})
    assert not at.exception
    assert ran and all(n is None or n.startswith("dashboard_unit_") or n == "library call" for n in ran), ran
    assert "dashboard_unit_list" not in ran


def test_warm_up_without_a_database_does_nothing(monkeypatch, tmp_path):
    from dashboard import warm
    monkeypatch.delenv("BREATHFLEET_DB", raising=False)
    assert warm.warm_caches() == {}
    monkeypatch.setenv("BREATHFLEET_DB", str(tmp_path / "none.duckdb"))
    assert warm.warm_caches() == {}


def test_keep_warm_warms_again_after_a_publish(monkeypatch, tmp_path):
    import threading

    import duckdb

    from dashboard import warm
    from pipeline.db import publish_snapshot
    db = build_fleet_db(tmp_path / "kw.duckdb", n_units=3, days=20)
    monkeypatch.setenv("BREATHFLEET_DB", str(db))
    calls = []
    monkeypatch.setattr(warm, "warm_caches", lambda: calls.append(time.monotonic()) or {})
    stop = threading.Event()
    thread = warm.keep_warm(poll_s=0.05, stop=stop)
    try:
        time.sleep(0.3)
        assert calls == []  # nothing new published
        con = duckdb.connect(str(db))
        publish_snapshot(con, db)
        con.close()
        deadline = time.monotonic() + 10
        while not calls and time.monotonic() < deadline:
            time.sleep(0.05)
        assert len(calls) == 1
    finally:
        stop.set()
        thread.join(timeout=5)


def test_index_page_names_the_server_root(monkeypatch):
    # Streamlit's frontend otherwise probes <page>/_stcore/health first, gets a 404 and retries at
    # the root after a back-off: dashboard.serve makes index.html say where the root is.
    import asyncio
    import concurrent.futures

    from starlette.responses import FileResponse

    from dashboard import serve
    from streamlit import file_util
    from streamlit.web.server.starlette import starlette_static_routes as routes
    monkeypatch.setattr(routes, "create_streamlit_static_handler", routes.create_streamlit_static_handler)
    assert serve._announce_server_root()
    handler = routes.create_streamlit_static_handler(file_util.get_static_dir(), None)

    def get(path):
        scope = {"type": "http", "method": "GET", "path": "/" + path, "headers": [], "root_path": ""}
        # in a thread of its own: another test may have left an event loop running in this one
        with concurrent.futures.ThreadPoolExecutor(1) as pool:
            return pool.submit(lambda: asyncio.run(handler.get_response(path, scope))).result()

    for path in ("", "unit"):
        body = get(path).body.decode("utf-8")
        assert "<head><script>window.__streamlit=Object.assign({BACKEND_BASE_URL:window.location.origin+'/'}" in body
        assert 'id="root"' in body
    assert isinstance(get("favicon.png"), FileResponse)


def test_queue_prefetches_the_units_a_coordinator_opens_first(monkeypatch, tmp_path):
    # The queue starts a background fetch of the first view of the unit its box holds, then of the
    # units at the top of its table; once it has run, the unit page of any of them runs no query on
    # the snapshot (same parameters, same cache entries).
    from dashboard import loaders, warm
    db = build_fleet_db(tmp_path / "prefetch.duckdb", n_units=6, days=30)
    monkeypatch.setenv("BREATHFLEET_DB", str(db))
    monkeypatch.setattr(loaders, "QUEUE_PREFETCHED", 3)
    monkeypatch.setattr(loaders, "QUEUE_PREFETCH_DELAY_S", 0.2)
    warm.warm_caches()
    started = []
    original = warm.prefetch_units
    monkeypatch.setattr(warm, "prefetch_units",
                        lambda units, delay_s=0.0: started.append((units, delay_s, original(units, delay_s))))
    at = run_page(monkeypatch, db, "queue")
    assert not at.exception
    top = at.dataframe[0].value["instrument_id"].tolist()[:3]
    assert [(units, delay) for units, delay, _ in started] == [([at.selectbox(key="queue_open_unit").value], 0.0),
                                                              (top, 0.2)]
    for _, _, thread in started:
        if thread is not None:  # None: nothing left to fetch (already fetched once for this snapshot)
            thread.join(timeout=60)
    assert original(top) is None  # once per unit and snapshot
    ran = []
    query_cursor = loaders.SnapshotReader.cursor
    monkeypatch.setattr(loaders.SnapshotReader, "cursor", lambda self, token: ran.append(1) or query_cursor(self, token))
    for unit in top:
        at = run_page(monkeypatch, db, "unit", {"unit": unit})
        assert not at.exception, [e.value for e in at.exception]
    assert ran == []
