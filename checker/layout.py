"""Channel layouts and BS.1770 channel weights.

BS.1770-4 (checked, see standards notes): weight 1.0 for L, R, C; 1.41 for a
channel with |elevation| < 30 deg and 60 <= |azimuth| <= 120 deg; 1.0 for every
other position (rear pairs near 135-150 deg, height channels); the LFE channel
is excluded (weight 0).

Default map by channel count (used when nothing better is known, reported as
"assumed"):

====  ==========================================
 1    M (mono)
 2    L R
 3    L R C
 4    L R Ls Rs
 5    L R C Ls Rs
 6    L R C LFE Ls Rs             (5.1, SMPTE / WAV order)
 7    L R C LFE Cs Ls Rs          (6.1: centre surround at 180 deg)
 8    L R C LFE Lrs Rrs Lss Rss   (7.1, WAV order: rear pair then side pair)
====  ==========================================

Other counts: every channel weight 1.0, reported as assumed ("N channels, all
weighted 1.0").
"""

from __future__ import annotations

from dataclasses import dataclass

#: Surround weight from BS.1770-4 Table 3 (10^(1.5/10) rounded as printed).
SURROUND_WEIGHT = 1.41


@dataclass(frozen=True)
class Speaker:
    label: str
    azimuth_deg: float | None  # None: LFE (no position)
    elevation_deg: float = 0.0

    @property
    def is_lfe(self) -> bool:
        return self.azimuth_deg is None

    @property
    def weight(self) -> float:
        if self.is_lfe:
            return 0.0
        az = abs(self.azimuth_deg)
        if abs(self.elevation_deg) < 30.0 and 60.0 <= az <= 120.0:
            return SURROUND_WEIGHT
        return 1.0


SPEAKERS: dict[str, Speaker] = {
    s.label: s
    for s in (
        Speaker("M", 0.0),
        Speaker("L", 30.0),
        Speaker("R", -30.0),
        Speaker("C", 0.0),
        Speaker("LFE", None),
        Speaker("Ls", 110.0),
        Speaker("Rs", -110.0),
        Speaker("Lrs", 150.0),
        Speaker("Rrs", -150.0),
        Speaker("Lss", 90.0),
        Speaker("Rss", -90.0),
        Speaker("Cs", 180.0),
        Speaker("Lc", 15.0),
        Speaker("Rc", -15.0),
        Speaker("Tc", 0.0, 90.0),
        Speaker("Tfl", 30.0, 45.0),
        Speaker("Tfc", 0.0, 45.0),
        Speaker("Tfr", -30.0, 45.0),
        Speaker("Tbl", 135.0, 45.0),
        Speaker("Tbc", 180.0, 45.0),
        Speaker("Tbr", -135.0, 45.0),
        Speaker("X", 0.0),  # unknown position: weight 1.0
    )
}

DEFAULT_MAPS: dict[int, tuple[str, ...]] = {
    1: ("M",),
    2: ("L", "R"),
    3: ("L", "R", "C"),
    4: ("L", "R", "Ls", "Rs"),
    5: ("L", "R", "C", "Ls", "Rs"),
    6: ("L", "R", "C", "LFE", "Ls", "Rs"),
    7: ("L", "R", "C", "LFE", "Cs", "Ls", "Rs"),
    8: ("L", "R", "C", "LFE", "Lrs", "Rrs", "Lss", "Rss"),
}


@dataclass(frozen=True)
class Layout:
    """Channel roles in file order, and where they came from."""

    labels: tuple[str, ...]
    source: str  # "assumed" | "mask" | "given"

    @property
    def weights(self) -> tuple[float, ...]:
        return tuple(SPEAKERS[label].weight for label in self.labels)

    @property
    def channels(self) -> int:
        return len(self.labels)

    @property
    def assumed(self) -> bool:
        return self.source == "assumed"

    def describe(self) -> str:
        """e.g. 'L R C LFE Ls Rs (assumed from 6 channels)'."""
        text = " ".join(self.labels)
        if self.source == "assumed":
            return f"{text} (assumed from {self.channels} channels)"
        if self.source == "mask":
            return f"{text} (from WAV channel mask)"
        return f"{text} (given)"


def default_layout(channels: int) -> Layout:
    if channels in DEFAULT_MAPS:
        return Layout(DEFAULT_MAPS[channels], "assumed")
    return Layout(("X",) * channels, "assumed")


def parse_layout(text: str, channels: int) -> Layout:
    """An explicit layout such as "L R C LFE Ls Rs" (space or comma separated)."""
    from checker.errors import UsageError

    labels = tuple(t for t in text.replace(",", " ").split() if t)
    unknown = [t for t in labels if t not in SPEAKERS]
    if unknown:
        raise UsageError(
            f"layout {text!r}: unknown channel label(s) {', '.join(unknown)} "
            f"(expected some of {', '.join(sorted(SPEAKERS))})"
        )
    if len(labels) != channels:
        raise UsageError(
            f"layout {text!r}: {len(labels)} labels for a {channels}-channel file "
            f"(expected {channels})"
        )
    return Layout(labels, "given")
