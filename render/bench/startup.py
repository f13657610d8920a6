"""Start-up benchmark (``python -m render.bench startup``): quick commands, a big OBJ, a cold demo.

What a user waits for before anything is rendered:

* ``check``, ``lamps``, ``materials`` -- ``lampcast check DEMO``, ``lampcast lamps`` and
  ``lampcast materials``, each run as a new process (``python -m render``, output discarded),
  wall time from start to exit: interpreter start-up, imports, the libraries read, the command's
  work (``check`` of the demo also builds the geometry and renders a tiny preview of every view
  for its warnings). One untimed run of each first, so that byte-code and numba's kernel cache
  are written;
* ``obj`` -- :func:`render.scene.load_scene` plus :func:`render.geometry.build.compile_scene` of
  a scene holding one generated OBJ file of about ``--triangles`` triangles (default one
  million: a grid of quads, half written as two triangles and half as quads, references
  ``v//vn``, two materials), in this process;
* ``--cold`` (long) -- ``lampcast demo`` as a new process with ``NUMBA_CACHE_DIR`` pointing at a
  new empty folder (every kernel compiled), then again with that folder filled (warm); the
  difference is about the time spent compiling kernels.

The rows alternate within each round (:func:`render.bench.timing.interleaved`); each is printed
as min / median / max over ``--rounds`` rounds. ``--quick`` (one round, a 2 000-triangle OBJ) is
a smoke run for tests; its figures measure nothing.
"""

from __future__ import annotations

import argparse
import math
import os
import subprocess
import sys
import tempfile
import time
from dataclasses import dataclass
from pathlib import Path

from render.bench.timing import Spread, interleaved
from render.resources import demo_scene_path

__all__ = ["StartupBench", "add_parser", "cmd_startup", "obj_grid_text", "run_bench", "run_cold_demo"]

#: Triangles of the generated OBJ file.
DEFAULT_TRIANGLES = 1_000_000
QUICK_TRIANGLES = 2_000


@dataclass(frozen=True)
class StartupBench:
    """Seconds per run of each row over the rounds, by row name, and the OBJ's triangle count."""

    times: dict[str, Spread]
    obj_triangles: int


def obj_grid_text(n_triangles: int) -> str:
    """An OBJ file of a gently waved square grid of at least ``n_triangles`` triangles: the
    first half of the quads written as two triangles, the rest as quads, under two materials,
    each vertex with its own normal (``v//vn`` references)."""
    import numpy as np

    n = max(1, math.ceil(math.sqrt(n_triangles / 2)))
    i, j = np.meshgrid(np.arange(n + 1), np.arange(n + 1), indexing="ij")
    x, y = 10.0 * i.ravel() / n, 10.0 * j.ravel() / n
    z = 0.2 * np.sin(x) * np.cos(y)
    normal = np.column_stack([-0.2 * np.cos(x) * np.cos(y), 0.2 * np.sin(x) * np.sin(y), np.ones_like(x)])
    lines = ["# lampcast start-up benchmark: a generated grid"]
    lines += [f"v {a:.6f} {b:.6f} {c:.6f}" for a, b, c in zip(x, y, z)]
    lines += [f"vn {a:.6f} {b:.6f} {c:.6f}" for a, b, c in normal]
    k = (i[:-1, :-1] * (n + 1) + j[:-1, :-1]).ravel() + 1
    quads = np.column_stack([k, k + n + 1, k + n + 2, k + 1])
    half = quads.shape[0] // 2
    lines.append("usemtl ground")
    for a, b, c, d in quads[:half].tolist():
        lines.append(f"f {a}//{a} {b}//{b} {c}//{c}")
        lines.append(f"f {a}//{a} {c}//{c} {d}//{d}")
    lines.append("usemtl kerb")
    lines += [f"f {a}//{a} {b}//{b} {c}//{c} {d}//{d}" for a, b, c, d in quads[half:].tolist()]
    return "\n".join(lines) + "\n"


def _obj_scene(folder: Path, n_triangles: int) -> Path:
    (folder / "grid.obj").write_text(obj_grid_text(n_triangles), encoding="ascii")
    scene = folder / "grid.toml"
    scene.write_text(
        '[scene]\nname = "OBJ grid"\n\n[[geometry]]\nkind = "obj"\nfile = "grid.obj"\nmaterial = "asphalt-new"\n\n'
        '[[views]]\nname = "above"\nposition_m = [5.0, -20.0, 10.0]\ntarget_m = [5.0, 5.0, 0.0]\n',
        encoding="utf-8",
    )
    return scene


def _command(*args: str, env: dict[str, str] | None = None) -> None:
    """Run ``python -m render ARGS`` to its end, output discarded; a failure stops the benchmark."""
    subprocess.run(
        [sys.executable, "-m", "render", *args],
        stdout=subprocess.DEVNULL,
        stderr=subprocess.DEVNULL,
        check=True,
        env=env,
    )


def run_bench(*, rounds: int = 5, triangles: int = DEFAULT_TRIANGLES, scene: str | Path | None = None) -> StartupBench:
    """Time the quick commands and the OBJ load (see the module text)."""
    from render.geometry.build import compile_scene
    from render.scene import load_scene

    demo = str(scene or demo_scene_path())
    commands = {
        "check": ("check", demo, "-q"),
        "lamps": ("lamps", "-q"),
        "materials": ("materials", "-q"),
    }
    with tempfile.TemporaryDirectory(prefix="lampcast-startup-") as tmp:
        obj_scene = _obj_scene(Path(tmp), triangles)
        n_obj = compile_scene(load_scene(obj_scene)).n_triangles  # also the warm-up of this process
        for args in commands.values():  # warm-up: byte-code and the kernel cache written
            _command(*args)
        fns = {name: (lambda a=args: _command(*a)) for name, args in commands.items()}
        fns["obj"] = lambda: compile_scene(load_scene(obj_scene))
        times, _ = interleaved(fns, rounds)
    return StartupBench(times, n_obj)


def run_cold_demo(rounds: int = 1, width: int | None = None) -> dict[str, Spread]:
    """``lampcast demo`` with an empty numba cache (cold) and then with it filled (warm), seconds."""
    cold: list[float] = []
    warm: list[float] = []
    for _ in range(max(1, rounds)):
        with tempfile.TemporaryDirectory(prefix="lampcast-cold-") as tmp:
            env = {**os.environ, "NUMBA_CACHE_DIR": str(Path(tmp) / "numba")}
            args = ["demo", "--out", str(Path(tmp) / "out"), "-q"] + (["--width", str(width)] if width else [])
            for out in (cold, warm):
                t0 = time.perf_counter()
                _command(*args, env=env)
                out.append(time.perf_counter() - t0)
    return {"demo cold": Spread(tuple(cold)), "demo warm": Spread(tuple(warm))}


def cmd_startup(args: argparse.Namespace) -> int:
    rounds = 1 if args.quick else args.rounds
    triangles = QUICK_TRIANGLES if args.quick else args.triangles
    bench = run_bench(rounds=rounds, triangles=triangles, scene=args.scene)
    print(
        f"lampcast check/lamps/materials as new processes ({Path(args.scene or demo_scene_path()).name}); "
        f"OBJ load + compile of {bench.obj_triangles:,} triangles in this process"
    )
    if args.quick:
        print("quick run: a smoke test of the benchmark, not a measurement")
    print(f"min / median / max over {rounds} round(s), the rows alternating within a round, after one warm-up run")
    rows = [(name, spread.text(1, ".3f") + " s") for name, spread in bench.times.items()]
    if args.cold:
        demo = run_cold_demo(args.cold_rounds, QUICK_COLD_WIDTH if args.quick else None)
        rows += [(name, spread.text(1, ".1f") + " s") for name, spread in demo.items()]
        compile_s = Spread(tuple(c - w for c, w in zip(demo["demo cold"].values, demo["demo warm"].values)))
        rows.append(("demo cold-warm", compile_s.text(1, ".1f") + " s"))
    width = max(len(r[0]) for r in rows)
    for label, text in rows:
        print(f"{label:<{width}}  {text}")
    return 0


#: Image width of ``--quick --cold`` (a smoke run of the cold demo's rows).
QUICK_COLD_WIDTH = 48


def add_parser(sub) -> None:
    p = sub.add_parser("startup", help="lampcast check/lamps/materials wall time, a 1M-triangle OBJ, a cold demo")
    p.add_argument("--scene", default=None, help="scene for check (default: the bundled demo)")
    p.add_argument("--rounds", type=int, default=5, help="rounds, the rows alternating (default 5)")
    p.add_argument(
        "--triangles", type=int, default=DEFAULT_TRIANGLES, help=f"OBJ triangles (default {DEFAULT_TRIANGLES:,})"
    )
    p.add_argument(
        "--cold",
        action="store_true",
        help="also lampcast demo with an empty numba cache, then warm (minutes per round)",
    )
    p.add_argument("--cold-rounds", type=int, default=1, help="rounds of the cold demo (default 1)")
    p.add_argument("--quick", action="store_true", help="smoke run: one round, a 2,000-triangle OBJ")
    p.set_defaults(func=cmd_startup)
