"""Edge illuminance ratio: how well the surroundings just beside the carriageway are lit.

The edge illuminance ratio R_EI (EN 13201-2:2015; called the surround ratio SR in CIE 140 and
the CIE ILV) compares, on each side of the carriageway, the mean horizontal illuminance on a
strip just outside the carriageway's edge with the mean on a strip of the same width just
inside it:

    R_EI = Ē(outside strip) / Ē(inside strip).

The strips run along the field between two consecutive luminaires (the same length and the
same points along the street as :func:`render.calc.fields.street_fields`). Their width is the
smallest of 5 m, half the carriageway width, and the width of the surroundings beside the
carriageway (here kerb + verge + footway up to the footway's far edge; front gardens are not
counted, as they are often fenced). Points across each strip follow the footway rule of
:func:`render.calc.fields.footway_across` (at least three, d ≤ 1.5 m), the first d/2 from the
strip's edge; points outside lie on the walkable surface (:meth:`Street.ground_z`), points
inside on the carriageway (z = 0).

Being a ratio, R_EI does not change with the setup's lumens, dimming or maintenance factor.

On a road the strips follow it: laid along its centreline over the same distances along it as
the fields (:func:`render.calc.fields.lay_along`), at the same offsets from the curved kerb.

References
----------
* CIE ILV (CIE S 017), term "surround ratio": the mean illuminance on strips adjacent to both
  edges of the carriageway over the mean on the adjacent strips in the carriageway (confirmed
  by search); EN 13201-2:2015 names it the edge illuminance ratio R_EI.
* The strip width min(5 m, half the carriageway, the width of the surroundings) and the point
  layout across the strips: EN 13201-3:2015 / CIE 140-2000, *memory*.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import TYPE_CHECKING, Any

import numpy as np

from render.calc.fields import CalculationField, evaluate_field, footway_across, lay_along, points_along
from render.scene.model import Setup, Street

if TYPE_CHECKING:
    from render.geometry.roads import Centreline
    from render.study import Study

__all__ = ["EdgeResult", "edge_illuminance_ratio", "edge_strip_width_m", "edge_strips"]

#: Largest strip width (m) (EN 13201-3 / CIE 140, memory).
MAX_STRIP_WIDTH_M = 5.0


@dataclass(frozen=True)
class EdgeResult:
    """The edge illuminance ratio on one side of the carriageway, with its two strip means."""

    side: str  # "right" (−y) or "left" (+y)
    setup: str | None
    strip_width_m: float
    inside_mean_lx: float
    outside_mean_lx: float
    ratio: float  # R_EI = outside / inside (0 when the inside mean is 0)

    def to_json(self) -> dict[str, Any]:
        """The result as plain JSON types."""
        return {
            "side": self.side,
            "setup": self.setup,
            "strip_width_m": self.strip_width_m,
            "inside_mean_lx": self.inside_mean_lx,
            "outside_mean_lx": self.outside_mean_lx,
            "edge_illuminance_ratio": self.ratio,
        }


def edge_strip_width_m(street: Street, side: str) -> float:
    """Width (m) of the strips on ``side``: min(5 m, half the carriageway, kerb + verge + footway)."""
    s = street.side(side)
    surroundings = street.kerb_width_m + s.verge_width_m + s.footway_width_m
    return min(MAX_STRIP_WIDTH_M, 0.5 * street.carriageway_width_m, surroundings)


def _strip(name: str, street: Street, x0: float, length_m: float, y0: float, width_m: float) -> CalculationField:
    n_along, d_along = points_along(length_m)
    n_across, d_across = footway_across(width_m)
    xs = x0 + d_along * (np.arange(n_along) + 0.5)
    ys = y0 + d_across * (np.arange(n_across) + 0.5)
    gx, gy = np.meshgrid(xs, ys, indexing="ij")
    z = np.array([street.ground_z(float(y)) for y in gy.ravel()])
    pts = np.stack([gx.ravel(), gy.ravel(), z], axis=1)
    normals = np.tile([0.0, 0.0, 1.0], (pts.shape[0], 1))
    return CalculationField(name, pts, normals, (n_along, n_across), (d_along, d_across))


def edge_strips(
    street: Street, x_start_m: float, spacing_m: float, side: str, path: Centreline | None = None
) -> tuple[CalculationField, CalculationField]:
    """(inside, outside) strips on ``side`` ("right" at −y or "left" at +y) from ``x_start_m``
    over ``spacing_m``; with ``path`` (a road's centreline, ``street`` its cross-section) the
    strips are laid along it, x the distance along and y the offset across
    (:func:`render.calc.fields.lay_along`)."""
    w = edge_strip_width_m(street, side)
    if not w > 0:
        raise ValueError(f"no room beside the carriageway on the {side} for an edge strip")
    half = 0.5 * street.carriageway_width_m
    if side == "left":
        inside_y0, outside_y0 = half - w, half
    else:
        inside_y0, outside_y0 = -half, -half - w
    strips = (
        _strip(f"edge {side} inside", street, x_start_m, spacing_m, inside_y0, w),
        _strip(f"edge {side} outside", street, x_start_m, spacing_m, outside_y0, w),
    )
    if path is None:
        return strips
    return lay_along(strips[0], path), lay_along(strips[1], path)


def edge_illuminance_ratio(
    study: Study,
    street: Street,
    x_start_m: float,
    spacing_m: float,
    setup: str | Setup | None = None,
    path: Centreline | None = None,
) -> list[EdgeResult]:
    """R_EI on the right (−y) then the left (+y) side of the field from ``x_start_m`` over
    ``spacing_m`` under ``setup`` (direct light with shadows, as :func:`evaluate_field`); with
    ``path`` on a road (``street`` its cross-section, distances along its centreline)."""
    out = []
    for side in ("right", "left"):
        inside, outside = edge_strips(street, x_start_m, spacing_m, side, path)
        e_in = evaluate_field(study, inside, setup)
        e_out = evaluate_field(study, outside, setup)
        out.append(
            EdgeResult(
                side=side,
                setup=e_in.setup,
                strip_width_m=float(edge_strip_width_m(street, side)),
                inside_mean_lx=e_in.mean_lx,
                outside_mean_lx=e_out.mean_lx,
                ratio=e_out.mean_lx / e_in.mean_lx if e_in.mean_lx > 0 else 0.0,
            )
        )
    return out
