"""Vision benchmark (``python -m render.bench vision``): the night-vision stage of a comparison.

What ``lampcast compare`` (and ``lampcast demo``) asks of the vision stage for each view: the
view rendered under the before setup and every option (by default the bundled demo's
``[compare]``), each image shown in shared and in adapted exposure, and the perceived images
the colour analysis reads. Two ways of doing that are timed side by side:

* **shared** -- :meth:`render.study.Study.display_both`, as the comparison runs it: the glare
  optics (grid, pixel places, kernel spectrum; :func:`render.vision.glare.glare_optics`) made
  once per view and shared by every setup, each image's retina and adaptation measurements
  made once for both exposures, two images at a time
  (:data:`render.vision.pipeline.DISPLAY_WORKERS` threads), and the colour analysis taking the
  perceived images the shared displays keep
  (:attr:`render.vision.pipeline.DisplayResult.perceived`), so it runs nothing;
* **per image** -- the same images one at a time, with the glare optics made for each image
  on its own, each exposure measuring its adaptation, and the colour analysis running the
  stage again for each setup (:func:`render.analysis.colours.perceived_view` with the shared
  display's state), as the stage ran before the optics were shared and the perceived images
  kept.

Both give the same images. The renders are made once, before anything is timed, and one small
render goes through both paths first so that every numba kernel is compiled (or loaded from
the cache). Within a round the two paths alternate view by view
(:func:`render.bench.timing.interleaved`).

Printed: a header naming the scene, views, setups and image size, then a table with one row
per view and path (``shared 'VIEW'``, ``per image 'VIEW'``, seconds), the totals over the views
(``shared``, ``per image``) and their ratio ``per image/shared`` taken round by round (min /
median / max), and a last line with the ratio of each round. ``--quick`` is a smoke run: the
first view only, 96 pixels wide, one sample per pixel and one round; its figures say nothing
about speed.
"""

from __future__ import annotations

import argparse
from dataclasses import dataclass
from pathlib import Path

from render.bench.timing import Spread, interleaved, ratios
from render.resources import demo_scene_path

__all__ = ["VisionBench", "add_parser", "cmd_vision", "run_bench"]

DEMO = demo_scene_path()
#: Render size and samples per pixel of ``--quick`` (a smoke run, not a measurement).
QUICK_WIDTH_PX = 96
QUICK_SPP = 1


@dataclass(frozen=True)
class VisionBench:
    """The timings of one benchmark run, seconds per view and path over the rounds."""

    scene: str
    views: tuple[str, ...]
    setups: tuple[str | None, ...]
    width_px: int
    height_px: int
    shared_s: dict[str, Spread]
    per_image_s: dict[str, Spread]

    @property
    def shared_total(self) -> Spread:
        """The shared path over every view, per round."""
        return Spread(tuple(map(sum, zip(*(s.values for s in self.shared_s.values())))))

    @property
    def per_image_total(self) -> Spread:
        """The per-image path over every view, per round."""
        return Spread(tuple(map(sum, zip(*(s.values for s in self.per_image_s.values())))))

    @property
    def ratio(self) -> Spread:
        """per image / shared over every view, round by round."""
        return ratios(self.per_image_total, self.shared_total)


def _shared(study, rendered, observer) -> None:
    shared, _ = study.display_both(rendered, observer)
    assert all(d.perceived is not None for d in shared)  # what the colour analysis reads


def _per_image(study, rendered, observer) -> None:
    from render.analysis.colours import perceived_view
    from render.vision.pipeline import render_display, retinal_image, shared_display
    from render.vision.view import ViewGeometry

    lights = [study.view_light(r) for r in rendered]
    geoms = [ViewGeometry.of(r.camera) for r in rendered]
    retinas = [retinal_image(x, g, observer) for x, g in zip(lights, geoms)]  # optics per image
    shared = shared_display(lights, geoms, observer, retinas=retinas)
    for x, g, r in zip(lights, geoms, retinas):
        render_display(x, g, observer, "adapted", retina=r)
    for x, g, d in zip(lights, geoms, shared):
        perceived_view(x, g, observer, state=d.state)


def run_bench(scene: str | Path = DEMO, *, rounds: int = 3, quick: bool = False) -> VisionBench:
    """Render every view under every setup once, then time the two paths (module text)."""
    from render.study import Study

    study = Study(scene)
    sc = study.scene
    setups: list[str | None] = [sc.compare_before, *sc.compare_options] if sc.compare_before else [None]
    views = [v.name for v in sc.views][: 1 if quick else None]
    width = QUICK_WIDTH_PX if quick else None
    spp = QUICK_SPP if quick else None
    observer = study.observer

    def render(name: str, width_px: int | None, samples: int | None):
        first = study.render_view(name, setups[0], samples_per_pixel=samples, width_px=width_px)
        return [first, *(study.relight(first, s) for s in setups[1:])]

    # Warm-up: compile (or load from numba's cache) every kernel both paths use.
    small = render(views[0], 32, 1)
    _shared(study, small, observer)
    _per_image(study, small, observer)

    rendered = {name: render(name, width, spp) for name in views}
    fns = {}
    for name in views:
        fns[f"shared {name}"] = lambda r=rendered[name]: _shared(study, r, observer)
        fns[f"per image {name}"] = lambda r=rendered[name]: _per_image(study, r, observer)
    times, _ = interleaved(fns, 1 if quick else rounds)
    camera = rendered[views[0]][0].camera
    return VisionBench(
        scene=Path(sc.path).name,
        views=tuple(views),
        setups=tuple(setups),
        width_px=camera.width_px,
        height_px=camera.height_px,
        shared_s={name: times[f"shared {name}"] for name in views},
        per_image_s={name: times[f"per image {name}"] for name in views},
    )


def cmd_vision(args: argparse.Namespace) -> int:
    bench = run_bench(args.scene, rounds=args.rounds, quick=args.quick)
    names = ", ".join(s if s is not None else "the scene's lamps" for s in bench.setups)
    print(
        f"scene {bench.scene}: {len(bench.views)} view(s) at {bench.width_px}x{bench.height_px} px, "
        f"{len(bench.setups)} setup(s) ({names}); shared and adapted exposure and the colour analysis's "
        "perceived images"
    )
    if args.quick:
        print("quick run: a smoke test of the benchmark, not a measurement")
    n = len(bench.shared_total.values)
    print(f"min / median / max over {n} round(s), the two paths alternating view by view, after JIT warm-up")
    rows = []
    for name in bench.views:
        rows.append((f"shared '{name}'", bench.shared_s[name].text(1, ".3f") + " s"))
        rows.append((f"per image '{name}'", bench.per_image_s[name].text(1, ".3f") + " s"))
    rows += [
        ("shared", bench.shared_total.text(1, ".3f") + " s"),
        ("per image", bench.per_image_total.text(1, ".3f") + " s"),
        ("per image/shared", bench.ratio.text(1, ".2f")),
    ]
    width = max(len(r[0]) for r in rows)
    for label, text in rows:
        print(f"{label:<{width}}  {text}")
    print("per image/shared per round: " + ", ".join(f"{r:.2f}" for r in bench.ratio.values))
    return 0


def add_parser(sub) -> None:
    p = sub.add_parser("vision", help="the vision stage of a comparison: shared glare optics vs optics per image")
    p.add_argument("--scene", default=str(DEMO))
    p.add_argument("--rounds", type=int, default=3, help="rounds, the two paths alternating (default 3)")
    p.add_argument("--quick", action="store_true", help="smoke run: one round, the first view only, a tiny render")
    p.set_defaults(func=cmd_vision)
