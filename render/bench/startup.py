"""Start-up benchmark (``python -m render.bench startup``): quick commands, a big OBJ, a cold demo.

What a user waits for before anything is rendered:

* ``check``, ``lamps``, ``materials`` -- ``lampcast check DEMO``, ``lampcast lamps`` and
  ``lampcast materials``, each run as a new process (``python -m render``, output discarded),
  wall time from start to exit: interpreter start-up, imports, the libraries read, the command's
  work (``check`` of the demo also builds the geometry and renders a tiny preview of every view
  for its warnings). One untimed run of each first, so that byte-code and numba's kernel cache
  are written (``PYTHONDONTWRITEBYTECODE`` is left out of the commands' environment, as an
  installed package has its byte-code); wall seconds, and processor seconds of each new process.
  ``--against DIR`` without ``--cold`` adds the same three commands with the ``render`` package
  of another source tree (run in that folder), rows ``NAME (before)``, all rows alternating;
* ``obj`` -- :func:`render.scene.load_scene` plus :func:`render.geometry.build.compile_scene` of
  a scene holding one generated OBJ file of about ``--triangles`` triangles (default one
  million: a grid of quads, half written as two triangles and half as quads, references
  ``v//vn``, two materials), in this process;
* ``--cold`` (long) -- ``lampcast demo`` as a new process with ``NUMBA_CACHE_DIR`` pointing at a
  new empty folder (every kernel compiled; on a first run the command compiles its later
  kernels in a helper process, :mod:`render.warmup`), then again with that folder filled
  (warm): wall seconds, and processor seconds of the command and its helper together. Then,
  once more cold and with the compile log on, the first compilation of every kernel: processor
  seconds of the compiling thread (numba's ``numba:compile`` events, a kernel's callees
  included), in the command and in the helper, their totals, and every function of lampcast
  (callees too) compiled more than once: one compilation per specialisation and process, so a
  count of 2 is a second specialisation or the same one compiled by both processes.
  ``--against DIR`` runs the same rows, round by round alternating, with the ``render`` package of another source tree (say a worktree of an
  earlier commit: ``git worktree add /tmp/before HEAD~3``), side by side.

The rows alternate within each round (:func:`render.bench.timing.interleaved`); each is printed
as min / median / max over ``--rounds`` rounds. ``--quick`` (one round, a 2 000-triangle OBJ) is
a smoke run for tests; its figures measure nothing.
"""

from __future__ import annotations

import argparse
import json
import math
import os
import resource
import subprocess
import sys
import tempfile
import time
from dataclasses import dataclass, field
from pathlib import Path

from render.bench.timing import Spread, interleaved
from render.resources import demo_scene_path

__all__ = [
    "ColdDemo",
    "KernelCompiles",
    "StartupBench",
    "add_parser",
    "cmd_startup",
    "kernel_table",
    "obj_grid_text",
    "run_bench",
    "run_cold_demo",
]

#: Triangles of the generated OBJ file.
DEFAULT_TRIANGLES = 1_000_000
QUICK_TRIANGLES = 2_000


@dataclass(frozen=True)
class StartupBench:
    """Seconds per run of each row over the rounds, by row name, the OBJ's triangle count and
    the processor seconds of each command row (user + system of the new process)."""

    times: dict[str, Spread]
    obj_triangles: int
    cpu: dict[str, Spread] = field(default_factory=dict)


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


def _command(*args: str, env: dict[str, str] | None = None, cwd: Path | None = None) -> None:
    """Run ``python -m render ARGS`` to its end, output discarded; a failure stops the benchmark.
    ``cwd``: the folder it runs in (``-m`` puts it first on the module path)."""
    subprocess.run(
        [sys.executable, "-m", "render", *args],
        stdout=subprocess.DEVNULL,
        stderr=subprocess.DEVNULL,
        check=True,
        env=env,
        cwd=cwd,
    )


def _bytecode_env() -> dict[str, str]:
    """This process's environment without ``PYTHONDONTWRITEBYTECODE``: the warm-up run writes
    the byte-code an installed package has (pip compiles it; an editable install writes it on
    first import), so the timed runs do not compile the modules from source each time."""
    return {k: v for k, v in os.environ.items() if k != "PYTHONDONTWRITEBYTECODE"}


def _timed_command(args: tuple[str, ...], cpu: list[float], env: dict[str, str], cwd: Path | None) -> None:
    """:func:`_command`, appending its processor seconds (user + system) to ``cpu``."""
    before = resource.getrusage(resource.RUSAGE_CHILDREN)
    _command(*args, env=env, cwd=cwd)
    after = resource.getrusage(resource.RUSAGE_CHILDREN)
    cpu.append((after.ru_utime - before.ru_utime) + (after.ru_stime - before.ru_stime))


def run_bench(
    *,
    rounds: int = 5,
    triangles: int = DEFAULT_TRIANGLES,
    scene: str | Path | None = None,
    against: str | Path | None = None,
) -> StartupBench:
    """Time the quick commands and the OBJ load (see the module text); with ``against``, the
    quick commands of that source tree's ``render`` too, as rows named ``NAME (before)``, every
    row alternating within a round. Processor seconds of the commands are in ``cpu``."""
    from render.geometry.build import compile_scene
    from render.scene import load_scene

    demo = str(Path(scene or demo_scene_path()).resolve())
    commands = {
        "check": ("check", demo, "-q"),
        "lamps": ("lamps", "-q"),
        "materials": ("materials", "-q"),
    }
    trees: dict[str, Path | None] = {"": None}
    if against is not None:
        trees = {" (before)": Path(against).resolve(), "": None}
    env = _bytecode_env()
    cpu: dict[str, list[float]] = {}
    with tempfile.TemporaryDirectory(prefix="lampcast-startup-") as tmp:
        obj_scene = _obj_scene(Path(tmp), triangles)
        n_obj = compile_scene(load_scene(obj_scene)).n_triangles  # also the warm-up of this process
        fns = {}
        for name, args in commands.items():
            for suffix, tree in trees.items():
                _command(*args, env=env, cwd=tree)  # warm-up: byte-code and the kernel cache written
                cpu[name + suffix] = []
                fns[name + suffix] = lambda a=args, c=cpu[name + suffix], t=tree: _timed_command(a, c, env, t)
        fns["obj"] = lambda: compile_scene(load_scene(obj_scene))
        times, _ = interleaved(fns, rounds)
    return StartupBench(times, n_obj, {k: Spread(tuple(v)) for k, v in cpu.items()})


# Installed as sitecustomize in the compile-log runs: every Python process of the command
# (the command and its helper) appends the kernels it compiles, with the compiling thread's
# processor seconds (callees included), to a JSON file named by its process id.
_COMPILE_LOG = """
import atexit, json, os, sys, threading, time
from numba.core import event
_log, _state, _start = [], threading.local(), time.time()
class _Listener(event.Listener):
    def on_start(self, ev):
        stack = _state.__dict__.setdefault("stack", [])
        stack.append((time.thread_time(), time.time()))
    def on_end(self, ev):
        stack = _state.stack
        t0, wall0 = stack.pop()
        f = ev.data["dispatcher"].py_func
        sig = ", ".join(str(a) for a in ev.data["args"])
        name = f.__module__ + "." + f.__qualname__
        _log.append([name, time.thread_time() - t0, len(stack), sig, wall0, time.time()])
event.register("numba:compile", _Listener())
def _save():
    role = "helper" if os.path.basename(sys.argv[0]) == "warmup.py" else "command"
    path = os.path.join(os.environ["LAMPCAST_COMPILE_LOG"], f"{os.getpid()}.json")
    with open(path, "w") as f:
        json.dump({"role": role, "kernels": _log, "start": _start, "end": time.time()}, f)
atexit.register(_save)
"""


@dataclass(frozen=True)
class ColdDemo:
    """Seconds per round of a cold and a warm ``lampcast demo``, and the first compilations
    of one cold run: kernel -> (processor seconds in the command, in the helper)."""

    cold_wall: Spread
    cold_cpu: Spread
    warm_wall: Spread
    kernels: dict[str, tuple[float, float]] = field(default_factory=dict)
    #: Every function compiled (a kernel's callees too): function -> (compilations in the
    #: command, in the helper), one per specialisation compiled in that process.
    compilations: dict[str, tuple[int, int]] = field(default_factory=dict)


def _demo(env: dict[str, str], out: Path, width: int | None) -> tuple[float, float]:
    """One ``lampcast demo`` as a new process: (wall seconds, processor seconds of it and its
    helper)."""
    before = resource.getrusage(resource.RUSAGE_CHILDREN)
    t0 = time.perf_counter()
    # Run from the output's parent folder, so that PYTHONPATH decides which render is used.
    _command("demo", "--out", str(out), "-q", *(["--width", str(width)] if width else []), env=env, cwd=out.parent)
    wall = time.perf_counter() - t0
    after = resource.getrusage(resource.RUSAGE_CHILDREN)
    cpu = (after.ru_utime - before.ru_utime) + (after.ru_stime - before.ru_stime)
    return wall, cpu


def _tree_env(tmp: Path, tree: Path | None, *extra: Path) -> dict[str, str]:
    """The environment of a run: an empty kernel cache in ``tmp``, and the ``render`` package
    of ``tree`` first on the path when given."""
    paths = [str(p) for p in (*extra, tree) if p is not None]
    old = os.environ.get("PYTHONPATH", "")
    env = {**os.environ, "NUMBA_CACHE_DIR": str(tmp / "numba")}
    env["PYTHONPATH"] = os.pathsep.join(paths + ([old] if old else []))
    return env


@dataclass(frozen=True)
class KernelCompiles:
    """The first compilations of one cold run: top-level kernel -> (processor seconds in the
    command, in the helper), callees included; and every compiled function (callees too) ->
    (compilations in the command, in the helper)."""

    seconds: dict[str, tuple[float, float]]
    compilations: dict[str, tuple[int, int]]


def kernel_table(tree: Path | None = None, width: int | None = None) -> KernelCompiles:
    """First compilation of every kernel in a cold ``lampcast demo`` with ``tree``'s
    ``render`` (default this one), in the command and in its helper."""
    with tempfile.TemporaryDirectory(prefix="lampcast-kernels-") as tmp:
        tmp = Path(tmp)
        site = tmp / "site"
        logs = tmp / "log"
        site.mkdir()
        logs.mkdir()
        (site / "sitecustomize.py").write_text(_COMPILE_LOG, encoding="utf-8")
        env = _tree_env(tmp, tree, site)
        env["LAMPCAST_COMPILE_LOG"] = str(logs)
        _demo(env, tmp / "out", width)
        table: dict[str, list[float]] = {}
        counts: dict[str, list[int]] = {}
        for path in logs.glob("*.json"):
            data = json.loads(path.read_text(encoding="utf-8"))
            col = 1 if data["role"] == "helper" else 0
            for name, seconds, depth, *_ in data["kernels"]:
                counts.setdefault(name, [0, 0])[col] += 1
                if depth == 0:
                    table.setdefault(name, [0.0, 0.0])[col] += seconds
    return KernelCompiles({k: (v[0], v[1]) for k, v in table.items()}, {k: (v[0], v[1]) for k, v in counts.items()})


def run_cold_demo(
    rounds: int = 1, width: int | None = None, trees: dict[str, Path | None] | None = None, kernels: bool = True
) -> dict[str, ColdDemo]:
    """``lampcast demo`` with an empty numba cache (cold) and then with it filled (warm), per
    tree (default this one, as "after"), the trees alternating within a round; and, with
    ``kernels``, one more cold run per tree with the compile log (:func:`kernel_table`)."""
    trees = trees or {"after": None}
    runs: dict[str, list[tuple[float, float, float]]] = {name: [] for name in trees}
    for _ in range(max(1, rounds)):
        for name, tree in trees.items():
            with tempfile.TemporaryDirectory(prefix="lampcast-cold-") as tmp:
                tmp = Path(tmp)
                env = _tree_env(tmp, tree)
                cold_wall, cold_cpu = _demo(env, tmp / "out", width)
                warm_wall, _ = _demo(env, tmp / "out", width)
                runs[name].append((cold_wall, cold_cpu, warm_wall))
    out = {}
    for name, tree in trees.items():
        cw, cc, ww = (Spread(tuple(r[i] for r in runs[name])) for i in range(3))
        compiles = kernel_table(tree, width) if kernels else KernelCompiles({}, {})
        out[name] = ColdDemo(cw, cc, ww, compiles.seconds, compiles.compilations)
    return out


def _print_cold(demo: dict[str, ColdDemo], rounds: int) -> None:
    names = list(demo)
    print()
    print(
        f"cold lampcast demo (fresh numba cache) and warm, min / median / max over {rounds} round(s)"
        + (", trees alternating" if len(names) > 1 else "")
    )
    rows = [("", *names)]
    rows.append(("demo cold, wall s", *(demo[n].cold_wall.text(1, ".1f") for n in names)))
    rows.append(("demo cold, processor s", *(demo[n].cold_cpu.text(1, ".1f") for n in names)))
    rows.append(("demo warm, wall s", *(demo[n].warm_wall.text(1, ".1f") for n in names)))
    rows.append(
        (
            "demo cold - warm, wall s",
            *(
                Spread(tuple(c - w for c, w in zip(demo[n].cold_wall.values, demo[n].warm_wall.values))).text(1, ".1f")
                for n in names
            ),
        )
    )
    widths = [max(len(r[i]) for r in rows) for i in range(len(rows[0]))]
    for r in rows:
        print("  ".join(f"{c:<{w}}" for c, w in zip(r, widths)))
    if not any(d.kernels for d in demo.values()):
        return
    print()
    print("first compilation per kernel, processor seconds of the compiling thread (callees included), one cold run:")
    print("command = in the command's process, helper = in its helper process (render.warmup)")
    kernels = sorted(
        {k for d in demo.values() for k in d.kernels},
        key=lambda k: -max(sum(d.kernels.get(k, (0, 0))) for d in demo.values()),
    )
    head = ["kernel"] + [f"{n} {col}" for n in names for col in ("command", "helper")]
    table = [head]
    for k in kernels:
        table.append(
            [k.removeprefix("render.")]
            + [f"{demo[n].kernels.get(k, (0.0, 0.0))[i]:.2f}" for n in names for i in (0, 1)]
        )
    table.append(["total"] + [f"{sum(v[i] for v in demo[n].kernels.values()):.2f}" for n in names for i in (0, 1)])
    widths = [max(len(r[i]) for r in table) for i in range(len(head))]
    for r in table:
        print("  ".join(f"{c:<{w}}" if i == 0 else f"{c:>{w}}" for i, (c, w) in enumerate(zip(r, widths))))
    print()
    for n in names:
        command, helper = (sum(v[i] for v in demo[n].kernels.values()) for i in (0, 1))
        print(
            f"{n}: compilation {command + helper:.1f} processor s, {command:.1f} in the command and {helper:.1f} "
            "in the helper"
        )
    twice = {
        k: [demo[n].compilations.get(k, (0, 0)) for n in names]
        for k in sorted({k for d in demo.values() for k in d.compilations if k.startswith("render.")})
        if any(sum(d.compilations.get(k, (0, 0))) > 1 for d in demo.values())
    }
    if twice:
        print()
        print("lampcast functions compiled more than once (one per specialisation and process; callees included):")
        head = ["function"] + [f"{n} {col}" for n in names for col in ("command", "helper")]
        table = [head] + [
            [k.removeprefix("render.")] + [str(c[j][i]) for j in range(len(names)) for i in (0, 1)]
            for k, c in twice.items()
        ]
        widths = [max(len(r[i]) for r in table) for i in range(len(head))]
        for r in table:
            print("  ".join(f"{c:<{w}}" if i == 0 else f"{c:>{w}}" for i, (c, w) in enumerate(zip(r, widths))))


def cmd_startup(args: argparse.Namespace) -> int:
    rounds = 1 if args.quick else args.rounds
    triangles = QUICK_TRIANGLES if args.quick else args.triangles
    bench = run_bench(rounds=rounds, triangles=triangles, scene=args.scene, against=None if args.cold else args.against)
    print(
        f"lampcast check/lamps/materials as new processes ({Path(args.scene or demo_scene_path()).name}); "
        f"OBJ load + compile of {bench.obj_triangles:,} triangles in this process"
    )
    if args.quick:
        print("quick run: a smoke test of the benchmark, not a measurement")
    if args.against and not args.cold:
        print(f"(before): the render package of {args.against}; the others: this one")
    print(f"min / median / max over {rounds} round(s), the rows alternating within a round, after one warm-up run")
    rows = [(name, spread.text(1, ".3f") + " s") for name, spread in bench.times.items()]
    width = max(len(r[0]) for r in rows)
    for label, text in rows:
        print(f"{label:<{width}}  {text}")
    print()
    print("processor seconds of the command rows (user + system), min / median / max")
    for name, spread in bench.cpu.items():
        print(f"{name:<{width}}  {spread.text(1, '.3f')} s processor")
    if args.cold:
        trees = {"after": None}
        if args.against:
            trees = {"before": Path(args.against).resolve(), "after": None}
        demo = run_cold_demo(args.cold_rounds, QUICK_COLD_WIDTH if args.quick else None, trees, not args.no_kernels)
        if args.against:
            print(f"before: the render package of {args.against}; after: this one")
        _print_cold(demo, args.cold_rounds)
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
    p.add_argument(
        "--against",
        metavar="DIR",
        default=None,
        help="a source tree holding another render package (e.g. a git worktree of an earlier commit), side by "
        "side as 'before': its check/lamps/materials rows, or with --cold its cold demo",
    )
    p.add_argument("--no-kernels", action="store_true", help="with --cold: leave out the per-kernel compile table")
    p.add_argument("--quick", action="store_true", help="smoke run: one round, a 2,000-triangle OBJ")
    p.set_defaults(func=cmd_startup)
