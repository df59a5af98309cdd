"""Verdict types: what rules produce and what batch, store and reports consume.

Plain frozen dataclasses of plain data, so they pickle across processes and
serialise to JSON/SQLite without custom code.
"""

from __future__ import annotations

from dataclasses import asdict, dataclass, field
from typing import Any

PASS = "pass"
WARN = "warn"
FAIL = "fail"
ERROR = "error"

#: Worst first: the order reports sort by and exit codes follow.
STATUS_ORDER = {ERROR: 0, FAIL: 1, WARN: 2, PASS: 3}


@dataclass(frozen=True)
class Flag:
    """One violated (or unmeasurable) limit."""

    rule: str  # rule id, e.g. "integrated_lufs" or "true_peak_max_dbtp"
    severity: str  # "fail" | "warn"
    measured: Any  # float, int, str, list or None ("could not be measured")
    limit: Any  # the limit, e.g. -1.0 or "-24.0 +- 1.0" or [44100, 48000]
    unit: str  # "LUFS", "LU", "dBTP", "dBFS", "dB", "s", "Hz", "" ...
    message: str  # plain words: what is wrong and what to do
    position_s: float | None = None  # where in the file, when one place is meant
    source: str = ""  # the standard and clause (or "common practice") behind the limit

    def to_dict(self) -> dict[str, Any]:
        return asdict(self)

    @classmethod
    def from_dict(cls, d: dict[str, Any]) -> Flag:
        return cls(**d)


@dataclass(frozen=True)
class GainAdvice:
    """What plain gain would reach the loudness target, and what it would break."""

    gain_to_target_db: float | None
    predicted_true_peak_dbtp: float | None
    predicted_noise_floor_dbfs: float | None
    plain_gain_enough: bool | None
    advice: str

    def to_dict(self) -> dict[str, Any]:
        return asdict(self)

    @classmethod
    def from_dict(cls, d: dict[str, Any] | None) -> GainAdvice | None:
        return cls(**d) if d else None


@dataclass(frozen=True)
class Verdict:
    status: str  # pass | warn | fail | error
    flags: tuple[Flag, ...] = field(default_factory=tuple)
    gain: GainAdvice | None = None

    def to_dict(self) -> dict[str, Any]:
        return {
            "status": self.status,
            "flags": [f.to_dict() for f in self.flags],
            "gain": self.gain.to_dict() if self.gain else None,
        }

    @classmethod
    def from_dict(cls, d: dict[str, Any]) -> Verdict:
        return cls(
            status=d["status"],
            flags=tuple(Flag.from_dict(f) for f in d.get("flags", ())),
            gain=GainAdvice.from_dict(d.get("gain")),
        )


def worst_status(statuses) -> str:
    statuses = list(statuses)
    if not statuses:
        return PASS
    return min(statuses, key=lambda s: STATUS_ORDER[s])
