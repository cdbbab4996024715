"""Mesh intake: readers within limits, units, topology, volume and the triage of defects.

``examine(path, units=...)`` is the entry point (:mod:`packer.mesh.examine`);
:mod:`packer.parts` builds a placed :class:`~packer.parts.Part` on it.
"""
