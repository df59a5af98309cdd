"""report.html opened from disk in headless Chromium (Debian's package), driven by Playwright.

Skips with a reason where /usr/bin/chromium or Playwright is absent (.ci/run installs
Chromium). The fixtures are the FileResult batch of test_report_csv (no audio).
"""

from __future__ import annotations

import dataclasses
import math
import re
from pathlib import Path

import numpy as np
import pytest
from numpy.testing import assert_allclose
from test_report_csv import HOSTILE, make_results, make_run, timeline, values

from checker.model.measurement import Measurement
from checker.model.results import FileResult
from checker.model.timeline import build_timeline
from checker.model.verdict import Flag, GainAdvice, Verdict
from checker.report import write_reports
from checker.report.atomic import write_text_atomic
from checker.report.html import render_html

CHROMIUM = Path("/usr/bin/chromium")
ARGS = [
    "--headless",
    "--no-sandbox",
    "--disable-gpu",
    "--disable-background-networking",
    "--disable-component-update",
    "--disable-sync",
    "--no-first-run",
]

pytestmark = pytest.mark.browser

if not CHROMIUM.exists():
    pytest.skip(
        f"{CHROMIUM} not found: install Debian's chromium (apt-get install chromium) "
        "to run the browser tests",
        allow_module_level=True,
    )
sync_api = pytest.importorskip("playwright.sync_api", reason="playwright is not installed")


@pytest.fixture(scope="module")
def browser():
    with sync_api.sync_playwright() as p:
        b = p.chromium.launch(executable_path=str(CHROMIUM), args=ARGS)
        yield b
        b.close()


class Watch:
    """Everything the page tries to do that it should not: requests, dialogs, errors."""

    def __init__(self, page, allowed_url: str):
        self.requests: list[str] = []
        self.dialogs: list[str] = []
        self.errors: list[str] = []
        page.on("dialog", self._dialog)
        page.on("pageerror", lambda e: self.errors.append(str(e)))
        page.on("console", lambda m: m.type == "error" and self.errors.append(m.text))
        page.route("**/*", self._route)
        self.allowed = allowed_url

    def _dialog(self, dialog):
        self.dialogs.append(dialog.message)
        dialog.dismiss()

    def _route(self, route):
        url = route.request.url
        self.requests.append(url)
        if url == self.allowed:
            route.continue_()
        else:
            route.abort()


def open_report(browser, html: Path, width: int = 1440):
    page = browser.new_page(viewport={"width": width, "height": 1000})
    watch = Watch(page, html.as_uri())
    page.goto(html.as_uri())
    return page, watch


def column_texts(page, key: str) -> list[str]:
    """Visible cells of one column, in display order."""
    return page.evaluate(
        """(key) => {
            const th = document.querySelector('#file-table thead th.h-' + key);
            const n = Array.prototype.indexOf.call(th.parentNode.children, th);
            return Array.from(document.querySelectorAll('#file-rows tr'))
                .filter(tr => !tr.hidden).map(tr => tr.children[n].textContent.trim());
        }""",
        key,
    )


def wait_shown(page, count: int) -> None:
    """The text filter is debounced: wait for the live count (no eval: the page's CSP forbids it)."""
    sync_api.expect(page.locator("#shown")).to_have_text(re.compile(rf"^Showing {count} of "))


def as_number(text: str) -> float:
    return -math.inf if text == "-inf" else float(text)


@pytest.fixture(scope="module")
def report(tmp_path_factory):
    out = tmp_path_factory.mktemp("html")
    return write_reports(out, make_run(), make_results())["html"]


def test_sort_filter_detail_and_nothing_leaves_the_page(browser, report, tmp_path):
    page, watch = open_report(browser, report)
    # Styles and script run under the page's CSP (hashes): the body colour and the live count.
    assert page.evaluate("getComputedStyle(document.body).backgroundColor") == "rgb(245, 243, 238)"
    csp = page.get_attribute('meta[http-equiv="Content-Security-Policy"]', "content")
    assert csp.startswith("default-src 'none'")
    # Failures first by default (error, then fail, then warn, then pass).
    statuses = column_texts(page, "status")
    assert [s[-4:] for s in statuses][:3] == ["rror", "fail", "fail"]
    assert statuses[-1].endswith("pass")

    # Sort by true peak: ascending puts digital silence (-inf) first and the empty cell last.
    page.click("th.h-true_peak_dbtp button")
    assert page.get_attribute("th.h-true_peak_dbtp", "aria-sort") == "ascending"
    peaks = column_texts(page, "true_peak_dbtp")
    assert peaks[0] == "-inf" and peaks[-1] == ""
    numbers = [as_number(t) for t in peaks[:-1]]
    assert numbers == sorted(numbers)
    page.click("th.h-true_peak_dbtp button")
    peaks = column_texts(page, "true_peak_dbtp")
    assert page.get_attribute("th.h-true_peak_dbtp", "aria-sort") == "descending"
    assert peaks[0] == "+0.6" and peaks[-2:] == ["-inf", ""]  # empty stays last

    # Filter to failures only, then by text.
    for status in ("error", "warn", "pass"):
        page.uncheck(f'input[name=status][value="{status}"]')
    assert [s[-4:] for s in column_texts(page, "status")] == ["fail", "fail"]
    assert page.text_content("#shown") == "Showing 2 of 8 files"
    page.fill("#q", "ep02")
    wait_shown(page, 1)
    assert column_texts(page, "path") == ["ep02_final.wavprogramme/"]

    # The detail view: flags with measured vs limit, gain advice and a graph with points.
    page.click("#file-rows tr:not([hidden]) button.open")
    assert page.is_visible("dialog#detail")
    assert page.text_content("#detail-title") == "ep02_final.wav"
    flag_rows = page.locator("#detail-body table.flags tbody tr")
    assert flag_rows.count() == 2
    assert "0.60 dBTP" in flag_rows.nth(1).text_content()
    assert "-1.00 dBTP" in flag_rows.nth(1).text_content()
    assert "0:12 (12.30 s)" in flag_rows.nth(1).text_content()
    assert "Listening level" in page.text_content("#detail-body")
    points = int(page.get_attribute("#detail-body svg path.short-term", "data-points"))
    assert points > 100  # 1800 stored windows reduced to <= 480 points
    d = page.get_attribute("#detail-body svg path.short-term", "d")
    assert len(re.findall(r"[ML]", d)) == points
    # drawn as distance from the target: a zero line, the tolerance (+-1 LU) as two lines,
    # the area above the target (the file is 3.6 LU loud), marks in the overs lane below
    assert page.locator("#detail-body svg line.zero").count() == 1
    assert page.locator("#detail-body svg line.tolerance").count() == 2
    assert page.locator("#detail-body svg path.over-target").count() == 1
    assert page.locator("#detail-body svg rect.lane-overs").count() == 1
    assert page.locator("#detail-body svg g.mark").count() == 3  # 2 overs + the flag position
    shot = tmp_path / "detail.png"
    page.screenshot(path=str(shot))
    assert shot.stat().st_size > 10_000
    page.keyboard.press("Escape")  # the native dialog closes on Escape ...
    assert not page.is_visible("dialog#detail")
    # ... and focus goes back to the button that opened it.
    assert page.evaluate("document.activeElement.className") == "open"

    # Keyboard only: a column heading is a button; Enter sorts by it.
    page.focus("th.h-path button")
    page.keyboard.press("Enter")
    assert page.get_attribute("th.h-path", "aria-sort") == "ascending"

    # The page may not fetch anything: the CSP refuses it before a request is made.
    outcome = page.evaluate(
        "fetch('https://example.invalid/x').then(() => 'loaded', () => 'blocked')"
    )
    assert outcome == "blocked"
    assert watch.requests == [report.as_uri()]
    assert watch.dialogs == []
    assert [e for e in watch.errors if "example.invalid" not in e] == []
    page.close()


def test_hostile_file_name_stays_text(browser, tmp_path):
    # Run facts come from the command line and the profile file: escaped like file data.
    run = dataclasses.replace(
        make_run(),
        inputs=("<script>alert(4)</script>", "batch/in_1"),
        profile_title="<b onmouseover=alert(5)>R 128</b>",
    )
    report = write_reports(tmp_path / "out", run, make_results())["html"]
    page, watch = open_report(browser, report)
    assert page.text_content("h1") == "<b onmouseover=alert(5)>R 128</b>"
    assert page.get_by_text("<script>alert(4)</script>", exact=True).count() == 1
    assert page.locator("b[onmouseover]").count() == 0
    name = HOSTILE.rsplit("/", 1)[1]
    assert page.get_by_text(name, exact=True).count() == 1  # the table cell shows it as text
    assert page.locator("img").count() == 0
    assert page.locator("script:not([type])").count() == 1  # only the report's own script
    page.fill("#q", "onerror")
    wait_shown(page, 1)
    page.click("#file-rows tr:not([hidden]) button.open")
    assert page.text_content("#detail-title") == name
    body = page.text_content("#detail-body")
    assert "</script><script>alert(3)</script> no room tone at the head" in body
    page.click("#detail-body details.all summary")
    assert '"><script>alert(2)</script>' in page.text_content("#detail-body table.kv")
    assert page.locator("img").count() == 0
    page.screenshot(path=str(tmp_path / "hostile.png"), full_page=True)
    assert watch.dialogs == [] and watch.errors == []
    assert watch.requests == [report.as_uri()]
    page.close()


def many_results(n: int):
    """n files with varied levels; a few shared timelines keep the fixture quick to build."""
    timelines = [timeline(12.0, -23.0 + k, seed=k) for k in range(8)]
    out = []
    for i in range(n):
        tp = -6.0 + (i * 37 % 70) / 10.0
        status = "fail" if tp > -1.0 else ("warn" if i % 7 == 0 else "pass")
        flags = (
            (Flag("true_peak_max_dbtp", "fail", tp, -1.0, "dBTP", "Over the ceiling.", 1.5),)
            if status == "fail"
            else ()
        )
        vals = values(true_peak_dbtp=tp if i % 500 else -math.inf, duration_s=12.0,
                      integrated_lufs=-30.0 + (i % 13))  # fmt: skip
        gain = GainAdvice(-23.0 - vals["integrated_lufs"], tp, None, tp < -1.0, "Adjust.")
        path = f"batch/{i // 100:02d}/take_{i:05d}.wav"
        m = Measurement(path=path, values=vals, timeline=timelines[i % 8])
        out.append(FileResult(path, status, m, Verdict(status, flags, gain)))
    return out


@pytest.mark.slow
def test_five_thousand_rows_sort_and_filter(browser, tmp_path):
    results = many_results(5000)
    html = write_text_atomic(tmp_path / "report.html", render_html(make_run(), results, "now"))
    page, watch = open_report(browser, html)
    # Large batches are paged: 250 rows in the document, the rest attached on request.
    assert page.locator("#file-rows tr").count() == 250
    assert page.text_content("#shown").startswith("Showing the first 250 of 5000 matching files")
    # A smoke bound, not a benchmark: a sort that hangs the page would blow far past it.
    elapsed_ms = page.evaluate(
        """() => {
            const t0 = performance.now();
            document.querySelector('th.h-true_peak_dbtp button').click();
            document.body.offsetHeight;  // include the layout of the new rows
            return performance.now() - t0;
        }"""
    )
    assert elapsed_ms < 10_000
    # The first page after an ascending sort holds the 250 lowest true peaks of all 5000.
    want = sorted(r.measurement.values["true_peak_dbtp"] for r in results)[:250]
    got = [as_number(t) for t in column_texts(page, "true_peak_dbtp")]
    assert_allclose(got, want, rtol=0, atol=0.05)  # the table shows one decimal
    assert got[:10] == [-math.inf] * 10  # every 500th file is silent
    page.click("#more")
    assert page.locator("#file-rows tr").count() == 500
    page.fill("#q", "take_04999")
    wait_shown(page, 1)
    page.click("#file-rows tr button.open")
    assert int(page.get_attribute("#detail-body svg path.short-term", "data-points")) > 50
    assert watch.errors == [] and watch.dialogs == []
    assert watch.requests == [html.as_uri()]
    page.close()


def mono_result(path: str, plain_lufs: float) -> FileResult:
    """A mono file: BS.1770 weights its one channel 1.0, so as dual mono it reads +3.01 LU."""
    v = values(channels=1, channel_layout="M", integrated_lufs=plain_lufs,
               integrated_dual_mono_lufs=plain_lufs + 3.0103, true_peak_channel_dbtp=[-3.0],
               sample_peak_channel_dbfs=[-3.2])  # fmt: skip
    m = Measurement(path=path, values=v, timeline=timeline(60.0, plain_lufs, 9))
    return FileResult(path, "pass", m, Verdict("pass", ()))


def test_a_narrow_screen_has_no_page_overflow_and_details_stack(browser, tmp_path):
    run = dataclasses.replace(make_run(), mono_loudness="dual_mono")
    results = [*make_results(), mono_result("programme/mono_intro.wav", -18.96)]
    html = write_reports(tmp_path, run, results)["html"]
    for width in (360, 400):
        page, watch = open_report(browser, html, width=width)
        # no horizontal page overflow: the table scrolls inside its own box
        assert page.evaluate("document.documentElement.scrollWidth") <= width
        rights = page.evaluate(
            "Array.from(document.querySelectorAll('.tile, .fixgroup, figure.batch, .note'))"
            ".map(e => e.getBoundingClientRect().right)"
        )
        assert rights and max(rights) <= width
        # the batch chart is there, one mark per file with finite loudness and true peak
        assert page.locator("svg.batch-chart rect.accept").count() == 1
        assert page.locator("svg.batch-chart g.pt").count() == 6
        page.fill("#q", "ep02")
        wait_shown(page, 1)
        page.click("#file-rows tr:not([hidden]) button.open")
        dialog_right = page.evaluate(
            "document.getElementById('detail').getBoundingClientRect().right"
        )
        assert dialog_right <= width
        # details stack label/value: every flag cell (limit, what to do, source) is on screen
        cells = page.evaluate(
            """() => Array.from(document.querySelectorAll('#detail-body table.flags td'))
                .map(td => [td.getAttribute('data-label'), td.getBoundingClientRect().right,
                            getComputedStyle(td, '::before').content])"""
        )
        assert {c[0] for c in cells} >= {"Limit", "What to do", "Source"}
        assert all(c[1] <= width for c in cells)
        assert all(c[2] == '"' + c[0] + '"' for c in cells)  # the label shown beside the value
        page.keyboard.press("Escape")
        assert watch.errors == [] and watch.dialogs == []
        page.close()


def test_a_mono_file_shows_the_value_that_was_judged(browser, tmp_path):
    run = dataclasses.replace(make_run(), mono_loudness="dual_mono")
    html = write_reports(tmp_path, run, [mono_result("show/mono_intro.wav", -18.96)])["html"]
    page, watch = open_report(browser, html)
    cell = column_texts(page, "integrated_lufs")[0]
    # -18.96 LUFS on one channel + 3.0103 LU (BS.1770: dual mono doubles the power) = -15.9497,
    # one decimal in the table
    assert cell == "-15.9judged as dual mono"
    title = page.get_attribute("#file-rows td.n[title^='mono file']", "title")
    assert "-19.0 LUFS on its one channel" in title
    page.click("#file-rows tr button.open")
    note = page.text_content("#detail-body .judged-note")
    assert "judged as dual mono" in note and "-15.95 LUFS" in note and "-18.96 LUFS" in note
    assert watch.errors == []
    page.close()


def test_the_speech_lane_marks_what_the_gate_heard(browser, tmp_path):
    # A 180 s file whose speech gate marked 20-60 s and 100-120 s as speech (speech_active 1 per
    # 100 ms step, the speech meter's lane): two stretches in the lane, none without the gate.
    n = 1800
    speech = np.zeros(n)
    speech[200:600] = 1.0
    speech[1000:1200] = 1.0
    short = np.full(n, -23.0)
    lanes = build_timeline(
        {
            "short_term_lufs": (0.1, short),
            "momentary_lufs": (0.1, short),
            "speech_active": (0.1, speech),
        }
    )
    plain = build_timeline({"short_term_lufs": (0.1, short), "momentary_lufs": (0.1, short)})
    rows = [
        FileResult(
            "show/talk.wav", "pass", Measurement("show/talk.wav", values(), lanes), Verdict("pass")
        ),
        FileResult(
            "show/music.wav",
            "pass",
            Measurement("show/music.wav", values(), plain),
            Verdict("pass"),
        ),
    ]
    html = write_reports(tmp_path, make_run(), rows)["html"]
    page, watch = open_report(browser, html)
    counts = {}
    for i in range(2):
        page.click(f"#file-rows tr:nth-child({i + 1}) button.open")
        name = page.text_content("#detail-title")
        counts[name] = (
            page.locator("#detail-body svg rect.lane-speech").count(),
            page.locator("#detail-body svg rect.speech").count(),
        )
        page.keyboard.press("Escape")
    assert counts == {"talk.wav": (1, 2), "music.wav": (0, 0)}
    assert watch.errors == []
    page.close()


def test_programme_parts_are_one_line_each_in_the_detail(browser, tmp_path):
    # Parts as checker/analysis/span.py gives them (plain dicts in values["parts"]).
    parts = [
        {"part": 1, "start_s": 3.0, "end_s": 9.0, "duration_s": 6.0, "integrated_lufs": -20.01,
         "integrated_note": None, "max_short_term_lufs": -19.5, "true_peak_dbtp": -3.2,
         "true_peak_note": None, "sample_peak_dbfs": -3.5},
        {"part": 2, "start_s": 12.0, "end_s": 13.0, "duration_s": 1.0, "integrated_lufs": None,
         "integrated_note": "<b>below absolute gate</b>", "max_short_term_lufs": None,
         "true_peak_dbtp": -40.0, "true_peak_note": None, "sample_peak_dbfs": -41.0},
    ]  # fmt: skip
    v = {**values(), "parts": parts, "parts_count": 2}
    rows = [FileResult("show/parts.wav", "pass", Measurement("show/parts.wav", v), Verdict("pass"))]
    html = write_reports(tmp_path, make_run(), rows)["html"]
    page, watch = open_report(browser, html)
    page.click("#file-rows tr button.open")
    lines = page.locator("#detail-body ul.parts li").all_text_contents()
    assert len(lines) == 2
    assert lines[0].startswith("Part 1, 3.00\u20139.00 s: integrated -20.01 LUFS")
    assert "true peak -3.20 dBTP" in lines[0]
    assert "(<b>below absolute gate</b>)" in lines[1]  # a note is text, never markup
    assert page.locator("#detail-body ul.parts b").count() == 0
    assert watch.errors == []
    page.close()


def test_the_programme_lane_shows_parts_and_what_was_left_out(browser, tmp_path):
    # A 20 s file: a 3 s head (line-up tone) and a 2 s tail left out (programme 3-18 s), two
    # parts (3-9 s and 12-18 s). The lane draws both parts, numbered, and the dashed head and
    # tail; a file without a span or parts has no programme lane.
    n = 200
    short = np.full(n, -23.0)
    tl = build_timeline({"short_term_lufs": (0.1, short), "momentary_lufs": (0.1, short)})
    parts = [
        {"part": 1, "start_s": 3.0, "end_s": 9.0, "integrated_lufs": -22.5},
        {"part": 2, "start_s": 12.0, "end_s": 18.0, "integrated_lufs": -23.4},
    ]
    spanned = {
        **values(duration_s=20.0),
        "programme_start_s": 3.0,
        "programme_end_s": 18.0,
        "parts": parts,
        "parts_count": 2,
    }
    rows = [
        FileResult("show/a.wav", "pass", Measurement("show/a.wav", spanned, tl), Verdict("pass")),
        FileResult(
            "show/b.wav",
            "pass",
            Measurement("show/b.wav", values(duration_s=20.0), tl),
            Verdict("pass"),
        ),
    ]
    html = write_reports(tmp_path, make_run(), rows)["html"]
    page, watch = open_report(browser, html)
    seen = {}
    for i in range(2):
        page.click(f"#file-rows tr:nth-child({i + 1}) button.open")
        name = page.text_content("#detail-title")
        seen[name] = (
            page.locator("#detail-body svg rect.lane-programme").count(),
            page.locator("#detail-body svg g.part").count(),
            page.locator("#detail-body svg g.excluded").count(),
            page.locator("#detail-body svg g.part text").all_text_contents(),
        )
        if name == "a.wav":
            titles = page.locator("#detail-body svg g.excluded title").all_text_contents()
            assert titles[0].startswith("head, 0.00") and "not in the programme" in titles[0]
            assert titles[1].startswith("tail, 18.00")
        page.keyboard.press("Escape")
    assert seen == {"a.wav": (1, 2, 2, ["1", "2"]), "b.wav": (0, 0, 0, [])}
    assert watch.errors == []
    page.close()
