"""Run a batch: discover files, reuse stored measurements, measure the rest in
parallel, evaluate the profile, and keep every finished file in the store.

    run, results = run_batch(["deliveries/"], profile, Path("out"), jobs=4)

Per-file problems are rows with status "error", never exceptions. Files whose
identity (resolved path, size, mtime) and engine version are already in the
store are not read again, so an interrupted run resumes where it stopped and a
re-check against another profile opens no audio. ``fresh=True`` ignores the
cache. A Ctrl-C raises :class:`Interrupted` after everything finished so far
has been committed.
"""

from __future__ import annotations

import dataclasses
import json
import os
import uuid
from collections.abc import Callable
from datetime import UTC, datetime
from pathlib import Path
from typing import Any

from checker.discover import discover
from checker.errors import UsageError
from checker.measure import ENGINE_VERSION, Measurement
from checker.meters.base import MeasureOptions
from checker.progress import Progress
from checker.results import FileResult, RunInfo
from checker.store import FileIdentity, Store, open_store
from checker.verdict import ERROR
from checker.workers import (
    DEFAULT_MEMORY_MB,
    DaskPool,
    LocalPool,
    Task,
    usable_cores,
    worker_measure_fn,
)


class Interrupted(Exception):
    """Ctrl-C during a batch; everything finished is in the store."""

    def __init__(self, run: RunInfo, done: int, total: int):
        super().__init__(f"interrupted after {done} of {total} files")
        self.run = run
        self.done = done
        self.total = total


def default_jobs() -> int:
    return usable_cores()


def measure_options(profile, layout: str | None = None) -> MeasureOptions:
    """Measurement options for a batch. They do not depend on the profile's limits, so
    stored measurements serve every profile: true-peak overs are counted against the fixed
    reference in MeasureOptions (recorded with each measurement as
    ``true_peak_ceiling_dbtp``), while rules judge ``true_peak_dbtp`` against the
    profile's own ceiling. The one input they take is the files' channel order: ``layout``
    (the command line's), else the profile's ``[format] channel_layout``; it applies to the
    files with as many channels as it names."""
    given = layout or getattr(profile, "channel_layout", None)
    return MeasureOptions(layout=given, layout_strict=False) if given else MeasureOptions()


def options_key(options: MeasureOptions) -> str:
    """The measurement options that change values (block size does not)."""
    d = dataclasses.asdict(options)
    d.pop("block_frames", None)
    return json.dumps(d, sort_keys=True)


def _now() -> str:
    return datetime.now(UTC).isoformat(timespec="seconds")


def new_run(paths, profile) -> RunInfo:
    started = _now()
    limits = profile.limits_table() if hasattr(profile, "limits_table") else ()
    return RunInfo(
        run_id=started.replace(":", "").replace("-", "")[:15] + "-" + uuid.uuid4().hex[:8],
        started_at=started,
        inputs=tuple(str(p) for p in paths),
        profile_name=str(getattr(profile, "name", "")),
        profile_title=str(getattr(profile, "title", "")),
        profile_limits=tuple(dict(x) for x in limits),
        engine_version=ENGINE_VERSION,
    )


def _default_evaluate():
    from checker.rules import evaluate

    return evaluate


def _judge(path: str, m: Measurement, profile, evaluate) -> FileResult:
    if m.path != path:
        m = dataclasses.replace(m, path=path)
    try:
        verdict = evaluate(m, profile)
    except Exception as exc:  # a rules bug must not sink the batch
        return FileResult(
            path=path,
            status=ERROR,
            measurement=m,
            error=f"{path}: evaluating the profile failed ({type(exc).__name__}: {exc})",
        )
    return FileResult(path=path, status=verdict.status, measurement=m, verdict=verdict)


def run_batch(
    paths,
    profile,
    out_dir: str | Path,
    jobs: int | None = None,
    fresh: bool = False,
    cluster: str | None = None,
    timeout_s: float | None = None,
    progress: Progress | None = None,
    *,
    memory_mb: int | None = DEFAULT_MEMORY_MB,
    evaluate: Callable | None = None,
    measure_fn: Callable | None = None,
    on_note: Callable[[str], Any] | None = None,
    store: Store | None = None,
    layout: str | None = None,
) -> tuple[RunInfo, list[FileResult]]:
    """Check every audio file under ``paths`` against ``profile``; see the module doc.
    ``layout``: the channel order of files with as many channels (else the profile's)."""
    if timeout_s is not None and not timeout_s > 0:
        raise UsageError(f"--timeout-s: timeout_s = {timeout_s} (expected > 0)")
    jobs = default_jobs() if jobs is None else int(jobs)
    if jobs < 1:
        raise UsageError(f"--jobs: jobs = {jobs} (expected >= 1)")
    evaluate = evaluate or _default_evaluate()
    found = discover(list(paths))
    if not found.files and not any(p.missed for p in found.problems):
        raise UsageError(
            f"inputs: audio files = 0 under {', '.join(map(str, paths))} "
            "(expected at least one file libsndfile reads)"
        )
    options = measure_options(profile, layout)
    okey = options_key(options)
    progress = progress or Progress(None)
    own_store = store is None
    store = store or open_store(out_dir)
    run = new_run(paths, profile)
    results: dict[str, FileResult] = {}
    total = len(found.files) + sum(1 for p in found.problems if p.missed)
    try:
        store.start_run(run)
        progress.start(total)
        for problem in found.problems:
            if problem.missed:
                _keep(store, run, results, FileResult.failed(problem.path, problem.message))
                progress.advance()
            elif on_note:
                on_note(problem.message)

        tasks: list[Task] = []
        idents: dict[int, FileIdentity] = {}
        for index, path in enumerate(found.files):
            try:
                ident = FileIdentity.of(path)
            except OSError as exc:
                msg = f"{path}: file vanished or cannot be read ({exc.strerror or exc})"
                _keep(store, run, results, FileResult.failed(path, msg))
                progress.advance()
                continue
            if not fresh:
                cached = store.get_measurement(ident, ENGINE_VERSION, okey)
                if cached is not None:
                    _keep(store, run, results, _judge(path, cached, profile, evaluate))
                    progress.advance()
                    continue
                error = store.get_error(ident, ENGINE_VERSION, okey)
                if error is not None:
                    _keep(store, run, results, FileResult.failed(path, error))
                    progress.advance()
                    continue
            idents[index] = ident
            tasks.append(Task(index=index, path=path, size_bytes=ident.size_bytes))

        if cluster:
            pool = DaskPool(cluster, memory_mb=memory_mb, measure_fn=measure_fn)
        else:
            workers = min(jobs, max(1, len(tasks)))
            if measure_fn is None and workers < jobs:  # fewer files than jobs: cores to spare
                measure_fn = worker_measure_fn(workers, min(jobs, usable_cores()))
            pool = LocalPool(
                workers, memory_mb=memory_mb, measure_fn=measure_fn, timeout_s=timeout_s
            )
        outcomes = pool.run(tasks, options)
        try:
            for task, outcome in outcomes:
                ident = idents[task.index]
                if outcome[0] == "ok":
                    m: Measurement = outcome[1]
                    store.put_measurement(ident, okey, m)
                    result = _judge(task.path, m, profile, evaluate)
                    audio_s = m.get("duration_s")
                else:
                    _, message, retry = outcome
                    store.put_error(ident, ENGINE_VERSION, okey, message, retry)
                    result = FileResult.failed(task.path, message)
                    audio_s = None
                _keep(store, run, results, result)
                progress.advance(audio_s, measured=True)
        finally:
            outcomes.close()  # stops and reaps the workers
        run = dataclasses.replace(run, finished_at=_now())
        store.finish_run(run)
    except KeyboardInterrupt:
        progress.close()
        raise Interrupted(run, len(results), total) from None
    finally:
        progress.close()
        if own_store:
            store.close()
    ordered = sorted(results.values(), key=lambda r: (os.path.normcase(r.path), r.path))
    return run, ordered


def _keep(store: Store, run: RunInfo, results: dict[str, FileResult], result: FileResult) -> None:
    store.put_result(run.run_id, result)
    results[result.path] = result
