"""Road reflection tables (r-tables): lampcast's CSV layout, parsing and interpolation.

The reduced luminance coefficient r(β, tan γ) of a road surface is the
luminance coefficient q (L = q·E) times cos³γ, so that the luminance a point source of
intensity I (toward the point) at height h above the road gives is L = r·I/h². For a
Lambertian (matt) surface of reflectance ρ, q = ρ/π and r = (ρ/π)·cos³γ. lampcast reads
r-tables from a CSV file of its own layout (no standard table is shipped: they are not openly
published; the user supplies one):

* lines starting with ``#`` and blank lines are ignored; fields are separated by commas;
* ``scale,VALUE`` (required): the factor that turns the table's numbers into r in sr⁻¹, e.g.
  ``scale,0.0001`` for the usual layout of values × 10⁴;
* ``q0,VALUE`` (optional): the average luminance coefficient Q0 (sr⁻¹) of the surface the
  table describes; when given, a road's own Q0 may be asked for and the table is scaled by
  Q0(road)/Q0(table);
* one header row ``tan_gamma,β1,β2,…`` with the β angles in degrees (increasing, 0 to 180);
* then one row per tan γ (increasing, ≥ 0): ``tan γ,r(β1),r(β2),…``, finite and non-negative.

r is interpolated bilinearly in β and tan γ; β is folded into 0–180° (the tables assume a
surface symmetric about the plane of observation); beyond the last tan γ row r is 0 (the
standard layout ends at tan γ = 12, where r is negligible). Angles, as in CIE 140 (*memory*):
γ is the angle of incidence at the point (from the vertical), β the angle between the vertical
plane of observation and the vertical plane of incidence, here the angle between the horizontal
direction of view (observer → point) and the horizontal direction point → luminaire, so that
β = 0 for a luminaire beyond the point and β = 180° for one behind the observer. With the
luminaire straight above the point (tan γ = 0) β is taken as 0.

The table is photometric (one number per geometry, no spectrum). It serves the road-luminance
calculation (:mod:`render.calc.road`) and, where the scene asks, the carriageway's reflection in
images (:mod:`render.light.integrator`).

**In images.** With ``street.r_table`` set, views chosen by ``street.r_table_views`` ("driver":
views of kind driver, the default; "all"; "none") shade the street builder's carriageway
triangles (``mesh.carriageway_object``; not other surfaces of the same material) with the
table's BRDF instead of Lambert's; each road (``[[roads]]``) does the same for its own
carriageway (its junction mouths included) with its own ``r_table``, ``q0_sr`` and
``r_table_views`` (:func:`view_road_shading`; the carriageways are found through
``mesh.carriageway_of``, and each distinct table is one pass of the light kernel): per
luminaire, L = q·E with q = r(β, tan γ)/cos³γ, β from the horizontal direction of the camera ray (observer → point) to the horizontal direction
point → luminaire, γ from the vertical, r scaled by Q0(road)/Q0(table) when ``q0_sr`` is
given. :func:`r_lookup` interpolates inside the numba kernel exactly as :func:`r_value` does
for the calculation, so a driver's image and the road-luminance figures agree. The table is
applied whatever the viewing angle; it is measured for an observer looking down about 1°, so
for views from higher up ("all") it is an extrapolation.

*Spectrum.* The table has no spectrum, the material has: the image uses
q_λ = q·ρ(λ)/ρ̄ with ρ(λ) the carriageway material's reflectance and ρ̄ = Σ ρ V / Σ V its
equal-energy luminous reflectance. The light buffers then keep E·q/ρ̄ per light channel (no
lamp in it) and the response table multiplies by ρ(λ) and the lamp as for any surface, so
relighting for another lamp, lumens or dimming costs what it did. The consequence: the image's
luminance is q·E_v·ρ_v(lamp)/ρ̄, with ρ_v(lamp) = Σ ρ s V / Σ s V the material's luminous
reflectance under the lamp; it equals the table's q·E exactly for a spectrally flat road and
is off by the factor ρ_v(lamp)/ρ̄ otherwise (the calculation, :mod:`render.calc.road`, uses
q·E). Measured for the bundled asphalts (2026-12-02), ρ̄ and the factor under low-pressure
sodium / high-pressure sodium (CIE HP1) / LED 3000 K (CIE B2) / LED 4000 K (CIE B3):

=================  =====  =====  =====  =====  =====
material           ρ̄      SOX    HP1    B2     B3
=================  =====  =====  =====  =====  =====
asphalt-new        0.057  1.035  1.029  1.013  1.006
asphalt-worn       0.122  1.063  1.053  1.023  1.011
asphalt-weathered  0.083  1.050  1.042  1.018  1.009
asphalt-car-park   0.071  1.046  1.039  1.017  1.007
=================  =====  =====  =====  =====  =====

so images of these reddish-grey asphalts are 1–6 % brighter than the table says, most under
sodium light.

*Wet roads.* r-tables of wet surfaces are separate tables; lampcast applies the one table as
the *dry* base: with ``street.wet`` the water film's specular layer (:mod:`render.light.gloss`)
stays on top and the base under it receives E·(1 − F), as a Lambertian base does.

References
----------
* CIE 140-2000 *Road lighting calculations* and EN 13201-3:2015: the r-table layout (β 0–180°,
  tan γ 0–12, values × 10⁴) and Q0. *memory*.
* r = q·cos³γ and the Lambertian r = (ρ/π)·cos³γ: derived from L = q·E, E = I·cos³γ/h²
  (*own*).
* The spectral rule q_λ = q·ρ(λ)/ρ̄ and the dry-base rule for wet roads are lampcast's own
  choices (*own*), made so that relighting needs no new light evaluation.
"""

from __future__ import annotations

import math
import os
from dataclasses import dataclass, replace
from pathlib import Path
from typing import TYPE_CHECKING

import numba
import numpy as np

from render.errors import input_error
from render.fileio import is_inside, read_user_text
from render.threads import run_split

if TYPE_CHECKING:
    from render.geometry.mesh import TriangleMesh
    from render.scene.model import Scene, Street, View

__all__ = [
    "R_TABLE_VIEWS",
    "RTable",
    "RoadShading",
    "lambertian_r_table",
    "parse_r_table",
    "r_lookup",
    "r_table_applies",
    "r_value",
    "read_r_table",
    "road_q_one",
    "road_q_sr",
    "view_road_shading",
]

#: The values of ``street.r_table_views``: which views' images shade the carriageway with the
#: r-table (none; views of kind "driver"; every view).
R_TABLE_VIEWS = ("none", "driver", "all")
# Pairs per work item of the q kernel.
_ITEM = 1024


@dataclass(frozen=True)
class RTable:
    """Reduced luminance coefficients r (sr⁻¹), shape (tan γ rows, β columns)."""

    beta_deg: np.ndarray
    tan_gamma: np.ndarray
    r_sr: np.ndarray
    q0_sr: float | None = None
    source: str = "<r-table>"


def _number(text: str, source: str, line: int, what: str) -> float:
    try:
        value = float(text)
    except ValueError:
        raise input_error(source, f"line {line}", f"{what} must be a number, got {text.strip()[:20]!r}") from None
    if not math.isfinite(value) or value < 0.0:
        raise input_error(source, f"line {line}", f"{what} must be finite and not negative, got {text.strip()[:20]}")
    return value


def parse_r_table(text: str, source: str = "<r-table>") -> RTable:
    """An :class:`RTable` from the text of an r-table file (the layout in the module text).

    Raises
    ------
    InputError
        Naming the line of the first problem."""
    scale = None
    q0 = None
    betas: list[float] | None = None
    rows: list[float] = []
    values: list[list[float]] = []
    last_line = 0
    for number, raw in enumerate(text.splitlines(), start=1):
        last_line = number
        line = raw.strip()
        if not line or line.startswith("#"):
            continue
        fields = [f.strip() for f in line.split(",")]
        key = fields[0].lower()
        if betas is None and key in ("scale", "q0"):
            if len(fields) != 2:
                raise input_error(source, f"line {number}", f"expected '{key},VALUE'")
            value = _number(fields[1], source, number, key)
            if value == 0.0:
                raise input_error(source, f"line {number}", f"{key} must be greater than 0")
            if key == "scale":
                scale = value
            else:
                q0 = value
            continue
        if betas is None:
            if key != "tan_gamma":
                raise input_error(
                    source, f"line {number}", "expected 'scale,VALUE', 'q0,VALUE' or the header row 'tan_gamma,β…'"
                )
            betas = [_number(f, source, number, "β (degrees)") for f in fields[1:]]
            if len(betas) < 2 or any(b > 180.0 for b in betas) or any(b1 <= b0 for b0, b1 in zip(betas, betas[1:])):
                raise input_error(
                    source, f"line {number}", "β must be two or more increasing angles from 0 to 180 degrees"
                )
            continue
        if len(fields) != len(betas) + 1:
            raise input_error(
                source, f"line {number}", f"expected tan γ and {len(betas)} values, got {len(fields)} fields"
            )
        t = _number(fields[0], source, number, "tan γ")
        if rows and t <= rows[-1]:
            raise input_error(source, f"line {number}", "tan γ must increase from row to row")
        rows.append(t)
        values.append([_number(f, source, number, "r") for f in fields[1:]])
    if scale is None:
        raise input_error(source, f"line {last_line}", "no 'scale,VALUE' line (e.g. scale,0.0001 for values × 10⁴)")
    if betas is None or len(rows) < 2:
        raise input_error(source, f"line {last_line}", "expected a header row 'tan_gamma,β…' and two or more rows of r")
    return RTable(
        beta_deg=np.array(betas),
        tan_gamma=np.array(rows),
        r_sr=np.array(values) * scale,
        q0_sr=q0,
        source=source,
    )


def read_r_table(path: str | os.PathLike) -> RTable:
    """Read an r-table file (UTF-8 CSV, the layout in the module text)."""
    text = read_user_text(path, "r-table file", "an r-table CSV")
    return parse_r_table(text, os.fspath(path))


def lambertian_r_table(reflectance: float, tan_gamma: np.ndarray, beta_deg: np.ndarray) -> RTable:
    """The r-table of a matt surface, r = (ρ/π)·cos³γ, on the given grid (for comparisons)."""
    t = np.asarray(tan_gamma, dtype=np.float64)
    cos3 = (1.0 / np.sqrt(1.0 + t * t)) ** 3
    r = np.repeat((reflectance / math.pi * cos3)[:, None], len(beta_deg), axis=1)
    return RTable(beta_deg=np.asarray(beta_deg, dtype=np.float64), tan_gamma=t, r_sr=r, source="lambertian")


def _interp_index(grid: np.ndarray, x: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    i = np.clip(np.searchsorted(grid, x, side="right") - 1, 0, len(grid) - 2)
    u = np.clip((x - grid[i]) / (grid[i + 1] - grid[i]), 0.0, 1.0)
    return i, u


def r_value(table: RTable, beta_deg: np.ndarray, tan_gamma: np.ndarray) -> np.ndarray:
    """r (sr⁻¹) at (β, tan γ) by bilinear interpolation; β folded into 0–180°, 0 beyond the
    last tan γ row, β outside the table's range held at its first or last column."""
    b = np.abs((np.asarray(beta_deg, dtype=np.float64) + 180.0) % 360.0 - 180.0)
    t = np.asarray(tan_gamma, dtype=np.float64)
    b, t = np.broadcast_arrays(b, t)
    i, u = _interp_index(table.beta_deg, b)
    j, v = _interp_index(table.tan_gamma, t)
    r = table.r_sr
    out = (1 - v) * ((1 - u) * r[j, i] + u * r[j, i + 1]) + v * ((1 - u) * r[j + 1, i] + u * r[j + 1, i + 1])
    return np.where(t > table.tan_gamma[-1] + 1e-12, 0.0, out)


# ------------------------------------------------------------------------------------------
# The r-table as the carriageway's BRDF in images
# ------------------------------------------------------------------------------------------


@numba.njit(cache=True, nogil=True)
def _grid_index(grid, x):
    """The cell ``i`` (0 … n − 2) and the fraction ``u`` (clipped to 0 … 1) of ``x`` on an
    increasing grid: :func:`_interp_index` for one value."""
    lo = 0
    hi = grid.shape[0]
    while lo < hi:  # the number of grid values <= x (numpy's searchsorted, side "right")
        mid = (lo + hi) // 2
        if grid[mid] <= x:
            lo = mid + 1
        else:
            hi = mid
    i = min(max(lo - 1, 0), grid.shape[0] - 2)
    u = (x - grid[i]) / (grid[i + 1] - grid[i])
    return i, min(max(u, 0.0), 1.0)


@numba.njit(cache=True, nogil=True)
def r_lookup(beta_grid, tan_grid, r_sr, beta_deg, tan_gamma):
    """r (sr⁻¹) at one (β, tan γ): :func:`r_value` inside numba kernels (same folding of β,
    bilinear interpolation, β held at the table's first or last column, 0 beyond the last
    tan γ row)."""
    if tan_gamma > tan_grid[tan_grid.shape[0] - 1] + 1e-12:
        return 0.0
    b = abs((beta_deg + 180.0) % 360.0 - 180.0)
    i, u = _grid_index(beta_grid, b)
    j, v = _grid_index(tan_grid, tan_gamma)
    return (1 - v) * ((1 - u) * r_sr[j, i] + u * r_sr[j, i + 1]) + v * (
        (1 - u) * r_sr[j + 1, i] + u * r_sr[j + 1, i + 1]
    )


@numba.njit(cache=True, nogil=True)
def road_q_one(view_x, view_y, lx, ly, lz, beta_grid, tan_grid, r_sr, scale):
    """q = scale·r(β, tan γ)/cos³γ (sr⁻¹) for one horizontal view direction (view_x, view_y)
    (observer → point) and one unit vector (lx, ly, lz) from the point toward the luminaire:
    :func:`road_q_sr` inside numba kernels."""
    if lz <= 0.0:  # a luminaire at or below the surface's height adds nothing
        return 0.0
    horizontal = math.sqrt(lx * lx + ly * ly)
    # β: from the horizontal direction observer → point to the horizontal direction
    # point → luminaire; 0 with the luminaire straight above the point.
    beta = 0.0
    if horizontal > 1e-12:
        beta = math.degrees(math.atan2(ly, lx) - math.atan2(view_y, view_x))
    r = r_lookup(beta_grid, tan_grid, r_sr, beta, horizontal / lz)
    # cos γ = lz for a unit vector; q = r / cos³γ.
    return scale * r / (lz * lz * lz)


@numba.njit(cache=True, nogil=True)
def _road_q_kernel(view_dir, to_light, beta_grid, tan_grid, r_sr, scale, out, first, stride):
    """:func:`road_q_one` per (view direction, direction toward the luminaire) pair, for the
    pairs of items ``first, first + stride, ...`` of :data:`_ITEM` (:func:`render.threads.run_split`)."""
    n = out.shape[0]
    for item in range(first, (n + _ITEM - 1) // _ITEM, stride):
        for m in range(item * _ITEM, min(n, (item + 1) * _ITEM)):
            out[m] = road_q_one(
                view_dir[m, 0],
                view_dir[m, 1],
                to_light[m, 0],
                to_light[m, 1],
                to_light[m, 2],
                beta_grid,
                tan_grid,
                r_sr,
                scale,
            )


def road_q_sr(table: RTable, view_dir: np.ndarray, to_light: np.ndarray, scale: float = 1.0) -> np.ndarray:
    """Luminance coefficients q = scale·r(β, tan γ)/cos³γ (sr⁻¹) of a horizontal road surface.

    ``view_dir`` (M, 3): directions from the observer toward the points (only their horizontal
    part counts); ``to_light`` (M, 3): unit vectors from the points toward the luminaires. γ is
    measured from the vertical, β as in the module text. L = q·E with E the horizontal
    illuminance from that luminaire."""
    v = np.ascontiguousarray(view_dir, np.float64).reshape(-1, 3)
    lv = np.ascontiguousarray(to_light, np.float64).reshape(-1, 3)
    out = np.zeros(lv.shape[0])
    if out.size:
        run_split(
            _road_q_kernel,
            (out.shape[0] + _ITEM - 1) // _ITEM,
            v,
            lv,
            np.ascontiguousarray(table.beta_deg, np.float64),
            np.ascontiguousarray(table.tan_gamma, np.float64),
            np.ascontiguousarray(table.r_sr, np.float64),
            float(scale),
            out,
        )
    return out


@dataclass(frozen=True)
class RoadShading:
    """The carriageways of one view shaded with an r-table (see the module text).

    ``object_id``: a carriageway's object index in the compiled mesh (only the triangles of the
    carriageways in ``object_ids`` use the table); ``q_scale``: Q0(road)/Q0(table), 1 when the
    scene gives no ``q0_sr``; ``mean_reflectance``: ρ̄ = Σ ρ V / Σ V of the carriageway
    material. ``more``: the shading of other carriageways of the view with another table, Q0
    or material (roads each naming their own), one :class:`RoadShading` each."""

    table: RTable
    object_id: int
    q_scale: float
    mean_reflectance: float
    #: Every carriageway object this table shades (empty: ``object_id`` alone).
    object_ids: tuple[int, ...] = ()
    more: tuple[RoadShading, ...] = ()

    @property
    def shaded_objects(self) -> tuple[int, ...]:
        """The object indices this table shades."""
        return self.object_ids or (self.object_id,)

    @property
    def groups(self) -> tuple[RoadShading, ...]:
        """This shading and the others of ``more``, one per table (each with no ``more``)."""
        return (self, *self.more)

    def diffuse_factor(self, q_sr: np.ndarray) -> np.ndarray:
        """The factor that turns the white-diffuser value E/π into the value the light buffers
        keep for the carriageway, E·q/ρ̄ (the response table then multiplies by ρ(λ))."""
        if not self.mean_reflectance > 0.0:
            return np.zeros_like(q_sr)
        return q_sr * self.value_factor

    @property
    def value_factor(self) -> float:
        """π/ρ̄, the factor on q in :meth:`diffuse_factor` (0 for a black carriageway)."""
        return math.pi / self.mean_reflectance if self.mean_reflectance > 0.0 else 0.0


def r_table_applies(r_table_views: str, view_kind: str) -> bool:
    """Whether a view of kind ``view_kind`` uses the r-table under ``r_table_views``."""
    return r_table_views == "all" or (r_table_views == "driver" and view_kind == "driver")


def _carriageways(scene: Scene, mesh: TriangleMesh) -> list[tuple[str, Street, int]]:
    """(key path, cross-section, carriageway object index) of the street and every road."""
    where_of = dict(getattr(mesh, "carriageway_of", {}) or {})
    out = []
    if scene.street is not None:
        out.append(("street", scene.street, where_of.get("street", int(getattr(mesh, "carriageway_object", -1)))))
    for road in scene.roads:
        out.append((road.where, road.section, where_of.get(road.where, -1)))
    return out


def view_road_shading(scene: Scene, view: View, mesh: TriangleMesh, reflectances: np.ndarray) -> RoadShading | None:
    """The r-table shading of ``view``'s carriageways, or None: the ``[street]``'s and each
    road's carriageway whose ``r_table`` is set and whose ``r_table_views`` take the view.
    Carriageways with the same table file, Q0 and material share one group (one kernel pass).

    ``reflectances`` (K, N_BINS): the reflectance of each material index of ``mesh``.

    Raises
    ------
    InputError
        The table cannot be read, lies outside the scene's folder under strict paths, or gives
        no Q0 while the scene asks for ``q0_sr`` (naming ``street.…`` or ``roads[i].…``)."""
    from render.colour.materials import luminous_reflectance

    groups: dict[tuple, list] = {}
    for where, section, object_id in _carriageways(scene, mesh):
        if section.r_table_file is None or not r_table_applies(section.r_table_views, view.kind) or object_id < 0:
            continue
        on_road = np.nonzero(mesh.object_id == object_id)[0]
        if on_road.size == 0:
            continue
        path = Path(section.r_table_file)
        root = scene.reference_root
        if root is not None and not is_inside(path, root):
            raise input_error(
                scene.path,
                f"{where}.r_table",
                f"the r-table file is outside {Path(root).resolve()}; with strict paths only files inside that folder are read",
            )
        table = read_r_table(path)
        q_scale = 1.0
        if section.q0_sr is not None:
            if table.q0_sr is None:
                raise input_error(
                    scene.path,
                    f"{where}.q0_sr",
                    f"the r-table {path.name} gives no Q0 (a 'q0,VALUE' line), so it cannot be scaled to the road's Q0",
                )
            q_scale = float(section.q0_sr) / table.q0_sr
        material = int(mesh.material_id[on_road[0]])
        key = (str(path), q_scale, material)
        if key not in groups:
            rho = np.asarray(reflectances, np.float64)[material]
            groups[key] = [table, q_scale, float(luminous_reflectance(rho, np.ones_like(rho))), []]
        groups[key][3].append(object_id)
    shadings = [
        RoadShading(
            table=t, object_id=ids[0], q_scale=q, mean_reflectance=m, object_ids=tuple(ids) if len(ids) > 1 else ()
        )
        for t, q, m, ids in groups.values()
    ]
    if not shadings:
        return None
    return replace(shadings[0], more=tuple(shadings[1:]))
