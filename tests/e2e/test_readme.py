"""The README's examples stay true: its profile example validates, its commands exist."""

from __future__ import annotations

import io
import re
from pathlib import Path

from checker.cli.main import main
from checker.profile.load import validate_profile_file

README = Path(__file__).resolve().parents[2] / "README.md"


def test_readme_profile_example_validates(tmp_path):
    text = README.read_text()
    block = re.search(r"```toml\n(.*?)```", text, re.S).group(1)
    path = tmp_path / "network-promos.toml"
    path.write_text(block)
    profile = validate_profile_file(str(path))
    assert profile.name == "network-promos"
    keys = {row["key"] for row in profile.limits_table()}
    # What the example sets on top of ebu-r128-s1, and what it inherits from it.
    assert {"duration_max_s", "subtypes", "short_term_max_lufs", "true_peak_max_dbtp"} <= keys


def test_readme_names_the_two_commands_and_every_shipped_profile():
    text = README.read_text()
    assert "make demo" in text and "make test" in text
    out = io.StringIO()
    assert main(["profiles"], out, io.StringIO()) == 0
    names = [line.split()[0] for line in out.getvalue().splitlines() if line and line[0] != " "]
    names = [n for n in names if n != "show"]
    assert names, out.getvalue()
    for name in names:
        assert f"`{name}`" in text, f"README profile table lacks {name}"
