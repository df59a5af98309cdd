"""checker.report: report.csv, flags.csv, results.jsonl and atomic writes.

Fixtures are built directly as FileResult objects (no audio): the reports only
reformat what the meters and rules produced, so the expected cell values are the
fixture values themselves. The formula-injection cases follow the OWASP "CSV
Injection" guidance (cells starting with =, +, -, @, tab or carriage return);
checked from memory, not against the page.
"""

from __future__ import annotations

import csv
import json
import math
import os

import numpy as np
import pandas as pd
import pytest
from numpy.testing import assert_allclose

from checker.model.measurement import Measurement
from checker.model.results import FileResult, RunInfo
from checker.model.serial import dumps as serial_dumps
from checker.model.timeline import Timeline, build_timeline
from checker.model.verdict import Flag, GainAdvice, Verdict
from checker.report import REPORT_FILES, write_reports
from checker.report.atomic import atomic_text
from checker.report.cells import PER_CHANNEL_KEYS
from checker.report.csv_out import neutralise
from checker.report.frame import LEAD_COLUMNS, MEASUREMENT_COLUMNS, results_frame, sorted_results
from checker.report.htmldata import embed_json, profile_limits_for_graph, reduce_timeline

HOSTILE = "stems/<img src=x onerror=alert(1)>.wav"

LIMITS = (
    {"key": "integrated_target_lufs", "value": -23.0, "tolerance": 1.0, "text": "-23.0 +- 1.0",
     "unit": "LUFS", "severity": "fail", "source": "EBU R 128 (2020) s. 2.1 and 2.2 (from memory)"},
    {"key": "true_peak_max_dbtp", "value": -1.0, "unit": "dBTP", "severity": "fail",
     "source": "EBU R 128 (2020) s. 2.5 (from memory)"},
    {"key": "sample_rates_hz", "value": [48000], "unit": "Hz", "severity": "fail",
     "source": "common practice"},
)  # fmt: skip


def timeline(seconds: float, level_lufs: float, seed: int):
    """A deterministic loudness series at the meters' 100 ms hop (not audio: just numbers)."""
    rng = np.random.default_rng(seed)
    n = max(1, int(seconds * 10))
    t = np.arange(n) / 10.0
    short = level_lufs + 3.0 * np.sin(2 * np.pi * t / max(seconds, 1.0) * 3) + rng.normal(0, 0.4, n)
    momentary = short + rng.normal(0, 2.0, n)
    short[:5] = -np.inf  # the first windows are not full yet: no level
    return build_timeline({"short_term_lufs": (0.1, short), "momentary_lufs": (0.1, momentary)})


def values(**over):
    v = {
        "container": "WAV", "subtype": "PCM_24", "sample_rate_hz": 48000, "channels": 2,
        "format_bits": 24, "frames": 8_640_000, "frames_declared": 8_640_000,
        "duration_s": 180.0, "channel_layout": "L R", "layout_source": "assumed",
        "integrated_lufs": -23.1, "integrated_dual_mono_lufs": None, "integrated_note": None,
        "loudness_range_lu": 6.4, "loudness_range_stable": True,
        "max_momentary_lufs": -15.2, "max_momentary_time_s": 61.3,
        "max_short_term_lufs": -18.9, "max_short_term_time_s": 60.0,
        "true_peak_dbtp": -1.7, "true_peak_time_s": 61.25, "true_peak_channel_dbtp": [-1.7, -2.25],
        "true_peak_overs": 0, "true_peak_over_times_s": [], "true_peak_ceiling_dbtp": -1.0,
        "sample_peak_dbfs": -2.0, "sample_peak_channel_dbfs": [-2.0, -3.4],
        "dc_offset_channel_percent": [0.0004, 0.02], "identical_channels": [],
        "channel_correlations": [[0, 1, 0.62]], "min_correlation": 0.62,
    }  # fmt: skip
    v.update(over)
    return v


def result(path, status, vals, flags=(), gain=None, seconds=180.0, level=-23.0, seed=0, **kw):
    m = Measurement(path=path, values=vals, timeline=timeline(seconds, level, seed))
    return FileResult(path, status, m, Verdict(status, tuple(flags), gain), **kw)


def make_results() -> list[FileResult]:
    loud_flags = (
        Flag("integrated_lufs", "fail", -19.4, "-23.0 +- 1.0", "LUFS",
             "Integrated loudness is 3.6 LU above the target: turn the file down.", None,
             "EBU R 128 (2020) s. 2.1 (from memory)"),
        Flag("true_peak_max_dbtp", "fail", 0.6, -1.0, "dBTP",
             "True peak is above the ceiling: use a true-peak limiter.", 12.3,
             "EBU R 128 (2020) s. 2.5 (from memory)"),
    )  # fmt: skip
    loud_gain = GainAdvice(-3.6, -3.0, -80.0, True, "Turn down by 3.6 dB; peaks then fit.")
    quiet_gain = GainAdvice(6.0, 3.0, -60.0, False, "Raising by 6 dB would push peaks over.")
    return [
        result("programme/ep01_final.wav", "pass", values(), gain=GainAdvice(0.1, -1.6, -90.0, True, "No change needed.")),
        result("programme/ep02_final.wav", "fail",
               values(integrated_lufs=-19.4, true_peak_dbtp=0.6, true_peak_overs=14,
                      true_peak_over_times_s=[12.3, 47.9], max_short_term_lufs=-14.2),
               loud_flags, loud_gain, level=-19.5, seed=1),
        result("promo/trailer_30s.wav", "warn",
               values(duration_s=30.0, loudness_range_stable=False, integrated_lufs=-29.0),
               (Flag("loudness_range_lu", "warn", 2.1, [3.0, 20.0], "LU", "Narrow range.", None, "common practice"),),
               quiet_gain, seconds=30.0, level=-29.0, seed=2),
        result(HOSTILE, "warn", values(channel_layout='"><script>alert(2)</script>'),
               (Flag("leading_silence_s", "warn", 0.0, 0.5, "s",
                     "</script><script>alert(3)</script> no room tone at the head", 0.0, "common practice"),),
               seed=3),  # fmt: skip
        result("silence/room_tone.wav", "fail",
               values(integrated_lufs=None, integrated_note="every block is below the absolute gate",
                      true_peak_dbtp=-math.inf, sample_peak_dbfs=-math.inf, max_short_term_lufs=None,
                      max_momentary_lufs=None, sample_peak_channel_dbfs=[-math.inf, -math.inf],
                      is_silent=True),
               (Flag("integrated_lufs", "fail", None, "-23.0 +- 1.0", "LUFS",
                     "Integrated loudness could not be measured: the file is silent.", None, ""),),
               seconds=20.0, level=-200.0),  # fmt: skip
        FileResult.failed("broken/truncated.wav", "audio: cannot read header = b'RIFX' (expected RIFF)"),
        result("=HYPERLINK(\"http://example.invalid\",\"x\").wav", "pass", values(), seed=5),
        result("stems/album", "pass", values(set_max_true_peak_dbtp=-1.2, sum_true_peak_dbtp=-0.4),
               kind="set", group="album"),  # fmt: skip
    ]  # fmt: skip


def make_run(n_inputs: int = 3) -> RunInfo:
    return RunInfo(
        run_id="run-0001", started_at="2026-12-02T02:00:00Z", finished_at="2026-12-02T02:01:10Z",
        inputs=tuple(f"batch/in_{i}" for i in range(n_inputs)), profile_name="ebu-r128",
        profile_title="EBU R 128 programme", profile_limits=LIMITS, engine_version="0.1.0+engine1",
    )  # fmt: skip


@pytest.fixture(scope="module")
def written(tmp_path_factory):
    out = tmp_path_factory.mktemp("reports")
    results = make_results()
    return out, results, write_reports(out, make_run(), results)


def read_rows(path):
    with open(path, newline="", encoding="utf-8") as handle:
        return list(csv.DictReader(handle))


def test_writes_the_four_reports_and_no_temporary_files(written):
    out, _, paths = written
    assert {k: p.name for k, p in paths.items()} == REPORT_FILES
    assert sorted(p.name for p in out.iterdir()) == sorted(REPORT_FILES.values())


def test_report_csv_columns_are_stable_and_documented(written):
    out, results, _ = written
    with open(out / "report.csv", newline="", encoding="utf-8") as handle:
        header = next(csv.reader(handle))
    # Lead columns, then the full shared vocabulary (always present; per-channel lists as one
    # column per channel, two here), then extras sorted.
    vocabulary = []
    for key in MEASUREMENT_COLUMNS:
        if key in PER_CHANNEL_KEYS:
            vocabulary += [key.replace("_channel", "_ch1"), key.replace("_channel", "_ch2")]
        else:
            vocabulary.append(key)
    assert header == [*LEAD_COLUMNS, *vocabulary, "set_max_true_peak_dbtp", "sum_true_peak_dbtp"]
    assert "true_peak_ch1_dbtp" in header and "true_peak_channel_dbtp" not in header
    assert header[:4] == ["path", "kind", "group", "status"]
    assert len(set(header)) == len(header)


def test_report_csv_values_match_the_measurements(written):
    out, results, _ = written
    rows = {r["path"]: r for r in read_rows(out / "report.csv")}
    assert len(rows) == len(results)
    for r in results:
        if r.measurement is None or r.path.startswith("="):
            continue
        row = rows[r.path]
        assert row["status"] == r.status
        for key in ("integrated_lufs", "true_peak_dbtp", "loudness_range_lu", "sample_rate_hz"):
            want = r.measurement.values[key]
            if want is None:
                assert row[key] == ""  # None -> empty cell
            else:
                # fixture values have at most two decimals: the 0.01 rounding keeps them
                assert_allclose(float(row[key]), want, rtol=0, atol=0)
    assert rows["programme/ep01_final.wav"]["sample_rate_hz"] == "48000"  # an integer
    loud = rows["programme/ep02_final.wav"]
    assert loud["flag_count"] == "2"
    assert loud["flags"].startswith("fail: Integrated loudness is 3.6 LU above")
    assert " | fail: True peak is above the ceiling" in loud["flags"]
    assert_allclose(float(loud["gain_to_target_db"]), -3.6, rtol=0, atol=0)
    assert_allclose(float(loud["predicted_true_peak_dbtp"]), -3.0, rtol=0, atol=0)
    assert loud["plain_gain_enough"] == "True"
    # Per-channel values are numbers in their own columns (never guarded text).
    assert (loud["true_peak_ch1_dbtp"], loud["true_peak_ch2_dbtp"]) == ("-1.7", "-2.25")
    assert (loud["dc_offset_ch1_percent"], loud["dc_offset_ch2_percent"]) == ("0.0004", "0.02")
    # Other lists are text: times at 0.001 s, channel pairs counted from 1.
    assert loud["true_peak_over_times_s"] == "12.3; 47.9"
    assert loud["channel_correlations"] == "1-2: 0.62"
    assert loud["identical_channels"] == ""
    # Worst first: errors, then failures, then warnings, then passes.
    order = [r["status"] for r in read_rows(out / "report.csv")]
    assert order == sorted(order, key=["error", "fail", "warn", "pass"].index)


def test_silence_is_minus_inf_and_undefined_is_empty(written):
    out, _, _ = written
    rows = {r["path"]: r for r in read_rows(out / "report.csv")}
    silent = rows["silence/room_tone.wav"]
    assert silent["true_peak_dbtp"] == "-inf"
    assert silent["sample_peak_dbfs"] == "-inf"
    assert silent["integrated_lufs"] == ""
    assert silent["integrated_note"] == "every block is below the absolute gate"
    assert silent["sample_peak_ch1_dbfs"] == "-inf" == silent["sample_peak_ch2_dbfs"]
    broken = rows["broken/truncated.wav"]
    assert broken["status"] == "error"
    assert broken["error"].startswith("audio: cannot read header")
    assert broken["integrated_lufs"] == "" and broken["flags"] == ""
    # pandas reads the numbers back as floats, -inf included, and never sees NaN tokens.
    frame = pd.read_csv(out / "report.csv", keep_default_na=False)
    assert "nan" not in set(frame.astype(str).to_numpy().ravel().tolist()) - {""}


@pytest.mark.parametrize(
    ("text", "expected"),
    [
        ("=1+2", "'=1+2"),
        ('=HYPERLINK("http://example.invalid")', '\'=HYPERLINK("http://example.invalid")'),
        ("+SUM(A1)", "'+SUM(A1)"),
        ("-2+3", "'-2+3"),
        ("@SUM(A1)", "'@SUM(A1)"),
        ("\tTAB", "'\tTAB"),
        ("\rCR", "'\rCR"),
        ("-1.5", "-1.5"),  # one plain number: harmless, stays readable
        ("-inf", "-inf"),
        ("plain", "plain"),
        ("a=b", "a=b"),
        ("", ""),
    ],
)
def test_formula_text_is_neutralised(text, expected):
    assert neutralise(text) == expected


def test_numbers_booleans_and_none_are_untouched():
    for value in (-1.5, -3, 0, -math.inf, True, None):
        assert neutralise(value) is value
    assert neutralise(float("nan")) is None


def test_formula_cells_in_written_files(written):
    out, _, _ = written
    rows = read_rows(out / "report.csv")
    paths = [r["path"] for r in rows]
    assert '\'=HYPERLINK("http://example.invalid","x").wav' in paths
    assert not any(p.startswith(("=", "+", "@", "\t", "\r")) for p in paths)
    numbers = [r["integrated_lufs"] for r in rows if r["integrated_lufs"]]
    assert all(not n.startswith("'") for n in numbers)  # negative numbers stay numbers
    assert {float(n) for n in numbers} == {-23.1, -19.4, -29.0}


def test_flags_csv_has_one_row_per_flag_and_one_per_unchecked_file(written):
    out, results, _ = written
    rows = read_rows(out / "flags.csv")
    assert list(rows[0].keys()) == ["path", "rule", "severity", "measured", "limit_low",
                                    "limit_high", "limit_text", "unit", "position_s", "message",
                                    "source"]  # fmt: skip
    errors = [r for r in results if r.status == "error"]
    assert len(rows) == sum(len(r.verdict.flags) for r in results if r.verdict) + len(errors)
    broken = next(r for r in rows if r["path"] == "broken/truncated.wav")
    assert (broken["rule"], broken["severity"]) == ("not_checked", "error")
    assert broken["message"].startswith("audio: cannot read header")
    tp = next(r for r in rows if r["rule"] == "true_peak_max_dbtp")
    assert (tp["path"], tp["severity"], tp["unit"]) == ("programme/ep02_final.wav", "fail", "dBTP")
    # a maximum is limit_high; numbers only in numeric columns
    assert_allclose([float(tp["measured"]), float(tp["limit_high"]), float(tp["position_s"])],
                    [0.6, -1.0, 12.3], rtol=0, atol=0)  # fmt: skip
    assert tp["limit_low"] == "" and tp["limit_text"] == ""
    silent = next(r for r in rows if r["path"] == "silence/room_tone.wav")
    assert silent["measured"] == "" and silent["position_s"] == ""
    # a target with tolerance: both bounds as numbers (-23 - 1, -23 + 1), the words as text
    assert (silent["limit_low"], silent["limit_high"]) == ("-24", "-22")
    assert silent["limit_text"] == "'-23.0 +- 1.0"  # text starting with "-": neutralised
    lra = next(r for r in rows if r["rule"] == "loudness_range_lu")
    assert (lra["limit_low"], lra["limit_high"]) == ("3", "20")
    for row in rows:
        for key in ("limit_low", "limit_high", "position_s"):
            assert row[key] == "" or float(row[key]) == float(row[key])  # numeric or empty


def test_csv_numbers_are_rounded_per_unit_and_jsonl_keeps_full_precision(tmp_path):
    v = values(integrated_lufs=-21.000000051678526, dc_offset_percent=5.939354499181111e-06,
               min_correlation=0.9999800275565989, leading_silence_s=0.0020208333333333332,
               effective_bandwidth_hz=22617.1875, channels=2, format_bits=24)  # fmt: skip
    r = result("a.wav", "pass", v)
    write_reports(tmp_path, make_run(), [r, FileResult.failed("b.wav", "unreadable")])
    row = next(x for x in read_rows(tmp_path / "report.csv") if x["path"] == "a.wav")
    # stated precision: 0.01 LU/dB, 0.001 s, 1 Hz, 0.0001 %, 0.001 for ratios
    assert row["integrated_lufs"] == "-21"  # whole after rounding: an integer
    assert row["dc_offset_percent"] == "0"
    assert row["min_correlation"] == "1"
    assert row["leading_silence_s"] == "0.002"
    assert row["effective_bandwidth_hz"] == "22617"
    assert (row["sample_rate_hz"], row["channels"], row["format_bits"]) == ("48000", "2", "24")
    line = (tmp_path / "results.jsonl").read_text(encoding="utf-8").splitlines()
    full = [json.loads(x) for x in line if '"a.wav"' in x][0]["measurement"]
    assert full["integrated_lufs"] == -21.000000051678526  # full precision kept


def _reject(token):
    raise ValueError(f"non-standard JSON token {token}")


def test_results_jsonl_is_valid_json_without_nan_or_infinity(written):
    out, results, _ = written
    lines = (out / "results.jsonl").read_text(encoding="utf-8").splitlines()
    assert len(lines) == len(results)
    objects = [json.loads(line, parse_constant=_reject) for line in lines]
    by_path = {o["path"]: o for o in objects}
    silent = by_path["silence/room_tone.wav"]["measurement"]
    assert silent["true_peak_dbtp"] == "-inf" and silent["integrated_lufs"] is None
    loud = by_path["programme/ep02_final.wav"]
    assert loud["verdict"]["flags"][1]["position_s"] == 12.3
    assert len(loud["measurement"]["timeline"]["short_term_lufs"]) == 1800
    assert loud["measurement"]["timeline"]["short_term_lufs"][0] is None  # -inf window -> null
    assert FileResult.from_dict(by_path[HOSTILE]).path == HOSTILE
    assert by_path["broken/truncated.wav"]["status"] == "error"


def test_parse_constant_really_rejects_nan():
    with pytest.raises(ValueError, match="non-standard"):
        json.loads('{"x": NaN}', parse_constant=_reject)


def test_atomic_write_keeps_the_old_file_when_interrupted(tmp_path):
    target = tmp_path / "report.csv"
    target.write_text("old\n", encoding="utf-8")
    with pytest.raises(RuntimeError), atomic_text(target) as handle:
        handle.write("half a new rep")
        raise RuntimeError("interrupted")
    assert target.read_text(encoding="utf-8") == "old\n"
    assert os.listdir(tmp_path) == ["report.csv"]


def test_rewriting_reports_replaces_them(tmp_path):
    write_reports(tmp_path, make_run(), make_results())
    paths = write_reports(tmp_path, make_run(), make_results()[:2])
    assert len(read_rows(paths["csv"])) == 2
    assert sorted(os.listdir(tmp_path)) == sorted(REPORT_FILES.values())


def test_table_keeps_none_and_numbers():
    frame = results_frame(make_results())
    silent = next(r for r in frame.records() if r["path"] == "silence/room_tone.wav")
    assert silent["integrated_lufs"] is None
    assert silent["true_peak_dbtp"] == -math.inf
    assert isinstance(frame.column("status")[0], str)
    assert all(type(v) is int for v in frame.column("sample_rate_hz") if v is not None)


#: Cells of every kind a report holds, and the awkward ones: quotes, separators, line ends,
#: formula triggers, unicode, ints beside None, -inf, -0.0, tiny and huge floats, booleans.
AWKWARD_CELLS = (
    "plain", 'a "quoted" word', "a, b; c", "two\nlines", "cr\rhere", "=SUM(A1)", "-1.5",
    "-inf", "+x", "@me", "\tlead", "", " ", "naïve ✓ 日本", None, 0, 48000, -3, 1.0, -0.0,
    -math.inf, math.inf, 0.1 + 0.2, 1e-12, 2.5e17, -23.456789, True, False, float("nan"),
)  # fmt: skip


def test_csv_writer_gives_the_bytes_pandas_gave(tmp_path):
    # Reference: pandas' DataFrame.to_csv with the arguments the reports used before they
    # were written without pandas (object columns, index=False, na_rep="", "\n" line ends),
    # on the same neutralised cells. The new writer must give the same bytes.
    from checker.report.csv_out import write_csv
    from checker.report.frame import object_frame

    n = len(AWKWARD_CELLS)
    rows = [{f"c{j}": AWKWARD_CELLS[(i + j) % n] for j in range(5)} for i in range(n)]
    rows.append({"c0": "only one cell"})  # missing keys: empty cells
    rows.append({"c2": ""})  # a row of empty cells
    columns = ["c0", "c1", "c2", "c3", "c4"]
    table = object_frame(rows, columns)
    data = {c: pd.Series([neutralise(r.get(c)) for r in rows], dtype=object) for c in columns}
    expected = pd.DataFrame(data, columns=columns).to_csv(
        index=False, na_rep="", lineterminator="\n"
    )
    got = write_csv(table, tmp_path / "t.csv").read_bytes()
    assert got == expected.encode("utf-8")
    # and one column only, where the csv module quotes an empty row
    single = object_frame([{"x": None}, {"x": ""}, {"x": 1}], ["x"])
    expected = pd.DataFrame({"x": pd.Series([None, "", 1], dtype=object)}).to_csv(
        index=False, na_rep="", lineterminator="\n"
    )
    assert write_csv(single, tmp_path / "one.csv").read_bytes() == expected.encode("utf-8")


def test_reports_do_not_import_pandas(tmp_path):
    # Start-up cost: pandas took about 0.45 s of CPU to import on every check (README, Speed).
    import subprocess
    import sys

    code = (
        "import sys; from checker.report import write_reports; "
        "import checker.report.byprofile; "
        "print('pandas' in sys.modules)"
    )
    got = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert got.stdout.strip() == "False"


def test_embedded_json_cannot_close_its_script_element():
    text = embed_json({"path": "</script><!-- & <b>"})
    assert "<" not in text and ">" not in text and "&" not in text
    assert json.loads(text) == {"path": "</script><!-- & <b>"}


def test_graph_limits_from_the_profile_table():
    # "-23.0 +- 1.0" and -1.0 dBTP: EBU R 128 target and maximum true peak (from memory).
    got = profile_limits_for_graph(make_run())
    assert got == {"target_lufs": -23.0, "band_low_lufs": -24.0, "band_high_lufs": -22.0,
                   "ceiling_dbtp": -1.0, "short_term_max_lufs": None,
                   "momentary_max_lufs": None}  # fmt: skip
    # The shape of Profile.limits_table(): a target value with a tolerance field.
    table = RunInfo("r", "t", (), "p", "P", profile_limits=(
        {"key": "integrated_target_lufs", "value": -16.0, "tolerance": 1.5, "unit": "LUFS"},
        {"key": "declared_integrated_tolerance_lu", "value": 1.0, "unit": "LU"},
        {"key": "short_term_max_lufs", "value": -18.0, "unit": "LUFS"},
        {"key": "sum_true_peak_max_dbtp", "value": 0.0, "unit": "dBTP"},  # a stem-set limit
    ))  # fmt: skip
    got = profile_limits_for_graph(table)
    assert (got["target_lufs"], got["band_low_lufs"], got["band_high_lufs"]) == (
        -16.0,
        -17.5,
        -14.5,
    )
    assert (got["ceiling_dbtp"], got["short_term_max_lufs"]) == (None, -18.0)
    # Meaning comes from the catalogue, not the key's words: the true peak after an encode,
    # of a downmix or of a stem sum is not the file's ceiling; an unknown key is ignored.
    others = RunInfo("r", "t", (), "p", "P", profile_limits=(
        {"key": "encoded_true_peak_max_dbtp", "value": -2.0},
        {"key": "downmix_true_peak_max_dbtp", "value": -1.5},
        {"key": "sum_true_peak_max_dbtp", "value": 0.0},
        {"key": "integrated_lufs_guess", "value": -20.0},
        {"key": "true_peak_max_dbtp", "value": -1.0},
    ))  # fmt: skip
    got = profile_limits_for_graph(others)
    assert got["ceiling_dbtp"] == -1.0 and got["target_lufs"] is None


def test_timeline_reduction_keeps_the_loudest_value():
    tl = timeline(600.0, -23.0, seed=9)  # 6000 windows -> 2000 stored points
    reduced = reduce_timeline(tl, max_points=300)
    assert reduced["n"] == len(reduced["short_term_lufs"]) <= 300
    # 6000 windows of 0.1 s are stored as 2000 points 0.3 s apart; 7 of those per point here.
    assert_allclose([reduced["t0"], reduced["dt"]], [tl.times_s[0], 2.1], rtol=0, atol=1e-9)
    stored = [v for v in tl.series["short_term_lufs"] if v is not None]
    got = max(v for v in reduced["short_term_lufs"] if v is not None) / 10  # tenths of a LU
    assert_allclose(got, max(stored), rtol=0, atol=0.05)
    # A stretch without any level stays None; a mixed stretch keeps its loudest value.
    small = Timeline(
        0.1, [0.1, 0.2, 0.3, 0.4, 0.5], {"short_term_lufs": [None, None, -20.04, None, -21.0]}
    )
    got = reduce_timeline(small, max_points=3)
    assert got == {"n": 3, "t0": 0.1, "dt": 0.2, "short_term_lufs": [None, -200, -210]}


def test_jsonl_lines_are_the_shared_serialiser_text(written):
    # results.jsonl is written by the project's one JSON encoder, checker.model.serial.dumps.
    out, results, _ = written
    lines = (out / "results.jsonl").read_text(encoding="utf-8").splitlines()
    assert lines == [serial_dumps(r.to_dict(timeline=True)) for r in sorted_results(results)]
    odd = {"a": np.float64("nan"), "b": np.array([1.5, -np.inf]), "c": (np.int64(3), np.bool_(True)),
           "d": {"e": [float("inf"), None, "x"]}, 4: np.float32(0.25)}  # fmt: skip
    # json_safe's rules: NaN -> null, -inf -> "-inf", numpy scalars and arrays -> Python values
    assert serial_dumps(odd) == (
        '{"a": null, "b": [1.5, "-inf"], "c": [3, true], "d": {"e": ["inf", null, "x"]}, "4": 0.25}'
    )


def test_html_never_carries_file_text_raw(written):
    # Without a browser: every way file text reaches the page is escaped (table cells and
    # attributes by html.escape, JSON blocks with \u003c), so no raw tag from a file survives.
    out, _, _ = written
    page = (out / "report.html").read_text(encoding="utf-8")
    for raw in ("<img src=x", "<script>alert(", '"><script>', "</script><script>"):
        assert raw not in page
    assert "&lt;img src=x onerror=alert(1)&gt;.wav" in page
    assert "\\u003cimg src=x onerror=alert(1)\\u003e.wav" in page
    assert page.count("<script>") == 1  # the report's own script, nothing else executable
    csp = page.split('http-equiv="Content-Security-Policy" content="', 1)[1].split('"', 1)[0]
    assert csp.startswith("default-src 'none';") and "script-src 'sha256-" in csp


def test_a_stem_set_row_shows_the_sum_under_the_file_columns(written):
    # checker.report.judged.SET_SUM_CELLS: a set row's loudness and peak cells show what was
    # measured on the stems' sum (marked in a tooltip), never a per-file value.
    import re

    out, _, _ = written
    page = (out / "report.html").read_text(encoding="utf-8")
    rows = [r for r in re.findall(r"<tr data-i=.*?</tr>", page, re.S) if 'class="tag">set' in r]
    assert len(rows) == 1
    sums = re.findall(r"<td class=\"n\" title=\"of the stems' sum\">([^<]*)</td>", rows[0])
    # integrated (no sum value in this set: empty, not the file default -23.0), true peak
    # -0.4 dBTP from sum_true_peak_dbtp, sample peak (none: empty)
    assert sums == ["", "-0.4", ""]
