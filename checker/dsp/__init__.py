"""Signal processing without file or profile knowledge: K-weighting design (``kweighting``), the
IIR filter runner (``iir``), true-peak interpolation filters (``interp``), the optional compiled
kernels (``kernels.c`` loaded by ``native``, each with a numpy twin) and the one-thread rule for
library thread pools (``threads``).

May import ``model`` only.
"""
