"""Reading deliverables: what counts as audio (``intake.classify``), walking the inputs (``discover``), content sniffing, the
block reader (``audio``), RIFF/WAV chunks, channel layouts, container length checks, metadata
carriers and lossy-stream facts.

May import ``model`` and ``dsp`` (for the compiled deinterleave). Never imports meters, profiles,
rules, the run or reports.
"""
