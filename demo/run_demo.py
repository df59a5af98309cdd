"""`make demo`: generate the invented delivery batch and check it end to end.

Runs the installed `deliverycheck` command exactly as a user would, prints its
summaries and where the HTML reports are.
"""

from __future__ import annotations

import shutil
import subprocess
import sys
from pathlib import Path

HERE = Path(__file__).resolve().parent
OUT = HERE / "out"


def run(cmd: list[str]) -> int:
    print("$ " + " ".join(str(c) for c in cmd), flush=True)
    return subprocess.call([str(c) for c in cmd])


def main() -> int:
    if OUT.exists():
        shutil.rmtree(OUT)
    subprocess.check_call([sys.executable, str(HERE / "generate.py"), str(OUT / "batch")])
    exe = Path(sys.executable).with_name("deliverycheck")
    week = OUT / "batch" / "podcast-week"
    stems = OUT / "batch" / "theme-stems"
    # The same week against two profiles into one folder: the second run re-judges the stored
    # measurements (no audio read) and both reports stay, linked from index.html.
    rc0 = run([exe, "check", week, "--profile", "ebu-r128", "--out", OUT / "podcast-report"])
    rc1 = run([exe, "check", week, "--profile", "podcast-stereo", "--out", OUT / "podcast-report"])
    rc2 = run(
        [
            exe,
            "check",
            stems / "stems",
            "--profile",
            "mastering-stems",
            "--mix",
            stems / "reference-mix.wav",
            "--out",
            OUT / "stems-report",
        ]
    )
    series = OUT / "batch" / "narrated-series"
    rc3 = run([exe, "check", series, "--profile", "aes-td1008", "--out", OUT / "series-report"])
    print()
    print(
        f"Exit codes: podcast week {rc1}, stem handoff {rc2}, narrated series {rc3} "
        "(1 = some file failed a rule: expected)"
    )
    print("Open the reports:")
    print(f"  {OUT / 'podcast-report' / 'report.html'}")
    print(f"  {OUT / 'podcast-report' / 'index.html'} (both profiles of the podcast week)")
    print(f"  {OUT / 'stems-report' / 'report.html'}")
    print(f"  {OUT / 'series-report' / 'report.html'}")
    # The demo is meant to contain failures; only a crash or a usage error is a demo failure.
    codes = (rc0, rc1, rc2, rc3)
    return 0 if max(codes) <= 3 and 2 not in codes else 1


if __name__ == "__main__":
    sys.exit(main())
