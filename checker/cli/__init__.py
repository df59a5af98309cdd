"""The ``deliverycheck`` command: ``main`` parses arguments and maps errors to exit codes, one
module per command (``check``, ``measure``, ``profiles``, ``summary``). The only place that prints
and the only place that names command-line flags.

May import everything.
"""
