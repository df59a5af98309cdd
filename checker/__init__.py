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

import importlib
from typing import TYPE_CHECKING

from checker.model.version import __version__

if TYPE_CHECKING:  # the names below load on first use (see __getattr__)
    from checker.analysis.onepass import measure
    from checker.judge.rules import evaluate
    from checker.meters.base import MeasureOptions
    from checker.model.measurement import Measurement
    from checker.model.results import FileResult, RunInfo
    from checker.model.verdict import Flag, GainAdvice, Verdict
    from checker.profile.load import Profile, load_profile

#: Public name -> the module that defines it. Loaded on first use: ``import checker.cli``
#: (the command line) or ``import checker.model`` must not load the measuring engine (numpy,
#: soundfile, every meter: about 0.3 s of CPU) before a command needs it; see README, Speed.
_LAZY = {
    "measure": "checker.analysis.onepass",
    "evaluate": "checker.judge.rules",
    "MeasureOptions": "checker.meters.base",
    "Measurement": "checker.model.measurement",
    "FileResult": "checker.model.results",
    "RunInfo": "checker.model.results",
    "Flag": "checker.model.verdict",
    "GainAdvice": "checker.model.verdict",
    "Verdict": "checker.model.verdict",
    "Profile": "checker.profile.load",
    "load_profile": "checker.profile.load",
}


def __getattr__(name: str):
    module = _LAZY.get(name)
    if module is None:
        raise AttributeError(f"module 'checker' has no attribute {name!r}")
    value = getattr(importlib.import_module(module), name)
    globals()[name] = value  # once: later lookups do not come here
    return value


def __dir__() -> list[str]:
    return sorted(set(globals()) | set(_LAZY))


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
    from checker.profile.load import load_profile
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
