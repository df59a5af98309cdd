"""What one checked file (or one stem set) produces, and what the run was.

Workers return these as plain data; only the parent process writes the store
and the reports from them.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

from checker.model.measurement import Measurement
from checker.model.verdict import ERROR, Verdict

#: The status written in the reports for a file that is clearly not a deliverable.
NOT_CHECKED = "not checked"


@dataclass(frozen=True)
class FileResult:
    path: str
    status: str  # pass | warn | fail | error
    measurement: Measurement | None = None
    verdict: Verdict | None = None
    error: str | None = None  # one-line message when status == "error"
    kind: str = "file"  # "file" | "set" (a stem set's own row)
    group: str | None = None  # stem set name this row belongs to, if any

    @classmethod
    def failed(cls, path: str, message: str, kind: str = "file", group: str | None = None):
        return cls(path=path, status=ERROR, error=message, kind=kind, group=group)

    def to_dict(self, timeline: bool = False) -> dict[str, Any]:
        return {
            "path": self.path,
            "kind": self.kind,
            "group": self.group,
            "status": self.status,
            "error": self.error,
            "measurement": self.measurement.to_dict(timeline=timeline)
            if self.measurement
            else None,
            "verdict": self.verdict.to_dict() if self.verdict else None,
        }

    @classmethod
    def from_dict(cls, d: dict[str, Any]) -> FileResult:
        m = d.get("measurement")
        v = d.get("verdict")
        return cls(
            path=d["path"],
            status=d["status"],
            measurement=Measurement.from_dict(m) if m else None,
            verdict=Verdict.from_dict(v) if v else None,
            error=d.get("error"),
            kind=d.get("kind", "file"),
            group=d.get("group"),
        )


@dataclass(frozen=True)
class RunInfo:
    """Facts about one run, shown in report headers and kept in the store."""

    run_id: str
    started_at: str  # ISO 8601, UTC
    inputs: tuple[str, ...]  # the PATH arguments
    profile_name: str
    profile_title: str
    #: one dict per limit: {"key", "value", "unit", "severity", "source"} (Profile.limits_table())
    profile_limits: tuple[dict[str, Any], ...] = field(default_factory=tuple)
    engine_version: str = ""
    finished_at: str | None = None
    #: files under the inputs that are clearly not deliverables, each {"path", "reason"}:
    #: listed as "not checked" in every report (checker.io.discover)
    not_checked: tuple[dict[str, str], ...] = field(default_factory=tuple)
    #: how the profile judges mono files ("dual_mono" or "single_channel"; "" not recorded)
    mono_loudness: str = ""

    def to_dict(self) -> dict[str, Any]:
        return {
            "run_id": self.run_id,
            "started_at": self.started_at,
            "finished_at": self.finished_at,
            "inputs": list(self.inputs),
            "profile_name": self.profile_name,
            "profile_title": self.profile_title,
            "profile_limits": [dict(x) for x in self.profile_limits],
            "engine_version": self.engine_version,
            "not_checked": [dict(x) for x in self.not_checked],
            "mono_loudness": self.mono_loudness,
        }
