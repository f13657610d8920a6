"""Scene files: the schema's checks, the street builder and luminaire row placement.

Geometry checks here are analytic (positions follow from the documented cross-section); the
error-class checks assert that every message names the file and the key path or line, as the
scene format (scenes/README.md) promises.
"""

from __future__ import annotations

import math
from pathlib import Path

import numpy as np
import pytest

from render.errors import InputError
from render.geometry.build import compile_scene
from render.scene import check_scene, load_scene

ROOT = Path(__file__).resolve().parents[1]
SCENES = ROOT / "scenes"

BASE = """
[street]
length_m = 30.0
carriageway_width_m = 6.0

[[views]]
name = "v"
position_m = [1.0, 0.0]
target_m = [20.0, 0.0, 0.0]
resolution = [16, 9]
"""


def write(tmp_path: Path, text: str, name: str = "s.toml") -> Path:
    p = tmp_path / name
    p.write_text(text)
    return p


def problems_of(path: Path) -> list:
    with pytest.raises(InputError) as info:
        check_scene(path)
    return info.value.problems


def test_bundled_scenes_check():
    for path in [SCENES / "demo" / "linden_row.toml", *sorted((SCENES / "tests").glob("*.toml"))]:
        scene = check_scene(path)
        assert scene.views, path


def test_demo_has_tagged_objects_and_two_setups():
    scene = load_scene(SCENES / "demo" / "linden_row.toml")
    inspected = [o.tag.name for o in scene.objects if o.tag.inspect]
    assert {"red hatchback", "blue saloon", "green bin"} <= set(inspected)
    assert {"sodium", "led-warm"} <= set(scene.setups)


# ---- error classes: each message names the file and the key (or line) ----------------------


def test_unknown_key_with_did_you_mean(tmp_path):
    p = write(tmp_path, BASE.replace("length_m = 30.0", "lenght_m = 30.0\nlength_m = 30.0"))
    (problem,) = problems_of(p)
    assert problem.source == str(p)
    assert problem.where == "street.lenght_m"
    assert "did you mean 'length_m'" in problem.message


def test_missing_field(tmp_path):
    p = write(tmp_path, BASE.replace("length_m = 30.0\n", ""))
    (problem,) = problems_of(p)
    assert problem.where == "street.length_m" and "missing" in problem.message


def test_wrong_type(tmp_path):
    p = write(tmp_path, BASE.replace("length_m = 30.0", 'length_m = "30 m"'))
    (problem,) = problems_of(p)
    assert problem.where == "street.length_m" and "expected a number in m" in problem.message


def test_unit_in_key_name_is_required(tmp_path):
    # `height` instead of `mounting_height_m`: the units live in the key names.
    text = BASE + '\n[[luminaire_rows]]\nspacing_m = 20.0\ncount = 1\nheight = 6.0\nlamp = "led-4000k-cie-b3"\n'
    problems = problems_of(write(tmp_path, text))
    wheres = {p.where for p in problems}
    assert "luminaire_rows[0].height" in wheres
    assert "luminaire_rows[0].mounting_height_m" in wheres


@pytest.mark.parametrize("value", ["nan", "inf", "-inf"])
def test_non_finite(tmp_path, value):
    p = write(tmp_path, BASE.replace("carriageway_width_m = 6.0", f"carriageway_width_m = {value}"))
    (problem,) = problems_of(p)
    assert problem.where == "street.carriageway_width_m"


def test_negative_size(tmp_path):
    p = write(tmp_path, BASE.replace("length_m = 30.0", "length_m = -30.0"))
    (problem,) = problems_of(p)
    assert problem.where == "street.length_m" and "more than 0" in problem.message


def test_unknown_material(tmp_path):
    p = write(
        tmp_path,
        BASE.replace("carriageway_width_m = 6.0", 'carriageway_width_m = 6.0\ncarriageway_material = "asphalt-wron"'),
    )
    (problem,) = problems_of(p)
    assert problem.where == "street.carriageway_material"
    assert "unknown material 'asphalt-wron'" in problem.message and "did you mean 'asphalt-worn'" in problem.message


def test_unknown_lamp(tmp_path):
    text = (
        BASE
        + '\n[[luminaire_rows]]\nspacing_m = 20.0\ncount = 1\nmounting_height_m = 6.0\nlamp = "led-4000k-cie-b33"\n'
    )
    (problem,) = problems_of(write(tmp_path, text))
    assert problem.where == "luminaire_rows[0].lamp" and "unknown lamp" in problem.message


def test_unknown_photometry(tmp_path):
    text = (
        BASE
        + '\n[[luminaires]]\nposition_m = [5.0, 3.0, 6.0]\nlamp = "led-4000k-cie-b3"\nphotometry = "generic-post-topp"\n'
    )
    (problem,) = problems_of(write(tmp_path, text))
    assert problem.where == "luminaires[0].photometry" and "did you mean 'generic-post-top'" in problem.message


def test_unreadable_obj_names_file_and_line(tmp_path):
    (tmp_path / "bad.obj").write_text("v 0 0 0\nv 1 0 0\nv 0 1 zero\nf 1 2 3\n")
    text = BASE + '\n[[geometry]]\nkind = "obj"\nfile = "bad.obj"\nmaterial = "wood"\n'
    problems = problems_of(write(tmp_path, text))
    assert any(p.source.endswith("bad.obj") and "line 3" in p.where for p in problems)


def test_missing_obj_file(tmp_path):
    text = BASE + '\n[[geometry]]\nkind = "obj"\nfile = "nowhere.obj"\nmaterial = "wood"\n'
    problems = problems_of(write(tmp_path, text))
    assert any("nowhere.obj" in p.source or "nowhere.obj" in p.message for p in problems)


def test_toml_syntax_error_names_line(tmp_path):
    p = write(tmp_path, BASE + "\n[render]\nseed = = 3\n")
    (problem,) = problems_of(p)
    expected_line = (BASE + "\n[render]\nseed = = 3\n").splitlines().index("seed = = 3") + 1
    assert problem.where == f"line {expected_line}" and "TOML syntax error" in problem.message


def test_object_parameter_checked_by_name_type_and_range(tmp_path):
    text = (
        BASE
        + """
[[objects]]
kind = "car"
position_m = [5.0, 2.0]
params = { body_stlye = "van", length_m = 50.0 }
materials = { bodywork = "object-red" }
"""
    )
    problems = problems_of(write(tmp_path, text))
    wheres = {p.where for p in problems}
    assert {"objects[0].params.body_stlye", "objects[0].params.length_m", "objects[0].materials.bodywork"} <= wheres


def test_object_parameter_message_comes_from_its_declaration(tmp_path):
    # The scene check and a direct builder call report the same words (one declaration).
    from render.geometry.objects import ParameterError, bollard

    text = BASE + '\n[[objects]]\nkind = "bollard"\nposition_m = [5.0, 4.0]\nparams = { height_m = 5 }\n'
    (problem,) = problems_of(write(tmp_path, text))
    with pytest.raises(ParameterError) as err:
        bollard(height_m=5)
    assert problem.where == "objects[0].params.height_m" and problem.message == err.value.message
    assert problem.message == "must be <= 3 m, got 5"


def test_lamp_column_out_of_drawable_range_is_an_input_error(tmp_path):
    # A mounting height the column builder cannot draw is reported against the luminaire, not
    # raised as a traceback; `column = false` leaves the column out and the scene compiles.
    text = BASE + '\n[[luminaires]]\nposition_m = [5.0, 3.0, 40.0]\nlamp = "led-4000k-cie-b3"\n'
    scene = load_scene(write(tmp_path, text))
    with pytest.raises(InputError) as info:
        compile_scene(scene)
    (problem,) = info.value.problems
    assert problem.where == "luminaires[0]" and "height_m" in problem.message and "column = false" in problem.message
    no_column = load_scene(write(tmp_path, text.replace("[5.0, 3.0, 40.0]", "[5.0, 3.0, 40.0]\ncolumn = false")))
    assert compile_scene(no_column).n_triangles > 0


def test_unknown_object_kind(tmp_path):
    text = BASE + '\n[[objects]]\nkind = "wheely_bin"\nposition_m = [5.0, 4.0]\n'
    (problem,) = problems_of(write(tmp_path, text))
    assert problem.where == "objects[0].kind" and "did you mean 'wheelie_bin'" in problem.message


def test_several_mistakes_reported_together(tmp_path):
    text = BASE.replace("length_m = 30.0", "length_m = -1.0").replace(
        "resolution = [16, 9]", "resolution = [16, 9]\nhfov_deg = 400.0"
    )
    text += '\n[[luminaire_rows]]\nspacing_m = 20.0\ncount = 1\nmounting_height_m = 6.0\nlamp = "no-such-lamp"\n'
    problems = problems_of(write(tmp_path, text))
    wheres = {p.where for p in problems}
    assert {"street.length_m", "views[0].hfov_deg", "luminaire_rows[0].lamp"} <= wheres


def test_duplicate_names_and_unknown_setup_group(tmp_path):
    text = (
        BASE
        + """
[[objects]]
kind = "bollard"
name = "post"
position_m = [5.0, 4.0]

[[objects]]
kind = "bollard"
name = "post"
position_m = [6.0, 4.0]

[[luminaires]]
position_m = [5.0, 3.0, 6.0]
lamp = "led-4000k-cie-b3"
group = "main"

[setups.x.groups.mian]
lamp = "led-3000k-cie-b2"
"""
    )
    problems = problems_of(write(tmp_path, text))
    messages = " | ".join(f"{p.where}: {p.message}" for p in problems)
    assert "objects[1].name" in messages and "already used" in messages
    assert "setups.x.groups.mian" in messages and "did you mean 'main'" in messages


def test_cli_check_exits_2_without_traceback(tmp_path, capsys):
    from render.cli import main

    p = write(tmp_path, BASE.replace("length_m = 30.0", "length_m = -1.0"))
    assert main(["check", str(p)]) == 2
    err = capsys.readouterr().err
    assert "Traceback" not in err and f"{p}: street.length_m:" in err


# ---- placement and geometry (analytic, from the documented cross-section) --------------------


def test_row_layouts_positions():
    scene = load_scene(SCENES / "tests" / "all_kinds.toml")
    street = scene.street
    half = street.carriageway_width_m / 2
    rows = {}
    for lum in scene.luminaires:
        rows.setdefault(lum.where, []).append(lum)
    one = rows["luminaire_rows[0]"]
    # end_m = 60 with spacing 20 from 0: x = 0, 20, 40, 60.
    assert [l.position_m[0] for l in one] == [0.0, 20.0, 40.0, 60.0]
    # Column 0.5 m behind the left kerb face, opening 0.5 m in front of it: y = half.
    assert all(math.isclose(l.position_m[1], half + 0.5 - 0.5) for l in one)
    assert all(math.isclose(l.position_m[2], street.kerb_height_m + 6.0) for l in one)
    assert all(l.rotation_deg == 180.0 for l in one)  # C90 (street side) toward -y
    pairs = rows["luminaire_rows[1]"]
    assert len(pairs) == 4 and sorted({l.position_m[0] for l in pairs}) == [0.0, 30.0]
    assert sorted(np.sign([l.position_m[1] for l in pairs])) == [-1, -1, 1, 1]
    stagger = rows["luminaire_rows[2]"]
    assert [np.sign(l.position_m[1]) for l in stagger] == [1, -1, 1, -1]
    assert [l.position_m[0] for l in stagger] == [0.0, 15.0, 30.0, 45.0]


def test_street_cross_section_heights():
    scene = load_scene(SCENES / "tests" / "minimal_street.toml")
    mesh = compile_scene(scene)
    names = mesh.object_names
    carriageway = mesh.triangles_m[mesh.object_id == names.index("carriageway")]
    assert np.allclose(carriageway[..., 2], 0.0)
    assert np.isclose(carriageway[..., 1].max(), 3.0) and np.isclose(carriageway[..., 1].min(), -3.0)
    footway = mesh.triangles_m[mesh.object_id == names.index("footway left")]
    assert np.allclose(footway[..., 2], scene.street.kerb_height_m)
    # Footway starts behind the kerb top: 3.0 + 0.15 m, and is 2.0 m wide (defaults).
    assert np.isclose(footway[..., 1].min(), 3.15) and np.isclose(footway[..., 1].max(), 5.15)


def test_every_kind_compiles_with_unit_normals():
    scene = load_scene(SCENES / "tests" / "all_kinds.toml")
    mesh = compile_scene(scene)
    assert np.all(np.isfinite(mesh.triangles_m))
    assert np.allclose(np.linalg.norm(mesh.normals, axis=-1), 1.0, atol=1e-6)
    kinds = {o.kind for o in mesh.objects}
    for kind in (
        "car",
        "wheelie_bin",
        "tree",
        "hedge",
        "bollard",
        "bus_shelter",
        "sign",
        "pedestrian",
        "box",
        "cylinder",
        "sphere",
        "extrusion",
        "obj",
        "marking",
        "lamp column",
        "house frontage",
        "shop frontage",
    ):
        assert kind in kinds, kind
    car = next(o for o in mesh.objects if o.name == "car")
    assert car.inspect


def test_column_puts_lens_at_luminaire_position():
    scene = load_scene(SCENES / "tests" / "minimal_street.toml")
    mesh = compile_scene(scene)
    for lum in scene.luminaires:
        idx = mesh.object_names.index(f"column {lum.name}")
        tris = mesh.triangles_m[mesh.object_id == idx]
        # The lens (lowest face of the housing) is centred on the opening: the opening is at the
        # column's highest-reaching point horizontally, within the housing's half-length.
        near = np.linalg.norm(tris.reshape(-1, 3) - np.asarray(lum.position_m), axis=1).min()
        assert near < 0.4


def test_default_slot_materials_exist():
    # Slots the scene does not assign fall back to these library materials.
    from render.colour.materials import material_library
    from render.geometry.build import DEFAULT_SLOT_MATERIALS

    missing = sorted(set(DEFAULT_SLOT_MATERIALS.values()) - set(material_library()))
    assert not missing, missing
