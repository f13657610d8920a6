"""Benchmarks (speed is measured here, never in the tests).

    python -m render.bench rays [--width 960 --height 540 --spp 1 --seed 0 ...]
    python -m render.bench light [--width 1280 --height 720 --spp 4 ...]   (render.bench.light)

``rays`` builds the BVH of (a) the demo street, when the scene loader and ``scenes/demo/*.toml``
are present, and (b) a seeded synthetic stress scene of >= 250 000 triangles (random boxes and
spheres on a ground plane, :func:`render.bench.scenes.stress_scene`); then it casts primary
rays from a camera (pixels in 4 x 4 blocks, as :mod:`render.rays.aov` casts them), shadow rays
from the primary hits to a point light, incoherent diffuse-bounce rays from the primary
hits and incoherent shadow rays from the bounce rays' hits to the light (the rays of a path
tracer, traced one by one as the path tracer casts them), and prints rays per second after JIT warm-up (medians of ``--repeat`` rounds, the
contenders alternating; ratios as min / median / max over rounds). When the optional
``embreex`` package is importable, the same triangles and rays go through Embree too and the
throughput ratios (ours on numba's threads / Embree, and ours on one thread / Embree, Embree
being one thread) are printed, with the agreement of the two results; the last ratio column
is one thread / Embree in processor seconds of the process (on a shared machine the steadier
figure: time spent waiting for a core is not counted). The incoherent rays are traced one by
one in the order they were made, with no sorting or grouping.

References
----------
- Pharr, Jakob & Humphreys, "Physically Based Rendering", 3rd ed., 2016, section 13.6.3
  (cosine-weighted hemisphere sampling by Malley's method, for the bounce rays).
- Wald, Woop, Benthin, Johnson & Ernst, "Embree: A Kernel Framework for Efficient CPU Ray
  Tracing", ACM Transactions on Graphics 33(4), 2014 (the comparison library).
"""

from __future__ import annotations

import argparse
import glob
import os
import time
from dataclasses import dataclass

import numba
import numpy as np

from render.bench.scenes import stress_scene
from render.bench.timing import interleaved_cpu, ratios
from render.rays.bvh import BVH, build_bvh, face_forward, geometric_normal, intersect_any, intersect_closest
from render.rays.cameras import Camera, camera_rays, tile_pixels

__all__ = ["DEMO_FALLBACK_CAMERA", "STRESS_CAMERA", "STRESS_LIGHT_M", "add_parser", "cmd_rays"]

# Views of the stress scene (render.bench.scenes.stress_scene) and of the demo street.
STRESS_CAMERA = dict(position_m=(-110.0, -20.0, 12.0), target_m=(0.0, 0.0, 0.0), hfov_deg=70.0)
STRESS_LIGHT_M = np.array([-20.0, -5.0, 25.0])
DEMO_FALLBACK_CAMERA = dict(position_m=(-5.0, -3.0, 1.6), target_m=(40.0, 0.0, 1.0), hfov_deg=60.0)

# --------------------------------------------------------------------------------------------
# Timing helpers
# --------------------------------------------------------------------------------------------


@dataclass
class _Case:
    name: str
    triangles_m: np.ndarray
    camera: Camera
    light_m: np.ndarray


def _shadow_rays(origins, directions, hits, light_m, offset_m=1e-4):
    """Shadow rays from the primary hits to the light: origin pushed ``offset_m`` towards the
    light (Embree's binding has no t_min), direction = light - origin, t_max = 1 - 1e-6."""
    m = hits.hit
    p = origins[m] + hits.t[m, None] * directions[m]
    to_light = light_m[None, :] - p
    dist = np.linalg.norm(to_light, axis=1, keepdims=True)
    o = p + offset_m * to_light / dist
    return np.ascontiguousarray(o), np.ascontiguousarray(light_m[None, :] - o)


def _embree():
    try:
        from embreex import rtcore_scene
        from embreex.mesh_construction import TriangleMesh as EmbreeMesh
    except Exception:  # noqa: BLE001 - any import problem means "not available"
        return None
    return rtcore_scene, EmbreeMesh


def _mrays(n: int, seconds: float) -> float:
    return n / seconds / 1e6 if seconds > 0 else float("inf")


def _bounce_rays(origins, directions, hits, triangles_m, seed, offset_m=1e-4):
    """Incoherent rays: from the primary hits into cosine-distributed random directions about
    the face normal turned towards the eye (a diffuse bounce), origin pushed ``offset_m`` off
    the surface."""
    m = hits.hit
    p = origins[m] + hits.t[m, None] * directions[m]
    n = face_forward(geometric_normal(triangles_m, hits)[m], directions[m])
    rng = np.random.default_rng(seed)
    # Cosine-weighted hemisphere (Malley's method): uniform disc point lifted to the hemisphere.
    r = np.sqrt(rng.uniform(size=len(p)))
    phi = rng.uniform(0.0, 2.0 * np.pi, len(p))
    a = np.where(np.abs(n[:, :1]) > 0.9, [[0.0, 1.0, 0.0]], [[1.0, 0.0, 0.0]])
    t1 = np.cross(n, a)
    t1 /= np.linalg.norm(t1, axis=1, keepdims=True)
    t2 = np.cross(n, t1)
    d = (
        (r * np.cos(phi))[:, None] * t1
        + (r * np.sin(phi))[:, None] * t2
        + np.sqrt(np.maximum(0.0, 1.0 - r * r))[:, None] * n
    )
    return np.ascontiguousarray(p + offset_m * n), np.ascontiguousarray(d)


def _single_thread(fn):
    def run():
        threads = numba.get_num_threads()
        numba.set_num_threads(1)
        try:
            return fn()
        finally:
            numba.set_num_threads(threads)

    return run


def _run_case(case: _Case, args) -> None:
    tris = case.triangles_m
    print(f"\n== {case.name}: {tris.shape[0]} triangles")
    build_bvh(tris[: min(len(tris), 64)])  # JIT warm-up of the builder
    t0 = time.perf_counter()
    bvh: BVH = build_bvh(tris)
    build_s = time.perf_counter() - t0
    print(
        f"BVH build {build_s:.3f} s (one core), {bvh.n_nodes} inner nodes, depth {bvh.depth}, SAH cost {bvh.sah_cost:.2f}, arrays {bvh.nbytes / 2**20:.1f} MiB ({bvh.nbytes} B)"
    )

    cam = case.camera
    # Pixels in 4 x 4 blocks, the order render.rays.aov casts them in (consecutive rays coherent).
    pixels = tile_pixels(cam, 0, 0, cam.width_px, cam.height_px, block_px=4)
    o, d, _ = camera_rays(cam, args.spp, args.seed, pixels)
    intersect_closest(bvh, o[:1024], d[:1024])  # JIT warm-up
    hits = intersect_closest(bvh, o, d)
    so, sd = _shadow_rays(o, d, hits, case.light_m)
    t_max = np.full(so.shape[0], 1.0 - 1e-6)
    intersect_any(bvh, so[:1024], sd[:1024], t_max[:1024])
    bo, bd = _bounce_rays(o, d, hits, tris, args.seed)
    # Incoherent shadow rays: from the bounce rays' hits to the light (a path's next-event rays).
    bso, bsd = _shadow_rays(bo, bd, intersect_closest(bvh, bo, bd), case.light_m)
    bs_t_max = np.full(bso.shape[0], 1.0 - 1e-6)
    threads = numba.get_num_threads()
    print(
        f"camera {cam.width_px}x{cam.height_px}, {args.spp} spp; light at {tuple(np.round(case.light_m, 2))} m; ours: {threads} threads (numba prange), Embree: embreex, 1 thread, float32, one rtcIntersect/rtcOccluded per ray"
    )

    emb = None if args.no_embree else _embree()
    scene = None
    if emb is not None:
        rtcore_scene, EmbreeMesh = emb
        t0 = time.perf_counter()
        scene = rtcore_scene.EmbreeScene()
        EmbreeMesh(scene, np.ascontiguousarray(tris, np.float32))
        scene.run(np.zeros((1, 3), np.float32), np.ones((1, 3), np.float32), output=1)  # commit = build
        print(f"Embree scene build {time.perf_counter() - t0:.3f} s")

    # The incoherent rays go one by one through the 8-wide tree (packets=False), as the path
    # tracer casts them (render.light.indirect.paths calls closest_one / any_one per ray).
    sets = [
        ("primary (closest hit)", o, d, None, True),
        ("shadow to light (occlusion)", so, sd, t_max, True),
        ("diffuse bounce, incoherent (closest hit)", bo, bd, None, False),
        ("bounce hits to light, incoherent (occlusion)", bso, bsd, bs_t_max, False),
    ]
    print(
        f"{'rays':44s} {'count':>8s} {'ours Mrays/s':>13s} {'1 thread':>9s} {'Embree':>8s} {'ours/Embree min/med/max':>24s} {'1 thread/Embree min/med/max':>28s} {'processor s':>19s}  agreement"
    )
    for name, ro, rd, tm, pk in sets:
        if tm is None:
            fns = {"ours": lambda ro=ro, rd=rd, pk=pk: intersect_closest(bvh, ro, rd, packets=pk)}
        else:
            fns = {"ours": lambda ro=ro, rd=rd, tm=tm, pk=pk: intersect_any(bvh, ro, rd, tm, packets=pk)}
        if threads > 1 and not args.no_single:
            fns["one"] = _single_thread(fns["ours"])
        if scene is not None:
            o32, d32 = np.ascontiguousarray(ro, np.float32), np.ascontiguousarray(rd, np.float32)
            if tm is None:
                fns["embree"] = lambda o32=o32, d32=d32: scene.run(o32, d32, output=1)
            else:
                tm32 = tm.astype(np.float32)
                fns["embree"] = lambda o32=o32, d32=d32, tm32=tm32: scene.run(
                    o32, d32, dists=tm32.copy(), query="OCCLUDED"
                )
        spread, cpu, _ = interleaved_cpu(fns, args.repeat)
        n = ro.shape[0]
        one = f"{_mrays(n, spread['one'].median):9.2f}" if "one" in spread else f"{'-':>9s}"
        if scene is not None:
            ours_result = fns["ours"]()
            emb_result = fns["embree"]()
            if tm is None:
                agree = f"same triangle {np.mean(np.asarray(emb_result['primID']) == ours_result.triangle):.3%}"
            else:
                agree = f"same occlusion {np.mean((np.asarray(emb_result) != -1) == ours_result):.3%}"
            emb_s = f"{_mrays(n, spread['embree'].median):8.2f}"
            ratio = f"{ratios(spread['embree'], spread['ours']).text(1, '.2f'):>24s}"
            one_ratio = ratios(spread["embree"], spread["one"]).text(1, ".2f") if "one" in spread else "-"
            one_cpu = ratios(cpu["embree"], cpu["one"]).text(1, ".2f") if "one" in cpu else "-"
            ratio += f" {one_ratio:>28s} {one_cpu:>19s}"
        else:
            emb_s, ratio, agree = (
                f"{'-':>8s}",
                f"{'-':>24s} {'-':>28s} {'-':>19s}",
                "embreex not importable (or --no-embree)",
            )
        print(f"{name:44s} {n:8d} {_mrays(n, spread['ours'].median):13.2f} {one} {emb_s} {ratio}  {agree}")


def _demo_case(args) -> _Case | None:
    paths = sorted(glob.glob(os.path.join(args.scenes, "demo", "*.toml")))
    try:
        from render.geometry.build import compile_scene
        from render.scene import load_scene
    except Exception:  # noqa: BLE001
        return None
    if not paths:
        return None
    try:
        scene = load_scene(paths[0])
        mesh = compile_scene(scene)
    except Exception as exc:  # noqa: BLE001 - a broken demo must not stop the stress benchmark
        print(f"demo scene {paths[0]} could not be loaded: {exc}")
        return None
    size = dict(width_px=args.width, height_px=args.height)
    camera = None
    views = getattr(scene, "views", None) or []
    if views:
        try:
            camera = Camera.from_view(views[0], source=paths[0])
        except Exception as exc:  # noqa: BLE001
            print(f"first view unusable ({exc}); using a fixed camera")
    if camera is None:
        camera = Camera(**DEMO_FALLBACK_CAMERA, **size)
    lums = getattr(scene, "luminaires", None) or []
    light = np.asarray(lums[0].position_m, float) if lums else np.array([10.0, 4.0, 6.0])
    return _Case(f"demo street ({os.path.basename(paths[0])})", mesh.triangles_m, camera, light)


def cmd_rays(args: argparse.Namespace) -> int:
    """Run the ``rays`` benchmark with parsed command-line ``args``; returns the exit status."""
    print(
        f"numba {numba.__version__}, threading layer {numba.threading_layer() if _warm_threads() else '?'}, {numba.get_num_threads()} threads, {os.cpu_count()} CPUs"
    )
    if hasattr(os, "getloadavg"):
        print(f"load average before the run {os.getloadavg()[0]:.2f} (other processes on the machine skew the figures)")
    demo = _demo_case(args)
    if demo is None:
        print("demo scene not available yet")
    else:
        _run_case(demo, args)
    tris = stress_scene(args.seed)
    cam = Camera(**STRESS_CAMERA, width_px=args.width, height_px=args.height)
    _run_case(
        _Case("synthetic stress scene (seeded boxes and spheres on a ground plane)", tris, cam, STRESS_LIGHT_M), args
    )
    return 0


def _warm_threads() -> bool:
    """Run a tiny parallel query so that numba's threading layer is initialised."""
    tri = np.array([[[0.0, 0.0, 0.0], [1.0, 0.0, 0.0], [0.0, 1.0, 0.0]]])
    intersect_any(build_bvh(tri), np.array([[0.2, 0.2, 1.0]]), np.array([[0.0, 0.0, -1.0]]), 2.0)
    return True


def add_parser(sub: argparse._SubParsersAction) -> None:
    """Register the ``rays`` sub-command on an argparse sub-parser set."""
    rays = sub.add_parser(
        "rays",
        help="BVH build time and ray-casting throughput (Mrays/s), with an Embree comparison when embreex is installed",
    )
    rays.add_argument(
        "--width",
        type=int,
        default=960,
        help="image width in pixels for the stress scene (default 960; the demo uses its view's size)",
    )
    rays.add_argument(
        "--height", type=int, default=540, help="image height in pixels for the stress scene (default 540)"
    )
    rays.add_argument("--spp", type=int, default=1, help="samples per pixel (default 1)")
    rays.add_argument("--seed", type=int, default=0, help="seed of the stress scene and the ray jitter (default 0)")
    rays.add_argument(
        "--repeat",
        type=int,
        default=5,
        help="rounds per measurement; Mrays/s are medians, ratios min / median / max over rounds (default 5)",
    )
    rays.add_argument("--scenes", default="scenes", help="folder holding demo/*.toml (default ./scenes)")
    rays.add_argument("--no-embree", action="store_true", help="skip the Embree comparison")
    rays.add_argument("--no-single", action="store_true", help="skip the single-thread measurement")
    rays.set_defaults(func=cmd_rays)
