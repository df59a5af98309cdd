"""Delivery profiles: the catalogue of every limit and setting a profile may hold
(``catalogue``: key, unit, meaning, what it measures), the TOML syntax checks (``syntax``), loading
by name or path (``load``) and the built-in profiles in ``builtin/*.toml``. Add a limit in
``catalogue`` first.

May import ``model`` and ``io`` (channel layouts). Never imports meters, the run or reports.
"""
