"""The package version and the measuring engine's version (part of the store's cache key)."""

__version__ = "0.1.0"

#: Bumped whenever a change alters any measured value; part of the store's cache key.
ENGINE_VERSION = f"{__version__}+engine10"  # 7: containers; 8: carriers, lossy; 9: quiet parts;
# 10: true-peak refinement compiled (fine sums in tap order: readings move by <= 1e-14 dB)
