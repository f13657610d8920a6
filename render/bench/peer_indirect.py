"""Interreflection check (``python -m render.bench peer-indirect``): lampcast's spectral path
tracer against Mitsuba 3's, region by region, in a closed street canyon.

Both renderers see the same invented scene: a street canyon closed on every side (a road of
worn asphalt, a left facade of red brick and a right facade of ColorChecker yellow paint, both
measured reflectances of the material library, concrete end walls and a concrete roof), a light
concrete kiosk standing on the road, and one luminaire, an isotropic point source
(``generic-isotropic``, 10 000 lm, maintenance factor 1: 795.8 cd) with a measured LED
spectrum. The scene is a lampcast scene document (:func:`canyon_document`, checked by
:func:`render.scene.loader.load_scene_document`); its compiled triangles go to Mitsuba as one
PLY file per material (:func:`render.bench.peer.write_ply`), each a two-sided Lambertian
(``twosided`` ``diffuse``) whose reflectance is the material's 1 nm spectrum (a ``regular``
spectrum, 380-780 nm), and the luminaire is a ``point`` emitter at its opening centre.

**Units.** lampcast's light is photometric: a lamp spectrum s(λ) is scaled to one photopic unit,
Km·Σ s(λ)V(λ)Δλ = 1 (:func:`render.colour.colorimetry.unit_photopic`), and a luminaire of
intensity I_v (cd) emits I_v·s(λ) in W/(sr·nm). The Mitsuba point light is given exactly that
spectral intensity, so its radiances are W/(m²·sr·nm). Mitsuba's spectral film in XYZ mode
(``hdrfilm``, ``pixel_format = "xyz"``) stores Y = ∫ L(λ) ȳ(λ) dλ · N with
N = ``MI_CIE_Y_NORMALIZATION`` = 1/106.7502594 (its CIE 1931 table; ``spectrum_to_xyz`` in its
``spectrum.h``), so the luminance is L_v = Km·∫ L ȳ dλ = Km·Y/N with Km = 683 lm/W (CIE 18:2019)
-- calibrated by these definitions only, nothing fitted. The two spectral representations
differ slightly (lampcast sums 1 nm bins against its CIE table; Mitsuba integrates the linear
interpolation of the same values against its own table): :func:`spectral_quadrature` gives
the factor per material, a few parts in 10⁴. The direct-only comparison (Mitsuba
``max_depth = 2``) checks the units before the interreflected light is compared.

**Bounces.** lampcast's ``bounces`` counts the path vertices after the surface the camera sees
(:mod:`render.light.indirect.paths`): with B bounces a pixel gets its direct light and light
reflected B times at most before reaching its surface. Mitsuba's ``max_depth`` counts path
segments from the camera: 2 is direct light, so B bounces are ``max_depth = B + 2``. Russian
roulette is off on both sides (lampcast: it would start after the last bounce; Mitsuba:
``rr_depth`` above ``max_depth``), so both compute the same truncated sum exactly.

**Regions.** Pixel sets chosen once from a separate lampcast render (:data:`MASK_SEED`, its own
camera samples, so the choice is independent of every estimate): the pixels all of whose
samples see one surface, split by whether every sample is lit directly or every sample is in
shadow, less every pixel next to one outside that set (so no pixel straddles an edge or a
shadow's border) and every pixel within two of a luminous opening (a Mitsuba point light is
invisible); regions under :data:`MIN_REGION_PIXELS` are left out. With a box pixel filter on
both sides a pixel's expected value is the mean over its area, the same for both renderers, so
any set of pixels compares like with like. Per region: the mean
luminance (cd/m²) of its pixels, estimated from independent passes (distinct seeds) on each
side, and its Monte Carlo standard error, from each pixel's spread over the passes pooled over
the region (:meth:`Estimate.of`; the pixels are estimated independently on both sides). The
ratio's standard error combines both (independent) relative errors in quadrature. The
interreflected part alone is lampcast's traced transport and Mitsuba's total minus its own
direct-only render.

**What differs by design.** lampcast's direct light has no noise but where its stratified
samples fall in a pixel; its interreflected light samples one direction per vertex and carries
the whole spectrum at 1 nm (next-event estimation to the one luminaire); the transport is kept at
its nodes (:data:`render.light.indirect.NODE_STEP_NM`, ``--node-step 1`` for the exact 1 nm
basis) and as float16 per pixel. Mitsuba samples four wavelengths per path (its scalar spectral
variants) and one direction per vertex, so its images carry colour noise, large under a line
spectrum such as low-pressure sodium's; it takes light from the luminaire only by its emitter
sampling (a point light cannot be hit).

References
----------
- W. Jakob, S. Speierer, N. Roussel, M. Nimier-David, D. Vicini, T. Zeltner, B. Nicolet,
  M. Crespo, V. Leroy, Z. Zhang (2022), *Mitsuba 3 renderer*, https://mitsuba-renderer.org (the
  ``path`` integrator and its ``max_depth`` / ``rr_depth``, the ``point`` emitter, ``regular``
  spectra, ``hdrfilm`` in spectral variants; ``MI_CIE_Y_NORMALIZATION`` in
  ``include/mitsuba/core/spectrum.h`` of the installed package).
- CIE 18:2019, *The basis of physical photometry*: Km = 683 lm/W; CIE 015:2018: the CIE 1931
  standard observer (ȳ = V).
- The standard error of a mean of n independent estimates, s/√n, and the first-order
  (delta-method) error of a ratio: elementary statistics.
"""

from __future__ import annotations

import argparse
import math
import os
import tempfile
import time
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

__all__ = [
    "BOUNCES",
    "MASK_SEED",
    "PEER_SPECTRAL_VARIANTS",
    "CanyonRegions",
    "CheckSettings",
    "Estimate",
    "PeerIndirectReport",
    "RegionRow",
    "add_parser",
    "canyon_document",
    "canyon_regions",
    "canyon_study",
    "cmd_peer_indirect",
    "luminance_from_mitsuba_y",
    "mitsuba_max_depth",
    "print_report",
    "run_check",
    "spectral_quadrature",
]

#: Mitsuba variants, in order of preference: scalar (needs no LLVM), then the vectorised one.
PEER_SPECTRAL_VARIANTS = ("scalar_spectral", "llvm_ad_spectral")
#: The interreflection bounce counts compared (0, direct light only, is compared first).
BOUNCES = (1, 3)
#: Seed of the lampcast render that chooses the regions' pixels (used by no estimate).
MASK_SEED = 990_001
#: Camera samples per pixel of that render.
MASK_SPP = 64
#: First seeds of the estimating passes (lampcast's camera, lampcast's paths, Mitsuba's).
OURS_CAMERA_SEED = 10_000
OURS_PATH_SEED = 20_000
PEER_SEED = 30_000
#: Regions with fewer pixels than this are left out of the table.
MIN_REGION_PIXELS = 30
#: The agreement asked for: lampcast / Mitsuba within 1 % per region ...
TOLERANCE = 0.01
#: ... or, where the Monte Carlo error does not allow that, within this many standard errors.
SIGMAS = 3.0

# ---------------------------------------------------------------------------------------------
# The canyon (invented; metres, x along the street, y across, z up)
# ---------------------------------------------------------------------------------------------
_LENGTH_M = 30.0
_HALF_WIDTH_M = 5.0
_HEIGHT_M = 8.0
_WALL_M = 0.3
#: Materials of the library: road, left facade, right facade, end walls and roof, kiosk.
ROAD_MATERIAL = "asphalt-worn"
LEFT_FACADE_MATERIAL = "brick"
RIGHT_FACADE_MATERIAL = "object-yellow"
END_MATERIAL = "concrete"
KIOSK_MATERIAL = "concrete-paving-light"
#: The luminaire: isotropic, its lumens, its lamp (a measured white LED), where it hangs.
LAMP = "led-3000k-cie-b2"
LUMENS = 10000.0
LAMP_POSITION_M = (12.0, 2.0, 6.0)
#: The kiosk's lower and upper corners: beyond it (from the luminaire) its shadow lies on the
#: road and the foot of the right facade.
KIOSK_LO_M = (14.5, -4.2, 0.0)
KIOSK_HI_M = (18.5, -0.5, 3.2)
#: The regions: label, object, and whether its pixels are lit directly (True), in shadow
#: (False) or either (None).
REGIONS: tuple[tuple[str, str, bool | None], ...] = (
    ("road, lit", "road", True),
    ("road, kiosk's shadow", "road", False),
    ("left facade (brick)", "left facade", True),
    ("right facade (yellow), lit", "right facade", True),
    ("right facade, kiosk's shadow", "right facade", False),
    ("west end wall", "west end", None),
    ("roof", "roof", None),
    ("kiosk, shaded side", "kiosk", False),
)


def _box(name: str, lo: tuple[float, float, float], hi: tuple[float, float, float], material: str) -> dict:
    """A ``[[geometry]]`` box from its lower and upper corners (the scene places a box by the
    centre of its base)."""
    size = [h - low for low, h in zip(lo, hi)]
    return {
        "kind": "box",
        "name": name,
        "size_m": size,
        "position_m": [0.5 * (lo[0] + hi[0]), 0.5 * (lo[1] + hi[1]), lo[2]],
        "material": material,
    }


def canyon_document(*, lamp: str = LAMP, width_px: int = 96, height_px: int = 64) -> dict:
    """The closed street canyon as a lampcast scene document (a parsed TOML table).

    Slabs overlap at the edges, so that no ray escapes between them, and no two faces lie in
    one plane. The view looks back along the street over the kiosk, whose shadow falls on the
    road and the foot of the right facade."""
    L, W, H, T = _LENGTH_M, _HALF_WIDTH_M, _HEIGHT_M, _WALL_M
    return {
        "scene": {"name": "closed street canyon (interreflection check)"},
        "geometry": [
            _box("road", (-0.1, -W - 0.1, -0.2), (L + 0.1, W + 0.1, 0.0), ROAD_MATERIAL),
            _box("left facade", (-T, W, -0.1), (L + T, W + T, H + 0.1), LEFT_FACADE_MATERIAL),
            _box("right facade", (-T, -W - T, -0.1), (L + T, -W, H + 0.1), RIGHT_FACADE_MATERIAL),
            _box("west end", (-0.25, -W - 0.2, -0.15), (0.0, W + 0.2, H + 0.15), END_MATERIAL),
            _box("east end", (L, -W - 0.2, -0.15), (L + 0.25, W + 0.2, H + 0.15), END_MATERIAL),
            _box("roof", (-0.2, -W - 0.25, H), (L + 0.2, W + 0.25, H + 0.2), END_MATERIAL),
            _box("kiosk", KIOSK_LO_M, KIOSK_HI_M, KIOSK_MATERIAL),
        ],
        "luminaires": [
            {
                "name": "lamp",
                "position_m": list(LAMP_POSITION_M),
                "photometry": "generic-isotropic",
                "lamp": lamp,
                "lumens": LUMENS,
                "maintenance_factor": 1.0,
                "column": False,
            }
        ],
        "views": [
            {
                "name": "canyon",
                "position_m": [29.5, 0.0, 3.0],
                "target_m": [17.0, -1.0, 2.0],
                "hfov_deg": 90.0,
                "resolution": [int(width_px), int(height_px)],
            }
        ],
        "render": {"samples_per_pixel": 4, "seed": 1},
    }


def canyon_study(*, lamp: str = LAMP, width_px: int = 96, height_px: int = 64):
    """A :class:`render.study.Study` of :func:`canyon_document`."""
    from render.scene.loader import load_scene_document
    from render.study import Study

    doc = canyon_document(lamp=lamp, width_px=width_px, height_px=height_px)
    return Study(load_scene_document(doc, Path(__file__).with_name("street-canyon.toml")))


# ---------------------------------------------------------------------------------------------
# Regions and estimates
# ---------------------------------------------------------------------------------------------


@dataclass(frozen=True)
class CanyonRegions:
    """Pixel sets (H, W) bool per region label, in :data:`REGIONS` order, and the labels of
    the regions in shadow (no direct light)."""

    masks: dict[str, np.ndarray]
    shadowed: frozenset[str] = frozenset()

    def pixels(self, label: str) -> int:
        return int(self.masks[label].sum())


def _grow(mask: np.ndarray) -> np.ndarray:
    """``mask`` grown by one pixel toward its eight neighbours."""
    padded = np.pad(mask, 1)
    h, w = mask.shape
    out = np.zeros_like(mask)
    for dy in range(3):
        for dx in range(3):
            out |= padded[dy : dy + h, dx : dx + w]
    return out


def canyon_regions(study, width_px: int, min_pixels: int = MIN_REGION_PIXELS) -> CanyonRegions:
    """The regions' pixels, from a lampcast render of :data:`MASK_SPP` samples per pixel at
    :data:`MASK_SEED` (see the module text): pixels all of whose samples see the region's
    object and are lit (or all in shadow), with none of their eight neighbours outside that
    set, and none within two pixels of a luminous opening."""
    rendered = study.render_view("canyon", samples_per_pixel=MASK_SPP, seed=MASK_SEED, width_px=width_px)
    b = rendered.buffers
    shape = (b.height_px, b.width_px, b.spp)
    obj = b.object_id.reshape(shape)
    direct = b.value_cd_m2.astype(np.float64).sum(axis=1).reshape(shape)
    near_opening = _grow(_grow((b.emitter >= 0).reshape(shape).any(axis=2)))
    names = list(study.mesh.object_names)
    masks: dict[str, np.ndarray] = {}
    shadowed = set()
    for label, name, lit in REGIONS:
        mask = (obj == names.index(name)).all(axis=2)
        if lit is True:
            mask &= (direct > 0.0).all(axis=2)
        elif lit is False:
            mask &= (direct == 0.0).all(axis=2)
            shadowed.add(label)
        mask &= ~_grow(~mask) & ~near_opening
        if int(mask.sum()) >= min_pixels:
            masks[label] = mask
    return CanyonRegions(masks, frozenset(shadowed & set(masks)))


@dataclass(frozen=True)
class Estimate:
    """A region's mean luminance (cd/m²) over independent passes and its standard error."""

    mean_cd_m2: float
    stderr_cd_m2: float
    passes: int

    @classmethod
    def of(cls, pixels: np.ndarray) -> Estimate:
        """From the region's pixels in each pass, (passes, n): the mean, and the standard error
        of the mean from each pixel's spread over the passes, pooled over the region's pixels
        (every pixel is estimated independently of the others, on both sides), so that it rests
        on n·(passes − 1) degrees of freedom rather than passes − 1."""
        v = np.asarray(pixels, np.float64)
        passes, n = v.shape
        if passes < 2:
            return cls(float(v.mean()), math.nan, passes)
        se = math.sqrt(float(v.var(axis=0, ddof=1).sum()) / passes) / n
        return cls(float(v.mean()), se, passes)

    def minus(self, other: Estimate) -> Estimate:
        """The difference of two independent estimates."""
        return Estimate(
            self.mean_cd_m2 - other.mean_cd_m2, math.hypot(self.stderr_cd_m2, other.stderr_cd_m2), self.passes
        )

    @property
    def relative_stderr(self) -> float:
        return self.stderr_cd_m2 / abs(self.mean_cd_m2) if self.mean_cd_m2 else math.inf


def _ratio(a: Estimate, b: Estimate) -> tuple[float, float]:
    if b.mean_cd_m2 == 0.0:
        return math.inf, math.inf
    r = a.mean_cd_m2 / b.mean_cd_m2
    return r, abs(r) * math.hypot(a.relative_stderr, b.relative_stderr)


@dataclass(frozen=True)
class RegionRow:
    """One region at one bounce count: lampcast's and Mitsuba's total luminance, and the
    interreflected part of each (None for direct light only)."""

    label: str
    pixels: int
    ours: Estimate
    peer: Estimate
    ours_indirect: Estimate | None = None
    peer_indirect: Estimate | None = None

    @property
    def ratio(self) -> tuple[float, float]:
        """lampcast / Mitsuba and its standard error."""
        return _ratio(self.ours, self.peer)

    @property
    def indirect_ratio(self) -> tuple[float, float] | None:
        if self.ours_indirect is None or self.peer_indirect is None:
            return None
        return _ratio(self.ours_indirect, self.peer_indirect)

    def bound(self, tolerance: float = TOLERANCE, sigmas: float = SIGMAS) -> float:
        """The allowed |ratio − 1|: the tolerance, or ``sigmas`` standard errors where those
        are larger."""
        return max(tolerance, sigmas * self.ratio[1])

    def agrees(self, tolerance: float = TOLERANCE, sigmas: float = SIGMAS) -> bool:
        r, se = self.ratio
        return math.isfinite(r) and math.isfinite(se) and abs(r - 1.0) <= self.bound(tolerance, sigmas)


@dataclass(frozen=True)
class CheckSettings:
    """Sample counts of a check: the image width, the independent passes per renderer, Mitsuba's
    samples per pixel per pass, lampcast's camera samples and interreflection paths per pixel
    per pass, lampcast's transport node step (nm), the Mitsuba variant and the lamp."""

    width_px: int = 96
    passes: int = 8
    peer_spp: int = 512
    ours_camera_spp: int = 16
    ours_paths: int = 512
    node_step_nm: int = 5
    variant: str = PEER_SPECTRAL_VARIANTS[0]
    lamp: str = LAMP
    bounces: tuple[int, ...] = BOUNCES

    @property
    def height_px(self) -> int:
        return max(1, round(self.width_px * 2 / 3))


@dataclass
class PeerIndirectReport:
    """Rows by bounce count (0: direct light only) and how they were made."""

    settings: CheckSettings
    rows: dict[int, list[RegionRow]] = field(default_factory=dict)
    seconds: dict[str, float] = field(default_factory=dict)
    quadrature: dict[str, float] = field(default_factory=dict)
    intensity_cd: float = 0.0
    mitsuba: str = ""


def mitsuba_max_depth(bounces: int) -> int:
    """Mitsuba's ``max_depth`` for lampcast's bounce count (0: direct light only)."""
    return int(bounces) + 2


def luminance_from_mitsuba_y(y, normalization: float) -> np.ndarray:
    """Luminance (cd/m²) of Mitsuba's film Y: Km·Y/N (see the module text)."""
    from render.colour.observers import KM_LM_PER_W

    return KM_LM_PER_W * np.asarray(y, np.float64) / float(normalization)


def spectral_quadrature(mi, reflectances: np.ndarray, spd: np.ndarray, names: list[str]) -> dict[str, float]:
    """Per material (and ``"lamp"``, the bare spectrum): lampcast's Σ ρ s V Δλ on the 1 nm grid
    over Mitsuba's ∫ ρ̃ s̃ ȳ dλ (ρ̃, s̃ the linear interpolations it makes of the same values,
    ȳ its CIE table), integrated on a 0.05 nm grid."""
    from render.colour.observers import photopic_lef
    from render.colour.spectra import WAVELENGTHS_NM

    grid = np.asarray(WAVELENGTHS_NM, np.float64)
    fine = np.linspace(grid[0], grid[-1], int(round((grid[-1] - grid[0]) / 0.05)) + 1)
    if mi.variant().startswith("scalar"):
        ybar = np.array([float(mi.cie1931_y(float(x))) for x in fine])
    else:
        ybar = np.array(mi.cie1931_y(mi.Float(fine)), np.float64).reshape(fine.shape)
    s_fine = np.interp(fine, grid, spd)
    v = photopic_lef()
    out = {"lamp": float(spd @ v) / float(np.trapezoid(s_fine * ybar, fine))}
    for name, rho in zip(names, reflectances):
        theirs = float(np.trapezoid(np.interp(fine, grid, rho) * s_fine * ybar, fine))
        out[name] = float((rho * spd) @ v) / theirs
    return out


# ---------------------------------------------------------------------------------------------
# The two renderers
# ---------------------------------------------------------------------------------------------


def _mitsuba(variant: str):
    """``(mitsuba, why_not)``: the module with ``variant`` set, or None and why."""
    try:
        import mitsuba as mi
    except ImportError:
        return None, 'Mitsuba 3 is not installed (pip install -e ".[peer]")'
    if variant not in mi.variants():
        return None, f"variant {variant} is not in this Mitsuba build"
    if variant.startswith("llvm"):
        from render.bench.peer import _probe

        why = _probe(variant)
        if why is not None:
            return None, f"variant {variant} does not run here ({why})"
    mi.set_variant(variant)
    return mi, None


def _regular(values: np.ndarray) -> dict:
    """A Mitsuba ``regular`` spectrum of values on lampcast's 1 nm grid."""
    from render.colour.spectra import WAVELENGTHS_NM

    return {
        "type": "regular",
        "wavelength_min": float(WAVELENGTHS_NM[0]),
        "wavelength_max": float(WAVELENGTHS_NM[-1]),
        "values": ", ".join(f"{float(x):.9g}" for x in values),
    }


class _PeerScene:
    """The canyon in Mitsuba: one PLY per material written into ``folder``, loaded per
    ``max_depth``."""

    def __init__(self, mi, study, camera, lights, spd: np.ndarray, folder: Path) -> None:
        from render.bench.peer import _look_at, write_ply
        from render.colour.colorimetry import unit_photopic

        self.mi = mi
        mesh = study.mesh
        tris = np.asarray(mesh.triangles_m, np.float64).reshape(-1, 3, 3)
        normals = np.asarray(mesh.normals, np.float64).reshape(-1, 3, 3)
        self.shapes = {}
        for k in range(len(mesh.material_names)):
            sel = np.asarray(mesh.material_id) == k
            if not sel.any():
                continue
            ply = folder / f"material{k}.ply"
            write_ply(ply, tris[sel], normals[sel])
            self.shapes[f"material{k}"] = {
                "type": "ply",
                "filename": str(ply),
                "face_normals": False,
                "bsdf": {
                    "type": "twosided",
                    "bsdf": {"type": "diffuse", "reflectance": _regular(study.reflectances[k])},
                },
            }
        if lights.position_m.shape[0] != 1:
            raise ValueError("the canyon has one luminaire")
        t = int(lights.table[0])
        cd = lights.cd_table[t, : lights.n_c[t], : lights.n_g[t]]
        if not np.allclose(cd, cd.max(), rtol=1e-6):
            raise ValueError("the luminaire is not isotropic")
        self.intensity_cd = float(lights.scale[0] * cd.max())
        self.light = {
            "type": "point",
            "position": [float(c) for c in lights.position_m[0]],
            "intensity": _regular(self.intensity_cd * unit_photopic(spd)),
        }
        self.sensor = {
            "type": "perspective",
            "fov_axis": "x",
            "fov": float(camera.hfov_deg),
            "near_clip": 1e-3,
            "far_clip": 1e5,
            "to_world": _look_at(mi, list(camera.position_m), list(camera.target_m), [0.0, 0.0, 1.0]),
            "sampler": {"type": "independent", "sample_count": 1},
            "film": {
                "type": "hdrfilm",
                "width": int(camera.width_px),
                "height": int(camera.height_px),
                "rfilter": {"type": "box"},
                "pixel_format": "xyz",
            },
        }

    def load(self, max_depth: int):
        integrator = {"type": "path", "max_depth": int(max_depth), "rr_depth": int(max_depth) + 100}
        return self.mi.load_dict(
            {"type": "scene", "integrator": integrator, "sensor": self.sensor, "lamp": self.light, **self.shapes}
        )

    def luminance(self, scene, spp: int, seed: int) -> np.ndarray:
        """(H, W) luminance, cd/m²."""
        xyz = np.array(self.mi.render(scene, spp=int(spp), seed=int(seed)), np.float64)
        return luminance_from_mitsuba_y(xyz[..., 1], self.mi.MI_CIE_Y_NORMALIZATION)


def _region_pixels(image: np.ndarray, regions: CanyonRegions) -> dict[str, np.ndarray]:
    return {label: np.asarray(image[mask], np.float64) for label, mask in regions.masks.items()}


def run_check(settings: CheckSettings, *, progress: bool = False) -> PeerIndirectReport | str:
    """Render the canyon on both sides (see the module text); the report, or why no
    comparison could be made (Mitsuba missing)."""
    from render.light.indirect import IndirectSettings, indirect_xyz, trace_view
    from render.light.luminaires import channel_factors

    mi, why = _mitsuba(settings.variant)
    if mi is None:
        return why
    study = canyon_study(lamp=settings.lamp, width_px=settings.width_px, height_px=settings.height_px)
    report = PeerIndirectReport(settings, mitsuba=f"Mitsuba {mi.__version__} ({settings.variant})")
    width = settings.width_px
    regions = canyon_regions(study, width)
    camera = study.camera("canyon", width)
    lights = study.lights(None)
    factors, lamps = channel_factors(lights, None)
    spds = study.lamp_spds(lamps)
    report.quadrature = spectral_quadrature(mi, study.reflectances, spds[0], list(study.mesh.material_names))

    def say(text: str) -> None:
        if progress:
            print(f"  ... {text}", flush=True)

    # lampcast: per pass its camera samples cast at a new seed, direct light, then the traced
    # transport at each bounce count from new path seeds.
    t0 = time.perf_counter()
    ours_direct: list[dict[str, np.ndarray]] = []
    ours_ind: dict[int, list[dict[str, np.ndarray]]] = {b: [] for b in settings.bounces}
    for p in range(settings.passes):
        rendered = study.render_view(
            "canyon", samples_per_pixel=settings.ours_camera_spp, seed=OURS_CAMERA_SEED + p, width_px=width
        )
        direct = rendered.colorimetry.luminance_cd_m2.astype(np.float64)
        ours_direct.append(_region_pixels(direct, regions))
        for b in settings.bounces:
            st = IndirectSettings(
                bounces=b,
                samples_per_pixel=settings.ours_paths,
                node_step_nm=settings.node_step_nm,
                rr_first_bounce=b + 1,
            )
            traced = trace_view(
                rendered.buffers, rendered.lights, study.bvh, study.reflectances, st, seed=OURS_PATH_SEED + p
            )
            y = indirect_xyz(traced, rendered.buffers.response, factors, spds, study.reflectances)[..., 1]
            ours_ind[b].append(_region_pixels(y, regions))
        say(f"lampcast pass {p + 1} of {settings.passes}")
    report.seconds["lampcast"] = time.perf_counter() - t0
    # Mitsuba: per bounce count (0 first) independent passes.
    t0 = time.perf_counter()
    peer_pixels: dict[int, list[dict[str, np.ndarray]]] = {}
    with tempfile.TemporaryDirectory() as folder:
        peer = _PeerScene(mi, study, camera, lights, spds[0], Path(folder))
        report.intensity_cd = peer.intensity_cd
        for b in (0, *settings.bounces):
            scene = peer.load(mitsuba_max_depth(b))
            peer_pixels[b] = []
            for p in range(settings.passes):
                seed = PEER_SEED + 1000 * b + p
                peer_pixels[b].append(_region_pixels(peer.luminance(scene, settings.peer_spp, seed), regions))
            say(f"Mitsuba max_depth {mitsuba_max_depth(b)} done")
    report.seconds["mitsuba"] = time.perf_counter() - t0

    def est(
        passes: list[dict[str, np.ndarray]], label: str, add: list[dict[str, np.ndarray]] | None = None
    ) -> Estimate:
        return Estimate.of(np.array([m[label] + (add[i][label] if add else 0.0) for i, m in enumerate(passes)]))

    for b in (0, *settings.bounces):
        rows = []
        for label in regions.masks:
            peer_total = est(peer_pixels[b], label)
            if b == 0 and label in regions.shadowed:
                continue  # no direct light to compare
            if b == 0:
                rows.append(RegionRow(label, regions.pixels(label), est(ours_direct, label), peer_total))
            else:
                rows.append(
                    RegionRow(
                        label,
                        regions.pixels(label),
                        est(ours_direct, label, ours_ind[b]),
                        peer_total,
                        est(ours_ind[b], label),
                        peer_total.minus(est(peer_pixels[0], label)),
                    )
                )
        report.rows[b] = rows
    return report


# ---------------------------------------------------------------------------------------------
# The command
# ---------------------------------------------------------------------------------------------


def _pct(x: float) -> str:
    return f"{x:+.2%}"


def print_report(report: PeerIndirectReport) -> bool:
    """Print the tables; True if every region agrees (see :meth:`RegionRow.agrees`)."""
    all_agree = True
    for b, rows in report.rows.items():
        depth = mitsuba_max_depth(b)
        title = "direct light only" if b == 0 else f"direct + {b} bounce{'s' if b > 1 else ''}"
        print(f"\n{title} (lampcast bounces {b}, Mitsuba max_depth {depth}); luminance cd/m², mean ± standard error:")
        head = f"  {'region':30s} {'px':>5s} {'lampcast':>20s} {'Mitsuba':>20s} {'lampcast/Mitsuba':>18s}"
        if b:
            head += f"  {'interreflected: lampcast':>26s} {'Mitsuba':>20s} {'ratio':>16s}"
        print(head)
        for row in rows:
            r, se = row.ratio
            ok = row.agrees()
            all_agree &= ok
            line = (
                f"  {row.label:30s} {row.pixels:5d} {row.ours.mean_cd_m2:10.5f} ± {row.ours.stderr_cd_m2:7.5f} "
                f"{row.peer.mean_cd_m2:10.5f} ± {row.peer.stderr_cd_m2:7.5f} {r:8.4f} ± {se:6.4f}"
            )
            if b:
                ri, sei = row.indirect_ratio
                line += (
                    f"  {row.ours_indirect.mean_cd_m2:16.5f} ± {row.ours_indirect.stderr_cd_m2:7.5f} "
                    f"{row.peer_indirect.mean_cd_m2:10.5f} ± {row.peer_indirect.stderr_cd_m2:7.5f} {ri:7.4f} ± {sei:6.4f}"
                )
            line += "" if ok else f"  DIFFERS by {_pct(r - 1)} (allowed ±{row.bound():.2%})"
            print(line)
    print(
        f"\nagreement asked for: |lampcast/Mitsuba − 1| <= {TOLERANCE:.0%}, or {SIGMAS:g} standard errors of the ratio "
        f"where those are larger: {'every region agrees' if all_agree else 'NOT every region agrees'}"
    )
    print(f"seconds: lampcast {report.seconds['lampcast']:.1f}, Mitsuba {report.seconds['mitsuba']:.1f}")
    return all_agree


def cmd_peer_indirect(args: argparse.Namespace) -> int:
    """Run the check with parsed command-line ``args``; 0 if every region agrees, 1 if not or
    when no comparison could be made."""
    import numba

    from render.bench.peer import _load

    numba.set_num_threads(min(int(args.threads), numba.config.NUMBA_NUM_THREADS))
    settings = CheckSettings(
        width_px=int(args.width),
        passes=int(args.passes),
        peer_spp=int(args.peer_spp),
        ours_camera_spp=int(args.camera_spp),
        ours_paths=int(args.paths),
        node_step_nm=int(args.node_step),
        variant=args.variant,
        lamp=args.lamp,
    )
    try:
        import drjit as dr

        dr.set_thread_count(int(args.threads))
    except ImportError:
        pass
    print(f"load average (1 / 5 / 15 min) at the start: {_load()} on {os.cpu_count()} processors")
    report = run_check(settings, progress=True)
    if isinstance(report, str):
        print(f"{report}: no comparison made")
        return 1
    s = report.settings
    print(
        f"closed street canyon {_LENGTH_M:g} × {2 * _HALF_WIDTH_M:g} × {_HEIGHT_M:g} m: road {ROAD_MATERIAL}, left "
        f"facade {LEFT_FACADE_MATERIAL}, right facade {RIGHT_FACADE_MATERIAL}, ends and roof {END_MATERIAL}, kiosk "
        f"{KIOSK_MATERIAL}; one isotropic luminaire at {LAMP_POSITION_M} m, {LUMENS:g} lm, "
        f"{report.intensity_cd:.4f} cd, lamp {s.lamp}"
    )
    print(
        f"view {s.width_px}×{s.height_px} px, box pixel filter; regions chosen from a separate lampcast render "
        f"({MASK_SPP} samples per pixel, seed {MASK_SEED}); {s.passes} independent passes per renderer"
    )
    print(
        f"lampcast: {s.ours_camera_spp} camera samples and {s.ours_paths} interreflection paths per pixel per pass, "
        f"no Russian roulette, transport nodes every {s.node_step_nm} nm"
    )
    print(
        f"{report.mitsuba}: path integrator, rr_depth above max_depth, independent sampler, {s.peer_spp} samples per "
        f"pixel per pass, hdrfilm XYZ; luminance = Km·Y/MI_CIE_Y_NORMALIZATION, Km = 683 lm/W"
    )
    q = report.quadrature
    print(
        "spectral representation, lampcast's 1 nm sum / Mitsuba's interpolated integral: "
        + ", ".join(f"{k} {v:.5f}" for k, v in q.items())
    )
    ok = print_report(report)
    print(f"load average (1 / 5 / 15 min) at the end: {_load()}")
    return 0 if ok else 1


def add_parser(sub: argparse._SubParsersAction) -> None:
    """Register the ``peer-indirect`` sub-command on an argparse sub-parser set."""
    d = CheckSettings()
    p = sub.add_parser(
        "peer-indirect",
        help="interreflected light in a closed street canyon against Mitsuba 3's spectral path tracer, per region",
    )
    p.add_argument("--width", type=int, default=d.width_px, help=f"image width in pixels (default {d.width_px})")
    p.add_argument("--passes", type=int, default=d.passes, help=f"independent passes per renderer (default {d.passes})")
    p.add_argument(
        "--peer-spp", type=int, default=d.peer_spp, help=f"Mitsuba samples per pixel per pass (default {d.peer_spp})"
    )
    p.add_argument(
        "--camera-spp",
        type=int,
        default=d.ours_camera_spp,
        help=f"lampcast camera samples per pixel per pass (default {d.ours_camera_spp})",
    )
    p.add_argument(
        "--paths",
        type=int,
        default=d.ours_paths,
        help=f"lampcast interreflection paths per pixel per pass (default {d.ours_paths})",
    )
    p.add_argument(
        "--node-step", type=int, default=d.node_step_nm, help="lampcast's transport node step, nm (1: exact; default 5)"
    )
    p.add_argument("--lamp", default=d.lamp, help=f"lamp spectrum (default {d.lamp})")
    p.add_argument(
        "--variant",
        default=d.variant,
        choices=PEER_SPECTRAL_VARIANTS,
        help=f"Mitsuba variant (default {d.variant}, which needs no LLVM)",
    )
    p.add_argument("--threads", type=int, default=2, help="threads for each renderer (default 2)")
    p.set_defaults(func=cmd_peer_indirect)
