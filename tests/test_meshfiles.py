"""Mesh files through trimesh (render.geometry.meshfiles) and the scene's ``mesh`` geometry.

The same unit cube, written in each format (STL, PLY and OBJ by hand in ASCII; glTF and GLB
with trimesh's exporter, in glTF's own y-up frame), must give the same triangles, area and
volume. The area 6 m² and volume 1 m³ of a unit cube are analytic; the orientation of faces
follows each format's rule (glTF 2.0 §3.7.2.1: counter-clockwise front faces; the STL and PLY
files here are written counter-clockwise from outside, the common practice of both formats).
"""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np
import pytest

from render.errors import InputError
from render.geometry.shapes import signed_volume_m3, surface_area_m2

trimesh = pytest.importorskip("trimesh")

from render.geometry.meshfiles import read_mesh  # noqa: E402

#: The unit cube [0, 1]³ (m): 8 corners and 12 triangles, counter-clockwise seen from outside.
CUBE_V = np.array([[0, 0, 0], [1, 0, 0], [1, 1, 0], [0, 1, 0], [0, 0, 1], [1, 0, 1], [1, 1, 1], [0, 1, 1]], dtype=float)
CUBE_F = np.array(
    [
        [0, 2, 1], [0, 3, 2],  # bottom, z = 0, normal -z
        [4, 5, 6], [4, 6, 7],  # top, z = 1, normal +z
        [0, 1, 5], [0, 5, 4],  # y = 0, normal -y
        [2, 3, 7], [2, 7, 6],  # y = 1, normal +y
        [1, 2, 6], [1, 6, 5],  # x = 1, normal +x
        [3, 0, 4], [3, 4, 7],  # x = 0, normal -x
    ]
)  # fmt: skip


def _canonical(triangles: np.ndarray) -> set[tuple]:
    """Triangles as a set, each rotated to start at its smallest corner (the cyclic order, so
    the orientation, is kept); coordinates rounded to 1 µm."""
    out = set()
    for t in np.round(np.asarray(triangles, float), 6) + 0.0:
        corners = [tuple(c) for c in t]
        k = corners.index(min(corners))
        out.add(tuple(corners[k:] + corners[:k]))
    return out


def _stl_ascii(path: Path) -> None:
    lines = ["solid cube"]
    for f in CUBE_F:
        a, b, c = CUBE_V[f]
        n = np.cross(b - a, c - a)
        lines += [f"facet normal {n[0]:g} {n[1]:g} {n[2]:g}", "outer loop"]
        lines += [f"vertex {p[0]:g} {p[1]:g} {p[2]:g}" for p in (a, b, c)]
        lines += ["endloop", "endfacet"]
    path.write_text("\n".join([*lines, "endsolid cube", ""]))


def _ply_ascii(path: Path) -> None:
    head = ["ply", "format ascii 1.0", f"element vertex {len(CUBE_V)}", "property float x", "property float y"]
    head += ["property float z", f"element face {len(CUBE_F)}", "property list uchar int vertex_indices", "end_header"]
    body = [f"{x:g} {y:g} {z:g}" for x, y, z in CUBE_V] + [f"3 {a} {b} {c}" for a, b, c in CUBE_F]
    path.write_text("\n".join(head + body) + "\n")


def _obj(path: Path) -> None:
    body = [f"v {x:g} {y:g} {z:g}" for x, y, z in CUBE_V] + [f"f {a + 1} {b + 1} {c + 1}" for a, b, c in CUBE_F]
    path.write_text("\n".join(body) + "\n")


#: Our z-up world to glTF's y-up frame: world (x, y, z) is glTF (x, z, -y) (glTF 2.0 §3.4).
Z_UP_TO_Y_UP = np.array([[1.0, 0, 0], [0, 0, 1.0], [0, -1.0, 0]])


def _gltf_scene(names=(("Cube", "red-paint"),)):
    """A trimesh scene with one mesh per (mesh name, material name), each the cube (shifted
    by 2 m per mesh along x), in glTF's y-up frame."""
    scene = trimesh.Scene()
    for i, (mesh_name, material_name) in enumerate(names):
        m = trimesh.Trimesh((CUBE_V + [2.0 * i, 0, 0]) @ Z_UP_TO_Y_UP.T, CUBE_F, process=False)
        m.visual = trimesh.visual.TextureVisuals(
            material=trimesh.visual.material.PBRMaterial(name=material_name, baseColorFactor=[200, 50, 50, 255])
        )
        scene.add_geometry(m, geom_name=mesh_name, node_name=f"{mesh_name}-node")
    return scene


def _write_all(folder: Path) -> dict[str, Path]:
    files = {"stl": folder / "cube.stl", "ply": folder / "cube.ply", "obj": folder / "cube.obj"}
    _stl_ascii(files["stl"])
    _ply_ascii(files["ply"])
    _obj(files["obj"])
    files["glb"] = folder / "cube.glb"
    files["glb"].write_bytes(_gltf_scene().export(file_type="glb"))
    gltf_dir = folder / "gltf"
    gltf_dir.mkdir()
    for name, data in _gltf_scene().export(file_type="gltf").items():
        (gltf_dir / name).write_bytes(data)
    files["gltf"] = gltf_dir / "model.gltf"
    return files


def test_the_same_cube_in_every_format(tmp_path):
    expected = _canonical(CUBE_V[CUBE_F])
    for fmt, path in _write_all(tmp_path).items():
        mesh = read_mesh(path)  # each format's own up axis: y for glTF and GLB, z for the others
        parts = mesh.parts({})
        tris = np.concatenate([p.triangles_m for p in parts])
        assert _canonical(tris) == expected, fmt  # same corners, same orientation
        assert surface_area_m2(parts) == pytest.approx(6.0, abs=1e-12), fmt  # analytic: 6 faces of 1 m²
        assert signed_volume_m3(parts) == pytest.approx(1.0, abs=1e-12), fmt  # analytic: 1 m³, outward faces


def test_scale_and_up_axis(tmp_path):
    files = _write_all(tmp_path)
    # Centimetres: scale 0.01 gives a 1 cm cube, area 6 cm², volume 1 cm³ (analytic).
    parts = read_mesh(files["stl"], scale=0.01).parts({})
    assert surface_area_m2(parts) == pytest.approx(6e-4, rel=1e-12)
    assert signed_volume_m3(parts) == pytest.approx(1e-6, rel=1e-12)
    # The glTF cube read as z-up stays in glTF's frame: it spans y from 0 to 1 there and z from -1 to 0
    # (world = glTF (x, z, -y) undone), a check of the default turn against the specification's axes.
    parts = read_mesh(files["glb"], up_axis="z").parts({})
    t = np.concatenate([p.triangles_m for p in parts])
    assert t[..., 1].min() == pytest.approx(0.0) and t[..., 1].max() == pytest.approx(1.0)
    assert t[..., 2].min() == pytest.approx(-1.0) and t[..., 2].max() == pytest.approx(0.0)


def test_names_of_meshes_and_materials(tmp_path):
    path = tmp_path / "two.glb"
    path.write_bytes(_gltf_scene((("Wall", "Brick"), ("Door", "Paint"))).export(file_type="glb"))
    mesh = read_mesh(path)
    assert {(p.mesh_name, p.material_name) for p in mesh.pieces} == {("Wall", "Brick"), ("Door", "Paint")}
    assert mesh.names == ("Brick", "Door", "Paint", "Wall")
    # By material name, and the mesh name wins over the material name of the same piece.
    slots = {p.slot for p in mesh.parts({"Brick": "brick", "Door": "object-blue", "Paint": "object-red"})}
    assert slots == {"Brick", "Door"}
    assert mesh.unmapped({"Brick": "brick"}) == ("Paint",)


SCENE = """
[scene]
name = "mesh test"

[[geometry]]
kind = "mesh"
file = "{file}"
{extra}

[[views]]
name = "v"
position_m = [-5, 0.5, 1.6]
target_m = [0.5, 0.5, 0.5]
resolution = [16, 16]
"""


def _scene(tmp_path: Path, file: str, extra: str) -> Path:
    path = tmp_path / "scene.toml"
    path.write_text(SCENE.format(file=file, extra=extra))
    return path


def test_scene_maps_materials_by_name(tmp_path):
    from render.geometry.build import compile_scene
    from render.scene import load_scene

    (tmp_path / "two.glb").write_bytes(_gltf_scene((("Wall", "Brick"), ("Door", "Paint"))).export(file_type="glb"))
    scene = load_scene(_scene(tmp_path, "two.glb", 'materials = { Brick = "brick", Door = "object-blue" }'))
    mesh = compile_scene(scene)
    names = [mesh.material_names[i] for i in mesh.material_id]
    assert names.count("brick") == 12 and names.count("object-blue") == 12
    # The Wall mesh stands at x 0..1, the Door mesh 2 m further (as written).
    door = mesh.triangles_m[np.array(names) == "object-blue"]
    assert door[..., 0].min() == pytest.approx(2.0)

    # An unmapped name without `material` is an error naming the key and the name.
    with pytest.raises(InputError, match=r"geometry\[0\]\.materials.*'Paint'"):
        load_scene(_scene(tmp_path, "two.glb", 'materials = { Brick = "brick" }'))
    # ... which `material` covers.
    scene = load_scene(_scene(tmp_path, "two.glb", 'material = "concrete"\nmaterials = { Brick = "brick" }'))
    names = [compile_scene(scene).material_names[i] for i in compile_scene(scene).material_id]
    assert names.count("brick") == 12 and names.count("concrete") == 12
    # A key that is no name of the file is an error naming the key.
    with pytest.raises(InputError, match=r"geometry\[0\]\.materials\.Roof"):
        load_scene(_scene(tmp_path, "two.glb", 'material = "brick"\nmaterials = { Roof = "brick" }'))


def test_textures_are_a_warning(tmp_path):
    from render.scene import load_scene
    from render.scene.warnings import mesh_features_ignored

    doc = _gltf_scene()
    path = tmp_path / "tex.gltf"
    files = doc.export(file_type="gltf")
    gltf = json.loads(files["model.gltf"])
    gltf["images"] = [{"uri": "bricks.png"}]
    gltf["textures"] = [{"source": 0}]
    for name, data in files.items():
        if name != "model.gltf":
            (tmp_path / name).write_bytes(data)
    path.write_text(json.dumps(gltf))
    scene = load_scene(_scene(tmp_path, "tex.gltf", 'material = "brick"'))
    (warning,) = mesh_features_ignored(scene)
    assert warning.where == "geometry[0].file" and "textures" in warning.message


@pytest.mark.parametrize(
    ("name", "content", "message"),
    [
        ("broken.glb", b"glTF\x02\x00\x00\x00\xff\xff\xff\x00", "GLB"),
        ("broken.gltf", b'{"asset": {"version": "2.0"}, "meshes": [{"primitives": [{"attributes": {"POSITION": 7}}]}]}', "glTF"),
        ("draco.gltf", b'{"asset": {"version": "2.0"}, "extensionsRequired": ["KHR_draco_mesh_compression"]}', "KHR_draco"),
        ("empty.gltf", b'{"asset": {"version": "2.0"}}', "no meshes"),
        ("v1.gltf", b'{"asset": {"version": "1.0"}, "meshes": []}', "glTF 2.0"),
        ("garbage.ply", b"not a ply file\n", "PLY"),
        ("huge.ply", b"ply\nformat ascii 1.0\nelement vertex 99999999999\nend_header\n", "line 3"),
        ("empty.stl", b"", "STL"),
        ("garbage.stl", b"\x00" * 84 + b"\x01" * 7, "STL"),
        ("model.3ds", b"\x00", "not a mesh format"),
    ],
)  # fmt: skip
def test_bad_files_name_the_file(tmp_path, name, content, message):
    path = tmp_path / name
    path.write_bytes(content)
    with pytest.raises(InputError, match=message) as err:
        read_mesh(path)
    assert all(p.source == str(path) for p in err.value.problems)


def test_point_cloud_is_refused(tmp_path):
    path = tmp_path / "cloud.ply"
    path.write_bytes(trimesh.PointCloud(CUBE_V).export(file_type="ply"))
    with pytest.raises(InputError, match="point cloud") as err:
        read_mesh(path)
    assert err.value.problems[0].source == str(path)


def test_gltf_buffers_stay_in_its_folder(tmp_path):
    files = _gltf_scene().export(file_type="gltf")
    gltf = json.loads(files["model.gltf"])
    gltf["buffers"][0]["uri"] = "../elsewhere.bin"
    (tmp_path / "sub").mkdir()
    path = tmp_path / "sub" / "model.gltf"
    path.write_text(json.dumps(gltf))
    with pytest.raises(InputError, match="outside the glTF file's folder"):
        read_mesh(path)


def test_mirroring_node_keeps_faces_outward(tmp_path):
    """A node scaled by -1 on x mirrors the cube; its faces must still face out (volume +1 m³,
    analytic) rather than in."""
    scene = _gltf_scene()
    scene.graph.update(frame_to="Cube-node", matrix=np.diag([-1.0, 1.0, 1.0, 1.0]))
    path = tmp_path / "mirror.glb"
    path.write_bytes(scene.export(file_type="glb"))
    parts = read_mesh(path).parts({})
    assert signed_volume_m3(parts) == pytest.approx(1.0, abs=1e-12)
