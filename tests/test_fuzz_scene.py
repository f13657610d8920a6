"""Fuzz tests of the scene reader and the OBJ reader: mutated and generated files.

Two readers are fed generated inputs:

* :func:`render.scene.load_scene` (and, when a scene loads and is small enough to build
  quickly, :func:`render.geometry.build.compile_scene`), with mutations of the bundled scenes
  ``scenes/tests/*.toml`` and ``scenes/demo/linden_row.toml``: numbers replaced by huge
  integers, ±1e308, -1, NaN, infinities, strings, arrays or tables; keys deleted or added;
  list entries (tables) duplicated; file keys (``file``, ``lamp``, ``photometry``) pointed at
  ``/dev/zero``, ``/etc/passwd``, a file that must not be quoted, missing files, folders,
  symbolic links (out of the folder, in a loop, to a device), absolute and ``..`` paths and
  names with a NUL byte; and on the text: truncation, a NUL byte, a flipped byte, a duplicated
  line (a duplicated table header), a number of 5000 digits, arrays nested 5000 deep. Loaded
  with and without strict paths.
* :func:`render.geometry.objfile.load_obj`, with mutations of ``tests/data/obj/*.obj`` and
  random OBJ text: huge, zero and negative indices, continued lines, NaN and huge
  coordinates, faces of 0 to 1000 vertices, normals of any length, random scales and axes.

Each input only has to keep the reader contract of ``tests/fuzzing.py`` (a result or an
InputError, within the time limit, never quoting another file: no "root:" of /etc/passwd, no
marker of the secret file), with no numpy overflow or invalid-value warning on the way; a
result has to be usable: every number of a loaded scene finite, every coordinate within
:data:`render.limits.MAX_COORDINATE_M`, a compiled mesh finite with unit normals, OBJ parts
finite with unit normals and no zero-area triangle. The CI budget is small;
``LAMPCAST_FUZZ=long``, ``LAMPCAST_FUZZ_EXAMPLES=N`` or ``tools/fuzz.py`` run deeper (the
number of inputs read is printed with ``-s``).

Sources: the contract is the project's own input rule (tests/fuzzing.py, scenes/README.md);
the TOML syntax is TOML v1.0.0, the OBJ statements the Wavefront OBJ specification (Appendix
B1 of the Advanced Visualizer manual) **(from memory)**; binary64 limits: IEEE 754.
"""

from __future__ import annotations

import copy
import json
import math
import re
import shutil
from pathlib import Path

import numpy as np
import pytest
from fuzzing import (
    BYTE_MUTATIONS,
    HOSTILE_FILE_REFERENCES,
    InputTally,
    checked_read,
    delete_line,
    duplicate_line,
    fuzz_settings,
    insert_junk,
    insert_nul,
    replace_token,
    truncate,
)
from hypothesis import given
from hypothesis import strategies as st

from render.geometry.build import compile_scene
from render.geometry.objfile import load_obj
from render.limits import MAX_COORDINATE_M, MAX_POLYGON_VERTICES
from render.scene import load_scene

ROOT = Path(__file__).resolve().parents[1]
SCENE_SEEDS = [ROOT / "scenes" / "demo" / "linden_row.toml", *sorted((ROOT / "scenes" / "tests").glob("*.toml"))]
OBJ_DATA = ROOT / "tests" / "data" / "obj"
OBJ_SEEDS = sorted(OBJ_DATA.glob("*.obj"))
OBJ_SEED_BYTES = [p.read_bytes() for p in OBJ_SEEDS]
PHOTOMETRY_DATA = ROOT / "tests" / "data" / "photometry"

SECRET_MARKER = "SECRET-MARKER-5c1e"
FORBIDDEN = ("root:", SECRET_MARKER)  # text of other files that no message may show

#: Inputs read per generator, of those how many read without an InputError and how many compiled.
TALLY = InputTally("scene and OBJ fuzz", ("read", "compiled"))
report_inputs_read = TALLY.report_fixture()

#: Scenes cheaper than this (objects, frontage units, markings, luminaires) are compiled too.
COMPILE_BUDGET = 300
#: OBJ triangles a scene may hold and still be compiled in the fuzz run.
COMPILE_TRIANGLES = 200_000

# --------------------------------------------------------------------------------------------
# The folder the cases are read in: referenced files of every kind, inside and outside it
# --------------------------------------------------------------------------------------------

TRIANGLE_OBJ = "v 0 0 0\nv 1 0 0\nv 0 1 0\nf 1 2 3\n"
FLAT_LAMP = "wavelength_nm, relative_power\n" + "".join(f"{w}, 1.0\n" for w in range(380, 781, 10))

FILE_VARIANTS = [
    "tri.obj",
    "cube_vn.obj",
    "sub/tri.obj",
    "sub/../tri.obj",
    "./tri.obj",
    "../outside.obj",
    *HOSTILE_FILE_REFERENCES,
    "missing.obj",
    "sub/missing/deeper.obj",
    "sub",
    ".",
    "/",
    "",
    "link-out.obj",
    "loop.obj",
    "zero.obj",
    "a\x00b.obj",
    "/etc/passwd\x00.obj",
    "x" * 5000 + ".obj",
    "lamp.csv",
    "../outside.csv",
    "lum.ies",
    "tilt.ies",
    "tilt_out.ies",
    "secret.ies",
]


@pytest.fixture(scope="module")
def fuzz_dir(tmp_path_factory) -> Path:
    """The scene folder (module-scoped: hypothesis runs many inputs per test function)."""
    top = tmp_path_factory.mktemp("scene-fuzz")
    root = top / "scenes"
    (root / "sub").mkdir(parents=True)
    for folder in (root, root / "sub"):
        (folder / "tri.obj").write_text(TRIANGLE_OBJ)
    shutil.copy(OBJ_DATA / "cube_vn.obj", root / "cube_vn.obj")
    (top / "outside.obj").write_text(TRIANGLE_OBJ)
    (top / "outside.csv").write_text(FLAT_LAMP)
    (root / "lamp.csv").write_text(FLAT_LAMP)
    shutil.copy(PHOTOMETRY_DATA / "rotational_1995.ies", root / "lum.ies")
    shutil.copy(PHOTOMETRY_DATA / "tilt_file.ies", root / "tilt.ies")
    shutil.copy(PHOTOMETRY_DATA / "tilt_file.tlt", root / "tilt_file.tlt")
    shutil.copy(PHOTOMETRY_DATA / "tilt_file.tlt", top / "outside.tlt")
    tilt_text = (PHOTOMETRY_DATA / "tilt_file.ies").read_text()
    (root / "tilt_out.ies").write_text(tilt_text.replace("TILT=tilt_file.tlt", "TILT=../outside.tlt"))
    (root / "secret.ies").write_text(tilt_text.replace("TILT=tilt_file.tlt", "TILT=secret.txt"))
    (root / "secret.txt").write_text(f"root:x:0:0:{SECRET_MARKER}:/root:/bin/bash\n2 1 0 90\n380, 1\n")
    (root / "link-out.obj").symlink_to(top / "outside.obj")
    (root / "loop.obj").symlink_to(root / "loop.obj")
    if Path("/dev/zero").exists():
        (root / "zero.obj").symlink_to("/dev/zero")
    return root


def file_variant(index: int, fuzz_dir: Path) -> str:
    return FILE_VARIANTS[index % len(FILE_VARIANTS)].replace("{outside}", str(fuzz_dir.parent / "outside.obj"))


# --------------------------------------------------------------------------------------------
# TOML written back from a mutated document (tomllib reads only)
# --------------------------------------------------------------------------------------------

_BARE = re.compile(r"[A-Za-z0-9_-]+")


def toml_key(key: str) -> str:
    return key if _BARE.fullmatch(key) else json.dumps(key)


def toml_value(value) -> str:
    """One TOML value, inline (tables as inline tables, strings as JSON-escaped basic strings,
    which TOML reads the same; a lone surrogate or DEL makes the file invalid TOML, which is
    a case too)."""
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, int):
        return str(value)
    if isinstance(value, float):
        if math.isnan(value):
            return "nan"
        if math.isinf(value):
            return "inf" if value > 0 else "-inf"
        return repr(value)
    if isinstance(value, str):
        return json.dumps(value)
    if isinstance(value, list):
        return "[" + ", ".join(toml_value(v) for v in value) + "]"
    if isinstance(value, dict):
        return "{" + ", ".join(f"{toml_key(k)} = {toml_value(v)}" for k, v in value.items()) + "}"
    return json.dumps(str(value))  # dates and times: as text


def toml_text(doc: dict) -> str:
    return "".join(f"{toml_key(k)} = {toml_value(v)}\n" for k, v in doc.items())


def load_seed(path: Path) -> dict:
    import tomllib

    doc = tomllib.loads(path.read_text())
    # The one reference of the bundled scenes to a file beside them: rewritten to its copy.
    for entry in doc.get("geometry", []):
        if "file" in entry:
            entry["file"] = Path(entry["file"]).name
    return doc


SCENE_SEED_DOCS = [load_seed(p) for p in SCENE_SEEDS]


def test_seed_scenes_written_back_load(fuzz_dir):
    # The TOML writer of this file round-trips every seed, so mutations start from valid scenes.
    for doc in SCENE_SEED_DOCS:
        path = fuzz_dir / "seed.toml"
        path.write_text(toml_text(doc))
        assert load_scene(path).views


# --------------------------------------------------------------------------------------------
# (a) mutated scenes
# --------------------------------------------------------------------------------------------

HOSTILE_VALUES = [
    10**400,
    -(10**400),
    10**20,
    2**63,
    2**31,
    1e308,
    -1e308,
    1.7976931348623157e308,
    5e-324,
    1e-300,
    -1,
    0,
    1,
    0.5,
    -0.0,
    math.nan,
    math.inf,
    -math.inf,
    8192,
    8193,
    4097,
    10_000,
    10_001,
    1000,
    1001,
    2000.0,
    2000.0001,
    1e4,
    1e4 + 1,
    "",
    "x",
    "nan",
    "../../etc/passwd",
    "\x00",
    "\x1b[31mred",
    "é" * 3,
    True,
    False,
    [],
    [0],
    [0, 0],
    [0, 0, 0],
    [1e308, 1e308, 1e308],
    [10**400, 0],
    [-1e308, 0, 1e308],
    [math.nan, 0, 0],
    [[0, 0], [1, 0], [0, 1]],
    [[0, 0], [1e4, 0], [0, 1e4], [1e4, 1e4]],
    [[0, 0]] * 1001,
    [{"a": 1}],
    {},
    {"a": 1},
]

FILE_KEYS = ("file", "lamp", "photometry")


def paths_of(node, prefix=()):
    """Every path (tuple of keys and indices) into a document, parents before children."""
    yield prefix
    if isinstance(node, dict):
        for k, v in node.items():
            yield from paths_of(v, (*prefix, k))
    elif isinstance(node, list):
        for i, v in enumerate(node):
            yield from paths_of(v, (*prefix, i))


def get(doc, path):
    for k in path:
        doc = doc[k]
    return doc


def perturbed(value, draw, nudge: bool = False):
    """A number scaled, negated or pushed to the edge of its range (``nudge``: changed by a
    few per cent, which often keeps the scene valid)."""
    factors = [0.97, 1.03, 0.5, 1.5] if nudge else [-1.0, 10.0, 1e3, 1e6, 1e-3, 1e300, 0.0]
    factor = draw(st.sampled_from(factors))
    try:
        out = value * factor
    except OverflowError:
        out = math.inf
    return int(out) if isinstance(value, int) and math.isfinite(out) else out


def mutate_doc(doc: dict, draw, fuzz_dir: Path) -> None:
    op = draw(
        st.sampled_from(["replace", "replace", "perturb", "nudge", "delete", "duplicate", "key", "file", "add_obj"])
    )
    paths = [p for p in paths_of(doc) if p]
    if op == "add_obj":
        entry = {"kind": "obj", "file": file_variant(draw(st.integers(0, len(FILE_VARIANTS) - 1)), fuzz_dir)}
        entry |= draw(st.sampled_from([{"material": "wood"}, {"materials": {"body": "wood"}}, {}]))
        entry |= draw(st.sampled_from([{}, {"scale": 1e-3}, {"scale": 1e300}, {"up_axis": "y"}, {"scale": 5e-324}]))
        doc.setdefault("geometry", [])
        if isinstance(doc["geometry"], list):
            doc["geometry"].append(entry)
        return
    if op == "file":
        holders = [p for p in paths if p[-1] in FILE_KEYS] or [("luminaires", 0, "lamp")]
        path = draw(st.sampled_from(holders))
        try:
            parent = get(doc, path[:-1])
        except (KeyError, IndexError, TypeError):
            return
        if isinstance(parent, dict):
            parent[path[-1]] = file_variant(draw(st.integers(0, len(FILE_VARIANTS) - 1)), fuzz_dir)
        return
    if not paths:
        return
    path = draw(st.sampled_from(paths))
    parent, key = get(doc, path[:-1]), path[-1]
    if op == "replace":
        parent[key] = copy.deepcopy(draw(st.sampled_from(HOSTILE_VALUES)))
    elif op in ("perturb", "nudge"):
        value = parent[key]
        if isinstance(value, (int, float)) and not isinstance(value, bool):
            parent[key] = perturbed(value, draw, op == "nudge")
        elif isinstance(value, list) and value and all(isinstance(v, (int, float)) for v in value):
            k = draw(st.integers(0, len(value) - 1))
            value[k] = perturbed(value[k], draw, op == "nudge")
    elif op == "delete":
        del parent[key]
    elif op == "duplicate":
        if isinstance(parent, list):
            parent.insert(key, copy.deepcopy(parent[key]))
        elif isinstance(parent, dict) and isinstance(parent[key], list) and parent[key]:
            parent[key].extend(copy.deepcopy(parent[key]) * draw(st.integers(1, 3)))
    elif op == "key" and isinstance(parent[key], dict):
        parent[key][draw(st.sampled_from(["extra", "name", "lenght_m", "\x00", "a b", "x" * 100]))] = draw(
            st.sampled_from(HOSTILE_VALUES)
        )


def mutate_text(text: str, draw) -> str:
    op = draw(st.sampled_from(["truncate", "nul", "flip", "duplicate_line", "huge_number", "deep", "bom"]))
    if op == "truncate":
        return truncate(text, draw)
    if op == "nul":
        return insert_nul(text, draw)
    if op == "flip":
        if not text:
            return text
        k = draw(st.integers(0, len(text) - 1))
        return text[:k] + draw(st.characters()) + text[k + 1 :]
    if op == "duplicate_line":
        lines = text.split("\n")
        k = draw(st.integers(0, len(lines) - 1))
        return "\n".join(lines[: k + 1] + [lines[k]] + lines[k + 1 :])
    if op == "huge_number":
        return text + "\n[render]\nseed = 1" + "0" * 5000 + "\n"
    if op == "deep":
        return text + "\nzz = " + "[" * 5000 + "]" * 5000 + "\n"
    return "\ufeff" + text


def scene_cost(scene) -> tuple[int, int]:
    """(parts to build, OBJ triangles) of a loaded scene: what compiling it costs."""
    cost = len(scene.objects) + sum(f.units for f in scene.frontages) + len(scene.markings) + len(scene.luminaires)
    triangles = sum(p.n_triangles for o in scene.objects for p in o.params.get("_parts") or [])
    return cost, triangles


def check_scene_result(scene) -> None:
    """A loaded scene is usable: finite numbers, coordinates within the limit."""
    for lum in scene.luminaires:
        assert np.all(np.isfinite(lum.position_m)) and np.all(np.abs(lum.position_m) <= 3 * MAX_COORDINATE_M)
        assert lum.lumens is None or (math.isfinite(lum.lumens) and lum.lumens > 0)
        assert math.isfinite(lum.rotation_deg) and math.isfinite(lum.tilt_deg)
        assert 0 <= lum.dimming <= 1 and 0 < lum.maintenance_factor <= 1
    for view in scene.views:
        assert np.all(np.isfinite(view.position_m)) and np.all(np.isfinite(view.target_m))
        assert 0 < view.width_px * view.height_px * scene.render.samples_per_pixel < 2**31
    for o in scene.objects:
        assert np.all(np.isfinite(o.position_m)) and np.all(np.abs(o.position_m) <= 2 * MAX_COORDINATE_M)


def check_mesh(mesh) -> None:
    assert np.all(np.isfinite(mesh.triangles_m)) and np.all(np.isfinite(mesh.normals))
    assert np.all(np.abs(mesh.triangles_m) <= 3 * MAX_COORDINATE_M)
    lengths = np.linalg.norm(mesh.normals, axis=-1)
    assert np.allclose(lengths, 1.0, atol=1e-6), "shading normals must be unit vectors"


def read_scene(text: str, fuzz_dir: Path, strict: bool, counter: str) -> None:
    path = fuzz_dir / "case.toml"
    path.write_bytes(text.encode("utf-8", "surrogatepass"))
    # No numpy overflow or 0/0 on the way either, in reading or in compiling.
    read = lambda: load_scene(path, strict_paths=strict)  # noqa: E731
    scene = TALLY.read(counter, read, check_scene_result, forbidden_in_message=FORBIDDEN)
    if scene is None:
        return
    cost, triangles = scene_cost(scene)
    if cost > COMPILE_BUDGET or triangles > COMPILE_TRIANGLES:
        return
    mesh = checked_read(lambda: compile_scene(scene), check_mesh, forbidden_in_message=FORBIDDEN)
    if mesh is not None:
        TALLY.count("compiled", counter)


@fuzz_settings(default=100)
@given(data=st.data())
def test_fuzz_mutated_scenes(fuzz_dir, data):
    seed = data.draw(st.integers(0, len(SCENE_SEED_DOCS) - 1), label="seed")
    doc = copy.deepcopy(SCENE_SEED_DOCS[seed])
    for _ in range(data.draw(st.integers(1, 3), label="mutations")):
        mutate_doc(doc, data.draw, fuzz_dir)
    text = toml_text(doc)
    if data.draw(st.integers(0, 3), label="text mutation") == 0:
        text = mutate_text(text, data.draw)
    read_scene(text, fuzz_dir, data.draw(st.booleans(), label="strict"), "scene")


# --------------------------------------------------------------------------------------------
# (b) OBJ files: mutations of the test files and random OBJ text
# --------------------------------------------------------------------------------------------

HOSTILE_OBJ_TOKENS = [
    "1e308",
    "-1e308",
    "1e309",
    "5e-324",
    "1e-300",
    "nan",
    "NaN",
    "inf",
    "-inf",
    "0",
    "-0",
    "-1",
    "-2147483649",
    "9223372036854775808",
    "9" * 400,
    "9" * 5000,
    "1/2/3/4",
    "//",
    "1//",
    "/1",
    "1/-1/-1",
    "0x10",
    "1_0",
    "１",
    "\\",
    "#",
    "",
    "\x00",
]
_OBJ_TOKEN = re.compile(rb"[^\s]+")
OBJ_MUTATIONS = ["flip", "token", "number", "truncate", "duplicate_line", "delete_line", "nul", "continue", "insert"]
_OBJ_NUMBER = re.compile(rb"(?<![\w.])-?[0-9]+(\.[0-9]*)?(?![\w.])")
#: The valid test files, drawn more often so that mutations often still read.
OBJ_VALID = [
    k for k, p in enumerate(OBJ_SEEDS) if p.name in ("cube_vn.obj", "quad.obj", "cube_negative.obj", "concave_face.obj")
]


def mutate_obj(data: bytes, draw) -> bytes:
    kind = draw(st.sampled_from(OBJ_MUTATIONS))
    if kind in ("flip", "truncate"):
        return BYTE_MUTATIONS[kind](data, draw)
    if kind == "token":
        return replace_token(data, draw, _OBJ_TOKEN, HOSTILE_OBJ_TOKENS)
    if kind == "number":  # a number replaced by a nearby one (often still a valid file)
        spans = [m.span() for m in _OBJ_NUMBER.finditer(data)]
        if not spans:
            return data
        a, b = spans[draw(st.integers(0, len(spans) - 1))]
        value = float(data[a:b]) + draw(st.sampled_from([-1.0, 1.0, 0.5, 1e-9, -1e-12]))
        return data[:a] + (str(int(value)) if b"." not in data[a:b] else repr(value)).encode() + data[b:]
    lines = data.split(b"\n")
    k = draw(st.integers(0, len(lines) - 1))
    if kind == "duplicate_line":
        return duplicate_line(lines, draw, k, most=50)
    if kind == "delete_line":
        return delete_line(lines, draw, k)
    if kind == "continue":  # a backslash at the end of a line, or of many
        n = draw(st.integers(1, 20))
        return b"\n".join(line + b" \\" if k <= i < k + n else line for i, line in enumerate(lines))
    if kind == "nul":
        return insert_nul(data, draw)
    return insert_junk(data, draw)


HOSTILE_COORDINATE = st.one_of(
    st.sampled_from(["nan", "inf", "-inf", "1e308", "1e-320", "5e-324", str(MAX_COORDINATE_M), "1e5", "1e200"]),
    st.floats().map(repr),
)
CLEAN_COORDINATE = st.floats(-10, 10).map(repr)


@st.composite
def face_reference(draw, n_v: int, n_n: int, clean: bool) -> str:
    """One face reference: an index in range (positive or negative), or (not clean) out of
    range, 0 or huge, with or without texture and normal indices."""
    in_range = st.integers(1, max(1, n_v)) | st.integers(-max(1, n_v), -1)
    hostile = st.sampled_from([0, n_v + 1, -n_v - 1, 2**63, -(2**63), 10**30])
    index = draw(in_range if clean else in_range | hostile)
    if clean:
        form = draw(st.sampled_from(["{v}", "{v}//{n}"] if n_n else ["{v}"]))
        return form.format(v=index, n=draw(st.integers(1, max(1, n_n))))
    form = draw(st.sampled_from(["{v}", "{v}", "{v}/{t}", "{v}//{n}", "{v}/{t}/{n}", "{v}/", "{v}//"]))
    return form.format(v=index, t=draw(st.integers(-3, 3)), n=draw(st.integers(-3, 3)))


@st.composite
def obj_text(draw) -> str:
    """A random OBJ file: vertices, normals, texture coordinates, faces of 0 to 1000
    references (a regular or star-shaped polygon ring, or indices drawn at random), materials,
    comments and continued lines. Half the files are clean (finite coordinates, indices in
    range) so that the results are checked too; the others take hostile values anywhere."""
    clean = draw(st.booleans())
    coordinate = CLEAN_COORDINATE if clean else CLEAN_COORDINATE | HOSTILE_COORDINATE
    lines = []
    n_v = draw(st.integers(3 if clean else 0, 40))
    for _ in range(n_v):
        n_coordinates = 3 if clean else draw(st.sampled_from([3, 3, 3, 2, 4, 6]))
        lines.append("v " + " ".join(draw(coordinate) for _ in range(n_coordinates)))
    n_n = draw(st.integers(0, 4))
    for _ in range(n_n):
        normal = [draw(coordinate) for _ in range(3)]
        if clean and all(float(c) == 0 for c in normal):
            normal[2] = "1"
        lines.append("vn " + " ".join(normal))
    for _ in range(draw(st.integers(0, 3))):
        lines.append("vt " + " ".join(draw(coordinate) for _ in range(draw(st.integers(1, 3)))))
    polygon = draw(st.sampled_from(["none", "regular", "star"]))
    if polygon != "none":  # one big polygon ring appended as vertices, then a face over it
        n = draw(st.integers(3, MAX_POLYGON_VERTICES + (0 if clean else 1)))
        radius = [1.0, 0.4] if polygon == "star" else [1.0, 1.0]
        for k in range(n):
            r = radius[k % 2]
            lines.append(f"v {r * math.cos(2 * math.pi * k / n):.17g} {r * math.sin(2 * math.pi * k / n):.17g} 0")
        first = n_v + 1
        n_v += n
        lines.append("f " + " ".join(str(first + k) for k in range(n)))
    for _ in range(draw(st.integers(0 if polygon != "none" else 1, 12))):
        statement = draw(st.sampled_from(["f", "f", "f", "usemtl", "g", "#", "s", "curv", "mtllib"]))
        if statement == "f":
            # Clean faces are triangles (random vertices make a self-crossing polygon).
            n_refs = 3 if clean else draw(st.integers(0, 8) | st.integers(0, 1000))
            refs = [draw(face_reference(n_v, n_n, clean)) for _ in range(min(n_refs, 8))]
            if n_refs > 8:  # long faces: indices drawn as a block
                start = draw(st.integers(1, max(1, n_v)))
                refs += [str(1 + (start + k) % max(1, n_v)) for k in range(n_refs - 8)]
            lines.append("f " + " ".join(refs))
        elif statement == "usemtl":
            lines.append(
                "usemtl " + draw(st.sampled_from(["paint", "glass", "a b", "x" * 300] + ([] if clean else [""])))
            )
        else:
            lines.append(f"{statement} " + draw(st.text(max_size=10)).replace("\\", ""))
    # Continued lines: a face split over several lines with a backslash at the end of each
    # but the last (the same statement); in a hostile file also a backslash after any line.
    newline = draw(st.sampled_from(["\n", "\r\n", "\r"]))
    out = []
    for line in lines:
        if line.startswith("f ") and draw(st.integers(0, 4)) == 0:
            tokens = line.split(" ")
            cuts = sorted(draw(st.lists(st.integers(1, len(tokens) - 1), max_size=5, unique=True)))
            pieces = [" ".join(tokens[a:b]) for a, b in zip([0, *cuts], [*cuts, len(tokens)])]
            line = (" \\" + newline).join(pieces)
        elif not clean and draw(st.integers(0, 9)) == 0:
            line += " \\"
        out.append(line)
    return newline.join(out) + newline


OBJ_ARGUMENTS = st.tuples(
    st.sampled_from([1.0, 1.0, 1.0, 1.0, 0.01, 1e3, 1e-300, 5e-324, 1e10, 1e300]), st.sampled_from(["z", "y"])
)


def check_parts(parts) -> None:
    """OBJ parts are usable: finite, within the coordinate limit, unit normals, no zero-area
    triangle."""
    assert parts
    for part in parts:
        t, n = part.triangles_m, part.normals
        assert t.shape[0] > 0 and np.all(np.isfinite(t)) and np.all(np.isfinite(n))
        assert np.all(np.abs(t) <= MAX_COORDINATE_M * (1 + 1e-12))
        assert np.allclose(np.linalg.norm(n, axis=-1), 1.0, atol=1e-9), "normals must be unit vectors"
        area2 = np.linalg.norm(np.cross(t[:, 1] - t[:, 0], t[:, 2] - t[:, 0]), axis=-1)
        assert np.all(area2 > 0), "zero-area triangles are dropped"


def read_obj(data: bytes, fuzz_dir: Path, arguments: tuple[float, str], counter: str) -> None:
    path = fuzz_dir / "case.obj"
    path.write_bytes(data)
    scale, up_axis = arguments
    TALLY.read(
        counter, lambda: load_obj(path, scale=scale, up_axis=up_axis), check_parts, forbidden_in_message=FORBIDDEN
    )


@fuzz_settings()
@given(data=st.data())
def test_fuzz_mutated_obj_files(fuzz_dir, data):
    seed = data.draw(st.sampled_from(OBJ_VALID) | st.integers(0, len(OBJ_SEED_BYTES) - 1), label="seed")
    content = OBJ_SEED_BYTES[seed]
    for _ in range(data.draw(st.integers(1, 3), label="mutations")):
        content = mutate_obj(content, data.draw)
    read_obj(content, fuzz_dir, data.draw(OBJ_ARGUMENTS, label="arguments"), "obj mutated")


@fuzz_settings()
@given(text=obj_text(), arguments=OBJ_ARGUMENTS)
def test_fuzz_random_obj_files(fuzz_dir, text, arguments):
    read_obj(text.encode("utf-8", "surrogatepass"), fuzz_dir, arguments, "obj random")
