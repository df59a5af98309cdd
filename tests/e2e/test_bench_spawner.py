"""The benchmark's CPU accounting of a process tree (tests/benchmarks/spawner.py) counts every
process once.

A batch's processes: the command, children it reaps itself, and a server process that
outlives it (multiprocessing's fork server) and reaps the workers it forked. Linux's wait4
returns the rusage of the reaped process *including* the descendants it reaped itself
(getrusage(2), RUSAGE_CHILDREN: "all descendants ... that have terminated and been waited
for"; checked against the man page from memory), so the spawner must add the orphans it
reaps itself and nothing more. Each process below burns a known amount of its own CPU and
reports its own total (getrusage RUSAGE_SELF) just before it exits; the spawner's figure must
be their sum: a process counted twice would add at least BURN_S. CPU time, not wall time, so
the load of a shared machine does not move it.
"""

from __future__ import annotations

import json
import subprocess
import sys
import textwrap
from pathlib import Path

SPAWNER = Path(__file__).resolve().parents[1] / "benchmarks" / "spawner.py"
BURN_S = 0.25

TREE = textwrap.dedent(
    """
    import os, resource, sys, time

    out = sys.argv[1]
    BURN_S = float(sys.argv[2])

    def burn(seconds):
        t0 = time.process_time()
        while time.process_time() - t0 < seconds:
            pass

    def report(role):  # this process's own CPU, then exit at once
        ru = resource.getrusage(resource.RUSAGE_SELF)
        with open(os.path.join(out, role), "w") as f:
            f.write(repr(ru.ru_utime + ru.ru_stime))
        os._exit(0)

    alive_r, alive_w = os.pipe()
    if os.fork() == 0:  # the server: outlives the command, reaps its own worker
        os.close(alive_w)
        worker = os.fork()
        if worker == 0:
            burn(BURN_S)
            report("worker")
        os.waitpid(worker, 0)
        os.read(alive_r, 1)  # EOF once the command has exited
        burn(BURN_S / 5)
        report("server")
    os.close(alive_r)
    child = os.fork()
    if child == 0:  # a child the command reaps itself
        burn(BURN_S)
        report("child")
    burn(BURN_S)
    os.waitpid(child, 0)
    report("command")
    """
)


def test_process_tree_cpu_counts_each_process_once(tmp_path):
    script = tmp_path / "tree.py"
    script.write_text(TREE)
    cmd = [sys.executable, str(script), str(tmp_path), str(BURN_S)]
    proc = subprocess.run(
        [sys.executable, str(SPAWNER)],
        input=json.dumps(cmd) + "\n",
        capture_output=True,
        text=True,
        timeout=120,
    )
    assert proc.returncode == 0, proc.stderr
    wall_s, _rss_mb, status, err, cpu_s = json.loads(proc.stdout)
    assert status == 0, err
    own = {p.name: float(p.read_text()) for p in tmp_path.iterdir() if p.name != "tree.py"}
    assert sorted(own) == ["child", "command", "server", "worker"]
    total = sum(own.values())
    # Each process reported just before os._exit, so the spawner may see a little more (the
    # exit itself), never less; a double count would add at least BURN_S (0.25 s).
    assert total - 0.005 <= cpu_s < total + 0.1, (cpu_s, own)
