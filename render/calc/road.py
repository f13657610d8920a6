"""Road luminance: r-tables and the luminance seen by the standard observer.

**r-table files.** The reduced luminance coefficient r(β, tan γ) of a road surface is the
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

**Road luminance** (:func:`road_luminance_cd_m2`) at points of the road is
L = Σ_k r(β_k, tan γ_k)·I_k/h_k² over the luminaires above the point, with I_k the intensity
toward the point (the setup's lumens, dimming and maintenance factor) and h_k the mounting
height above the point. The observer enters only through β (the fixed 1° viewing angle of the
r-table convention). Shadows are ignored for road luminance, as in the standard calculation.
Without an r-table the result is the Lambertian one, L = ρ·E/π with E the horizontal
illuminance (``model = "lambertian"`` in the result, labelled as such).

:func:`evaluate_luminance_field` places the standard observer 1.5 m above the road, 60 m
before the field's start (looking along +x), at the centre of each lane in turn, and gives for
each position the luminance over all the lanes' points, L̄, Lmin, U0 = Lmin/L̄, and the
longitudinal uniformity Ul = Lmin/Lmax along the centre line of the observer's lane (the
middle row of three points across the lane).

References
----------
* CIE 140-2000 *Road lighting calculations* and EN 13201-3:2015: L = Σ r·I/h², the r-table
  layout (β 0–180°, tan γ 0–12, values × 10⁴), Q0, the observer 1.5 m high and 60 m before the
  field at each lane's centre, U0 and Ul. *memory*.
* r = q·cos³γ and the Lambertian r = (ρ/π)·cos³γ: derived from L = q·E, E = I·cos³γ/h²
  (*own*).
"""

from __future__ import annotations

import math
import os
from dataclasses import dataclass
from typing import Any

import numpy as np

from render.calc.fields import CalculationField
from render.errors import input_error
from render.fileio import read_user_text
from render.light.luminaires import LuminaireSet, channel_factors
from render.light.photometry import intensity_cd, world_to_c_gamma
from render.scene.model import Setup

__all__ = [
    "OBSERVER_DISTANCE_M",
    "OBSERVER_HEIGHT_M",
    "LuminanceResult",
    "RTable",
    "evaluate_luminance_field",
    "lambertian_r_table",
    "lane_observer_m",
    "luminaire_intensities_cd",
    "parse_r_table",
    "r_value",
    "read_r_table",
    "road_luminance_cd_m2",
]

#: Eye height of the standard observer above the road, m (CIE 140 / EN 13201-3, memory).
OBSERVER_HEIGHT_M = 1.5
#: Distance of the standard observer before the field's start, m (CIE 140 / EN 13201-3, memory).
OBSERVER_DISTANCE_M = 60.0


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


def luminaire_intensities_cd(lights: LuminaireSet, points_m: np.ndarray, setup: Setup | None = None) -> np.ndarray:
    """(L, N) intensity, cd, of each luminaire toward each point, under ``setup`` (lumens,
    dimming and maintenance factor applied; no shadows)."""
    pts = np.asarray(points_m, dtype=np.float64).reshape(-1, 3)
    factors, _ = channel_factors(lights, setup)
    out = np.zeros((lights.n_luminaires, len(pts)))
    for k in range(lights.n_luminaires):
        c, g = world_to_c_gamma(pts - lights.position_m[k], lights.rotation[k])
        photometry = lights.photometries[int(lights.table[k])]
        scale = float(lights.scale[k]) * float(factors[int(lights.channel[k])])
        out[k] = np.asarray(intensity_cd(photometry, c, g)).reshape(-1) * scale
    return out


def road_luminance_cd_m2(
    lights: LuminaireSet,
    points_m: np.ndarray,
    observer_m: np.ndarray,
    setup: Setup | None = None,
    r_table: RTable | None = None,
    reflectance: float | None = None,
    road_q0_sr: float | None = None,
) -> np.ndarray:
    """Luminance (cd/m²) of the road at ``points_m`` (N, 3) seen from ``observer_m`` (3,).

    With ``r_table``: L = Σ r(β, tan γ)·I/h² (scaled by ``road_q0_sr``/Q0 of the table when
    ``road_q0_sr`` is given). Without: the Lambertian L = ρ·E/π with ``reflectance`` ρ.
    Luminaires at or below a point's height add nothing; shadows are ignored."""
    pts = np.asarray(points_m, dtype=np.float64).reshape(-1, 3)
    eye = np.asarray(observer_m, dtype=np.float64)
    intensity = luminaire_intensities_cd(lights, pts, setup)
    h = lights.position_m[:, 2:3] - pts[None, :, 2]  # (L, N)
    dx = lights.position_m[:, 0:1] - pts[None, :, 0]
    dy = lights.position_m[:, 1:2] - pts[None, :, 1]
    horizontal = np.hypot(dx, dy)
    above = h > 1e-9
    h_safe = np.where(above, h, 1.0)
    tan_g = horizontal / h_safe
    if r_table is None:
        if reflectance is None:
            raise ValueError("road luminance needs an r-table or a reflectance")
        cos3 = (1.0 / np.sqrt(1.0 + tan_g * tan_g)) ** 3
        r = reflectance / math.pi * cos3
    else:
        vx = pts[:, 0] - eye[0]
        vy = pts[:, 1] - eye[1]
        view = np.arctan2(vy, vx)[None, :]
        incidence = np.arctan2(dy, dx)
        beta = np.degrees(incidence - view)
        beta = np.where(horizontal > 1e-9, beta, 0.0)
        r = r_value(r_table, beta, tan_g)
        if road_q0_sr is not None:
            if r_table.q0_sr is None:
                raise input_error(
                    r_table.source, "q0", "the r-table gives no Q0, so it cannot be scaled to the road's Q0"
                )
            r = r * (road_q0_sr / r_table.q0_sr)
    contributions = np.where(above, r * intensity / (h_safe * h_safe), 0.0)
    return contributions.sum(axis=0)


@dataclass(frozen=True)
class LuminanceResult:
    """Road luminance over a carriageway's lane fields seen from one observer position."""

    observer_lane: str
    observer_m: tuple[float, float, float]
    model: str  # "r-table" or "lambertian"
    luminance_cd_m2: dict[str, np.ndarray]  # lane name -> (along, across)
    mean_cd_m2: float
    min_cd_m2: float
    u0: float  # Lmin / L̄ over all lanes (0 when L̄ is 0)
    ul: float  # Lmin / Lmax along the observer's lane centre line (0 when Lmax is 0)

    def to_json(self) -> dict[str, Any]:
        """The result as plain JSON types."""
        return {
            "observer_lane": self.observer_lane,
            "observer_m": list(self.observer_m),
            "model": self.model,
            "luminance_cd_m2": {k: v.tolist() for k, v in self.luminance_cd_m2.items()},
            "mean_cd_m2": self.mean_cd_m2,
            "min_cd_m2": self.min_cd_m2,
            "u0": self.u0,
            "ul": self.ul,
        }


def lane_observer_m(lane: CalculationField) -> np.ndarray:
    """The standard observer for a lane field: at the lane's centre, 1.5 m above the road,
    60 m before the field's start (the first grid row is D/2 after the start)."""
    pts = lane.points_m
    x0 = float(pts[:, 0].min()) - lane.spacing_m[0] / 2.0
    return np.array([x0 - OBSERVER_DISTANCE_M, float(pts[:, 1].mean()), float(pts[:, 2].mean()) + OBSERVER_HEIGHT_M])


def evaluate_luminance_field(
    lights: LuminaireSet,
    lanes: list[CalculationField],
    setup: Setup | None = None,
    r_table: RTable | None = None,
    reflectance: float | None = None,
    road_q0_sr: float | None = None,
) -> list[LuminanceResult]:
    """Road luminance over the lane fields of one carriageway field, one result per observer
    position (the standard observer at the centre of each lane in turn)."""
    model = "lambertian" if r_table is None else "r-table"
    results = []
    for lane in lanes:
        eye = lane_observer_m(lane)
        grids = {
            other.name: road_luminance_cd_m2(
                lights, other.points_m, eye, setup, r_table, reflectance, road_q0_sr
            ).reshape(other.shape)
            for other in lanes
        }
        values = np.concatenate([g.ravel() for g in grids.values()])
        mean = float(values.mean())
        lmin = float(values.min())
        centre = grids[lane.name][:, lane.shape[1] // 2]
        lmax_centre = float(centre.max())
        results.append(
            LuminanceResult(
                observer_lane=lane.name,
                observer_m=(float(eye[0]), float(eye[1]), float(eye[2])),
                model=model,
                luminance_cd_m2=grids,
                mean_cd_m2=mean,
                min_cd_m2=lmin,
                u0=lmin / mean if mean > 0 else 0.0,
                ul=float(centre.min()) / lmax_centre if lmax_centre > 0 else 0.0,
            )
        )
    return results
