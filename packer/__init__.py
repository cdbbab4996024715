"""packer: plan a day of 3D-print production.

Stages, in the one direction data flows (see DEVELOPERS.md):
profiles and job -> parts -> footprints -> placement -> fleet plan -> export and report.
"""

__version__ = "0.1.0"
