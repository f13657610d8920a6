"""Photometry data model: the C-γ intensity table of a luminaire and its angle conventions.

A :class:`Photometry` holds an absolute luminous intensity table in candela over the full
C-γ sphere of directions, as read from an ANSI/IES LM-63 file (:mod:`.lm63`), plus the file's
header figures. :class:`TiltData` holds the file's tilt multiplying factors. The arrays of both
are read-only float64.

Luminaire frame (type C)
------------------------
x = C 0°, y = C 90°, z up; γ = 0° points straight down (nadir), γ = 90° is horizontal,
γ = 180° straight up; C is counted anticlockwise seen from above (from x toward y). For a road
optic C 90° points across the carriageway, to the "street side". The unit direction of (C, γ) is

    d(C, γ) = (sin γ cos C, sin γ sin C, −cos γ),
    γ = atan2(√(d_x² + d_y²), −d_z),  C = atan2(d_y, d_x) in [0°, 360°).

The table covers C 0..360 inclusive (360 repeats 0, so that interpolation is periodic in C) and
the measured γ range (0–90, 90–180 or 0–180); outside that range the intensity is 0 cd.

Type B (floodlight) angles
--------------------------
**(from memory: CIE 121 / IES LM-75 B-β system and LM-63 angle ranges)** Type B planes share a
horizontal axis (the floodlight's tilt axis). The LM-63 *vertical* angle V is the angle of the
plane about that axis (positive upward in the test position) and the *horizontal* angle H is the
angle within the plane, away from the plane through the beam axis (positive clockwise seen from
above). H = V = 0 is the beam axis. lampcast places a type B distribution in the luminaire frame
with the beam axis on γ = 0 (nadir), V increasing toward C 90° and H increasing toward C 0°:

    direction = (sin H, cos H · sin V, −cos H · cos V)
    H = asin(sin γ cos C),  V = atan2(sin γ sin C, cos γ)

so a floodlight with ``tilt_deg = 90`` sits in its test position (beam horizontal toward C 90°,
V = +90° straight up).

Relative and absolute photometry
--------------------------------
``candela_cd`` is absolute: file values × candela multiplier × ballast factor (× the pre-2019
ballast-lamp factor). For *relative* photometry (lumens per lamp > 0) the values belong to lamps
of ``lumens_per_lamp`` rated lumens each; the luminaire's flux divided by the rated lamp flux is
the light output ratio. For *absolute* photometry (lumens per lamp = −1, usual for LED
luminaires) the values are the luminaire's own and there is no rated lamp flux.

References
----------
- ANSI/IESNA LM-63-2002 and IES LM-63-2019, "Standard file format for the electronic transfer of
  photometric data" (type C and type B angle systems, absolute photometry) **(from memory)**.
- CIE 121:1996, "The photometry and goniophotometry of luminaires" (C-γ and B-β systems)
  **(from memory)**.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np
import numpy.typing as npt

__all__ = [
    "ANGLE_TOL_DEG",
    "Photometry",
    "TiltData",
    "c_gamma_to_direction",
    "c_gamma_to_type_b",
    "frozen_array",
    "local_to_c_gamma",
    "luminaire_rotation",
    "type_b_to_c_gamma",
]

#: Two angles closer than this, degrees, are the same angle (range ends, symmetry planes).
ANGLE_TOL_DEG = 1e-6


def frozen_array(a: npt.ArrayLike) -> np.ndarray:
    """A contiguous, read-only float64 copy-or-view of ``a`` (the arrays of a :class:`Photometry`)."""
    a = np.ascontiguousarray(a, dtype=np.float64)
    a.setflags(write=False)
    return a


@dataclass(frozen=True, eq=False)
class TiltData:
    """LM-63 tilt data: candela multiplying factors against luminaire tilt.

    Attributes
    ----------
    geometry
        Lamp-to-luminaire geometry **(from memory, LM-63-2002)**: 1 = lamp vertical (base up or
        down) when the luminaire is aimed straight down; 2 = lamp horizontal and staying
        horizontal when the luminaire tilts; 3 = lamp horizontal, tilting with the luminaire.
    angles_deg
        Tilt angles, degrees, increasing.
    factors
        Multiplying factors at those angles (dimensionless, ≥ 0).
    origin
        ``"INCLUDE"`` or the path of the tilt file.
    """

    geometry: int
    angles_deg: np.ndarray
    factors: np.ndarray
    origin: str


@dataclass(frozen=True, eq=False)
class Photometry:
    """A luminaire's luminous intensity distribution as read from an LM-63 file.

    Attributes
    ----------
    c_deg
        (n_c,) C angles, degrees, increasing from 0 to 360 inclusive (360 repeats 0), after
        symmetry expansion (type B: the resampling grid).
    gamma_deg
        (n_g,) γ angles, degrees, increasing, spanning the measured vertical range (0–90,
        90–180 or 0–180). Outside this range the intensity is 0 cd.
    candela_cd
        (n_c, n_g) absolute luminous intensity, cd: file value × candela multiplier × ballast
        factor × (pre-2019) ballast-lamp factor. Tilt factors are *not* included (they depend
        on the installed tilt: see :func:`render.light.photometry.apply_tilt`).
    photometric_type
        ``"C"`` or ``"B"``.
    symmetry
        Key of the lateral symmetry found in the file (``"rotational"``, ``"quadrant"``,
        ``"bilateral-0-180"``, ``"bilateral-90-270"``, ``"none"``, type B ``"b-..."``).
    lamp_count, lumens_per_lamp
        As in the file; ``lumens_per_lamp == -1`` marks absolute photometry.
    candela_multiplier, ballast_factor, ballast_lamp_factor
        The file's factors (already applied to ``candela_cd``); ``ballast_lamp_factor`` is 1 for
        LM-63-2019 files, whose field is ``file_generation_type`` instead.
    file_generation_type
        LM-63-2019 file generation type code, else ``None``.
    input_watts
        Luminaire input power, W (0 when the file gives none).
    opening_width_m, opening_length_m, opening_height_m, opening_shape
        Luminous opening: sizes in metres (absolute values) and the shape the LM-63 sign
        convention encodes (``"point"``, ``"rectangular"``, ``"circular"``, ...). Length is
        along C 0°, width along C 90° **(from memory)**.
    edition
        ``"LM-63-1986"`` … ``"LM-63-2019"``.
    keywords
        Keyword values by upper-case key (``[MORE]`` lines joined with newlines).
    label_lines
        Header lines that are not keywords (the free text of the 1986 form).
    tilt
        :class:`TiltData` or ``None`` (``TILT=NONE``).
    source
        The file the data came from.
    file_horizontal_deg, file_vertical_deg, file_candela_cd
        The angles as written and the (n_h, n_v) table after the factors, before expansion.
    """

    c_deg: np.ndarray
    gamma_deg: np.ndarray
    candela_cd: np.ndarray
    photometric_type: str
    symmetry: str
    lamp_count: int
    lumens_per_lamp: float
    candela_multiplier: float
    ballast_factor: float
    ballast_lamp_factor: float
    input_watts: float
    opening_width_m: float
    opening_length_m: float
    opening_height_m: float
    opening_shape: str
    edition: str
    source: str
    file_horizontal_deg: np.ndarray
    file_vertical_deg: np.ndarray
    file_candela_cd: np.ndarray
    keywords: dict[str, str] = field(default_factory=dict)
    label_lines: tuple[str, ...] = ()
    tilt: TiltData | None = None
    file_generation_type: float | None = None

    @property
    def is_absolute(self) -> bool:
        """True for absolute photometry (lumens per lamp = −1)."""
        return self.lumens_per_lamp < 0

    @property
    def rated_lumens_lm(self) -> float | None:
        """Rated lamp flux, lm (lamps × lumens per lamp); ``None`` for absolute photometry."""
        if self.is_absolute:
            return None
        return float(self.lamp_count * self.lumens_per_lamp)

    @property
    def name(self) -> str:
        """A short name: the ``[LUMCAT]`` keyword, else the file's stem."""
        return self.keywords.get("LUMCAT") or Path(self.source).stem

    @property
    def vertical_range(self) -> str:
        """``"downward"`` (γ 0–90), ``"upward"`` (γ 90–180) or ``"full"`` (γ 0–180)."""
        lo, hi = float(self.gamma_deg[0]), float(self.gamma_deg[-1])
        if hi <= 90.0 + ANGLE_TOL_DEG:
            return "downward"
        if lo >= 90.0 - ANGLE_TOL_DEG:
            return "upward"
        return "full"


# --------------------------------------------------------------------------------------------
# Angle conventions
# --------------------------------------------------------------------------------------------


def c_gamma_to_direction(c_deg: npt.ArrayLike, gamma_deg: npt.ArrayLike) -> np.ndarray:
    """Unit vectors (..., 3) in the luminaire frame for angles (C, γ) in degrees."""
    c = np.radians(np.asarray(c_deg, dtype=np.float64))
    g = np.radians(np.asarray(gamma_deg, dtype=np.float64))
    c, g = np.broadcast_arrays(c, g)
    s = np.sin(g)
    return np.stack([s * np.cos(c), s * np.sin(c), -np.cos(g)], axis=-1)


def local_to_c_gamma(d: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Angles (C, γ) in degrees of luminaire-frame directions (..., 3), not necessarily unit
    length (zero vectors give C = γ = 0). C is in [0, 360), γ in [0, 180]."""
    lx, ly, lz = d[..., 0], d[..., 1], d[..., 2]
    gamma = np.degrees(np.arctan2(np.hypot(lx, ly), -lz))
    c = np.degrees(np.arctan2(ly, lx)) % 360.0
    return c, gamma


def luminaire_rotation(rotation_deg: float, tilt_deg: float = 0.0) -> np.ndarray:
    """3x3 matrix taking luminaire-frame vectors to world vectors.

    ``R = Rz(rotation_deg) @ Rx(tilt_deg)``: first tilt about the luminaire's own x axis
    (C 0°); positive tilt turns the nadir axis (γ = 0) toward C 90°, raising the street-side
    front of the optic; then rotation about the world z axis, anticlockwise seen from above.
    With ``rotation_deg = 0`` the luminaire's C 90° points along world +y.
    """
    r = math.radians(float(rotation_deg))
    t = math.radians(float(tilt_deg))
    rz = np.array([[math.cos(r), -math.sin(r), 0.0], [math.sin(r), math.cos(r), 0.0], [0.0, 0.0, 1.0]])
    rx = np.array([[1.0, 0.0, 0.0], [0.0, math.cos(t), -math.sin(t)], [0.0, math.sin(t), math.cos(t)]])
    return np.ascontiguousarray(rz @ rx)


def type_b_to_c_gamma(h_deg: npt.ArrayLike, v_deg: npt.ArrayLike) -> tuple[np.ndarray, np.ndarray]:
    """Type B angles (H, V) to the luminaire's (C, γ), degrees (see the module notes)."""
    h = np.radians(np.asarray(h_deg, dtype=np.float64))
    v = np.radians(np.asarray(v_deg, dtype=np.float64))
    d = np.stack([np.sin(h), np.cos(h) * np.sin(v), -np.cos(h) * np.cos(v)], axis=-1)
    return local_to_c_gamma(d)


def c_gamma_to_type_b(c_deg: npt.ArrayLike, gamma_deg: npt.ArrayLike) -> tuple[np.ndarray, np.ndarray]:
    """The luminaire's (C, γ) to type B angles (H, V), degrees; V in (−180, 180]."""
    d = c_gamma_to_direction(c_deg, gamma_deg)
    h = np.degrees(np.arcsin(np.clip(d[..., 0], -1.0, 1.0)))
    v = np.degrees(np.arctan2(d[..., 1], -d[..., 2]))
    return h, v
