"""3MF reader for hostile files: safe XML, bounded archives, every index checked.

A 3MF file is a ZIP package whose model part (found through ``_rels/.rels``)
is XML: ``<model unit=...>`` with ``<resources>`` of ``<object>`` elements,
each a ``<mesh>`` (``<vertices>``, ``<triangles>``) or ``<components>``, and a
``<build>`` of ``<item>`` elements placing objects (3MF Core Specification
v1.4.0, chapters 3 and 4). Transforms are 12 numbers ``m00 m01 m02 m10 ... m32``
acting on row vectors, ``[x y z 1] M``.

Safety, checked before the work it guards:

- the archive's declared sizes: the whole package at most
  :attr:`Limits.archive_bytes` uncompressed, each member at most
  :attr:`Limits.compression_ratio` times its compressed size;
- the XML is parsed by lxml with entity expansion, DTD loading and network
  access off, and a model part that declares a DTD or an entity is refused;
- element count and nesting depth are counted while parsing;
- a triangle pointing past its object's vertices, an unknown unit, a component
  cycle or a reference to another model part are refused with the element named.
"""

from __future__ import annotations

import io
import re
import zipfile
import zlib
from pathlib import Path

import numpy as np
from lxml import etree

from packer.intake.mesh.limits import Limits
from packer.intake.mesh.raw import RawMesh, frozen, unusable
from packer.intake.mesh.units import THREEMF_UNITS

__all__ = ["read_3mf"]

_CORE = "http://schemas.microsoft.com/3dmanufacturing/core/2015/02"
_MODEL_REL = "http://schemas.microsoft.com/3dmanufacturing/2013/01/3dmodel"
_DTD = re.compile(rb"<!\s*(DOCTYPE|ENTITY)", re.I)


def read_3mf(path: Path, data: bytes, limits: Limits) -> RawMesh:
    """Read a 3MF package: every build item's mesh, placed, in the model's unit.

    Raises
    ------
    GeometryError
        Not a ZIP package, an archive or XML over a limit, a DTD or entity,
        malformed XML, an unknown unit, a bad index, transform or reference.
    """
    try:
        zf = zipfile.ZipFile(io.BytesIO(data))
    except (zipfile.BadZipFile, ValueError, OSError) as exc:
        raise unusable(path, f"not a 3MF file: the ZIP package cannot be opened ({exc})") from None
    with zf:
        name = _model_name(path, zf, limits)
        xml = _member(path, zf, name, limits)
    if _DTD.search(xml):
        raise unusable(path, f"3MF part {name} declares a DTD or an entity; packer does not read those")
    model = _Model(path, name, limits)
    model.parse(xml)
    return model.assemble()


def _check_archive(path: Path, zf: zipfile.ZipFile, limits: Limits) -> None:
    total = 0
    for info in zf.infolist():
        total += info.file_size
        ratio = info.file_size / max(info.compress_size, 1)
        if info.file_size > 1_000_000 and ratio > limits.compression_ratio:
            raise unusable(path, f"3MF member {info.filename} inflates {ratio:.0f} times "
                                 f"(over the limit of {limits.compression_ratio:g}, Limits.compression_ratio)")
    if total > limits.archive_bytes:
        raise unusable(path, f"3MF package inflates to {total} bytes, over the limit of "
                             f"{limits.archive_bytes} (Limits.archive_bytes)")


def _member(path: Path, zf: zipfile.ZipFile, name: str, limits: Limits) -> bytes:
    try:
        with zf.open(name) as fh:
            out = fh.read(limits.archive_bytes + 1)
    except (KeyError, zipfile.BadZipFile, zlib.error, OSError, EOFError, ValueError, NotImplementedError,
            RuntimeError) as exc:
        raise unusable(path, f"3MF part {name} cannot be read from the package ({exc})") from None
    if len(out) > limits.archive_bytes:
        raise unusable(path, f"3MF part {name} is over {limits.archive_bytes} bytes (Limits.archive_bytes)")
    return out


def _model_name(path: Path, zf: zipfile.ZipFile, limits: Limits) -> str:
    _check_archive(path, zf, limits)
    names = set(zf.namelist())
    if "_rels/.rels" in names:
        rels = _member(path, zf, "_rels/.rels", limits)
        if _DTD.search(rels):
            raise unusable(path, "3MF _rels/.rels declares a DTD or an entity; packer does not read those")
        try:
            root = etree.fromstring(rels, parser=_parser())
        except etree.XMLSyntaxError as exc:
            raise unusable(path, f"3MF _rels/.rels is not well-formed XML ({exc})") from None
        for rel in root.iter("{*}Relationship"):
            if rel.get("Type") == _MODEL_REL and rel.get("Target"):
                target = rel.get("Target").lstrip("/")
                if target in names:
                    return target
                raise unusable(path, f"3MF _rels/.rels points at model part {target}, which is not in the package")
    if "3D/3dmodel.model" in names:
        return "3D/3dmodel.model"
    raise unusable(path, "not a 3MF file: no 3D model part in the package")


def _parser() -> etree.XMLParser:
    return etree.XMLParser(resolve_entities=False, no_network=True, load_dtd=False, dtd_validation=False,
                           huge_tree=False)


def _transform(path: Path, where: str, text: str | None) -> np.ndarray:
    """(4, 4) matrix acting on column vectors from a 3MF transform string."""
    if text is None:
        return np.eye(4)
    try:
        m = np.array([float(v) for v in text.split()], dtype=float)
        if m.shape != (12,) or not np.isfinite(m).all():
            raise ValueError
    except ValueError:
        raise unusable(path, f"{where}: transform '{text[:80]}' is not 12 finite numbers") from None
    out = np.eye(4)
    out[:3, :3] = m[:9].reshape(3, 3).T
    out[:3, 3] = m[9:]
    return out


class _Model:
    """Streaming parse state of one model part."""

    def __init__(self, path: Path, part: str, limits: Limits) -> None:
        self.path, self.part, self.limits = path, part, limits
        self.unit = "millimeter"
        self.objects: dict[str, tuple] = {}     # id -> ("mesh", v, f) or ("components", [(id, T)])
        self.items: list[tuple[str, np.ndarray]] = []
        self.notes: list[str] = []

    def parse(self, xml: bytes) -> None:
        depth = count = 0
        verts, tris, comps, obj = [], [], [], None
        try:
            events = etree.iterparse(io.BytesIO(xml), events=("start", "end"), resolve_entities=False,
                                     no_network=True, load_dtd=False, huge_tree=False, remove_comments=True)
            for event, el in events:
                if event == "start":
                    depth += 1
                    count += 1
                    self._bounded(depth, count)
                    tag = _local(el.tag)
                    if tag == "model" and depth == 1:
                        self._unit(el.get("unit", "millimeter"))
                    elif tag == "object":
                        obj, verts, tris, comps = el.get("id"), [], [], []
                    continue
                depth -= 1
                tag = _local(el.tag)
                if tag == "vertex":
                    verts.append(self._numbers(el, ("x", "y", "z"), float, obj, len(verts)))
                elif tag == "triangle":
                    tris.append(self._numbers(el, ("v1", "v2", "v3"), int, obj, len(tris)))
                elif tag == "component":
                    comps.append(self._component(el, obj))
                elif tag == "object":
                    self._object(obj, verts, tris, comps)
                    verts, tris, comps = [], [], []
                elif tag == "item":
                    self._item(el)
                if tag in ("vertex", "triangle", "component", "item", "object"):
                    el.clear()
                    parent = el.getparent()
                    while parent is not None and el.getprevious() is not None:
                        del parent[0]
        except etree.XMLSyntaxError as exc:
            raise unusable(self.path, f"3MF part {self.part} is not well-formed XML ({exc})") from None

    def _bounded(self, depth: int, count: int) -> None:
        if depth > self.limits.xml_depth:
            raise unusable(self.path, f"3MF part {self.part}: elements nested deeper than "
                                      f"{self.limits.xml_depth} (Limits.xml_depth)")
        if count > self.limits.xml_elements:
            raise unusable(self.path, f"3MF part {self.part}: more than {self.limits.xml_elements} "
                                      "XML elements (Limits.xml_elements)")

    def _unit(self, unit: str) -> None:
        if unit not in THREEMF_UNITS:
            raise unusable(self.path, f"3MF model unit '{unit[:40]}' is not one of "
                                      f"{', '.join(THREEMF_UNITS)} (3MF core specification, 3.4)")
        self.unit = unit

    def _numbers(self, el, keys, kind, obj, index):
        try:
            return tuple(kind(el.get(k)) for k in keys)
        except (TypeError, ValueError):
            what = _local(el.tag)
            got = " ".join(f"{k}={el.get(k)!r}" for k in keys)
            raise unusable(self.path, f"object {obj}: {what} {index}: needs numbers {', '.join(keys)} "
                                      f"({got[:80]})") from None

    def _component(self, el, obj):
        ref = el.get("objectid")
        if any(k.endswith("}path") or k == "path" for k in el.attrib):
            raise unusable(self.path, f"object {obj}: component refers to another model part "
                                      f"({el.get(next(k for k in el.attrib if k.endswith('path')))}); "
                                      "packer reads a single model part")
        if ref is None:
            raise unusable(self.path, f"object {obj}: component without objectid")
        return ref, _transform(self.path, f"object {obj}: component {ref}", el.get("transform"))

    def _object(self, obj, verts, tris, comps) -> None:
        if obj is None:
            raise unusable(self.path, "an object without id")
        if verts or tris:
            v = np.array(verts, dtype=float).reshape(-1, 3)
            f = np.array(tris, dtype=np.int64).reshape(-1, 3)
            bad = np.flatnonzero(((f < 0) | (f >= len(v))).any(axis=1))
            if len(bad):
                k = int(bad[0])
                i = int(next(i for i in f[k] if not 0 <= i < len(v)))
                raise unusable(self.path, f"object {obj}: triangle {k} refers to vertex {i}, but the object "
                                          f"has {len(v)} vertices (0 to {len(v) - 1})")
            self.objects[obj] = ("mesh", v, f)
        else:
            self.objects[obj] = ("components", comps)

    def _item(self, el) -> None:
        ref = el.get("objectid")
        if any(k.endswith("}path") for k in el.attrib):
            raise unusable(self.path, f"build item {ref} refers to another model part; packer reads a single one")
        if ref is None:
            raise unusable(self.path, "build item without objectid")
        self.items.append((ref, _transform(self.path, f"build item {ref}", el.get("transform"))))

    def assemble(self) -> RawMesh:
        items = self.items
        if not items:
            items = [(k, np.eye(4)) for k, o in self.objects.items() if o[0] == "mesh"]
            if items:
                self.notes.append(f"{self.path}: 3MF has no build items; every mesh object was read")
        pieces, total = [], 0
        for ref, t in items:
            for v, f in self._expand(ref, t, depth=0, where=f"build item {ref}"):
                total += len(f)
                if total > self.limits.triangles:
                    raise unusable(self.path, f"more than {self.limits.triangles} triangles (Limits.triangles)")
                pieces.append((v, f))
        offset, vs, fs = 0, [], []
        for v, f in pieces:
            vs.append(v)
            fs.append(f + offset)
            offset += len(v)
        vertices = np.concatenate(vs) if vs else np.zeros((0, 3))
        faces = np.concatenate(fs) if fs else np.zeros((0, 3), dtype=np.int64)
        return RawMesh(self.path, "3MF", *frozen(vertices, faces), unit=self.unit, notes=tuple(self.notes))

    def _expand(self, ref: str, t: np.ndarray, *, depth: int, where: str):
        if depth > self.limits.components_depth:
            raise unusable(self.path, f"{where}: components nested deeper than {self.limits.components_depth} "
                                      "(a cycle?) (Limits.components_depth)")
        if ref not in self.objects:
            raise unusable(self.path, f"{where}: refers to object {ref}, which the file does not define")
        kind, *rest = self.objects[ref]
        if kind == "mesh":
            v, f = rest
            yield v @ t[:3, :3].T + t[:3, 3], f
            return
        for sub, ts in rest[0]:
            yield from self._expand(sub, t @ ts, depth=depth + 1, where=f"object {ref}")


def _local(tag) -> str:
    if not isinstance(tag, str):
        return ""
    if tag.startswith("{"):
        ns, _, name = tag[1:].partition("}")
        return name if ns == _CORE else ""
    return tag
