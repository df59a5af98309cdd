"""Words for worker processes that exit while starting (checker/run/workerstart.py): whose
script they imported again, and what to do about it."""

from __future__ import annotations

import signal
import sys
import types

import pytest

from checker.run.workerstart import exit_text, start_failure, user_script


def _main(monkeypatch, file: str | None, spec_name: str | None = None) -> None:
    main = types.ModuleType("__main__")
    if file is not None:
        main.__file__ = file
    main.__spec__ = types.SimpleNamespace(name=spec_name) if spec_name else None
    monkeypatch.setitem(sys.modules, "__main__", main)


@pytest.mark.parametrize(
    "file, spec_name, expected",
    [
        ("/home/me/qc/check_spots.py", None, "/home/me/qc/check_spots.py"),  # a user's script
        ("/opt/venv/bin/deliverycheck", None, None),  # the command's entry point
        ("/src/checker/__main__.py", "checker.__main__", None),  # python -m checker
        ("/venv/lib/pytest/__main__.py", "pytest.__main__", None),  # not imported again
        ("/home/me/qc/spots.py", "spots", "/home/me/qc/spots.py"),  # python -m spots: it is
        (None, None, None),  # interactive session or notebook: nothing is imported again
    ],
)
def test_user_script_is_only_a_users_own_file(monkeypatch, file, spec_name, expected):
    _main(monkeypatch, file, spec_name)
    assert user_script() == expected


def test_a_users_script_gets_the_guard_advice(monkeypatch):
    _main(monkeypatch, "/home/me/qc/check_spots.py")
    text = start_failure("/in/spot.wav", "exit code 1", 2)
    assert text.startswith("/in/spot.wav: not measured: worker processes exited while starting")
    assert "(exit code 1; 2 times)" in text
    assert "/home/me/qc/check_spots.py" in text and 'if __name__ == "__main__":' in text


def test_the_command_gets_the_way_to_see_why(monkeypatch):
    _main(monkeypatch, "/opt/venv/bin/deliverycheck")
    text = start_failure("/in/spot.wav", "killed by SIGKILL", 3)
    assert "(killed by SIGKILL; 3 times)" in text
    assert "deliverycheck measure" in text and "__name__" not in text


def test_exit_text():
    assert exit_text(None) == "unknown exit"
    assert exit_text(1) == "exit code 1"
    assert exit_text(-signal.SIGKILL) == "killed by SIGKILL"
    assert exit_text(-200) == "killed by signal 200"
