"""Light to the sky: direct upward flux, light reflected upward, and a sky-glow weighted figure.

* **Direct upward flux** of a luminaire: the flux its distribution sends above the horizontal.
  Untilted, that is the exact zonal flux Φ(90°..180°) of :mod:`render.light.photometry.integrals`
  (so ``upward_flux_lm / luminous_flux_lm`` is its :func:`~render.light.photometry.ulor`). A
  luminaire tilted in its mounting (``tilt_deg``, the orientation of
  :func:`render.light.photometry.luminaire_rotation`) is integrated over the world's upper
  hemisphere instead, Φ↑ = ∫∫ I(C(θ, φ), γ(θ, φ)) sin θ dθ dφ, by the midpoint rule on a fine
  (θ, φ) grid (a numerical quadrature; its error is checked against an analytic case in the
  tests). The photometry passed is the one the luminaire uses (lumens and LM-63 tilt factors
  already applied).
* **Reflected upward flux**: a matt (Lambertian) patch of area A with illuminance E and
  photometric reflectance ρ emits ρ·E·A lm; a patch whose normal has upward component n_z sends
  the share (1 + n_z)/2 of it into the upper hemisphere (the view factor of a tilted plane to the
  sky; 1 for a horizontal patch facing up, ½ for a wall). No interreflection is followed.
* **Lit ground** (:func:`ground_patches`): the street's ground from building line to building
  line over its length (carriageway, kerb tops, verges, footways, front gardens), cut into
  patches about ``spacing_m`` square, each with its area and material; the setup's direct
  illuminance at the patch centres (with shadows) times the material's photometric reflectance
  under the lamp lighting it gives the reflected upward flux. Facades and objects are left out
  (a wall sends half its reflected light up; house fronts receive far less light than the
  ground), and the ground's reflected light is counted whole, as if none of it met a facade:
  in a street canyon it is therefore no lower bound of the reflected light that reaches the
  sky (on the demo the ground's figure is about 13 % above the upward exitance map's total,
  which adds facades and roofs but loses the ground's light the facades intercept). The
  figure stays as it was, for comparison with earlier runs; the map is the fuller measure.
* **The upward total** (``upward_lm``, per metre, and the weighted figures) takes the map's
  reflected flux where the map was measured (every ``lampcast calc`` and the comparison's
  calculation; ``reflected_upward_source`` "upward exitance map"): it is what really leaves
  through a plane above the scene, while the ground's figure both misses facades and roofs
  and counts light the facades intercept. Without a map (:func:`sky_figures` alone) the
  ground's figure serves (source "ground patches"). A setup with several lamp types splits the
  map's total between them in the proportions of the ground's figure (exact for one lamp type).
* **Upward exitance map** (:class:`UpwardLight`, :class:`UpwardExitanceMap`): the light the
  whole scene sends up, facades, roofs and objects included, measured where it leaves: on a
  horizontal plane :data:`UPWARD_PLANE_CLEARANCE_M` above the scene's highest surface, over the
  scene's horizontal bounds (the bounding box of every triangle the calculation sees: the
  street and roads from building line to building line and beyond, frontages, roofs, columns,
  the objects ``[calc] include_objects`` names) grown on every side by
  :data:`UPWARD_MAP_MARGIN_HEIGHTS` times the plane's height above the scene's lowest surface,
  in square cells of :data:`UPWARD_MAP_CELL_M` (coarser when that would need more than
  :data:`UPWARD_MAP_MAX_CELLS` cells). From every cell
  :data:`UPWARD_MAP_RAYS_PER_CELL` rays go down into the lower hemisphere, cosine-weighted and
  stratified, from stratified points of the cell
  (:class:`render.rays.cameras.DownwardHemisphereCamera`); the mean luminance L they find,
  times π, is the exitance through the cell, M = ∫ L cos θ dω, lm/m². The plane's samples are
  light buffers like a view's (:func:`render.light.integrator.render_buffers`: per sample and
  light channel, the surface's E/π and its specular layer), so every setup's lamps, lumens and
  dimming relight them without a ray, and a setup that changes a photometric distribution
  evaluates the light again at the same hits (as :meth:`render.study.Study.relight`). The
  total reflected upward flux is Σ M·A over the cells. Included: every lit surface seen from
  above, with its material's reflectance under the lamp (the colorimetric response tables) and
  its specular layer; the carriageway Lambertian (the r-tables describe a driver's view, not the
  sky's). Left out, and said so: the direct light of luminous openings seen from above (a
  sample that meets an opening counts as seeing nothing; the direct upward flux covers that
  light), and light leaving the scene's box sideways below the plane beyond the margin (out of
  the open ends of a street canyon, toward the horizon). With interreflection (``lampcast calc
  --bounces N``) the surfaces' interreflected light is added
  (:func:`render.light.indirect.trace_view` on the plane's samples, relit like a view's);
  without it, one reflection only.
* **Photometric reflectance** of a material under a lamp: ρ_v = Σ ρ(λ) s(λ) V(λ) / Σ s(λ) V(λ)
  (:func:`render.colour.materials.luminous_reflectance` with the lamp as illuminant).
* **Sky-glow weighting**: the upward lumens of each lamp times a per-lumen spectral weight,
  relative to the before setup. Two weightings, both stated as *indicators*, not a sky-glow model:
  Rayleigh scattering, w_R = V(λ₀)·Σ s (λ₀/λ)⁴ / Σ s V with λ₀ = 555 nm (so monochromatic 555 nm light
  weighs 1 per lumen; molecular scattering goes as λ⁻⁴), and the scotopic-to-photopic ratio,
  w_S = K'm Σ s V' / (Km Σ s V), the S/P ratio, for a dark-adapted observer's view of the sky.
* **Notch-filterable share**: what an ideal narrow notch filter on the lamp's strongest line
  could remove, as a share of the lamp's radiant power: the ``notch_fraction`` of
  :func:`render.colour.lamp_figures.lamp_figures` (its definition is there).

References
----------
- Upward light output ratio and sky glow: CIE 126:1997, "Guidelines for minimizing sky glow"
  **(from memory)**; CIE 150:2017, "Guide on the limitation of the effects of obtrusive light
  from outdoor lighting installations" **(from memory)**.
- Rayleigh scattering cross-section ∝ λ⁻⁴: Lord Rayleigh (1899), "On the transmission of light
  through an atmosphere containing small particles in suspension", *Phil. Mag.* 47; the use of a
  spectral weighting of lamp spectra for sky glow: Falchi et al. (2011), *J. Environ. Manage.*
  92, "Limiting the impact of light pollution on human health, environment and stellar
  visibility" **(from memory)**.
- CIE 1924 photopic V(λ), CIE 1951 scotopic V'(λ), Km = 683 lm/W, K'm = 1700 lm/W: CIE 018:2019
  via colour-science's tables (:mod:`render.colour.observers`).
- Luminous exitance M = ∫ L cos θ dω (a Lambertian surface: M = πL = ρE): CIE S 017:2020 (ILV)
  **(from memory)**; cosine-weighted hemisphere sampling (Malley's method): Pharr, Jakob &
  Humphreys, *Physically Based Rendering*, 3rd ed. (2016), §13.6.3.
- View factor of a tilted plane to the sky hemisphere, (1 + cos β)/2: standard radiative-transfer
  result (e.g. Howell, Siegel & Mengüç, *Thermal Radiation Heat Transfer*) **(from memory)**.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import asdict, dataclass
from typing import TYPE_CHECKING, Any

import numpy as np
import numpy.typing as npt

from render.colour.observers import photopic_lef, sp_ratio
from render.colour.spectra import WAVELENGTHS_NM
from render.light.photometry import intensity_cd, luminaire_rotation, world_to_c_gamma, zonal_flux_lm
from render.light.photometry.model import Photometry
from render.limits import MAX_PLAN_POINTS
from render.rays.cameras import DownwardHemisphereCamera
from render.scene.model import Street

if TYPE_CHECKING:
    from render.geometry.mesh import TriangleMesh
    from render.light.integrator import LightBuffers
    from render.light.luminaires import LuminaireSet
    from render.rays.bvh import BVH
    from render.scene.model import Setup
    from render.study import Study

__all__ = [
    "GROUND_SOURCE",
    "MAP_SOURCE",
    "RAYLEIGH_REFERENCE_NM",
    "UPWARD_MAP_CELL_M",
    "UPWARD_MAP_MARGIN_HEIGHTS",
    "UPWARD_MAP_MAX_CELLS",
    "UPWARD_MAP_RAYS_PER_CELL",
    "UPWARD_PLANE_CLEARANCE_M",
    "GroundPatches",
    "ground_patches",
    "SkyFigures",
    "SkyGlowRelative",
    "UpwardExitanceMap",
    "UpwardLight",
    "exitance_lm_m2",
    "upward_buffers",
    "upward_plane",
    "direct_upward_flux_lm",
    "notch_filterable_fraction",
    "rayleigh_weight_per_lm",
    "reflected_upward_flux_lm",
    "scotopic_weight_per_lm",
    "sky_figures",
    "sky_glow_relative",
    "upward_flux_lm",
]

#: Wavelength at which the Rayleigh weight per lumen of monochromatic light is 1, nm.
RAYLEIGH_REFERENCE_NM = 555.0
#: Cell of the upward exitance map, m (own choice: the plane lies several metres above the
#: street, where the exitance varies over metres, so finer cells resolve only noise).
UPWARD_MAP_CELL_M = 1.0
#: Rays per cell of the upward exitance map (own choice; the total averages over thousands of
#: cells: on the demo its spread over seeds is about 0.5 %, the same as with 16 rays).
UPWARD_MAP_RAYS_PER_CELL = 8
#: Most cells of the upward exitance map (own choice: 2 million rays at 8 per cell, a few
#: seconds of casting; a larger scene gets larger cells). Within :data:`MAX_PLAN_POINTS`.
UPWARD_MAP_MAX_CELLS = min(250_000, MAX_PLAN_POINTS)
#: Height of the measuring plane above the scene's highest surface, m (own choice).
UPWARD_PLANE_CLEARANCE_M = 0.05
#: Margin of the measuring plane beyond the scene's horizontal bounds, in heights of the plane
#: above the scene's lowest surface (own choice): light that leaves the scene's box through its
#: sides still crosses the plane where it rises at 45° or more from the box's lower edge. On the
#: demo (sodium setup, 4 rays per cell) the total grows 7 % from no margin to one height and
#: 4.6 % more to eight heights: the light left out goes toward the horizon.
UPWARD_MAP_MARGIN_HEIGHTS = 1.0
#: Where the upward total's reflected part comes from (``SkyFigures.reflected_upward_source``).
MAP_SOURCE = "upward exitance map"
GROUND_SOURCE = "ground patches"


def upward_flux_lm(photometry: Photometry, tilt_deg: float = 0.0, steps_per_degree: int = 4) -> float:
    """Flux, lm, the distribution sends above the horizontal when mounted with ``tilt_deg``.

    Untilted: the exact zonal flux Φ(γ 90°..180°). Tilted: the midpoint rule over the world's
    upper hemisphere with ``steps_per_degree`` cells per degree in zenith angle and azimuth."""
    if float(tilt_deg) == 0.0:
        return zonal_flux_lm(photometry, 90.0, 180.0)
    n_t = 90 * int(steps_per_degree)
    n_p = 360 * int(steps_per_degree)
    dt = math.pi / 2.0 / n_t
    dp = 2.0 * math.pi / n_p
    theta = (np.arange(n_t) + 0.5) * dt  # zenith angle, 0 = straight up
    phi = (np.arange(n_p) + 0.5) * dp
    st, ct = np.sin(theta)[:, None], np.cos(theta)[:, None]
    dirs = np.stack(np.broadcast_arrays(st * np.cos(phi)[None, :], st * np.sin(phi)[None, :], ct), axis=-1)
    c, g = world_to_c_gamma(dirs.reshape(-1, 3), luminaire_rotation(0.0, tilt_deg))
    cd = np.asarray(intensity_cd(photometry, c, g)).reshape(n_t, n_p)
    return float((cd * np.sin(theta)[:, None]).sum() * dt * dp)


def direct_upward_flux_lm(
    photometries: Sequence[Photometry],
    tilts_deg: Sequence[float] | None = None,
    output_factors: Sequence[float] | None = None,
) -> float:
    """Total direct upward flux, lm, of several luminaires: Σ factor_i · Φ↑(photometry_i, tilt_i)
    (``output_factors`` are dimming levels, 1 when not given)."""
    n = len(photometries)
    tilts = [0.0] * n if tilts_deg is None else list(tilts_deg)
    factors = [1.0] * n if output_factors is None else list(output_factors)
    if len(tilts) != n or len(factors) != n:
        raise ValueError("photometries, tilts_deg and output_factors must have the same length")
    cache: dict[tuple[int, float], float] = {}
    total = 0.0
    for p, t, f in zip(photometries, tilts, factors, strict=True):
        key = (id(p), float(t))
        if key not in cache:
            cache[key] = upward_flux_lm(p, t)
        total += float(f) * cache[key]
    return total


def reflected_upward_flux_lm(
    illuminance_lx: npt.ArrayLike,
    reflectance: npt.ArrayLike,
    area_m2: npt.ArrayLike,
    normal_z: npt.ArrayLike | None = None,
) -> float:
    """Flux, lm, matt patches reflect into the upper hemisphere: Σ ρ·E·A·(1 + n_z)/2
    (``normal_z`` 1, i.e. horizontal patches facing up, when not given)."""
    e = np.asarray(illuminance_lx, dtype=np.float64)
    rho = np.asarray(reflectance, dtype=np.float64)
    a = np.asarray(area_m2, dtype=np.float64)
    up = np.ones(1) if normal_z is None else (1.0 + np.clip(np.asarray(normal_z, dtype=np.float64), -1.0, 1.0)) / 2.0
    return float(np.sum(rho * e * a * up))


@dataclass(frozen=True)
class GroundPatches:
    """Horizontal patches of the street's ground: centres (n, 3), areas (n,) and the index of
    each patch's material in ``materials``."""

    points_m: np.ndarray
    area_m2: np.ndarray
    material_index: np.ndarray
    materials: tuple[str, ...]


def ground_patches(street: Street, spacing_m: float = 1.0) -> GroundPatches:
    """The street's ground in patches of about ``spacing_m`` (module text): the bands across
    the street as :mod:`render.geometry.build` lays them, each split into whole cells."""
    if not (math.isfinite(spacing_m) and spacing_m > 0):
        raise ValueError(f"patch spacing must be positive, got {spacing_m}")
    half = 0.5 * street.carriageway_width_m
    bands: list[tuple[float, float, float, str]] = [(-half, half, 0.0, street.carriageway_material)]
    for side in ("left", "right"):
        sign = 1.0 if side == "left" else -1.0
        s = street.side(side)
        y = half
        for width, material in (
            (street.kerb_width_m, street.kerb_material),
            (s.verge_width_m, s.verge_material),
            (s.footway_width_m, s.footway_material),
            (s.frontage_depth_m, s.frontage_material),
        ):
            if width > 0:
                y0, y1 = sorted((sign * y, sign * (y + width)))
                bands.append((y0, y1, street.kerb_height_m, material))
                y += width
    materials = tuple(dict.fromkeys(b[3] for b in bands))
    n_x = max(1, math.ceil(street.length_m / spacing_m))
    dx = street.length_m / n_x
    xs = dx * (np.arange(n_x) + 0.5)
    pts, areas, index = [], [], []
    for y0, y1, z, material in bands:
        n_y = max(1, math.ceil((y1 - y0) / spacing_m))
        dy = (y1 - y0) / n_y
        ys = y0 + dy * (np.arange(n_y) + 0.5)
        gx, gy = np.meshgrid(xs, ys, indexing="ij")
        pts.append(np.stack([gx.ravel(), gy.ravel(), np.full(gx.size, z)], axis=1))
        areas.append(np.full(gx.size, dx * dy))
        index.append(np.full(gx.size, materials.index(material), np.int64))
    return GroundPatches(np.concatenate(pts), np.concatenate(areas), np.concatenate(index), materials)


def rayleigh_weight_per_lm(spd: npt.ArrayLike) -> float:
    """Rayleigh-weighted power per photopic lumen, relative to monochromatic 555 nm light:
    V(λ₀)·Σ s (λ₀/λ)⁴ / Σ s V (Km and the bin width cancel; see the module docstring)."""
    s = np.asarray(spd, dtype=np.float64)
    w = (RAYLEIGH_REFERENCE_NM / WAVELENGTHS_NM) ** 4
    v0 = float(np.interp(RAYLEIGH_REFERENCE_NM, WAVELENGTHS_NM, photopic_lef()))
    return float(np.sum(s * w) / np.sum(s * photopic_lef()) * v0)


def scotopic_weight_per_lm(spd: npt.ArrayLike) -> float:
    """Scotopic lumens per photopic lumen (the S/P ratio, K'm Σ s V' / Km Σ s V)."""
    return float(sp_ratio(np.asarray(spd, dtype=np.float64)))


def notch_filterable_fraction(lamp) -> float:
    """Share of a :class:`render.colour.lamps.Lamp`'s radiant power an ideal notch filter on its
    strongest line could remove (``lamp_figures(lamp).notch_fraction``)."""
    from render.colour.lamp_figures import lamp_figures

    return float(lamp_figures(lamp).notch_fraction)


@dataclass(frozen=True)
class SkyFigures:
    """Light to the sky of one setup. Fluxes in lm; ``*_weighted_lm`` are upward lumens times the
    per-lumen weight of their lamp's spectrum (lm-equivalents of 555 nm light for Rayleigh,
    scotopic lm for scotopic); ``notch_fraction`` is flux-weighted over the lamps.

    ``reflected_upward_lm`` is the ground patches' figure, the ground's reflected light counted
    whole as if none of it met a facade (module text: in a street between houses it is above
    what leaves through the map's plane); ``reflected_upward_map_lm``, when computed, is the
    upward exitance map's total, facades, roofs and the calculation's objects included
    (:class:`UpwardExitanceMap`); ``reflected_upward_map_bounces`` the interreflections in it
    (0: one reflection). ``upward_lm`` (= direct + the reflected figure named by
    ``reflected_upward_source``), ``upward_lm_per_m`` and the weighted figures use the map's
    figure when it was computed, the ground's otherwise."""

    direct_upward_lm: float
    reflected_upward_lm: float
    upward_lm: float
    street_length_m: float
    upward_lm_per_m: float
    rayleigh_weighted_lm: float
    scotopic_weighted_lm: float
    notch_fraction: float | None
    reflected_upward_map_lm: float | None = None
    reflected_upward_map_bounces: int = 0
    reflected_upward_source: str = GROUND_SOURCE

    def to_json(self) -> dict[str, Any]:
        return asdict(self)


def sky_figures(
    direct_upward_lm: Sequence[float],
    reflected_upward_lm: Sequence[float],
    spds: Sequence[npt.ArrayLike],
    street_length_m: float,
    notch_fractions: Sequence[float] | None = None,
    reflected_upward_map_lm: float | None = None,
    reflected_upward_map_bounces: int = 0,
) -> SkyFigures:
    """The figures of one setup from per-lamp parts: ``direct_upward_lm[i]`` and
    ``reflected_upward_lm[i]`` (the ground patches' figure) are the upward lumens lit by lamp
    spectrum ``spds[i]`` (one entry per lamp type of the setup). With the upward exitance map's
    total ``reflected_upward_map_lm`` the totals and weighted figures take it in place of the
    ground's, split between the lamps as the ground's figure is (module text)."""
    if not (len(direct_upward_lm) == len(reflected_upward_lm) == len(spds)):
        raise ValueError("one direct flux, reflected flux and spectrum per lamp")
    if not (math.isfinite(street_length_m) and street_length_m > 0.0):
        raise ValueError("street_length_m must be positive")
    reflected = [float(r) for r in reflected_upward_lm]
    source = GROUND_SOURCE
    if reflected_upward_map_lm is not None:
        ground = sum(reflected)
        share = [r / ground for r in reflected] if ground > 0.0 else [1.0 / len(reflected)] * len(reflected)
        reflected = [float(reflected_upward_map_lm) * w for w in share]
        source = MAP_SOURCE
    parts = [float(d) + r for d, r in zip(direct_upward_lm, reflected, strict=True)]
    total = sum(parts)
    notch = None
    if notch_fractions is not None and total > 0.0:
        notch = sum(p * float(f) for p, f in zip(parts, notch_fractions, strict=True)) / total
    return SkyFigures(
        direct_upward_lm=float(sum(direct_upward_lm)),
        reflected_upward_lm=float(sum(reflected_upward_lm)),
        upward_lm=total,
        street_length_m=float(street_length_m),
        upward_lm_per_m=total / float(street_length_m),
        rayleigh_weighted_lm=sum(p * rayleigh_weight_per_lm(s) for p, s in zip(parts, spds, strict=True)),
        scotopic_weighted_lm=sum(p * scotopic_weight_per_lm(s) for p, s in zip(parts, spds, strict=True)),
        notch_fraction=notch,
        reflected_upward_map_lm=None if reflected_upward_map_lm is None else float(reflected_upward_map_lm),
        reflected_upward_map_bounces=int(reflected_upward_map_bounces),
        reflected_upward_source=source,
    )


@dataclass(frozen=True)
class SkyGlowRelative:
    """An option's upward light relative to the before setup (1 = the same; ``None`` when the
    before setup sends none up)."""

    upward: float | None
    rayleigh_weighted: float | None
    scotopic_weighted: float | None

    def to_json(self) -> dict[str, Any]:
        return asdict(self)


def sky_glow_relative(before: SkyFigures, option: SkyFigures) -> SkyGlowRelative:
    """Ratios option / before of the upward, Rayleigh-weighted and scotopic-weighted lumens."""

    def ratio(a: float, b: float) -> float | None:
        return a / b if b > 0.0 else None

    return SkyGlowRelative(
        upward=ratio(option.upward_lm, before.upward_lm),
        rayleigh_weighted=ratio(option.rayleigh_weighted_lm, before.rayleigh_weighted_lm),
        scotopic_weighted=ratio(option.scotopic_weighted_lm, before.scotopic_weighted_lm),
    )


# ------------------------------------------------------------------------------------------
# Upward exitance map (module text)
# ------------------------------------------------------------------------------------------


def upward_plane(
    triangles_m: npt.ArrayLike,
    cell_m: float = UPWARD_MAP_CELL_M,
    clearance_m: float = UPWARD_PLANE_CLEARANCE_M,
    max_cells: int = UPWARD_MAP_MAX_CELLS,
    margin_heights: float = UPWARD_MAP_MARGIN_HEIGHTS,
) -> DownwardHemisphereCamera:
    """The measuring plane over the horizontal bounds of ``triangles_m`` (F, 3, 3) grown on
    every side by ``margin_heights`` times the plane's height above the lowest vertex, in whole
    cells of ``cell_m`` centred on them (coarser when more than ``max_cells`` would be needed),
    ``clearance_m`` above the highest vertex."""
    if not (math.isfinite(cell_m) and cell_m > 0.0):
        raise ValueError(f"cell size must be positive, got {cell_m}")
    t = np.asarray(triangles_m, np.float64).reshape(-1, 3)
    if t.size == 0:
        raise ValueError("no surfaces to measure above")
    lo, hi = t.min(axis=0), t.max(axis=0)
    margin = float(margin_heights) * (float(hi[2] - lo[2]) + float(clearance_m))
    lo[:2] -= margin
    hi[:2] += margin
    size = np.maximum(hi[:2] - lo[:2], 1e-9)
    cell = float(cell_m)
    if float(np.prod(np.ceil(size / cell))) > max_cells:
        cell = max(cell, math.sqrt(float(np.prod(size)) / max_cells))
        while float(np.prod(np.ceil(size / cell))) > max_cells:
            cell *= 1.01
    n = np.maximum(1, np.ceil(size / cell - 1e-9)).astype(np.int64)
    origin = lo[:2] - (n * cell - size) / 2.0
    return DownwardHemisphereCamera(
        origin_xy_m=(float(origin[0]), float(origin[1])),
        plane_z_m=float(hi[2]) + float(clearance_m),
        cell_m=cell,
        width_px=int(n[0]),
        height_px=int(n[1]),
    )


def upward_buffers(
    mesh: TriangleMesh,
    bvh: BVH,
    lights: LuminaireSet,
    plane: DownwardHemisphereCamera,
    rays_per_cell: int,
    seed: int,
    *,
    negligible_lx: float | None = None,
) -> LightBuffers:
    """The plane's light buffers (:func:`render.light.integrator.render_buffers` with the
    plane as camera), with the samples that meet a luminous opening set to see nothing (their
    direct light is not reflected light; the module text)."""
    from render.light.integrator import NEGLIGIBLE_LX, render_buffers

    buffers = render_buffers(
        mesh,
        bvh,
        lights,
        plane,
        rays_per_cell,
        seed,
        negligible_lx=NEGLIGIBLE_LX if negligible_lx is None else negligible_lx,
    )
    opening = buffers.emitter >= 0
    buffers.response[opening] = -1
    buffers.emitter[opening] = -1
    buffers.value_cd_m2[opening] = 0.0
    if buffers.spec_cd_m2 is not None:
        buffers.spec_cd_m2[opening] = 0.0
    return buffers


def exitance_lm_m2(
    buffers: LightBuffers,
    factors: npt.ArrayLike,
    lamp_spds: Sequence[np.ndarray],
    reflectances: npt.ArrayLike,
) -> np.ndarray:
    """(H, W) float64 upward exitance through each cell, lm/m²: π times the cell's mean
    luminance (:func:`render.colour.colorimetry.resolve`, with the interreflected light where
    the buffers keep it), for per-channel ``factors`` and lamp spectra."""
    from render.colour.colorimetry import resolve

    luminance = resolve(buffers, factors, lamp_spds, reflectances).xyz_cd_m2[..., 1].astype(np.float64)
    if buffers.indirect is not None:
        from render.light.indirect import indirect_xyz

        luminance = luminance + indirect_xyz(buffers.indirect, buffers.response, factors, lamp_spds, reflectances)[
            ..., 1
        ].astype(np.float64)
    return math.pi * luminance


@dataclass(frozen=True)
class UpwardExitanceMap:
    """The upward exitance of one setup through the measuring plane (module text).

    ``exitance_lm_m2`` (H, W): row 0 the cells of largest y, column 0 those of smallest x;
    ``extent_m`` (x0, x1, y0, y1) of the plane, ``bounds_m`` those of the scene under it (the
    plane reaches beyond them by its margin); ``bounces`` the interreflections included (0: one
    reflection)."""

    setup: str | None
    exitance_lm_m2: np.ndarray
    extent_m: tuple[float, float, float, float]
    bounds_m: tuple[float, float, float, float]
    plane_z_m: float
    cell_m: float
    rays_per_cell: int
    bounces: int

    @property
    def cell_area_m2(self) -> float:
        return self.cell_m * self.cell_m

    @property
    def reflected_upward_lm(self) -> float:
        """Total reflected upward flux through the plane, Σ M·A, lm."""
        return float(self.exitance_lm_m2.sum() * self.cell_area_m2)

    @property
    def area_m2(self) -> float:
        return float(self.exitance_lm_m2.size * self.cell_area_m2)

    def to_json(self) -> dict[str, Any]:
        """The map's summary (the cells themselves are in the picture, not in the JSON)."""
        m = self.exitance_lm_m2
        return {
            "reflected_upward_lm": self.reflected_upward_lm,
            "mean_exitance_lm_m2": float(m.mean()),
            "max_exitance_lm_m2": float(m.max()),
            "extent_m": list(self.extent_m),
            "scene_bounds_m": list(self.bounds_m),
            "plane_z_m": self.plane_z_m,
            "cell_m": self.cell_m,
            "cells": [int(m.shape[1]), int(m.shape[0])],
            "rays_per_cell": self.rays_per_cell,
            "bounces": self.bounces,
        }


class UpwardLight:
    """The measuring plane over ``study``'s scene cast once (under ``setup``'s lights) and
    relit for any setup: :meth:`exitance` (module text). ``bounces`` > 0 adds interreflected
    light traced with the scene's ``indirect_samples_per_pixel`` paths per cell."""

    def __init__(
        self,
        study: Study,
        setup: str | Setup | None = None,
        *,
        cell_m: float = UPWARD_MAP_CELL_M,
        rays_per_cell: int = UPWARD_MAP_RAYS_PER_CELL,
        seed: int | None = None,
        bounces: int = 0,
    ) -> None:
        self.study = study
        self.rays_per_cell = int(rays_per_cell)
        self.seed = study.scene.render.seed if seed is None else int(seed)
        self.bounces = int(bounces)
        triangles = study.mesh.triangles_m
        self.plane = upward_plane(triangles, cell_m)
        lo, hi = triangles.reshape(-1, 3).min(axis=0), triangles.reshape(-1, 3).max(axis=0)
        self.bounds_m = (float(lo[0]), float(hi[0]), float(lo[1]), float(hi[1]))
        self.lights = study.lights(setup)
        self.buffers = upward_buffers(
            study.mesh,
            study.bvh,
            self.lights,
            self.plane,
            self.rays_per_cell,
            self.seed,
            negligible_lx=study.negligible_lx,
        )
        self._trace(self.buffers, self.lights)

    def _trace(self, buffers: LightBuffers, lights: LuminaireSet) -> None:
        if self.bounces <= 0:
            return
        from render.light.indirect import IndirectSettings, trace_view

        settings = IndirectSettings(
            bounces=self.bounces, samples_per_pixel=self.study.scene.render.indirect_samples_per_pixel
        )
        study = self.study
        buffers.indirect = trace_view(
            buffers, lights, study.bvh, study.reflectances, settings, self.seed, negligible_lx=study.negligible_lx
        )

    def exitance(self, setup: str | Setup | None = None) -> UpwardExitanceMap:
        """The map under ``setup``: lamps, lumens and dimming applied to the kept buffers; a
        changed photometric distribution evaluated again at the same hits."""
        from render.light.integrator import LightBuffers, evaluate_light
        from render.light.luminaires import channel_factors, needs_new_evaluation

        study = self.study
        s = study.setup(setup)
        lights, buffers = self.lights, self.buffers
        if needs_new_evaluation(lights, s):
            lights = study.lights(s)
            buffers = LightBuffers(**{**self.buffers.__dict__})
            buffers.indirect = None
            evaluate_light(buffers, lights, study.bvh, negligible_lx=study.negligible_lx)
            self._trace(buffers, lights)
        factors, lamps = channel_factors(lights, s)
        m = exitance_lm_m2(buffers, factors, study.lamp_spds(lamps), study.reflectances)
        p = self.plane
        return UpwardExitanceMap(
            setup=s.name if s is not None else None,
            exitance_lm_m2=m,
            extent_m=p.extent_m,
            bounds_m=self.bounds_m,
            plane_z_m=p.plane_z_m,
            cell_m=p.cell_m,
            rays_per_cell=self.rays_per_cell,
            bounces=self.bounces,
        )
