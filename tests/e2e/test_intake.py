"""Intake: every file under the inputs is accounted for, names are bytes-safe, and the
store's identity notices a same-size rewrite. Each item of corpus.INTAKE has its explicit
outcome here; the batch test mixes them all with good files.

Sources: file signatures are the formats' own (RIFF/WAVE: Microsoft RIFF spec; FORM/AIFF:
Apple AIFF 1.3; "fLaC": FLAC format; "OggS": RFC 3533; ".snd": Sun AU; "caff": Apple CAF;
"ftyp": ISO/IEC 14496-12; AppleDouble: RFC 1740); MPEG frame header layout: ISO/IEC 11172-3.
"""

from __future__ import annotations

import io
import json
import os
import zipfile
from pathlib import Path

import numpy as np
import pytest
import soundfile as sf
from corpus import INTAKE, M4A_HEAD, png_bytes, sine_pcm16, wav_bytes
from signals import sine, write

from checker.cli.main import main
from checker.io.discover import discover
from checker.io.intake import MEASURE, NOT_CHECKED, REFUSE, classify
from checker.io.sniff import NOT_AUDIO, READABLE, UNKNOWN, UNSUPPORTED, sniff
from checker.model.names import for_terminal, readable
from checker.run.batch import capped_jobs, run_batch
from checker.run.store import open_store
from checker.run.workers import usable_cores
from checker.stems.sets import check_stem_set, stem_set_from_folder

UNSUPPORTED_M4A = (
    "unsupported container: MP4/M4A/MOV (ISO media, e.g. AAC or ALAC), which this checker "
    "cannot decode (expected WAV, AIFF, FLAC, W64, RF64, CAF, AU, Ogg or MP3: export or "
    "convert to one)"
)


def _partial(suffix: str) -> str:
    return (
        f"unfinished transfer: the name ends in '{suffix}' (a copy or download that has not "
        "finished; its start looks like WAV); wait for it to complete and check the whole file"
    )


#: corpus.INTAKE item -> (outcome, reason or name remark). The expected behaviour, one per case.
EXPECTED = {
    "wav_no_extension": (MEASURE, "the file name has no extension; its content is WAV"),
    "wav_trailing_space": (
        MEASURE,
        "the file name begins or ends with white space ('final.wav '); receivers may not find it",
    ),
    "wav_wrong_extension": (
        MEASURE,
        "the file name ends in '.dat', not an audio extension; its content is WAV",
    ),
    "wav_bwf_extension": (MEASURE, ""),
    "wav_part": (REFUSE, _partial(".part")),
    "wav_crdownload": (REFUSE, _partial(".crdownload")),
    "wav_non_utf8_name": (MEASURE, ""),
    "wav_escape_sequence_name": (MEASURE, ""),
    "m4a": (REFUSE, UNSUPPORTED_M4A),
    "m4a_renamed_wav": (REFUSE, UNSUPPORTED_M4A),
    "text_as_wav": (REFUSE, "named like audio ('.wav') but its content is text, not audio"),
    "unknown_binary": (
        REFUSE,
        "not audio: the content matches no audio format (no known signature) and the name "
        "ends in '.bin'",
    ),
    "text": (NOT_CHECKED, "text"),
    "image": (NOT_CHECKED, "PNG image"),
    "resource_fork": (NOT_CHECKED, "macOS resource fork ('._' file written beside a copied file)"),
    "ds_store": (NOT_CHECKED, "folder settings of the operating system"),
    "peak_sidecar": (NOT_CHECKED, "waveform or analysis sidecar of an audio editor"),
    "empty_no_extension": (NOT_CHECKED, "empty file (0 bytes)"),
}


def test_every_intake_item_has_an_expected_outcome():
    assert set(EXPECTED) == set(INTAKE)


@pytest.mark.parametrize("name", sorted(INTAKE))
def test_each_item_is_classified_as_expected(tmp_path, name):
    path = INTAKE[name](tmp_path)
    intake = classify(str(path))
    assert (intake.outcome, intake.reason) == EXPECTED[name]


# --- Content sniffing ---------------------------------------------------------------------


def _sf_bytes(fmt: str, subtype: str | None = None) -> bytes:
    buf = io.BytesIO()
    x = np.zeros((4800, 1))
    sf.write(buf, x, 48_000, format=fmt, subtype=subtype)
    return buf.getvalue()


def _zip_bytes() -> bytes:
    buf = io.BytesIO()
    with zipfile.ZipFile(buf, "w") as z:
        z.writestr("a.txt", "x")
    return buf.getvalue()


# MPEG-1 layer III frame header: sync 0xFFF, version 11 (MPEG-1), layer 01 (III), no CRC,
# bit-rate index 9 (128 kbit/s), sample-rate index 0 (44.1 kHz): FF FB 90 00 (ISO/IEC 11172-3).
MP3_FRAME = b"\xff\xfb\x90\x00" + bytes(60)
# ADTS (AAC): sync 0xFFF, layer 00: FF F1 (ISO/IEC 13818-7).
ADTS_FRAME = b"\xff\xf1\x50\x80" + bytes(60)

SIGNATURES = [
    ("WAV", lambda: _sf_bytes("WAV"), READABLE, "WAV"),
    ("AIFF", lambda: _sf_bytes("AIFF"), READABLE, "AIFF"),
    ("FLAC", lambda: _sf_bytes("FLAC"), READABLE, "FLAC"),
    ("OGG", lambda: _sf_bytes("OGG", "VORBIS"), READABLE, "Ogg (Vorbis, Opus or FLAC)"),
    ("CAF", lambda: _sf_bytes("CAF"), READABLE, "CAF"),
    ("AU", lambda: _sf_bytes("AU"), READABLE, "AU/SND"),
    ("W64", lambda: _sf_bytes("W64"), READABLE, "W64"),
    ("RF64", lambda: _sf_bytes("RF64"), READABLE, "RF64"),
    ("mp3 frame", lambda: MP3_FRAME, READABLE, "MPEG audio layer 3"),
    (
        "mp3 after ID3",
        lambda: b"ID3\x04\x00\x00\x00\x00\x00\x05" + bytes(5) + MP3_FRAME,
        READABLE,
        "MPEG audio layer 3",
    ),
    ("m4a", lambda: M4A_HEAD, UNSUPPORTED, "MP4/M4A/MOV (ISO media, e.g. AAC or ALAC)"),
    ("adts", lambda: ADTS_FRAME, UNSUPPORTED, "AAC (ADTS)"),
    ("wavpack", lambda: b"wvpk" + bytes(28), UNSUPPORTED, "WavPack"),
    ("png", png_bytes, NOT_AUDIO, "PNG image"),
    ("zip", _zip_bytes, NOT_AUDIO, "ZIP archive (or an office document)"),
    ("pdf", lambda: b"%PDF-1.4\n%\xe2\xe3\xcf\xd3\n", NOT_AUDIO, "PDF document"),
    ("utf-8 text", lambda: "Tracklist – café\n".encode(), NOT_AUDIO, "text"),
    ("utf-16 text", lambda: "\ufeffTracklist\n".encode("utf-16-le"), NOT_AUDIO, "text"),
    ("binary", lambda: bytes(range(256)), UNKNOWN, "no known signature"),
]


@pytest.mark.parametrize(
    ("label", "make", "kind", "name"), SIGNATURES, ids=[s[0] for s in SIGNATURES]
)
def test_sniff_names_each_signature(label, make, kind, name):
    found = sniff(make())
    assert (found.kind, found.name) == (kind, name), label


def test_a_text_file_named_on_the_command_line_is_refused_not_skipped(tmp_path):
    path = INTAKE["text"](tmp_path)
    assert classify(str(path)).outcome == NOT_CHECKED
    assert (classify(str(path), named=True).outcome, classify(str(path), named=True).reason) == (
        REFUSE,
        "not audio: text",
    )


# --- The batch: every file accounted for, in every report ------------------------------------


def _mixed_folder(root: Path) -> tuple[list[Path], dict[str, Path]]:
    root.mkdir()
    good = [root / "ep01.wav", root / "sub" / "ep02.flac"]
    good[1].parent.mkdir()
    write(good[0], sine(1000.0, -20.0, 0.5), subtype="PCM_16")
    write(good[1], sine(1000.0, -20.0, 0.5), subtype="PCM_16")
    items = {name: make(root) for name, make in INTAKE.items()}
    return good, items


def test_a_mixed_batch_measures_every_good_file_and_names_every_other(tmp_path):
    good, items = _mixed_folder(tmp_path / "in")
    out = tmp_path / "out"
    stdout, stderr = io.StringIO(), io.StringIO()
    code = main(
        ["check", str(tmp_path / "in"), "--profile", "measure-only", "--out", str(out), "--quiet"],
        out=stdout,
        err=stderr,
    )
    # errors.py: 3 = at least one file could not be checked (the .m4a, the .part, ...).
    assert code == 3, stderr.getvalue()
    assert "internal error" not in stderr.getvalue()

    rows = [json.loads(line) for line in (out / "results.jsonl").read_text().splitlines()]
    by_path = {row["path"]: row for row in rows}
    shown = {name: readable(str(p)) for name, p in items.items()}
    assert len(rows) == len(good) + len(items)  # every file once, nothing dropped
    for p in good:
        assert by_path[str(p)]["measurement"] is not None and by_path[str(p)]["status"] == "pass"
    for name, (outcome, reason) in EXPECTED.items():
        row = by_path[shown[name]]
        if outcome == MEASURE:
            assert row["status"] == "pass" and row["measurement"]["frames"] == 24_000, name
            assert row["measurement"]["findings"] == ([reason] if reason else []), name
        elif outcome == REFUSE:
            assert (row["status"], row["error"]) == ("error", f"{shown[name]}: {reason}"), name
        else:
            assert (row["status"], row["reason"], row["measurement"]) == (
                "not checked",
                reason,
                None,
            ), name

    # report.csv: one row per file, the not-checked ones with their reason in "findings".
    import csv

    with open(out / "report.csv", newline="", encoding="utf-8") as fh:
        csv_rows = {r["path"]: r for r in csv.DictReader(fh)}
    assert len(csv_rows) == len(rows)
    for name, (outcome, reason) in EXPECTED.items():
        if outcome == NOT_CHECKED:
            assert csv_rows[shown[name]]["status"] == "not checked"
            assert csv_rows[shown[name]]["findings"] == reason

    # report.html: a "Not checked" section listing each such file and its reason.
    from html import escape

    page = (out / "report.html").read_text(encoding="utf-8")
    not_checked = [n for n, (o, _) in EXPECTED.items() if o == NOT_CHECKED]
    assert f"Not checked ({len(not_checked)} files)" in page
    for name in not_checked:
        assert escape(shown[name]) in page and escape(EXPECTED[name][1]) in page

    # Console: the three groups counted, not-checked files listed, nothing raw reaches the terminal.
    text = stdout.getvalue()
    measured = len(good) + sum(1 for o, _ in EXPECTED.values() if o == MEASURE)
    refused = sum(1 for o, _ in EXPECTED.values() if o == REFUSE)
    assert (
        f"files found: {len(rows)}: {measured} measured, {refused} error (not measured), "
        f"{len(not_checked)} not checked"
    ) in text
    for name in not_checked:
        assert for_terminal(shown[name]) in text
    assert "\x1b" not in text and "\x1b" not in stderr.getvalue()
    assert "x\\x1b[2K\\x1b[32mok\\x1b[0m.wav" in for_terminal(shown["wav_escape_sequence_name"])


def test_a_non_utf8_name_gets_its_own_row_and_resumes_from_the_store(tmp_path):
    src = tmp_path / "in"
    src.mkdir()
    odd = INTAKE["wav_non_utf8_name"](src)
    write(src / "plain.wav", sine(1000.0, -20.0, 0.5), subtype="PCM_16")
    out = tmp_path / "out"
    argv = ["check", str(src), "--profile", "measure-only", "--out", str(out), "--quiet"]
    for _ in range(2):  # the second run reads nothing: both come from the store
        stdout, stderr = io.StringIO(), io.StringIO()
        assert main(argv, out=stdout, err=stderr) == 0, stderr.getvalue()
    name = f"{src}/caf\\xe9-latin1.wav"  # the byte 0xE9 (Latin-1 e-acute) written \xe9
    assert readable(str(odd)) == name
    rows = [json.loads(line) for line in (out / "results.jsonl").read_text().splitlines()]
    assert sorted(r["path"] for r in rows) == sorted([name, str(src / "plain.wav")])
    with open_store(out) as store:
        assert store.measurement_attempts() == {name: 1, str(src / "plain.wav"): 1}


def test_names_are_made_readable_and_terminal_safe():
    # surrogate escapes are how Python carries undecodable bytes of a POSIX name (PEP 383)
    assert readable("a\udce9b") == "a\\xe9b"
    assert readable("plain ✓.wav") == "plain ✓.wav"
    assert for_terminal("a\x1b[31mb\rc\u202ed\x7f") == "a\\x1b[31mb\\x0dc\\u202ed\\x7f"
    assert for_terminal(for_terminal("\x1b")) == "\\x1b"  # applying it twice changes nothing


# --- Stem sets: one decision of what is audio (issue: a .bwf stem left out of the sum) --------


def test_a_clipping_stem_renamed_bwf_is_in_the_sum(tmp_path):
    folder = tmp_path / "song"
    folder.mkdir()
    t = np.arange(4800) / 48_000
    x = (0.6 * np.sin(2 * np.pi * 1000.0 * t))[:, None]
    write(folder / "a_drums.wav", x, subtype="PCM_24")
    write(folder / "b_bass.bwf", x, subtype="PCM_24", format="WAV")
    stem_set = stem_set_from_folder(str(folder))
    assert [os.path.basename(p) for p in stem_set.stem_paths] == ["a_drums.wav", "b_bass.bwf"]
    assert [p for p in discover([str(folder)]).files] == list(stem_set.stem_paths)
    values = check_stem_set(list(stem_set.stem_paths), None).values
    # arithmetic: two in-phase sines of amplitude 0.6 sum to a crest of 1.2 = 20 log10(1.2) dBFS
    np.testing.assert_allclose(
        values["sum_sample_peak_dbfs"], 20 * np.log10(1.2), rtol=0, atol=1e-6
    )
    stdout, stderr = io.StringIO(), io.StringIO()
    argv = ["check", str(folder), "--profile", "mastering-stems", "--out", str(tmp_path / "o")]
    code = main([*argv, "--quiet"], out=stdout, err=stderr)
    rows = [json.loads(x) for x in (tmp_path / "o" / "results.jsonl").read_text().splitlines()]
    [set_row] = [r for r in rows if r["kind"] == "set"]
    rules = {f["rule"] for f in set_row["verdict"]["flags"]}
    # shipped mastering-stems: the sum's sample peak at most 0 dBFS (common practice)
    assert code == 1 and set_row["status"] == "fail" and "sum_sample_peak_max_dbfs" in rules


# --- Jobs and identity --------------------------------------------------------------------------


class _StubProfile:
    name, title = "stub", "Stub"

    def limits_table(self):
        return []


def _pass(m, profile):
    from checker.model.verdict import PASS, Verdict

    return Verdict(status=PASS, flags=())


def test_jobs_above_the_cores_are_capped_with_a_note(tmp_path, monkeypatch):
    notes = []
    assert capped_jobs(10_000, notes.append) == usable_cores()
    assert notes == [
        f"jobs = 10000 capped to {usable_cores()}, the usable cores "
        "(more worker processes than cores do not help)"
    ]
    assert capped_jobs(1, notes.append) == 1 and len(notes) == 1
    started = []
    import checker.run.batch as batch

    real = batch.LocalPool

    def pool(workers, **kwargs):
        started.append(workers)
        return real(workers, **kwargs)

    monkeypatch.setattr(batch, "LocalPool", pool)
    src = tmp_path / "in"
    src.mkdir()
    for i in range(usable_cores() + 2):
        write(src / f"f{i}.wav", sine(1000.0, -20.0, 0.2), subtype="PCM_16")
    seen = []
    run_batch(
        [src], _StubProfile(), tmp_path / "out", jobs=10_000, evaluate=_pass, on_note=seen.append
    )
    assert started == [usable_cores()] and len(seen) == 1


def test_a_same_size_rewrite_with_the_old_mtime_is_measured_again(tmp_path):
    src = tmp_path / "in"
    src.mkdir()
    path = src / "a.wav"
    path.write_bytes(wav_bytes(sine_pcm16(0.5)))
    st = os.stat(path)
    out = tmp_path / "out"
    _, first = run_batch([src], _StubProfile(), out, jobs=1, evaluate=_pass)
    # Same size, other samples (silence), and the old modification time put back.
    path.write_bytes(wav_bytes(bytes(len(sine_pcm16(0.5)))))
    os.utime(path, ns=(st.st_atime_ns, st.st_mtime_ns))
    assert os.stat(path).st_size == st.st_size and os.stat(path).st_mtime_ns == st.st_mtime_ns
    _, second = run_batch([src], _StubProfile(), out, jobs=1, evaluate=_pass)
    # the 1 kHz sine at -20 dBFS (0.1 peak, corpus.sine_pcm16) vs digital silence (-inf)
    assert first[0].measurement.get("sample_peak_dbfs") > -21
    assert second[0].measurement.get("sample_peak_dbfs") == float("-inf")
    with open_store(out) as store:
        assert store.measurement_attempts() == {str(path): 2}
    # Unchanged since: the third run reads nothing.
    run_batch([src], _StubProfile(), out, jobs=1, evaluate=_pass)
    with open_store(out) as store:
        assert store.measurement_attempts() == {str(path): 2}


def test_a_schema_2_store_gains_ctime_and_measures_its_files_once_more(tmp_path):
    src = tmp_path / "in"
    src.mkdir()
    write(src / "a.wav", sine(1000.0, -20.0, 0.2), subtype="PCM_16")
    out = tmp_path / "out"
    run_batch([src], _StubProfile(), out, jobs=1, evaluate=_pass)
    with open_store(out) as store:  # make it look like schema 2: no ctime_ns column
        db = store.db
        for table in ("measurements", "errors"):
            db.execute(f"ALTER TABLE {table} DROP COLUMN ctime_ns")
        db.execute("UPDATE meta SET value='2' WHERE key='schema_version'")
    run_batch([src], _StubProfile(), out, jobs=1, evaluate=_pass)  # old row: no ctime, again
    run_batch([src], _StubProfile(), out, jobs=1, evaluate=_pass)  # now served from the store
    with open_store(out) as store:
        assert store.schema_version() == 3
        assert store.measurement_attempts() == {str(src / "a.wav"): 2}
        assert store.counts()["runs"] == 3


def test_measure_prints_odd_names_readable_and_inert(tmp_path):
    odd = INTAKE["wav_non_utf8_name"](tmp_path)
    esc = INTAKE["wav_escape_sequence_name"](tmp_path)
    stdout, stderr = io.StringIO(), io.StringIO()
    assert main(["measure", str(odd), str(esc)], out=stdout, err=stderr) == 0, stderr.getvalue()
    lines = stdout.getvalue().splitlines()
    assert f"{tmp_path}/caf\\xe9-latin1.wav" in lines
    assert f"{tmp_path}/x\\x1b[2K\\x1b[32mok\\x1b[0m.wav" in lines
    assert "\x1b" not in stdout.getvalue()
    stdout = io.StringIO()
    assert main(["measure", "--json", str(odd)], out=stdout, err=stderr) == 0
    assert json.loads(stdout.getvalue())["path"] == f"{tmp_path}/caf\\xe9-latin1.wav"


def test_audio_after_a_long_id3_tag_is_still_recognised(tmp_path):
    # ID3v2: "ID3", version 4.0, flags 0, size 20000 as four 7-bit syncsafe bytes, then the
    # tag body (cover art makes it large), then the first frame (here: "fLaC").
    size = 20_000
    header = b"ID3\x04\x00\x00" + bytes(
        (size >> 21 & 0x7F, size >> 14 & 0x7F, size >> 7 & 0x7F, size & 0x7F)
    )
    (tmp_path / "cover.flac").write_bytes(header + bytes(size) + b"fLaC" + bytes(60))
    intake = classify(str(tmp_path / "cover.flac"))
    assert (intake.outcome, intake.content) == (MEASURE, "FLAC (after an ID3 tag)")
