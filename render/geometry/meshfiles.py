"""Mesh files in common formats: glTF 2.0 (``.gltf``, ``.glb``), PLY, STL and OBJ as parts.

:func:`read_mesh` reads one file into a :class:`MeshFile`: its triangles grouped in
:class:`MeshPiece` s, each known by its **mesh name** and its **material name**, so that a scene
can give each piece a lampcast material by either name (:meth:`MeshFile.parts`). glTF, PLY and
STL are read with trimesh (an optional extra: ``pip install "lampcast[mesh]"``); OBJ with
lampcast's own reader (:func:`render.geometry.objfile.load_obj`).

Units and axes
--------------
Coordinates are taken as metres and multiplied by ``scale``. glTF is y-up in metres by its
specification, so a glTF or GLB file is turned from y-up unless ``up_axis="z"`` is given; PLY,
STL and OBJ have no convention and are taken as z-up unless ``up_axis="y"``. The turn is the
OBJ reader's (file +y becomes +z, file +z becomes −y; a proper rotation, winding kept). Node
transforms of a glTF scene are applied (a mirroring transform has its triangles' winding
reversed so that their fronts stay outside). Shading is flat (face normals).

Names
-----
- glTF / GLB: the mesh name (``meshes[i].name``; a mesh without one is ``mesh<i>``) and each
  primitive's material name (``materials[j].name``; none for a primitive without a material or
  a material without a name).
- PLY, STL: one piece whose mesh name is the file's stem (``bench`` for ``bench.stl``), no
  material name.
- OBJ: the mesh name is the file's stem, the material names are the ``usemtl`` names (none for
  faces before the first ``usemtl``).

What is not used
----------------
Textures, texture coordinates and vertex colours are ignored; :attr:`MeshFile.ignored` lists
what a file had of them, for ``lampcast check``'s warnings. A file without surfaces (a point
cloud, lines only, an empty scene) and a glTF file that requires an extension (e.g. Draco
compression) are :class:`~render.errors.InputError` s naming the file.

Against hostile files: the file is read as a size-capped regular file
(:func:`render.fileio.read_user_bytes`, kind "mesh file"); counts a header declares (PLY
elements, glTF accessors) are checked against :mod:`render.limits` and against the file's size
before trimesh allocates them, the triangles read against
:data:`render.limits.MAX_TRIANGLES`; buffers a ``.gltf`` names are read the same way from its own
folder only (no absolute path, no ``..``); coordinates after scaling must be finite and within
:data:`render.limits.MAX_COORDINATE_M`. Any failure of trimesh on a malformed file becomes an
InputError naming the file and its format, without quoting the file's content.

References
----------
- Khronos Group, glTF 2.0 Specification (2021): coordinate system and units (§3.4: right-handed,
  +Y up, metres), GLB container (§4.4), meshes, primitives and materials (§3.7, §3.9).
- Turk, G. (1994), "The PLY polygon file format" (header, elements and properties).
- 3D Systems (1989), StereoLithography Interface Specification (ASCII and binary STL).
- trimesh (Dawson-Haggerty et al.), https://trimesh.org, the reader of glTF, PLY and STL.
"""

from __future__ import annotations

import io
import json
import logging
import math
import os
import re
import struct
from collections.abc import Mapping
from contextlib import contextmanager
from dataclasses import dataclass, field
from pathlib import Path, PurePosixPath

import numpy as np

from render import limits
from render.errors import InputError, input_error
from render.fileio import read_user_bytes
from render.geometry.mesh import face_normals
from render.geometry.shapes import Part, flat_part

__all__ = [
    "MESH_FORMATS",
    "MeshFile",
    "MeshPiece",
    "default_up_axis",
    "mesh_format",
    "read_mesh",
]

#: File extension (lower case) -> format name.
MESH_FORMATS: dict[str, str] = {".gltf": "glTF", ".glb": "GLB", ".ply": "PLY", ".stl": "STL", ".obj": "OBJ"}
#: The up axis a format is taken to have when the scene does not say (glTF 2.0 §3.4: +Y up).
_DEFAULT_UP = {"glTF": "y", "GLB": "y", "PLY": "z", "STL": "z", "OBJ": "z"}
_TRIMESH_TYPE = {"glTF": "gltf", "GLB": "glb", "PLY": "ply", "STL": "stl"}
#: File +y -> +z, file +z -> -y (the OBJ reader's turn; a proper rotation).
_Y_UP_TO_Z_UP = np.array([[1.0, 0.0, 0.0], [0.0, 0.0, -1.0], [0.0, 1.0, 0.0]])
#: Slot of OBJ faces before the first ``usemtl`` (no material name); not a valid usemtl name.
_NO_MTL = "\x00no material"
#: The kind of file in messages and in :data:`render.limits.FILE_SIZE_LIMITS_BYTES`.
KIND = "mesh file"
#: Largest PLY header read, bytes (a header lists elements and properties: a few hundred bytes).
_MAX_PLY_HEADER = 64 * 1024


@dataclass(frozen=True)
class MeshPiece:
    """Triangles of one mesh and material of a file (``part.slot`` is a placeholder)."""

    part: Part
    mesh_name: str
    material_name: str  # "" when the file gives none


@dataclass(frozen=True)
class MeshFile:
    """A mesh file read: its pieces (in file order) and the features it had that are ignored."""

    path: str
    format: str
    pieces: tuple[MeshPiece, ...]
    ignored: tuple[str, ...] = field(default=())

    @property
    def names(self) -> tuple[str, ...]:
        """Every mesh name and material name of the file, sorted, each once."""
        return tuple(sorted({n for p in self.pieces for n in (p.mesh_name, p.material_name) if n}))

    def unmapped(self, materials: Mapping[str, str]) -> tuple[str, ...]:
        """Names of the pieces ``materials`` gives no material: the material name of each
        piece whose mesh name and material name are both missing from it (its mesh name when
        it has no material name)."""
        out = {p.material_name or p.mesh_name for p in self.pieces if _key(p, materials) is None}
        return tuple(sorted(out))

    @property
    def n_triangles(self) -> int:
        return sum(p.part.n_triangles for p in self.pieces)

    def parts(self, materials: Mapping[str, str]) -> list[Part]:
        """The pieces as :class:`~render.geometry.shapes.Part` s whose slot is the name
        ``materials`` maps: the mesh name if it is a key of ``materials``, else the material
        name if that is, else the material name (or the mesh name), which the scene builder
        then gives the geometry's ``material``."""
        out = []
        for p in self.pieces:
            slot = _key(p, materials) or p.material_name or p.mesh_name
            out.append(Part(p.part.triangles_m, p.part.normals, slot))
        return out


def _key(piece: MeshPiece, materials: Mapping[str, str]) -> str | None:
    for name in (piece.mesh_name, piece.material_name):
        if name and name in materials:
            return name
    return None


def mesh_format(path: str | os.PathLike) -> str:
    """The format of a mesh file from its extension ("glTF", "GLB", "PLY", "STL", "OBJ");
    InputError for any other."""
    ext = Path(os.fspath(path)).suffix.lower()
    if ext not in MESH_FORMATS:
        raise input_error(
            path,
            "",
            f"not a mesh format lampcast reads ({ext or 'no extension'}); expected one of {', '.join(MESH_FORMATS)}",
        )
    return MESH_FORMATS[ext]


def default_up_axis(path: str | os.PathLike) -> str:
    """The up axis a file is taken to have unless the scene says: "y" for glTF and GLB (their
    specification), "z" for PLY, STL and OBJ."""
    return _DEFAULT_UP[mesh_format(path)]


def read_mesh(path: str | os.PathLike, *, scale: float = 1.0, up_axis: str | None = None) -> MeshFile:
    """Read a glTF, GLB, PLY, STL or OBJ file (by its extension) into a :class:`MeshFile`.

    ``scale`` multiplies the file's coordinates (metres per file unit); ``up_axis`` is "z",
    "y" or None for the format's own (:func:`default_up_axis`). Raises
    :class:`~render.errors.InputError` naming the file for anything wrong with it, and
    :class:`ValueError` for a bad ``scale`` or ``up_axis`` (arguments, not file content)."""
    if isinstance(scale, bool) or not isinstance(scale, (int, float)) or not math.isfinite(scale) or scale <= 0:
        raise ValueError(f"scale must be a finite number > 0, got {scale!r}")
    fmt = mesh_format(path)
    up = _DEFAULT_UP[fmt] if up_axis is None else up_axis
    if up not in ("y", "z"):
        raise ValueError(f"up_axis must be 'z' or 'y', got {up_axis!r}")
    src = os.fspath(path)
    stem = Path(src).stem or "mesh"
    if fmt == "OBJ":
        from render.geometry.objfile import load_obj

        parts = load_obj(src, scale=float(scale), up_axis=up, default_slot=_NO_MTL)
        pieces = tuple(MeshPiece(p, stem, "" if p.slot == _NO_MTL else p.slot) for p in parts)
        return MeshFile(src, fmt, pieces)
    data = read_user_bytes(src, KIND)
    ignored: list[str] = []
    mesh_names: list[str] = []
    if fmt in ("glTF", "GLB"):
        doc = _gltf_document(data, fmt, src)
        mesh_names = _check_gltf(doc, len(data), src, ignored)
    elif fmt == "PLY":
        _check_ply_header(data, src, ignored)
    elif fmt == "STL" and len(data) == 0:
        raise input_error(src, "", "the STL file is empty: no triangles")
    scene = _trimesh_scene(data, fmt, src)
    pieces = _pieces(scene, fmt, src, stem, mesh_names, float(scale), up)
    if not pieces:
        raise input_error(src, "", f"the {fmt} file has no triangles with non-zero area")
    limits.check_count(sum(p.part.n_triangles for p in pieces), limits.MAX_TRIANGLES, src, "", "the triangles")
    return MeshFile(src, fmt, tuple(pieces), tuple(dict.fromkeys(ignored)))


# --- format checks before trimesh allocates --------------------------------------------------


def _gltf_document(data: bytes, fmt: str, src: str) -> dict:
    """The JSON document of a ``.gltf`` file or of a GLB's JSON chunk (glTF 2.0 §4.4)."""
    if fmt == "GLB":
        if len(data) < 20:
            raise input_error(src, "", "not a GLB file: shorter than its 12-byte header and first chunk header")
        magic, version, length = struct.unpack_from("<4sII", data, 0)
        chunk_length, chunk_type = struct.unpack_from("<II", data, 12)
        if magic != b"glTF":
            raise input_error(src, "", "not a GLB file: it does not start with the bytes 'glTF'")
        if version != 2:
            raise input_error(src, "", f"a GLB file of version {version}; lampcast reads glTF 2.0")
        if length > len(data) or chunk_type != 0x4E4F534A or 20 + chunk_length > len(data):
            raise input_error(src, "", "a broken GLB file: its lengths or its JSON chunk do not fit the file")
        text = data[20 : 20 + chunk_length]
    else:
        text = data
    try:
        doc = json.loads(text.decode("utf-8-sig"))
    except (UnicodeDecodeError, ValueError, RecursionError):
        raise input_error(src, "", f"not a {fmt} file: its JSON cannot be read") from None
    if not isinstance(doc, dict):
        raise input_error(src, "", f"not a {fmt} file: its JSON is not an object")
    return doc


def _check_gltf(doc: dict, size: int, src: str, ignored: list[str]) -> list[str]:
    """Check what lampcast cannot use and counts against the limits; the mesh names."""
    version = str((doc.get("asset") or {}).get("version", "")) if isinstance(doc.get("asset"), dict) else ""
    if not version.startswith("2"):
        raise input_error(src, "asset.version", f"lampcast reads glTF 2.0, the file says {version or 'nothing'!r}")
    required = doc.get("extensionsRequired") or []
    if required:
        names = ", ".join(str(r)[:60] for r in required[:5]) if isinstance(required, list) else "?"
        raise input_error(
            src, "extensionsRequired", f"the file requires glTF extension(s) lampcast cannot read: {names}"
        )
    accessors = doc.get("accessors") or []
    if not isinstance(accessors, list):
        raise input_error(src, "accessors", "expected a list")
    for i, acc in enumerate(accessors):
        count = acc.get("count", 0) if isinstance(acc, dict) else 0
        limits.check_count(count, min(3 * limits.MAX_TRIANGLES, size), src, f"accessors[{i}].count", "the count")
    if doc.get("images") or doc.get("textures"):
        ignored.append("textures")
    meshes = doc.get("meshes") or []
    if not isinstance(meshes, list) or not meshes:
        raise input_error(src, "meshes", "the file has no meshes: nothing to draw")
    names = []
    for i, m in enumerate(meshes):
        name = m.get("name") if isinstance(m, dict) else None
        names.append(name if isinstance(name, str) and name else f"mesh{i}")
        for prim in (m.get("primitives") or []) if isinstance(m, dict) else []:
            attrs = prim.get("attributes") if isinstance(prim, dict) else None
            if isinstance(attrs, dict):
                if any(str(k).startswith("TEXCOORD") for k in attrs):
                    ignored.append("texture coordinates")
                if any(str(k).startswith("COLOR") for k in attrs):
                    ignored.append("vertex colours")
    return names


_PLY_ELEMENT = re.compile(rb"^element\s+(\S+)\s+(\S+)\s*$")


def _check_ply_header(data: bytes, src: str, ignored: list[str]) -> None:
    """PLY element counts within the limits and the file's size (each element takes at least
    one byte); vertex colours and texture coordinates noted as ignored."""
    if not data.startswith(b"ply"):
        raise input_error(src, "line 1", "not a PLY file: it does not start with 'ply'")
    end = data.find(b"end_header", 0, _MAX_PLY_HEADER)
    if end < 0:
        raise input_error(src, "", f"a PLY header without 'end_header' in its first {_MAX_PLY_HEADER:,} bytes")
    element = b""
    for number, line in enumerate(data[:end].splitlines(), start=1):
        m = _PLY_ELEMENT.match(line.strip())
        if m:
            element = m.group(1)
            try:
                count = int(m.group(2))
            except ValueError:
                raise input_error(src, f"line {number}", "an element count that is not a whole number") from None
            name = element.decode("ascii", "replace")[:40]
            limits.check_count(
                count, min(3 * limits.MAX_TRIANGLES, len(data)), src, f"line {number}", f"the count of {name!r}"
            )
        elif line.startswith(b"property") and element == b"vertex":
            prop = line.split()[-1] if line.split() else b""
            if prop in (b"red", b"green", b"blue", b"alpha", b"r", b"g", b"b"):
                ignored.append("vertex colours")
            if prop in (b"u", b"v", b"s", b"t", b"texture_u", b"texture_v"):
                ignored.append("texture coordinates")


# --- trimesh ----------------------------------------------------------------------------------


@contextmanager
def _quiet_trimesh():
    """trimesh's log messages held back while it reads (its logger's level restored after)."""
    log = logging.getLogger("trimesh")
    level = log.level
    log.setLevel(logging.CRITICAL)
    try:
        yield
    finally:
        log.setLevel(level)


class _FolderResolver:
    """Buffers a ``.gltf`` file names, read from its own folder only (size-capped regular
    files; no absolute path, no ``..``); anything else (images) is not read."""

    def __init__(self, folder: Path, src: str):
        self.folder = folder
        self.src = src

    def get(self, name: str) -> bytes:
        parts = PurePosixPath(str(name).replace("\\", "/")).parts
        if not parts or PurePosixPath(name).is_absolute() or ".." in parts or "\x00" in name:
            raise input_error(self.src, "buffers", "a buffer outside the glTF file's folder is not read")
        if PurePosixPath(name).suffix.lower() in (".png", ".jpg", ".jpeg", ".webp", ".ktx2"):
            raise KeyError(name)  # textures are not read
        return read_user_bytes(self.folder.joinpath(*parts), KIND)

    def __getitem__(self, name: str) -> bytes:
        return self.get(name)

    def get_base(self) -> Path:  # used by some trimesh versions for relative names
        return self.folder

    def namespaced(self, namespace: str) -> _FolderResolver:
        return _FolderResolver(self.folder / namespace, self.src)

    def write(self, name, data):  # pragma: no cover - trimesh only writes on export
        raise InputError([])

    def keys(self):  # pragma: no cover
        return iter(())


def _trimesh_scene(data: bytes, fmt: str, src: str):
    try:
        import trimesh
    except ImportError:
        raise input_error(
            src, "", f'reading {fmt} files needs trimesh: pip install "lampcast[mesh]" (or pip install trimesh)'
        ) from None
    kwargs = {}
    if fmt == "glTF":
        kwargs["resolver"] = _FolderResolver(Path(src).parent, src)
    try:
        with _quiet_trimesh():
            return trimesh.load_scene(io.BytesIO(data), file_type=_TRIMESH_TYPE[fmt], process=False, **kwargs)
    except InputError:
        raise
    except (MemoryError, RecursionError):
        raise input_error(src, "", f"the {fmt} file is too large or too deeply nested to read") from None
    except Exception as err:  # trimesh raises many kinds on malformed files
        raise input_error(
            src, "", f"not a readable {fmt} file (the reader stopped with {type(err).__name__})"
        ) from None


def _gltf_mesh_name(key: str, mesh_names: list[str]) -> str:
    """The glTF mesh name of one of trimesh's geometries (trimesh names a mesh's second and
    later primitives NAME_1, NAME_2, ...)."""
    if key in mesh_names:
        return key
    base = re.sub(r"_\d+$", "", key)
    return base if base in mesh_names else key


def _pieces(scene, fmt: str, src: str, stem: str, mesh_names: list[str], scale: float, up: str) -> list[MeshPiece]:
    import trimesh

    turn = _Y_UP_TO_Z_UP if up == "y" else np.eye(3)
    pieces: list[MeshPiece] = []
    kinds_without_faces = set()
    total = 0
    for node in scene.graph.nodes_geometry:
        transform, key = scene.graph[node]
        geom = scene.geometry.get(key)
        if not isinstance(geom, trimesh.Trimesh) or len(geom.faces) == 0:
            kinds_without_faces.add("a point cloud" if isinstance(geom, trimesh.PointCloud) else "lines or points")
            continue
        faces = np.asarray(geom.faces, dtype=np.int64)
        verts = np.asarray(geom.vertices, dtype=np.float64)
        total += faces.shape[0]
        limits.check_count(total, limits.MAX_TRIANGLES, src, "", "the triangles")
        if faces.min() < 0 or faces.max() >= verts.shape[0]:
            raise input_error(src, "", f"a face of {key!r} refers to a vertex that does not exist"[:200])
        T = np.asarray(transform, dtype=np.float64)
        linear = turn @ (scale * T[:3, :3])
        offset = turn @ (scale * T[:3, 3])
        with np.errstate(all="ignore"):
            v = verts @ linear.T + offset
        if not np.all(np.isfinite(v)) or (v.size and np.max(np.abs(v)) > limits.MAX_COORDINATE_M):
            raise input_error(
                src,
                "",
                f"coordinates beyond ±{limits.MAX_COORDINATE_M:g} m (or not finite) after scale {scale:g}; "
                "check the file's units and `scale`",
            )
        if np.linalg.det(linear) < 0:  # a mirroring transform turns the triangles inside out
            faces = faces[:, ::-1]
        tri = v[faces]
        keep = np.any(face_normals(tri) != 0, axis=1)
        if not np.any(keep):
            continue
        material = getattr(getattr(geom.visual, "material", None), "name", None)
        if fmt in ("glTF", "GLB"):
            mesh_name = _gltf_mesh_name(str(key), mesh_names)
            material_name = material if isinstance(material, str) and material else ""
        else:
            mesh_name, material_name = stem, ""
        pieces.append(MeshPiece(flat_part(tri[keep], mesh_name or "mesh"), mesh_name, material_name))
    if not pieces:
        if kinds_without_faces:
            raise input_error(
                src,
                "",
                f"the {fmt} file holds {' and '.join(sorted(kinds_without_faces))} but no faces; "
                "lampcast draws surfaces (triangles) only",
            )
        raise input_error(src, "", f"no triangles in the file: an empty {fmt} file, or not a {fmt} file")
    return pieces
