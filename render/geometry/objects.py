"""Parametric street objects: bins, cars, trees, hedges, bollards, shelters, signs, people,
lamp columns and building frontages, as :class:`render.geometry.shapes.Part` lists with named slots.

Every builder works in a local frame: origin at the centre of the ground contact, +x the
object's forward direction, y to its left, z up, metres; the lowest point is at z = 0. Place
the result with :func:`render.geometry.shapes.transform_parts` (``heading_deg`` turns local +x towards
world +y). What "forward" means per object:

- car, wheelie bin, pedestrian: the way it faces (bonnet, bin front lip, face);
- hedge: along its length;
- bus shelter, sign, house/shop front: the side that faces the street (open side, sign face,
  facade), so that their length/width runs along local y;
- lamp column: the direction of the bracket arm (over the road).

Parameters are declared once, as :class:`ParamSpec` records given to the :func:`parametric`
decorator: name, type, default, unit, bounds, choices and description. The builder's public
signature (defaults included), the checks of each value and their messages, the scene-file
registry :data:`OBJECT_BUILDERS` and :func:`validate_params` all derive from them; the body of a
builder declares its parameters without defaults and receives checked values. What is left in a
body are the checks that involve several parameters (a trunk wider than its canopy), which
raise :class:`ParameterError` (a ``ValueError`` carrying the parameter name). The scene loader
validates ``[[objects]]`` entries with :func:`validate_params` and reports key paths itself.

Typical dimensions are common practice with no single source; each default says so.

References
----------
- Sutherland, I. E. and Hodgman, G. W. (1974), "Reentrant polygon clipping", Commun. ACM
  17(1): the half-plane clipping of the side-window outlines.
"""

from __future__ import annotations

import dataclasses
import functools
import inspect
import math
from collections.abc import Callable, Mapping
from dataclasses import dataclass, field
from typing import Any, Generic, TypeVar

import numpy as np
from numpy.typing import ArrayLike

from render.errors import did_you_mean
from render.geometry import shapes as sh
from render.geometry.shapes import Part

__all__ = [
    "ParameterError",
    "ParamSpec",
    "Builder",
    "parametric",
    "parameters_doc",
    "ObjectKind",
    "BuiltObject",
    "LightOpening",
    "LampColumn",
    "wheelie_bin",
    "car",
    "tree",
    "hedge",
    "bollard",
    "bus_shelter",
    "sign",
    "pedestrian",
    "lamp_column",
    "house_front",
    "shop_front",
    "OBJECT_BUILDERS",
    "validate_params",
    "build_object",
    "CAR_STYLES",
    "BIN_SIZES",
]


class ParameterError(ValueError):
    """A bad builder parameter; ``key`` names it (``""`` if several are involved)."""

    def __init__(self, key: str, message: str):
        self.key = key
        self.message = message
        super().__init__(f"{key}: {message}" if key else message)


# ---------------------------------------------------------------------------------------------
# Parameter declarations
# ---------------------------------------------------------------------------------------------

_TYPE_WORDS = {"float": "a number", "int": "a whole number", "str": "a string", "bool": "true or false"}


def _num_text(x: float) -> str:
    """A bound as text: whole numbers in full (2147483647, not 2.14748e+09), others as ``:g``."""
    return str(int(x)) if float(x).is_integer() and abs(x) < 1e15 else f"{x:g}"


@dataclass(frozen=True)
class ParamSpec:
    """One builder parameter: the single declaration of its type, default, unit and bounds.

    ``type`` is ``"float"`` (accepts integers too), ``"int"``, ``"str"`` or ``"bool"``;
    ``default`` ``None`` means "derived from other parameters" (``None`` is then also accepted
    as a value); ``minimum``/``maximum`` are inclusive unless ``exclusive_minimum``;
    ``choices`` lists the allowed values. ``scene`` is False for builder details a scene file
    cannot set (mesh resolution, small fixed dimensions).
    """

    name: str
    type: str
    default: Any
    unit: str = ""
    minimum: float | None = None
    maximum: float | None = None
    exclusive_minimum: bool = False
    choices: tuple | None = None
    doc: str = ""
    scene: bool = True

    def __post_init__(self) -> None:
        if self.type not in _TYPE_WORDS:
            raise ValueError(f"{self.name}: unknown parameter type {self.type!r}")
        if self.default is not None and self.problem(self.default) is not None:
            raise ValueError(f"{self.name}: the default {self.default!r} breaks its own declaration")

    def _type_ok(self, value: Any) -> bool:
        if self.type == "bool":
            return isinstance(value, (bool, np.bool_))
        if isinstance(value, (bool, np.bool_)):
            return False
        if self.type == "float":
            return isinstance(value, (int, float, np.integer, np.floating))
        if self.type == "int":
            return isinstance(value, (int, np.integer))
        return isinstance(value, str)

    def problem(self, value: Any) -> str | None:
        """What is wrong with ``value`` for this parameter, or None when it is acceptable."""
        if value is None and self.default is None:
            return None
        unit = f" {self.unit}" if self.unit else ""
        if not self._type_ok(value):
            return f"expected {_TYPE_WORDS[self.type]}{' (' + self.unit + ')' if self.unit else ''}, got {value!r}"
        if self.choices is not None and value not in self.choices:
            return f"expected one of {', '.join(map(repr, self.choices))}, got {value!r}" + (
                did_you_mean(value, map(str, self.choices)) if isinstance(value, str) else ""
            )
        if self.type in ("float", "int"):
            v = float(value)
            if not math.isfinite(v):
                return f"expected a finite number{unit}, got {value!r}"
            if self.minimum is not None and (v < self.minimum or (self.exclusive_minimum and v == self.minimum)):
                op = ">" if self.exclusive_minimum else ">="
                return f"must be {op} {_num_text(self.minimum)}{unit}, got {value!r}"
            if self.maximum is not None and v > self.maximum:
                return f"must be <= {_num_text(self.maximum)}{unit}, got {value!r}"
        return None

    def range_text(self, value_text: Callable[[Any], str] = repr) -> str:
        """The allowed values in words: ``"one of 'a', 'b'"``, ``"0.2 <= value <= 10"``,
        ``"0 < value"`` or ``""`` (no bound); choices are written with ``value_text``."""
        if self.choices is not None:
            return "one of " + ", ".join(map(value_text, self.choices))
        if self.minimum is None and self.maximum is None:
            return ""
        lo = "" if self.minimum is None else f"{_num_text(self.minimum)} {'<' if self.exclusive_minimum else '<='} "
        hi = "" if self.maximum is None else f" <= {_num_text(self.maximum)}"
        return f"{lo}value{hi}"

    def checked(self, value: Any) -> Any:
        """``value`` as the builder receives it (a Python float, int, str or bool); raises
        :class:`ParameterError` with :meth:`problem`'s message."""
        message = self.problem(value)
        if message is not None:
            raise ParameterError(self.name, message)
        if value is None:
            return None
        return {"float": float, "int": int, "str": str, "bool": bool}[self.type](value)


def _P(
    name: str,
    type_: str,
    default: Any,
    unit: str = "",
    lo: float | None = None,
    hi: float | None = None,
    excl: bool = False,
    choices: tuple | None = None,
    doc: str = "",
    scene: bool = True,
) -> ParamSpec:
    """Short positional form of :class:`ParamSpec` for the declarations below."""
    return ParamSpec(name, type_, default, unit, lo, hi, excl, choices, doc, scene)


T = TypeVar("T")


#: Results each builder keeps (the objects of a large scene's check and compilation).
_BUILT_KEPT = 64


def _read_only(result: Any) -> Any:
    """``result`` (parts, or a dataclass holding parts and points) with every array read-only."""
    if isinstance(result, np.ndarray):
        result.setflags(write=False)
    elif isinstance(result, (list, tuple)):
        for item in result:
            _read_only(item)
    elif dataclasses.is_dataclass(result):
        for f in dataclasses.fields(result):
            _read_only(getattr(result, f.name))
    return result


def _own_list(result: Any) -> Any:
    """A kept result with its own (shallow) list of parts, so that a caller may extend it."""
    if isinstance(result, list):
        return list(result)
    if dataclasses.is_dataclass(result) and isinstance(getattr(result, "parts", None), list):
        return dataclasses.replace(result, parts=list(result.parts))
    return result


class Builder(Generic[T]):
    """A builder function whose parameters come from :class:`ParamSpec` declarations.

    Calling it binds the arguments to the signature derived from the specs (positional or
    keyword-only as in the body's own signature, defaults from the specs), checks each value
    with :meth:`ParamSpec.checked` and calls the body with the checked values.
    """

    def __init__(self, body: Callable[..., T], specs: tuple[ParamSpec, ...]):
        body_sig = inspect.signature(body)
        names = [p.name for p in body_sig.parameters.values()]
        if names != [s.name for s in specs]:
            raise TypeError(f"{body.__name__}: body parameters {names} differ from the declared ones")
        for p in body_sig.parameters.values():
            if p.default is not inspect.Parameter.empty:
                raise TypeError(f"{body.__name__}: {p.name} has a default in the body; declare it in its ParamSpec")
        self.body = body
        self.specs = specs
        self._built: dict[tuple[str, ...], Any] = {}
        self.__signature__ = body_sig.replace(
            parameters=[p.replace(default=s.default) for p, s in zip(body_sig.parameters.values(), specs)]
        )
        functools.update_wrapper(self, body)
        self.__doc__ = (inspect.cleandoc(body.__doc__ or "") + "\n\n" + parameters_doc(specs)).strip()

    def __call__(self, *args: Any, **kwargs: Any) -> T:
        bound = self.__signature__.bind(*args, **kwargs)
        bound.apply_defaults()
        checked = {s.name: s.checked(bound.arguments[s.name]) for s in self.specs}
        # The same object is often built twice (a scene's check runs the builder, compiling the
        # scene runs it again): the last results are kept, keyed by the values' exact text,
        # with read-only arrays, and each call gets its own list of the shared parts.
        key = tuple(repr(v) for v in checked.values())
        built = self._built.pop(key, None)
        if built is None:
            built = _read_only(self.body(**checked))
        self._built[key] = built
        while len(self._built) > _BUILT_KEPT:
            del self._built[next(iter(self._built))]
        return _own_list(built)

    def spec(self, name: str) -> ParamSpec:
        """The declaration of parameter ``name``."""
        for s in self.specs:
            if s.name == name:
                return s
        raise KeyError(name)

    def __repr__(self) -> str:
        return f"<object builder {self.__name__}{self.__signature__}>"


def parameters_doc(specs: tuple[ParamSpec, ...]) -> str:
    """A numpydoc "Parameters" section listing ``specs``: type, unit, range or choices,
    default and description (builder details a scene file cannot set are marked)."""
    lines = ["Parameters", "----------"]
    for s in specs:
        facts = [{"float": "float", "int": "int", "str": "str", "bool": "bool"}[s.type]]
        if s.unit:
            facts.append(s.unit)
        if s.range_text():
            facts.append(s.range_text())
        facts.append("default derived" if s.default is None else f"default {s.default!r}")
        if not s.scene:
            facts.append("not settable in scene files")
        lines.append(f"{s.name} : {'; '.join(facts)}")
        if s.doc:
            lines.append(f"    {s.doc[0].upper()}{s.doc[1:]}.")
    return "\n".join(lines)


def parametric(*specs: ParamSpec) -> Callable[[Callable[..., T]], Builder[T]]:
    """Decorator: turn a body declaring its parameters without defaults into a :class:`Builder`
    whose defaults, checks and messages come from ``specs`` (one per body parameter, in order)."""

    def wrap(body: Callable[..., T]) -> Builder[T]:
        return Builder(body, specs)

    return wrap


# ---------------------------------------------------------------------------------------------
# Small helpers
# ---------------------------------------------------------------------------------------------


def _extrude_xz(profile_xz, y_min: float, y_max: float, slot: str, cap_slot: str | None = None) -> list[Part]:
    """Extrude a side-view outline (x, z) across y from ``y_min`` to ``y_max``."""
    parts = sh.extrude(profile_xz, y_max - y_min, slot=slot, top_slot=cap_slot, bottom_slot=cap_slot)
    # (a, b, c) -> (a, -c, b) is a proper rotation: c in [0, w] maps to y in [-w, 0].
    m = np.array([[1.0, 0.0, 0.0], [0.0, 0.0, -1.0], [0.0, 1.0, 0.0]])
    return sh.affine_parts(parts, m, (0.0, y_max, 0.0))


def _extrude_yz(outline_yz, x_min: float, x_max: float, slot: str, front_slot: str | None = None) -> list[Part]:
    """Extrude a front-view outline (y, z) along x from ``x_min`` to ``x_max``; the +x cap gets
    ``front_slot``."""
    parts = sh.extrude(outline_yz, x_max - x_min, slot=slot, top_slot=front_slot)
    # (a, b, c) -> (c, a, b): a cyclic permutation of the axes, a proper rotation.
    m = np.array([[0.0, 0.0, 1.0], [1.0, 0.0, 0.0], [0.0, 1.0, 0.0]])
    return sh.affine_parts(parts, m, (x_min, 0.0, 0.0))


def _rect_panel_x(x: float, y0: float, y1: float, z0: float, z1: float, slot: str) -> list[Part]:
    """A one-sided rectangle in the plane x = const, facing +x."""
    return sh.quad((x, y0, z0), (x, y1, z0), (x, y1, z1), (x, y0, z1), slot=slot)


def _rect_panel_minus_x(x: float, y0: float, y1: float, z0: float, z1: float, slot: str) -> list[Part]:
    return sh.quad((x, y1, z0), (x, y0, z0), (x, y0, z1), (x, y1, z1), slot=slot)


# ---------------------------------------------------------------------------------------------
# Wheelie bins
# ---------------------------------------------------------------------------------------------

# Approximate outer dimensions of wheeled waste containers (height, width across, depth
# front-to-back, metres) and wheel count: common practice, no source (typical catalogue values
# for EN 840 containers, from memory).
BIN_SIZES: dict[int, dict[str, float]] = {
    120: dict(height_m=0.93, width_m=0.48, depth_m=0.55, wheels=2),
    240: dict(height_m=1.07, width_m=0.58, depth_m=0.74, wheels=2),
    360: dict(height_m=1.10, width_m=0.60, depth_m=0.88, wheels=2),
    660: dict(height_m=1.25, width_m=1.26, depth_m=0.78, wheels=4),
    1100: dict(height_m=1.37, width_m=1.37, depth_m=1.08, wheels=4),
}


@parametric(
    _P(
        "capacity_l",
        "int",
        240,
        "L",
        choices=tuple(BIN_SIZES),
        doc="nominal capacity: 120, 240, 360 (two wheels and a handle at the back) or 660, 1100 "
        "(four castors); outer sizes in BIN_SIZES (common practice, no source)",
    ),
    _P("segments", "int", 12, "", 3, doc="facets around each wheel", scene=False),
)
def wheelie_bin(capacity_l: int, *, segments: int) -> list[Part]:
    """A wheeled waste container.

    Slots ``body``, ``lid``, ``wheels``. Forward (+x) is the front lip, away from the handle.
    Overall bounds: x ±depth/2, y ±width/2, z 0..height.
    """
    d = BIN_SIZES[capacity_l]
    h, w, dep = d["height_m"], d["width_m"], d["depth_m"]
    lid_t = 0.04
    parts: list[Part] = []
    if d["wheels"] == 2:
        r = 0.10  # 200 mm wheels (common practice, no source)
        ww = 0.05
        bottom = (-dep / 2 + 0.12, dep / 2 - 0.08, w / 2 - 0.045)
        top = (-dep / 2 + 0.05, dep / 2 - 0.02, w / 2 - 0.01)
        z0 = 0.0
        wheel_centres = [(-dep / 2 + r, sgn * (w / 2 - 0.025 - ww / 2), r) for sgn in (1, -1)]
        axis = [(0.0, ww / 2, 0.0)] * 2
        # Handle bar across the back, just under the lid.
        parts += sh.box(
            min_m=(-dep / 2, -w / 2 + 0.06, h - lid_t - 0.06),
            max_m=(-dep / 2 + 0.05, w / 2 - 0.06, h - lid_t),
            slot="body",
        )
    else:
        r = 0.10  # 200 mm castors (common practice, no source)
        ww = 0.05
        z0 = 0.24
        bottom = (-dep / 2 + 0.06, dep / 2 - 0.06, w / 2 - 0.06)
        top = (-dep / 2 + 0.02, dep / 2 - 0.02, w / 2 - 0.01)
        cx, cy = dep / 2 - 0.16, w / 2 - 0.16
        wheel_centres = [(sx * cx, sy * cy, r) for sx in (1, -1) for sy in (1, -1)]
        axis = [(0.0, ww / 2, 0.0)] * 4
        for sx in (1, -1):
            for sy in (1, -1):  # castor forks from the wheel hub up to the body
                parts += sh.box(
                    min_m=(sx * cx - 0.04, sy * cy - 0.045, r),
                    max_m=(sx * cx + 0.04, sy * cy + 0.045, z0 + 0.01),
                    slot="body",
                )
    zt = h - lid_t
    corners = []
    for i in range(8):
        ix, iy, iz = i & 1, (i >> 1) & 1, (i >> 2) & 1
        x0, x1, hy = top if iz else bottom
        corners.append((x1 if ix else x0, hy if iy else -hy, zt if iz else z0))
    parts += sh.hexahedron(corners, slot="body")
    lid_x0 = -dep / 2 + 0.03 if d["wheels"] == 2 else -dep / 2
    parts += sh.box(min_m=(lid_x0, -w / 2, zt), max_m=(dep / 2, w / 2, h), slot="lid")
    for (x, y, z), a in zip(wheel_centres, axis):
        c = np.array([x, y, z])
        parts += sh.cylinder(c - a, c + a, r, segments=segments, start_dir=(0, 0, -1), slot="wheels")
    return sh.merge_parts(parts)


# ---------------------------------------------------------------------------------------------
# Cars
# ---------------------------------------------------------------------------------------------

# Body-style proportions: default overall length/width/height (m) and fractions of them
# (common practice, no source: typical European cars of each style). Fractions of length u are
# measured from the rear end; "cabin" = (base rear, roof rear, roof front, base front) of the
# greenhouse side outline; "b_pillar" = u of the B-pillar; heights are fractions of height_m.
CAR_STYLES: dict[str, dict[str, Any]] = {
    "hatchback": dict(
        length_m=4.10,
        width_m=1.75,
        height_m=1.48,
        clearance=0.11,
        wheel_r=0.21,
        belt=0.60,
        front_overhang=0.20,
        rear_overhang=0.16,
        cabin=(0.02, 0.10, 0.60, 0.76),
        b_pillar=0.42,
        rear_glass=True,
        rear_side_glass=True,
        tail_dx=0.015,
        tumblehome=0.12,
    ),
    "saloon": dict(
        length_m=4.70,
        width_m=1.82,
        height_m=1.45,
        clearance=0.10,
        wheel_r=0.22,
        belt=0.60,
        front_overhang=0.19,
        rear_overhang=0.22,
        cabin=(0.17, 0.30, 0.64, 0.77),
        b_pillar=0.48,
        rear_glass=True,
        rear_side_glass=True,
        tail_dx=0.02,
        tumblehome=0.12,
    ),
    "estate": dict(
        length_m=4.75,
        width_m=1.82,
        height_m=1.50,
        clearance=0.10,
        wheel_r=0.22,
        belt=0.60,
        front_overhang=0.19,
        rear_overhang=0.21,
        cabin=(0.02, 0.05, 0.63, 0.77),
        b_pillar=0.47,
        rear_glass=True,
        rear_side_glass=True,
        tail_dx=0.015,
        tumblehome=0.10,
    ),
    "suv": dict(
        length_m=4.50,
        width_m=1.85,
        height_m=1.68,
        clearance=0.12,
        wheel_r=0.21,
        belt=0.61,
        front_overhang=0.19,
        rear_overhang=0.19,
        cabin=(0.02, 0.06, 0.64, 0.77),
        b_pillar=0.46,
        rear_glass=True,
        rear_side_glass=True,
        tail_dx=0.015,
        tumblehome=0.10,
    ),
    "van": dict(
        length_m=5.00,
        width_m=2.00,
        height_m=2.00,
        clearance=0.09,
        wheel_r=0.16,
        belt=0.50,
        front_overhang=0.17,
        rear_overhang=0.19,
        cabin=(0.0, 0.0, 0.75, 0.85),
        b_pillar=0.64,
        rear_glass=False,
        rear_side_glass=False,
        tail_dx=0.0,
        tumblehome=0.03,
    ),
}


def _inset_convex(poly: np.ndarray, d: float) -> np.ndarray:
    """Offset a counter-clockwise convex polygon inward by ``d`` (edge lines moved in)."""
    n = len(poly)
    a = poly
    b = np.roll(poly, -1, axis=0)
    t = (b - a) / np.linalg.norm(b - a, axis=1, keepdims=True)
    inward = np.stack([-t[:, 1], t[:, 0]], axis=1)
    pa = a + inward * d
    out = []
    for i in range(n):
        j = (i - 1) % n  # edge j ends at vertex i, edge i starts at it
        p1, d1 = pa[j], t[j]
        p2, d2 = pa[i], t[i]
        den = d1[0] * d2[1] - d1[1] * d2[0]
        if abs(den) < 1e-12:
            out.append(p2)
            continue
        s = ((p2[0] - p1[0]) * d2[1] - (p2[1] - p1[1]) * d2[0]) / den
        out.append(p1 + s * d1)
    return np.array(out)


def _clip_half_plane(poly: np.ndarray, axis: int, value: float, keep_greater: bool) -> np.ndarray:
    """Sutherland–Hodgman clip of a convex polygon by ``coord[axis] >= value`` (or <=)."""
    out = []
    n = len(poly)
    sign = 1.0 if keep_greater else -1.0
    for i in range(n):
        p, q = poly[i], poly[(i + 1) % n]
        fp, fq = sign * (p[axis] - value), sign * (q[axis] - value)
        if fp >= 0:
            out.append(p)
        if fp * fq < 0:
            out.append(p + (q - p) * (fp / (fp - fq)))
    return np.array(out).reshape(-1, 2)


@parametric(
    _P("body_style", "str", "hatchback", choices=tuple(CAR_STYLES), doc="body style; 'van' is a panel van"),
    _P("length_m", "float", None, "m", 2.0, 8.0, doc="overall length (default per style)"),
    _P("width_m", "float", None, "m", 1.2, 2.8, doc="overall width without mirrors (default per style)"),
    _P("height_m", "float", None, "m", 0.9, 3.5, doc="overall height (default per style)"),
    _P("wheel_segments", "int", 14, "", 3, doc="facets around each wheel", scene=False),
)
def car(
    body_style: str,
    length_m: float | None,
    width_m: float | None,
    height_m: float | None,
    *,
    wheel_segments: int,
) -> list[Part]:
    """A recognisable low-poly car or van.

    Default sizes per style are in :data:`CAR_STYLES` (common practice, no source); the
    proportions (wheel size, beltline, greenhouse) scale with the overall size.

    Construction: the lower body is a chamfered side outline with wheel-arch notches extruded
    across the width; the greenhouse is a trapezoid outline (sloped windscreen and rear window)
    extruded across a narrower width and tapered towards the roof (tumblehome); glass panels
    (windscreen, rear window, side windows split by a B-pillar) sit 6 mm proud; lights are
    panels on the front and rear faces; wheels are cylinders touching the ground.

    Slots ``body`` (paint), ``glass``, ``tyre``, ``rim`` (wheel discs), ``trim`` (black arch
    liners), ``lights`` (front lamps), ``tail_lights``. Forward is +x; bounds x ±length/2, y ±width/2, z 0..height.
    """
    style = CAR_STYLES[body_style]
    L = style["length_m"] if length_m is None else length_m
    W = style["width_m"] if width_m is None else width_m
    H = style["height_m"] if height_m is None else height_m
    if not 2.2 <= L / H <= 4.5:
        raise ParameterError("", f"length_m / height_m must be in 2.2..4.5 for a car shape, got {L / H:.2f}")
    if not 0.8 <= W / H <= 2.2:
        raise ParameterError("", f"width_m / height_m must be in 0.8..2.2 for a car shape, got {W / H:.2f}")
    if not 2.0 <= L / W <= 3.5:
        raise ParameterError("", f"length_m / width_m must be in 2.0..3.5 for a car shape, got {L / W:.2f}")

    proud = 0.005  # lights / glass stand this far off the body
    xf, xr = L / 2 - proud, -L / 2 + proud
    zc = style["clearance"] * H  # sill height
    zb = style["belt"] * H  # beltline (top of the lower body)
    r = style["wheel_r"] * H  # tyre radius
    ra = 1.12 * r  # wheel-arch radius
    x_fa = L / 2 - style["front_overhang"] * L
    x_ra = -L / 2 + style["rear_overhang"] * L
    dzb = zb - zc
    cf = 0.22 * dzb  # front lower chamfer
    cr = 0.15 * dzb  # rear lower chamfer
    z_nose = zc + 0.62 * dzb  # top of the front face
    van = body_style == "van"
    nose_dx = (0.03 if van else 0.06) * L
    bonnet_drop = (0.05 if van else 0.12) * dzb
    u = lambda f: -L / 2 + f * L  # noqa: E731
    ub_r, ut_r, ut_f, ub_f = (u(f) for f in style["cabin"])
    tail_dx = style["tail_dx"] * L
    tail_drop = 0.0 if van else 0.05 * dzb

    def arch(xw: float) -> list[tuple[float, float]]:
        alpha = math.asin(min(1.0, (r - zc) / ra))
        phis = np.linspace(math.pi + alpha, -alpha, 9)
        return [(xw + ra * math.cos(p), r + ra * math.sin(p)) for p in phis]

    lower = (
        [(xr + cr, zc)]
        + arch(x_ra)
        + arch(x_fa)
        + [
            (xf - cf, zc),
            (xf, zc + cf),
            (xf, z_nose),
            (xf - nose_dx, zb - bonnet_drop),
            (ub_f, zb),
        ]
    )
    lower.append((xr + tail_dx, zb) if tail_dx > 0 else (xr, zb))
    if tail_drop > 0:
        lower.append((xr, zb - tail_drop))
    lower.append((xr, zc + cr))
    lower_np = np.array(lower)
    if r + ra >= zb - 0.02 or x_fa + ra >= xf - cf or x_ra - ra <= xr + cr:
        raise ParameterError("", "the requested proportions leave no room for the wheel arches")
    parts: list[Part] = []
    parts += _extrude_xz(lower_np, -W / 2, W / 2, "body")

    # Greenhouse: side outline (counter-clockwise in x-z), extruded across wc and tapered.
    ch, chx = 0.025 * H, 0.03 * L
    xb_r = max(ub_r, xr)
    cabin = [(xb_r, zb), (ub_f, zb), (ut_f, H - ch), (ut_f - chx, H), (ut_r + chx, H), (max(ut_r, xr), H - ch)]
    if van:
        cabin = [(xr, zb), (ub_f, zb), (ut_f, H - ch), (ut_f - chx, H), (xr + chx, H), (xr, H - ch)]
    cabin_np = np.array(cabin)
    wc = (0.985 if van else 0.94) * W
    k_taper = style["tumblehome"]

    def taper(y: np.ndarray, z: np.ndarray) -> np.ndarray:
        return y * (1.0 - k_taper * np.clip((z - zb) / (H - zb), 0.0, 1.0))

    cab_parts = _extrude_xz(cabin_np, -wc / 2, wc / 2, "body")
    for p in cab_parts:
        t = p.triangles_m.copy()
        t[..., 1] = taper(t[..., 1], t[..., 2])
        parts.append(sh.flat_part(t, p.slot))

    # Glass. Windscreen on the cabin edge (ub_f, zb) -> (ut_f, H - ch); rear window on the edge
    # (ut_r, H - ch) -> (xb_r, zb).
    def sloped_glass(p0, p1, t0: float, t1: float, pillar: float) -> list[Part]:
        p0, p1 = np.asarray(p0, float), np.asarray(p1, float)
        d = p1 - p0
        n2 = np.array([d[1], -d[0]]) / np.linalg.norm(d)  # outward of a counter-clockwise outline
        pts = []
        for t, sgn in ((t0, -1), (t0, 1), (t1, 1), (t1, -1)):
            x, z = p0 + t * d + n2 * 0.006
            hw = float(taper(np.array(wc / 2), np.array(z))) - pillar
            pts.append((x, sgn * hw, z))
        outward = (n2[0], 0.0, n2[1])
        return sh.panel(pts, facing=outward, slot="glass")

    parts += sloped_glass((ub_f, zb), (ut_f, H - ch), 0.07, 0.93, 0.07 * W)
    if style["rear_glass"]:
        parts += sloped_glass((cabin_np[-1, 0], H - ch), (xb_r, zb), 0.07, 0.90, 0.08 * W)
    # Side windows: cabin outline inset, split at the B-pillar.
    inset = _inset_convex(cabin_np, 0.05 * (H - zb) + 0.02)
    x_b = u(style["b_pillar"])
    windows = [_clip_half_plane(inset, 0, x_b + 0.04, True)]
    if style["rear_side_glass"]:
        windows.append(_clip_half_plane(inset, 0, x_b - 0.04, False))
    for win in windows:
        if len(win) < 3 or abs(sh.polygon_area_m2(win)) < 1e-4:
            continue
        for sgn in (1, -1):
            y = sgn * (taper(np.full(len(win), wc / 2), win[:, 1]) + 0.006)
            pts = np.column_stack([win[:, 0], y, win[:, 1]])
            parts += sh.panel(pts, facing=(0.0, sgn, 0.0), slot="glass")

    # Lights on the front face (x = L/2) and rear face (x = -L/2).
    f = z_nose - (zc + cf)
    for sgn in (1, -1):
        y_out, y_in = sgn * 0.43 * W, sgn * 0.22 * W
        y0, y1 = min(y_out, y_in), max(y_out, y_in)
        parts += _rect_panel_x(L / 2, y0, y1, z_nose - 0.45 * f, z_nose - 0.08 * f, "lights")
        g_top = zb - tail_drop - 0.05 * dzb
        y_out, y_in = sgn * 0.46 * W, sgn * 0.30 * W
        y0, y1 = min(y_out, y_in), max(y_out, y_in)
        parts += _rect_panel_minus_x(-L / 2, y0, y1, g_top - 0.22 * dzb, g_top, "tail_lights")

    # Wheels: outer face 15 mm inside the body side; a vertex at the bottom touches z = 0.
    tw = 0.115 * W
    for xw in (x_fa, x_ra):
        liner = np.array(arch(xw))
        for sgn in (1, -1):
            # Arch liner just inboard of the tyre, so the arch does not show daylight.
            y_l = sgn * (W / 2 - 0.015 - tw - 0.01)
            parts += sh.panel(
                np.column_stack([liner[:, 0], np.full(len(liner), y_l), liner[:, 1]]),
                facing=(0.0, sgn, 0.0),
                slot="trim",
            )
            y_out = sgn * (W / 2 - 0.015)
            y_in = sgn * (W / 2 - 0.015 - tw)
            parts += sh.cylinder(
                (xw, y_in, r), (xw, y_out, r), r, segments=wheel_segments, start_dir=(0, 0, -1), slot="tyre"
            )
            disc = sh.lathe(
                [[0.62 * r, 0.0], [0.0, 0.0]],
                base_m=(xw, y_out + sgn * 0.003, r),
                axis=(0, sgn, 0),
                segments=wheel_segments,
                capped=False,
                start_dir=(0, 0, -1),
                smooth=False,
                slot="rim",
            )
            parts += disc
    return sh.merge_parts(parts)


# ---------------------------------------------------------------------------------------------
# Trees, hedges, bollards
# ---------------------------------------------------------------------------------------------


@parametric(
    _P(
        "trunk_height_m",
        "float",
        2.5,
        "m",
        0.0,
        30.0,
        True,
        doc="clear stem height, ground to the lowest point of the canopy (street trees about 2-3 m; "
        "common practice, no source)",
    ),
    _P("trunk_radius_m", "float", 0.15, "m", 0.0, 2.0, True, doc="trunk radius at the ground (70 % at the top)"),
    _P("canopy_radius_m", "float", 2.0, "m", 0.0, 20.0, True, doc="horizontal radius of the canopy"),
    _P(
        "canopy_shape",
        "str",
        "sphere",
        choices=("sphere", "cone", "ellipsoid"),
        doc="'ellipsoid' is canopy_height_m high (default 1.5 x the diameter); 'cone' is a conifer "
        "(default height 2.5 x the radius)",
    ),
    _P("canopy_height_m", "float", None, "m", 0.0, 40.0, True, doc="vertical extent (ellipsoid, cone)"),
    _P(
        "lumpiness",
        "float",
        0.08,
        "",
        0.0,
        0.3,
        doc="relative radial irregularity of sphere and ellipsoid canopies (0 = smooth); top and bottom "
        "points stay in place",
    ),
    _P("seed", "int", 0, "", 0, 2**31 - 1, doc="makes the lumpiness repeatable"),
    _P("subdivisions", "int", 2, "", 0, doc="icosphere subdivisions of the canopy", scene=False),
)
def tree(
    trunk_height_m: float,
    trunk_radius_m: float,
    canopy_radius_m: float,
    canopy_shape: str,
    *,
    canopy_height_m: float | None,
    lumpiness: float,
    seed: int,
    subdivisions: int,
) -> list[Part]:
    """A street tree: a tapered trunk and a closed canopy.

    Slots ``trunk``, ``canopy``. Overall height: trunk_height_m + canopy vertical extent.
    """
    th, tr, cr, shape, lump = trunk_height_m, trunk_radius_m, canopy_radius_m, canopy_shape, lumpiness
    if tr >= cr:
        raise ParameterError("trunk_radius_m", f"must be smaller than canopy_radius_m ({cr:g}), got {tr:g}")
    if shape == "sphere":
        if canopy_height_m is not None and abs(canopy_height_m - 2 * cr) > 1e-9:
            raise ParameterError("canopy_height_m", "a spherical canopy is 2 × canopy_radius_m high; use 'ellipsoid'")
        ch = 2 * cr
    elif shape == "ellipsoid":
        ch = 3.0 * cr if canopy_height_m is None else canopy_height_m
    else:
        ch = 2.5 * cr if canopy_height_m is None else canopy_height_m
    parts: list[Part] = []
    top_z = th + (0.5 * ch if shape != "cone" else 0.3 * ch)
    parts += sh.frustum((0, 0, 0), (0, 0, top_z), tr, 0.7 * tr, segments=10, slot="trunk")
    if shape == "cone":
        prof = [[cr, th], [0.55 * cr, th + 0.45 * ch], [0.0, th + ch]]
        parts += sh.lathe(prof, segments=28, slot="canopy")
    else:
        rng = np.random.default_rng(int(seed))
        waves = rng.normal(size=(4, 3)) * 2.5
        phases = rng.uniform(0, 2 * np.pi, size=4)

        def warp(d: np.ndarray) -> np.ndarray:
            g = np.mean(np.sin(d @ waves.T + phases), axis=1)  # in [-1, 1]
            return 1.0 + lump * g * (1.0 - d[:, 2] ** 2)

        parts += sh.ellipsoid(
            (0, 0, th + ch / 2),
            (cr, cr, ch / 2),
            subdivisions=subdivisions,
            warp=warp if lump > 0 else None,
            slot="canopy",
        )
    return sh.merge_parts(parts)


@parametric(
    _P("length_m", "float", 3.0, "m", 0.0, 200.0, True, doc="along local x"),
    _P("height_m", "float", 1.2, "m", 0.0, 10.0, True, doc="highest point of the top"),
    _P("depth_m", "float", 0.8, "m", 0.0, 10.0, True, doc="across, along local y"),
    _P("roughness_m", "float", 0.05, "m", 0.0, 1.0, doc="how much the top varies"),
    _P("spacing_m", "float", 0.35, "m", 0.05, doc="grid step of the top surface", scene=False),
    _P("seed", "int", 0, "", 0, 2**31 - 1, doc="makes the roughness repeatable"),
)
def hedge(
    length_m: float,
    height_m: float,
    depth_m: float,
    *,
    roughness_m: float,
    spacing_m: float,
    seed: int,
) -> list[Part]:
    """A clipped hedge: a closed block with a gently domed, slightly irregular top.

    ``length_m`` runs along local x (forward), ``depth_m`` across (y); the top varies by up to
    ``roughness_m`` (deterministic for ``seed``) and its highest point is exactly ``height_m``.
    Slot ``foliage``.
    """
    L, H, D, rough, step = length_m, height_m, depth_m, roughness_m, spacing_m
    if rough >= 0.5 * H:
        raise ParameterError("roughness_m", f"must be below half of height_m ({H:g}), got {rough:g}")
    nx = max(2, int(math.ceil(L / step)) + 1)
    ny = 5
    x = np.linspace(-L / 2, L / 2, nx)
    y = np.linspace(-D / 2, D / 2, ny)
    rng = np.random.default_rng(int(seed))
    noise = rng.uniform(-1, 1, size=(nx, ny))
    crown = 0.06 * min(D, H) * (2 * y / D) ** 2
    z = H - rough * 0.5 * (1 + noise) - crown[None, :]
    z += H - z.max()
    top = np.stack(list(np.meshgrid(x, y, indexing="ij")) + [z], axis=-1)  # (nx, ny, 3)
    a, b, c, d = top[:-1, :-1], top[1:, :-1], top[1:, 1:], top[:-1, 1:]
    tris = [np.stack([a, b, c], -2).reshape(-1, 3, 3), np.stack([a, c, d], -2).reshape(-1, 3, 3)]
    # Boundary loop, counter-clockwise seen from above.
    loop = (
        [top[i, 0] for i in range(nx)]
        + [top[nx - 1, j] for j in range(1, ny)]
        + [top[i, ny - 1] for i in range(nx - 2, -1, -1)]
        + [top[0, j] for j in range(ny - 2, 0, -1)]
    )
    loop = np.array(loop)
    ground = loop.copy()
    ground[:, 2] = 0.0
    nxt = np.roll(np.arange(len(loop)), -1)
    tris.append(np.stack([ground, ground[nxt], loop[nxt]], axis=1))
    tris.append(np.stack([ground, loop[nxt], loop], axis=1))
    idx = sh.triangulate_polygon(ground[:, :2])
    tris.append(ground[idx][:, [0, 2, 1]])
    return [sh.flat_part(np.concatenate(tris), "foliage")]


@parametric(
    _P("height_m", "float", 0.9, "m", 0.2, 3.0, doc="overall height"),
    _P("radius_m", "float", 0.08, "m", 0.01, 1.0, doc="radius of the post"),
    _P("band_height_m", "float", 0.06, "m", 0.0, 0.5, True, doc="reflective band, 0.1 m below the top"),
    _P("segments", "int", 16, "", 3, doc="facets around the post", scene=False),
)
def bollard(height_m: float, radius_m: float, *, band_height_m: float, segments: int) -> list[Part]:
    """A round street bollard with a chamfered top and a reflective band.

    Typical 0.9–1.0 m high, 0.1–0.2 m diameter (common practice, no source). The band
    (``band_height_m`` high, 2 mm proud) sits 0.1 m below the top. Slots ``post``, ``band``.
    """
    h, r, bh = height_m, radius_m, band_height_m
    if bh + 0.1 + 0.2 * r >= h:
        raise ParameterError("band_height_m", "the band does not fit below the top")
    ch = min(0.2 * r, 0.3 * h)
    parts = sh.lathe([[r, 0.0], [r, h - ch], [0.75 * r, h]], segments=segments, slot="post")
    z1 = h - ch - 0.1 + 0.2 * r
    z1 = min(z1, h - ch - 0.005)
    parts += sh.cylinder((0, 0, z1 - bh), (0, 0, z1), r + 0.002, segments=segments, slot="band")
    return sh.merge_parts(parts)


# ---------------------------------------------------------------------------------------------
# Bus shelter, sign, pedestrian
# ---------------------------------------------------------------------------------------------


@parametric(
    _P("length_m", "float", 4.0, "m", 1.0, 20.0, doc="along local y"),
    _P("depth_m", "float", 1.5, "m", 0.6, 5.0, doc="front to back, along local x"),
    _P("height_m", "float", 2.5, "m", 2.0, 5.0, doc="ground to the top of the roof"),
)
def bus_shelter(length_m: float, depth_m: float, height_m: float) -> list[Part]:
    """A glazed bus shelter open at the front (+x), its length along local y.

    Typical 3–6 m long, 1.3–1.8 m deep, about 2.5 m high (common practice, no source).
    Four corner posts and top rails (``frame``), a flat roof slab (``roof``), glass back and
    end panels (``glass``) and a bench against the back (``bench``). Bounds: x ±depth/2,
    y ±length/2, z 0..height.
    """
    L, D, H = length_m, depth_m, height_m
    p = 0.06  # post section
    roof_t = 0.08
    zr = H - roof_t
    parts: list[Part] = []
    for sx in (1, -1):
        for sy in (1, -1):
            x0 = D / 2 - p if sx > 0 else -D / 2
            y0 = L / 2 - p if sy > 0 else -L / 2
            parts += sh.box(min_m=(x0, y0, 0.0), max_m=(x0 + p, y0 + p, zr), slot="frame")
    rail = 0.1
    for x0 in (-D / 2, D / 2 - p):
        parts += sh.box(min_m=(x0, -L / 2 + p, zr - rail), max_m=(x0 + p, L / 2 - p, zr), slot="frame")
    for y0 in (-L / 2, L / 2 - p):
        parts += sh.box(min_m=(-D / 2 + p, y0, zr - rail), max_m=(D / 2 - p, y0 + p, zr), slot="frame")
    parts += sh.box(min_m=(-D / 2, -L / 2, zr), max_m=(D / 2, L / 2, H), slot="roof")
    g = 0.01
    gz0, gz1 = 0.1, zr - rail
    parts += sh.box(
        min_m=(-D / 2 + p / 2 - g / 2, -L / 2 + p, gz0), max_m=(-D / 2 + p / 2 + g / 2, L / 2 - p, gz1), slot="glass"
    )
    for sy in (1, -1):
        yc = sy * (L / 2 - p / 2)
        parts += sh.box(min_m=(-D / 2 + p, yc - g / 2, gz0), max_m=(D / 2 - p, yc + g / 2, gz1), slot="glass")
    bench_len = min(2.0, L - 2 * p - 0.4)
    if bench_len > 0.4:
        bx0, bx1 = -D / 2 + p + 0.05, -D / 2 + p + 0.40
        parts += sh.box(min_m=(bx0, -bench_len / 2, 0.43), max_m=(bx1, bench_len / 2, 0.48), slot="bench")
        for sy in (1, -1):
            yc = sy * (bench_len / 2 - 0.1)
            parts += sh.box(min_m=(bx0 + 0.1, yc - 0.03, 0.0), max_m=(bx0 + 0.16, yc + 0.03, 0.43), slot="bench")
    return sh.merge_parts(parts)


@parametric(
    _P("height_m", "float", 2.7, "m", 0.3, 10.0, doc="top of the panel"),
    _P("panel_width_m", "float", 0.6, "m", 0.05, 5.0, doc="panel width, along local y"),
    _P("panel_height_m", "float", 0.6, "m", 0.05, 5.0, doc="panel height"),
    _P(
        "shape",
        "str",
        "rect",
        choices=("rect", "circle", "triangle"),
        doc="panel outline; 'circle' is an ellipse if width and height differ, 'triangle' has its apex up",
    ),
    _P("pole_radius_m", "float", 0.038, "m", 0.005, 0.3, scene=False),
    _P("thickness_m", "float", 0.004, "m", 0.0005, 0.1, doc="panel thickness", scene=False),
)
def sign(
    height_m: float,
    panel_width_m: float,
    panel_height_m: float,
    shape: str,
    *,
    pole_radius_m: float,
    thickness_m: float,
) -> list[Part]:
    """A post-mounted traffic sign facing +x.

    ``height_m`` is the top of the panel above ground; the panel (``panel_width_m`` across y,
    ``panel_height_m`` up) is centred on the post and hung just in front of it. ``shape``:
    ``"rect"``, ``"circle"`` (an ellipse if width ≠ height) or ``"triangle"`` (apex up).
    Typical lower edge 2.1 m above a footway, 76 mm posts (common practice, no source).
    Slots ``pole``, ``panel`` (the sign face), ``back`` (rear and edges).
    """
    h, pw, ph, kind, rp, t = height_m, panel_width_m, panel_height_m, shape, pole_radius_m, thickness_m
    if ph >= h:
        raise ParameterError("panel_height_m", f"must be below height_m ({h:g}), got {ph:g}")
    zc = h - ph / 2
    if kind == "rect":
        outline = [(-pw / 2, h - ph), (pw / 2, h - ph), (pw / 2, h), (-pw / 2, h)]
    elif kind == "circle":
        a = 2 * np.pi * np.arange(32) / 32
        outline = np.column_stack([pw / 2 * np.sin(a), zc + ph / 2 * np.cos(a)])
    else:
        outline = [(-pw / 2, h - ph), (pw / 2, h - ph), (0.0, h)]
    parts = _extrude_yz(outline, rp + 0.005, rp + 0.005 + t, "back", front_slot="panel")
    top = h - 0.02 if kind != "triangle" else h - 0.3 * ph
    parts += sh.cylinder((0, 0, 0), (0, 0, top), rp, segments=12, slot="pole")
    return sh.merge_parts(parts)


@parametric(_P("height_m", "float", 1.75, "m", 0.5, 2.5, doc="top of the head"))
def pedestrian(height_m: float) -> list[Part]:
    """A simple standing figure facing +x, arms at the sides.

    Proportions scale with ``height_m`` (rough adult proportions, common practice, no
    source: crotch at 0.47 H, shoulders at 0.82 H, head 0.13 H). Slots ``legs``, ``torso``
    (clothing), ``arms`` (sleeves), ``head`` (skin: head and neck). Top of head at height_m.
    """
    H = height_m
    s = H / 1.75
    parts: list[Part] = []
    hip = 0.48 * H
    for sgn in (1, -1):
        parts += sh.lathe(
            [[0.050 * s, 0.0], [0.062 * s, 0.25 * H], [0.080 * s, hip]],
            base_m=(0, sgn * 0.095 * s, 0),
            segments=8,
            slot="legs",
        )
    torso = sh.lathe(
        [[0.150 * s, 0.0], [0.175 * s, 0.24 * H], [0.190 * s, 0.32 * H], [0.11 * s, 0.37 * H]],
        segments=12,
        slot="torso",
    )
    parts += sh.affine_parts(torso, np.diag([0.62, 1.0, 1.0]), (0.0, 0.0, hip - 0.02 * H))
    sh_z = hip - 0.02 * H + 0.33 * H
    for sgn in (1, -1):
        parts += sh.frustum(
            (0.0, sgn * 0.205 * s, sh_z),
            (0.02 * s, sgn * 0.235 * s, 0.47 * H),
            0.045 * s,
            0.035 * s,
            segments=8,
            slot="arms",
        )
    head_r = 0.115 * s
    neck_top = H - 2 * head_r + 0.02 * s
    parts += sh.cylinder((0, 0, sh_z - 0.03 * H), (0, 0, neck_top + 0.02 * s), 0.05 * s, segments=8, slot="head")
    parts += sh.sphere((0.0, 0.0, H - head_r), head_r, subdivisions=1, slot="head")
    return sh.merge_parts(parts)


# ---------------------------------------------------------------------------------------------
# Lamp column
# ---------------------------------------------------------------------------------------------


@dataclass(frozen=True)
class LightOpening:
    """Where a lantern's light leaves it, in the column's local frame.

    Attributes
    ----------
    centre_m
        Centre of the luminous opening (the lens face under the lantern), metres.
    nadir
        Unit vector out of the opening (straight down for zero tilt, turned towards +x by the
        tilt): the photometric nadir, gamma = 0.
    forward
        Unit vector along the bracket arm in the lantern's plane (outreach direction after
        tilt): the C = 0 direction for a lantern aimed across the road.
    tilt_deg
        Upward tilt of the lantern about the local y axis.
    size_m
        (length along ``forward``, width across) of the opening.
    """

    centre_m: np.ndarray
    nadir: np.ndarray
    forward: np.ndarray
    tilt_deg: float
    size_m: tuple[float, float]


@dataclass
class LampColumn:
    parts: list[Part]
    opening: LightOpening


@parametric(
    _P(
        "height_m",
        "float",
        6.0,
        "m",
        1.5,
        30.0,
        doc="mounting height, ground to the centre of the luminous opening (residential streets "
        "typically 4-6 m, main roads 8-12 m; common practice, no source)",
    ),
    _P(
        "outreach_m",
        "float",
        0.5,
        "m",
        0.0,
        6.0,
        doc="column axis to the opening centre, horizontally (typically 0-1.5 m; 0 is a post-top lantern)",
    ),
    _P(
        "arm_tilt_deg",
        "float",
        5.0,
        "deg",
        -15.0,
        45.0,
        doc="upward tilt of arm and lantern (typically 0-15 deg; common practice, no source)",
    ),
    _P("base_radius_m", "float", 0.07, "m", 0.01, 1.0, scene=False),
    _P("top_radius_m", "float", 0.04, "m", 0.005, 1.0, scene=False),
    _P("arm_radius_m", "float", 0.025, "m", 0.005, 0.5, scene=False),
    _P("housing_length_m", "float", 0.6, "m", 0.05, 3.0, doc="lantern and its luminous opening, along the arm"),
    _P("housing_width_m", "float", 0.28, "m", 0.05, 3.0, doc="lantern and its luminous opening, across the arm"),
    _P("housing_height_m", "float", 0.1, "m", 0.01, 1.0, scene=False),
    _P("segments", "int", 12, "", 3, doc="facets around the column", scene=False),
)
def lamp_column(
    height_m: float,
    outreach_m: float,
    arm_tilt_deg: float,
    *,
    base_radius_m: float,
    top_radius_m: float,
    arm_radius_m: float,
    housing_length_m: float,
    housing_width_m: float,
    housing_height_m: float,
    segments: int,
) -> LampColumn:
    """A street-light column with a straight bracket arm and a flat lantern.

    Returns
    -------
    :class:`LampColumn` with ``parts`` (slots ``pole``, ``arm``, ``housing``, ``lens`` — the
    lens is the opening face) and ``opening`` (:class:`LightOpening`, local frame; +x is the
    arm direction). Parts lie at z >= 0 with the column base at the origin.
    """
    h, out, tilt = height_m, outreach_m, arm_tilt_deg
    rb, rt, ra = base_radius_m, top_radius_m, arm_radius_m
    hl, hw, hh = housing_length_m, housing_width_m, housing_height_m
    if rt > rb:
        raise ParameterError("top_radius_m", f"must not exceed base_radius_m ({rb:g}), got {rt:g}")
    t = math.radians(tilt)
    f = np.array([math.cos(t), 0.0, math.sin(t)])  # along the arm
    up = np.array([-math.sin(t), 0.0, math.cos(t)])  # lantern's up
    y = np.array([0.0, 1.0, 0.0])
    opening = np.array([out, 0.0, h])
    rear = opening - f * hl / 2 + up * hh / 2  # where the arm meets the lantern
    parts: list[Part] = []
    if rear[0] > rt:
        z_top = rear[2] - rear[0] * math.tan(t)  # arm continues the lantern axis back to the column
        if z_top <= 0.5:
            raise ParameterError("arm_tilt_deg", "the arm would meet the column below 0.5 m; reduce tilt or outreach")
        parts += sh.frustum((0, 0, 0), (0, 0, z_top + ra), rb, rt, segments=segments, slot="pole")
        parts += sh.cylinder((0.0, 0.0, z_top), rear, ra, segments=8, slot="arm")
    else:
        # Post-top: the column runs up into the lantern's underside.
        z_top = opening[2] + (0.0 - opening[0]) * math.tan(t) + hh / 2
        parts += sh.frustum((0, 0, 0), (0, 0, z_top), rb, rt, segments=segments, slot="pole")
    if opening[2] - hh * 2 < 0:
        raise ParameterError("height_m", "too low for the lantern")
    corners = []
    for i in range(8):
        ix, iy, iz = i & 1, (i >> 1) & 1, (i >> 2) & 1
        corners.append(opening + f * hl * (ix - 0.5) + y * hw * (iy - 0.5) + up * hh * iz)
    parts += sh.hexahedron(corners, slot="housing", face_slots={"-z": "lens"})
    nadir = -up
    return LampColumn(sh.merge_parts(parts), LightOpening(opening, nadir, f, float(tilt), (float(hl), float(hw))))


# ---------------------------------------------------------------------------------------------
# Building frontages
# ---------------------------------------------------------------------------------------------


def _door_slot(door: str, n: int) -> int | None:
    if door == "none":
        return None
    # Seen from the street (looking towards -x), the viewer's left is local -y.
    return {"left": 0, "centre": n // 2, "right": n - 1}[door]


def _block_and_roof(
    w: float, h: float, d: float, roof: str, roof_height: float, overhang: float, proud: float
) -> list[Part]:
    parts = sh.box(min_m=(-d / 2, -w / 2, 0.0), max_m=(d / 2 - proud, w / 2, h), slot="facade")
    if roof == "pitched":
        xf = d / 2 - proud + overhang
        xb = -d / 2 - overhang
        prof = [(xb, h), (xf, h), ((xf + xb) / 2, h + roof_height)]
        parts += _extrude_xz(prof, -w / 2, w / 2, "roof", cap_slot="facade")
    else:
        parts += sh.box(min_m=(-d / 2, -w / 2, h), max_m=(d / 2 - proud + overhang, w / 2, h + 0.15), slot="roof")
    return parts


def _windows_row(
    x0: float, x1: float, w: float, n: int, z0: float, ww: float, wh: float, skip: int | None = None
) -> list[Part]:
    parts = []
    for k in range(n):
        if k == skip:
            continue
        yc = -w / 2 + (k + 0.5) * w / n
        parts += sh.box(min_m=(x0, yc - ww / 2, z0), max_m=(x1, yc + ww / 2, z0 + wh), slot="window")
    return parts


@parametric(
    _P("width_m", "float", 6.0, "m", 2.0, 100.0, doc="frontage along local y"),
    _P("height_m", "float", 5.6, "m", 2.2, 60.0, doc="eaves height"),
    _P("depth_m", "float", 8.0, "m", 1.0, 100.0, doc="front to back, along local x"),
    _P("storeys", "int", 2, "", 1, 20, doc="floors, of equal height"),
    _P("windows", "int", 2, "", 1, 30, doc="windows per storey"),
    _P("door", "str", "left", choices=("left", "centre", "right", "none"), doc="seen from the street"),
    _P("window_width_m", "float", 1.1, "m", 0.2, 10.0, doc="width of each window"),
    _P("window_height_m", "float", 1.3, "m", 0.2, 10.0, doc="height of each window"),
    _P("sill_m", "float", 0.9, "m", 0.0, 5.0, doc="window sill above each floor", scene=False),
    _P("door_width_m", "float", 1.0, "m", 0.5, 5.0, scene=False),
    _P("door_height_m", "float", 2.1, "m", 1.5, 6.0, scene=False),
    _P("roof", "str", "pitched", choices=("pitched", "flat"), doc="a ridge parallel to the facade, or a 0.15 m slab"),
    _P("roof_height_m", "float", 2.5, "m", 0.2, 20.0, doc="ridge above the eaves (pitched roofs)"),
    _P("overhang_m", "float", 0.25, "m", 0.0, 2.0, doc="eaves beyond the front and back walls (pitched roofs)"),
)
def house_front(
    width_m: float,
    height_m: float,
    depth_m: float,
    *,
    storeys: int,
    windows: int,
    door: str,
    window_width_m: float,
    window_height_m: float,
    sill_m: float,
    door_width_m: float,
    door_height_m: float,
    roof: str,
    roof_height_m: float,
    overhang_m: float,
) -> list[Part]:
    """A simple house: a walled block with window and door panels 3 cm proud of the facade
    (+x) and a pitched (ridge parallel to the facade) or flat roof.

    ``height_m`` is the eaves height, split into equal ``storeys``; ``windows`` per storey are
    spaced evenly across ``width_m``; on the ground floor the door takes the left, centre or
    right window place (seen from the street) unless ``door="none"``. Pitched roofs add
    ``roof_height_m`` and overhang the front and back walls by ``overhang_m``; flat roofs are a
    0.15 m slab. Typical sizes are common practice, no source. Slots ``facade``, ``window``,
    ``door``, ``roof``.
    """
    w, h, d, ns, nw, dr = width_m, height_m, depth_m, storeys, windows, door
    ww, wh, sill, dw, dh = window_width_m, window_height_m, sill_m, door_width_m, door_height_m
    rf, rh, oh = roof, roof_height_m, overhang_m
    storey = h / ns
    if sill + wh > storey - 0.15:
        raise ParameterError("window_height_m", f"sill_m + window_height_m must fit in a storey of {storey:.2f} m")
    if ww >= w / nw - 0.2:
        raise ParameterError("window_width_m", f"{nw} windows of {ww:g} m do not fit across {w:g} m")
    if dw >= w / nw - 0.1 and dr != "none":
        raise ParameterError("door_width_m", f"the door does not fit in a {w / nw:.2f} m bay")
    if dh > storey - 0.1:
        raise ParameterError("door_height_m", f"must fit in a storey of {storey:.2f} m")
    proud = 0.03
    parts = _block_and_roof(w, h, d, rf, rh, oh, proud)
    x0, x1 = d / 2 - proud, d / 2
    skip = _door_slot(dr, nw)
    for k in range(ns):
        parts += _windows_row(x0, x1, w, nw, k * storey + sill, ww, wh, skip if k == 0 else None)
    if skip is not None:
        yc = -w / 2 + (skip + 0.5) * w / nw
        parts += sh.box(min_m=(x0, yc - dw / 2, 0.0), max_m=(x1, yc + dw / 2, dh), slot="door")
    return sh.merge_parts(parts)


@parametric(
    _P("width_m", "float", 6.0, "m", 3.0, 100.0, doc="frontage along local y"),
    _P("height_m", "float", 7.0, "m", 3.0, 60.0, doc="eaves height"),
    _P("depth_m", "float", 10.0, "m", 1.0, 100.0, doc="front to back, along local x"),
    _P("storeys", "int", 2, "", 1, 20, doc="floors, the shop floor included"),
    _P("windows", "int", 2, "", 1, 30, doc="windows per upper storey"),
    _P("door", "str", "right", choices=("left", "centre", "right"), doc="seen from the street"),
    _P("shop_storey_m", "float", 3.6, "m", 2.6, 8.0, doc="height of the ground floor"),
    _P("fascia_height_m", "float", 0.6, "m", 0.2, 2.0, doc="sign board above the shop window"),
    _P("window_width_m", "float", 1.1, "m", 0.2, 10.0, doc="upper-storey windows", scene=False),
    _P("window_height_m", "float", 1.3, "m", 0.2, 10.0, doc="upper-storey windows", scene=False),
    _P("roof", "str", "flat", choices=("pitched", "flat"), doc="a ridge parallel to the facade, or a 0.15 m slab"),
    _P("roof_height_m", "float", 2.5, "m", 0.2, 20.0, scene=False),
    _P("overhang_m", "float", 0.0, "m", 0.0, 2.0, scene=False),
)
def shop_front(
    width_m: float,
    height_m: float,
    depth_m: float,
    *,
    storeys: int,
    windows: int,
    door: str,
    shop_storey_m: float,
    fascia_height_m: float,
    window_width_m: float,
    window_height_m: float,
    roof: str,
    roof_height_m: float,
    overhang_m: float,
) -> list[Part]:
    """A shop: a ground-floor shop front (large window over a stall riser, a door at one side,
    a fascia board above) under ``storeys - 1`` upper floors with ``windows`` each.

    ``height_m`` is the eaves height; the ground floor is ``shop_storey_m`` high. Slots
    ``facade``, ``window``, ``door``, ``fascia``, ``roof``. Typical sizes common practice, no
    source.
    """
    w, h, d, ns, nw, dr = width_m, height_m, depth_m, storeys, windows, door
    gs, fh, ww, wh = shop_storey_m, fascia_height_m, window_width_m, window_height_m
    rf, rh, oh = roof, roof_height_m, overhang_m
    if gs > h:
        raise ParameterError("shop_storey_m", f"must not exceed height_m ({h:g}), got {gs:g}")
    if ns > 1 and (h - gs) / (ns - 1) < 2.2:
        raise ParameterError("shop_storey_m", f"leaves less than 2.2 m per upper storey under height_m ({h:g})")
    if fh >= gs - 2.4:
        raise ParameterError("fascia_height_m", "leaves no room for the shop window and door below it")
    proud = 0.03
    parts = _block_and_roof(w, h, d, rf, rh, oh, proud)
    x0, x1 = d / 2 - proud, d / 2
    fascia_z1 = gs - 0.15
    fascia_z0 = fascia_z1 - fh
    parts += sh.box(min_m=(x0 - 0.0, -w / 2 + 0.1, fascia_z0), max_m=(x1 + 0.05, w / 2 - 0.1, fascia_z1), slot="fascia")
    pil = 0.3
    dw, dh = 1.0, min(2.3, fascia_z0 - 0.1)
    y_lo, y_hi = -w / 2 + pil, w / 2 - pil
    if dr == "left":
        door_y = (y_lo, y_lo + dw)
        win_y = [(y_lo + dw + 0.15, y_hi)]
    elif dr == "right":
        door_y = (y_hi - dw, y_hi)
        win_y = [(y_lo, y_hi - dw - 0.15)]
    else:
        door_y = (-dw / 2, dw / 2)
        win_y = [(y_lo, -dw / 2 - 0.15), (dw / 2 + 0.15, y_hi)]
    parts += sh.box(min_m=(x0, door_y[0], 0.0), max_m=(x1, door_y[1], dh), slot="door")
    for ya, yb in win_y:
        if yb - ya > 0.3:
            parts += sh.box(min_m=(x0, ya, 0.6), max_m=(x1, yb, fascia_z0 - 0.1), slot="window")
    if ns > 1:
        storey = (h - gs) / (ns - 1)
        sill = min(0.9, max(0.1, storey - wh - 0.3))
        if sill + wh > storey - 0.1:
            raise ParameterError("window_height_m", f"must fit in an upper storey of {storey:.2f} m")
        if ww >= w / nw - 0.2:
            raise ParameterError("window_width_m", f"{nw} windows of {ww:g} m do not fit across {w:g} m")
        for k in range(ns - 1):
            parts += _windows_row(x0, x1, w, nw, gs + k * storey + sill, ww, wh)
    return sh.merge_parts(parts)


# ---------------------------------------------------------------------------------------------
# Registry for scene files
# ---------------------------------------------------------------------------------------------


@dataclass(frozen=True)
class ObjectKind:
    """A registry entry: the builder, a one-line description and the main surface.

    ``main_slot`` is the slot whose material is the object's colour (a car's body paint, a
    sign's face): the colour analysis names and compares that surface only.
    """

    function: Builder[Any]
    doc: str
    main_slot: str

    @property
    def params(self) -> tuple[ParamSpec, ...]:
        """The builder's parameters that a scene file may set."""
        return tuple(s for s in self.function.specs if s.scene)


@dataclass
class BuiltObject:
    """What :func:`build_object` returns: parts plus named points and directions (local frame
    unless :meth:`placed`)."""

    kind: str
    parts: list[Part]
    points_m: dict[str, np.ndarray] = field(default_factory=dict)
    directions: dict[str, np.ndarray] = field(default_factory=dict)

    def placed(
        self, position_m: ArrayLike = (0.0, 0.0, 0.0), heading_deg: float = 0.0, scale: float = 1.0
    ) -> BuiltObject:
        """The object moved to ``position_m``, turned by ``heading_deg`` and scaled."""
        return BuiltObject(
            self.kind,
            sh.transform_parts(self.parts, position_m, heading_deg, scale),
            {k: sh.transform_points(v, position_m, heading_deg, scale) for k, v in self.points_m.items()},
            {k: sh.transform_directions(v, heading_deg) for k, v in self.directions.items()},
        )


#: Object kinds of ``[[objects]]`` in scene files: kind name -> builder, description, main surface slot.
OBJECT_BUILDERS: dict[str, ObjectKind] = {
    "wheelie_bin": ObjectKind(wheelie_bin, "wheeled waste container", "body"),
    "car": ObjectKind(car, "parked car or van", "body"),
    "tree": ObjectKind(tree, "street tree", "canopy"),
    "hedge": ObjectKind(hedge, "clipped hedge along local x", "foliage"),
    "bollard": ObjectKind(bollard, "round bollard with reflective band", "post"),
    "bus_shelter": ObjectKind(bus_shelter, "glazed bus shelter, open side +x", "frame"),
    "sign": ObjectKind(sign, "post-mounted sign facing +x", "panel"),
    "pedestrian": ObjectKind(pedestrian, "standing figure facing +x", "torso"),
    "lamp_column": ObjectKind(lamp_column, "street-light column with bracket arm (arm along +x)", "pole"),
    "house_front": ObjectKind(house_front, "house with facade on +x", "facade"),
    "shop_front": ObjectKind(shop_front, "shop with fascia and large window on +x", "fascia"),
}


def validate_params(kind: str, params: Mapping[str, Any]) -> list[tuple[str, str]]:
    """Check ``[[objects]]`` parameters for ``kind`` against :data:`OBJECT_BUILDERS`.

    Returns ``(key, message)`` pairs (empty when all is well): unknown kind (key ``"kind"``)
    or parameter (with a did-you-mean hint), then each value against its
    :class:`ParamSpec` (:meth:`ParamSpec.problem`: wrong type, not one of the choices, out of
    range); then, if each parameter is fine on its own, the builder's own cross-checks
    (e.g. a trunk wider than its canopy), with key ``""`` when several parameters are
    involved. The builder is run for those cross-checks (a few milliseconds).
    """
    if kind not in OBJECT_BUILDERS:
        return [
            (
                "kind",
                f"unknown object kind {kind!r}; expected one of {', '.join(OBJECT_BUILDERS)}"
                + did_you_mean(str(kind), OBJECT_BUILDERS),
            )
        ]
    entry = OBJECT_BUILDERS[kind]
    specs = {p.name: p for p in entry.params}
    problems: list[tuple[str, str]] = []
    for key, value in params.items():
        spec = specs.get(key)
        if spec is None:
            problems.append(
                (key, f"unknown parameter for {kind}; expected one of {', '.join(specs)}" + did_you_mean(key, specs))
            )
            continue
        message = spec.problem(value)
        if message is not None:
            problems.append((key, message))
    if problems:
        return problems
    try:
        entry.function(**params)
    except ParameterError as e:
        problems.append((e.key, e.message))
    except ValueError as e:  # a geometric check deeper down
        problems.append(("", str(e)))
    return problems


def build_object(kind: str, params: Mapping[str, Any] | None = None) -> BuiltObject:
    """Validate and build one registry object; ValueError listing the problems if any.

    Lamp columns carry ``points_m["light_centre_m"]`` and ``directions["light_nadir"]``,
    ``directions["light_forward"]``.
    """
    params = dict(params or {})
    problems = validate_params(kind, params)
    if problems:
        raise ValueError("; ".join(f"{k}: {m}" if k else m for k, m in problems))
    result = OBJECT_BUILDERS[kind].function(**params)
    if isinstance(result, LampColumn):
        o = result.opening
        return BuiltObject(
            kind, result.parts, {"light_centre_m": o.centre_m}, {"light_nadir": o.nadir, "light_forward": o.forward}
        )
    return BuiltObject(kind, result)
