"""Small programs the benchmark runs, each in its own process (argv: path [block_frames])."""

from __future__ import annotations

import sys

import numpy as np
import soundfile as sf


def decode_only(path: str, block_frames: int) -> None:
    """(a) Decode only, as the issue defines it: soundfile into a reused float32 buffer,
    in blocks of the engine's size, no analysis."""
    with sf.SoundFile(path) as f:
        buf = np.empty((block_frames, f.channels), dtype="float32")
        while len(f.read(out=buf, dtype="float32", always_2d=True)) == block_frames:
            pass


def pyloudnorm_integrated(path: str) -> None:
    """(c) pyloudnorm as its users call it: whole-file read, then integrated_loudness."""
    import pyloudnorm

    data, rate = sf.read(path)
    pyloudnorm.Meter(rate).integrated_loudness(data)


def pyebur128_run(path: str, block_frames: int, full: bool = True) -> None:
    """(d) pyebur128: integrated + LRA + true peak + sample peak, fed in blocks;
    (d1, full=False) integrated loudness only. One thread either way."""
    import pyebur128 as e

    with sf.SoundFile(path) as f:
        mode = e.MeasurementMode
        modes = mode.MODE_I
        if full:
            modes |= mode.MODE_LRA | mode.MODE_TRUE_PEAK | mode.MODE_SAMPLE_PEAK
        state = e.R128State(f.channels, f.samplerate, modes)
        for block in f.blocks(blocksize=block_frames, dtype="float64", always_2d=True):
            buf = np.ascontiguousarray(block).ravel()
            state.add_frames(buf, block.shape[0])
        e.get_loudness_global(state)
        if full:
            e.get_loudness_range(state)
            for c in range(f.channels):
                e.get_true_peak(state, c)
                e.get_sample_peak(state, c)


def measure_one_thread(path: str) -> None:
    """(b1) The same analysis as `deliverycheck measure`, without its read-ahead thread:
    what one file costs on one core (a batch worker's case; measure() runs the library
    pools at one thread)."""
    from checker.analysis.onepass import measure

    measure(path)


def measure_all(path: str) -> None:
    """measure() of every .wav file in folder ``path`` (or of the one file ``path``) in this
    one process, one thread: the engine's own per-file cost, without a batch's workers,
    store and reports (with a worker's memory set-up: checker/dsp/heap.py)."""
    from pathlib import Path

    from checker.analysis.onepass import measure
    from checker.dsp.heap import keep_freed_memory

    keep_freed_memory()

    p = Path(path)
    for f in sorted(p.glob("*.wav")) if p.is_dir() else [p]:
        measure(str(f))


def meter_split(path: str) -> None:
    """Where measure_all(path)'s time goes, printed as JSON: seconds per meter class (its
    construction, prepare, feed and result; the fused block walk as "BlockWalk"), the rest
    (decoding, headers, assembling the values) as "other", and true peak's chunk-channels
    interpolated / seen / refined. Timed in this one process with perf_counter around each
    call (about 1 us per call of timer overhead)."""
    import json
    import time
    from collections import Counter

    from checker.meters import meter_classes
    from checker.meters.blockwalk import BlockWalk
    from checker.meters.truepeak import TruePeakMeter

    spent: Counter = Counter()
    tp = [0, 0, 0]

    def timed(cls: type, name: str):
        call = cls.__dict__[name]

        def run(self, *args, **kwargs):
            start = time.perf_counter()
            try:
                return call(self, *args, **kwargs)
            finally:
                spent[cls.__name__] += time.perf_counter() - start
                if name == "result" and cls is TruePeakMeter:
                    tp[:] = [a + b for a, b in zip(tp, self.totals, strict=True)]

        return run

    for cls in [*meter_classes(), BlockWalk]:
        for name in ("__init__", "prepare", "feed", "result", "__call__"):
            if name in cls.__dict__:
                setattr(cls, name, timed(cls, name))
    start = time.perf_counter()
    measure_all(path)
    total = time.perf_counter() - start
    spent["other"] = total - sum(spent.values())
    print(json.dumps({"total_s": total, "meters_s": dict(spent), "truepeak": tp}))


def measure_blocks(path: str, block_frames: int, report: bool) -> None:
    """(p) b1 at a given block size, with or without a batch worker's progress callback
    (``on_frames`` writing seconds to a shared double after every block, checker/run/live.py)."""
    import multiprocessing as mp

    from checker.analysis.onepass import measure
    from checker.meters.base import MeasureOptions
    from checker.run.live import new_slot, reporter

    on_frames = reporter(new_slot(mp.get_context("spawn"))) if report else None
    measure(path, MeasureOptions(block_frames=block_frames), on_frames=on_frames)


def on_frames_cost(calls: int = 200_000) -> None:
    """Nanoseconds per call of a worker's progress callback, printed (median of 5 timings)."""
    import multiprocessing as mp
    import statistics
    import timeit

    from checker.run.live import new_slot, reporter

    report = reporter(new_slot(mp.get_context("spawn")))
    times = timeit.repeat(lambda: report(480_000, 48_000), number=calls, repeat=5)
    print(f"{1e9 * statistics.median(times) / calls:.0f}")


def stem_set_read(paths: list[str], report: bool) -> None:
    """(q) A stem set's lockstep read (checker.stems.sets.check_stem_set, in a batch's parent
    process), with or without the progress line's callback after every step."""
    from checker.run.progress import Progress
    from checker.stems.sets import check_stem_set

    on_frames = Progress(None).set_started(1, 1, "bench", None) if report else None
    check_stem_set(paths, None, on_frames=on_frames)


def truepeak_skip(path: str, block_frames: int) -> None:
    """True-peak chunk-channels interpolated / seen (the skip bound's effect) and refined,
    the file's final chunks included, printed as 'n m r'."""
    from checker.io.audio import read_blocks
    from checker.io.layout import default_layout
    from checker.meters.base import MeasureOptions
    from checker.meters.truepeak import TruePeakMeter

    info, blocks = read_blocks(path, block_frames)
    meter = TruePeakMeter(info, default_layout(info.channels), MeasureOptions())
    for block in blocks:
        meter.feed(block)
    meter.result()
    print(*meter.totals)


if __name__ == "__main__":
    which, path = sys.argv[1], sys.argv[2]
    if which in ("set", "set-progress"):  # argv: the set's files
        stem_set_read(sys.argv[2:], which == "set-progress")
        raise SystemExit(0)
    frames = int(sys.argv[3]) if len(sys.argv) > 3 else 48_000
    if which == "decode":
        decode_only(path, frames)
    elif which == "pyloudnorm":
        pyloudnorm_integrated(path)
    elif which == "pyebur128":
        pyebur128_run(path, frames)
    elif which == "pyebur128i":
        pyebur128_run(path, frames, full=False)
    elif which == "measure1":
        measure_one_thread(path)
    elif which == "measureall":
        measure_all(path)
    elif which == "meters":
        meter_split(path)
    elif which in ("blocks", "blocks-progress"):
        measure_blocks(path, frames, which == "blocks-progress")
    elif which == "onframes":
        on_frames_cost()
    elif which == "tpskip":
        truepeak_skip(path, frames)
    else:
        raise SystemExit(f"unknown workload {which!r}")
