"""The benchmark script runs end to end on tiny files (no timing is asserted: speed lives in `make bench`)."""

from __future__ import annotations

import subprocess
import sys
from pathlib import Path

import pytest

BENCH = Path(__file__).resolve().parents[1] / "benchmarks" / "run_bench.py"


@pytest.mark.slow
def test_bench_runs_on_tiny_files(tmp_path):
    proc = subprocess.run(
        [sys.executable, str(BENCH), "--tiny", "--cache", str(tmp_path)],
        capture_output=True,
        text=True,
        timeout=600,
    )
    assert proc.returncode == 0, proc.stderr[-2000:]
    out = proc.stdout
    # Every workload produced a row, and the ratio lines were computed.
    for name in (
        "a decode",
        "b deliverycheck",
        "b1 one thread",
        "c pyloudnorm",
        "d pyebur128",
        "d1 pyebur128 I",
    ):
        assert name in out
    for ratio in ("b/a = ", "b1/a = ", "d/b1 = ", "d1/b1 = ", "c/b = "):
        assert ratio in out
    # the 5.1, 96 kHz and FLAC rows
    assert "6 ch" in out and "96000 Hz" in out and "FLAC" in out
    assert "throughput ratio jobs2/jobs1" in out and "under load / unloaded" in out
    assert "per-file overhead" in out and "measure() in one process" in out
    assert "measure(), 10 ms files" in out and "check --jobs 1, 10 ms files" in out
    # the goal judged on both measures, and the one-second files with --jobs 2
    assert "goal, check --jobs 1 at most 5 ms per one-second file" in out
    assert "ms in a batch, met against the same 5 ms" in out or "not met against the same" in out
    assert "one-second files with --jobs 2 (2 workers)" in out
    # the per-meter split of the short files' extra time, with every meter and the total
    assert "where it goes" in out
    for name in ("TruePeakMeter", "BandwidthMeter", "BlockWalk", "other", "total"):
        assert f"    {name} " in out
    assert "chunk-channels interpolated" in out
    assert "progress within a file" in out and "% per block" in out
