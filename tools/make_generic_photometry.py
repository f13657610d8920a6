"""Write lampcast's generic LM-63 photometric files from documented analytic models.

    python tools/make_generic_photometry.py [--out render/data/photometry]

The four distributions are models of our own, not data of any product (each file says so in
its ``[TEST]`` and ``[MANUFAC]`` keywords and lists the model parameters). They are written as
ANSI/IESNA LM-63-2002 type C files with relative photometry whose rated lamp flux equals the
luminaire flux (light output ratio 1, the usual convention for LED luminaires): each table is
scaled so that the exact integral of its bilinear interpolant (render.light.photometry.luminous_flux_lm)
equals the rated lumens before the values are rounded to 0.00001 cd.

Directions in the luminaire frame (x = C 0, y = C 90 "street side", z up, γ from nadir):
d(C, γ) = (sin γ cos C, sin γ sin C, −cos γ). The models are described in
render/data/photometry/README.md; the parameters are the constants below.

The output is deterministic: running the tool again gives byte-identical files.
"""

from __future__ import annotations

import argparse
import math
import sys
from dataclasses import dataclass
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parents[1]
if str(ROOT) not in sys.path:
    sys.path.insert(0, str(ROOT))

from render.light.photometry import luminous_flux_lm, parse_lm63  # noqa: E402
from render.output.photometry_sheet import summarise  # noqa: E402

GENERIC_TEXT = "lampcast generic model, not a product"


@dataclass(frozen=True)
class Model:
    ident: str
    title: str
    rated_lm: float
    input_watts: float
    opening_wlh_m: tuple[float, float, float]
    horizontal_deg: np.ndarray
    vertical_deg: np.ndarray
    parameters: list[str]
    function: object  # (C_deg, gamma_deg) arrays -> relative intensity


def _taper(gamma_deg, start_deg, end_deg):
    """1 up to ``start_deg``, a raised-cosine fall to 0 at ``end_deg``, 0 beyond."""
    g = np.asarray(gamma_deg, dtype=np.float64)
    t = np.clip((g - start_deg) / (end_deg - start_deg), 0.0, 1.0)
    return 0.5 * (1.0 + np.cos(math.pi * t))


def _direction(c_deg, g_deg):
    c, g = np.radians(c_deg), np.radians(g_deg)
    return np.sin(g) * np.cos(c), np.sin(g) * np.sin(c), -np.cos(g)


# (a) asymmetric road optic ---------------------------------------------------------------------
ROAD_LOBE_GAMMA_DEG = 66.0  # elevation of the two main lobes from nadir
ROAD_LOBE_C_DEG = (15.0, 165.0)  # the lobes point along the road, 15° toward the street side
ROAD_LOBE_KAPPA = 14.0  # lobe concentration: exp(κ (cos θ − 1)), θ from the lobe axis
ROAD_FILL = 0.30  # weight of the cos γ fill under the luminaire
ROAD_FRONT = (0.40, 50.0, 5.0)  # street-side lobe: weight, γ of its axis (in C 90), κ
ROAD_STREET_BIAS = 0.55  # factor (1 + s sin γ sin C)/(1 + s): more to C 90 than C 270
ROAD_CUTOFF_DEG = (72.0, 80.0)  # raised-cosine cutoff: full below 72°, zero from 80°


def road_model(c_deg, g_deg):
    dx, dy, dz = _direction(c_deg, g_deg)
    lobes = 0.0
    for c0 in ROAD_LOBE_C_DEG:
        ax, ay, az = _direction(c0, ROAD_LOBE_GAMMA_DEG)
        lobes = lobes + np.exp(ROAD_LOBE_KAPPA * (dx * ax + dy * ay + dz * az - 1.0))
    w, g_front, k_front = ROAD_FRONT
    ax, ay, az = _direction(90.0, g_front)
    lobes = lobes + w * np.exp(k_front * (dx * ax + dy * ay + dz * az - 1.0))
    fill = ROAD_FILL * np.maximum(-dz, 0.0)
    bias = (1.0 + ROAD_STREET_BIAS * dy) / (1.0 + ROAD_STREET_BIAS)
    return (lobes + fill) * bias * _taper(g_deg, *ROAD_CUTOFF_DEG)


# (b) symmetric post-top lantern ------------------------------------------------------------------
POST_DOWN = 0.35  # weight of the cos γ part (downward only)
POST_SIDE = 0.65  # weight of the sin^p γ side part
POST_SIDE_POWER = 1.5  # p
POST_UP_END_DEG = 115.0  # the side part fades (raised cosine) from 90° to zero at this γ


def post_top_model(c_deg, g_deg):
    g = np.radians(g_deg)
    down = POST_DOWN * np.maximum(np.cos(g), 0.0)
    side = POST_SIDE * np.abs(np.sin(g)) ** POST_SIDE_POWER * _taper(g_deg, 90.0, POST_UP_END_DEG)
    return (down + side) * np.ones_like(np.asarray(c_deg, dtype=np.float64))


# (c) full-cutoff area light ----------------------------------------------------------------------
AREA_WIDE = 2.5  # batwing term: 1 + w sin^4 γ
AREA_SQUARE = 0.15  # plan-view squaring: 1 − q sin² γ cos 4C (more toward the diagonals)
AREA_CUTOFF_DEG = (70.0, 85.0)


def full_cutoff_model(c_deg, g_deg):
    g, c = np.radians(g_deg), np.radians(c_deg)
    s2 = np.sin(g) ** 2
    return (1.0 + AREA_WIDE * s2 * s2) * (1.0 - AREA_SQUARE * s2 * np.cos(4.0 * c)) * _taper(g_deg, *AREA_CUTOFF_DEG)


# (d) isotropic point source ------------------------------------------------------------------------
def isotropic_model(c_deg, g_deg):
    return np.ones(np.broadcast(np.asarray(c_deg), np.asarray(g_deg)).shape)


def _steps(*segments):
    """Concatenate ``(start, stop, step)`` ranges (inclusive), without repeats."""
    out: list[float] = []
    for start, stop, step in segments:
        n = int(round((stop - start) / step))
        for k in range(n + 1):
            a = round(start + k * step, 6)
            if not out or a > out[-1]:
                out.append(a)
    return np.asarray(out)


MODELS = [
    Model(
        "generic-road-asymmetric",
        "Generic asymmetric road optic (analytic model)",
        rated_lm=6000.0,
        input_watts=45.0,
        opening_wlh_m=(0.25, 0.50, 0.0),
        horizontal_deg=_steps((0.0, 360.0, 5.0)),
        vertical_deg=_steps((0.0, 60.0, 5.0), (60.0, 90.0, 2.5)),
        parameters=[
            "I = (L1 + L2 + w*L3 + f*max(cos g,0)) * (1 + s*dy)/(1 + s) * T(g), d = unit direction,",
            f"lobes Lk = exp(k*(d.a_k - 1)), a_1, a_2 at g = {ROAD_LOBE_GAMMA_DEG:g}, "
            f"C = {ROAD_LOBE_C_DEG[0]:g} and {ROAD_LOBE_C_DEG[1]:g}, k = {ROAD_LOBE_KAPPA:g};",
            f"street-side lobe L3: a_3 at C = 90, g = {ROAD_FRONT[1]:g}, k = {ROAD_FRONT[2]:g}, w = {ROAD_FRONT[0]:g};",
            f"f = {ROAD_FILL:g}, s = {ROAD_STREET_BIAS:g} (dy = sin g sin C, street side C 90);",
            f"T = raised-cosine cutoff from g = {ROAD_CUTOFF_DEG[0]:g} to zero at {ROAD_CUTOFF_DEG[1]:g} deg.",
        ],
        function=road_model,
    ),
    Model(
        "generic-post-top",
        "Generic rotationally symmetric post-top lantern (analytic model)",
        rated_lm=4000.0,
        input_watts=35.0,
        opening_wlh_m=(-0.40, -0.40, 0.30),
        horizontal_deg=np.array([0.0]),
        vertical_deg=_steps((0.0, 180.0, 5.0)),
        parameters=[
            f"I = {POST_DOWN:g}*max(cos g,0) + {POST_SIDE:g}*sin(g)^{POST_SIDE_POWER:g}*T(g),",
            f"T = 1 below g = 90, raised-cosine fall to zero at g = {POST_UP_END_DEG:g} deg;",
            "rotationally symmetric (one C plane), uplight from the side part above 90 deg.",
        ],
        function=post_top_model,
    ),
    Model(
        "generic-full-cutoff",
        "Generic full-cutoff area light (analytic model)",
        rated_lm=10000.0,
        input_watts=75.0,
        opening_wlh_m=(0.40, 0.40, 0.0),
        horizontal_deg=_steps((0.0, 90.0, 5.0)),
        vertical_deg=_steps((0.0, 70.0, 5.0), (70.0, 90.0, 2.5)),
        parameters=[
            f"I = (1 + {AREA_WIDE:g}*sin(g)^4) * (1 - {AREA_SQUARE:g}*sin(g)^2*cos(4C)) * T(g),",
            f"T = raised-cosine cutoff from g = {AREA_CUTOFF_DEG[0]:g} to zero at {AREA_CUTOFF_DEG[1]:g} deg;",
            "quadrant symmetric (C 0-90), nothing above the horizontal.",
        ],
        function=full_cutoff_model,
    ),
    Model(
        "generic-isotropic",
        "Generic isotropic point source (for tests)",
        rated_lm=1000.0,
        input_watts=0.0,
        opening_wlh_m=(0.0, 0.0, 0.0),
        horizontal_deg=np.array([0.0]),
        vertical_deg=_steps((0.0, 180.0, 5.0)),
        parameters=["I = constant over the sphere = rated lumens / (4 pi)."],
        function=isotropic_model,
    ),
]


def _fmt(v: float) -> str:
    s = f"{v:.5f}".rstrip("0").rstrip(".")
    return "0" if s in ("", "-0") else s


def _wrap(values, per_line: int = 10) -> list[str]:
    vals = [_fmt(float(v)) for v in values]
    return [" ".join(vals[k : k + per_line]) for k in range(0, len(vals), per_line)]


def lm63_text(model: Model, table: np.ndarray) -> str:
    """LM-63-2002 text of ``table`` (n_h, n_v), in candela, for ``model``."""
    w, l, h = model.opening_wlh_m
    lines = [
        "IESNA:LM-63-2002",
        f"[TEST] {GENERIC_TEXT}",
        "[TESTLAB] none: computed from an analytic model",
        f"[MANUFAC] {GENERIC_TEXT}",
        f"[LUMCAT] {model.ident}",
        f"[LUMINAIRE] {model.title}",
        f"[LAMP] generic source, {model.rated_lm:g} lm rated = luminaire flux (relative photometry, LOR 1)",
        f"[_MODEL] {model.parameters[0]}",
        *[f"[MORE] {p}" for p in model.parameters[1:]],
        "[OTHER] Written by tools/make_generic_photometry.py; see render/data/photometry/README.md",
        "TILT=NONE",
        f"1 {_fmt(model.rated_lm)} 1 {len(model.vertical_deg)} {len(model.horizontal_deg)} 1 2 "
        f"{_fmt(w)} {_fmt(l)} {_fmt(h)}",
        f"1 1 {_fmt(model.input_watts)}",
        *_wrap(model.vertical_deg),
        *_wrap(model.horizontal_deg),
    ]
    for row in table:
        lines += _wrap(row)
    return "\n".join(lines) + "\n"


def build(model: Model) -> str:
    """Sample the model, scale it to the rated lumens, and return the file text."""
    c = model.horizontal_deg[:, None]
    g = model.vertical_deg[None, :]
    table = np.asarray(model.function(c, g), dtype=np.float64) * np.ones((c.size, g.size))
    probe = parse_lm63(lm63_text(model, table * 1000.0), source=model.ident)
    scale = model.rated_lm / luminous_flux_lm(probe) * 1000.0
    return lm63_text(model, table * scale)


def build_all() -> dict[str, str]:
    """Text of every generic file by id."""
    return {m.ident: build(m) for m in MODELS}


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument(
        "--out", default=str(ROOT / "render" / "data" / "photometry"), help="folder for the <id>.ies files"
    )
    args = parser.parse_args(argv)
    out = Path(args.out)
    out.mkdir(parents=True, exist_ok=True)
    for ident, text in build_all().items():
        path = out / f"{ident}.ies"
        tmp = path.with_suffix(".ies.tmp")
        tmp.write_text(text, encoding="ascii", newline="\r\n")
        tmp.replace(path)
        s = summarise(parse_lm63(text, source=str(path)))
        print(
            f"{ident:26s} flux {s.flux_lm:9.2f} lm  rated {s.rated_lm:8.1f} lm  "
            f"ratio {s.flux_ratio:.6f}  ULOR {s.ulor:.4f}  "
            f"peak {s.peak_cd:8.1f} cd at C {s.peak_c_deg:.1f} g {s.peak_gamma_deg:.1f}"
        )
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
