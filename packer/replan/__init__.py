"""Replanning after events (a failed plate, a printer down, orders added or cancelled).

``packer replan OUTDIR ...`` reads the latest plan version in OUTDIR, applies
the events and writes the next version beside it (``OUTDIR/v2/``, ...).
"""
