"""checker.dsp.heap: freed buffers stay in the process for the next file (glibc malloc)."""

from __future__ import annotations

import subprocess
import sys

import pytest

from checker.dsp import heap

PROBE = """
import resource, sys
import numpy as np
if sys.argv[1] == "keep":
    from checker.dsp.heap import keep_freed_memory
    assert keep_freed_memory()
def faults():
    return resource.getrusage(resource.RUSAGE_SELF).ru_minflt
def one_file():  # a short file's worth of block buffers and work arrays (~6 MB), then freed
    kept = [np.ones(n) for n in (48_000, 48_000, 96_000, 96_000, 131_072, 262_144, 50_000)]
    return sum(float(a[-1]) for a in kept)
one_file()  # warm up
before = faults()
for _ in range(20):
    one_file()
print(faults() - before)
"""


def _faults(mode: str) -> int:
    out = subprocess.run(
        [sys.executable, "-c", PROBE, mode], capture_output=True, text=True, check=True
    )
    return int(out.stdout)


@pytest.mark.skipif(not sys.platform.startswith("linux"), reason="glibc's mallopt (Linux)")
def test_freed_buffers_are_reused_without_page_faults():
    # 20 files' buffers (about 1500 pages each): glibc returns them to the system at the
    # end of each file (beyond its trim threshold), so every file faults them in again;
    # kept, they fault in once, at warm-up.
    if not heap.keep_freed_memory():
        pytest.skip("not glibc: mallopt is not there")
    fresh, kept = _faults("plain"), _faults("keep")
    assert fresh > 20 * 1000  # each buffer faulted in again
    assert kept < 1000  # the same pages served all 20
