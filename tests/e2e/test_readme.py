"""The README's examples stay true: its profile example validates, its commands exist."""

from __future__ import annotations

import io
import re
import subprocess
import sys
from pathlib import Path

import pytest
from signals import sine, write

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


@pytest.mark.slow
def test_readme_python_example_runs(tmp_path):
    # The example as a script of its own (the worker processes import it again), on an
    # invented folder in place of /mnt/deliveries.
    block = re.search(r"```python\n(.*?)```", README.read_text(), re.S).group(1)
    folder = tmp_path / "deliveries"
    folder.mkdir()
    write(folder / "ep01.wav", sine(1000.0, -23.0, 2.0, channels=2))
    script = tmp_path / "example.py"
    script.write_text(
        block.replace("/mnt/deliveries", str(folder)).replace("/mnt/qc", str(tmp_path / "qc"))
    )
    proc = subprocess.run(
        [sys.executable, str(script)], capture_output=True, text=True, timeout=600, cwd=tmp_path
    )
    assert proc.returncode == 0, proc.stderr
    lines = proc.stdout.splitlines()
    status, path = lines[0].split(" ", 1)
    assert path == str(folder / "ep01.wav") and status in {"pass", "warn", "fail"}
    loudness, peak = map(float, lines[1].split())
    # EBU Tech 3341 test case 1 (as the conformance tier uses it): 1 kHz stereo at -23 dBFS
    # reads -23.0 LUFS +-0.1; a sine's true peak is its amplitude (arithmetic).
    assert abs(loudness - -23.0) <= 0.1 and abs(peak - -23.0) <= 0.05
    assert (tmp_path / "qc" / "ebu-r128" / "report.html").exists()
