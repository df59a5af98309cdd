"""Test tiers live in folders (see DEVELOPERS.md, "Test tiers"):

- ``unit/``: one module at a time against hand-computed values and handbook facts;
- ``conformance/``: published test signals (EBU Tech 3341/3342, BS.1770) and reference
  libraries (pyebur128, pyloudnorm, scipy) on the same audio;
- ``hardening/``: broken inputs and property-based tests;
- ``e2e/``: the command line, whole batches, resume, the demo, the README's examples;
- ``browser/``: the HTML report in headless Chromium.

``make check`` runs unit, conformance and hardening (daily work); ``make test`` runs all.
Shared generators (signals.py, meterkit.py, corpus.py, speech_signals.py) sit here; a few
helpers are shared between test modules of different tiers, so every tier folder is importable.
"""

from __future__ import annotations

import sys
from pathlib import Path

HERE = Path(__file__).parent
for folder in (HERE, *(HERE / t for t in ("unit", "conformance", "hardening", "e2e", "browser"))):
    sys.path.insert(0, str(folder))
