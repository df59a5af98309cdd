"""Profiles: every shipped profile loads and carries the published numbers; errors name
file, key, value and expectation; extends inherits then overrides; the CLI subcommand."""

from __future__ import annotations

import io
from pathlib import Path

import pytest
from numpy.testing import assert_allclose

from checker.cli.main import main
from checker.model.errors import EXIT_OK, EXIT_USAGE, ProfileError
from checker.profile.load import BUILTIN_DIR, list_profiles, load_profile, validate_profile_file

SHIPPED = sorted(p.stem for p in BUILTIN_DIR.glob("*.toml"))


def write(tmp_path: Path, name: str, text: str) -> Path:
    path = tmp_path / name
    path.write_text(text, encoding="utf-8")
    return path


# ---------------------------------------------------------------- shipped profiles


def test_the_issue_list_of_profiles_is_shipped():
    assert set(SHIPPED) >= {
        "ebu-r128",
        "ebu-r128-live",
        "ebu-r128-s1",
        "atsc-a85",
        "free-tv-op59",
        "arib-tr-b32",
        "aes-td1004",
        "aes-td1008",
        "podcast-stereo",
        "podcast-mono",
        "audiobook-chapter",
        "mastering-stems",
        "measure-only",
    }
    assert [p.name for p in list_profiles()] == SHIPPED


@pytest.mark.parametrize("name", SHIPPED)
def test_every_shipped_profile_loads_with_complete_metadata(name):
    p = load_profile(name)
    assert p.name == name  # the file name is the profile id
    assert p.title and p.description and p.version
    assert Path(p.path).parent == BUILTIN_DIR
    for lim in p.limits:
        assert lim.severity in ("fail", "warn")
        assert lim.source.strip()
    assert validate_profile_file(p.path) == p


# (profile, limit key, expected value, expected tolerance, document named in the source)
# Each expected number is the published (or common-practice) value, as collected in
# docs/standards.md#delivery-targets; "from memory" where it says so.
PUBLISHED = [
    # EBU R 128: -23 LUFS, +-0.5 LU (+-1 LU live), -1 dBTP (checked)
    ("ebu-r128", "integrated_target_lufs", -23.0, 0.5, "EBU R 128"),
    ("ebu-r128", "true_peak_max_dbtp", -1.0, None, "EBU R 128"),
    ("ebu-r128-live", "integrated_target_lufs", -23.0, 1.0, "EBU R 128"),
    ("ebu-r128-live", "true_peak_max_dbtp", -1.0, None, "EBU R 128"),
    # EBU R 128 s1 (2016): max short-term -18 LUFS (checked)
    ("ebu-r128-s1", "short_term_max_lufs", -18.0, None, "EBU R 128 s1"),
    ("ebu-r128-s1", "integrated_target_lufs", -23.0, 0.5, "EBU R 128"),
    # ATSC A/85: -24 LKFS +-2 dB (target checked); -2 dBTP from memory
    ("atsc-a85", "integrated_target_lufs", -24.0, 2.0, "ATSC A/85"),
    ("atsc-a85", "true_peak_max_dbtp", -2.0, None, "ATSC A/85"),
    # Free TV OP-59: -24 LKFS +-1 LU (target checked, rest from memory); -2 dBTP from memory
    ("free-tv-op59", "integrated_target_lufs", -24.0, 1.0, "OP-59"),
    ("free-tv-op59", "true_peak_max_dbtp", -2.0, None, "OP-59"),
    # ARIB TR-B32: -24 LKFS +-1 dB, -1 dBTP (all from memory)
    ("arib-tr-b32", "integrated_target_lufs", -24.0, 1.0, "ARIB TR-B32"),
    ("arib-tr-b32", "true_peak_max_dbtp", -1.0, None, "ARIB TR-B32"),
    # AES TD1004: between -20 and -16 LUFS (checked) = -18 +- 2; -1 dBTP from memory
    ("aes-td1004", "integrated_target_lufs", -18.0, 2.0, "AES TD1004"),
    ("aes-td1004", "true_peak_max_dbtp", -1.0, None, "AES TD1004"),
    # AES TD1008: mixed content -18 +- 2, -1 dBTP at the codec input (checked, secondary)
    ("aes-td1008", "integrated_target_lufs", -18.0, 2.0, "AES TD1008"),
    ("aes-td1008", "true_peak_max_dbtp", -1.0, None, "AES TD1008"),
    # podcast: about -16 LUFS stereo / -19 mono, about +-1 LU, -1 dBTP (common practice)
    ("podcast-stereo", "integrated_target_lufs", -16.0, 1.0, "common practice"),
    ("podcast-stereo", "true_peak_max_dbtp", -1.0, None, "common practice"),
    ("podcast-stereo-mp3", "integrated_target_lufs", -16.0, 1.0, "common practice"),
    ("podcast-stereo-mp3", "encoded_true_peak_max_dbtp", -1.0, None, "common practice"),
    ("podcast-mono", "integrated_target_lufs", -19.0, 1.0, "common practice"),
    ("podcast-mono", "true_peak_max_dbtp", -1.0, None, "common practice"),
    # audiobook chapter: RMS -23 to -18 dBFS, sample peak <= -3 dBFS, noise floor <= -60 dBFS,
    # 0.5-1 s room tone at the head, 1-5 s at the tail: a major audiobook retailer's
    # published requirements, from memory
    ("audiobook-chapter", "rms_min_dbfs", -23.0, None, "retailer's published requirements"),
    ("audiobook-chapter", "rms_max_dbfs", -18.0, None, "retailer's published requirements"),
    ("audiobook-chapter", "sample_peak_max_dbfs", -3.0, None, "retailer's published requirements"),
    ("audiobook-chapter", "noise_floor_max_dbfs", -60.0, None, "retailer's published requirements"),
    ("audiobook-chapter", "leading_silence_min_s", 0.5, None, "retailer's published requirements"),
    ("audiobook-chapter", "leading_silence_max_s", 1.0, None, "retailer's published requirements"),
    ("audiobook-chapter", "trailing_silence_min_s", 1.0, None, "retailer's published requirements"),
    ("audiobook-chapter", "trailing_silence_max_s", 5.0, None, "retailer's published requirements"),
    # stem handoff: sample peak -3 to -6 dBFS (3-6 dB headroom), no clipping (common practice)
    ("mastering-stems", "sample_peak_max_dbfs", -3.0, None, "common practice"),
    ("mastering-stems", "clipped_runs_max", 0, None, "common practice"),
    # DC offset: no normative threshold; suggested warn above 0.1 % FS = -60 dBFS,
    # fail above 1 % FS = -40 dBFS (common practice, docs/standards.md)
    ("ebu-r128", "dc_offset_max_dbfs", -40.0, None, "common practice"),
]

#: Values the docs/standards.md tag "memory": their sources must say "from memory".
FROM_MEMORY = {
    ("atsc-a85", "true_peak_max_dbtp"),
    ("free-tv-op59", "true_peak_max_dbtp"),
    ("free-tv-op59", "integrated_target_lufs"),  # tolerance from memory
    ("arib-tr-b32", "integrated_target_lufs"),
    ("arib-tr-b32", "true_peak_max_dbtp"),
    ("aes-td1004", "true_peak_max_dbtp"),
    ("audiobook-chapter", "rms_min_dbfs"),
    ("audiobook-chapter", "rms_max_dbfs"),
    ("audiobook-chapter", "sample_peak_max_dbfs"),
    ("audiobook-chapter", "noise_floor_max_dbfs"),
    ("audiobook-chapter", "leading_silence_min_s"),
    ("audiobook-chapter", "trailing_silence_max_s"),
}


@pytest.mark.parametrize("name, key, value, tolerance, document", PUBLISHED)
def test_shipped_numbers_match_the_published_values(name, key, value, tolerance, document):
    lim = load_profile(name).limit(key)
    assert lim is not None, f"{name} has no {key}"
    assert_allclose(lim.value, value, rtol=0, atol=0)
    if tolerance is not None:
        assert_allclose(lim.tolerance_lu, tolerance, rtol=0, atol=0)
    assert document in lim.source
    if (name, key) in FROM_MEMORY:
        assert "from memory" in lim.source


def test_aes_td1004_range_is_minus_20_to_minus_16():
    # AES TD1004: "between -20 and -16 LUFS" (docs/standards.md, checked)
    lim = load_profile("aes-td1004").limit("integrated_target_lufs")
    assert_allclose(
        [lim.value - lim.tolerance_lu, lim.value + lim.tolerance_lu], [-20, -16], atol=0
    )


def test_mastering_stems_format_and_set_limits():
    p = load_profile("mastering-stems")
    # common practice for stem handoff: 24-bit or float
    assert {"PCM_24", "FLOAT"} <= set(p.value("subtypes")) and "PCM_16" not in p.value("subtypes")
    assert p.integrated_target_lufs is None  # mastering sets the loudness
    for key in ("formats_must_match", "length_mismatch_max_frames", "sum_true_peak_max_dbtp",
                "sum_sample_peak_max_dbfs", "null_residual_max_db", "slip_max_s",
                "sum_clipped_samples_max"):  # fmt: skip
        assert p.limit(key) is not None and p.limit(key).definition.scope == "set"


def test_measure_only_has_no_limits_and_no_ceiling():
    p = load_profile("measure-only")
    assert p.limits == () and p.limits_table() == [] and p.true_peak_ceiling_dbtp is None


def test_true_peak_ceiling_and_limits_table():
    p = load_profile("atsc-a85")
    assert p.true_peak_ceiling_dbtp == -2.0
    rows = {r["key"]: r for r in p.limits_table()}
    tp = rows["true_peak_max_dbtp"]
    assert {k: tp[k] for k in ("key", "value", "unit", "severity")} == {
        "key": "true_peak_max_dbtp",
        "value": -2.0,
        "unit": "dBTP",
        "severity": "fail",
    }
    assert tp["source"].startswith("ATSC A/85")
    assert rows["integrated_target_lufs"]["text"] == "target -24.0 LUFS +- 2.0 LU"


# ---------------------------------------------------------------- inheritance


def test_extends_inherits_then_overrides_field_by_field(tmp_path):
    path = write(
        tmp_path,
        "house.toml",
        'name = "house"\ntitle = "House rules"\nextends = "ebu-r128"\n'
        "[peaks]\n"
        'true_peak_max_dbtp = { value = -2.0, source = "house rule" }\n'
        'clipped_runs_max = { severity = "warn" }\n'
        "[levels]\n"
        'dc_offset_max_dbfs = "off"\n',
    )
    p = load_profile(str(path))
    parent = load_profile("ebu-r128")
    assert p.lineage == ("ebu-r128", "house") and p.extends == "ebu-r128"
    assert p.description == parent.description  # inherited metadata
    tp = p.limit("true_peak_max_dbtp")
    assert (tp.value, tp.severity, tp.source) == (-2.0, "fail", "house rule")
    clip = p.limit("clipped_runs_max")
    assert (clip.value, clip.severity) == (0, "warn")
    assert clip.source == parent.limit("clipped_runs_max").source  # only severity changed
    assert p.limit("dc_offset_max_dbfs") is None
    assert p.limit("integrated_target_lufs") == parent.limit("integrated_target_lufs")
    assert p.true_peak_ceiling_dbtp == -2.0


def test_whole_numbers_are_accepted_for_levels(tmp_path):
    path = write(tmp_path, "i.toml", 'name = "i"\n[peaks]\n'
                 'true_peak_max_dbtp = { value = -2, severity = "fail", source = "x" }\n')  # fmt: skip
    lim = load_profile(str(path)).limit("true_peak_max_dbtp")
    assert isinstance(lim.value, float) and lim.value == -2.0 and lim.text() == "<= -2.0 dBTP"


def test_extends_a_relative_path(tmp_path):
    write(tmp_path, "base.toml", 'name = "base"\n[format]\n'
          'channel_counts = { value = [2], severity = "fail", source = "test value" }\n')  # fmt: skip
    child = write(tmp_path, "child.toml", 'name = "child"\nextends = "base.toml"\n')
    assert load_profile(str(child)).value("channel_counts") == [2]


# ---------------------------------------------------------------- errors


def expect_error(path: Path, *fragments: str) -> str:
    with pytest.raises(ProfileError) as info:
        load_profile(str(path))
    message = str(info.value)
    for fragment in fragments:
        assert fragment in message, message
    return message


def test_toml_syntax_error_gives_file_and_line(tmp_path):
    path = write(tmp_path, "bad.toml", 'name = "bad"\n[peaks]\ntrue_peak_max_dbtp = = -1\n')
    expect_error(path, f"{path}, line 3: TOML syntax error")


def test_unknown_key_is_an_error_with_a_suggestion(tmp_path):
    path = write(tmp_path, "typo.toml", 'name = "typo"\n[peaks]\n'
                 'true_peek_max_dbtp = { value = -1.0, severity = "fail", source = "x" }\n')  # fmt: skip
    msg = expect_error(
        path, str(path), "peaks.true_peek_max_dbtp = {", "did you mean true_peak_max_dbtp"
    )
    assert "(expected" in msg


def test_unknown_top_level_key_and_field(tmp_path):
    p1 = write(tmp_path, "a.toml", 'name = "a"\ntitel = "x"\n')
    expect_error(p1, 'titel = "x" (expected one of name, title', "did you mean title")
    p2 = write(tmp_path, "b.toml", 'name = "b"\n[peaks]\n'
               'true_peak_max_dbtp = { value = -1.0, severity = "fail", source = "x", max = 2 }\n')  # fmt: skip
    expect_error(p2, "peaks.true_peak_max_dbtp.max = 2 (expected one of severity, source, value")


def test_wrong_type_names_key_value_and_expectation(tmp_path):
    path = write(tmp_path, "t.toml", 'name = "t"\n[peaks]\n'
                 'true_peak_max_dbtp = { value = "high", severity = "fail", source = "x" }\n')  # fmt: skip
    expect_error(
        path, f'{path}: peaks.true_peak_max_dbtp.value = "high" (expected a number in dBTP)'
    )
    p2 = write(tmp_path, "u.toml", 'name = "u"\n[format]\n'
               'sample_rates_hz = { value = ["48k"], severity = "fail", source = "x" }\n')  # fmt: skip
    expect_error(
        p2, 'format.sample_rates_hz.value = ["48k"] (expected a non-empty list of integers in Hz)'
    )
    p3 = write(tmp_path, "v.toml", 'name = "v"\n[peaks]\n'
               'true_peak_max_dbtp = { value = -1.0, severity = "fatal", source = "x" }\n')  # fmt: skip
    expect_error(p3, 'peaks.true_peak_max_dbtp.severity = "fatal" (expected "fail" or "warn")')
    p4 = write(tmp_path, "w.toml", 'name = "w"\n[loudness]\nmono_loudness = "mono"\n')
    expect_error(p4, 'loudness.mono_loudness = "mono" (expected "single_channel" or "dual_mono")')


def test_wrong_unit_points_to_the_right_key(tmp_path):
    path = write(tmp_path, "unit.toml", 'name = "unit"\n[peaks]\n'
                 'true_peak_max_dbfs = { value = -1.0, severity = "fail", source = "x" }\n')  # fmt: skip
    expect_error(
        path, "peaks.true_peak_max_dbfs", "(expected true_peak_max_dbtp: this limit is in dBTP)"
    )
    p2 = write(tmp_path, "unit2.toml", 'name = "unit2"\n[silence]\n'
               'leading_silence_max_ms = { value = 500, severity = "fail", source = "x" }\n')  # fmt: skip
    expect_error(p2, "did you mean leading_silence_max_s")


def test_limit_in_the_wrong_section(tmp_path):
    path = write(tmp_path, "sec.toml", 'name = "sec"\n[levels]\n'
                 'true_peak_max_dbtp = { value = -1.0, severity = "fail", source = "x" }\n')  # fmt: skip
    expect_error(path, "levels.true_peak_max_dbtp", "(expected this limit in section [peaks])")


def test_every_limit_needs_severity_and_source(tmp_path):
    path = write(
        tmp_path,
        "s.toml",
        'name = "s"\n[peaks]\ntrue_peak_max_dbtp = { value = -1.0, severity = "fail" }\n',
    )
    expect_error(path, "peaks.true_peak_max_dbtp", "(expected a source field)")
    p2 = write(tmp_path, "n.toml", 'name = "n"\n[peaks]\ntrue_peak_max_dbtp = -1.0\n')
    expect_error(p2, "peaks.true_peak_max_dbtp = -1.0 (expected { value = ...")


def test_changing_an_inherited_value_needs_a_new_source(tmp_path):
    path = write(tmp_path, "c.toml", 'name = "c"\nextends = "ebu-r128"\n[peaks]\n'
                 "true_peak_max_dbtp = { value = -2.0 }\n")  # fmt: skip
    expect_error(path, "peaks.true_peak_max_dbtp changes the inherited value without a source")


def test_warn_value_must_be_stricter(tmp_path):
    path = write(tmp_path, "w.toml", 'name = "w"\n[levels]\ndc_offset_max_dbfs = { value = -60.0, '
                 'warn_value = -40.0, severity = "fail", source = "x" }\n')  # fmt: skip
    expect_error(path, "levels.dc_offset_max_dbfs.warn_value = -40.0 (expected a value below")


def test_extends_cycle_is_an_error(tmp_path):
    write(tmp_path, "a.toml", 'name = "a"\nextends = "b.toml"\n')
    write(tmp_path, "b.toml", 'name = "b"\nextends = "a.toml"\n')
    expect_error(tmp_path / "a.toml", "extends forms a cycle", "a.toml -> ", "b.toml -> ")
    write(tmp_path, "self.toml", 'name = "self"\nextends = "self.toml"\n')
    expect_error(tmp_path / "self.toml", "extends forms a cycle")


def test_missing_parent_is_an_error(tmp_path):
    p1 = write(tmp_path, "orphan.toml", 'name = "orphan"\nextends = "no-such-profile"\n')
    expect_error(p1, f'{p1}: extends = "no-such-profile": parent not found', "ebu-r128")
    p2 = write(tmp_path, "orphan2.toml", 'name = "orphan2"\nextends = "missing.toml"\n')
    expect_error(p2, 'extends = "missing.toml": parent not found')


def test_missing_name_and_unknown_builtin(tmp_path):
    expect_error(write(tmp_path, "x.toml", 'title = "x"\n'), "name is missing")
    with pytest.raises(ProfileError, match='profile = "nope" .expected a built-in profile: '):
        load_profile("nope")


# ---------------------------------------------------------------- CLI


def run_cli(*argv):
    out, err = io.StringIO(), io.StringIO()
    code = main(list(argv), out, err)
    return code, out.getvalue(), err.getvalue()


def test_cli_lists_every_profile_with_its_description():
    code, out, _ = run_cli("profiles")
    assert code == EXIT_OK
    for p in list_profiles():
        assert any(line.startswith(p.name) and p.description in line for line in out.splitlines())


def test_cli_show_gives_every_limit_with_its_source():
    code, out, _ = run_cli("profiles", "show", "ebu-r128-s1")
    assert code == EXIT_OK
    assert "inherits: ebu-r128 -> ebu-r128-s1" in out
    for lim in load_profile("ebu-r128-s1").limits:
        assert any(lim.key in line and lim.source in line for line in out.splitlines())


def test_cli_validate(tmp_path):
    good = write(tmp_path, "good.toml", 'name = "good"\nextends = "podcast-stereo"\n')
    code, out, _ = run_cli("profiles", "validate", str(good))
    n = len(load_profile("podcast-stereo").limits)
    assert code == EXIT_OK and f"valid profile good ({n} limits)" in out
    bad = write(
        tmp_path, "bad.toml", 'name = "bad"\n[peaks]\ntrue_peak_max_dbtp = { value = "x" }\n'
    )
    code, out, err = run_cli("profiles", "validate", str(bad))
    assert code == EXIT_USAGE
    assert f'{bad}: peaks.true_peak_max_dbtp.value = "x" (expected a number in dBTP)' in err
    code, _, err = run_cli("profiles", "show", "nope")
    assert code == EXIT_USAGE and "expected a built-in profile" in err


# ---------------------------------------------------------------- hostile profiles


def _limit_line(value: str) -> str:
    return f'name = "h"\n[format]\ntruncation_max_frames = {{ value = {value}, severity = "fail", source = "x" }}\n'


HOSTILE = {
    # A 400-digit integer parses (TOML integers are unbounded in tomllib) but is no number
    # a float can hold: shown summarised, never echoed in full.
    "digits_400": (_limit_line("9" * 400), "format.truncation_max_frames.value = a 400-digit "
                   "integer (expected a number)"),  # fmt: skip
    # Python refuses integer strings over 4300 digits (sys.get_int_max_str_digits default).
    "digits_5000": (_limit_line("9" * 5000), "unreadable value (Exceeds the limit"),
    "nested_5000": ('name = "h"\ntitle = ' + "[" * 5000 + "]" * 5000 + "\n",
                    "nesting too deep (expected at most 8 levels of tables and lists)"),
    "nested_400": ('name = "h"\ntitle = ' + "[" * 400 + "]" * 400 + "\n",
                   "nesting too deep (expected at most 8 levels of tables and lists)"),
    "long_string": ('name = "h"\ntitle = ' + "[" + '"' + "x" * 5000 + '"]\n',
                    "title = [\"xxxxxxxx"),
}  # fmt: skip


@pytest.mark.parametrize("case", sorted(HOSTILE))
def test_hostile_profiles_are_exit_2_with_a_short_message(tmp_path, case):
    text, fragment = HOSTILE[case]
    path = write(tmp_path, f"{case}.toml", text)
    code, out, err = run_cli("profiles", "validate", str(path))
    assert code == EXIT_USAGE, err
    assert err.startswith(f"deliverycheck: {path}") and fragment in err, err
    assert "internal error" not in err and len(err) < 400, err


def test_extends_chain_has_a_depth_limit(tmp_path):
    # 3000 files, each extending the next: refused at MAX_EXTENDS_DEPTH (16) parents.
    for i in range(3000):
        parent = f'extends = "c{i + 1}.toml"\n' if i < 2999 else ""
        write(tmp_path, f"c{i}.toml", f'name = "c{i}"\n{parent}')
    code, _, err = run_cli("profiles", "validate", str(tmp_path / "c0.toml"))
    assert code == EXIT_USAGE
    assert f"{tmp_path / 'c0.toml'}: extends chain longer than 16 parents" in err
    # 16 parents are fine: c2983 -> ... -> c2999 is 17 files.
    assert load_profile(str(tmp_path / "c2983.toml")).lineage[-1] == "c2983"


def test_errors_in_a_parent_never_repeat_its_contents(tmp_path):
    write(tmp_path, "other.toml", 'name = "o"\npassword = "hunter2"\n[peaks]\n')
    child = write(tmp_path, "child.toml", 'name = "c"\nextends = "other.toml"\n')
    msg = expect_error(child, f'{child}: extends = "other.toml"', "the parent is not a valid "
                       "profile", "other.toml: a key is not valid (expected one of name")  # fmt: skip
    assert "hunter2" not in msg and "password" not in msg
    write(tmp_path, "other2.toml", 'name = "o"\n[peaks]\ntrue_peak_max_dbtp = { value = '
          '"hunter2", severity = "fail", source = "x" }\n')  # fmt: skip
    write(tmp_path, "mid.toml", 'name = "m"\nextends = "other2.toml"\n')
    child2 = write(tmp_path, "child2.toml", 'name = "c"\nextends = "mid.toml"\n')
    msg = expect_error(child2, "other2.toml: peaks.true_peak_max_dbtp.value is not valid "
                       "(expected a number in dBTP)")  # fmt: skip
    assert "hunter2" not in msg
    # A merge error in a parent (a changed value without a source) names it, not its values.
    write(tmp_path, "p3.toml", 'name = "p"\nextends = "ebu-r128"\n[peaks]\n'
          "true_peak_max_dbtp = { value = -7.25 }\n")  # fmt: skip
    child3 = write(tmp_path, "child3.toml", 'name = "c"\nextends = "p3.toml"\n')
    msg = expect_error(child3, "p3.toml: peaks.true_peak_max_dbtp changes the inherited value")
    assert "-7.25" not in msg


def test_silence_threshold_setting(tmp_path):
    # Default (checker/profile/catalogue.py): -60 dBFS short-time RMS, common practice.
    base = load_profile("ebu-r128")  # sets no threshold of its own
    assert base.silence_threshold_dbfs == -60.0
    assert "common practice" in base.silence_threshold_source
    assert load_profile("audiobook-chapter").silence_threshold_dbfs == -60.0
    ok = write(tmp_path, "ok.toml", 'name = "ok"\nextends = "audiobook-chapter"\n[silence]\n'
               'silence_threshold_dbfs = { value = -55, source = "house rule" }\n')  # fmt: skip
    p = load_profile(str(ok))
    assert p.silence_threshold_dbfs == -55.0 and p.silence_threshold_source == "house rule"
    assert p.limit("leading_silence_min_s") is not None  # inherited limits stay
    bad = write(tmp_path, "bad.toml", 'name = "bad"\n[silence]\n'
                'silence_threshold_dbfs = { value = -55.5, source = "x" }\n')  # fmt: skip
    expect_error(bad, "silence.silence_threshold_dbfs.value = -55.5",
                 "a whole number in dBFS from -120 to -20")  # fmt: skip
    nosource = write(tmp_path, "nosource.toml", 'name = "n"\n[silence]\n'
                     "silence_threshold_dbfs = { value = -50 }\n")  # fmt: skip
    expect_error(nosource, "silence.silence_threshold_dbfs.source")
    wrong = write(tmp_path, "wrong.toml", 'name = "w"\n[levels]\n'
                  'silence_threshold_dbfs = { value = -50, source = "x" }\n')  # fmt: skip
    expect_error(wrong, "levels.silence_threshold_dbfs")
