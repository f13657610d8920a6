"""Display encoding: chromatic adaptation to the display white, sRGB, gamut mapping.

* Chromatic adaptation: CAT16 (Li et al. 2017, Color Res. Appl. 42(6); matrix from
  colour-science ``colour.adaptation.CAT_CAT16``) in its one-step von Kries form with a degree
  of adaptation D, toward the display white:
  ``RGB_out = [D·R_wd/R_ws + 1 − D]·RGB`` (both whites at Y = 1). With D = 1 this is
  colour-science's ``chromatic_adaptation(..., method='Von Kries', transform='CAT16')``; with
  any D the source white is kept as it is when it equals the display white, so a neutral under
  D65 is a neutral grey on the display.
* sRGB: IEC 61966-2-1:1999 -- the XYZ-to-RGB matrix as colour-science gives it
  (``RGB_COLOURSPACE_sRGB.matrix_XYZ_to_RGB``, the IEC 4-digit matrix), D65 white, and the
  piecewise transfer curve ``12.92·x`` (x ≤ 0.0031308) / ``1.055·x^(1/2.4) − 0.055``.
* Gamut mapping: colours outside sRGB (a low-pressure sodium lamp's near-monochromatic light
  is far outside) keep their Oklab lightness and hue (Ottosson 2020, "A perceptual color space
  for image processing"; :mod:`render.colour.oklab`) and lose chroma until they fit:
  bisection on chroma in OkLCh, as in the gamut-mapping algorithm of the W3C CSS Color Module
  Level 4 (without its just-noticeable-difference clipping shortcut). Lightness is first
  clipped to [0, 1].

The stage returns arrays (quantised with :func:`quantise`); PNG files are written by
:mod:`render.output.images`.

References
----------
- C. Li et al. (2017), "Comprehensive color solutions: CAM16, CAT16, and CAM16-UCS", Color
  Research & Application 42(6): CAT16 (matrix as in colour-science).
- M. D. Fairchild (1996), "Refinement of the RLAB color space", Color Research & Application
  21: Hunt's cone-specific incomplete adaptation **(from memory)**.
- IEC 61966-2-1:1999, sRGB: matrix (through colour-science), white and transfer curve.
- B. Ottosson (2020), "A perceptual color space for image processing" (Oklab).
- W3C, CSS Color Module Level 4, gamut mapping at constant OkLCh lightness and hue.
"""

from __future__ import annotations

import math
from functools import lru_cache

import numba
import numpy as np
import numpy.typing as npt

from render.colour.matrices import apply_matrix
from render.colour.oklab import MATRIX_LAB_TO_LMS, MATRIX_LMS_TO_XYZ, xyz_to_oklab

__all__ = [
    "chromatic_adaptation_cat16",
    "chromatic_adaptation_incomplete",
    "display_white_xyz",
    "gamut_map_oklab",
    "incomplete_adaptation_gains",
    "linear_srgb_to_xyz",
    "quantise",
    "srgb_decode",
    "srgb_encode",
    "srgb_quantised",
    "xyz_to_linear_srgb",
]


@lru_cache(maxsize=1)
def _constants():
    import colour

    cs = colour.models.RGB_COLOURSPACE_sRGB
    xyz_to_rgb = np.asarray(cs.matrix_XYZ_to_RGB, dtype=np.float64)
    # Exact inverse (the standard's two 4-digit matrices are not exact inverses of each other).
    rgb_to_xyz = np.linalg.inv(xyz_to_rgb)
    # Display white = the XYZ of R = G = B = 1 through that matrix (xy within 1e-4 of the
    # standard's 0.3127, 0.3290), so that neutrals come out with exactly equal channels.
    white = rgb_to_xyz @ np.ones(3)
    white = white / white[1]
    cat16 = np.asarray(colour.adaptation.CAT_CAT16, dtype=np.float64)
    return xyz_to_rgb, rgb_to_xyz, white, cat16


def display_white_xyz() -> np.ndarray:
    """XYZ of the sRGB display white, Y = 1: R = G = B = 1 through the IEC matrix (D65,
    x, y = 0.3127, 0.3290 to within 1e-4)."""
    return _constants()[2].copy()


def chromatic_adaptation_cat16(
    xyz: npt.ArrayLike,
    source_white_xyz: npt.ArrayLike,
    degree: float,
    destination_white_xyz: npt.ArrayLike | None = None,
) -> np.ndarray:
    """One-step CAT16 von Kries adaptation with degree D from a source to a destination white.

    ``xyz`` (..., 3) any scale; whites are normalised to Y = 1 internally. Destination default:
    the sRGB display white.
    """
    _, _, d65, m = _constants()
    ws = np.asarray(source_white_xyz, dtype=np.float64)
    wd = d65 if destination_white_xyz is None else np.asarray(destination_white_xyz, dtype=np.float64)
    ws = ws / ws[1]
    wd = wd / wd[1]
    rs = m @ ws
    rd = m @ wd
    gain = degree * rd / rs + (1.0 - degree)
    full = np.linalg.inv(m) @ np.diag(gain) @ m
    return apply_matrix(full, xyz)


def incomplete_adaptation_gains(
    source_white_xyz: npt.ArrayLike,
    adapting_cd_m2: float,
    discounting: float = 0.0,
    destination_white_xyz: npt.ArrayLike | None = None,
) -> np.ndarray:
    """Per-cone von Kries gains (CAT16 space) for *incomplete* adaptation to a coloured light.

    Hunt's cone-specific degree of adaptation, in the form RLAB uses (Fairchild 1996,
    "Refinement of the RLAB color space", Color Res. Appl. 21; from memory):

        p_c = (1 + Y_n^(1/3) + l_c) / (1 + Y_n^(1/3) + 1/l_c),   l_c = 3·c_n / (L_n + M_n + S_n)
        gain_c = (p_c + D·(1 - p_c)) · c_d / c_n

    with ``Y_n`` the adapting luminance (cd/m²), ``c_n`` the cone responses of the adapting
    light and ``c_d`` those of the display white, ``D`` the discounting-the-illuminant factor
    (0: sensory adaptation only). Strongly coloured light (low-pressure sodium: almost no
    short-wave cone signal) is adapted to only partly and keeps its colour, more so at low
    luminance, as observers report. Two choices of ours: the cone responses are the CAT16
    ones, and ``l_c`` is taken relative to the display white (so light of the display white's
    colour gives ``p = 1`` and the step is the identity).
    """
    _, _, d65, m = _constants()
    ws = np.asarray(source_white_xyz, dtype=np.float64)
    wd = d65 if destination_white_xyz is None else np.asarray(destination_white_xyz, dtype=np.float64)
    rs = m @ (ws / ws[1])
    rd = m @ (wd / wd[1])
    rel = np.maximum(rs / rd, 1e-9)
    l = 3.0 * rel / rel.sum()
    y3 = max(float(adapting_cd_m2), 0.0) ** (1.0 / 3.0)
    p = (1.0 + y3 + l) / (1.0 + y3 + 1.0 / l)
    d = float(discounting)
    return (p + d * (1.0 - p)) * rd / rs


def chromatic_adaptation_incomplete(
    xyz: npt.ArrayLike,
    source_white_xyz: npt.ArrayLike,
    adapting_cd_m2: float,
    discounting: float = 0.0,
    destination_white_xyz: npt.ArrayLike | None = None,
) -> np.ndarray:
    """Apply :func:`incomplete_adaptation_gains` in CAT16 space to XYZ (..., 3)."""
    _, _, _, m = _constants()
    gain = incomplete_adaptation_gains(source_white_xyz, adapting_cd_m2, discounting, destination_white_xyz)
    full = np.linalg.inv(m) @ np.diag(gain) @ m
    return apply_matrix(full, xyz)


def xyz_to_linear_srgb(xyz: npt.ArrayLike) -> np.ndarray:
    """Linear sRGB of relative XYZ (display white Y = 1), IEC 61966-2-1 matrix."""
    return apply_matrix(_constants()[0], xyz)


def linear_srgb_to_xyz(rgb: npt.ArrayLike) -> np.ndarray:
    """Inverse of :func:`xyz_to_linear_srgb`."""
    return apply_matrix(_constants()[1], rgb)


#: Exponent of the sRGB curve's power law (IEC 61966-2-1).
_SRGB_EXPONENT = 1.0 / 2.4


def srgb_encode(linear: npt.ArrayLike) -> np.ndarray:
    """IEC 61966-2-1 sRGB transfer curve (input clipped to [0, 1])."""
    x = np.clip(np.asarray(linear, dtype=np.float64), 0.0, 1.0)
    out = np.asarray(12.92 * x)
    curve = x > 0.0031308  # the power law only where it applies
    out[curve] = 1.055 * np.power(x[curve], _SRGB_EXPONENT) - 0.055
    return out


@numba.njit(cache=True, nogil=True)
def _srgb_linear_part(x, enc, curve):
    """Clip ``x`` to [0, 1]; where the linear segment applies write ``12.92·x`` to ``enc``, else
    put the value in turn into ``curve`` (their power is taken by numpy, as in
    :func:`srgb_encode`). Returns how many went into ``curve``."""
    n = 0
    for i in range(x.shape[0]):
        v = np.minimum(np.maximum(x[i], 0.0), 1.0)
        if v > 0.0031308:
            curve[n] = v
            n += 1
        else:
            enc[i] = 12.92 * v
    return n


@numba.njit(cache=True, nogil=True)
def _quantised(q):
    """``q`` (already scaled) rounded half to even as numpy's ``rint``; NaN gives 0."""
    r = np.rint(q)
    return 0.0 if r != r else r


@numba.njit(cache=True, nogil=True)
def _srgb_quantise(x, enc, powered, q8, q16):
    """Finish :func:`srgb_encode` (``1.055·p − 0.055`` from the powers in turn) and round each
    encoded value to 8 and 16 bits as :func:`quantise`."""
    j = 0
    for i in range(x.shape[0]):
        v = np.minimum(np.maximum(x[i], 0.0), 1.0)
        if v > 0.0031308:
            e = 1.055 * powered[j] - 0.055
            j += 1
        else:
            e = enc[i]
        c = np.minimum(np.maximum(e, 0.0), 1.0)
        q8[i] = np.uint8(_quantised(c * 255.0))
        q16[i] = np.uint16(_quantised(c * 65535.0))


def srgb_quantised(linear: npt.ArrayLike) -> tuple[np.ndarray, np.ndarray]:
    """``(quantise(srgb_encode(linear), 8), quantise(srgb_encode(linear), 16))``, the same
    values, in two compiled passes without the full-size intermediates (the power law by
    numpy, as :func:`srgb_encode` takes it)."""
    x = np.asarray(linear, dtype=np.float64)
    flat = np.ascontiguousarray(x.reshape(-1))
    enc = np.empty_like(flat)
    curve = np.empty_like(flat)
    n = _srgb_linear_part(flat, enc, curve)
    powered = np.power(curve[:n], _SRGB_EXPONENT)
    q8 = np.empty(flat.shape, np.uint8)
    q16 = np.empty(flat.shape, np.uint16)
    _srgb_quantise(flat, enc, powered, q8, q16)
    return q8.reshape(x.shape), q16.reshape(x.shape)


def srgb_decode(encoded: npt.ArrayLike) -> np.ndarray:
    """Inverse of :func:`srgb_encode`."""
    v = np.clip(np.asarray(encoded, dtype=np.float64), 0.0, 1.0)
    return np.where(v <= 0.04045, v / 12.92, ((v + 0.055) / 1.055) ** 2.4)


def quantise(encoded: npt.ArrayLike, bits: int) -> np.ndarray:
    """Round encoded values in [0, 1] to unsigned integers of 8 or 16 bits."""
    if bits not in (8, 16):
        raise ValueError("bits must be 8 or 16")
    top = (1 << bits) - 1
    out = np.rint(np.clip(np.asarray(encoded, dtype=np.float64), 0.0, 1.0) * top)
    return out.astype(np.uint8 if bits == 8 else np.uint16)


#: Pixels per block of the gamut-mapping kernel: each block's bisection runs one step for all
#: its pixels at a time, a loop without branches that the compiler vectorises.
_GAMUT_BLOCK = 512


@numba.njit(cache=True, nogil=True)
def _oklab_to_rgb(L, aa, bb, to_lms, to_xyz, to_rgb):
    """Linear sRGB of an Oklab colour (LMS', cubes, XYZ, sRGB: one multiply-add chain each)."""
    l_ = to_lms[0, 0] * L + to_lms[0, 1] * aa + to_lms[0, 2] * bb
    m_ = to_lms[1, 0] * L + to_lms[1, 1] * aa + to_lms[1, 2] * bb
    s_ = to_lms[2, 0] * L + to_lms[2, 1] * aa + to_lms[2, 2] * bb
    l3 = l_ * l_ * l_
    m3 = m_ * m_ * m_
    s3 = s_ * s_ * s_
    x = to_xyz[0, 0] * l3 + to_xyz[0, 1] * m3 + to_xyz[0, 2] * s3
    y = to_xyz[1, 0] * l3 + to_xyz[1, 1] * m3 + to_xyz[1, 2] * s3
    z = to_xyz[2, 0] * l3 + to_xyz[2, 1] * m3 + to_xyz[2, 2] * s3
    r0 = to_rgb[0, 0] * x + to_rgb[0, 1] * y + to_rgb[0, 2] * z
    r1 = to_rgb[1, 0] * x + to_rgb[1, 1] * y + to_rgb[1, 2] * z
    r2 = to_rgb[2, 0] * x + to_rgb[2, 1] * y + to_rgb[2, 2] * z
    return r0, r1, r2


@numba.njit(cache=True, nogil=True)
def _gamut_kernel(lab, to_lms, to_xyz, to_rgb, iterations, tol, out):
    """Per pixel: bisection on Oklab chroma at constant lightness and hue until the colour is
    inside the sRGB cube; writes the linear sRGB of the largest chroma found inside. Pixels go
    in blocks of :data:`_GAMUT_BLOCK`, every pixel of a block taking the same step together."""
    n = lab.shape[0]
    nblocks = (n + _GAMUT_BLOCK - 1) // _GAMUT_BLOCK
    top = 1.0 + tol
    for blk in range(nblocks):
        start = blk * _GAMUT_BLOCK
        m = min(n, start + _GAMUT_BLOCK) - start
        light = np.empty(m)
        ca = np.empty(m)
        sa = np.empty(m)
        lo = np.zeros(m)
        hi = np.empty(m)
        for j in range(m):
            i = start + j
            light[j] = min(max(lab[i, 0], 0.0), 1.0)
            a = lab[i, 1]
            b = lab[i, 2]
            c = math.hypot(a, b)
            ca[j] = a / c if c > 0.0 else 0.0
            sa[j] = b / c if c > 0.0 else 0.0
            hi[j] = c
        for _ in range(iterations):
            for j in range(m):
                mid = 0.5 * (lo[j] + hi[j])
                r0, r1, r2 = _oklab_to_rgb(light[j], mid * ca[j], mid * sa[j], to_lms, to_xyz, to_rgb)
                inside = (r0 >= -tol) & (r0 <= top) & (r1 >= -tol) & (r1 <= top) & (r2 >= -tol) & (r2 <= top)
                lo[j] = mid if inside else lo[j]
                hi[j] = hi[j] if inside else mid
        for j in range(m):
            r0, r1, r2 = _oklab_to_rgb(light[j], lo[j] * ca[j], lo[j] * sa[j], to_lms, to_xyz, to_rgb)
            out[start + j, 0] = r0
            out[start + j, 1] = r1
            out[start + j, 2] = r2


@numba.njit(cache=True, nogil=True)
def _rgb_and_gamut(xyz, to_rgb, tol, rgb, outside):
    """Linear sRGB of each XYZ (one multiply-add chain per channel) and whether it lies
    outside the sRGB cube by more than ``tol``."""
    top = 1.0 + tol
    for i in range(xyz.shape[0]):
        x = xyz[i, 0]
        y = xyz[i, 1]
        z = xyz[i, 2]
        r0 = to_rgb[0, 0] * x + to_rgb[0, 1] * y + to_rgb[0, 2] * z
        r1 = to_rgb[1, 0] * x + to_rgb[1, 1] * y + to_rgb[1, 2] * z
        r2 = to_rgb[2, 0] * x + to_rgb[2, 1] * y + to_rgb[2, 2] * z
        rgb[i, 0] = r0
        rgb[i, 1] = r1
        rgb[i, 2] = r2
        outside[i] = not ((r0 >= -tol) & (r0 <= top) & (r1 >= -tol) & (r1 <= top) & (r2 >= -tol) & (r2 <= top))


@numba.njit(cache=True, nogil=True)
def _place_and_clip(rgb, outside, mapped):
    """Put the mapped colours in place of the ones outside (in order), clip all to [0, 1]."""
    j = 0
    for i in range(rgb.shape[0]):
        if outside[i]:
            for c in range(3):
                rgb[i, c] = mapped[j, c]
            j += 1
        for c in range(3):
            rgb[i, c] = min(max(rgb[i, c], 0.0), 1.0)


def gamut_map_oklab(xyz: npt.ArrayLike, iterations: int = 30, tol: float = 1e-9) -> tuple[np.ndarray, np.ndarray]:
    """Linear sRGB in [0, 1] for relative XYZ, out-of-gamut colours mapped at constant Oklab
    lightness and hue (chroma reduced by bisection; Ottosson 2020's space, the constant-hue
    chroma reduction of CSS Color 4). Returns ``(rgb, was_out_of_gamut)``."""
    xyz = np.asarray(xyz, dtype=np.float64)
    flat = np.ascontiguousarray(xyz.reshape(-1, 3))
    rgb = np.empty_like(flat)
    out = np.empty(flat.shape[0], dtype=np.bool_)
    _rgb_and_gamut(flat, np.ascontiguousarray(_constants()[0]), float(tol), rgb, out)
    mapped = np.empty((0, 3))
    if np.any(out):
        lab = np.ascontiguousarray(xyz_to_oklab(flat[out]))
        mapped = np.empty_like(lab)
        _gamut_kernel(
            lab,
            np.ascontiguousarray(MATRIX_LAB_TO_LMS),
            np.ascontiguousarray(MATRIX_LMS_TO_XYZ),
            np.ascontiguousarray(_constants()[0]),
            int(iterations),
            float(tol),
            mapped,
        )
    _place_and_clip(rgb, out, mapped)
    return rgb.reshape(xyz.shape), out.reshape(xyz.shape[:-1])
