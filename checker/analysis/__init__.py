"""One pass over one file (``onepass.measure``): open it with ``io``, feed every block to every
meter in ``meters``, guard the values and assemble a ``model.Measurement``. Profile-free: the
same measurement is judged against any profile later.

May import ``model``, ``dsp``, ``io`` and ``meters``.
"""
