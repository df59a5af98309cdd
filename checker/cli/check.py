"""``deliverycheck check PATH... --profile NAME|FILE``: check a batch against a profile."""

from __future__ import annotations

import argparse
import contextlib
import os
import shlex
import sys
import threading
from pathlib import Path
from typing import TextIO

from checker.cli.spanargs import add_span_arguments, with_span_settings
from checker.cli.summary import WORST_SHOWN, summary_lines
from checker.model.errors import (
    EXIT_FAILED,
    EXIT_INTERRUPTED,
    EXIT_OK,
    EXIT_OUTPUT,
    EXIT_UNCHECKED,
    OutputError,
    UsageError,
    os_cause,
)
from checker.model.names import for_terminal
from checker.model.verdict import ERROR, FAIL, WARN
from checker.run.progress import Progress
from checker.run.workers import DEFAULT_MEMORY_MB, start_worker_server

DEFAULT_OUT = "deliverycheck-report"
__all__ = ["WORST_SHOWN", "add_parser", "run", "summary_lines"]


def add_parser(sub) -> argparse.ArgumentParser:
    p = sub.add_parser(
        "check",
        help="check a batch of files against a delivery profile",
        description=(
            "Find the audio files under each PATH, measure each once, judge it against the "
            "profile, and write the reports and the results store to --out. Every file found "
            "is measured, refused with the reason (status error), or listed as not checked "
            "when it is clearly not a deliverable (text, images, sidecar files). Files already "
            "measured (same path, size, modification and change time) are not read again, so "
            "running the same command after an interruption resumes the batch."
        ),
    )
    p.add_argument("paths", nargs="+", metavar="PATH", help="audio files or folders")
    p.add_argument("--profile", required=True, metavar="NAME|FILE", help="delivery profile")
    p.add_argument(
        "--out", default=DEFAULT_OUT, metavar="DIR", help=f"output folder (default: {DEFAULT_OUT})"
    )
    p.add_argument(
        "--jobs",
        type=int,
        metavar="N",
        help="worker processes (default and most: one per usable core)",
    )
    p.add_argument("--fresh", action="store_true", help="measure every file again (ignore store)")
    p.add_argument("--quiet", action="store_true", help="no progress line")
    p.add_argument(
        "--strict",
        action="store_true",
        help="warnings fail too (exit 1): for pipelines that accept only clean passes",
    )
    p.add_argument(
        "--cluster",
        metavar="ADDRESS",
        help="measure on a Dask scheduler (tcp://host:8786) or local:N for N local workers",
    )
    p.add_argument(
        "--timeout-s",
        type=float,
        metavar="S",
        help="per-file time limit in seconds (default: 120 s plus the file's duration)",
    )
    p.add_argument(
        "--mix",
        metavar="FILE",
        help="reference mix for a stem set: the stems must rebuild it (null test); "
        "takes one folder PATH",
    )
    p.add_argument(
        "--layout",
        metavar="LABELS",
        help='channel order of the files with as many channels, e.g. "L C R Ls Rs LFE" '
        "(overrides the profile's; other files keep their own)",
    )
    add_span_arguments(p)
    p.add_argument(
        "--worker-memory-mb",
        type=int,
        default=DEFAULT_MEMORY_MB,
        metavar="MB",
        help=f"memory ceiling per worker process (default: {DEFAULT_MEMORY_MB}; 0 = none)",
    )
    return p


def exit_code(results, strict: bool = False) -> int:
    """3 when a file could not be checked, 1 when one failed (or warned, with --strict), else 0."""
    statuses = {r.status for r in results}
    if ERROR in statuses:
        return EXIT_UNCHECKED
    if FAIL in statuses or (strict and WARN in statuses):
        return EXIT_FAILED
    return EXIT_OK


def missing_paths(paths) -> list[str]:
    """PATH arguments that name nothing at all (a typo): a usage error, nothing is checked.

    A dangling symlink exists as a name and stays a per-file error row.
    """
    return [p for p in paths if not os.path.lexists(p)]


def run(args, out: TextIO, err: TextIO) -> int:
    if args.jobs is not None and args.jobs < 1:
        raise UsageError(f"--jobs: jobs = {args.jobs} (expected >= 1)")
    if args.worker_memory_mb is not None and args.worker_memory_mb < 0:
        raise UsageError(f"--worker-memory-mb: {args.worker_memory_mb} (expected >= 0)")
    missing = missing_paths(args.paths)
    if missing:
        raise UsageError(
            f"PATH: {', '.join(missing)} (expected an existing file or folder; nothing checked)"
        )
    from checker.profile.load import load_profile  # no numpy: a few ms

    profile = load_profile(args.profile)  # ProfileError -> exit 2 before anything is read
    if not args.cluster and (args.fresh or not os.path.exists(args.out)):
        # Every file will be measured here: the workers' server loads the engine on another
        # core while this process imports the rest and walks the inputs. (With a store that
        # may hold them, run_batch starts it at the first file to measure.)
        start_worker_server()
    from checker.io.layout import check_layout_text
    from checker.run.batch import Interrupted, StoreFailed, run_batch

    profile = with_span_settings(profile, args)  # --span etc. over the profile's [programme]
    if args.layout is not None:
        check_layout_text(args.layout)
    out_dir = Path(args.out)
    notes: list[str] = []
    progress = Progress(err, quiet=args.quiet)
    _import_reports_meanwhile()
    early = _EarlyRows()
    try:
        run_info, results = run_batch(
            args.paths,
            profile,
            out_dir,
            jobs=args.jobs,
            fresh=args.fresh,
            cluster=args.cluster,
            timeout_s=args.timeout_s,
            progress=progress,
            memory_mb=args.worker_memory_mb or None,
            on_note=notes.append,
            layout=args.layout,
            mix=args.mix,
            on_result=early,
        )
    except StoreFailed as exc:  # the store failed part-way: report what was measured
        return _after_store_failure(exc, args, out_dir, notes, out, err, early.rows)
    except Interrupted as exc:
        # --fresh would measure everything again: the resume command leaves it out.
        resume = [a for a in sys.argv[1:] if a != "--fresh"]
        again = " ".join(shlex.quote(a) for a in ["deliverycheck", *resume])
        if not resume or resume[0] != "check":
            again = "the same deliverycheck check command (without --fresh)"
        print(
            f"deliverycheck: interrupted: {exc.done} of {exc.total} files finished and kept in "
            f"{out_dir / 'results.sqlite'}; no report written.",
            file=err,
        )
        print(for_terminal(f"to resume, run again: {again}"), file=err)
        return EXIT_INTERRUPTED
    counts = progress.counts()
    return _report(
        out_dir,
        run_info,
        results,
        notes,
        out,
        err,
        counts=counts,
        strict=args.strict,
        prepared=early.rows,
    )


class _EarlyRows:
    """run_batch's ``on_result``: each file's report pieces made as its result arrives, while
    the workers measure the next files (checker.report.prepared), instead of all of them after
    the last file. ``rows`` is None until the first result (or if the module will not load:
    the reports then make every piece themselves, and say what failed)."""

    def __init__(self) -> None:
        self.rows = None
        self.broken = False

    def __call__(self, run_info, result) -> None:
        if self.rows is None and not self.broken:
            try:
                from checker.report.prepared import PreparedRows
            except Exception:
                self.broken = True
                return
            self.rows = PreparedRows()
        if self.rows is not None:
            self.rows.add(run_info, result)


def _import_reports() -> None:
    with contextlib.suppress(Exception):  # _report imports it again and says what failed
        import checker.report.byprofile  # noqa: F401  (checker.report with it)


def _import_reports_meanwhile() -> None:
    """Import the report writers (about 0.06 s of one core here, since they no longer use
    pandas) in a thread while the batch runs: the parent mostly waits then, and the import
    would otherwise come after the last file. Not a daemon: an early exit waits for the
    import rather than cut it."""
    threading.Thread(target=_import_reports, name="import-reports").start()


def _report(
    out_dir: Path,
    run_info,
    results,
    notes,
    out,
    err,
    stored: bool = True,
    counts: dict[str, int] | None = None,
    strict: bool = False,
    prepared=None,
) -> int:
    """Write the reports (and this profile's copy beside the others') and print the summary;
    the run's exit code, or EXIT_OUTPUT (with a one-line message) when the reports cannot be
    written."""
    from checker.report import write_reports
    from checker.report.byprofile import keep_profile_copy

    try:
        written = write_reports(out_dir, run_info, results, prepared)
        index = keep_profile_copy(out_dir, run_info, results, written)
    except OSError as exc:
        what, todo = os_cause(exc)
        where = exc.filename or out_dir
        kept = (
            "the measurements are kept in the results store, so nothing is measured twice"
            if stored
            else "files finished before the store failed are kept in it"
        )
        raise OutputError(
            f"reports: cannot write {where}: {what} ({exc.strerror or exc}); {todo}, then run "
            f"the same command again: {kept}"
        ) from None
    written = {"store": out_dir / "results.sqlite", **written, "profiles": index}
    for line in summary_lines(run_info, results, written, notes, counts):
        print(line, file=out)
    return exit_code(results, strict=strict)


def _after_store_failure(exc, args, out_dir, notes, out, err, prepared=None) -> int:
    """The batch finished without its store: write the reports if possible, then say what
    failed. Exit EXIT_OUTPUT either way."""
    results = exc.results
    try:
        _report(
            out_dir,
            exc.run,
            results,
            notes,
            out,
            err,
            stored=False,
            strict=args.strict,
            prepared=prepared,
        )
        where = f"the reports in {out_dir} hold all {len(exc.results)} files of this run"
    except OutputError as report_failure:
        print(for_terminal(f"deliverycheck: {report_failure}"), file=err)
        where = "the reports could not be written either"
    print(for_terminal(f"deliverycheck: {exc} ({where})"), file=err)
    return EXIT_OUTPUT
