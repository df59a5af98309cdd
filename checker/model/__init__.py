"""Plain data shared by every stage: the Measurement record, verdicts and flags, file and run
results, the timeline, units and dB conversions, JSON rules, text escaping, errors and exit codes.

No I/O and no measuring here. Modules in ``model`` import only the standard library, numpy and
each other; every other subpackage may import ``model``.
"""
