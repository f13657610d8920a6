"""Demo benchmark (``python -m render.bench demo``): the whole ``lampcast demo`` with numba's cache warm.

Each run is ``python -m render demo --quiet --out FOLDER`` as a new process, so the figure is
what a user waits for: interpreter start-up, imports, the scene, five views rendered under the
before setup and relit under each option, the vision stage, every image file, the colour
analysis, the calculation with its pictures, ``metrics.json`` and ``report.html``. One untimed
run of each tree first, so that byte-code and numba's kernel cache are written.

``--against DIR`` runs a second checkout of lampcast (e.g. an older commit made with
``git worktree add DIR COMMIT``) the same way, from ``DIR`` (``PYTHONPATH=DIR``, its own numba
cache beside its sources), the two trees alternating within each round
(:func:`render.bench.timing.interleaved`), and prints their ratio round by round. Printed per
tree: wall seconds and processor seconds (user + system of the child process, every thread),
min / median / max over ``--rounds`` rounds; then what the outputs are:

* whether two runs of the same tree wrote the same bytes in every file (they must: the same
  scene and seed give the same bytes);
* with ``--against``: the files whose bytes differ between the trees, and of the PNG and GIF
  files among them whether their pixels (every frame) are the same, and the total bytes of the
  image files of each tree.

``--width`` and ``--spp`` pass the demo's options on (a smaller run); ``--quick`` is a smoke run
(one round, 96 pixels wide, one sample per pixel) for tests, whose figures measure nothing.
"""

from __future__ import annotations

import argparse
import os
import subprocess
import sys
import tempfile
import time
from dataclasses import dataclass
from pathlib import Path

from render.bench.timing import Spread, ratios

__all__ = ["DemoBench", "OutputComparison", "add_parser", "cmd_demo", "compare_outputs", "run_bench"]

#: Image width and samples per pixel of ``--quick`` (a smoke run, not a measurement).
QUICK_WIDTH_PX = 96
QUICK_SPP = 1
#: Name of the tree being measured (the one this module was imported from).
THIS = "this tree"
#: Name of the ``--against`` tree.
OTHER = "against"


@dataclass(frozen=True)
class OutputComparison:
    """How two output folders compare: files present in one only, files whose bytes differ,
    which of the differing images have the same pixels, and the image files' total bytes."""

    only_in_one: tuple[str, ...]
    differing: tuple[str, ...]
    same_pixels: tuple[str, ...]
    image_bytes: tuple[int, int]

    @property
    def identical(self) -> bool:
        return not self.only_in_one and not self.differing


@dataclass(frozen=True)
class DemoBench:
    """Wall and processor seconds per tree over the rounds, and what the outputs were."""

    wall_s: dict[str, Spread]
    cpu_s: dict[str, Spread]
    repeatable: dict[str, bool]
    against: OutputComparison | None


def _files(folder: Path) -> dict[str, Path]:
    return {p.relative_to(folder).as_posix(): p for p in sorted(folder.rglob("*")) if p.is_file()}


def _pixels(path: Path) -> list:
    """Every frame of an image file as arrays."""
    import numpy as np
    from PIL import Image, ImageSequence

    with Image.open(path) as im:
        return [np.asarray(f.convert("RGBA")) for f in ImageSequence.Iterator(im)]


def compare_outputs(a: Path, b: Path, trees: tuple[Path, Path] | None = None) -> OutputComparison:
    """Compare the files of output folders ``a`` and ``b`` (module text). ``trees``: the
    folders the two runs' lampcast came from; ``metrics.json`` names the demo scene's path
    inside them, so in JSON files each tree's folder is read as the same text."""
    import numpy as np

    fa, fb = _files(Path(a)), _files(Path(b))

    def content(path: Path, tree: Path | None) -> bytes:
        data = path.read_bytes()
        if tree is not None and path.suffix == ".json":
            data = data.replace(str(tree).encode("utf-8"), b"<tree>")
        return data

    ta, tb = trees or (None, None)
    only = tuple(sorted(set(fa) ^ set(fb)))
    differing = tuple(k for k in fa if k in fb and content(fa[k], ta) != content(fb[k], tb))
    same = []
    for k in differing:
        if k.endswith((".png", ".gif")):
            pa, pb = _pixels(fa[k]), _pixels(fb[k])
            if len(pa) == len(pb) and all(np.array_equal(x, y) for x, y in zip(pa, pb)):
                same.append(k)
    sizes = tuple(sum(p.stat().st_size for k, p in f.items() if k.endswith((".png", ".gif"))) for f in (fa, fb))
    return OutputComparison(only, differing, tuple(same), sizes)


def _run(tree: Path, out: Path, extra: list[str]) -> tuple[float, float]:
    """Wall and processor seconds of one ``lampcast demo`` in a new process run from ``tree``
    (the folder holding the ``render`` package; ``python -m`` puts the working folder first)."""
    env = dict(os.environ)
    env["PYTHONPATH"] = str(tree) + os.pathsep + env.get("PYTHONPATH", "")
    t0 = time.perf_counter()
    proc = subprocess.Popen(
        [sys.executable, "-m", "render", "demo", "--quiet", "--out", str(out), *extra],
        cwd=tree,
        env=env,
        stdout=subprocess.DEVNULL,
        stderr=subprocess.PIPE,
    )
    _, status, usage = os.wait4(proc.pid, 0)
    wall = time.perf_counter() - t0
    proc.returncode = os.waitstatus_to_exitcode(status)
    err = proc.stderr.read().decode("utf-8", "replace") if proc.stderr else ""
    if proc.stderr:
        proc.stderr.close()
    if proc.returncode != 0:
        raise RuntimeError(f"lampcast demo from {tree} failed ({proc.returncode}):\n{err[-2000:]}")
    return wall, usage.ru_utime + usage.ru_stime


def run_bench(
    *, rounds: int = 3, against: str | Path | None = None, width: int | None = None, spp: int | None = None
) -> DemoBench:
    """Run the benchmark (module text) and return its figures."""
    extra = (["--width", str(width)] if width else []) + (["--spp", str(spp)] if spp else [])
    trees: dict[str, Path] = {THIS: Path(__file__).resolve().parents[2]}
    if against is not None:
        trees[OTHER] = Path(against).resolve()
    wall: dict[str, list[float]] = {k: [] for k in trees}
    cpu: dict[str, list[float]] = {k: [] for k in trees}
    with tempfile.TemporaryDirectory(prefix="lampcast-demo-bench-") as tmp:
        root = Path(tmp)
        for name, tree in trees.items():  # warm-up: byte-code and numba's cache written
            _run(tree, root / f"{name}-warm", extra)
        for i in range(max(1, rounds)):
            for name, tree in trees.items():
                w, c = _run(tree, root / f"{name}-{i}", extra)
                wall[name].append(w)
                cpu[name].append(c)
        repeatable = {name: compare_outputs(root / f"{name}-warm", root / f"{name}-0").identical for name in trees}
        versus = (
            compare_outputs(root / f"{THIS}-0", root / f"{OTHER}-0", (trees[THIS], trees[OTHER]))
            if against is not None
            else None
        )
    return DemoBench(
        {k: Spread(tuple(v)) for k, v in wall.items()},
        {k: Spread(tuple(v)) for k, v in cpu.items()},
        repeatable,
        versus,
    )


def cmd_demo(args: argparse.Namespace) -> int:
    width, spp, rounds = args.width, args.spp, args.rounds
    if args.quick:
        width, spp, rounds = QUICK_WIDTH_PX, QUICK_SPP, 1
    b = run_bench(rounds=rounds, against=args.against, width=width, spp=spp)
    print(
        f"lampcast demo, numba cache warm, {rounds} rounds"
        + (f", width {width} px" if width else "")
        + (f", {spp} spp" if spp else "")
        + (f"; against {args.against}" if args.against else "")
    )
    print(f"{'tree':<12} {'wall s min / median / max':>28} {'processor s min / median / max':>32}")
    for name in b.wall_s:
        print(f"{name:<12} {b.wall_s[name].text(fmt='.2f'):>28} {b.cpu_s[name].text(fmt='.2f'):>32}")
    if OTHER in b.wall_s:
        wr, cr = ratios(b.wall_s[OTHER], b.wall_s[THIS]), ratios(b.cpu_s[OTHER], b.cpu_s[THIS])
        print(f"{'against/this':<12} {wr.text(fmt='.2f'):>28} {cr.text(fmt='.2f'):>32}")
        print("per round, wall: " + ", ".join(f"{v:.2f}" for v in wr.values))
    for name, same in b.repeatable.items():
        print(f"{name}: two runs wrote {'the same bytes in every file' if same else 'DIFFERENT bytes'}")
    if b.against is not None:
        c = b.against
        if c.only_in_one:
            print("files in one tree's output only: " + ", ".join(c.only_in_one))
        print(
            f"files whose bytes differ between the trees: {len(c.differing)}, of which images with the same "
            f"pixels: {len(c.same_pixels)}"
        )
        other = [k for k in c.differing if k not in c.same_pixels]
        if other:
            print("  differing otherwise: " + ", ".join(other))
        print(f"image files: {c.image_bytes[0] / 1e6:.2f} MB ({THIS}), {c.image_bytes[1] / 1e6:.2f} MB ({OTHER})")
    return 0 if all(b.repeatable.values()) else 1


def add_parser(sub) -> None:
    p = sub.add_parser("demo", help="the whole lampcast demo, numba cache warm, optionally against another tree")
    p.add_argument("--rounds", type=int, default=3, help="rounds, the trees alternating (default 3)")
    p.add_argument("--against", metavar="DIR", default=None, help="another lampcast checkout to run side by side")
    p.add_argument("--width", type=int, default=None, help="image width passed to the demo")
    p.add_argument("--spp", type=int, default=None, help="samples per pixel passed to the demo")
    p.add_argument("--quick", action="store_true", help="smoke run: one round, 96 px wide, 1 spp")
    p.set_defaults(func=cmd_demo)
