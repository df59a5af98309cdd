from __future__ import annotations

import sys
from pathlib import Path

# Make tests/signals.py importable as `signals` from any test module.
sys.path.insert(0, str(Path(__file__).parent))
