"""Oklab: the perceptual colour space lampcast uses for hue, lightness and gamut mapping.

Oklab (Ottosson 2020) maps CIE XYZ (D65 white, Y = 1 for the white) to a lightness L (0-1)
and two opponent axes a, b in three steps::

    LMS  = M1 · XYZ
    LMS' = cbrt(LMS)          (real cube root, so negative responses keep their sign)
    Lab  = M2 · LMS'

and back with the inverse matrices and the cube. OkLCh is its polar form: chroma
``C = hypot(a, b)`` and hue ``h = atan2(b, a)``. This module is the project's only route into
and out of Oklab: the vision stage's gamut mapping (:mod:`render.vision.display`), the
false-colour ramp (:mod:`render.vision.falsecolour`) and the colour pictures
(:mod:`render.output.colour_pictures`) all use it.

The matrices are Ottosson's published ones (ten significant digits); their inverses are
computed here in double precision. The products go through
:func:`render.colour.matrices.apply_matrix` (the same bits on every machine).

References
----------
- B. Ottosson, "A perceptual color space for image processing", 2020 (the Oklab definition and
  its two matrices M1, M2).
- colour-science, ``colour.XYZ_to_Oklab`` / ``colour.Oklab_to_XYZ`` (the reference library the
  tests compare against).
"""

from __future__ import annotations

import numpy as np
from numpy.typing import ArrayLike

from render.colour.matrices import apply_matrix

__all__ = [
    "MATRIX_LAB_TO_LMS",
    "MATRIX_LMS_TO_LAB",
    "MATRIX_LMS_TO_XYZ",
    "MATRIX_XYZ_TO_LMS",
    "oklab_to_xyz",
    "xyz_to_oklab",
]

#: M1 of Ottosson (2020): CIE XYZ (D65) to cone-like LMS responses.
MATRIX_XYZ_TO_LMS = np.array(
    [
        [0.8189330101, 0.3618667424, -0.1288597137],
        [0.0329845436, 0.9293118715, 0.0361456387],
        [0.0482003018, 0.2643662691, 0.6338517070],
    ]
)
#: M2 of Ottosson (2020): cube-rooted LMS to L, a, b.
MATRIX_LMS_TO_LAB = np.array(
    [
        [0.2104542553, 0.7936177850, -0.0040720468],
        [1.9779984951, -2.4285922050, 0.4505937099],
        [0.0259040371, 0.7827717662, -0.8086757660],
    ]
)
#: Inverse of :data:`MATRIX_XYZ_TO_LMS` (double precision).
MATRIX_LMS_TO_XYZ = np.linalg.inv(MATRIX_XYZ_TO_LMS)
#: Inverse of :data:`MATRIX_LMS_TO_LAB` (double precision).
MATRIX_LAB_TO_LMS = np.linalg.inv(MATRIX_LMS_TO_LAB)
for _m in (MATRIX_XYZ_TO_LMS, MATRIX_LMS_TO_LAB, MATRIX_LMS_TO_XYZ, MATRIX_LAB_TO_LMS):
    _m.setflags(write=False)
del _m


def xyz_to_oklab(xyz: ArrayLike) -> np.ndarray:
    """Oklab L, a, b of CIE XYZ (D65 white at Y = 1), arrays of shape (..., 3)."""
    return apply_matrix(MATRIX_LMS_TO_LAB, np.cbrt(apply_matrix(MATRIX_XYZ_TO_LMS, xyz)))


def oklab_to_xyz(lab: ArrayLike) -> np.ndarray:
    """CIE XYZ (D65 white at Y = 1) of Oklab L, a, b; the inverse of :func:`xyz_to_oklab`."""
    return apply_matrix(MATRIX_LMS_TO_XYZ, apply_matrix(MATRIX_LAB_TO_LMS, lab) ** 3)
