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

References
----------
* CIE 140-2000 *Road lighting calculations* and EN 13201-3:2015: the r-table layout (β 0–180°,
  tan γ 0–12, values × 10⁴) and Q0. *memory*.
* r = q·cos³γ and the Lambertian r = (ρ/π)·cos³γ: derived from L = q·E, E = I·cos³γ/h²
  (*own*).
"""

from __future__ import annotations

import math
import os
from dataclasses import dataclass

import numpy as np

from render.errors import input_error
from render.fileio import read_user_text

__all__ = ["RTable", "lambertian_r_table", "parse_r_table", "r_value", "read_r_table"]


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
