"""Runs benchmark commands for run_bench.py and reports
(wall s, peak RSS MB, status, stderr, CPU s of the whole process tree).

Why a separate, small process: Linux records the memory high-water mark of the
address space a child leaves at exec as part of the child's peak RSS, and
subprocess starts children from the parent's address space (vfork). Started
from the benchmark process itself (hundreds of MB after generating audio), every
child would show that much. This process imports only the standard library, so
its children's peak RSS is their own (plus at most this process's ~10 MB).

CPU: this process is a child subreaper (Linux prctl), so descendants that outlive
their parent (the forkserver that started a batch's workers, which reaps the
workers itself) come back here and are reaped too; their user + system time,
with that of everything they reaped, is part of the command's CPU. Each process
counts once: wait4's rusage is the reaped process's own time plus that of the
descendants *it* reaped (not of orphans, which come here), so nothing is added
twice (tests/e2e/test_bench_spawner.py checks it with a tree of known CPU: the
command, a child it reaps, and a server outliving it that reaps its worker). The
batch figure is the whole tree: the workers and the parent's own per-file work
(store, judging, reports), which is why it exceeds a worker's own CPU.

Children run without OPENBLAS_CORETYPE and OPENBLAS_L2_SIZE (set on the shared
benchmark machines, not by users): the libraries pick their kernel themselves.

Protocol: one JSON list (the command) per line on stdin; one JSON list
[wall_s, peak_rss_mb, exit_status, stderr_tail, cpu_s] per line on stdout.
"""

from __future__ import annotations

import json
import os
import subprocess
import sys
import tempfile
import time

PR_SET_CHILD_SUBREAPER = 36
#: Removed from the children's environment only.
UNSET = ("OPENBLAS_CORETYPE", "OPENBLAS_L2_SIZE")


def _subreaper() -> None:
    if sys.platform.startswith("linux"):
        try:
            import ctypes

            ctypes.CDLL(None).prctl(PR_SET_CHILD_SUBREAPER, 1)
        except Exception:  # pragma: no cover - CPU then misses orphaned workers
            pass


def _reap_rest(deadline_s: float = 15.0) -> float:
    """Reap descendants that come back to us after the command exits; their CPU seconds."""
    cpu = 0.0
    end = time.monotonic() + deadline_s
    while time.monotonic() < end:
        try:
            pid, _, usage = os.wait4(-1, os.WNOHANG)
        except ChildProcessError:
            break
        if pid == 0:
            time.sleep(0.01)
            continue
        cpu += usage.ru_utime + usage.ru_stime
    return cpu


def run(cmd: list[str]) -> list:
    env = {k: v for k, v in os.environ.items() if k not in UNSET}
    with tempfile.TemporaryFile() as err:
        start = time.perf_counter()
        proc = subprocess.Popen(cmd, stdout=subprocess.DEVNULL, stderr=err, env=env)
        _, status, usage = os.wait4(proc.pid, 0)
        wall = time.perf_counter() - start
        cpu = usage.ru_utime + usage.ru_stime + _reap_rest()
        err.seek(0)
        tail = err.read()[-2000:].decode(errors="replace")
    return [wall, usage.ru_maxrss / 1024.0, os.waitstatus_to_exitcode(status), tail, cpu]


def main() -> None:
    _subreaper()
    for line in sys.stdin:
        print(json.dumps(run(json.loads(line))), flush=True)


if __name__ == "__main__":
    main()
