"""The record of one measured file: flat, unit-suffixed values (plain data, no I/O)."""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

from checker.model.timeline import Timeline
from checker.model.version import ENGINE_VERSION

__all__ = ["ENGINE_VERSION", "FlatValues", "Measurement"]


class FlatValues:
    """Read access to a ``values`` dict of flat, unit-suffixed keys: ``m.integrated_lufs``,
    ``m.get("true_peak_dbtp")``. Shared by Measurement and a stem set's SetMeasurement."""

    values: dict[str, Any]

    def __getattr__(self, name: str) -> Any:
        values = self.__dict__.get("values")
        if values is not None and name in values:
            return values[name]
        raise AttributeError(name)

    def get(self, name: str, default: Any = None) -> Any:
        return self.values.get(name, default)


@dataclass(frozen=True)
class Measurement(FlatValues):
    """Everything measured about one file, as flat unit-suffixed values.

    ``values`` holds plain data only (str, int, float, bool, None, lists), so a
    Measurement pickles cheaply across processes and round-trips through JSON
    and SQLite. Attribute access reads values: ``m.integrated_lufs``.
    """

    path: str
    values: dict[str, Any]
    timeline: Timeline | None = None
    findings: tuple[str, ...] = field(default_factory=tuple)
    engine_version: str = ENGINE_VERSION

    def to_dict(self, timeline: bool = False) -> dict[str, Any]:
        d: dict[str, Any] = {"path": self.path, **self.values}
        d["findings"] = list(self.findings)
        d["engine_version"] = self.engine_version
        if timeline:
            d["timeline"] = self.timeline.to_dict() if self.timeline else None
        return d

    @classmethod
    def from_dict(cls, d: dict[str, Any]) -> Measurement:
        d = dict(d)
        path = d.pop("path")
        findings = tuple(d.pop("findings", ()) or ())
        engine = d.pop("engine_version", ENGINE_VERSION)
        timeline = Timeline.from_dict(d.pop("timeline", None))
        return cls(path=path, values=d, timeline=timeline, findings=findings, engine_version=engine)
