"""Peer benchmark (``python -m render.bench peer``): a direct-light render against Mitsuba 3.

The same view of the same mesh is rendered by lampcast and by Mitsuba 3 (the optional extra
``pip install -e ".[peer]"``), and the two times are printed side by side, min / median / max
over rounds in which the renderers alternate, with the ratio lampcast / Mitsuba round by round
(below 1: lampcast is faster).

**What is compared, exactly.** Both render the compiled scene's triangles without the lamp
columns (exported as they are, one two-sided white Lambertian material, ρ = 1; a point light
has no housing, and lampcast never lets a luminaire's own housing shadow its light), through the same pinhole camera
(position, target, horizontal field of view, width and height in pixels), with the same number
of samples per pixel on a box pixel filter and the same number of threads. The luminaires are
given an isotropic distribution (the setup ``*: photometry = "generic-isotropic"``), so that
Mitsuba's isotropic point lights (``point``, intensity I = the luminaire's candela at full output
with its maintenance factor) carry the same light; a photometric web has no counterpart there.
The quantity both compute is then the luminance of a white diffuser lit directly, E/π (cd/m²,
lampcast's light buffers summed over channels; Mitsuba's radiance in its RGB variant, every
channel equal), which is checked to agree in the image mean before anything is timed.

What differs, and is stated in the output: lampcast evaluates every luminaire whose
contribution at a point can reach 1e-3 lx (:data:`render.light.integrator.NEGLIGIBLE_LX`),
exactly, with one shadow ray each, and stops shadow rays 5 cm plus half the opening's diagonal
short of the luminaire; Mitsuba's ``direct`` integrator picks luminaires at random,
``emitter_samples`` per camera sample (run here with 1, its default, and with as many as there are
luminaires; ``bsdf_samples = 0``, as BSDF sampling cannot hit a point light), and ends its
shadow rays at the light. With point lights Mitsuba does not divide by ``emitter_samples``
(n samples give n times the radiance, measured), so its mean is divided by n for the check. lampcast's time includes its colorimetry (the buffers turned into
absolute X, Y, Z for the scene's lamps), Mitsuba's its film development. Visible luminous
openings are left out of the image means (Mitsuba's point lights are invisible).

Mitsuba's vectorised CPU variant ``llvm_ad_rgb`` needs the LLVM shared library; point
``DRJIT_LIBLLVM_PATH`` at it when Dr.Jit does not find it (on Debian 12: ``apt-get install
libllvm19``, whose library is ``libLLVM.so.19.1``; LLVM 15 failed to compile Dr.Jit's kernels).
The variant is tried in a child process first; when it does not run, the benchmark falls back
to ``scalar_rgb`` and says so.

References
----------
- W. Jakob, S. Speierer, N. Roussel, M. Nimier-David, D. Vicini, T. Zeltner, B. Nicolet,
  M. Crespo, V. Leroy, Z. Zhang (2022), *Mitsuba 3 renderer*, https://mitsuba-renderer.org
  (the peer renderer; its ``direct`` integrator, ``point`` emitter, ``perspective`` sensor).
"""

from __future__ import annotations

import argparse
import subprocess
import sys
import tempfile
import time
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from render.bench.timing import Spread, interleaved, ratios
from render.resources import demo_scene_path

__all__ = ["PEER_VARIANTS", "PeerScene", "add_parser", "cmd_peer", "peer_scene", "peer_scene_file", "write_ply"]

DEMO = demo_scene_path()
#: Mitsuba variants, in order of preference: vectorised CPU (LLVM), then scalar.
PEER_VARIANTS = ("llvm_ad_rgb", "scalar_rgb")
#: The distribution given to every luminaire, so that a point light is its equal.
ISOTROPIC = "generic-isotropic"
#: Largest relative difference of the image means before the timing is called into question.
AGREEMENT = 0.02


@dataclass(frozen=True)
class PeerScene:
    """What both renderers are given: triangles (F, 3, 3) m, the camera, samples per pixel,
    and the point lights' positions (m) and intensities (cd)."""

    triangles_m: np.ndarray
    position_m: tuple[float, float, float]
    target_m: tuple[float, float, float]
    hfov_deg: float
    width_px: int
    height_px: int
    spp: int
    light_position_m: np.ndarray
    light_intensity_cd: np.ndarray


def peer_scene_file(path: str | Path):
    """The scene of ``path`` without lamp columns: a point light has no housing, and lampcast
    does not let a luminaire's own housing shadow its light (it is in the photometry), so
    neither renderer gets one."""
    from dataclasses import replace

    from render.scene import load_scene

    scene = load_scene(path)
    scene.luminaires = [replace(lum, column_base_m=None) for lum in scene.luminaires]
    return scene


def _isotropic_setup():
    from render.scene.model import GroupSetting, Setup

    return Setup("peer-isotropic", "every luminaire isotropic", {"*": GroupSetting(photometry=ISOTROPIC)})


def peer_scene(study, view: str | None, width_px: int | None, spp: int) -> PeerScene:
    """The view, mesh and isotropic luminaires of ``study`` as both renderers take them."""
    lights = study.lights(_isotropic_setup())
    cd = np.array([lights.cd_table[t, : lights.n_c[t], : lights.n_g[t]].max() for t in lights.table])
    low = np.array([lights.cd_table[t, : lights.n_c[t], : lights.n_g[t]].min() for t in lights.table])
    if not np.allclose(cd, low, rtol=1e-6):
        raise ValueError(f"the distribution {ISOTROPIC!r} is not isotropic")
    camera = study.camera(view, width_px)
    return PeerScene(
        np.asarray(study.mesh.triangles_m, np.float64).reshape(-1, 3, 3),
        camera.position_m,
        camera.target_m,
        camera.hfov_deg,
        camera.width_px,
        camera.height_px,
        int(spp),
        lights.position_m.copy(),
        lights.scale * cd,
    )


def write_ply(path: Path, triangles_m: np.ndarray) -> None:
    """A binary little-endian PLY of unshared triangles (three vertices per face)."""
    tris = np.asarray(triangles_m, np.float32).reshape(-1, 3, 3)
    n = tris.shape[0]
    header = (
        "ply\nformat binary_little_endian 1.0\n"
        f"element vertex {3 * n}\nproperty float x\nproperty float y\nproperty float z\n"
        f"element face {n}\nproperty list uchar int vertex_indices\nend_header\n"
    ).encode("ascii")
    faces = np.zeros(n, dtype=[("count", "u1"), ("index", "<i4", (3,))])
    faces["count"] = 3
    faces["index"] = np.arange(3 * n, dtype=np.int32).reshape(n, 3)
    with open(path, "wb") as f:
        f.write(header)
        f.write(tris.astype("<f4").tobytes())
        f.write(faces.tobytes())


_PROBE = """
import mitsuba as mi
mi.set_variant({variant!r})
import numpy as np
scene = mi.load_dict(mi.cornell_box())
print(float(np.mean(np.array(mi.render(scene, spp=1)))))
"""


def _probe(variant: str) -> str | None:
    """None if Mitsuba renders a tiny scene with ``variant`` in a child process, else why not
    (a missing or unsuitable LLVM can abort the process, so it is not tried in this one)."""
    try:
        run = subprocess.run(
            [sys.executable, "-c", _PROBE.format(variant=variant)], capture_output=True, text=True, timeout=300
        )
    except (OSError, subprocess.TimeoutExpired) as err:
        return str(err)
    if run.returncode != 0:
        lines = [line for line in (run.stderr or "").splitlines() if line.strip()]
        return f"exit status {run.returncode}: {lines[-1][:200] if lines else 'no message'}"
    return None


def _mitsuba(requested: str | None):
    """``(mitsuba, drjit, variant, notes)``, or ``(None, None, None, why)`` when not usable."""
    try:
        import drjit as dr
        import mitsuba as mi
    except ImportError:
        return None, None, None, ['Mitsuba 3 is not installed (pip install -e ".[peer]"): no peer figures']
    notes = []
    for variant in (requested,) if requested else PEER_VARIANTS:
        if variant not in mi.variants():
            notes.append(f"variant {variant} is not in this Mitsuba build")
            continue
        why = _probe(variant)
        if why is None:
            mi.set_variant(variant)
            return mi, dr, variant, notes
        notes.append(f"variant {variant} does not run here ({why})")
        if variant.startswith("llvm"):
            notes.append("  (it needs libLLVM: set DRJIT_LIBLLVM_PATH, e.g. to Debian's libllvm19)")
    return None, None, None, notes + ["no Mitsuba variant runs here: no peer figures"]


def _look_at(mi, origin, target, up):
    t = mi.ScalarTransform4f
    try:
        return t().look_at(origin=origin, target=target, up=up)
    except TypeError:
        return t.look_at(origin=origin, target=target, up=up)


def _mitsuba_scene(mi, peer: PeerScene, ply: Path, emitter_samples: int, seed: int):
    scene = {
        "type": "scene",
        "integrator": {"type": "direct", "emitter_samples": int(emitter_samples), "bsdf_samples": 0},
        "sensor": {
            "type": "perspective",
            "fov_axis": "x",
            "fov": float(peer.hfov_deg),
            "near_clip": 1e-3,
            "far_clip": 1e5,
            "to_world": _look_at(mi, list(peer.position_m), list(peer.target_m), [0.0, 0.0, 1.0]),
            "sampler": {"type": "independent", "sample_count": int(peer.spp), "seed": int(seed)},
            "film": {
                "type": "hdrfilm",
                "width": int(peer.width_px),
                "height": int(peer.height_px),
                "rfilter": {"type": "box"},
                "pixel_format": "rgb",
            },
        },
        "street": {
            "type": "ply",
            "filename": str(ply),
            "face_normals": True,
            "bsdf": {"type": "twosided", "bsdf": {"type": "diffuse", "reflectance": {"type": "rgb", "value": 1.0}}},
        },
    }
    for k, (p, i) in enumerate(zip(peer.light_position_m, peer.light_intensity_cd)):
        scene[f"light{k}"] = {
            "type": "point",
            "position": [float(c) for c in p],
            "intensity": {"type": "uniform", "value": float(i)},
        }
    return mi.load_dict(scene)


def _ours_mean(rendered) -> float:
    """Mean over the image of the white diffuser's luminance E/π, luminous openings left out."""
    b = rendered.buffers
    value = b.value_cd_m2.astype(np.float64).sum(axis=1)
    value[b.emitter >= 0] = 0.0
    return float(value.mean())


def cmd_peer(args: argparse.Namespace) -> int:
    """Run the ``peer`` benchmark with parsed command-line ``args``; returns the exit status."""
    import numba

    from render.study import Study

    threads = int(args.threads)
    numba.set_num_threads(min(threads, numba.config.NUMBA_NUM_THREADS))
    study = Study(peer_scene_file(args.scene))
    view = study.scene.view(args.view)
    spp = args.spp or study.scene.render.samples_per_pixel
    width = args.width or view.width_px
    peer = peer_scene(study, view.name, width, spp)
    setup = _isotropic_setup()
    seed = study.scene.render.seed
    ours = lambda: study.render_view(view.name, setup, samples_per_pixel=spp, width_px=width)  # noqa: E731
    study.render_view(view.name, setup, samples_per_pixel=1, width_px=64)  # JIT warm-up
    print(
        f"scene {Path(args.scene).name}, view '{view.name}': camera at {peer.position_m} m looking at "
        f"{peer.target_m} m, horizontal field of view {peer.hfov_deg:g}°, {peer.width_px}×{peer.height_px} px, "
        f"{peer.spp} samples per pixel, box pixel filter; {peer.triangles_m.shape[0]} triangles, one two-sided white "
        f"Lambertian material (ρ = 1); {len(peer.light_intensity_cd)} luminaires made isotropic ({ISOTROPIC}), "
        f"intensities {', '.join(f'{i:.1f}' for i in peer.light_intensity_cd)} cd; {threads} threads each"
    )
    print(
        f"lampcast: Study.render_view (camera rays, every luminaire above 1e-3 lx with a shadow ray, colorimetry), "
        f"numba {numba.__version__}, {numba.get_num_threads()} threads"
    )
    mi, dr, variant, notes = _mitsuba(args.variant)
    for note in notes:
        print(note)
    fns = {"lampcast": ours}
    if mi is not None:
        dr.set_thread_count(threads)
        n_lights = len(peer.light_intensity_cd)
        print(
            f"Mitsuba {mi.__version__} ({variant}, Dr.Jit {dr.__version__}, {threads} threads): integrator direct, "
            f"bsdf_samples 0, emitter_samples 1 and {n_lights} (its image divided by the number of emitter samples, "
            f"which it does not do for point lights); sampler independent; point lights at the luminaires' "
            f"opening centres"
        )
        with tempfile.TemporaryDirectory() as folder:
            ply = Path(folder) / "street.ply"
            write_ply(ply, peer.triangles_m)
            scenes = {n: _mitsuba_scene(mi, peer, ply, n, seed) for n in sorted({1, n_lights})}
        samples = {}
        for n, sc in scenes.items():
            name = f"mitsuba, {n} emitter sample{'s' if n > 1 else ''}"
            fns[name] = lambda sc=sc: np.array(mi.render(sc, spp=spp))
            samples[name] = n
        # Warm-up (Dr.Jit compiles its kernels on the first render) and the agreement check.
        ours_mean = _ours_mean(ours())
        print(f"mean white-diffuser luminance E/π over the image: lampcast {ours_mean:.5f} cd/m²")
        for name, fn in fns.items():
            if name == "lampcast":
                continue
            # Mitsuba's direct integrator does not divide a point light's (delta) samples by
            # emitter_samples: n samples give n times the radiance (measured, 5.0x for 5).
            peer_mean = float(np.mean(fn())) / samples[name]
            rel = peer_mean / ours_mean - 1.0 if ours_mean > 0 else float("nan")
            flag = (
                "agree"
                if abs(rel) <= AGREEMENT
                else f"DIFFER by more than {AGREEMENT:.0%}: the timing compares unlike work"
            )
            print(f"  {name}: {peer_mean:.5f} cd/m² ({rel:+.2%}, {flag})")
    else:
        ours()
    rounds = max(1, int(args.rounds))
    cpu: dict[str, list[float]] = {name: [] for name in fns}

    def with_cpu(name, fn):
        def run():
            t0 = time.process_time()
            fn()
            cpu[name].append(time.process_time() - t0)

        return run

    spread, _ = interleaved({name: with_cpu(name, fn) for name, fn in fns.items()}, rounds)
    print(f"seconds per render, min / median / max over {rounds} rounds, the renderers alternating:")
    for name, s in spread.items():
        print(f"  {name:32s} {s.text(1, '.3f')}")
    print("processor seconds per render (both threads; on a shared machine the fairer figure):")
    for name, values in cpu.items():
        print(f"  {name:32s} {Spread(tuple(values)).text(1, '.3f')}")
    for name, s in spread.items():
        if name == "lampcast":
            continue
        r = ratios(spread["lampcast"], s)
        print(
            f"  lampcast / {name:21s} {r.text(1, '.2f')}  (goal <= 1); per round {', '.join(f'{v:.2f}' for v in r.values)}"
        )
        c = ratios(Spread(tuple(cpu["lampcast"])), Spread(tuple(cpu[name])))
        print(
            f"  processor time, lampcast / {name}: {c.text(1, '.2f')}; per round {', '.join(f'{v:.2f}' for v in c.values)}"
        )
    return 0


def add_parser(sub: argparse._SubParsersAction) -> None:
    """Register the ``peer`` sub-command on an argparse sub-parser set."""
    p = sub.add_parser("peer", help="a direct-light render against Mitsuba 3 (optional extra 'peer'), side by side")
    p.add_argument("--scene", default=str(DEMO), help="scene file (default: the bundled demo)")
    p.add_argument("--view", default=None, help="view name (default: the scene's first view)")
    p.add_argument("--width", type=int, default=None, help="image width in pixels (default: the view's)")
    p.add_argument("--spp", type=int, default=None, help="samples per pixel (default: the scene's)")
    p.add_argument("--threads", type=int, default=2, help="threads for each renderer (default 2)")
    p.add_argument("--rounds", type=int, default=5, help="rounds, the renderers alternating (default 5)")
    p.add_argument(
        "--variant", default=None, choices=PEER_VARIANTS, help="Mitsuba variant (default: the first that runs)"
    )
    p.set_defaults(func=cmd_peer)
