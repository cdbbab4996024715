"""A 3MF package writer for plate files, core specification only.

3MF Core Specification 1.3 (3MF Consortium): an OPC zip with
``[Content_Types].xml``, ``_rels/.rels`` pointing at ``/3D/3dmodel.model``,
and a model in millimetres whose ``resources`` hold one mesh object per copy
and whose ``build`` holds one item per object. Metadata names outside the
specification's well-known list carry our own namespace prefix (``packer:``),
as chapter 4.4 of the specification requires. No extension namespace is
declared, so readers in strict mode have nothing to reject; the zip entries
carry a fixed date so the same plate gives the same bytes.
"""

from __future__ import annotations

import io
import zipfile
from dataclasses import dataclass
from typing import Sequence
from xml.sax.saxutils import escape, quoteattr

import numpy as np

__all__ = ["MeshObject", "CORE_NS", "PACKER_NS", "model_xml", "package_3mf"]

CORE_NS = "http://schemas.microsoft.com/3dmanufacturing/core/2015/02"
PACKER_NS = "urn:packer:plate-file:1"
_MODEL_REL = "http://schemas.microsoft.com/3dmanufacturing/2013/01/3dmodel"
_CONTENT_TYPES = (
    '<?xml version="1.0" encoding="UTF-8"?>\n'
    '<Types xmlns="http://schemas.openxmlformats.org/package/2006/content-types">'
    '<Default Extension="rels" ContentType="application/vnd.openxmlformats-package.relationships+xml"/>'
    '<Default Extension="model" ContentType="application/vnd.ms-package.3dmanufacturing-3dmodel+xml"/>'
    "</Types>")
_RELS = (
    '<?xml version="1.0" encoding="UTF-8"?>\n'
    '<Relationships xmlns="http://schemas.openxmlformats.org/package/2006/relationships">'
    f'<Relationship Target="/3D/3dmodel.model" Id="rel0" Type="{_MODEL_REL}"/></Relationships>')
#: Metadata names the core specification defines; any other name gets the ``packer:`` prefix.
WELL_KNOWN = {"Title", "Designer", "Description", "Copyright", "LicenseTerms", "Rating",
              "CreationDate", "ModificationDate", "Application"}
_DATE = (2026, 1, 1, 0, 0, 0)


@dataclass(frozen=True)
class MeshObject:
    """One object of the model: its id, name and triangle mesh (mm, plate coordinates)."""

    id: int
    name: str
    vertices: np.ndarray      # (n, 3) float
    faces: np.ndarray         # (m, 3) int, indices into vertices
    decimals: int = 5         # of the coordinates written (mm)


def _mesh_xml(obj: MeshObject) -> str:
    v = np.asarray(obj.vertices, dtype=float)
    f = np.asarray(obj.faces, dtype=np.int64)
    n = obj.decimals
    verts = "".join(f'<vertex x="{x:.{n}f}" y="{y:.{n}f}" z="{z:.{n}f}"/>' for x, y, z in v.tolist())
    tris = "".join(f'<triangle v1="{a}" v2="{b}" v3="{c}"/>' for a, b, c in f.tolist())
    return (f'<object id="{obj.id}" type="model" name={quoteattr(obj.name)}><mesh><vertices>{verts}</vertices>'
            f"<triangles>{tris}</triangles></mesh></object>")


def model_xml(objects: Sequence[MeshObject], metadata: dict[str, str]) -> str:
    """The ``3dmodel.model`` document: metadata, one object per copy, one build item per object."""
    meta = []
    for name, value in metadata.items():
        key = name if name in WELL_KNOWN else f"packer:{name}"
        meta.append(f"<metadata name={quoteattr(key)}>{escape(str(value))}</metadata>")
    items = "".join(f'<item objectid="{o.id}"/>' for o in objects)
    return (f'<?xml version="1.0" encoding="UTF-8"?>\n<model unit="millimeter" xml:lang="en-US" '
            f'xmlns="{CORE_NS}" xmlns:packer="{PACKER_NS}">' + "".join(meta) +
            "<resources>" + "".join(_mesh_xml(o) for o in objects) + f"</resources><build>{items}</build></model>")


def package_3mf(objects: Sequence[MeshObject], metadata: dict[str, str]) -> bytes:
    """The 3MF package (zip bytes) of ``objects`` with ``metadata``; deterministic."""
    buf = io.BytesIO()
    with zipfile.ZipFile(buf, "w", compression=zipfile.ZIP_DEFLATED) as z:
        for name, text in (("[Content_Types].xml", _CONTENT_TYPES), ("_rels/.rels", _RELS),
                           ("3D/3dmodel.model", model_xml(objects, metadata))):
            info = zipfile.ZipInfo(name, date_time=_DATE)
            info.compress_type = zipfile.ZIP_DEFLATED
            z.writestr(info, text.encode("utf-8"))
    return buf.getvalue()
