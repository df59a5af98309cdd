"""Judging: ``rules.evaluate(measurement, profile)`` turns measured values and profile limits into a
``model.Verdict`` (flags with value, limit and where) and ``gain`` works out the gain advice.
Pure functions: no audio is read here.

May import ``model``, ``io``, ``meters`` (the silence meter's re-judging curve) and ``profile``.
"""
