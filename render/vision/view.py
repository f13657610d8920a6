"""Angular geometry of one rendered view, as the vision stage needs it.

The vision stage does not depend on the camera module; it only needs the pinhole view's
horizontal field of view and pixel counts. :class:`ViewGeometry` turns those into angles:
the direction of every pixel centre, its angle from the optical axis, its exact solid angle
and the angle per pixel at the image centre.

Conventions: pinhole camera, pixel ``(row 0, column 0)`` is the top-left pixel, pixel centres
at half-integer positions; camera axes x to the right, y up, z forward (the optical axis).

References
----------
- Solid angle of a rectangle in a plane seen from a point off its corner: analytic geometry,
  a standard result.
- J. P. Snyder (1987), "Map Projections: A Working Manual", USGS Professional Paper 1395:
  the azimuthal equidistant projection.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any

import numpy as np

from render.errors import ProblemList

__all__ = ["ViewGeometry"]


@dataclass(frozen=True)
class ViewGeometry:
    """A pinhole view: horizontal field of view and image size.

    Parameters
    ----------
    hfov_deg
        Full horizontal field of view, degrees, in (0, 180).
    width_px, height_px
        Image size in pixels (columns, rows).
    """

    hfov_deg: float
    width_px: int
    height_px: int

    def __post_init__(self) -> None:
        problems = ProblemList("view")
        if not (isinstance(self.hfov_deg, (int, float)) and 0.0 < float(self.hfov_deg) < 180.0):
            problems.add("hfov_deg", f"expected a number of degrees in (0, 180), got {self.hfov_deg!r}")
        for key in ("width_px", "height_px"):
            value = getattr(self, key)
            if not (isinstance(value, (int, np.integer)) and int(value) >= 1):
                problems.add(key, f"expected a whole number of pixels >= 1, got {value!r}")
        problems.raise_if_any()

    @classmethod
    def of(cls, camera: Any) -> ViewGeometry:
        """The geometry of any object with ``hfov_deg``, ``width_px`` and ``height_px``
        attributes (e.g. the renderer's camera; same pixel conventions)."""
        return cls(float(camera.hfov_deg), int(camera.width_px), int(camera.height_px))

    @property
    def focal_px(self) -> float:
        """Distance of the image plane from the pinhole, in pixel widths."""
        return 0.5 * self.width_px / math.tan(math.radians(0.5 * self.hfov_deg))

    @property
    def vfov_deg(self) -> float:
        """Full vertical field of view, degrees."""
        return 2.0 * math.degrees(math.atan(0.5 * self.height_px / self.focal_px))

    @property
    def deg_per_px_centre(self) -> float:
        """Angle subtended by one pixel at the image centre, degrees."""
        return math.degrees(2.0 * math.atan(0.5 / self.focal_px))

    def plane_coordinates_px(self) -> tuple[np.ndarray, np.ndarray]:
        """Image-plane coordinates (x right, y up) of every pixel centre, pixel units, (H, W)."""
        x = np.arange(self.width_px) + 0.5 - 0.5 * self.width_px
        y = 0.5 * self.height_px - (np.arange(self.height_px) + 0.5)
        return np.meshgrid(x, y)

    def off_axis_deg(self) -> np.ndarray:
        """Angle of every pixel centre from the optical axis, degrees, (H, W)."""
        x, y = self.plane_coordinates_px()
        return np.degrees(np.arctan(np.hypot(x, y) / self.focal_px))

    def directions(self) -> np.ndarray:
        """Unit direction of every pixel centre in camera axes, (H, W, 3)."""
        x, y = self.plane_coordinates_px()
        d = np.stack([x, y, np.full_like(x, self.focal_px)], axis=-1)
        return d / np.linalg.norm(d, axis=-1, keepdims=True)

    def solid_angle_sr(self) -> np.ndarray:
        """Exact solid angle of every pixel, sr, (H, W).

        Uses the closed form for the solid angle of a rectangle in a plane at distance f seen
        from the origin, ``Ω = F(x2,y2) − F(x1,y2) − F(x2,y1) + F(x1,y1)`` with
        ``F(x, y) = atan(x·y / (f·sqrt(x² + y² + f²)))`` (analytic geometry), so the pixels sum
        to the solid angle of the whole image exactly.
        """
        f = self.focal_px
        xe = np.arange(self.width_px + 1) - 0.5 * self.width_px
        ye = 0.5 * self.height_px - np.arange(self.height_px + 1)
        X, Y = np.meshgrid(xe, ye)
        F = np.arctan(X * Y / (f * np.sqrt(X * X + Y * Y + f * f)))
        # Rows run downwards (y decreasing), so the sign of the y difference flips.
        return -(F[1:, 1:] - F[1:, :-1] - F[:-1, 1:] + F[:-1, :-1])

    def azimuthal_equidistant_deg(self) -> tuple[np.ndarray, np.ndarray]:
        """Pixel centres in the azimuthal equidistant projection about the optical axis.

        Returns ``(u, v)`` in degrees, (H, W): the angle from the axis, along the pixel's
        azimuth (u right, v up). Distances in this map equal true angles exactly for any pair
        involving the axis and, for other pairs, to within the factor sin θ/θ across the
        azimuth (0.95 at 30° off axis).
        """
        x, y = self.plane_coordinates_px()
        r = np.hypot(x, y)
        theta = np.degrees(np.arctan(r / self.focal_px))
        scale = np.divide(theta, r, out=np.full_like(r, self.deg_per_px_centre), where=r > 0)
        return x * scale, y * scale
