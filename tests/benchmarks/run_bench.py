"""`make bench`: the one-pass analysis against plain decoding and the reference libraries.

Every command runs in its own process; commands alternate within each
repetition; the table shows medians and ratios measured side by side in this
one run (the machine is shared and noisy: compare ratios, not lone times).
Peak RSS comes from os.wait4 on each child (started by spawner.py).

Rows: (a) decode only; (b) `deliverycheck measure` as users run it (it decodes
ahead in a second thread); (b1) the same analysis on one thread, what a batch
worker spends per file; (c) pyloudnorm integrated; (d) pyebur128 integrated +
LRA + true peak + sample peak.

    python tests/benchmarks/run_bench.py            # full set (generates ~3.5 GB once, cached)
    python tests/benchmarks/run_bench.py --quick    # shorter files, fewer repetitions
    python tests/benchmarks/run_bench.py --tiny     # seconds-long smoke run (used by the test suite)
    python tests/benchmarks/run_bench.py --long     # adds the memory check: a 3-hour file
                                                    # against a 10-minute one (~3 GB more, cached)
"""

from __future__ import annotations

import argparse
import json
import os
import statistics
import subprocess
import sys
import zlib
from pathlib import Path

import numpy as np
import soundfile as sf
from scipy import signal as sps

HERE = Path(__file__).resolve().parent
CACHE = HERE / "cache"
PY = sys.executable
EXE = str(Path(PY).with_name("deliverycheck"))


def engine_block(path: Path) -> str:
    """The block size the engine picks for this file (checker.audio.auto_block_frames)."""
    from checker.audio import auto_block_frames, open_info

    return str(auto_block_frames(open_info(str(path))))


def programme_chunk(rng: np.random.Generator, n: int, channels: int, rate: int) -> np.ndarray:
    """Programme-like material: tilted noise, level steps every 0.5-4 s, occasional pauses."""
    common = rng.standard_normal(n)
    x = 0.7 * common[:, None] + 0.5 * rng.standard_normal((n, channels))
    b, a = sps.butter(1, 1000.0 / (rate / 2))
    x = sps.lfilter(b, a, x, axis=0) * 3.0 + 0.2 * x
    env = np.empty(n)
    pos = 0
    while pos < n:
        seg = int(rng.uniform(0.5, 4.0) * rate)
        env[pos : pos + seg] = 10 ** ((rng.uniform(-14, 4) if rng.random() > 0.12 else -60) / 20)
        pos += seg
    x *= sps.lfilter([0.002], [1, -0.998], env)[:, None]
    return x * 0.05


def make_file(path: Path, minutes: float, channels: int, rate: int, subtype: str, limited: bool):
    if path.exists():
        return path
    path.parent.mkdir(parents=True, exist_ok=True)
    rng = np.random.default_rng(zlib.crc32(path.name.encode()))  # stable across processes
    tmp = path.with_suffix(".part")
    total = int(minutes * 60 * rate)
    with sf.SoundFile(str(tmp), "w", rate, channels, subtype=subtype, format="WAV") as f:
        done = 0
        while done < total:
            n = min(60 * rate, total - done)
            x = programme_chunk(rng, n, channels, rate)
            if limited:  # heavy limiting: peaks near full scale in every block
                x = np.tanh(x * 40.0) * 0.98
            f.write(np.clip(x, -1.0, 1.0))
            done += n
    os.replace(tmp, path)
    return path


def precompile() -> None:
    """Byte-compile the package first, as an installed one is: run from a source tree with
    PYTHONDONTWRITEBYTECODE set, every process would otherwise compile every module again
    (about 0.09 s per start here)."""
    import compileall

    import checker

    compileall.compile_dir(str(Path(checker.__file__).parent), quiet=1)


_spawner: subprocess.Popen | None = None


def run_once(cmd: list[str]) -> tuple[float, float, int]:
    """(wall seconds, peak RSS MB, exit status) of one child process, started by the
    small spawner process (see spawner.py: why not from this one)."""
    global _spawner
    if _spawner is None:
        _spawner = subprocess.Popen(
            [PY, str(HERE / "spawner.py")],
            stdin=subprocess.PIPE,
            stdout=subprocess.PIPE,
            text=True,
        )
    assert _spawner.stdin is not None and _spawner.stdout is not None
    _spawner.stdin.write(json.dumps(cmd) + "\n")
    _spawner.stdin.flush()
    wall, mb, status, err = json.loads(_spawner.stdout.readline())
    if status not in (0, 1):
        raise SystemExit(f"bench: {' '.join(cmd)} exited {status}: {err.strip()[-400:]}")
    return wall, mb, status


def commands(path: Path) -> dict[str, list[str]]:
    w = str(HERE / "workloads.py")
    return {
        "a decode": [PY, w, "decode", str(path), engine_block(path)],
        "b deliverycheck": [EXE, "measure", "--json", str(path)],
        "b0 numpy kernels": [
            "env",
            "DELIVERYCHECK_KERNELS=numpy",
            EXE,
            "measure",
            "--json",
            str(path),
        ],
        "b1 one thread": [PY, w, "measure1", str(path)],
        "s speech gate": [EXE, "measure", "--speech", "--json", str(path)],  # 44.1 kHz file only
        "c pyloudnorm": [PY, w, "pyloudnorm", str(path)],
        "d pyebur128": [PY, w, "pyebur128", str(path), engine_block(path)],
    }


def bench_file(path: Path, reps: int, skip: set[str]) -> dict[str, tuple[float, float]]:
    info = sf.info(str(path))
    cmds = {k: v for k, v in commands(path).items() if k not in skip}
    times: dict[str, list[float]] = {k: [] for k in cmds}
    rss: dict[str, float] = dict.fromkeys(cmds, 0.0)
    for _ in range(reps):
        for name, cmd in cmds.items():  # alternate the commands inside each repetition
            wall, mb, _ = run_once(cmd)
            times[name].append(wall)
            rss[name] = max(rss[name], mb)
    result = {k: (statistics.median(v), rss[k]) for k, v in times.items()}
    dur = info.frames / info.samplerate
    print(
        f"\n{path.name}: {dur / 60:.1f} min, {info.channels} ch, {info.samplerate} Hz, {info.subtype}"
    )
    print(f"  {'command':<18} {'median s':>9} {'x realtime':>11} {'peak RSS MB':>12}")
    for k, (t, mb) in result.items():
        print(f"  {k:<18} {t:>9.2f} {dur / t:>11.0f} {mb:>12.0f}")
    computed, seen = truepeak_skip(path)
    if seen:
        print(
            f"  true peak: {computed} of {seen} chunk-channels interpolated "
            f"({100 * computed / seen:.0f} %; the rest skipped by the exact bound)"
        )
    b = result["b deliverycheck"][0]
    ratios = [f"b/a = {b / result['a decode'][0]:.2f}"]
    if "b0 numpy kernels" in result:
        ratios.append(f"b0/a = {result['b0 numpy kernels'][0] / result['a decode'][0]:.2f}")
    if "b1 one thread" in result:
        ratios.append(f"b1/a = {result['b1 one thread'][0] / result['a decode'][0]:.2f}")
    if "s speech gate" in result:
        ratios.append(f"s/b = {result['s speech gate'][0] / b:.2f}")
    if "c pyloudnorm" in result:
        ratios.append(f"c/b = {result['c pyloudnorm'][0] / b:.2f}")
    if "d pyebur128" in result:
        ratios.append(f"d/b = {result['d pyebur128'][0] / b:.2f}")
    print("  ratios: " + ", ".join(ratios))
    return result


def truepeak_skip(path: Path) -> tuple[int, int]:
    """(chunk-channels interpolated, seen) by the true-peak meter on this file."""
    w = str(HERE / "workloads.py")
    out = subprocess.run(
        [PY, w, "tpskip", str(path), engine_block(path)], capture_output=True, text=True, check=True
    ).stdout.split()
    return int(out[0]), int(out[1])


def bench_memory(long_file: Path, short_file: Path, reps: int) -> None:
    """Peak RSS of (b) on a 3-hour file against a 10-minute one: streaming keeps it flat."""
    print("\nmemory: deliverycheck measure, peak RSS (MB) by file length")
    rows, minutes = [], []
    for path in (short_file, long_file):
        info = sf.info(str(path))
        runs = [run_once(commands(path)["b deliverycheck"]) for _ in range(reps)]
        wall = statistics.median(r[0] for r in runs)
        mb = max(r[1] for r in runs)
        dur = info.frames / info.samplerate
        rows.append(mb)
        minutes.append(dur / 60)
        print(
            f"  {dur / 60:6.1f} min: {mb:6.0f} MB peak RSS, {wall:7.2f} s, {dur / wall:5.0f}x realtime"
        )
    print(
        f"  peak RSS {minutes[1]:.0f} min / {minutes[0]:.0f} min = {rows[1] / rows[0]:.2f} "
        "(target: about 1, both <= 200 MB)"
    )


def bench_jobs(files: list[Path], reps: int, out: Path) -> None:
    walls = {1: [], 2: []}
    for _ in range(reps):
        for jobs in (1, 2):
            cmd = [EXE, "check", *map(str, files), "--profile", "measure-only", "--jobs", str(jobs)]
            cmd += ["--out", str(out / f"jobs{jobs}"), "--fresh", "--quiet"]
            walls[jobs].append(run_once(cmd)[0])
    m1, m2 = statistics.median(walls[1]), statistics.median(walls[2])
    print(f"\nbatch of {len(files)} files: --jobs 1 {m1:.1f} s, --jobs 2 {m2:.1f} s")
    print(f"  throughput ratio jobs2/jobs1 = {m1 / m2:.2f} (target >= 1.8 on 2 cores)")


def main(argv: list[str] | None = None) -> int:
    p = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    p.add_argument("--quick", action="store_true", help="shorter files, 3 repetitions")
    p.add_argument("--tiny", action="store_true", help="a few seconds of audio: smoke run")
    p.add_argument(
        "--long", action="store_true", help="also: peak RSS on a 3-hour file vs a 10-minute one"
    )
    p.add_argument("--reps", type=int, default=None)
    p.add_argument("--cache", type=Path, default=CACHE)
    args = p.parse_args(argv)
    if args.tiny:
        scale, reps, batch = 0.05, args.reps or 1, 2  # 3-second files
    elif args.quick:
        scale, reps, batch = 1 / 6, args.reps or 3, 4
    else:
        scale, reps, batch = 1.0, args.reps or 5, 16
    c = args.cache
    files = [
        (
            make_file(c / f"programme-60min-{scale:g}.wav", 60 * scale, 2, 48_000, "PCM_24", False),
            set(),
        ),
        (
            make_file(c / f"surround-20min-{scale:g}.wav", 20 * scale, 6, 48_000, "PCM_24", False),
            set(),
        ),
        (make_file(c / f"cd-10min-{scale:g}.wav", 10 * scale, 2, 44_100, "PCM_16", False), set()),
        (
            make_file(c / f"limited-10min-{scale:g}.wav", 10 * scale, 2, 48_000, "PCM_24", True),
            set(),
        ),
    ]
    for path, skip in files:  # the speech gate (measure --speech) costs minutes: one file
        if not path.name.startswith("cd-"):
            skip.add("s speech gate")
    precompile()
    from checker.dsp import native

    print(
        f"deliverycheck benchmark: {reps} repetition(s), medians; each command in its own process"
        f"; b: {native.status()}, b0: the numpy path (DELIVERYCHECK_KERNELS=numpy)"
    )
    for path, skip in files:
        bench_file(path, reps, skip)
    ten = [
        make_file(c / f"batch-{i:02d}-{scale:g}.wav", 10 * scale, 2, 48_000, "PCM_24", False)
        for i in range(batch)
    ]
    bench_jobs(ten, max(1, min(reps, 3)), c / "batch-out")
    if args.long:
        long_file = make_file(
            c / f"programme-180min-{scale:g}.wav", 180 * scale, 2, 48_000, "PCM_24", False
        )
        bench_memory(long_file, ten[0], max(1, min(reps, 2)))
    return 0


if __name__ == "__main__":
    sys.exit(main())
