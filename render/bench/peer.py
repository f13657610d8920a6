"""Peer benchmark (``python -m render.bench peer``): a direct-light render against Mitsuba 3.

The same view of the same mesh is rendered by lampcast and by Mitsuba 3 (the optional extra
``pip install -e ".[peer]"``), and the times are printed side by side, min / median / max over
rounds in which the renderers alternate, with the ratio lampcast / Mitsuba round by round
(below 1: lampcast is faster), in wall and in processor seconds. Two comparisons are made:

- **equal work**: Mitsuba at the scene's samples per pixel, with 1 and with as many emitter
  samples as there are luminaires (its image then carries the noise of choosing luminaires at
  random, which lampcast's does not);
- **equal noise**: the least Mitsuba setting (sampler, emitter samples, samples per pixel) whose
  image is as close to a converged reference as lampcast's image at the scene's samples per
  pixel, found by a search and then timed.

**What is rendered, exactly.** Both render the compiled scene's triangles without the lamp
columns (a point light has no housing, and lampcast never lets a luminaire's own housing shadow
its light), with their per-vertex shading normals (Mitsuba reads them from the PLY file), one
two-sided white Lambertian material (ρ = 1), through the same pinhole camera (position, target,
horizontal field of view, width and height in pixels), with a box pixel filter and the same
number of threads. The luminaires are given an isotropic distribution (the setup
``*: photometry = "generic-isotropic"``), so that Mitsuba's isotropic point lights (``point``,
intensity I = the luminaire's candela at full output with its maintenance factor) carry the same
light; a photometric web has no counterpart there. The quantity both compute is the luminance of
a white diffuser lit directly, E/π (cd/m², lampcast's light buffers summed over channels;
Mitsuba's radiance in its RGB variant, every channel equal).

What differs: lampcast evaluates every luminaire whose contribution at a point can reach 1e-3 lx
(:data:`render.light.integrator.NEGLIGIBLE_LX`), exactly, with one shadow ray each, so its only
noise is where in the pixel its (stratified) samples fall, and it stops shadow rays 5 cm plus
half the opening's diagonal short of the luminaire; Mitsuba's ``direct`` integrator picks
luminaires at random (uniformly, with replacement), ``emitter_samples`` per camera sample
(``bsdf_samples = 0``, as BSDF sampling cannot hit a point light), and ends its shadow rays at
the light. With point lights Mitsuba does not divide by ``emitter_samples`` (n samples give n
times the radiance, measured), so its image is divided by n. lampcast's time includes its
colorimetry (the buffers turned into absolute X, Y, Z for the scene's lamps), Mitsuba's its
film development.

**The error measure.** Over the pixels kept (every pixel in which no lampcast sample of the
timed render or of its reference sees a luminous opening: Mitsuba's point lights are
invisible), with x the image's E/π per pixel and r the reference's:
relative RMS error ``sqrt(mean((x - r)²)) / mean(r)`` (:func:`image_error`; the figure matched)
and relative mean absolute error ``mean(|x - r|) / mean(r)`` (printed beside it).

**The references.** Mitsuba's: the sum of one render per luminaire, each with only that point
light (so ``emitter_samples = 1`` always picks it and nothing is chosen at random), independent
sampler, ``--reference-spp`` samples per pixel in passes of distinct seeds, none of them the
timed runs' seed. lampcast's: ``--ours-reference-spp`` samples per pixel in passes of distinct
seeds. Each is accumulated as two independent halves, so its own noise is measured
(:func:`halves_noise`), and the difference between the two references is split into that noise
and what is left, the systematic difference of the renderers (:func:`systematic_difference`).
The target is lampcast's error against **Mitsuba's** reference (it includes that systematic
difference, so the target errs in Mitsuba's favour).

**The search.** For each sampler (``--samplers``) and number of emitter samples
(``--emitter-samples``, by default 1, 2 and the number of luminaires): the samples per pixel
double from the scene's until the error reaches the target, then bisection between the last
count that missed and the first that reached it, then, for the stratifying samplers (all but
``independent``), every count between the last doubling that missed and the bisection's answer
in increasing order (:func:`least_spp`): their error does not fall steadily with the count, as
a count that is a multiple of the number of luminaires stratifies the choice of luminaire
(``multijitter`` with 5 luminaires: 4.7 % at 30 spp, 18.6 % at 24). Each sampler rounds a count
to those it supports (``ldsampler`` to powers of 4, ``stratified`` to squares, ``multijitter``
to a product of two near-equal factors), and the rounded count is the one reported. One render
per count, seed = the scene's. A setting is given up at ``--max-spp``, or when one render of it
already takes :data:`PRUNE` times the processor time of the cheapest setting that reached the
target. The ``--time-settings`` cheapest settings that reached it are timed against lampcast.

Mitsuba's vectorised CPU variant ``llvm_ad_rgb`` needs the LLVM shared library; point
``DRJIT_LIBLLVM_PATH`` at it when Dr.Jit does not find it (on Debian 12: ``apt-get install
libllvm19``, whose library is ``libLLVM.so.19.1``; LLVM 15 failed to compile Dr.Jit's kernels).
The variant is tried in a child process first; when it does not run, the benchmark falls back
to ``scalar_rgb`` and says so.

References
----------
- W. Jakob, S. Speierer, N. Roussel, M. Nimier-David, D. Vicini, T. Zeltner, B. Nicolet,
  M. Crespo, V. Leroy, Z. Zhang (2022), *Mitsuba 3 renderer*, https://mitsuba-renderer.org
  (the peer renderer; its ``direct`` integrator, ``point`` emitter, ``perspective`` sensor,
  ``independent``, ``stratified``, ``multijitter`` and ``ldsampler`` samplers).
- The variance of a mean of n independent samples falls as 1/n, so the difference of two
  independent halves has twice the variance of either half and four times that of their mean
  (elementary statistics; the basis of :func:`halves_noise`).
"""

from __future__ import annotations

import argparse
import math
import os
import subprocess
import sys
import tempfile
import time
from collections.abc import Callable
from dataclasses import dataclass, field, replace
from pathlib import Path

import numpy as np

from render.bench.timing import interleaved_cpu, ratios
from render.resources import demo_scene_path

__all__ = [
    "PEER_SAMPLERS",
    "PEER_VARIANTS",
    "PRUNE",
    "ImageError",
    "PeerScene",
    "PeerSetting",
    "Trial",
    "add_parser",
    "cmd_peer",
    "halves_noise",
    "image_error",
    "least_spp",
    "peer_scene",
    "peer_scene_file",
    "systematic_difference",
    "write_ply",
]

DEMO = demo_scene_path()
#: Mitsuba variants, in order of preference: vectorised CPU (LLVM), then scalar.
PEER_VARIANTS = ("llvm_ad_rgb", "scalar_rgb")
#: Mitsuba samplers searched for the equal-noise setting, in the order searched.
PEER_SAMPLERS = ("ldsampler", "multijitter", "stratified", "independent")
#: The distribution given to every luminaire, so that a point light is its equal.
ISOTROPIC = "generic-isotropic"
#: Largest relative difference of the image means before the timing is called into question.
AGREEMENT = 0.02
#: A setting is given up when one render of it takes this many times the processor time of the
#: cheapest setting that reached the target.
PRUNE = 2.0
#: Samples per pixel of one pass of a reference render (Mitsuba's, lampcast's).
REFERENCE_PASS_SPP = 64
OURS_REFERENCE_PASS_SPP = 16
#: First seeds of the reference passes (the timed runs use the scene's seed).
REFERENCE_SEED = 100_000
OURS_REFERENCE_SEED = 200_000


@dataclass(frozen=True)
class PeerScene:
    """What both renderers are given: triangles (F, 3, 3) m with their per-vertex shading
    normals (F, 3, 3), the camera, samples per pixel, and the point lights' positions (m) and
    intensities (cd)."""

    triangles_m: np.ndarray
    normals: np.ndarray
    position_m: tuple[float, float, float]
    target_m: tuple[float, float, float]
    hfov_deg: float
    width_px: int
    height_px: int
    spp: int
    light_position_m: np.ndarray
    light_intensity_cd: np.ndarray


@dataclass(frozen=True)
class ImageError:
    """An image's distance from a reference over the kept pixels: relative RMS error
    ``sqrt(mean((x - r)²)) / mean(r)`` and relative mean absolute error ``mean(|x - r|) / mean(r)``."""

    rel_rms: float
    rel_mae: float

    def text(self) -> str:
        return f"rRMS {self.rel_rms:7.2%}  rMAE {self.rel_mae:7.2%}"


@dataclass(frozen=True)
class PeerSetting:
    """A Mitsuba setting: sampler, emitter samples per camera sample, samples per pixel (as the
    sampler rounds them)."""

    sampler: str
    emitter_samples: int
    spp: int

    def text(self) -> str:
        return f"{self.sampler}, {self.emitter_samples} emitter sample{'s' if self.emitter_samples > 1 else ''}, {self.spp} spp"


@dataclass(frozen=True)
class Trial:
    """One render of the search: its setting, error, and processor and wall seconds (the first
    render at that count: it includes Dr.Jit's tracing, and compiling unless cached)."""

    setting: PeerSetting
    error: ImageError
    cpu_s: float
    wall_s: float


@dataclass
class SearchOutcome:
    """The search of one sampler and number of emitter samples: every render made, the least
    setting that reached the target (or None) and, if none, why the search stopped."""

    sampler: str
    emitter_samples: int
    trials: list[Trial] = field(default_factory=list)
    reached: Trial | None = None
    stopped: str = ""


def image_error(image: np.ndarray, reference: np.ndarray, keep: np.ndarray) -> ImageError:
    """The :class:`ImageError` of ``image`` against ``reference`` over the pixels where ``keep``."""
    x = np.asarray(image, np.float64)[keep]
    r = np.asarray(reference, np.float64)[keep]
    mean = float(r.mean())
    d = x - r
    return ImageError(float(np.sqrt(np.mean(d * d))) / mean, float(np.mean(np.abs(d))) / mean)


def halves_noise(half_a: np.ndarray, half_b: np.ndarray, keep: np.ndarray) -> float:
    """Relative RMS noise of the mean of two independent half images of the same quantity:
    ``rms(a - b) / 2 / mean((a + b) / 2)``. Each half has variance σ²; a - b has 2σ² and the
    mean σ²/2, so the mean's noise is rms(a - b)/2."""
    a = np.asarray(half_a, np.float64)[keep]
    b = np.asarray(half_b, np.float64)[keep]
    d = a - b
    return float(np.sqrt(np.mean(d * d))) / 2.0 / float(np.mean(0.5 * (a + b)))


def systematic_difference(rel_rms_between: float, noise_a: float, noise_b: float) -> float:
    """What is left of the relative RMS difference between two independent noisy images once
    their own noises are taken out (independent errors add in quadrature); 0 when the noises
    explain it all."""
    return math.sqrt(max(0.0, rel_rms_between**2 - noise_a**2 - noise_b**2))


def least_spp(
    error_at: Callable[[int], float],
    target: float,
    *,
    start: int,
    max_spp: int,
    admissible: Callable[[int], int] = lambda n: n,
    give_up: Callable[[int], bool] = lambda spp: False,
    scan: bool = False,
) -> tuple[int | None, dict[int, float]]:
    """The least samples per pixel whose error reaches ``target`` (error <= target).

    The requested count doubles from ``start`` until the error reaches the target, then
    bisection between the last requested count that missed and the first that reached it, until
    they are adjacent. With ``scan``, every count between the last doubling that missed and the
    bisection's answer is then tried in increasing order, and the first that reaches the target
    is the answer: for errors that do not fall steadily with the count (a stratifying sampler
    whose count is a multiple of the number of luminaires stratifies the choice of luminaire).
    ``admissible(n)`` is the count a sampler really takes for ``n``; ``error_at`` is called once
    per admissible count. The doubling stops without result at ``max_spp`` or when
    ``give_up(spp)`` (after the render at ``spp``) is true. Returns the least admissible count
    found (None if the target was not reached) and the errors measured, by count, in the order
    measured."""
    errors: dict[int, float] = {}

    def err(n: int) -> float:
        a = admissible(n)
        if a not in errors:
            errors[a] = float(error_at(a))
        return errors[a]

    low, n = None, max(1, int(start))
    while err(n) > target:
        if admissible(n) >= max_spp or give_up(admissible(n)):
            return None, errors
        low, n = n, 2 * n
    high = n
    if low is None:
        return admissible(high), errors
    missed = low
    while high - low > 1:
        mid = (low + high) // 2
        if err(mid) <= target:
            high = mid
        else:
            low = mid
    found = admissible(high)
    if scan:
        for m in range(missed + 1, high):
            if admissible(m) < found and err(m) <= target:
                return admissible(m), errors
    return found, errors


def peer_scene_file(path: str | Path):
    """The scene of ``path`` without lamp columns: a point light has no housing, and lampcast
    does not let a luminaire's own housing shadow its light (it is in the photometry), so
    neither renderer gets one."""
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
        np.asarray(study.mesh.normals, np.float64).reshape(-1, 3, 3),
        camera.position_m,
        camera.target_m,
        camera.hfov_deg,
        camera.width_px,
        camera.height_px,
        int(spp),
        lights.position_m.copy(),
        lights.scale * cd,
    )


def write_ply(path: Path, triangles_m: np.ndarray, normals: np.ndarray | None = None) -> None:
    """A binary little-endian PLY of unshared triangles (three vertices per face), with the
    per-vertex shading normals (F, 3, 3) as ``nx ny nz`` when ``normals`` is given."""
    tris = np.asarray(triangles_m, np.float32).reshape(-1, 3, 3)
    n = tris.shape[0]
    props = ["x", "y", "z"] + (["nx", "ny", "nz"] if normals is not None else [])
    header = (
        f"ply\nformat binary_little_endian 1.0\nelement vertex {3 * n}\n"
        + "".join(f"property float {name}\n" for name in props)
        + f"element face {n}\nproperty list uchar int vertex_indices\nend_header\n"
    ).encode("ascii")
    vertices = tris.reshape(-1, 3)
    if normals is not None:
        vertices = np.concatenate([vertices, np.asarray(normals, np.float32).reshape(-1, 3)], axis=1)
    faces = np.zeros(n, dtype=[("count", "u1"), ("index", "<i4", (3,))])
    faces["count"] = 3
    faces["index"] = np.arange(3 * n, dtype=np.int32).reshape(n, 3)
    with open(path, "wb") as f:
        f.write(header)
        f.write(np.ascontiguousarray(vertices, "<f4").tobytes())
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


def _mitsuba_scene(
    mi, peer: PeerScene, ply: Path, emitter_samples: int, seed: int, sampler: str = "independent", lights=None
):
    """Mitsuba's scene: the PLY (shading normals from its vertices), the camera, the point
    lights (all, or the indices ``lights``) and the ``direct`` integrator."""
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
            "sampler": {"type": sampler, "sample_count": int(peer.spp), "seed": int(seed)},
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
            "face_normals": False,
            "bsdf": {"type": "twosided", "bsdf": {"type": "diffuse", "reflectance": {"type": "rgb", "value": 1.0}}},
        },
    }
    chosen = range(len(peer.light_intensity_cd)) if lights is None else lights
    for k in chosen:
        scene[f"light{k}"] = {
            "type": "point",
            "position": [float(c) for c in peer.light_position_m[k]],
            "intensity": {"type": "uniform", "value": float(peer.light_intensity_cd[k])},
        }
    return mi.load_dict(scene)


def _ours_image(rendered) -> tuple[np.ndarray, np.ndarray]:
    """The white diffuser's luminance E/π per pixel (H, W), the mean of the pixel's samples,
    and the pixels where a sample sees a luminous opening (H, W)."""
    b = rendered.buffers
    shape = (b.height_px, b.width_px, b.spp)
    value = b.value_cd_m2.astype(np.float64).sum(axis=1).reshape(shape).mean(axis=2)
    return value, (b.emitter >= 0).reshape(shape).any(axis=2)


@dataclass
class _Reference:
    """A reference image accumulated as two independent halves."""

    halves: np.ndarray
    spp: int
    seconds: float

    @property
    def image(self) -> np.ndarray:
        return self.halves.mean(axis=0)


def _halves(passes: int) -> int:
    return max(2, passes + passes % 2)


def _mitsuba_reference(mi, peer: PeerScene, ply: Path, spp: int) -> _Reference:
    """Sum over the luminaires of one-luminaire renders (no luminaire chosen at random)."""
    per = min(REFERENCE_PASS_SPP, max(1, spp // 2))
    passes = _halves(-(-spp // per))
    halves = np.zeros((2, peer.height_px, peer.width_px))
    t0 = time.perf_counter()
    for k in range(len(peer.light_intensity_cd)):
        scene = _mitsuba_scene(mi, replace(peer, spp=per), ply, 1, 0, "independent", [k])
        for p in range(passes):
            seed = REFERENCE_SEED + 10_000 * k + p
            halves[p % 2] += np.array(mi.render(scene, spp=per, seed=seed), np.float64)[..., 0] / (passes // 2)
    return _Reference(halves, passes * per, time.perf_counter() - t0)


def _ours_reference(study, view: str, setup, width: int, spp: int) -> tuple[_Reference, np.ndarray]:
    per = min(OURS_REFERENCE_PASS_SPP, max(1, spp // 2))
    passes = _halves(-(-spp // per))
    halves, emitters = None, None
    t0 = time.perf_counter()
    for p in range(passes):
        image, em = _ours_image(
            study.render_view(view, setup, samples_per_pixel=per, seed=OURS_REFERENCE_SEED + p, width_px=width)
        )
        if halves is None:
            halves, emitters = np.zeros((2,) + image.shape), np.zeros(image.shape, bool)
        halves[p % 2] += image / (passes // 2)
        emitters |= em
    return _Reference(halves, passes * per, time.perf_counter() - t0), emitters


def _admissible(mi, sampler: str, n: int) -> int:
    """The samples per pixel ``sampler`` really takes when asked for ``n``."""
    return int(mi.load_dict({"type": sampler, "sample_count": int(n)}).sample_count())


def _search(
    mi, peer, ply, reference, keep, target, samplers, emitter_counts, start, max_spp, seed
) -> list[SearchOutcome]:
    """The least setting per sampler and number of emitter samples (see the module text)."""
    outcomes: list[SearchOutcome] = []
    best_cpu = [math.inf]
    for sampler in samplers:
        for es in emitter_counts:
            out = SearchOutcome(sampler, es)
            scene = _mitsuba_scene(mi, peer, ply, es, seed, sampler)
            cpu_at: dict[int, float] = {}

            def error_at(spp: int, out=out, scene=scene, cpu_at=cpu_at, es=es, sampler=sampler) -> float:
                t0, c0 = time.perf_counter(), time.process_time()
                image = np.array(mi.render(scene, spp=spp, seed=seed), np.float64)[..., 0] / es
                cpu, wall = time.process_time() - c0, time.perf_counter() - t0
                cpu_at[spp] = cpu
                e = image_error(image, reference, keep)
                out.trials.append(Trial(PeerSetting(sampler, es, spp), e, cpu, wall))
                return e.rel_rms

            def give_up(spp: int, cpu_at=cpu_at) -> bool:
                return cpu_at.get(spp, 0.0) > PRUNE * best_cpu[0]

            found, _ = least_spp(
                error_at,
                target,
                start=start,
                max_spp=max_spp,
                admissible=lambda n, sampler=sampler: _admissible(mi, sampler, n),
                give_up=give_up,
                scan=sampler != "independent",
            )
            if found is None:
                last = out.trials[-1]
                out.stopped = (
                    f"not reached up to {last.setting.spp} spp (--max-spp {max_spp})"
                    if last.setting.spp >= max_spp
                    else f"given up at {last.setting.spp} spp: one render took {last.cpu_s:.2f} processor s, "
                    f"over {PRUNE:g}× the cheapest setting that reached the target"
                )
            else:
                out.reached = next(t for t in out.trials if t.setting.spp == found)
                best_cpu[0] = min(best_cpu[0], out.reached.cpu_s)
            outcomes.append(out)
    return outcomes


def _plural(n: int, word: str) -> str:
    return f"{n} {word}{'s' if n != 1 else ''}"


def _load() -> str:
    return " / ".join(f"{v:.2f}" for v in os.getloadavg()) if hasattr(os, "getloadavg") else "unknown"


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
    print(f"load average (1 / 5 / 15 min) at the start: {_load()} on {os.cpu_count()} processors")
    print(
        f"scene {Path(args.scene).name}, view '{view.name}': camera at {peer.position_m} m looking at "
        f"{peer.target_m} m, horizontal field of view {peer.hfov_deg:g}°, {peer.width_px}×{peer.height_px} px, "
        f"{peer.spp} samples per pixel, box pixel filter; {peer.triangles_m.shape[0]} triangles with their "
        f"shading normals, one two-sided white Lambertian material (ρ = 1); {len(peer.light_intensity_cd)} "
        f"luminaires made isotropic ({ISOTROPIC}), intensities {', '.join(f'{i:.1f}' for i in peer.light_intensity_cd)}"
        f" cd; {threads} threads each"
    )
    print(
        f"lampcast: Study.render_view (camera rays, every luminaire above 1e-3 lx with a shadow ray, colorimetry), "
        f"numba {numba.__version__}, {numba.get_num_threads()} threads, seed {seed}"
    )
    mi, dr, variant, notes = _mitsuba(args.variant)
    for note in notes:
        print(note)
    fns: dict[str, Callable[[], object]] = {"lampcast": ours}
    divide: dict[str, int] = {}
    ours_image, ours_emitters = _ours_image(ours())  # also the warm-up at full size
    if mi is None:
        return _time_and_print(fns, args.rounds, divide, None, None)
    mi.set_log_level(mi.LogLevel.Error)  # samplers warn when they round a sample count
    dr.set_thread_count(threads)
    n_lights = len(peer.light_intensity_cd)
    with tempfile.TemporaryDirectory() as folder:
        ply = Path(folder) / "street.ply"
        write_ply(ply, peer.triangles_m, peer.normals)
        print(
            f"Mitsuba {mi.__version__} ({variant}, Dr.Jit {dr.__version__}, {threads} threads): integrator direct, "
            f"bsdf_samples 0, its image divided by the number of emitter samples (which it does not do for point "
            f"lights); point lights at the luminaires' opening centres; seed {seed}"
        )
        # References, the error measure and the target.
        mref = _mitsuba_reference(mi, peer, ply, int(args.reference_spp))
        oref, oref_emitters = _ours_reference(study, view.name, setup, width, int(args.ours_reference_spp))
        keep = ~(ours_emitters | oref_emitters)
        m_noise = halves_noise(*mref.halves, keep)
        o_noise = halves_noise(*oref.halves, keep)
        between = image_error(oref.image, mref.image, keep)
        m_mean, o_mean = float(mref.image[keep].mean()), float(oref.image[keep].mean())
        print(
            f"error measure: over the {int(keep.sum())} of {keep.size} pixels where no lampcast sample sees a "
            f"luminous opening, x the image's E/π per pixel and r the reference's: rRMS = sqrt(mean((x - r)²)) / "
            f"mean(r) (matched), rMAE = mean(|x - r|) / mean(r)"
        )
        print(
            f"reference, Mitsuba: the sum of {n_lights} one-luminaire renders (nothing chosen at random), independent "
            f"sampler, {mref.spp} spp each in passes of distinct seeds ({mref.seconds:.0f} s); its own noise "
            f"(two independent halves) rRMS {m_noise:.2%}"
        )
        print(
            f"reference, lampcast: {oref.spp} spp in passes of distinct seeds ({oref.seconds:.0f} s); its own noise "
            f"rRMS {o_noise:.2%}"
        )
        print(
            f"  the references agree: means {m_mean:.5f} and {o_mean:.5f} cd/m² ({o_mean / m_mean - 1:+.3%}); per "
            f"pixel {between.text()} between them, of which their noises sqrt({m_noise:.2%}² + {o_noise:.2%}²) = "
            f"{math.hypot(m_noise, o_noise):.2%} and a systematic difference of the renderers of about "
            f"{systematic_difference(between.rel_rms, m_noise, o_noise):.2%} rRMS"
        )
        ours_error = image_error(ours_image, mref.image, keep)
        own = image_error(ours_image, oref.image, keep)
        target = ours_error.rel_rms
        print(
            f"lampcast at {spp} spp: {ours_error.text()} against Mitsuba's reference (against its own: "
            f"{own.text()}); the target is rRMS <= {target:.2%}"
        )
        # Equal work: Mitsuba at the scene's spp, independent sampler, 1 and n emitter samples.
        rows: list[tuple[str, PeerSetting]] = [
            (f"mitsuba, equal work, {_plural(n, 'emitter sample')}", PeerSetting("independent", n, spp))
            for n in sorted({1, n_lights})
        ]
        # Equal noise: the search.
        emitter_counts = sorted({int(n) for n in args.emitter_samples} if args.emitter_samples else {1, 2, n_lights})
        print(
            f"search for the least Mitsuba setting with rRMS <= {target:.2%} (samplers {', '.join(args.samplers)}; "
            f"emitter samples {', '.join(map(str, emitter_counts))}; spp doubling from {spp}, then bisection, then for "
            f"the stratifying samplers every count between the last doubling that missed and the bisection's answer; "
            f"one render each, seed {seed}; processor and wall seconds of that first render):"
        )
        outcomes = _search(
            mi,
            peer,
            ply,
            mref.image,
            keep,
            target,
            tuple(args.samplers),
            emitter_counts,
            spp,
            int(args.max_spp),
            seed,
        )
        print(f"  {'sampler':12s} {'emitter':>7s} {'spp':>5s}  {'error':30s} {'cpu s':>7s} {'wall s':>7s}")
        for out in outcomes:
            for t in out.trials:
                mark = "reached" if t.error.rel_rms <= target else ""
                print(
                    f"  {t.setting.sampler:12s} {t.setting.emitter_samples:7d} {t.setting.spp:5d}  {t.error.text():30s} "
                    f"{t.cpu_s:7.2f} {t.wall_s:7.2f}  {mark}"
                )
            print(
                f"  -> {out.sampler}, {_plural(out.emitter_samples, 'emitter sample')}: "
                + (f"least {out.reached.setting.spp} spp" if out.reached else out.stopped)
            )
        reached = sorted((o.reached for o in outcomes if o.reached), key=lambda t: t.cpu_s)
        if not reached:
            print("  no setting reached the target: no equal-noise timing")
        for t in reached[: max(0, int(args.time_settings))]:
            rows.append((f"mitsuba, equal noise, {t.setting.text()}", t.setting))
        for name, setting in rows:
            scene = _mitsuba_scene(
                mi, replace(peer, spp=setting.spp), ply, setting.emitter_samples, seed, setting.sampler
            )
            fns[name] = lambda sc=scene, s=setting.spp: np.array(mi.render(sc, spp=s, seed=seed), np.float64)[..., 0]
            divide[name] = setting.emitter_samples
            fns[name]()  # warm-up: Dr.Jit traces (and compiles unless cached) on the first render
        return _time_and_print(fns, args.rounds, divide, mref.image, keep)


def _time_and_print(fns, rounds, divide, reference, keep) -> int:
    rounds = max(1, int(rounds))
    wall, cpu, last = interleaved_cpu(fns, rounds)
    print(f"seconds per render, min / median / max over {rounds} rounds, the renderers alternating:")
    width = max(len(n) for n in fns) + 2
    for name, s in wall.items():
        print(f"  {name:{width}s} {s.text(1, '.3f')}")
    print("processor seconds per render (every thread; on a shared machine the fairer figure):")
    for name, s in cpu.items():
        print(f"  {name:{width}s} {s.text(1, '.3f')}")
    if reference is not None:
        print("error of the last timed image against Mitsuba's reference, and its mean E/π (cd/m²):")
        ref_mean = float(reference[keep].mean())
        for name, out in last.items():
            image = _ours_image(out)[0] if name == "lampcast" else out / divide[name]
            mean = float(image[keep].mean())
            flag = "" if abs(mean / ref_mean - 1) <= AGREEMENT else f"  MEAN DIFFERS by more than {AGREEMENT:.0%}"
            print(
                f"  {name:{width}s} {image_error(image, reference, keep).text()}  mean {mean:.5f} "
                f"({mean / ref_mean - 1:+.2%}){flag}"
            )
    for name in fns:
        if name == "lampcast":
            continue
        r = ratios(wall["lampcast"], wall[name])
        c = ratios(cpu["lampcast"], cpu[name])
        print(
            f"  lampcast / {name}: {r.text(1, '.2f')} (goal <= 1); per round {', '.join(f'{v:.2f}' for v in r.values)}"
        )
        print(f"    processor time: {c.text(1, '.2f')}; per round {', '.join(f'{v:.2f}' for v in c.values)}")
    print(f"load average (1 / 5 / 15 min) at the end: {_load()}")
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
    p.add_argument(
        "--reference-spp", type=int, default=1024, help="samples per pixel of Mitsuba's reference (default 1024)"
    )
    p.add_argument(
        "--ours-reference-spp", type=int, default=64, help="samples per pixel of lampcast's reference (default 64)"
    )
    p.add_argument(
        "--samplers",
        nargs="+",
        default=list(PEER_SAMPLERS),
        choices=PEER_SAMPLERS,
        help=f"Mitsuba samplers searched (default: {' '.join(PEER_SAMPLERS)})",
    )
    p.add_argument(
        "--emitter-samples",
        type=int,
        nargs="+",
        default=None,
        help="emitter samples searched (default: 1, 2 and the number of luminaires)",
    )
    p.add_argument("--max-spp", type=int, default=1024, help="largest samples per pixel searched (default 1024)")
    p.add_argument(
        "--time-settings",
        type=int,
        default=2,
        help="how many of the cheapest equal-noise settings are timed (default 2)",
    )
    p.set_defaults(func=cmd_peer)
