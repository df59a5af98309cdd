"""Pure filter design: K-weighting biquads (kweighting.py)."""
