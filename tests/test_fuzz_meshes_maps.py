"""Fuzzing the mesh-file reader (STL, PLY, OBJ, glTF through trimesh) and the map importer.

Mutated valid files (byte flips, truncation, lines duplicated or deleted, NUL bytes, junk) are
read under the fuzz contract (tests/fuzzing.py): a result or an InputError, within the time
limit, nothing else. For the map importer a result is a scene file that loads. Seeds: a unit
cube written in each mesh format and the second demo's hand-written extract.

Source of the contract: the project's own rule (README "Inputs", DEVELOPERS.md conventions).
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest
from fuzzing import BYTE_MUTATIONS, InputTally, fuzz_settings
from hypothesis import given
from hypothesis import strategies as st

pytest.importorskip("trimesh")

REPO = Path(__file__).resolve().parent.parent
OSM_SEED = (REPO / "scenes" / "demo2" / "gull_harbour.osm").read_bytes()
OSM_CENTRE = (-47.5, -128.0)

CUBE_V = [(0, 0, 0), (1, 0, 0), (1, 1, 0), (0, 1, 0), (0, 0, 1), (1, 0, 1), (1, 1, 1), (0, 1, 1)]
CUBE_F = [(0, 2, 1), (0, 3, 2), (4, 5, 6), (4, 6, 7), (0, 1, 5), (0, 5, 4), (1, 2, 6), (1, 6, 5)]
CUBE_F += [(2, 3, 7), (2, 7, 6), (3, 0, 4), (3, 4, 7)]


def _stl() -> bytes:
    lines = ["solid cube"]
    for f in CUBE_F:
        lines += ["facet normal 0 0 0", "outer loop"]
        lines += [f"vertex {x} {y} {z}" for x, y, z in (CUBE_V[i] for i in f)]
        lines += ["endloop", "endfacet"]
    return ("\n".join([*lines, "endsolid cube"]) + "\n").encode()


def _ply() -> bytes:
    head = ["ply", "format ascii 1.0", f"element vertex {len(CUBE_V)}", "property float x", "property float y"]
    head += ["property float z", f"element face {len(CUBE_F)}", "property list uchar int vertex_indices"]
    body = [f"{x} {y} {z}" for x, y, z in CUBE_V] + [f"3 {a} {b} {c}" for a, b, c in CUBE_F]
    return ("\n".join([*head, "end_header", *body]) + "\n").encode()


def _obj() -> bytes:
    body = [f"v {x} {y} {z}" for x, y, z in CUBE_V] + [f"f {a + 1} {b + 1} {c + 1}" for a, b, c in CUBE_F]
    return ("\n".join(body) + "\n").encode()


def _gltf_seeds() -> list[tuple[str, bytes]]:
    import trimesh

    mesh = trimesh.Trimesh(vertices=np.array(CUBE_V, float), faces=np.array(CUBE_F))
    return [(".glb", trimesh.exchange.gltf.export_glb(trimesh.Scene(mesh)))]


SEEDS = [(".stl", _stl()), (".ply", _ply()), (".obj", _obj()), *_gltf_seeds()]

TALLY = InputTally("mesh and map fuzz")
report_inputs_read = TALLY.report_fixture()


@pytest.fixture(scope="module")
def fuzz_dir(tmp_path_factory) -> Path:
    return tmp_path_factory.mktemp("mesh-map-fuzz")


def _mutate(data: bytes, draw) -> bytes:
    for _ in range(draw(st.integers(1, 3), label="mutations")):
        data = BYTE_MUTATIONS[draw(st.sampled_from(sorted(BYTE_MUTATIONS)), label="mutation")](data, draw)
    return data


def _check_mesh(result) -> None:
    for piece in result.pieces:
        assert np.isfinite(piece.part.triangles_m).all()


@fuzz_settings()
@given(data=st.data())
def test_fuzz_mutated_mesh_files(fuzz_dir, data):
    from render.geometry.meshfiles import read_mesh

    suffix, seed = SEEDS[data.draw(st.integers(0, len(SEEDS) - 1), label="seed")]
    path = fuzz_dir / f"case{suffix}"
    path.write_bytes(_mutate(seed, data.draw))
    TALLY.read(f"mutated {suffix}", lambda: read_mesh(path), _check_mesh)


@fuzz_settings(default=6)
@given(data=st.data())
def test_fuzz_mutated_map_extracts(fuzz_dir, data):
    pytest.importorskip("osmium")
    from render.mapdata.importer import import_map
    from render.scene import load_scene

    path = fuzz_dir / "case.osm"
    path.write_bytes(_mutate(OSM_SEED, data.draw))
    out = fuzz_dir / "case.toml"

    def check(_result) -> None:
        load_scene(out)  # what the importer writes must load

    TALLY.read("mutated extract", lambda: import_map(path, OSM_CENTRE, 120.0, out), check)


def test_every_seed_reads(fuzz_dir):
    from render.geometry.meshfiles import read_mesh

    for suffix, seed in SEEDS:
        path = fuzz_dir / f"seed{suffix}"
        path.write_bytes(seed)
        total = sum(len(p.part.triangles_m) for p in read_mesh(path).pieces)
        assert total == 12, suffix


@pytest.mark.parametrize(
    ("old", "new"),
    [
        ('lon="-128.0014600"', 'lon=" 128.0014600"'),  # a malformed coordinate (found by this fuzz test)
        ('<node id="101" version="1"', '<node id="101" version=" 1"'),  # a malformed attribute (likewise)
    ],
)
def test_broken_extracts_found_by_fuzzing_are_input_errors(tmp_path, old, new):
    pytest.importorskip("osmium")
    from render.errors import InputError
    from render.mapdata.importer import import_map

    path = tmp_path / "broken.osm"
    path.write_bytes(OSM_SEED.replace(old.encode(), new.encode(), 1))
    with pytest.raises(InputError, match="broken.osm"):
        import_map(path, OSM_CENTRE, 120.0, tmp_path / "out.toml")
