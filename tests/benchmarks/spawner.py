"""Runs benchmark commands for run_bench.py and reports (wall s, peak RSS MB, status, stderr).

Why a separate, small process: Linux records the memory high-water mark of the
address space a child leaves at exec as part of the child's peak RSS, and
subprocess starts children from the parent's address space (vfork). Started
from the benchmark process itself (hundreds of MB after generating audio), every
child would show that much. This process imports only the standard library, so
its children's peak RSS is their own (plus at most this process's ~10 MB).

Protocol: one JSON list (the command) per line on stdin; one JSON list
[wall_s, peak_rss_mb, exit_status, stderr_tail] per line on stdout.
"""

from __future__ import annotations

import json
import os
import subprocess
import sys
import tempfile
import time


def run(cmd: list[str]) -> list:
    with tempfile.TemporaryFile() as err:
        start = time.perf_counter()
        proc = subprocess.Popen(cmd, stdout=subprocess.DEVNULL, stderr=err)
        _, status, usage = os.wait4(proc.pid, 0)
        wall = time.perf_counter() - start
        err.seek(0)
        tail = err.read()[-2000:].decode(errors="replace")
    return [wall, usage.ru_maxrss / 1024.0, os.waitstatus_to_exitcode(status), tail]


def main() -> None:
    for line in sys.stdin:
        print(json.dumps(run(json.loads(line))), flush=True)


if __name__ == "__main__":
    main()
