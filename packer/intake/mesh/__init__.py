"""Mesh intake: readers within limits, units, topology, volume and the triage of defects.

``examine(path, units=...)`` is the entry point (:mod:`packer.intake.mesh.examine`);
:mod:`packer.intake.parts` builds a placed :class:`~packer.intake.parts.Part` on it.
"""
