"""Running a batch: ``batch.run_batch`` discovers the files, reuses stored measurements, sends the
rest to ``workers`` (processes, or a Dask cluster), checks stem sets, judges every result and
keeps it in the SQLite ``store`` so an interrupted run resumes; ``progress`` counts.

May import every stage below it (``model`` up to ``stems``). Never imports ``report`` or ``cli``.
"""
