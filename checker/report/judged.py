"""The value a report row shows for each column: what was judged, not always what was measured.

A mono file under a profile that judges mono as dual mono shows the dual-mono loudness under
Integrated; a stem set's row shows what was measured on the stems' sum under the file columns.
Shared by the HTML table and the batch chart so both show the same number.
"""

from __future__ import annotations

import math
from typing import Any

from checker.model.results import FileResult

#: A stem set's row shows, under the file columns, what was measured on the stems' sum.
SET_SUM_CELLS: dict[str, str] = {
    "integrated_lufs": "sum_integrated_lufs",
    "true_peak_dbtp": "sum_true_peak_dbtp",
    "sample_peak_dbfs": "sum_sample_peak_dbfs",
}


def judged_as_dual_mono(values: dict[str, Any], mono_loudness: str) -> bool:
    """A mono file under a profile that judges mono as if played on both stereo channels."""
    return (
        mono_loudness == "dual_mono"
        and values.get("channels") == 1
        and isinstance(values.get("integrated_dual_mono_lufs"), int | float)
        and not isinstance(values.get("integrated_dual_mono_lufs"), bool)
        and not math.isnan(values["integrated_dual_mono_lufs"])
    )


def cell_values(r: FileResult, mono_loudness: str = "") -> dict[str, Any]:
    """The values a table row shows: a file's own (a mono file judged as dual mono shows
    the judged value under Integrated); for a stem set, the sum's under the file columns
    (SET_SUM_CELLS), its other set values as they are."""
    values = r.measurement.values if r.measurement else {}
    if r.kind != "set":
        if judged_as_dual_mono(values, mono_loudness):
            return {**values, "integrated_lufs": values["integrated_dual_mono_lufs"]}
        return values
    return {**values, **{cell: values.get(key) for cell, key in SET_SUM_CELLS.items()}}
