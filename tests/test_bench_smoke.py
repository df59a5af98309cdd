"""The benchmark script runs end to end on tiny files (no timing is asserted: speed lives in `make bench`)."""

from __future__ import annotations

import subprocess
import sys
from pathlib import Path

import pytest

BENCH = Path(__file__).parent / "benchmarks" / "run_bench.py"


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
    for name in ("a decode", "b deliverycheck", "c pyloudnorm", "d pyebur128"):
        assert name in out
    assert "b/a = " in out and "d/b = " in out
    assert "throughput ratio jobs2/jobs1" in out
