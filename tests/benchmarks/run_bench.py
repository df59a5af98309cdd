"""`make bench`: the one-pass analysis against plain decoding and the reference libraries.

Every command runs in its own process (started by spawner.py, without
OPENBLAS_CORETYPE / OPENBLAS_L2_SIZE); commands alternate within each repetition;
the tables show medians and ratios measured side by side in this one run (the
machine is shared and noisy: compare ratios, not lone times). CPU is user + system
time of the command's whole process tree (workers included); peak RSS comes from
os.wait4 on the command's own process.

Per file (threads used by each row in brackets): (a) decode only [1]; (b)
`deliverycheck measure` as users run it [2: it decodes ahead in a second thread];
(b1) the same analysis on one thread, what a batch worker spends per file [1]; (b0)
b with the compiled kernels off [2]; (c) pyloudnorm integrated [1]; (d) pyebur128
integrated + LRA + true peak + sample peak [1]; (d1) pyebur128 integrated only [1].
Then: the progress callback's cost (b1 with and without it, per block; a stem set's
lockstep read of three files with and without it); a batch with
--jobs 1 and --jobs 2, the same with a second process spinning
on one core; the per-file overhead of one-second files against the same audio as
one file (--jobs 1); with --long, peak RSS of a 3-hour file against a 10-minute one.

    python tests/benchmarks/run_bench.py            # full set (generates ~5 GB once, cached)
    python tests/benchmarks/run_bench.py --quick    # shorter files, fewer repetitions
    python tests/benchmarks/run_bench.py --tiny     # seconds-long smoke run (used by the test suite)
    python tests/benchmarks/run_bench.py --long     # adds the memory check: a 3-hour file
                                                    # against a 10-minute one (~3 GB more, cached)
"""

from __future__ import annotations

import argparse
import contextlib
import json
import os
import statistics
import subprocess
import sys
import zlib
from dataclasses import dataclass
from pathlib import Path

import numpy as np
import soundfile as sf
from scipy import signal as sps

HERE = Path(__file__).resolve().parent
CACHE = HERE / "cache"
PY = sys.executable
EXE = str(Path(PY).with_name("deliverycheck"))


def engine_block(path: Path) -> str:
    """The block size the engine picks for this file (checker.io.audio.auto_block_frames)."""
    from checker.io.audio import auto_block_frames, open_info

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


def make_file(
    path: Path,
    minutes: float,
    channels: int,
    rate: int,
    subtype: str,
    limited: bool,
    fmt: str = "WAV",
):
    if path.exists():
        return path
    path.parent.mkdir(parents=True, exist_ok=True)
    rng = np.random.default_rng(zlib.crc32(path.name.encode()))  # stable across processes
    tmp = path.with_name(path.name + ".part")
    total = int(minutes * 60 * rate)
    with sf.SoundFile(str(tmp), "w", rate, channels, subtype=subtype, format=fmt) as f:
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


@dataclass
class Run:
    wall_s: float
    rss_mb: float
    cpu_s: float


def run_once(cmd: list[str]) -> Run:
    """One command in its own process, started by the small spawner process (see
    spawner.py: why not from this one, and how CPU of a process tree is counted)."""
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
    wall, mb, status, err, cpu = json.loads(_spawner.stdout.readline())
    if status not in (0, 1):
        raise SystemExit(f"bench: {' '.join(cmd)} exited {status}: {err.strip()[-400:]}")
    return Run(wall, mb, cpu)


def medians(runs: list[Run]) -> Run:
    return Run(
        statistics.median(r.wall_s for r in runs),
        max(r.rss_mb for r in runs),
        statistics.median(r.cpu_s for r in runs),
    )


#: Threads each per-file command runs (the rows' labels).
THREADS = {
    "a decode": 1,
    "b deliverycheck": 2,
    "b0 numpy kernels": 2,
    "b1 one thread": 1,
    "c pyloudnorm": 1,
    "d pyebur128": 1,
    "d1 pyebur128 I": 1,
    "s speech gate": 2,
}


def commands(path: Path) -> dict[str, list[str]]:
    w = str(HERE / "workloads.py")
    block = engine_block(path)
    return {
        "a decode": [PY, w, "decode", str(path), block],
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
        "d pyebur128": [PY, w, "pyebur128", str(path), block],
        "d1 pyebur128 I": [PY, w, "pyebur128i", str(path), block],
    }


def paired(runs: dict, num: object, den: object, attr: str = "cpu_s") -> str:
    """The ratio num / den (CPU, or ``attr``) of each repetition (the two ran close together,
    so a slow spell of a shared machine weighs on both): median and range, as text."""
    pairs = zip(runs[num], runs[den], strict=True)
    each = sorted(getattr(n, attr) / getattr(d, attr) for n, d in pairs)
    return f"per repetition: median {statistics.median(each):.2f}, {each[0]:.2f}-{each[-1]:.2f}"


def bench_file(path: Path, reps: int, skip: set[str]) -> dict[str, Run]:
    info = sf.info(str(path))
    cmds = {k: v for k, v in commands(path).items() if k not in skip}
    runs: dict[str, list[Run]] = {k: [] for k in cmds}
    for _ in range(reps):
        for name, cmd in cmds.items():  # alternate the commands inside each repetition
            runs[name].append(run_once(cmd))
    result = {k: medians(v) for k, v in runs.items()}
    dur = info.frames / info.samplerate
    print(
        f"\n{path.name}: {dur / 60:.1f} min, {info.channels} ch, {info.samplerate} Hz, "
        f"{info.format} {info.subtype}"
    )
    a_cpu = result["a decode"].cpu_s
    print(
        f"  {'command':<18} {'threads':>7} {'wall s':>8} {'x realtime':>11} {'CPU s':>8}"
        f" {'CPU/a':>6} {'peak RSS MB':>12}"
    )
    for k, r in result.items():
        print(
            f"  {k:<18} {THREADS[k]:>7} {r.wall_s:>8.2f} {dur / r.wall_s:>11.0f} {r.cpu_s:>8.2f}"
            f" {r.cpu_s / a_cpu:>6.2f} {r.rss_mb:>12.0f}"
        )
    computed, seen = truepeak_skip(path)
    if seen:
        print(
            f"  true peak: {computed} of {seen} chunk-channels interpolated "
            f"({100 * computed / seen:.0f} %; the rest skipped by the exact bound)"
        )
    b, b1 = result["b deliverycheck"], result.get("b1 one thread")
    ratios = [f"b/a = {b.wall_s / result['a decode'].wall_s:.2f} (wall)"]
    if b1:
        ratios.append(
            f"b1/a = {b1.cpu_s / a_cpu:.2f} (CPU, one thread each; target <= 2.5; "
            f"{paired(runs, 'b1 one thread', 'a decode')})"
        )
    if "b0 numpy kernels" in result:
        ratios.append(f"b0/a = {result['b0 numpy kernels'].cpu_s / a_cpu:.2f} (CPU)")
    if "s speech gate" in result:
        s = result["s speech gate"]
        ratios.append(f"s/b = {s.cpu_s / b.cpu_s:.2f} (CPU: the speech gate's cost)")
    if "c pyloudnorm" in result:
        c = result["c pyloudnorm"]
        ratios.append(
            f"c/b = {c.wall_s / b.wall_s:.2f} (wall), RSS c/b = {c.rss_mb / b.rss_mb:.0f}"
        )
    if "d pyebur128" in result:
        d = result["d pyebur128"]
        ratios.append(f"d/b = {d.wall_s / b.wall_s:.2f} (wall)")
        if b1:
            ratios.append(
                f"d/b1 = {d.cpu_s / b1.cpu_s:.2f} (CPU, one thread each; target >= 4; "
                f"{paired(runs, 'd pyebur128', 'b1 one thread')})"
            )
    if "d1 pyebur128 I" in result and b1:
        ratios.append(f"d1/b1 = {result['d1 pyebur128 I'].cpu_s / b1.cpu_s:.2f} (CPU)")
    print("  ratios: " + "; ".join(ratios))
    return result


def truepeak_skip(path: Path) -> tuple[int, int]:
    """(chunk-channels interpolated, seen) by the true-peak meter on this file."""
    w = str(HERE / "workloads.py")
    out = subprocess.run(
        [PY, w, "tpskip", str(path), engine_block(path)], capture_output=True, text=True, check=True
    ).stdout.split()
    return int(out[0]), int(out[1])


def bench_progress(path: Path, reps: int) -> None:
    """Progress within a file: b1 with and without a worker's on_frames callback, runs
    alternating, at the engine's block size and at 4,800-frame blocks (the most blocks,
    so the most calls); and the callback's own cost per call against a block's."""
    w = str(HERE / "workloads.py")
    info = sf.info(str(path))
    dur = info.frames / info.samplerate
    print(f"\nprogress within a file ({path.name}, {dur / 60:.1f} min), b1 [1 thread]:")
    for block in (int(engine_block(path)), 4_800):
        runs: dict[str, list[Run]] = {"without": [], "with": []}
        for _ in range(reps):
            runs["without"].append(run_once([PY, w, "blocks", str(path), str(block)]))
            runs["with"].append(run_once([PY, w, "blocks-progress", str(path), str(block)]))
        a, b = medians(runs["without"]), medians(runs["with"])
        blocks = -(-info.frames // block)
        print(
            f"  {block:>7}-frame blocks ({blocks} calls): CPU without {a.cpu_s:.2f} s, with "
            f"{b.cpu_s:.2f} s, ratio {b.cpu_s / a.cpu_s:.3f}; wall ratio {b.wall_s / a.wall_s:.3f}"
        )
        if block == 4_800:
            per_call_ns = float(
                subprocess.run(
                    [PY, w, "onframes", str(path)], capture_output=True, text=True, check=True
                ).stdout
            )
            per_block_ns = 1e9 * a.cpu_s / blocks
            print(
                f"  callback {per_call_ns:.0f} ns per call, a 4,800-frame block "
                f"{per_block_ns / 1000:.0f} us: {100 * per_call_ns / per_block_ns:.3f} % per block"
            )


def bench_set_progress(stems: list[Path], reps: int) -> None:
    """A stem set's lockstep read with and without the progress callback, runs alternating."""
    w = str(HERE / "workloads.py")
    info = sf.info(str(stems[0]))
    dur = info.frames / info.samplerate
    runs: dict[str, list[Run]] = {"without": [], "with": []}
    for _ in range(reps):
        runs["without"].append(run_once([PY, w, "set", *map(str, stems)]))
        runs["with"].append(run_once([PY, w, "set-progress", *map(str, stems)]))
    a, b = medians(runs["without"]), medians(runs["with"])
    print(
        f"\nstem set read ({len(stems)} stems of {dur / 60:.1f} min, 48,000-frame steps) [1 thread]:"
        f" CPU without the progress callback {a.cpu_s:.2f} s, with {b.cpu_s:.2f} s, ratio "
        f"{b.cpu_s / a.cpu_s:.3f}; wall ratio {b.wall_s / a.wall_s:.3f}"
    )


def bench_memory(long_file: Path, short_file: Path, reps: int) -> None:
    """Peak RSS of (b) on a 3-hour file against a 10-minute one: streaming keeps it flat."""
    print("\nmemory: deliverycheck measure (2 threads), peak RSS (MB) by file length")
    rows, minutes = [], []
    for path in (short_file, long_file):
        info = sf.info(str(path))
        r = medians([run_once(commands(path)["b deliverycheck"]) for _ in range(reps)])
        dur = info.frames / info.samplerate
        rows.append(r.rss_mb)
        minutes.append(dur / 60)
        print(
            f"  {dur / 60:6.1f} min: {r.rss_mb:6.0f} MB peak RSS, {r.wall_s:7.2f} s, "
            f"{dur / r.wall_s:5.0f}x realtime"
        )
    print(
        f"  peak RSS {minutes[1]:.0f} min / {minutes[0]:.0f} min = {rows[1] / rows[0]:.2f} "
        "(target: about 1, both <= 200 MB)"
    )


def check_cmd(inputs: list[Path], jobs: int, out: Path) -> list[str]:
    cmd = [EXE, "check", *map(str, inputs), "--profile", "measure-only", "--jobs", str(jobs)]
    return cmd + ["--out", str(out), "--fresh", "--quiet"]


@contextlib.contextmanager
def spinning_core():
    """A second process spinning on one core for the duration (the concurrent load)."""
    spin = subprocess.Popen([PY, "-c", "while True: pass"])
    try:
        yield
    finally:
        spin.kill()
        spin.wait()


def bench_jobs(files: list[Path], reps: int, out: Path, spinner: bool = True) -> None:
    """--jobs 1 against --jobs 2 on a batch, unloaded and (``spinner``) with one core kept busy."""
    loads = (False, True) if spinner else (False,)
    walls: dict[tuple[int, bool], list[Run]] = {(j, s): [] for j in (1, 2) for s in loads}
    for _ in range(reps):
        for loaded in loads:
            with spinning_core() if loaded else contextlib.nullcontext():
                for jobs in (1, 2):
                    walls[jobs, loaded].append(run_once(check_cmd(files, jobs, out / f"j{jobs}")))
    m = {k: medians(v) for k, v in walls.items()}
    print(f"\nbatch of {len(files)} files, check (one thread per worker), {CORES} cores:")
    for (jobs, loaded), r in m.items():
        load = "with a one-core spinner" if loaded else "unloaded"
        print(f"  --jobs {jobs} {load:<24} wall {r.wall_s:7.2f} s, CPU {r.cpu_s:7.2f} s")
    print(
        f"  throughput ratio jobs2/jobs1 = {m[1, False].wall_s / m[2, False].wall_s:.2f}"
        f" (target >= 1.8 on 2 cores; {paired(walls, (1, False), (2, False), 'wall_s')})"
    )
    if not spinner:
        return
    print(
        f"  under load / unloaded: --jobs 2 {m[2, True].wall_s / m[2, False].wall_s:.2f}, "
        f"--jobs 1 {m[1, True].wall_s / m[1, False].wall_s:.2f} (target <= 1.6)"
    )


def bench_overhead(shorts: list[Path], joined: Path, reps: int, out: Path) -> None:
    """Per-file overhead: N one-second files against the same N seconds as one file, both
    `check --jobs 1` (one worker, one thread), runs alternating; then the engine's share:
    measure() of each in one process (no workers, store or reports). Overheads are the
    medians of the paired differences (each repetition's pair ran side by side)."""
    w = str(HERE / "workloads.py")
    tiny = make_tiny(shorts[0].parent.with_name(shorts[0].parent.name + "-tiny"), len(shorts))
    cmds = {
        "files": check_cmd([shorts[0].parent], 1, out / "files"),
        "files jobs 2": check_cmd([shorts[0].parent], 2, out / "files-2"),
        "one": check_cmd([joined], 1, out / "one"),
        "files measure()": [PY, w, "measureall", str(shorts[0].parent)],
        "one measure()": [PY, w, "measureall", str(joined)],
        "tiny measure()": [PY, w, "measureall", str(tiny[0].parent)],
        "tiny one measure()": [PY, w, "measureall", str(tiny[0])],
        "tiny files": check_cmd([tiny[0].parent], 1, out / "tiny"),
        "tiny one": check_cmd([tiny[0]], 1, out / "tiny-one"),
    }
    runs: dict[str, list[Run]] = {k: [] for k in cmds}
    for _ in range(reps):
        for name, cmd in cmds.items():
            runs[name].append(run_once(cmd))
    n = len(shorts)
    print(f"\nper-file overhead: {n} one-second files vs one {n}-second file, one thread:")
    per_file: dict[str, float] = {}
    for many, one, what in (
        ("files", "one", "check --jobs 1"),
        ("files measure()", "one measure()", "measure() in one process"),
        ("tiny measure()", "tiny one measure()", "measure(), 10 ms files"),
        ("tiny files", "tiny one", "check --jobs 1, 10 ms files"),
    ):
        f, o = medians(runs[many]), medians(runs[one])
        wall = statistics.median(
            1000 * (a.wall_s - b.wall_s) / n for a, b in zip(runs[many], runs[one], strict=True)
        )
        cpu = statistics.median(
            1000 * (a.cpu_s - b.cpu_s) / n for a, b in zip(runs[many], runs[one], strict=True)
        )
        print(
            f"  {what:<26} {n} files: wall {f.wall_s:6.2f} s, CPU {f.cpu_s:6.2f} s; one file: "
            f"wall {o.wall_s:6.2f} s, CPU {o.cpu_s:6.2f} s; per file: wall {wall:5.1f} ms, "
            f"CPU {cpu:5.1f} ms"
        )
        per_file[many] = wall
    ok = {True: "met", False: "not met"}
    print(
        f"  goal, check --jobs 1 at most 5 ms per one-second file (wall): {per_file['files']:.1f} ms,"
        f" {ok[per_file['files'] <= 5.0]}; the 10 ms rows are the fixed cost per file (each of those"
        f" files against one of them): {per_file['tiny files']:.1f} ms in a batch,"
        f" {ok[per_file['tiny files'] <= 5.0]} against the same 5 ms. What the one-second files add"
        " beyond it is their analysis (split below); README, Speed, says why it stays."
    )
    two = medians(runs["files jobs 2"])
    ratio = statistics.median(
        a.wall_s / b.wall_s for a, b in zip(runs["files"], runs["files jobs 2"], strict=True)
    )
    print(
        f"  the {n} one-second files with --jobs 2 (2 workers): wall {two.wall_s:6.2f} s, CPU"
        f" {two.cpu_s:6.2f} s; --jobs 1 / --jobs 2 wall {ratio:.2f} (per repetition, median; the"
        " start-up and the reports do not divide, and the parent's work per file, its store row"
        " and report pieces, shares the two cores with the workers)"
    )
    meter_split(shorts, joined, reps)


def meter_split(shorts: list[Path], joined: Path, reps: int) -> None:
    """Where the one-second files' extra time goes: measure() of every file and of the joined
    file in one process each, each meter's calls timed (workloads.py meters; medians of
    ``reps`` runs of each, alternating)."""
    w = str(HERE / "workloads.py")
    env = {
        k: v for k, v in os.environ.items() if k not in ("OPENBLAS_CORETYPE", "OPENBLAS_L2_SIZE")
    }
    runs: dict[str, list[dict]] = {"files": [], "one": []}
    for _ in range(reps):
        for name, target in (("files", shorts[0].parent), ("one", joined)):
            out = subprocess.run(
                [PY, w, "meters", str(target)], capture_output=True, text=True, check=True, env=env
            )
            runs[name].append(json.loads(out.stdout))
    n = len(shorts)
    print(
        f"  where it goes (measure() in one process, each meter's calls timed, medians of {reps}):"
    )
    print(
        f"    {'meter':<16} {'per file':>9} {'per second of the one file':>27} {'difference':>11}"
    )
    names = list(runs["files"][0]["meters_s"])

    def ms(r: dict, name: str) -> float:  # per file, or per second of the one file
        return 1000 * (r["total_s"] if name == "total" else r["meters_s"].get(name, 0.0)) / n

    for name in [*names, "total"]:
        f = statistics.median(ms(r, name) for r in runs["files"])
        o = statistics.median(ms(r, name) for r in runs["one"])
        print(f"    {name:<16} {f:7.2f} ms {o:24.2f} ms {f - o:8.2f} ms")
    for name in ("files", "one"):
        computed, seen, refined = runs[name][0]["truepeak"]
        print(
            f"    true peak, {name}: {computed} of {seen} chunk-channels interpolated, "
            f"{refined} refined"
        )


def linked_batch(files: list[Path], n: int, folder: Path) -> list[Path]:
    """``n`` names for ``files`` (hard links, cycling through them): a larger batch at no cost
    in disk space; each name is a file of its own to the checker (it tells files apart by
    path, not by inode)."""
    folder.mkdir(parents=True, exist_ok=True)
    names = []
    for i in range(n):
        name = folder / f"linked-{i:02d}-{files[i % len(files)].name}"
        if not name.exists():
            os.link(files[i % len(files)], name)
        names.append(name)
    return names


def make_tiny(folder: Path, n: int) -> list[Path]:
    """n files of 480 stereo frames (10 ms): almost nothing but each file's fixed cost."""
    tiny = [folder / f"tiny-{i:04d}.wav" for i in range(n)]
    if all(p.exists() for p in tiny):
        return tiny
    folder.mkdir(parents=True, exist_ok=True)
    rng = np.random.default_rng(480)
    for p in tiny:
        sf.write(str(p), rng.normal(0.0, 0.1, (480, 2)), 48_000, subtype="PCM_24")
    return tiny


def make_shorts(folder: Path, n: int) -> tuple[list[Path], Path]:
    """n one-second stereo files cut from one programme, and the same audio as one file."""
    joined = folder.parent / f"{folder.name}-joined.wav"
    shorts = [folder / f"clip-{i:04d}.wav" for i in range(n)]
    if joined.exists() and all(p.exists() for p in shorts):
        return shorts, joined
    src = make_file(folder.parent / f"{folder.name}-source.wav", n / 60, 2, 48_000, "PCM_24", False)
    x, rate = sf.read(str(src))
    folder.mkdir(parents=True, exist_ok=True)
    for i, p in enumerate(shorts):
        sf.write(str(p), x[i * rate : (i + 1) * rate], rate, subtype="PCM_24")
    sf.write(str(joined), x[: n * rate], rate, subtype="PCM_24")
    return shorts, joined


CORES = os.cpu_count() or 1


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
        scale, reps, batch, clips = 0.02, args.reps or 1, 2, 10  # 1.2-second files
    elif args.quick:
        scale, reps, batch, clips = 1 / 6, args.reps or 3, 4, 100
    else:
        scale, reps, batch, clips = 1.0, args.reps or 5, 16, 200
    c = args.cache
    files = [
        make_file(c / f"programme-60min-{scale:g}.wav", 60 * scale, 2, 48_000, "PCM_24", False),
        make_file(c / f"surround-20min-{scale:g}.wav", 20 * scale, 6, 48_000, "PCM_24", False),
        make_file(c / f"cd-10min-{scale:g}.wav", 10 * scale, 2, 44_100, "PCM_16", False),
        make_file(c / f"limited-10min-{scale:g}.wav", 10 * scale, 2, 48_000, "PCM_24", True),
        make_file(c / f"hires-10min-{scale:g}.wav", 10 * scale, 2, 96_000, "PCM_24", False),
        make_file(
            c / f"programme-10min-{scale:g}.flac", 10 * scale, 2, 48_000, "PCM_24", False, "FLAC"
        ),
    ]
    precompile()
    from checker.dsp import native

    load = os.getloadavg()[0] if hasattr(os, "getloadavg") else float("nan")
    print(
        f"deliverycheck benchmark: {reps} repetition(s), medians; each command in its own process;"
        f" {CORES} cores, load average {load:.1f} at start; b: {native.status()}, "
        "b0: the numpy path (DELIVERYCHECK_KERNELS=numpy); library pools: one thread"
    )
    # the smoke run (--tiny) shows every comparison once, on the first file
    lean = {"b0 numpy kernels", "c pyloudnorm", "d1 pyebur128 I"} if args.tiny else set()
    for i, path in enumerate(files):
        skip = lean if i else set()
        if not path.name.startswith("cd-"):  # the speech gate costs minutes: one file only
            skip = skip | {"s speech gate"}
        bench_file(path, reps, skip)
    ten = [
        make_file(c / f"batch-{i:02d}-{scale:g}.wav", 10 * scale, 2, 48_000, "PCM_24", False)
        for i in range(batch)
    ]
    bench_progress(files[3], max(1, min(reps, 5)))
    bench_set_progress(ten[:3], max(1, min(reps, 5)))
    bench_jobs(ten, max(1, min(reps, 3)), c / "batch-out")
    if args.quick:  # 4 files spend as long on fixed costs as on files: 24 show the scaling
        big = linked_batch(ten, 24, c / f"batch-linked-{scale:g}")
        bench_jobs(big, max(1, min(reps, 3)), c / "batch-linked-out", spinner=False)
    shorts, joined = make_shorts(c / f"clips-{clips}", clips)
    bench_overhead(shorts, joined, max(1, min(reps, 5)), c / "clips-out")
    if args.long:
        long_file = make_file(
            c / f"programme-180min-{scale:g}.wav", 180 * scale, 2, 48_000, "PCM_24", False
        )
        bench_memory(long_file, ten[0], max(1, min(reps, 2)))
    return 0


if __name__ == "__main__":
    sys.exit(main())
