"""Stem sets: files that belong together (a mix and its stems) checked as a set. ``sets`` builds
and measures a set, ``mixsum`` sums the stems in one pass, ``align`` estimates each stem's offset
from the signal, ``null`` runs the null test against the reference mix, ``findings`` words the
results.

May import ``model``, ``dsp``, ``io``, ``meters``, ``analysis``, ``profile`` and ``judge``.
"""
