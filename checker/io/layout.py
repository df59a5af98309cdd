"""Channel layouts and BS.1770 channel weights.

BS.1770-4 (checked, see docs/standards.md): weight 1.0 for L, R, C; 1.41 for a
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


def layout_labels(text: str) -> tuple[str, ...]:
    """The labels of a layout text such as "L R C LFE Ls Rs" (space or comma separated)."""
    return tuple(t for t in text.replace(",", " ").split() if t)


def layout_count(text: str) -> int:
    return len(layout_labels(text))


def check_layout_text(text: str) -> tuple[str, ...]:
    """The labels of ``text``; UsageError when there are none or one is unknown."""
    from checker.model.errors import UsageError

    labels = layout_labels(text)
    unknown = [t for t in labels if t not in SPEAKERS]
    if unknown or not labels:
        raise UsageError(
            f"layout {text!r}: unknown channel label(s) {', '.join(unknown) or '(none given)'} "
            f"(expected some of {', '.join(sorted(SPEAKERS))})",
            parameter="layout",
        )
    return labels


def parse_layout(text: str, channels: int) -> Layout:
    """An explicit layout such as "L R C LFE Ls Rs" (space or comma separated)."""
    from checker.model.errors import UsageError

    labels = check_layout_text(text)
    if len(labels) != channels:
        raise UsageError(
            f"layout {text!r}: {len(labels)} labels for a {channels}-channel file "
            f"(expected {channels})",
            parameter="layout",
        )
    return Layout(labels, "given")


#: WAVE_FORMAT_EXTENSIBLE speaker bits (docs/standards.md, WAV details), in bit order.
#: "Back" and "side" pairs: when both are present (7.1, 0x63F) the back pair is the
#: rear pair at about 150 deg (weight 1.0) and the side pair sits at 90 deg (1.41).
#: When only one pair is present (5.1 as 0x3F or 0x60F, quad 0x33) that pair is the
#: 5.1 surround pair Ls/Rs at 110 deg (1.41), as in the default 5.1 map above.
MASK_BITS: tuple[str, ...] = (
    "FL", "FR", "FC", "LFE", "BL", "BR", "FLC", "FRC", "BC", "SL", "SR",
    "TC", "TFL", "TFC", "TFR", "TBL", "TBC", "TBR",
)  # fmt: skip
_MASK_LABELS = {
    "FL": "L", "FR": "R", "FC": "C", "LFE": "LFE", "FLC": "Lc", "FRC": "Rc", "BC": "Cs",
    "TC": "Tc", "TFL": "Tfl", "TFC": "Tfc", "TFR": "Tfr", "TBL": "Tbl", "TBC": "Tbc",
    "TBR": "Tbr",
}  # fmt: skip
_KNOWN_MASK = (1 << len(MASK_BITS)) - 1


def mask_problem(mask: int, channels: int) -> str | None:
    """Why ``mask`` cannot give the layout of a ``channels``-channel file (None if it can).

    A zero mask (no positions given) is not a problem, just no information.
    """
    if mask == 0:
        return None
    if mask & ~_KNOWN_MASK:
        return (
            f"channel mask 0x{mask:X} has bits outside the known speaker positions "
            f"(expected within 0x{_KNOWN_MASK:X}): layout assumed from the channel count"
        )
    bits = mask.bit_count()
    if bits != channels:
        return (
            f"channel mask 0x{mask:X} names {bits} speaker positions for {channels} channels: "
            "layout assumed from the channel count"
        )
    return None


def layout_from_mask(mask: int, channels: int) -> Layout | None:
    """The layout a WAVE_FORMAT_EXTENSIBLE channel mask gives, or None.

    Channels are interleaved in ascending bit order. None when the mask is 0,
    has unknown bits, or names a different number of positions than there are
    channels (see :func:`mask_problem` for the finding text).
    """
    if mask <= 0 or channels < 1 or mask_problem(mask, channels) is not None:
        return None
    names = [name for bit, name in enumerate(MASK_BITS) if mask >> bit & 1]
    has_back = "BL" in names or "BR" in names
    has_side = "SL" in names or "SR" in names
    pair = {
        "BL": "Lrs" if has_side else "Ls",
        "BR": "Rrs" if has_side else "Rs",
        "SL": "Lss" if has_back else "Ls",
        "SR": "Rss" if has_back else "Rs",
    }
    labels = tuple(_MASK_LABELS.get(name) or pair[name] for name in names)
    return Layout(labels, "mask")


def mask_disagreement(mask: int | None, given: Layout) -> list[str]:
    """A finding when the file's WAV channel mask names another order than the layout given."""
    if not mask:
        return []
    from_mask = layout_from_mask(mask, given.channels)
    if from_mask is None or from_mask.labels == given.labels:
        return []
    return [
        f"channel mask 0x{mask:X} says {' '.join(from_mask.labels)}, but the layout given is "
        f"{' '.join(given.labels)}: measured as given; check which one the file really carries"
    ]
