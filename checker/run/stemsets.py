"""Stem sets inside a batch: which folders are sets, their stored or fresh measurement, their rows.

A folder given as an input is checked as one stem set when the caller names a reference mix
(``mix``) or the profile has set limits (scope "set"). The set's row (kind "set") comes first,
followed by its stems' own file rows (``group`` = the set's name); everything else keeps its
order. A set's measurement is kept in the store under a key of every file's identity, so a
re-check against another profile or a resumed batch does not read the stems again.
"""

from __future__ import annotations

import dataclasses
import json
import os
from collections.abc import Sequence

from checker.model.errors import UsageError
from checker.model.results import FileResult
from checker.model.version import ENGINE_VERSION
from checker.run import live


def stem_set_folders(paths: Sequence[str], profile, mix: str | None = None) -> list[str]:
    """The input folders checked as stem sets: every folder in ``paths`` when ``mix`` is given
    or the profile has set limits, else none. With ``mix``, ``paths`` must be one folder."""
    has_set_limits = any(row.get("scope") == "set" for row in profile.limits_table())
    folders = [str(p) for p in paths if os.path.isdir(p)]
    if mix:
        if len(folders) != 1 or len(paths) != 1:
            raise UsageError(
                f"mix: paths = {' '.join(map(str, paths))} (a reference mix needs exactly one "
                "folder of stems as the input)",
                parameter="mix",
            )
        if not os.path.isfile(mix):
            raise UsageError(f"mix: {mix} (expected an existing audio file)", parameter="mix")
    return folders if (mix or has_set_limits) else []


def stem_set_key(stem_set, options_key: str) -> str | None:
    """What a stem set's stored values depend on: every file's identity (resolved path, size,
    modification and change time), the engine version and the options; None when a file cannot
    be stat'ed (then the set is checked again, and says why)."""
    from checker.run.store import FileIdentity

    try:
        files = [FileIdentity.of(p) for p in stem_set.stem_paths]
        mix = FileIdentity.of(stem_set.mix_path) if stem_set.mix_path else None
    except OSError:
        return None
    parts = [ENGINE_VERSION, options_key, stem_set.name, os.path.realpath(stem_set.folder)]
    parts += [[f.path, f.size_bytes, f.mtime_ns, f.ctime_ns] for f in files]
    parts.append([mix.path, mix.size_bytes, mix.mtime_ns, mix.ctime_ns] if mix else None)
    return json.dumps(parts)


def longest_declared_s(stem_set) -> float | None:
    """The longest length the headers of a set's stems and mix declare (the lockstep read
    runs that long), or None when none declares one."""
    from checker.run.workerproc import probe_duration_s

    paths = list(stem_set.stem_paths) + ([stem_set.mix_path] if stem_set.mix_path else [])
    lengths = [s for s in map(probe_duration_s, paths) if s is not None]
    return max(lengths, default=None)


def measure_stem_set(
    stem_set, options, options_key: str, store=None, fresh: bool = False, on_frames=None
):
    """(the set's SetMeasurement, True when it came from the store): stored values when its
    files are unchanged, else one lockstep pass, stored when it read every file.
    ``on_frames``: how far that pass has got (checker.stems.sets.check_stem_set)."""
    from checker.stems.sets import SetMeasurement, check_stem_set

    key = stem_set_key(stem_set, options_key) if store is not None else None
    if key is not None and not fresh:
        cached = store.get_stem_set(key)
        if cached is not None:
            return SetMeasurement.from_dict(cached), True
    sm = check_stem_set(
        list(stem_set.stem_paths),
        stem_set.mix_path,
        options,
        name=stem_set.name,
        folder=stem_set.folder,
        on_frames=on_frames,
    )
    if key is not None and not sm.errors:  # read errors may be passing: measure again next run
        store.put_stem_set(key, stem_set.folder, sm.to_dict())
    return sm, False


def with_stem_sets(
    folders: Sequence[str],
    mix: str | None,
    profile,
    results: list[FileResult],
    options,
    options_key: str,
    store=None,
    fresh: bool = False,
    on_set=None,
    progress=None,
) -> list[FileResult]:
    """Set rows (one per folder), each followed by its stems' own rows, then the other rows.
    ``on_set(row, from_store)`` is called for each set row as it is judged. ``progress``
    (checker.run.progress.Progress): told which set is read and how far it has got."""
    from checker.stems.sets import evaluate_set, stem_set_from_folder

    by_path = {os.path.abspath(r.path): r for r in results}
    ordered, used = [], set()
    for number, folder in enumerate(folders, 1):
        stem_set = stem_set_from_folder(folder, mix)
        on_frames = None
        if progress is not None and progress.enabled:
            total_s = longest_declared_s(stem_set)
            on_frames = progress.set_started(number, len(folders), stem_set.name, total_s)
            on_frames = live.held(on_frames, live.HOLD_SET_ENV)
        sm, from_store = measure_stem_set(stem_set, options, options_key, store, fresh, on_frames)
        row = evaluate_set(sm, profile)
        if on_set is not None:
            on_set(row, from_store)
        ordered.append(row)
        for stem in stem_set.stem_paths:
            own = by_path.get(os.path.abspath(stem))
            if own is not None and id(own) not in used:
                used.add(id(own))
                ordered.append(dataclasses.replace(own, group=stem_set.name))
    return ordered + [r for r in results if id(r) not in used]
