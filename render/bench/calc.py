"""Calculation benchmark (``python -m render.bench calc``): a full calculation against one render.

What a designer waits for after changing a lamp is either the figures or a picture. This
benchmark times both on the same scene (by default the bundled demo) and prints their ratio:

* **calc** -- :func:`render.calc.run.run_calculation` for the scene's ``[compare]`` before and
  options setups (the scene's own lamps when it has no ``[compare]``), with the scene's
  ``[calc]`` options and the class check against the lighting class ``--class`` (default
  ``P4``): every field (illuminance, footways' semicylindrical and vertical illuminance, edge
  ratio), road luminance and TI for every lane and direction, obtrusive light, sky and energy.
  Each call does what ``lampcast calc`` does after loading the scene, including building the
  geometry the calculation sees when it leaves the scene's objects out;
* **upward map** -- the part of the calc that is the upward exitance map
  (:class:`render.calc.sky.UpwardLight` cast on the calculation's scene and relit for every
  setup, as :func:`~render.calc.run.run_calculation` does), timed on its own on the
  calculation's scene built beforehand (its geometry and BVH every calc builds anyway); its
  share of the calc is printed;
* **render** -- :meth:`render.study.Study.render_view` of the scene's first view (or ``--view``)
  under the before setup, at the view's configured size and samples per pixel (camera rays,
  direct light with shadows, colorimetry; the BVH is built once beforehand).

Both are run once at a small size first so that the numba kernels are compiled (or loaded from
the cache) before anything is timed. The two then alternate within each round
(:func:`render.bench.timing.interleaved`), and the ratio calc/render is taken round by round.
``--quick`` is a smoke run: one round, the before setup only and a render 96 pixels wide with
one sample per pixel; its figures say nothing about speed.

Printed: a header naming the scene, setups, class and render size, then a table with the rows
``calc``, ``render`` and ``calc/render`` (min / median / max over the rounds) and a last line
with the ratio of each round.
"""

from __future__ import annotations

import argparse
from dataclasses import dataclass
from pathlib import Path

from render.bench.timing import Spread, interleaved, ratios
from render.resources import demo_scene_path

__all__ = ["CalcBench", "add_parser", "cmd_calc", "run_bench"]

DEMO = demo_scene_path()
#: Lighting class of the class check (EN 13201-2 P class of a residential street).
DEFAULT_CLASS = "P4"
#: Render size and samples per pixel of ``--quick`` (a smoke run, not a measurement).
QUICK_WIDTH_PX = 96
QUICK_SPP = 1


@dataclass(frozen=True)
class CalcBench:
    """The timings of one benchmark run, seconds per call over the rounds."""

    scene: str
    setups: tuple[str | None, ...]
    lighting_class: str
    view: str
    width_px: int
    height_px: int
    samples_per_pixel: int
    calc_s: Spread
    render_s: Spread
    upward_s: Spread | None = None

    @property
    def upward_share(self) -> Spread | None:
        """upward map / calc, round by round."""
        return ratios(self.upward_s, self.calc_s) if self.upward_s is not None else None

    @property
    def ratio(self) -> Spread:
        """calc/render, round by round."""
        return ratios(self.calc_s, self.render_s)


def run_bench(
    scene: str | Path = DEMO,
    *,
    view: str | None = None,
    lighting_class: str = DEFAULT_CLASS,
    rounds: int = 3,
    quick: bool = False,
) -> CalcBench:
    """Time the full calculation and the render of one view (see the module text)."""
    from render.calc.run import calc_options, calc_study, run_calculation
    from render.calc.sky import UpwardLight
    from render.study import Study

    study = Study(scene)
    sc = study.scene
    setups: list[str | None] = [sc.compare_before, *sc.compare_options] if sc.compare_before else [None]
    if quick:
        setups = setups[:1]
    options = calc_options(sc, lighting_class=lighting_class)
    v = sc.view(view)
    width = QUICK_WIDTH_PX if quick else None
    spp = QUICK_SPP if quick else sc.render.samples_per_pixel
    camera = study.camera(v.name, width)
    _ = study.bvh, study.reflectances

    # Warm-up: compile (or load from numba's cache) every kernel both sides use.
    study.render_view(v.name, setups[0], samples_per_pixel=1, width_px=32)
    run_calculation(study, setups[:1], options)

    used = calc_study(study, options.include_objects)
    _ = used.bvh, used.reflectances  # built by every calc anyway: not the map's cost

    def upward() -> None:
        light = UpwardLight(used, setups[0], bounces=options.bounces)
        for s in setups:
            light.exitance(s)

    times, _ = interleaved(
        {
            "calc": lambda: run_calculation(study, setups, options),
            "upward map": upward,
            "render": lambda: study.render_view(v.name, setups[0], samples_per_pixel=spp, width_px=width),
        },
        1 if quick else rounds,
    )
    return CalcBench(
        scene=Path(sc.path).name,
        setups=tuple(setups),
        lighting_class=lighting_class,
        view=v.name,
        width_px=camera.width_px,
        height_px=camera.height_px,
        samples_per_pixel=spp,
        calc_s=times["calc"],
        render_s=times["render"],
        upward_s=times["upward map"],
    )


def cmd_calc(args: argparse.Namespace) -> int:
    bench = run_bench(
        args.scene, view=args.view, lighting_class=args.lighting_class, rounds=args.rounds, quick=args.quick
    )
    names = ", ".join(s if s is not None else "the scene's lamps" for s in bench.setups)
    n = len(bench.calc_s.values)
    print(
        f"scene {bench.scene}: calc of {len(bench.setups)} setup(s) ({names}), class {bench.lighting_class}; "
        f"render of view '{bench.view}' at {bench.width_px}x{bench.height_px} px, "
        f"{bench.samples_per_pixel} samples/px"
    )
    if args.quick:
        print("quick run: a smoke test of the benchmark, not a measurement")
    print(f"min / median / max over {n} round(s), calc and render alternating within a round, after JIT warm-up")
    rows = [
        ("calc", bench.calc_s.text(1, ".3f") + " s"),
        ("render", bench.render_s.text(1, ".3f") + " s"),
        ("calc/render", bench.ratio.text(1, ".3f")),
    ]
    share = bench.upward_share
    if bench.upward_s is not None and share is not None:
        rows += [("upward map", bench.upward_s.text(1, ".3f") + " s"), ("upward map/calc", share.text(1, ".3f"))]
    width = max(len(r[0]) for r in rows)
    for label, text in rows:
        print(f"{label:<{width}}  {text}")
    print("calc/render per round: " + ", ".join(f"{r:.3f}" for r in bench.ratio.values))
    return 0


def add_parser(sub) -> None:
    p = sub.add_parser("calc", help="full calculation (fields, luminance, TI, class check) vs one view's render")
    p.add_argument("--scene", default=str(DEMO))
    p.add_argument("--view", default=None, help="view to render (default: the scene's first)")
    p.add_argument(
        "--class", dest="lighting_class", default=DEFAULT_CLASS, help=f"lighting class (default {DEFAULT_CLASS})"
    )
    p.add_argument("--rounds", type=int, default=3, help="rounds, calc and render alternating (default 3)")
    p.add_argument("--quick", action="store_true", help="smoke run: one round, the before setup only, a tiny render")
    p.set_defaults(func=cmd_calc)
