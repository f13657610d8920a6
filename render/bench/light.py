"""Light benchmark (``python -m render.bench light``): a script that prints figures and ratios.

* full render of the demo's first view at 1280×720 with 4 samples per pixel (camera rays,
  direct light with shadows, colorimetry), after JIT warm-up;
* relight of the same frame for a new lamp (no ray cast) and the full/relight ratio
  (goal >= 50);
* the same street with 10 and with 100 luminaires (goal: 100 costs <= 3 × 10): a staggered row
  every 28 m along a street whose length grows with the count (the demo's cross-section and
  frontage pattern repeated), seen from the same viewpoint -- the real case of a long street,
  where far luminaires are skipped because their contribution is provably negligible;
* colorimetry on 5 nm vs 1 nm grids (goal <= 1.1×): the per-pixel cost does not depend on the
  number of wavelength bins, only the small response table does;
* with ``--memory``: the peak resident memory of :meth:`render.study.Study.render_view` of the
  same view at 1920×1080 and 3840×2160 (4 samples per pixel; goals <= 1 GB and <= 3 GB), each in
  a fresh process (``resource.getrusage``), so that nothing else in this one counts.
"""

from __future__ import annotations

import copy
import subprocess
import sys
from pathlib import Path

import numpy as np

from render.bench.timing import Spread, interleaved, ratios
from render.resources import demo_scene_path

DEMO = demo_scene_path()


def long_street(scene, n_luminaires: int, spacing_m: float = 28.0):
    """The demo scene stretched to carry ``n_luminaires`` staggered luminaires."""
    from dataclasses import replace

    from render.scene.loader import expand_row

    s = copy.deepcopy(scene)
    length = max(scene.street.length_m, n_luminaires * spacing_m)
    s.street = replace(scene.street, length_m=length)
    repeats = int(np.ceil(length / scene.street.length_m))
    fronts = []
    for k in range(repeats):
        for f in scene.frontages:
            fronts.append(
                replace(f, start_m=f.start_m + k * scene.street.length_m, tag=replace(f.tag, name=f"{f.tag.name} {k}"))
            )
    s.frontages = fronts
    template = scene.luminaires[-1]  # a row luminaire of the demo
    row = {
        "count": n_luminaires,
        "end_m": None,
        "start_m": 6.0,
        "spacing_m": spacing_m,
        "layout": "staggered",
        "side": "left",
        "setback_m": 0.5,
        "outreach_m": 0.5,
        "mounting_height_m": template.position_m[2] - scene.street.kerb_height_m,
        "rotation_deg": 0.0,
        "column": True,
        "name": "bench",
        "group": template.group,
        "tilt_deg": 0.0,
        "photometry": template.photometry,
        "lamp": template.lamp,
        "lumens": template.lumens,
        "maintenance_factor": template.maintenance_factor,
        "dimming": template.dimming,
    }
    s.luminaires = expand_row(row, n_luminaires, "bench", s.street)
    s.setups = {}
    return s


def _render(study, camera, spp, seed, step_nm=1):
    from render.light.integrator import render_buffers
    from render.light.luminaires import channel_factors, luminaire_set

    lights = luminaire_set(study.scene)
    buffers = render_buffers(study.mesh, study.bvh, lights, camera, spp, seed)
    factors, lamps = channel_factors(lights)
    from render.colour.colorimetry import resolve

    return buffers, lights, resolve(buffers, factors, study.lamp_spds(lamps), study.reflectances, step_nm)


#: Render sizes and memory goals (bytes) of ``--memory``.
MEMORY_SIZES = ((1920, 1080, 1e9), (3840, 2160, 3e9))

_MEMORY_SCRIPT = """
import resource, sys, time
from render.study import Study
study = Study(sys.argv[1])
view = sys.argv[2] if sys.argv[2] != "-" else None
t = time.perf_counter()
study.render_view(view, width_px=int(sys.argv[3]), samples_per_pixel=int(sys.argv[4]))
print(time.perf_counter() - t, resource.getrusage(resource.RUSAGE_SELF).ru_maxrss * 1024)
"""


def peak_memory(scene: str, view: str | None, width_px: int, spp: int) -> tuple[float, int]:
    """Seconds and peak resident bytes of one ``render_view`` in a fresh Python process (Linux
    reports ``ru_maxrss`` in KiB)."""
    run = subprocess.run(
        [sys.executable, "-c", _MEMORY_SCRIPT, scene, view or "-", str(width_px), str(spp)],
        capture_output=True,
        text=True,
        check=True,
    )
    seconds, peak = run.stdout.split()[-2:]
    return float(seconds), int(peak)


def cmd_light(args) -> int:
    from render.colour.colorimetry import resolve
    from render.light.luminaires import channel_factors
    from render.rays.cameras import Camera
    from render.study import Study

    study = Study(args.scene)
    _ = study.bvh, study.reflectances
    v = study.scene.view(args.view)
    camera = Camera(
        position_m=v.position_m, target_m=v.target_m, hfov_deg=v.hfov_deg, width_px=args.width, height_px=args.height
    )
    small = Camera(position_m=v.position_m, target_m=v.target_m, hfov_deg=v.hfov_deg, width_px=64, height_px=36)
    _render(study, small, 1, 0)  # JIT warm-up
    print(
        f"scene {Path(args.scene).name}, view '{v.name}', {args.width}x{args.height} px, {args.spp} samples/px, "
        f"{study.mesh.n_triangles} triangles, {len(study.scene.luminaires)} luminaires"
    )

    repeat = max(args.repeat, 3)
    full = _render(study, camera, args.spp, 0)
    buffers, lights, _ = full
    factors, lamps = channel_factors(lights)
    new = study.lamp_spds(["led-4000k-cie-b3"] * len(lamps))
    t, _ = interleaved(
        {
            "full": lambda: _render(study, camera, args.spp, 0),
            "relight": lambda: resolve(buffers, factors, new, study.reflectances),
            "1nm": lambda: resolve(buffers, factors, new, study.reflectances, 1),
            "5nm": lambda: resolve(buffers, factors, new, study.reflectances, 5),
        },
        repeat,
    )
    print(f"figures are min / median / max over {repeat} rounds, the measurements alternating within a round")
    print(f"full render (camera rays + direct light + colorimetry): {t['full'].text()} s")
    print(
        f"relight for a new lamp (no rays): {t['relight'].text(1000, '.1f')} ms; "
        f"full/relight = {ratios(t['full'], t['relight']).text(1, '.0f')} (goal >= 50)"
    )
    # A render whose colorimetry runs on the 1 nm or the 5 nm grid: the rest of the render is the same.
    rest = Spread(tuple(f - r for f, r in zip(t["full"].values, t["relight"].values)))
    t1 = Spread(tuple(x + y for x, y in zip(rest.values, t["1nm"].values)))
    t5 = Spread(tuple(x + y for x, y in zip(rest.values, t["5nm"].values)))
    print(
        f"render with colorimetry on the 1 nm grid: {t1.text()} s, on a 5 nm grid: {t5.text()} s; "
        f"1 nm / 5 nm = {ratios(t1, t5).text()} (goal <= 1.1; colorimetry alone "
        f"{t['1nm'].text(1000, '.1f')} vs {t['5nm'].text(1000, '.1f')} ms)"
    )

    studies = {}
    for n in (10, 100):
        st = Study(long_street(study.scene, n))
        _ = st.bvh, st.reflectances
        _render(st, small, 1, 0)
        studies[n] = st
        print(f"{n:3d} luminaires: {st.scene.street.length_m:.0f} m street, {st.mesh.n_triangles} triangles")
    t, _ = interleaved({n: (lambda st=st: _render(st, camera, args.spp, 0)) for n, st in studies.items()}, args.repeat)
    print(f"render with 10 luminaires: {t[10].text()} s; with 100: {t[100].text()} s")
    print(f"100 / 10 luminaires = {ratios(t[100], t[10]).text(1, '.2f')} (goal <= 3)")
    if args.memory:
        for width, height, goal in MEMORY_SIZES:
            seconds, peak = peak_memory(args.scene, args.view, width, args.spp)
            print(
                f"peak memory of render_view at {width}x{height}, {args.spp} samples/px: {peak / 1e9:.2f} GB "
                f"(goal <= {goal / 1e9:.0f} GB; {seconds:.1f} s, one run in a fresh process)"
            )
    return 0


def add_parser(sub) -> None:
    p = sub.add_parser("light", help="full render vs relight, luminaire-count scaling, 1 nm vs 5 nm colorimetry")
    p.add_argument("--scene", default=str(DEMO))
    p.add_argument("--view", default=None)
    p.add_argument("--width", type=int, default=1280)
    p.add_argument("--height", type=int, default=720)
    p.add_argument("--spp", type=int, default=4)
    p.add_argument(
        "--repeat", type=int, default=3, help="rounds per measurement (default 3, at least 3 for the fast ones)"
    )
    p.add_argument("--memory", action="store_true", help="also the peak memory of a 1920x1080 and a 3840x2160 render")
    p.set_defaults(func=cmd_light)
