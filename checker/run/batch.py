"""Run a batch: discover files, reuse stored measurements, measure the rest in
parallel, evaluate the profile, and keep every finished file in the store.

    run, results = run_batch(["deliveries/"], profile, Path("out"), jobs=4)

Per-file problems are rows with status "error", never exceptions. Every file
under the inputs is accounted for (checker.io.discover): measured, an error row
saying why, or listed in ``RunInfo.not_checked`` with its reason. Paths in
results are in readable form (checker.model.names): a name that is not valid UTF-8
gets its own row with its odd bytes shown ``\\xNN``; the file itself is opened
by its real name. Files whose identity (resolved path, size, mtime, ctime) and
engine version are already in the store are not read again, so an interrupted
run resumes where it stopped and a re-check against another profile opens no
audio. ``fresh=True`` ignores the cache. A Ctrl-C raises :class:`Interrupted`
after everything finished so far has been committed. When the store fails
part-way (disk full, damaged file), the batch goes on without it and raises
:class:`StoreFailed` at the end, carrying every result for the reports.
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

from checker.io.discover import discover
from checker.meters.base import MeasureOptions
from checker.model.errors import StoreError, UsageError
from checker.model.measurement import ENGINE_VERSION, Measurement
from checker.model.names import readable
from checker.model.results import FileResult, RunInfo
from checker.model.verdict import ERROR
from checker.run.daskpool import DaskPool
from checker.run.progress import Progress
from checker.run.stemsets import stem_set_folders, with_stem_sets
from checker.run.store import FileIdentity, Store, open_store
from checker.run.workers import (
    DEFAULT_MEMORY_MB,
    LocalPool,
    Task,
    start_worker_server,
    usable_cores,
    worker_measure_fn,
)

#: Per-file rows (a measurement or an error, and a verdict) per store transaction: a
#: commit per file cost about 1 ms here. A SIGKILLed batch measures again the files of the
#: open group (at most GROUP_ROWS / 2 = 3) plus the files the workers had in hand (up to one
#: per job): 4 of 12 in tests/e2e/test_check_cli.py's halfway kill with two jobs.
GROUP_ROWS = 6


class Interrupted(Exception):
    """Ctrl-C during a batch; everything finished is in the store."""

    def __init__(self, run: RunInfo, done: int, total: int):
        super().__init__(f"interrupted after {done} of {total} files")
        self.run = run
        self.done = done
        self.total = total


class StoreFailed(StoreError):
    """The store failed part-way; the batch finished without it. ``results`` holds every
    file's result (for the reports); the message says what, where and what to do."""

    def __init__(self, message: str, run: RunInfo, results: list[FileResult]):
        super().__init__(message)
        self.run = run
        self.results = results


class _GuardedStore:
    """The batch's view of the store: the first StoreError is kept in ``failure`` and from
    then on reads find nothing and writes are skipped, so measuring goes on."""

    def __init__(self, store: Store):
        self.store = store
        self.failure: StoreError | None = None

    def __getattr__(self, name: str):
        method = getattr(self.store, name)

        def call(*args, **kwargs):
            if self.failure is not None:
                return None
            try:
                return method(*args, **kwargs)
            except StoreError as exc:
                self.failure = exc
                return None

        return call


def default_jobs() -> int:
    return usable_cores()


def capped_jobs(jobs: int | None, on_note: Callable[[str], Any] | None = None) -> int:
    """``jobs`` (default: one per usable core), capped to the usable cores with a note: a
    local worker process per core is the most that helps, and more only costs memory."""
    cores = usable_cores()
    if jobs is None:
        return cores
    if jobs > cores:
        if on_note:
            on_note(
                f"jobs = {jobs} capped to {cores}, the usable cores "
                "(more worker processes than cores do not help)"
            )
        return cores
    return jobs


def measure_options(profile, layout: str | None = None) -> MeasureOptions:
    """Measurement options for a batch. They do not depend on the profile's limits, so
    stored measurements serve every profile: true-peak overs are counted against the fixed
    reference in MeasureOptions (recorded with each measurement as
    ``true_peak_ceiling_dbtp``), while rules judge ``true_peak_dbtp`` against the
    profile's own ceiling. The inputs they take are the files' channel order: ``layout``
    (the command line's), else the profile's ``[format] channel_layout``; it applies to the
    files with as many channels as it names; the encode round trip a profile's
    ``[encode]`` section asks for (a measurement option, part of the cache key); and a profile
    with a speech limit turns the (costly) speech gate on, which only adds the speech keys
    (see reusable_keys)."""
    from checker.profile.catalogue import needs_lineup, needs_speech

    speech = needs_speech(profile)
    given = layout or getattr(profile, "channel_layout", None)
    encode = getattr(profile, "encode", None)  # the round trip asked for, or None
    prog = dict(getattr(profile, "programme", ()) or ())
    if needs_lineup(profile) and "span" not in prog and "in_point" not in prog:
        prog["span"] = "auto"  # a limit on the line-up tone or the head: find them
    span = {
        "span": "auto" if prog.get("span") == "auto" else None,
        "span_in": prog.get("in_point"),
        "span_out": prog.get("out_point"),
        "timecode_fps": prog.get("timecode_fps"),
        "break_min_s": prog.get("break_min_s"),
    }
    if given:
        return MeasureOptions(
            layout=given, layout_strict=False, encode=encode, speech=speech, **span
        )
    return MeasureOptions(encode=encode, speech=speech, **span)


def options_key(options: MeasureOptions) -> str:
    """The measurement options that change values (block size does not)."""
    d = dataclasses.asdict(options)
    d.pop("block_frames", None)
    if d.get("encode") is None:
        d.pop("encode", None)  # no round trip: the key of every earlier measurement
    if not d.get("speech"):
        d.pop("speech", None)  # keys of measurements stored before the speech gate stay valid
    for key in ("span", "span_in", "span_out", "timecode_fps", "break_min_s"):
        if d.get(key) is None:
            d.pop(key, None)  # no span asked for: the key of every earlier measurement
    return json.dumps(d, sort_keys=True)


def reusable_keys(options: MeasureOptions) -> tuple[str, ...]:
    """Options keys whose stored measurements serve these options: its own, and without
    speech also the one with speech (the same values plus the speech keys). A measurement
    stored without speech is measured again when a speech profile needs those values."""
    own = options_key(options)
    if options.speech:
        return (own,)
    return (own, options_key(dataclasses.replace(options, speech=True)))


def _now() -> str:
    return datetime.now(UTC).isoformat(timespec="seconds")


def new_run(paths, profile) -> RunInfo:
    started = _now()
    limits = profile.limits_table() if hasattr(profile, "limits_table") else ()
    return RunInfo(
        run_id=started.replace(":", "").replace("-", "")[:15] + "-" + uuid.uuid4().hex[:8],
        started_at=started,
        inputs=tuple(readable(str(p)) for p in paths),
        profile_name=str(getattr(profile, "name", "")),
        profile_title=str(getattr(profile, "title", "")),
        profile_limits=tuple(dict(x) for x in limits),
        engine_version=ENGINE_VERSION,
        mono_loudness=str(getattr(profile, "mono_loudness", "") or ""),
    )


def _default_evaluate():
    from checker.judge.rules import evaluate

    return evaluate


def _judge(path: str, m: Measurement, profile, evaluate, remark: str | None = None) -> FileResult:
    """Evaluate one measurement; ``remark`` (a note about the file's name from discovery)
    joins its findings for the reports (it is not stored: the name may change)."""
    if m.path != path:
        m = dataclasses.replace(m, path=path)
    if remark and remark not in m.findings:
        m = dataclasses.replace(m, findings=(*m.findings, remark))
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
    mix: str | None = None,
    on_result: Callable[[RunInfo, FileResult], Any] | None = None,
) -> tuple[RunInfo, list[FileResult]]:
    """Check every audio file under ``paths`` against ``profile``; see the module doc.
    ``layout``: the channel order of files with as many channels (else the profile's).
    ``mix``: a reference mix; the one folder in ``paths`` is then a stem set (folders are
    stem sets anyway when the profile has set limits: checker.run.stemsets).
    ``on_result(run, result)``: called with each file's result as it is kept (while the
    workers measure the next files); ``check`` makes its report rows there."""
    if timeout_s is not None and not timeout_s > 0:
        raise UsageError(f"timeout_s: {timeout_s} (expected > 0)", parameter="timeout_s")
    if jobs is not None and int(jobs) < 1:
        raise UsageError(f"jobs: {jobs} (expected >= 1)", parameter="jobs")
    folders = stem_set_folders([str(p) for p in paths], profile, mix)
    # The Dask path sizes itself (local:N, or the scheduler's workers): no cap there.
    jobs = capped_jobs(None if jobs is None else int(jobs), None if cluster else on_note)
    evaluate = evaluate or _default_evaluate()
    found = discover(list(paths))
    if not found.files and not any(p.missed for p in found.problems):
        skipped = f" ({len(found.not_checked)} other files, not audio)" if found.not_checked else ""
        raise UsageError(
            f"inputs: audio files = 0 under {', '.join(readable(str(p)) for p in paths)}"
            f"{skipped} (expected at least one file libsndfile reads)"
        )
    options = measure_options(profile, layout)
    okey = options_key(options)
    rkeys = reusable_keys(options)
    progress = progress or Progress(None)
    own_store = store is None
    store = _GuardedStore(store or open_store(out_dir))
    store.group_writes(GROUP_ROWS)  # committed GROUP_ROWS rows at a time (see GROUP_ROWS)
    run = new_run(paths, profile)
    run = dataclasses.replace(
        run,
        not_checked=tuple(
            {"path": readable(s.path), "reason": readable(s.reason)} for s in found.not_checked
        ),
    )
    results: dict[str, FileResult] = {}
    total = len(found.files) + sum(1 for p in found.problems if p.missed)
    try:
        store.start_run(run)
        progress.start(total)
        for problem in found.problems:
            if problem.missed:
                failed = FileResult.failed(readable(problem.path), readable(problem.message))
                _keep(store, run, results, on_result, failed)
                progress.advance()
            elif on_note:
                on_note(readable(problem.message))

        tasks: list[Task] = []
        idents: dict[int, FileIdentity] = {}
        for index, path in enumerate(found.files):
            shown = readable(path)
            remark = found.remarks.get(path)
            try:
                ident = FileIdentity.of(path)
            except OSError as exc:
                msg = f"{shown}: file vanished or cannot be read ({exc.strerror or exc})"
                _keep(store, run, results, on_result, FileResult.failed(shown, msg))
                progress.advance()
                continue
            if not fresh:
                cached = next(
                    filter(None, (store.get_measurement(ident, ENGINE_VERSION, k) for k in rkeys)),
                    None,
                )
                if cached is not None:
                    result = _judge(shown, cached, profile, evaluate, remark)
                    _keep(store, run, results, on_result, result)
                    progress.advance(stored=True)
                    continue
                error = store.get_error(ident, ENGINE_VERSION, okey)
                if error is not None:
                    _keep(store, run, results, on_result, FileResult.failed(shown, error))
                    progress.advance(stored=True)
                    continue
            if not tasks and not cluster:  # the first file to measure: the workers' server
                start_worker_server()  # loads the engine meanwhile (checker/run/workers.py)
            idents[index] = ident
            tasks.append(Task(index=index, path=path, size_bytes=ident.size_bytes))

        if cluster:
            pool = DaskPool(cluster, memory_mb=memory_mb, measure_fn=measure_fn)
        else:
            workers = min(jobs, max(1, len(tasks)))
            if measure_fn is None and workers < jobs:  # fewer files than jobs: cores to spare
                measure_fn = worker_measure_fn(workers, jobs)
            pool = LocalPool(
                workers, memory_mb=memory_mb, measure_fn=measure_fn, timeout_s=timeout_s
            )
        outcomes = pool.run(tasks, options, progress.audio)  # seconds, also within files
        try:
            for task, outcome in outcomes:
                ident = idents[task.index]
                shown = readable(task.path)
                if outcome[0] == "ok":
                    m: Measurement = outcome[1]
                    store.put_measurement(ident, okey, m)
                    remark = found.remarks.get(task.path)
                    result = _judge(shown, m, profile, evaluate, remark)
                else:
                    _, message, retry = outcome
                    message = readable(message)
                    store.put_error(ident, ENGINE_VERSION, okey, message, retry)
                    result = FileResult.failed(shown, message)
                _keep(store, run, results, on_result, result)
                progress.advance(measured=True)
        finally:
            outcomes.close()  # stops and reaps the workers
        ordered = sorted(results.values(), key=lambda r: (os.path.normcase(r.path), r.path))
        if folders:

            def keep_set(row: FileResult, from_store: bool) -> None:
                store.put_result(run.run_id, row)
                progress.count_set(stored=from_store)

            ordered = with_stem_sets(
                folders, mix, profile, ordered, options, okey, store, fresh, keep_set, progress
            )
        run = dataclasses.replace(run, finished_at=_now())
        store.finish_run(run)
    except KeyboardInterrupt:
        progress.close()
        store.flush()  # everything finished so far is kept
        raise Interrupted(run, len(results), total) from None
    finally:
        progress.close()
        store.flush()
        store.group_writes(1)
        if own_store:
            store.store.close()
    if store.failure is not None:
        raise StoreFailed(str(store.failure), run, ordered)
    return run, ordered


def _keep(
    store: Store | _GuardedStore,
    run: RunInfo,
    results: dict[str, FileResult],
    on_result: Callable[[RunInfo, FileResult], Any] | None,
    result: FileResult,
) -> None:
    store.put_result(run.run_id, result)
    results[result.path] = result
    if on_result is not None:
        on_result(run, result)
