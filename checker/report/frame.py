"""Results -> tables with a stable column order (the shape of report.csv and flags.csv).

Column order of the per-file table (``file_columns``):

1. ``LEAD_COLUMNS``: path, kind, group, status, flag_count, flags (plain words), the gain
   advice (gain_to_target_db, predicted_true_peak_dbtp, predicted_noise_floor_dbfs,
   plain_gain_enough, advice), error, findings;
2. ``MEASUREMENT_COLUMNS``: every measurement key of the shared vocabulary, always present
   (empty when a file has no value), grouped as loudness, true peak, sample levels, silence,
   channels, bandwidth, stream format, WAV metadata, other loudness carriers, lossy stream;
3. any other measurement key (for example stem-set ``set_`` / ``sum_`` keys), sorted by name.

A table is a :class:`Table` (column names and rows of cells), not a pandas DataFrame: the
reports are the only users and pandas cost about 0.45 s of CPU to import on every ``check``
(README, Speed). Cells keep plain Python values: numbers stay numbers, ``None`` stays ``None``
(an empty cell), digital silence stays ``-inf``. Lists (per-channel values, times, channel pairs)
become text such as ``"-1.20; -3.40"``; a pair inside a list reads ``"(0, 1)"``.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Iterable, Iterator, Sequence
from dataclasses import dataclass
from typing import Any

from checker.io.carriers import CARRIER_KEYS
from checker.io.lossy import LOSSY_KEYS
from checker.model.results import NOT_CHECKED, FileResult, RunInfo
from checker.model.verdict import ERROR, STATUS_ORDER
from checker.profile.catalogue import BY_KEY
from checker.report.cells import (
    PER_CHANNEL_KEYS,
    channel_cells,
    channel_column,
    limit_cells,
    number,
    value_cell,
)

GAIN_COLUMNS: tuple[str, ...] = (
    "gain_to_target_db",
    "predicted_true_peak_dbtp",
    "predicted_noise_floor_dbfs",
    "plain_gain_enough",
    "advice",
)

LEAD_COLUMNS: tuple[str, ...] = (
    "path",
    "kind",
    "group",
    "status",
    "flag_count",
    "flags",
    *GAIN_COLUMNS,
    "error",
    "findings",
)

MEASUREMENT_COLUMNS: tuple[str, ...] = (
    # loudness (BS.1770 / EBU Tech 3342)
    "integrated_lufs",
    "integrated_dual_mono_lufs",
    "integrated_note",
    "loudness_range_lu",
    "loudness_range_note",
    "loudness_range_stable",
    "max_momentary_lufs",
    "max_momentary_time_s",
    "max_short_term_lufs",
    "max_short_term_time_s",
    # true peak
    "true_peak_dbtp",
    "true_peak_time_s",
    "true_peak_channel_dbtp",
    "true_peak_at_edge",
    "true_peak_oversampling",
    "true_peak_ceiling_dbtp",
    "true_peak_overs",
    "true_peak_over_times_s",
    # sample-domain levels
    "sample_peak_dbfs",
    "sample_peak_time_s",
    "sample_peak_channel_dbfs",
    "headroom_db",
    "dc_offset_dbfs",
    "dc_offset_percent",
    "dc_offset_channel_percent",
    "clipped_runs",
    "clipped_run_times_s",
    "clipped_runs_channel",
    "over_full_scale_samples",
    "effective_bits",
    "effective_bits_channel",
    "effective_bits_note",
    "rms_dbfs",
    "noise_floor_dbfs",
    "noise_floor_kind",
    "noise_floor_note",
    "footroom_db",
    "footroom_note",
    "nonfinite_samples",
    # silence
    "is_silent",
    "silence_threshold_dbfs",
    "leading_silence_s",
    "trailing_silence_s",
    "leading_digital_zero_s",
    "trailing_digital_zero_s",
    "dropouts",
    "dropout_times_s",
    "longest_dropout_s",
    "silence_note",
    # channels
    "silent_channels",
    "identical_channels",
    "inverted_channels",
    "min_correlation",
    "channel_correlations",
    "correlation_note",
    # bandwidth
    "effective_bandwidth_hz",
    "bandwidth_fraction",
    "steep_cutoff_hz",
    "faint_content_top_hz",
    "bandwidth_note",
    # stereo fold-down of multichannel files
    "downmix_method",
    "downmix_integrated_lufs",
    "downmix_max_short_term_lufs",
    "downmix_true_peak_dbtp",
    "downmix_true_peak_time_s",
    "downmix_sample_peak_dbfs",
    "downmix_sample_peak_time_s",
    "downmix_note",
    # programme span and parts (checker/analysis/span.py; present when asked for)
    "programme_start_s",
    "programme_end_s",
    "programme_span_source",
    "programme_span_note",
    "lineup_tone_hz",
    "lineup_tone_dbfs",
    "lineup_tone_s",
    "lineup_tone_note",
    "tail_tone_s",
    "file_integrated_lufs",
    "file_true_peak_dbtp",
    "file_sample_peak_dbfs",
    "true_peak_note",
    "parts_count",
    # stream format
    "container",
    "subtype",
    "sample_rate_hz",
    "channels",
    "format_bits",
    "frames",
    "frames_declared",
    "duration_s",
    "channel_layout",
    "layout_source",
    # WAV metadata
    "wav_format_tag",
    "channel_mask",
    "bext_version",
    "bext_time_reference_frames",
    "declared_integrated_lufs",
    "declared_loudness_range_lu",
    "declared_true_peak_dbtp",
    "declared_max_momentary_lufs",
    "declared_max_short_term_lufs",
    "header_findings",
    # other loudness carriers and lossy stream facts (checker.io.carriers, checker.io.lossy)
    *CARRIER_KEYS,
    *LOSSY_KEYS,
)

#: Measurement keys with a report file of their own (parts.csv), not a report.csv column.
OWN_FILE_KEYS: tuple[str, ...] = ("parts",)

FLAG_COLUMNS: tuple[str, ...] = (
    "path",
    "rule",
    "severity",
    "measured",
    "limit_low",
    "limit_high",
    "limit_text",
    "unit",
    "position_s",
    "message",
    "source",
)


def format_number(x: float | int) -> str:
    """A number inside a text cell: two decimals, more significant digits for tiny values."""
    if isinstance(x, bool):
        return "true" if x else "false"
    if isinstance(x, int):
        return str(x)
    x = float(x)
    if math.isnan(x):
        return ""
    if math.isinf(x):
        return "-inf" if x < 0 else "inf"
    if x == 0 or abs(x) >= 0.01:
        return f"{x:.2f}"
    return f"{x:.3g}"


def list_text(value: Sequence[Any]) -> str:
    """Per-channel lists, times and channel pairs as one readable text cell."""
    parts = []
    for item in value:
        if isinstance(item, (list, tuple)):
            parts.append("(" + ", ".join(_item_text(v) for v in item) + ")")
        else:
            parts.append(_item_text(item))
    return "; ".join(parts)


def _item_text(item: Any) -> str:
    if item is None:
        return ""
    if isinstance(item, (int, float)):
        return format_number(item)
    if isinstance(item, (list, tuple)):
        return list_text(item)
    return str(item)


def flags_text(result: FileResult) -> str:
    """Every flag of one file in plain words: ``"fail: <message> | warn: <message>"``."""
    if result.verdict is None:
        return ""
    return " | ".join(f"{f.severity}: {f.message}" for f in result.verdict.flags)


def sorted_results(results: Iterable[FileResult]) -> list[FileResult]:
    """Worst status first, then by path: the default order of every report."""
    return sorted(results, key=lambda r: (STATUS_ORDER.get(r.status, -1), r.path))


def own_channels(result: FileResult) -> int:
    """The most items of this file's per-channel lists (at least 1)."""
    most = 1
    if result.measurement is not None:
        for key in PER_CHANNEL_KEYS:
            value = result.measurement.values.get(key)
            if isinstance(value, (list, tuple)):
                most = max(most, len(value))
    return most


def channel_count(results: Sequence[FileResult]) -> int:
    """Columns per per-channel key: the most channels any file's lists hold (at least 1)."""
    return max((own_channels(r) for r in results), default=1)


def file_columns(results: Sequence[FileResult]) -> list[str]:
    known = set(LEAD_COLUMNS) | set(MEASUREMENT_COLUMNS) | set(OWN_FILE_KEYS)
    extra: set[str] = set()
    for r in results:
        if r.measurement is not None:
            extra.update(k for k in r.measurement.values if k not in known)
    count = channel_count(results)
    measured = []
    for key in MEASUREMENT_COLUMNS:
        if key in PER_CHANNEL_KEYS:
            measured.extend(channel_column(key, n + 1) for n in range(count))
        else:
            measured.append(key)
    return [*LEAD_COLUMNS, *measured, *sorted(extra)]


def csv_file_row(result: FileResult, channels: int) -> dict[str, Any]:
    """One report.csv row: numbers rounded by unit, per-channel lists in their own columns.
    Each cell is computed once (a measurement holds about 170 values; the parent builds this
    row for every file of a batch)."""
    verdict = result.verdict
    gain = verdict.gain if verdict is not None else None
    m = result.measurement
    row: dict[str, Any] = {
        "path": result.path,
        "kind": result.kind,
        "group": result.group,
        "status": result.status,
        "flag_count": len(verdict.flags) if verdict is not None else 0,
        "flags": flags_text(result),
        "error": result.error,
        "findings": "; ".join(m.findings) if m is not None and m.findings else None,
    }
    for key in GAIN_COLUMNS:
        row[key] = value_cell(key, getattr(gain, key)) if gain is not None else None
    if m is not None:
        for key, value in m.values.items():
            if key in _LEAD:  # a measurement key never replaces a lead column
                continue
            if key in _PER_CHANNEL:
                row.update(channel_cells(key, value, channels))
            else:
                row[key] = value_cell(key, value)
    return row


_LEAD = frozenset(LEAD_COLUMNS)
_PER_CHANNEL = frozenset(PER_CHANNEL_KEYS)


@dataclass(frozen=True)
class Table:
    """Rows of cells under named columns: what one CSV file holds (header, then the rows)."""

    columns: tuple[str, ...]
    rows: tuple[tuple[Any, ...], ...] = ()

    def __len__(self) -> int:
        return len(self.rows)

    def column(self, name: str) -> list[Any]:
        """The cells of one column, top to bottom."""
        i = self.columns.index(name)
        return [row[i] for row in self.rows]

    def records(self) -> Iterator[dict[str, Any]]:
        """Each row as {column: cell}."""
        for row in self.rows:
            yield dict(zip(self.columns, row, strict=True))

    def extended(self, other: Table) -> Table:
        """This table's rows, then ``other``'s (which has the same columns)."""
        if other.columns != self.columns:
            raise ValueError(
                f"Table.extended: columns = {other.columns[:3]}... (expected {self.columns[:3]}...)"
            )
        return Table(self.columns, self.rows + other.rows)


def object_frame(rows: list[dict[str, Any]], columns: Sequence[str]) -> Table:
    """A table of ``rows`` (dicts; a missing key is an empty cell) in the order of ``columns``.
    Cells are kept as they are: None stays None, ints stay ints."""
    columns = tuple(columns)
    return Table(columns, tuple(tuple(map(row.get, columns)) for row in rows))


def results_frame(
    results: Sequence[FileResult], row: Callable[[FileResult, int], dict] = csv_file_row
) -> Table:
    """One row per file (worst first), columns in the documented order (report.csv cells).
    ``row``: csv_file_row, or one that returns a row made earlier (checker.report.prepared)."""
    ordered = sorted_results(results)
    channels = channel_count(ordered)
    return object_frame([row(r, channels) for r in ordered], file_columns(ordered))


#: The rule name of a flags.csv row for a file that could not be checked.
ERROR_RULE = "not_checked"


def not_checked_frame(run: RunInfo, columns: Sequence[str]) -> Table:
    """One row per file that was not checked (``RunInfo.not_checked``), status "not checked",
    the reason in ``findings``; the other columns empty. Appended after the checked files."""
    rows = [
        {
            "path": x["path"],
            "kind": "file",
            "status": NOT_CHECKED,
            "flag_count": 0,
            "findings": x["reason"],
        }
        for x in run.not_checked
    ]
    return object_frame(rows, columns)


def flags_frame(results: Sequence[FileResult]) -> Table:
    """One row per flag, files in report order, flags in verdict order.

    A file that could not be checked (status error) has one row too, with rule
    ``not_checked``, severity ``error`` and the reason as the message, so a to-do list
    built from flags.csv includes the broken files.
    """
    rows = []
    for r in sorted_results(results):
        if r.error and (r.verdict is None or not r.verdict.flags or r.status == ERROR):
            rows.append(
                {
                    "path": r.path,
                    "rule": ERROR_RULE,
                    "severity": ERROR,
                    "limit_text": None,
                    "message": r.error,
                }
            )
        if r.verdict is None:
            continue
        for f in r.verdict.flags:
            key = BY_KEY[f.rule].measure if f.rule in BY_KEY else None
            key = key if isinstance(key, str) else None
            rows.append(
                {
                    "path": r.path,
                    "rule": f.rule,
                    "severity": f.severity,
                    "measured": value_cell(key or f"x_{f.unit.lower()}", f.measured),
                    **limit_cells(f.rule, f.limit, f.unit),
                    "unit": f.unit,
                    "position_s": number(f.position_s, "position_s"),
                    "message": f.message,
                    "source": f.source,
                }
            )
    return object_frame(rows, FLAG_COLUMNS)
