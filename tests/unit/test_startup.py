"""Start-up: what a command loads before it needs it (README, Speed: users run thousands of
short commands, and a batch's parent imports while its workers' server loads the engine).

Checked by the modules a fresh interpreter holds afterwards, never by timing.
"""

from __future__ import annotations

import subprocess
import sys

import pytest

import checker

#: The measuring engine's heavy dependencies (numpy alone: about 0.1-0.2 s of CPU to import).
ENGINE = ("numpy", "soundfile", "checker.analysis.onepass", "checker.meters.loudness")


def loaded_after(code: str) -> set[str]:
    """Module names in sys.modules after running ``code`` in a fresh interpreter."""
    probe = f"{code}\nimport sys\nprint(' '.join(sorted(sys.modules)))"
    got = subprocess.run([sys.executable, "-c", probe], capture_output=True, text=True, check=True)
    return set(got.stdout.split())


@pytest.mark.parametrize(
    "code",
    [
        "import checker",
        "import checker.cli",
        "from checker.cli.main import build_parser; build_parser()",
        "from checker.cli.main import main; main(['profiles'])",
        "from checker.run.workers import start_worker_server",
    ],
)
def test_parser_and_package_import_leave_the_engine_unloaded(code):
    loaded = loaded_after(code)
    assert not loaded & set(ENGINE), sorted(loaded & set(ENGINE))


def test_check_never_imports_pandas(tmp_path):
    # The reports are written with the csv module (checker/report/csv_out.py); pandas cost
    # about 0.45 s of CPU per run. A whole `check` of one file, in this one process.
    wav = tmp_path / "tone.wav"
    code = (
        "import numpy as np, soundfile as sf\n"
        f"sf.write({str(wav)!r}, 0.1 * np.sin(np.arange(4800) / 10.0), 48000)\n"
        "from checker.cli.main import main\n"
        f"main(['check', {str(wav)!r}, '--profile', 'ebu-r128', '--jobs', '1', "
        f"'--out', {str(tmp_path / 'out')!r}, '--quiet'])"
    )
    loaded = loaded_after(code)
    assert "checker.report" in loaded and "pandas" not in loaded
    assert (tmp_path / "out" / "report.csv").exists()


def test_public_names_load_on_first_use():
    # the lazy package root (checker/__init__.py) gives every name of __all__
    for name in checker.__all__:
        assert getattr(checker, name) is not None, name
    from checker import MeasureOptions, measure
    from checker.analysis.onepass import measure as engine_measure
    from checker.meters.base import MeasureOptions as engine_options

    assert measure is engine_measure and MeasureOptions is engine_options
    assert set(checker.__all__) <= set(dir(checker))
    with pytest.raises(AttributeError, match="no attribute 'nope'"):
        checker.nope  # noqa: B018


def test_a_profile_error_starts_no_worker_server(tmp_path):
    # A mistyped profile is the common usage error: it exits 2 before the workers' server
    # (a second process loading the engine) is started, and without loading numpy.
    code = (
        "from checker.cli.main import main\n"
        f"rc = main(['check', {str(tmp_path)!r}, '--profile', 'no-such-profile', "
        f"'--out', {str(tmp_path / 'out')!r}, '--quiet'])\n"
        "assert rc == 2, rc"
    )
    loaded = loaded_after(code)
    assert "checker.profile.load" in loaded
    assert "multiprocessing.forkserver" not in loaded and "numpy" not in loaded
