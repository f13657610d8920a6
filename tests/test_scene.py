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
from fuzzing import time_limit

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


# ---- hostile input: an InputError naming the file and the key, never a traceback or a hang ----
# Source of the contract: the project's input rule (scenes/README.md, "Referenced files and
# limits"); the limits are lampcast's own (render/limits.py), binary64 range from IEEE 754.


def one_problem_at(path: Path, where: str, *, strict_paths: bool = False):
    """The problem ``load_scene`` reports at ``where`` (the test fails if there is none)."""
    with time_limit(10.0):
        with pytest.raises(InputError) as info:
            load_scene(path, strict_paths=strict_paths) if strict_paths else load_scene(path)
    found = [p for p in info.value.problems if p.where == where]
    assert found, [str(p) for p in info.value.problems]
    assert found[0].source == str(path)
    return found[0]


HUGE_INT = "1" + "0" * 400  # above the largest binary64 number, about 1.8e308


@pytest.mark.parametrize(
    "old, new, where",
    [
        ("carriageway_width_m = 6.0", f"carriageway_width_m = 6.0\nkerb_width_m = {HUGE_INT}", "street.kerb_width_m"),
        ("resolution = [16, 9]", f"resolution = [{HUGE_INT}, 9]", "views[0].resolution[0]"),
        ("target_m = [20.0, 0.0, 0.0]", f"target_m = [20.0, -{HUGE_INT}, 0.0]", "views[0].target_m[1]"),
        ("position_m = [1.0, 0.0]", f"position_m = [{HUGE_INT}, 0.0]", "views[0].position_m[0]"),
        ("carriageway_width_m = 6.0", f"carriageway_width_m = 6.0\nlanes = {HUGE_INT}", "street.lanes"),
    ],
)
def test_integer_too_large_for_a_float(tmp_path, old, new, where):
    problem = one_problem_at(write(tmp_path, BASE.replace(old, new)), where)
    assert "finite" in problem.message or "at most" in problem.message
    assert HUGE_INT not in problem.message  # a 401-digit number is not echoed in full


@pytest.mark.parametrize(
    "entry, where",
    [
        (f"\n[observer]\nage_years = {HUGE_INT}\n", "observer.age_years"),
        (
            f'\n[[objects]]\nkind = "bollard"\nposition_m = [5.0, 4.0]\nparams = {{ height_m = {HUGE_INT} }}\n',
            "objects[0].params.height_m",
        ),
        (
            f'\n[[objects]]\nkind = "hedge"\nposition_m = [5.0, 4.0]\nparams = {{ seed = [1, {HUGE_INT}] }}\n',
            "objects[0].params.seed[1]",
        ),
    ],
)
def test_integer_too_large_for_a_float_in_tables_checked_elsewhere(tmp_path, entry, where):
    # Observer settings and object parameters are checked by their own modules; an integer
    # beyond binary64 is reported by the scene reader first (was OverflowError).
    problem = one_problem_at(write(tmp_path, BASE + entry), where)
    assert "too large" in problem.message


def test_integer_beyond_python_conversion_limit(tmp_path):
    # More digits than Python converts to a string (4300, the default of sys.int_max_str_digits).
    p = write(tmp_path, BASE.replace("length_m = 30.0", "length_m = 1" + "0" * 5000))
    problem = one_problem_at(p, f"line {BASE.splitlines().index('length_m = 30.0') + 1}")
    assert "digits" in problem.message


def test_deeply_nested_array(tmp_path):
    p = write(tmp_path, BASE + "\n[render]\nseed = " + "[" * 5000 + "]" * 5000 + "\n")
    with time_limit(10.0), pytest.raises(InputError) as info:
        load_scene(p)
    assert info.value.problems[0].source == str(p) and "nested" in info.value.problems[0].message


ROW = '\n[[luminaire_rows]]\nlamp = "led-4000k-cie-b3"\nmounting_height_m = 6.0\n'


@pytest.mark.parametrize(
    "keys, where, words",
    [
        ("spacing_m = 1e-300\nend_m = 1e308", "luminaire_rows[0].end_m", "30 m (street.length_m)"),  # was OverflowError
        ("spacing_m = 0.001\nend_m = 1e6", "luminaire_rows[0].end_m", "30 m (street.length_m)"),  # was a hang
        ("spacing_m = 1e-300\nend_m = 30.0", "luminaire_rows[0].end_m", "more luminaires than can be counted"),
        ("spacing_m = 5e-324\nend_m = 30.0", "luminaire_rows[0].end_m", "more luminaires than can be counted"),
        ("spacing_m = 0.001\nend_m = 30.0", "luminaire_rows[0].end_m", "30,001 luminaires"),
        ("spacing_m = 1.0\nstart_m = -1e6\nend_m = 10.0", "luminaire_rows[0].start_m", "30 m (street.length_m)"),
        ("spacing_m = 1.0\nstart_m = 20.0\nend_m = 10.0", "luminaire_rows[0].end_m", "30 m (street.length_m)"),
        ("spacing_m = 10.0\ncount = 5", "luminaire_rows[0].count", "30 m (street.length_m)"),  # reaches 40 m
    ],
)
def test_row_positions_bounded_by_the_street_and_the_limit(tmp_path, keys, where, words):
    problem = one_problem_at(write(tmp_path, BASE + ROW + keys + "\n"), where)
    assert words in problem.message


def test_generated_luminaires_bounded_across_rows_and_singles(tmp_path):
    from render.limits import MAX_GENERATED_LUMINAIRES

    # 2000 m at 0.25 m spacing: 8001 positions, twice for "opposite" (16 002) > 10 000.
    text = BASE.replace("length_m = 30.0", "length_m = 2000.0")
    p = write(tmp_path, text + ROW + 'layout = "opposite"\nspacing_m = 0.25\nend_m = 2000.0\n')
    problem = one_problem_at(p, "luminaire_rows[0].end_m")
    assert f"{MAX_GENERATED_LUMINAIRES:,}" in problem.message and "16,002" in problem.message
    # Each row alone is within the limit; the second one takes the total over it:
    # 1 single + 8001 + 2 × 1000 (opposite) = 10 002.
    single = '\n[[luminaires]]\nposition_m = [5.0, 3.0, 6.0]\nlamp = "led-4000k-cie-b3"\n'
    first = ROW + "spacing_m = 0.25\nend_m = 2000.0\n"
    second = ROW + 'layout = "opposite"\nspacing_m = 1.0\ncount = {}\n'
    p = write(tmp_path, text + single + first + second.format(1000))
    problem = one_problem_at(p, "luminaire_rows[1].count")
    assert "10,002" in problem.message and "2,000 luminaires" in problem.message
    # At the limit exactly: loads.
    p = write(tmp_path, text + single + first + second.format(999))
    with time_limit(20.0):
        assert len(load_scene(p).luminaires) == MAX_GENERATED_LUMINAIRES


OBJ_ENTRY = '\n[[geometry]]\nkind = "obj"\nmaterial = "wood"\nfile = {}\n'


def test_obj_file_name_with_nul_byte(tmp_path):
    problem = one_problem_at(write(tmp_path, BASE + OBJ_ENTRY.format('"a\\u0000b.obj"')), "geometry[0].file")
    assert "NUL" in problem.message


@pytest.mark.parametrize("target", ["/dev/zero", "folder"])
def test_obj_file_not_a_regular_file(tmp_path, target):
    (tmp_path / "folder").mkdir()
    problem = one_problem_at(write(tmp_path, BASE + OBJ_ENTRY.format(f'"{target}"')), "geometry[0].file")
    assert "not a regular file" in problem.message


@pytest.mark.parametrize(
    "key, value",
    [
        ("lamp", '"/dev/zero"'),
        ("lamp", '"x\\u0000.csv"'),
        ("photometry", '"/dev/zero"'),
        ("photometry", '"y\\u0000.ies"'),
    ],
)
def test_lamp_and_photometry_references_checked(tmp_path, key, value):
    entry = {"lamp": '"led-4000k-cie-b3"', "photometry": '"generic-isotropic"'}
    entry[key] = value
    text = BASE + "\n[[luminaires]]\nposition_m = [5.0, 3.0, 6.0]\n" + "".join(f"{k} = {v}\n" for k, v in entry.items())
    problem = one_problem_at(write(tmp_path, text), f"luminaires[0].{key}")
    assert "not a regular file" in problem.message or "NUL" in problem.message


def test_references_resolve_against_the_scene_folder(tmp_path, monkeypatch):
    scene_dir = tmp_path / "scene"
    (scene_dir / "meshes").mkdir(parents=True)
    (scene_dir / "meshes" / "tri.obj").write_text("v 0 0 0\nv 1 0 0\nv 0 1 0\nf 1 2 3\n")
    p = write(scene_dir, BASE + OBJ_ENTRY.format('"meshes/tri.obj"'))
    monkeypatch.chdir(tmp_path)  # not the scene's folder
    scene = load_scene(p)
    assert scene.objects[0].params["file"] == str(scene_dir / "meshes" / "tri.obj")


def _strict_fixture(tmp_path: Path) -> Path:
    """A scene folder with a mesh, a lamp file and a photometric file inside, copies of them
    outside, and a symbolic link from inside to outside."""
    inside, outside = tmp_path / "scene", tmp_path / "elsewhere"
    inside.mkdir()
    outside.mkdir()
    photometry = SCENES.parent / "tests" / "data" / "photometry"
    for folder in (inside, outside):
        (folder / "tri.obj").write_text("v 0 0 0\nv 1 0 0\nv 0 1 0\nf 1 2 3\n")
        (folder / "lamp.csv").write_text(
            "wavelength_nm, relative_power\n" + "".join(f"{w}, 1.0\n" for w in range(380, 781, 10))
        )
        (folder / "lum.ies").write_bytes((photometry / "rotational_1995.ies").read_bytes())
        (folder / "tilt.ies").write_bytes((photometry / "tilt_file.ies").read_bytes())
        (folder / "tilt_file.tlt").write_bytes((photometry / "tilt_file.tlt").read_bytes())
    # A photometric file inside whose tilt file is outside.
    text = (photometry / "tilt_file.ies").read_text().replace("TILT=tilt_file.tlt", "TILT=../elsewhere/tilt_file.tlt")
    (inside / "tilt_out.ies").write_text(text)
    (inside / "link.obj").symlink_to(outside / "tri.obj")
    return inside


def _strict_scene(folder: Path, obj: str = "tri.obj", lamp: str = "lamp.csv", photometry: str = "lum.ies") -> Path:
    text = BASE + OBJ_ENTRY.format(f'"{obj}"')
    text += f'\n[[luminaires]]\nposition_m = [5.0, 3.0, 6.0]\nlamp = "{lamp}"\nphotometry = "{photometry}"\n'
    return write(folder, text)


@pytest.mark.parametrize(
    "kwargs, where",
    [
        ({"obj": "{outside}/tri.obj"}, "geometry[0].file"),  # absolute
        ({"obj": "../elsewhere/tri.obj"}, "geometry[0].file"),  # '..' out of the folder
        ({"obj": "link.obj"}, "geometry[0].file"),  # symbolic link out of the folder
        ({"lamp": "../elsewhere/lamp.csv"}, "luminaires[0].lamp"),
        ({"photometry": "{outside}/lum.ies"}, "luminaires[0].photometry"),
        ({"photometry": "tilt_out.ies"}, None),  # the tilt file, checked by the LM-63 reader
    ],
)
def test_strict_paths(tmp_path, kwargs, where):
    inside = _strict_fixture(tmp_path)
    kwargs_given = kwargs
    kwargs = {k: v.format(outside=tmp_path / "elsewhere") for k, v in kwargs.items()}
    # Everything inside: loads with and without strict paths.
    assert load_scene(_strict_scene(inside), strict_paths=True).reference_root == inside.resolve()
    p = _strict_scene(inside, **kwargs)
    assert load_scene(p).reference_root is None  # allowed by default
    with pytest.raises(InputError) as info:
        load_scene(p, strict_paths=True)
    problem = info.value.problems[0]
    if where is None:
        assert "tilt" in problem.message and "outside" in problem.message
    else:
        assert (problem.source, problem.where) == (str(p), where)
        assert ("absolute" if "{outside}" in next(iter(kwargs_given.values())) else "outside") in problem.message


def test_strict_paths_rejects_bundled_scene_reaching_out_of_its_folder():
    # all_kinds.toml takes its OBJ from tests/data: allowed by default, refused with strict paths.
    path = SCENES / "tests" / "all_kinds.toml"
    load_scene(path)
    with pytest.raises(InputError) as info:
        load_scene(path, strict_paths=True)
    assert [p.where for p in info.value.problems] == ["geometry[4].file"]


# ---- limits from render/limits.py (one declaration for scene keys and options) --------------


def test_image_and_sample_limits_come_from_render_limits(tmp_path):
    from render import limits
    from render.scene.loader import RENDER_SPEC, VIEW_SPEC

    assert VIEW_SPEC["resolution"].max == limits.MAX_IMAGE_SIDE_PX
    assert RENDER_SPEC["samples_per_pixel"].max == limits.MAX_SAMPLES_PER_PIXEL
    side = limits.MAX_IMAGE_SIDE_PX
    p = write(tmp_path, BASE.replace("resolution = [16, 9]", f"resolution = [{side + 1}, 9]"))
    assert f"{side}" in one_problem_at(p, "views[0].resolution[0]").message
    p = write(tmp_path, BASE + f"\n[render]\nsamples_per_pixel = {limits.MAX_SAMPLES_PER_PIXEL + 1}\n")
    assert f"{limits.MAX_SAMPLES_PER_PIXEL}" in one_problem_at(p, "render.samples_per_pixel").message
    # Within both limits, but more camera samples than an int32 index can count.
    p = write(tmp_path, BASE.replace("[16, 9]", f"[{side}, {side}]") + "\n[render]\nsamples_per_pixel = 64\n")
    assert f"{limits.MAX_CAMERA_SAMPLES:,}" in one_problem_at(p, "views[0].resolution").message


def test_triangle_limit_after_compile(tmp_path, monkeypatch):
    from render import limits

    scene = load_scene(write(tmp_path, BASE))
    n = compile_scene(scene).n_triangles
    monkeypatch.setattr(limits, "MAX_TRIANGLES", n - 1)
    with pytest.raises(InputError) as info:
        compile_scene(scene)
    (problem,) = info.value.problems
    assert problem.source == str(scene.path) and f"{n:,}" in problem.message and f"{n - 1:,}" in problem.message


def test_check_reports_a_view_that_needs_more_memory_than_available(tmp_path, monkeypatch):
    from render import limits

    p = write(tmp_path, BASE)
    check_scene(p)
    monkeypatch.setattr(limits, "available_memory_bytes", lambda: 1000)
    with pytest.raises(InputError) as info:
        check_scene(p)
    (problem,) = info.value.problems
    assert problem.where == "views[0].resolution" and "16×9 pixels" in problem.message and "GiB" in problem.message


@pytest.mark.parametrize(
    "entry, where",
    [
        ('\n[[geometry]]\nkind = "box"\nsize_m = [1e-300, 1, 1]\nmaterial = "wood"\n', "geometry[0].size_m[0]"),
        ('\n[[geometry]]\nkind = "sphere"\nradius_m = 5e-324\nmaterial = "wood"\n', "geometry[0].radius_m"),
        (
            '\n[[markings]]\nkind = "line"\npoints_m = [[0, 0], [1e-300, 0], [5, 0]]\nmaterial = "paint-road-white"\n',
            "markings[0].points_m[1]",
        ),
        ("\n[street.left]\nfootway_width_m = 1e-300\n", "street.left.footway_width_m"),
    ],
)
def test_sizes_below_a_millimetre(tmp_path, entry, where):
    # Sizes far below a millimetre gave triangles whose normals underflow to zero (a sphere of
    # radius 5e-324 also NaN normals): refused at the key. Common practice, no source: nothing
    # drawn on a street is thinner than 1 mm.
    text = (
        BASE.replace("carriageway_width_m = 6.0\n", "carriageway_width_m = 6.0\n" + entry)
        if "street." in where
        else BASE + entry
    )
    problem = one_problem_at(write(tmp_path, text), where)
    assert "0.001" in problem.message
    # At 1 mm: compiles with unit normals everywhere.
    small = text.replace("1e-300", "0.001").replace("5e-324", "0.001").replace("[1e-300, 0]", "[0.001, 0]")
    mesh = compile_scene(load_scene(write(tmp_path, small)))
    assert np.allclose(np.linalg.norm(mesh.normals, axis=-1), 1.0, rtol=0, atol=1e-9)


@pytest.mark.parametrize("value", [HUGE_INT, '"high"', "-1.0"])
def test_bad_street_value_does_not_break_the_rest_of_the_check(tmp_path, value):
    # A street key with a problem used to leave None in the street, and placing a row or an
    # [x, y] object on it raised TypeError (fuzz finding): the problem is reported, alone.
    text = BASE.replace("carriageway_width_m = 6.0", f"carriageway_width_m = 6.0\nkerb_height_m = {value}")
    text += ROW + "spacing_m = 10.0\ncount = 2\n"
    text += '\n[[objects]]\nkind = "bollard"\nposition_m = [5.0, 4.0]\n'
    with pytest.raises(InputError) as info:
        load_scene(write(tmp_path, text))
    assert [p.where for p in info.value.problems] == ["street.kerb_height_m"]
    # With a bad carriageway width the rows are not placed, and not blamed on a missing street.
    text = (
        BASE.replace("carriageway_width_m = 6.0", f"carriageway_width_m = {value}")
        + ROW
        + "spacing_m = 10.0\ncount = 2\n"
    )
    with pytest.raises(InputError) as info:
        load_scene(write(tmp_path, text))
    assert [p.where for p in info.value.problems] == ["street.carriageway_width_m"]


def test_flush_kerb_has_no_zero_area_face(tmp_path):
    # kerb_height_m = 0 (or -0.0) is allowed; the kerb face had zero area and zero normals (fuzz
    # finding). Unit normals: the mesh contract (render/geometry/mesh.py).
    for value in ("0.0", "-0.0"):
        text = BASE.replace("carriageway_width_m = 6.0", f"carriageway_width_m = 6.0\nkerb_height_m = {value}")
        mesh = compile_scene(load_scene(write(tmp_path, text)))
        assert np.allclose(np.linalg.norm(mesh.normals, axis=-1), 1.0, rtol=0, atol=1e-9)


# ---- warnings of `check`: allowed values that are probably mistakes --------------------------
# The thresholds are lampcast's own (scenes/README.md "Warnings"; common practice, no source).


def warnings_of(path: Path) -> list:
    from render.scene.warnings import scene_warnings

    return scene_warnings(check_scene(path))


def test_demo_scene_has_no_warnings():
    assert warnings_of(SCENES / "demo" / "linden_row.toml") == []


def test_narrow_field_of_view_warns_at_its_key(tmp_path):
    # 1.2 typed for 1.2 rad (68.8°): a telephoto of 1.2° is not a street view.
    p = write(tmp_path, BASE.replace("resolution = [16, 9]", "resolution = [16, 9]\nhfov_deg = 1.2"))
    (w,) = warnings_of(p)
    assert w.source == str(p) and w.where == "views[0].hfov_deg"
    assert "1.2°" in w.message and "69°" in w.message  # 1.2 rad = 68.75° (analytic)
    ok = write(tmp_path, BASE.replace("resolution = [16, 9]", "resolution = [16, 9]\nhfov_deg = 5.0"), "ok.toml")
    assert warnings_of(ok) == []


@pytest.mark.parametrize("first, second", [("bins & cars", "bins / cars"), ("a b", "a-b"), ("Kerb", "kerb")])
def test_view_names_giving_one_output_name_warn_naming_both(tmp_path, first, second):
    # Output names keep letters, digits, '-' and '_' (render.fileio.file_stem): these pairs
    # give one name, so their files would only be told apart by an added number.
    text = BASE.replace('name = "v"', f'name = "{first}"') + BASE[BASE.index("[[views]]") :].replace(
        'name = "v"', f'name = "{second}"'
    )
    (w,) = warnings_of(write(tmp_path, text))
    assert w.where == "views[1].name" and repr(first) in w.message and repr(second) in w.message
    assert "views[0]" in w.message
    distinct = text.replace(f'name = "{second}"', 'name = "other"')
    assert warnings_of(write(tmp_path, distinct, "ok.toml")) == []


def test_two_luminaires_in_one_place_warn_naming_both(tmp_path):
    # A single luminaire 0.05 m from the second position of a row: one lantern given twice.
    row = BASE + ROW + "spacing_m = 10.0\ncount = 3\n"
    x, y, z = load_scene(write(tmp_path, row, "row.toml")).luminaires[1].position_m
    single = '\n[[luminaires]]\nname = "extra"\nposition_m = [{}, {}, {}]\nlamp = "led-4000k-cie-b3"\n'
    (w,) = warnings_of(write(tmp_path, row + single.format(x + 0.05, y, z)))
    assert w.where == "luminaire_rows[0] position 2" and "'extra'" in w.message
    assert "luminaires[0].position_m" in w.message and "0.05 m" in w.message
    # 0.2 m apart: two lanterns, no warning.
    assert warnings_of(write(tmp_path, row + single.format(x + 0.2, y, z), "apart.toml")) == []


def test_objects_and_luminaires_outside_the_street_warn_at_their_keys(tmp_path):
    # The street of BASE is 30 m long; 40 m along it (10 m past its end) and 100 m across it
    # are outside; 30.5 m along (within the 1 m margin of scenes/README.md) is not.
    bin_at = '\n[[objects]]\nkind = "wheelie_bin"\nposition_m = [{}, 0.0]\n'
    lamp_at = '\n[[luminaires]]\nposition_m = [10.0, {}, 6.0]\nlamp = "led-4000k-cie-b3"\n'
    text = BASE + bin_at.format(40.0) + lamp_at.format(100.0)
    warned = [w for w in warnings_of(write(tmp_path, text)) if "outside the street" in w.message]
    assert [w.where for w in warned] == ["objects[0].position_m", "luminaires[0].position_m"]
    assert "x = 40 m" in warned[0].message and "x from 0 to 30 m" in warned[0].message
    assert "y = 100 m" in warned[1].message
    inside = BASE + bin_at.format(30.5) + lamp_at.format(-3.0)
    assert warnings_of(write(tmp_path, inside, "inside.toml")) == []


def test_camera_inside_a_solid_warns_at_the_view_position(tmp_path):
    # A closed box (outward faces) around the camera at (1, 0, 1.6): every probe ray meets the
    # inside of a face (analytic: the box spans x -1..3, y -2..2, z 0.5..4.5, clear of the
    # road). Moved 10 m along the street, the camera sees its outside only.
    box = '\n[[geometry]]\nkind = "box"\nsize_m = [4.0, 4.0, 4.0]\nposition_m = [{}, 0.0, 0.5]\nmaterial = "object-black"\n'
    (w,) = warnings_of(write(tmp_path, BASE + box.format(1.0)))
    assert w.where == "views[0].position_m" and "7 of 7 rays" in w.message
    assert warnings_of(write(tmp_path, BASE + box.format(11.0), "outside.toml")) == []
    # The flux test scene puts its camera inside a closed cube on purpose.
    assert [w.where for w in warnings_of(SCENES / "tests" / "closed_box.toml")] == ["views[0].position_m"]


def test_setup_lumens_replacing_every_group_warns_at_its_key(tmp_path):
    # Two groups ("street" and "bus stop") and a setup whose lumens covers both: a warning at
    # setups.bright.lumens; the same setup giving the bus stop its own lumens does not warn.
    lamps = (
        '\n[[luminaires]]\nposition_m = [5.0, 3.0, 6.0]\nlamp = "led-4000k-cie-b3"\ngroup = "street"\n'
        '\n[[luminaires]]\nposition_m = [15.0, -3.0, 4.0]\nlamp = "led-4000k-cie-b3"\ngroup = "bus stop"\n'
    )
    setup = '\n[setups.bright]\nlamp = "led-4000k-cie-b3"\nlumens = 4000.0\n'
    (w,) = warnings_of(write(tmp_path, BASE + lamps + setup))
    assert w.where == "setups.bright.lumens" and "'street', 'bus stop'" in w.message and "4000 lm" in w.message
    own = setup + '\n[setups.bright.groups."bus stop"]\nlumens = 2500.0\n'
    assert warnings_of(write(tmp_path, BASE + lamps + own, "own.toml")) == []


def test_view_seeing_no_lit_surface_warns(tmp_path):
    # A luminaire 6 m above the road at x = 25 m. Looking at the road, the view sees lit asphalt;
    # looking 68° up with a 30° field of view it sees only sky (the lantern is 10° up, below the
    # picture: analytic from the positions), so its preview is black.
    lamp = '\n[[luminaires]]\nposition_m = [25.0, 0.0, 6.0]\nlamp = "led-4000k-cie-b3"\ncolumn = false\n'
    assert warnings_of(write(tmp_path, BASE + lamp)) == []
    up = BASE.replace("target_m = [20.0, 0.0, 0.0]", "target_m = [20.0, 0.0, 50.0]\nhfov_deg = 30.0")
    (w,) = warnings_of(write(tmp_path, up + lamp, "up.toml"))
    assert w.where == "views[0]" and "'v'" in w.message
