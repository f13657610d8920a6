"""Lit-window benchmark (``python -m render.bench windows``): time per path with 10 to 400 lit windows.

A synthetic street canyon (a ground 200 m long and two facades 12 m high, 16 m apart, every
surface of reflectance 0.5) whose facades carry ``n`` lit windows (1.2 m × 1.4 m, spread
evenly over both), no luminaire: every path vertex, the start included, connects to one lit
window (:mod:`render.light.indirect.windows`) and bounces on, up to ``--bounces``. Timed:
:func:`render.light.indirect.view.transport_at_points` at ``--points`` points on the ground
and the facades with ``--paths`` paths each, in processor seconds (every thread), per path
per point, for each window count.

Each measurement runs in a new process (``PYTHONPATH`` the tree measured, its own numba cache
beside its sources; one untimed trace first in the process, so compiling or loading the
kernel is not counted), the window counts one after another in it. ``--against DIR`` measures
a second checkout the same way (e.g. ``git worktree add DIR HEAD`` before a change), the two
trees alternating within each round. Printed: per tree and window count min / median / max
over ``--rounds`` rounds; the ratios 100 / 10 and 400 / 10 windows round by round; with
``--against`` the ratio this tree / the other per window count. The child's code uses only
what both trees have (``PathTracer``'s ``windows``, ``transport_at_points``).
"""

from __future__ import annotations

import argparse
import inspect
import json
import os
import subprocess
import sys
from pathlib import Path

from render.bench.timing import Spread, ratios

__all__ = ["add_parser", "cmd_windows", "run_child"]

#: Window counts measured by default.
DEFAULT_COUNTS = (10, 100, 400)
THIS = "this tree"
OTHER = "against"


def run_child(args: dict) -> dict:
    """The measurement in the child process (module text); every import inside, so that the
    source of this function runs against either tree. Returns {count: processor seconds per
    path per point}."""
    import time

    import numpy as np

    from render.colour.spectra import N_BINS
    from render.geometry import shapes
    from render.geometry.mesh import TriangleMesh
    from render.light.indirect import IndirectSettings, PathTracer, transport_at_points
    from render.light.indirect.night import NightLight
    from render.light.indirect.view import without_luminaires
    from render.light.indirect.windows import LitWindows
    from render.light.luminaires import luminaire_set
    from render.rays.bvh import build_bvh
    from render.scene import load_scene

    half, width, height = 100.0, 16.0, 12.0
    parts = [
        shapes.flat_part(
            np.array(
                [
                    [(-half, -width, 0.0), (half, -width, 0.0), (half, width, 0.0)],
                    [(-half, -width, 0.0), (half, width, 0.0), (-half, width, 0.0)],
                ]
            ),
            "body",
        )
    ]
    for y0 in (-width / 2 - 0.3, width / 2):
        parts += shapes.box(min_m=(-half, y0, 0.0), max_m=(half, y0 + 0.3, height))
    tris = np.concatenate([p.triangles_m for p in parts])
    mesh = TriangleMesh(
        tris,
        np.concatenate([p.normals for p in parts]),
        np.zeros(len(tris), np.int32),
        np.zeros(len(tris), np.int32),
        ["grey"],
        ["x"],
    )
    bvh = build_bvh(mesh.triangles_m)
    lights = without_luminaires(luminaire_set(load_scene(Path(args["scene"]))))
    rho = np.full((1, N_BINS), 0.5)
    night = NightLight(window_lit_fraction=1.0)
    st = IndirectSettings(bounces=int(args["bounces"]), samples_per_pixel=int(args["paths"]), night=night)

    def windows(n: int) -> LitWindows:
        # Half on each facade (facing the street, 5 mm in front of it), in storeys of 3 m from
        # 0.9 m, as many columns as needed along the street, spread over its middle 160 m.
        rows = []
        for side, y, e1 in ((0, -width / 2 + 0.005, (1.2, 0.0, 0.0)), (1, width / 2 - 0.005, (-1.2, 0.0, 0.0))):
            k = n // 2 + (n % 2 if side == 0 else 0)
            cols = max(1, -(-k // 4))
            for i in range(k):
                c, s = divmod(i, 4)
                x = -80.0 + 160.0 * (c + 0.5) / cols + (0.0 if side == 0 else 1.2)
                corner, a, b = np.array([x, y, 0.9 + 3.0 * s]), np.array(e1), np.array([0.0, 0.0, 1.4])
                nrm = np.cross(a, b)
                area = float(np.linalg.norm(nrm))
                rows.append(np.concatenate([corner, a, b, nrm / area, [area, 1.0]]))
        return LitWindows(np.array(rows), np.zeros(n, np.int64), np.zeros(n, np.int64), (n, 0))

    rng = np.random.default_rng(1)
    m = int(args["points"])
    third = m // 3
    pts = np.zeros((m, 3))
    nrm = np.zeros((m, 3))
    pts[:third] = np.column_stack([rng.uniform(-80, 80, third), rng.uniform(-7, 7, third), np.zeros(third)])
    nrm[:third] = (0.0, 0.0, 1.0)
    for j, (a, b) in enumerate(((third, 2 * third), (2 * third, m))):
        y = -width / 2 if j == 0 else width / 2
        pts[a:b] = np.column_stack([rng.uniform(-80, 80, b - a), np.full(b - a, y), rng.uniform(0.2, 11.8, b - a)])
        nrm[a:b] = (0.0, 1.0 if j == 0 else -1.0, 0.0)
    mat = np.zeros(m, np.int32)
    out = {}
    for n in args["counts"]:
        tracer = PathTracer(mesh, bvh, lights, rho, st, windows=windows(int(n)))
        transport_at_points(pts[:4], nrm[:4], mat[:4], tracer, 0)  # compiled or loaded, untimed
        t0 = time.process_time()
        transport_at_points(pts, nrm, mat, tracer, 0)
        out[str(n)] = (time.process_time() - t0) / (m * int(args["paths"]))
    return out


def _measure(tree: Path, args: dict) -> dict:
    env = dict(os.environ)
    env["PYTHONPATH"] = str(tree) + os.pathsep + env.get("PYTHONPATH", "")
    code = (
        "import json, sys\nfrom pathlib import Path\n"
        + inspect.getsource(run_child)
        + "\nprint(json.dumps(run_child(json.loads(sys.argv[1]))))\n"
    )
    proc = subprocess.run(
        [sys.executable, "-c", code, json.dumps(args)], cwd=tree, env=env, capture_output=True, text=True
    )
    if proc.returncode != 0:
        raise RuntimeError(f"the window benchmark from {tree} failed ({proc.returncode}):\n{proc.stderr[-2000:]}")
    return json.loads(proc.stdout.strip().splitlines()[-1])


def cmd_windows(args: argparse.Namespace) -> int:
    trees = {THIS: Path(__file__).resolve().parents[2]}
    if args.against:
        trees[OTHER] = Path(args.against).resolve()
    counts = [int(c) for c in args.counts]
    child = {
        "scene": str(trees[THIS] / "scenes" / "tests" / "point_over_plane.toml"),
        "counts": counts,
        "points": args.points,
        "paths": args.paths,
        "bounces": args.bounces,
    }
    times: dict[str, dict[int, list[float]]] = {k: {n: [] for n in counts} for k in trees}
    load = []
    for _ in range(max(1, args.rounds)):
        for name, tree in trees.items():
            load.append(os.getloadavg()[0])
            got = _measure(tree, child)
            for n in counts:
                times[name][n].append(got[str(n)])
    spread = {k: {n: Spread(tuple(v)) for n, v in t.items()} for k, t in times.items()}
    print(
        f"lit windows in a 200 m street canyon, {args.points} points × {args.paths} paths, {args.bounces} bounces; "
        f"processor time per path per point, min / median / max over {args.rounds} rounds "
        f"(load average {min(load):.1f}–{max(load):.1f})"
    )
    for name in trees:
        for n in counts:
            print(f"{name:<10} {n:4d} windows: {spread[name][n].text(1e6, '.2f')} µs")
        base = counts[0]
        for n in counts[1:]:
            print(f"{name:<10} {n} / {base} windows: {ratios(spread[name][n], spread[name][base]).text(1, '.2f')}")
    if args.against:
        for n in counts:
            print(f"{n:4d} windows: this / against {ratios(spread[THIS][n], spread[OTHER][n]).text(1, '.2f')}")
    return 0


def add_parser(sub) -> None:
    p = sub.add_parser("windows", help="lit windows: time per path with 10, 100, 400 lit windows, against a tree")
    p.add_argument("--against", default=None, help="another checkout of lampcast to measure alternately")
    p.add_argument("--counts", nargs="+", type=int, default=list(DEFAULT_COUNTS))
    p.add_argument("--points", type=int, default=600)
    p.add_argument("--paths", type=int, default=16)
    p.add_argument("--bounces", type=int, default=3)
    p.add_argument("--rounds", type=int, default=3)
    p.set_defaults(func=cmd_windows)
