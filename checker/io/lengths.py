"""What a container declares about its length (``ContainerLength``), shared by the readers in
``containers`` (AIFF, W64, AU, CAF) and ``streamlength`` (FLAC, Ogg)."""

from __future__ import annotations

from dataclasses import dataclass

#: Words of the findings that say the file ends early (ContainerLength.cut looks for them).
TRUNCATED = "the file is truncated"
CUT_SHORT = "the stream is cut short"


@dataclass(frozen=True)
class ContainerLength:
    """What a container's header says about its length."""

    kind: str  # "AIFF", "W64", "AU", "CAF", "FLAC", "OGG"
    frames_declared: int | None
    findings: tuple[str, ...] = ()
    #: FLAC only: frames the file holds by its last frame header (first sample + block
    #: size), None when no valid frame header was found near the end.
    frames_held: int | None = None
    #: The rate ``frames_declared`` counts in when it is not the stream's (Opus: 48 kHz).
    units_hz: int | None = None

    @property
    def cut(self) -> bool:
        """The file ends early: a chunk or page runs past its end, or the last Ogg page is
        not the end of the stream."""
        return any(TRUNCATED in f or CUT_SHORT in f for f in self.findings)

    def declared_at(self, rate_hz: int) -> int | None:
        """``frames_declared`` in frames at ``rate_hz``."""
        if self.frames_declared is None or self.units_hz in (None, rate_hz):
            return self.frames_declared
        return self.frames_declared * rate_hz // self.units_hz
