"""The HTML report: opened from disk in headless Chromium with every network request blocked,
it must load with no console error and no request, its tables must hold what the commands'
JSON says for the same inputs, and its tables must sort on a header click.

Expected values: the ``foldline foldmap`` / ``foldline plan`` / ``foldline track`` JSON outputs
for the same files (the report must carry them through unchanged: consistency with the fixed
JSON contracts of docs/cli-json.md), and the README's Safety section (same words).
"""

from __future__ import annotations

import hashlib
import json
import os
import re
import warnings
from datetime import datetime, timezone
from pathlib import Path

import pytest

from workbench.cli.main import main
from workbench.errors import FoldlineWarning, InputError, OutputExistsError
from workbench.machine import machine_from_dict, read_machine
from workbench.report import SAFETY_TEXT, build_report, write_report
from workbench.cli.options import parse_orders, track_options_from_args
from workbench.sampling import plan_from_dict, read_plan

from builders import DEMO_MACHINE as MACHINE, DEMO_PLAN as PLAN, DEMO_RUN as RUN, ROOT

CHROMIUM = "/usr/bin/chromium"
CHROMIUM_FLAGS = ["--headless", "--no-sandbox", "--disable-gpu", "--disable-quic", "--no-first-run",
                  "--disable-background-networking", "--disable-component-update", "--disable-sync"]


def _json_of(argv, capsys):
    capsys.readouterr()
    assert main(argv + ["--json"]) == 0
    return json.loads(capsys.readouterr().out)


def _browser_missing_reason():
    if not Path(CHROMIUM).exists():
        return f"Chromium not found at {CHROMIUM} (apt-get install chromium)"
    try:
        import playwright.sync_api  # noqa: F401
    except ImportError:
        return "the playwright Python package is not installed (pip install playwright)"
    return None


# --------------------------------------------------------------------------------------------
# fixtures: one report with the demo run, one browser page on it


@pytest.fixture(scope="module")
def report_file(tmp_path_factory):
    out = tmp_path_factory.mktemp("report") / "demo report.html"
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", FoldlineWarning)
        report = write_report(MACHINE, PLAN, RUN, out=out)
    return out, report


@pytest.fixture(scope="module")
def browser_page(report_file):
    reason = _browser_missing_reason()
    if reason:
        if os.environ.get("CI"):
            pytest.fail(f"browser test cannot run in CI: {reason}")
        pytest.skip(reason)
    from playwright.sync_api import sync_playwright

    out, _ = report_file
    events = {"console": [], "failed": [], "blocked": [], "requests": [], "page_errors": []}
    with sync_playwright() as pw:
        browser = pw.chromium.launch(executable_path=CHROMIUM, args=CHROMIUM_FLAGS)
        context = browser.new_context()

        def route(r):
            url = r.request.url
            if url.startswith("file://") or re.match(r"^https?://127\.0\.0\.1[:/]", url):
                r.continue_()
            else:
                events["blocked"].append(url)
                r.abort()

        context.route("**/*", route)
        page = context.new_page()
        page.on("console", lambda m: events["console"].append((m.type, m.text)))
        page.on("pageerror", lambda e: events["page_errors"].append(str(e)))
        page.on("requestfailed", lambda r: events["failed"].append(r.url))
        page.on("request", lambda r: events["requests"].append(r.url))
        page.goto(out.as_uri(), wait_until="load")
        yield page, events
        context.close()
        browser.close()


def _rows(page, selector):
    """Rows of a table as dicts key -> data-value (exact value strings)."""
    return page.eval_on_selector(
        selector,
        """t => Array.from(t.tBodies[0].rows).map(r => Object.fromEntries(
               Array.from(r.cells).map(c => [c.dataset.key, c.dataset.value])))""",
    )


def _num(v):
    if v == "":
        return None
    return float(v)


# --------------------------------------------------------------------------------------------
# browser checks


@pytest.mark.browser
def test_report_opens_offline_with_no_error_and_no_request(browser_page, report_file):
    page, events = browser_page
    out, report = report_file
    assert events["console"] == [] and events["page_errors"] == []
    assert events["failed"] == [] and events["blocked"] == []
    # The only request is the file itself (every figure is inline SVG).
    assert events["requests"] == [out.as_uri()]
    # Fold maps (Hz and order view) of the worst candidate and the recommended rate, the
    # plan's Campbell diagram (the demo machine has resonances), then the run's tacho check,
    # order spectrum, order map, order cuts, overall level, frequency map, Bode, polar and
    # Campbell views, and the demo plan's acceptance limits drawn on the levels they judge.
    assert page.locator("figure.plot svg").count() == 15
    assert page.locator("script").count() == 1
    # The sorting script ran (it marks each sortable table).
    assert page.locator("table.sortable.js").count() == page.locator("table.sortable").count()
    for sid in report.sections:
        assert page.locator(f"section#{sid}").count() == 1


@pytest.mark.browser
def test_collision_tables_match_foldmap_json(browser_page, capsys):
    page, _ = browser_page
    rates = [float(v) for v in page.eval_on_selector_all(
        "details[data-rate]", "ds => ds.map(d => d.dataset.rate)")]
    assert rates == sorted(read_plan(PLAN).rates_hz)
    for rate in rates:
        ref = _json_of(["foldmap", str(MACHINE), str(PLAN), "--rate", repr(rate)], capsys)
        sel = f'table.collisions[data-rate="{rate!r}"]'
        shown = _rows(page, sel) if page.locator(sel).count() else []
        assert len(shown) == len(ref["collisions"]), rate
        for got, want in zip(shown, ref["collisions"]):
            assert got["line"] == want["line"] and got["band"] == want["band"]
            for key in ("rpm_min", "rpm_max", "zone", "apparent_hz_min", "apparent_hz_max", "residual_db"):
                assert _num(got[key]) == want[key], (rate, key)
    # The demo's lowest rate has collisions: the stage-1 mesh folding into a bearing band.
    assert page.locator('table.collisions[data-rate="2560.0"] tbody tr').count() > 0


@pytest.mark.browser
def test_candidate_table_matches_plan_json(browser_page, capsys):
    page, _ = browser_page
    ref = _json_of(["plan", str(MACHINE), str(PLAN)], capsys)
    shown = _rows(page, "table.candidates")
    assert len(shown) == len(ref["candidates"])
    for got, want in zip(shown, ref["candidates"]):
        assert float(got["rate_hz"]) == want["rate_hz"]
        assert got["clean"] == str(want["clean"]) and int(got["collisions"]) == want["collisions"]
        worst = None if got["worst_residual_db"] in ("", "-inf") else float(got["worst_residual_db"])
        assert worst == want["worst_residual_db"]
    text = page.locator("#recommendation").inner_text()
    assert f"{ref['recommended_rate_hz']:g} S/s" in text
    for note in ref["notes"]:
        assert note in text


@pytest.mark.browser
def test_tables_sort_on_header_click(browser_page):
    page, _ = browser_page
    sel = "table.candidates"
    header = page.locator(f"{sel} th", has_text="collisions")
    header.click()
    asc = [int(v) for v in page.eval_on_selector_all(f"{sel} td[data-key=collisions]",
                                                     "cs => cs.map(c => c.dataset.value)")]
    assert asc == sorted(asc) and header.get_attribute("aria-sort") == "ascending"
    header.click()
    desc = [int(v) for v in page.eval_on_selector_all(f"{sel} td[data-key=collisions]",
                                                      "cs => cs.map(c => c.dataset.value)")]
    assert desc == sorted(asc, reverse=True) and header.get_attribute("aria-sort") == "descending"
    # Text columns sort alphabetically.
    page.locator("details:has(table.lines) > summary").first.click()
    name_header = page.locator("table.lines th", has_text="line").first
    name_header.click()
    names = page.eval_on_selector_all("table.lines td[data-key=name]", "cs => cs.map(c => c.dataset.value)")
    # Case-insensitive, digit runs compared as numbers (common practice, no source).
    natural = lambda t: [int(c) if i % 2 else c for i, c in enumerate(re.split(r"(\d+)", t.lower()))]
    assert names == sorted(names, key=natural) and names != sorted(names)


@pytest.mark.browser
def test_run_tables_match_track_json(browser_page, report_file, capsys):
    page, _ = browser_page
    _, report = report_file
    # The report tracks the run with the plan's angle-domain settings (256 samples/rev and
    # 20 revs/block for the demo plan); the same options on `foldline track` give the same run.
    settings = page.locator("dl.run-summary").inner_text()
    spr = re.search(r"samples per rev\s+(\d+)", settings).group(1)
    rpb = re.search(r"revs per block\s+([\d.]+)", settings).group(1)
    ref = _json_of(["track", str(RUN), "--machine", str(MACHINE), "--samples-per-rev", spr,
                    "--revs-per-block", rpb], capsys)
    shown = _rows(page, "table.peaks")
    got = sorted((float(r["order"]), float(r["amplitude"])) for r in shown)
    assert got == sorted((p["order"], p["amplitude"]) for p in ref["peaks"])
    amps = [float(r["amplitude"]) for r in shown]
    assert amps == sorted(amps, reverse=True)           # pre-sorted, largest first
    ident = _rows(page, "table.identification")
    assert [(r["line"], int(r["zone"]), r["alias"] == "True") for r in ident] == \
        [(i["line"], i["zone"], i["alias"]) for i in ref["identified"]]
    for got_row, want in zip(ident, ref["identified"]):
        for key in ("rpm_min", "rpm_max", "amplitude_max"):
            assert float(got_row[key]) == want[key]
    # The demo's folded stage-1 mesh lines are listed as aliases, first in the table.
    aliases = [i["line"] for i in ref["identified"] if i["alias"]]
    assert aliases and list(report.aliases) == list(dict.fromkeys(aliases))
    assert ident[0]["alias"] == "True"
    # Cuts at order 1 and at the orders of the lines the plan's bands follow, each named.
    cuts = _rows(page, "table.cuts")
    by_name = {ln.name: ln.order for ln in read_machine(MACHINE).lines()}
    want = sorted({1.0} | {round(by_name[b.around], 6) for b in read_plan(PLAN).bands if b.kind == "around"})
    assert [float(r["order"]) for r in cuts] == want
    assert [r["line"] for r in cuts] == ["motor shaft"] + sorted(
        (b.around for b in read_plan(PLAN).bands if b.kind == "around"), key=lambda n: by_name[n])
    run_text = page.locator("#run").inner_text()
    assert f"{ref['rpm_min']:.1f} to {ref['rpm_max']:.1f} rpm" in run_text


# --------------------------------------------------------------------------------------------
# without a browser


def test_report_is_self_contained(report_file):
    out, report = report_file
    text = out.read_text(encoding="utf-8")
    assert hashlib.sha256(out.read_bytes()).hexdigest() == report.sha256
    assert not re.search(r"<(script|img|link|iframe)[^>]+(src|href)\s*=\s*[\"']?(https?:|//)", text, re.I)
    assert "@import" not in text and "@font-face" not in text
    assert not re.search(r"url\(\s*['\"]?(https?:|//)", text)
    # The Content-Security-Policy forbids any load that is not inline.
    assert "default-src &#x27;none&#x27;" in text


def test_safety_words_are_the_readme_s():
    readme = (ROOT / "README.md").read_text(encoding="utf-8")
    section = readme.split("## Safety", 1)[1].split("\n## ", 1)[0]
    assert " ".join(section.split()) == SAFETY_TEXT


def test_text_from_files_is_escaped(tmp_path):
    machine = machine_from_dict({
        "machine": {"name": "<script>alert('x')</script> & co", "reference": "in"},
        "shaft": [{"name": "in"}],
        "order": [{"name": "<b>mesh</b>", "shaft": "in", "order": 20.0}],
    })
    plan = plan_from_dict({
        "speed": {"profile": "linear", "start_rpm": 600, "end_rpm": 1200, "duration_s": 10},
        "acquisition": {"rates_hz": [1000.0, 4000.0], "filter": "butterworth", "filter_order": 4,
                        "cutoff": 0.4},
        "band": [{"name": "band <i>A</i>", "hz": [100.0, 200.0]}],
    })
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", FoldlineWarning)
        report = build_report(machine, plan, created_utc=datetime(2024, 5, 6, 7, 8, 9, tzinfo=timezone.utc))
    assert "<script>alert" not in report.html and "<b>mesh" not in report.html
    assert "&lt;script&gt;alert(&#x27;x&#x27;)&lt;/script&gt; &amp; co" in report.html
    assert "band &lt;i&gt;A&lt;/i&gt;" in report.html
    assert report.html.count("<script>") == 1
    # ISO 8601 in UTC (common practice, no source: the 'Z' suffix marks UTC).
    assert report.created_utc == "2024-05-06T07:08:09Z"


def _small_files(folder):
    """A one-shaft machine with a gear mesh and a bearing, and a plan whose lowest rate folds
    the mesh into the bearing band."""
    (folder / "m.toml").write_text(
        '[machine]\nname = "small"\nreference = "in"\n[[shaft]]\nname = "in"\n'
        '[[order]]\nname = "mesh"\nshaft = "in"\norder = 40.0\n'
        '[[order]]\nname = "fault"\nshaft = "in"\norder = 6.0\n')
    (folder / "p.toml").write_text(
        '[speed]\nprofile = "linear"\nstart_rpm = 600\nend_rpm = 1800\nduration_s = 30\n'
        '[acquisition]\nrates_hz = [1000.0, 5120.0]\nfilter = "butterworth"\nfilter_order = 4\n'
        'cutoff = 0.4\nthreshold_db = -60\n'
        '[[band]]\nname = "fault band"\naround = "fault order"\nwidth_pct = 20\n')
    return folder / "m.toml", folder / "p.toml"


def test_cli_json_names_sections_and_hash(tmp_path, capsys):
    machine, plan = _small_files(tmp_path)
    out = tmp_path / "r.html"
    got = _json_of(["report", str(machine), str(plan), "--out", str(out)], capsys)
    assert got["out"] == str(out)
    assert got["sha256"] == hashlib.sha256(out.read_bytes()).hexdigest()
    assert got["sections"] == ["summary", "machine", "plan", "recommendation", "collisions",
                               "fold-maps", "angle-settings", "safety", "provenance", "signoff"]
    for rate in ("1000", "5120"):
        ref = _json_of(["foldmap", str(machine), str(plan), "--rate", rate], capsys)
        assert got["collisions_by_rate"][rate] == len(ref["collisions"])
    assert got["collisions_by_rate"]["1000"] > 0
    assert got["collisions"] == sum(got["collisions_by_rate"].values())
    assert got["recommended_rate_hz"] == _json_of(["plan", str(machine), str(plan)], capsys)["recommended_rate_hz"]
    roles = {i["role"]: i["sha256"] for i in got["inputs"]}
    assert roles["machine"] == hashlib.sha256(machine.read_bytes()).hexdigest()
    assert roles["plan"] == hashlib.sha256(plan.read_bytes()).hexdigest()
    # An existing report is not replaced without --force, and nothing partial is left.
    assert main(["report", str(machine), str(plan), "--out", str(out), "--json"]) == 2
    assert "exists already" in capsys.readouterr().err
    assert sorted(p.name for p in tmp_path.iterdir()) == ["m.toml", "p.toml", "r.html"]


def test_validation_errors(tmp_path, capsys):
    with pytest.raises(InputError, match=r"give a name ending in \.html"):
        write_report(MACHINE, PLAN, out=tmp_path / "r.pdf")
    (tmp_path / "r.html").write_text("x")
    with pytest.raises(OutputExistsError, match="exists already"):
        write_report(MACHINE, PLAN, out=tmp_path / "r.html")
    with pytest.raises(InputError, match="time zone aware"):
        build_report(read_machine(MACHINE), read_plan(PLAN), created_utc=datetime(2024, 1, 1))
    with pytest.raises(InputError, match="orders separated by commas"):
        parse_orders("1,x", "--cut-orders")
    with pytest.raises(InputError, match="every order must be a positive number"):
        parse_orders("1,-2", "--cut-orders")
    assert main(["report", str(MACHINE), str(PLAN), "--out", str(tmp_path / "s.html"),
                 "--samples-per-rev", "128"]) == 2
    assert "need a RUN" in capsys.readouterr().err
    assert main(["report", str(MACHINE), str(PLAN), str(RUN), "--out", str(tmp_path / "s.html"),
                 "--envelope", "400"]) == 2
    assert "LO,HI" in capsys.readouterr().err
    assert main(["report", str(MACHINE), str(PLAN), str(RUN), "--out", str(tmp_path / "s.html"),
                 "--envelope", "900,400"]) == 2
    assert "0 <= LO < HI" in capsys.readouterr().err
    assert not (tmp_path / "s.html").exists()


def test_track_options_from_args_maps_names():
    import argparse

    from workbench.cli.options import add_track_options

    p = argparse.ArgumentParser()
    add_track_options(p)
    opts = track_options_from_args(p.parse_args(
        ["--channel", "2", "--tacho", "tacho", "--rpm", "1500", "--envelope", "400,1000",
         "--cut-orders", "1,29", "--samples-per-rev", "128"]))
    assert opts == {"channels": (2,), "tacho": "tacho", "rpm": 1500.0, "envelope_hz": (400.0, 1000.0),
                    "cut_orders": (1.0, 29.0), "samples_per_rev": 128}
