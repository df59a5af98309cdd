"""Loudness statements in a WAV file's XML chunks: ``iXML`` (the bext mirror and its loudness block)
and ``axml`` (ADM ``loudnessMetadata``, ITU-R BS.2076). Part of checker.io.carriers.

XML is parsed by ``xml.etree`` (expat) only after refusing any document type declaration (so no
entity can be declared, let alone expanded) and any document over ``MAX_XML_BYTES``. A malformed
chunk becomes a finding (plain words), never an exception.
"""

from __future__ import annotations

import math
import re
import xml.etree.ElementTree as ET
from typing import Any, BinaryIO

from checker.io.wavchunks import WavHeader

#: XML carriers larger than this are not parsed (a finding says so).
MAX_XML_BYTES = 8 * 1024 * 1024
#: iXML element names (upper case) -> quantity (from memory: iXML's bext mirror and its
#: loudness block; no published schema exists for iXML).
IXML_NAMES = {
    "BWF_LOUDNESS_VALUE": "integrated_lufs",
    "LOUDNESS_VALUE": "integrated_lufs",
    "BWF_LOUDNESS_RANGE": "loudness_range_lu",
    "LOUDNESS_RANGE": "loudness_range_lu",
    "BWF_MAX_TRUE_PEAK_LEVEL": "true_peak_dbtp",
    "MAX_TRUE_PEAK_LEVEL": "true_peak_dbtp",
    "BWF_MAX_MOMENTARY_LOUDNESS": "max_momentary_lufs",
    "MAX_MOMENTARY_LOUDNESS": "max_momentary_lufs",
    "BWF_MAX_SHORT_TERM_LOUDNESS": "max_short_term_lufs",
    "MAX_SHORT_TERM_LOUDNESS": "max_short_term_lufs",
}
#: ADM loudnessMetadata sub-elements (ITU-R BS.2076; EBU's ADM reference spells
#: "dialogLoudness") -> quantity.
ADM_NAMES = {
    "integratedLoudness": "integrated_lufs",
    "loudnessRange": "loudness_range_lu",
    "maxTruePeak": "true_peak_dbtp",
    "maxMomentary": "max_momentary_lufs",
    "maxShortTerm": "max_short_term_lufs",
    "dialogLoudness": "dialogue_lufs",
    "dialogueLoudness": "dialogue_lufs",
}
#: Plausible range of every declared value (dB or LU); outside it the value is refused.
PLAUSIBLE = (-200.0, 100.0)


def wav_xml(fh: BinaryIO, header: WavHeader, out, carriers, findings) -> None:
    for chunk in header.chunks:
        if chunk.chunk_id not in ("iXML", "axml"):
            continue
        where = f"'{chunk.chunk_id}' chunk at byte {chunk.offset}"
        if chunk.present > MAX_XML_BYTES:
            findings.append(f"{where} is {chunk.present} bytes (over {MAX_XML_BYTES}): not read")
            continue
        fh.seek(chunk.offset + 8)
        root = safe_xml(fh.read(chunk.present), where, findings)
        if root is None:
            continue
        if chunk.chunk_id == "iXML":
            found = _ixml_values(root, where, findings)
            prefix, name = "declared_ixml_", "ixml"
        else:
            found = _adm_values(root, where, findings)
            prefix, name = "declared_axml_", "axml"
        for q, v in found.items():
            if out.get(prefix + q) is None:
                out[prefix + q] = v
        if found and name not in carriers:
            carriers.append(name)


_DECL = re.compile(r"^\s*<\?xml[^>]*\?>", re.S)


def safe_xml(raw: bytes, where: str, findings: list[str]) -> ET.Element | None:
    """Parse ``raw`` as XML, refusing document type declarations (no entities at all)."""
    text = _decode(raw)
    if text is None:
        findings.append(f"{where}: not text in a Unicode encoding")
        return None
    text = text.rstrip("\x00 \t\r\n")
    if not text:
        findings.append(f"{where}: empty")
        return None
    if "<!DOCTYPE" in text.upper() or "<!ENTITY" in text.upper():
        findings.append(f"{where}: holds a document type declaration (refused: entities)")
        return None
    try:
        return ET.fromstring(_DECL.sub("", text, count=1))
    except ET.ParseError as exc:
        findings.append(f"{where}: not well-formed XML ({exc})")
        return None


def _decode(raw: bytes) -> str | None:
    if raw.startswith((b"\xff\xfe", b"\xfe\xff")):
        codec = "utf-16"
    elif len(raw) > 1 and raw[0] == 0 and raw[1] != 0:
        codec = "utf-16-be"
    elif len(raw) > 1 and raw[1] == 0 and raw[0] != 0:
        codec = "utf-16-le"
    else:
        codec = "utf-8-sig"
    try:
        return raw.decode(codec)
    except UnicodeDecodeError:
        return None


def _local(tag: Any) -> str:
    return tag.rpartition("}")[2] if isinstance(tag, str) else ""


def plausible_number(text: str | None, where: str, findings: list[str]) -> float | None:
    s = (text or "").strip()
    if not s:
        return None
    try:
        v = float(s)
    except ValueError:
        findings.append(f"{where} = {s[:40]!r} (expected a number)")
        return None
    if not math.isfinite(v) or not PLAUSIBLE[0] <= v <= PLAUSIBLE[1]:
        findings.append(f"{where} = {s[:40]} (expected a level between -200 and 100)")
        return None
    return v


def _ixml_values(root: ET.Element, where: str, findings: list[str]) -> dict[str, float]:
    found: dict[str, float] = {}
    for el in root.iter():
        q = IXML_NAMES.get(_local(el.tag).upper())
        if q is None or q in found:
            continue
        v = plausible_number(el.text, f"{where}: {_local(el.tag)}", findings)
        if v is not None:
            found[q] = v
    return found


def _adm_values(root: ET.Element, where: str, findings: list[str]) -> dict[str, float]:
    """The programme's loudnessMetadata (inside audioProgramme), else the first one."""
    blocks: list[tuple[bool, ET.Element]] = []
    for parent in root.iter():
        for child in parent:
            if _local(child.tag) == "loudnessMetadata":
                blocks.append((_local(parent.tag) == "audioProgramme", child))
    if not blocks:
        return {}
    chosen = next((b for is_prog, b in blocks if is_prog), blocks[0][1])
    if len(blocks) > 1:
        findings.append(
            f"{where}: {len(blocks)} loudnessMetadata elements; the "
            f"{'programme' if any(p for p, _ in blocks) else 'first'} one is reported"
        )
    found: dict[str, float] = {}
    for el in chosen:
        q = ADM_NAMES.get(_local(el.tag))
        if q is not None and q not in found:
            v = plausible_number(el.text, f"{where}: {_local(el.tag)}", findings)
            if v is not None:
                found[q] = v
    return found
