"""Stem sets are checked by the batch itself: the public checker.check() and the command line
give the same rows, and a set's verdict is stored in the results store like a file's.

Expected values are arithmetic on the generated signals (stated beside each check).
"""

from __future__ import annotations

import csv
import io
import sqlite3

import numpy as np
import pytest
from signals import write

import checker
from checker.cli.main import main
from checker.model.errors import UsageError
from checker.run.batch import run_batch

RATE = 48_000


def _clipping_pair(folder):
    """Two in-phase 1 kHz sines of amplitude 0.6: each stem peaks at 20 log10(0.6) = -4.4 dBFS,
    their sum at 20 log10(1.2) = +1.6 dBFS (over full scale)."""
    folder.mkdir(parents=True)
    t = np.arange(RATE) / RATE
    x = (0.6 * np.sin(2 * np.pi * 1000.0 * t))[:, None]
    write(folder / "a_keys.wav", x, subtype="PCM_24")
    write(folder / "b_pad.wav", x, subtype="PCM_24")
    return folder


def _check(folder, out, *extra, err=None, stdout=None):
    """``deliverycheck check FOLDER --profile mastering-stems --out OUT EXTRA...``: the exit code."""
    argv = ["check", str(folder), "--profile", "mastering-stems", "--out", str(out), *extra]
    return main(argv, out=stdout or io.StringIO(), err=err if err is not None else io.StringIO())


def test_api_and_cli_give_the_same_rows_for_a_stem_set(tmp_path):
    folder = _clipping_pair(tmp_path / "song")
    run, results = checker.check([str(folder)], "mastering-stems", tmp_path / "api", jobs=1)
    code = _check(folder, tmp_path / "cli", "--jobs", "1", "--quiet")
    [set_row] = [r for r in results if r.kind == "set"]
    # shipped mastering-stems: the sum's sample peak at most 0 dBFS (common practice)
    assert set_row.status == "fail"
    assert "sum_sample_peak_max_dbfs" in {f.rule for f in set_row.verdict.flags}
    assert code == 1
    with open(tmp_path / "cli" / "report.csv", newline="") as fh:
        cli_rows = [(r["kind"], r["status"]) for r in csv.DictReader(fh)]
    with open(tmp_path / "api" / "report.csv", newline="") as fh:
        api_rows = [(r["kind"], r["status"]) for r in csv.DictReader(fh)]
    assert api_rows == cli_rows
    assert ("set", "fail") in api_rows and len(api_rows) == 3  # the set and its two stems


def test_a_sets_verdict_is_stored_like_a_files(tmp_path):
    folder = _clipping_pair(tmp_path / "song")
    out = tmp_path / "out"
    run, results = run_batch([str(folder)], checker.load_profile("mastering-stems"), out, jobs=1)
    db = sqlite3.connect(out / "results.sqlite")
    stored = db.execute(
        "SELECT path, status FROM verdicts WHERE run_id=?", (run.run_id,)
    ).fetchall()
    db.close()
    assert len(stored) == len(results) == 3
    assert sorted(s for _, s in stored) == sorted(r.status for r in results)


def test_a_second_run_takes_the_set_from_the_store(tmp_path):
    folder = _clipping_pair(tmp_path / "song")
    profile = checker.load_profile("mastering-stems")
    _check(folder, tmp_path / "o", "--quiet")
    out = io.StringIO()
    _check(folder, tmp_path / "o", "--quiet", stdout=out)
    assert "stem sets measured 0, from the store 1" in out.getvalue()
    _, again = run_batch([str(folder)], profile, tmp_path / "o", jobs=1)
    assert [r.status for r in again if r.kind == "set"] == ["fail"]


def test_library_errors_name_parameters_and_the_cli_names_flags(tmp_path):
    folder = _clipping_pair(tmp_path / "song")
    profile = checker.load_profile("mastering-stems")
    with pytest.raises(UsageError, match=r"^jobs: 0 \(expected >= 1\)") as info:
        run_batch([str(folder)], profile, tmp_path / "o", jobs=0)
    assert info.value.parameter == "jobs"
    with pytest.raises(UsageError, match=r"^mix: ") as info:
        run_batch([str(folder)], profile, tmp_path / "o", mix=str(tmp_path / "absent.wav"))
    err = io.StringIO()
    code = _check(folder, tmp_path / "o", "--mix", str(tmp_path / "absent.wav"), err=err)
    assert code == 2 and "deliverycheck: --mix: " in err.getvalue()
