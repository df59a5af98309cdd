"""The ``deliverycheck`` command: ``main`` parses arguments and maps errors to exit codes, one
module per command (``check``, ``measure``, ``profiles``, ``summary``). The only place that prints
and the only place that names command-line flags.

May import everything.
"""

# Importing the command line claims the process (one thread per library pool, freed memory kept):
# cli.main does it at import, so ``import checker.cli`` and the console script behave alike.
from checker.cli.main import main_entry  # noqa: E402

__all__ = ["main_entry"]
