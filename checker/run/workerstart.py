"""Worker processes that exit while starting, before they take a file: what to tell the user.

A local worker is forked from the fork server and, as Python's multiprocessing does for every
child it starts that way, first imports the main module of the process that started the run
(as ``__mp_main__``). For ``deliverycheck`` itself that is harmless (its entry points run
nothing on import). For a user's own script that calls ``checker.check(...)`` at its top
level, each worker runs the script again: the nested run fails (or waits on the results
store for half a minute) and the worker exits before it ever takes a file. Blaming each file
("died while measuring ... e.g. a decoder crash") would be wrong and would start one doomed
worker per file, so the pool tells such exits apart (a worker says "ready" once it has
started; checker/run/workers.py) and, after more of them than it has workers, stops the
batch's remaining files with the message below.

One job: the words for that failure. LocalPool (checker/run/workers.py) decides when.
"""

from __future__ import annotations

import os
import signal
import sys


def exit_text(code: int | None) -> str:
    """A process's end in words: "exit code 1", "killed by SIGKILL", "unknown exit"."""
    if code is None:
        return "unknown exit"
    if code < 0:
        try:
            return f"killed by {signal.Signals(-code).name}"
        except ValueError:
            return f"killed by signal {-code}"
    return f"exit code {code}"


def user_script() -> str | None:
    """The script this process runs as ``__main__``, when worker processes import it again:
    a file run by its path, or a module run with ``python -m`` (multiprocessing imports it by
    name), but not a package's ``__main__`` (``python -m pytest``: multiprocessing leaves those
    alone), not deliverycheck's own entry points and not an interactive session or notebook
    (no file: nothing to import)."""
    main = sys.modules.get("__main__")
    path = getattr(main, "__file__", None)
    if not path:
        return None
    spec = getattr(main, "__spec__", None)
    name = getattr(spec, "name", None) or ""
    if name == "__main__" or name.endswith(".__main__"):
        return None
    if name == "checker" or name.startswith("checker."):
        return None
    if os.path.basename(path) in ("deliverycheck", "deliverycheck.exe", "deliverycheck-script.py"):
        return None
    return str(path)


def start_failure(path: str, code_text: str, times: int) -> str:
    """The error row of a file left unmeasured because workers kept exiting while starting."""
    text = (
        f"{path}: not measured: worker processes exited while starting, before they took a "
        f"file ({code_text}; {times} times), so the batch stopped starting them"
    )
    script = user_script()
    if script is not None:
        return (
            f"{text}. Each worker imports the script that started this run ({script}) again "
            'as it starts: put the code that calls deliverycheck under `if __name__ == "__main__":`'
        )
    return (
        f"{text}. The engine could not start in a new process: run `deliverycheck measure` on one "
        "file to see why"
    )
