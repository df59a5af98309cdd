"""deliverycheck: batch loudness-and-headroom delivery checker.

Public API::

    measure(path, options=None) -> Measurement      # one file, one pass, no profile
    load_profile(name_or_path) -> Profile           # a shipped profile by name, or a TOML file
    evaluate(measurement, profile) -> Verdict       # pure: no audio is read
    check(paths, profile, out_dir, jobs=None, mix=None, ...) -> (RunInfo, [FileResult])
                                                    # a whole batch: store, reports, resume,
                                                    # stem sets (same rows as the command line)

The package is one subpackage per stage of the flow (model, io, dsp, meters, analysis, profile,
judge, stems, run, report, cli); DEVELOPERS.md has the map.
"""

from __future__ import annotations

from checker.analysis.onepass import measure
from checker.judge.rules import evaluate
from checker.meters.base import MeasureOptions
from checker.model.measurement import Measurement
from checker.model.results import FileResult, RunInfo
from checker.model.verdict import Flag, GainAdvice, Verdict
from checker.model.version import __version__
from checker.profile.load import Profile, load_profile

__all__ = [
    "FileResult",
    "Flag",
    "GainAdvice",
    "MeasureOptions",
    "Measurement",
    "Profile",
    "RunInfo",
    "Verdict",
    "__version__",
    "check",
    "evaluate",
    "load_profile",
    "measure",
]


def check(paths, profile, out_dir, jobs: int | None = None, fresh: bool = False, **kwargs):
    """Check a batch like ``deliverycheck check``: measure (or reuse stored measurements),
    judge against ``profile`` (a Profile, a shipped name or a TOML path), check stem sets
    (a folder is one when ``mix=`` names its reference mix or the profile has set limits),
    write the reports into ``out_dir``; returns (RunInfo, [FileResult]). Per-file problems are
    error rows. Other keywords go to checker.run.batch.run_batch (layout, timeout_s, ...)."""
    from pathlib import Path

    from checker.dsp.threads import one_thread_pools
    from checker.report import write_reports
    from checker.report.byprofile import keep_profile_copy
    from checker.run.batch import run_batch

    if isinstance(profile, str | Path):
        profile = load_profile(str(profile))
    with one_thread_pools():  # library pools at one thread here; workers claim their own
        run, results = run_batch(list(paths), profile, out_dir, jobs=jobs, fresh=fresh, **kwargs)
    written = write_reports(Path(out_dir), run, results)
    keep_profile_copy(Path(out_dir), run, results, written)
    return run, results
