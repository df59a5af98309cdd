"""deliverycheck: batch loudness-and-headroom delivery checker."""

from __future__ import annotations

__version__ = "0.1.0"

from checker.measure import Measurement, measure  # noqa: E402
from checker.meters.base import MeasureOptions  # noqa: E402

__all__ = ["Measurement", "MeasureOptions", "measure", "__version__"]
