"""The night's other light at the calculation points: sky glow, moonlight and lit windows.

When the scene has a ``[night]`` table (:mod:`render.light.indirect.night`,
:mod:`render.light.indirect.windows`), ``lampcast calc`` gives the illuminance its light adds
at the calculation points, as a term of its own beside the luminaires' figures:

* on every field, the horizontal illuminance grid (:attr:`render.calc.fields.FieldResult.night`);
* on footways, the vertical and semicylindrical illuminance at the face fields' points
  (:attr:`render.calc.fields.FaceResult.night_vertical`, ``night_semicylindrical``).

**Kept apart.** The luminaires' Ē, Emin, Emax and U0, the headline figures and the class check
stay the luminaires' light alone (a lighting class judges the installation, and the sky,
moon and windows are neither designed nor maintained with it); the night light is shown
beside them, labelled :data:`NIGHT_LABEL`, with its own mean, minimum and maximum and the
luminaires' light plus it.

**How.** One path-tracing pass over every calculation point (horizontal and face points
together, :meth:`render.study.Study.night_illuminance_per_unit_lx`, the luminaires left out),
:data:`NIGHT_PATHS_PER_POINT` paths per point, with the calculation's ``bounces``: 0 gives the
direct part of the sky, moon and windows only (what reaches the point without a reflection),
N > 0 also up to N interreflections. It is lamp-independent, so it is traced once per run and
shared by every setup. The terms are sky glow, moonlight and one per window lamp (the houses'
and shops' scene-wide lamps, then each further lamp ``[[night.frontages]]`` name,
:func:`night_terms`); the night light's figures sum them all. What is kept is the illuminance per unit level of each term
(:class:`NightGrid.per_unit_lx`); the figures at the scene's levels are a multiply, and
:meth:`NightGrid.relit` gives them at any other sky luminance, moon illuminance or window
luminances without a ray (a term that was off is zero: turning it on traces again).

**Semicylindrical illuminance.** E_sc = (1/π)·∫ E_v(φ) dφ over the vertical planes facing
φ ∈ [−π/2, π/2] from the facing direction (:mod:`render.calc.fields`). The night light comes
from every direction, so E_v is traced at :data:`NIGHT_FACE_DIRECTIONS` horizontal directions
evenly round each point (every 10°; both facing directions and the vertical illuminance are
among them) and the integral is the trapezoidal rule over the half circle. For one parallel
beam straight ahead the rule gives h·cot(h/2) = 1.99493 for ∫cos φ dφ = 2 (h = 10°: −0.25 %,
derived); for a uniform sky it is exact up to the Monte Carlo noise.

References
----------
Semicylindrical and vertical illuminance on footways: EN 13201-3:2015 (as in
:mod:`render.calc.fields`, *memory*). The trapezoidal rule's error for a cosine lobe is derived
above (*own*). The sources of the light terms are those of :mod:`render.light.indirect.night`
and :mod:`render.light.indirect.windows`.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass, replace
from typing import TYPE_CHECKING, Any

import numpy as np

from render.calc.fields import FACE_PLANES, face_plane_directions, half_circle_rule
from render.scene.model import NightLight

if TYPE_CHECKING:
    from render.calc.fields import CalculationField
    from render.study import Study

__all__ = [
    "NIGHT_FACE_DIRECTIONS",
    "NIGHT_LABEL",
    "NIGHT_PATHS_PER_POINT",
    "NIGHT_TERMS",
    "NightFields",
    "NightGrid",
    "further_window_lamp",
    "night_on_fields",
    "night_terms",
]

#: The label of every figure of the night's other light (text, CSV, JSON, pictures, report).
NIGHT_LABEL = (
    "night light (sky glow, moonlight, lit windows) at the scene's stated levels: shown beside the "
    "luminaires' light, never added to the EN 13201 figures or the class check"
)
#: Paths per calculation point (own choice: the sky's direct part is a share of escaping
#: directions, whose standard error is √(p(1 − p)/N), under 2.2 % of the full sky at 512).
NIGHT_PATHS_PER_POINT = 512
#: Horizontal directions round each face point at which the vertical illuminance is traced
#: (every 10°; the semicylindrical illuminance integrates over half of them).
NIGHT_FACE_DIRECTIONS = FACE_PLANES
#: The terms, in the order of the per-unit arrays' last axis (the ambient channels of
#: :mod:`render.light.indirect.night`), with the unit of their level: with the two scene-wide
#: window lamps alone; :func:`night_terms` adds one per further window lamp.
NIGHT_TERMS = (
    ("sky_glow", "cd/m²"),
    ("moonlight", "lx"),
    ("lit_windows", "cd/m²"),
    ("lit_shop_windows", "cd/m²"),
)


#: The name of a further window lamp's term, by the lamp's number (3, 4, …).
_FURTHER_WINDOW_TERM = "lit_windows_{}"


def night_terms(count: int) -> tuple[tuple[str, str], ...]:
    """The ``count`` terms of a night light with ``count − 2`` window lamps: :data:`NIGHT_TERMS`,
    then ``lit_windows_3``, ``lit_windows_4``, … for the further window lamps
    (:attr:`render.scene.model.NightLight.window_lamps`, in their order)."""
    extra = tuple((_FURTHER_WINDOW_TERM.format(k + 1), "cd/m²") for k in range(2, int(count) - 2))
    return NIGHT_TERMS + extra


def further_window_lamp(term: str) -> int | None:
    """The window lamp number (3, 4, …) of a further window lamp's term of :func:`night_terms`,
    or None for any other term."""
    head = _FURTHER_WINDOW_TERM.format("")
    tail = term[len(head) :]
    return int(tail) if term.startswith(head) and tail.isdigit() else None


def _levels(night: NightLight) -> tuple[float, ...]:
    from render.light.indirect.night import ambient_levels

    return tuple(float(x) for x in ambient_levels(night))


@dataclass(frozen=True)
class NightGrid:
    """The night light's illuminance on one grid: ``per_unit_lx`` (along, across, T) lx per
    unit level of each term (:meth:`terms`: per 1 cd/m² of sky glow, per 1 lx of the moon's
    normal illuminance, per 1 cd/m² of the lit windows of each window lamp: houses', shops',
    further lamps), ``levels`` the T levels it is stated at, ``bounces`` the interreflections
    traced (0: direct part only) and ``paths`` per point. Its figures sum every term."""

    per_unit_lx: np.ndarray
    levels: tuple[float, ...]
    bounces: int
    paths: int

    @property
    def terms(self) -> tuple[tuple[str, str], ...]:
        """The terms' names and units, in the order of the last axis (:func:`night_terms`)."""
        return night_terms(len(self.levels))

    @property
    def terms_lx(self) -> np.ndarray:
        """(along, across, T) each term's illuminance at ``levels``."""
        return self.per_unit_lx * np.asarray(self.levels, np.float64)

    @property
    def illuminance_lx(self) -> np.ndarray:
        """(along, across) the night light's illuminance at ``levels``."""
        return self.terms_lx.sum(axis=-1)

    @property
    def mean_lx(self) -> float:
        return float(self.illuminance_lx.mean())

    @property
    def min_lx(self) -> float:
        return float(self.illuminance_lx.min())

    @property
    def max_lx(self) -> float:
        return float(self.illuminance_lx.max())

    def term_means_lx(self) -> dict[str, float]:
        """Each term's mean over the grid, by its name in :meth:`terms`."""
        terms = self.terms
        means = self.terms_lx.reshape(-1, len(terms)).mean(axis=0)
        return {name: float(m) for (name, _), m in zip(terms, means, strict=True)}

    def term_grids_lx(self) -> dict[str, list]:
        """Each term's grid (along, across) in lx at ``levels``, by its name in :meth:`terms`
        (plain lists)."""
        each = self.terms_lx
        return {name: each[..., k].tolist() for k, (name, _) in enumerate(self.terms)}

    def relit(self, night: NightLight) -> NightGrid:
        """The same grid at ``night``'s levels (a multiply; no ray); ``night`` must have the
        window lamps it was traced with (a lamp added or taken away traces again)."""
        levels = _levels(night)
        if len(levels) != len(self.levels):
            raise ValueError(
                f"the night light has {len(levels) - 2} window lamps, the grid was traced with {len(self.levels) - 2}"
            )
        return replace(self, levels=levels)

    def with_lx(self, luminaires_lx: np.ndarray) -> np.ndarray:
        """The luminaires' grid plus the night light (what a meter would read), not a figure
        of the standard's calculation."""
        return np.asarray(luminaires_lx, np.float64) + self.illuminance_lx

    def to_json(self, luminaires_lx: np.ndarray | None = None) -> dict[str, Any]:
        """Plain JSON types: the label, levels, grid and its figures, each term's mean and grid
        (``term_illuminance_lx``: by the term's name, lx at ``levels``; they sum to the grid),
        and with ``luminaires_lx`` the figures of the luminaires' light plus it."""
        out: dict[str, Any] = {
            "label": NIGHT_LABEL,
            "levels": {name: {"value": v, "unit": u} for (name, u), v in zip(self.terms, self.levels, strict=True)},
            "bounces": self.bounces,
            "paths_per_point": self.paths,
            "illuminance_lx": self.illuminance_lx.tolist(),
            "mean_lx": self.mean_lx,
            "min_lx": self.min_lx,
            "max_lx": self.max_lx,
            "term_mean_lx": self.term_means_lx(),
            "term_illuminance_lx": self.term_grids_lx(),
            "per_unit_lx": self.per_unit_lx.tolist(),
        }
        if luminaires_lx is not None:
            total = self.with_lx(luminaires_lx)
            mean = float(total.mean())
            out["with_luminaires"] = {
                "mean_lx": mean,
                "min_lx": float(total.min()),
                "max_lx": float(total.max()),
                "u0": float(total.min()) / mean if mean > 0 else 0.0,
            }
        return out


@dataclass(frozen=True)
class NightFields:
    """The night light on a calculation's fields: ``horizontal`` by field name, and per
    footway field and facing direction along the street (+1, −1) its ``vertical`` and
    ``semicylindrical`` grids at ``face_height_m``."""

    horizontal: dict[str, NightGrid]
    vertical: dict[tuple[str, int], NightGrid]
    semicylindrical: dict[tuple[str, int], NightGrid]
    face_height_m: float


def night_on_fields(
    study: Study,
    fields: Sequence[CalculationField],
    *,
    bounces: int = 0,
    face_height_m: float,
    paths: int = NIGHT_PATHS_PER_POINT,
    directions: int = NIGHT_FACE_DIRECTIONS,
) -> NightFields | None:
    """The night light on ``fields`` (see the module text) in one trace, or None when the
    scene has none. Footway fields (names starting "footway ") also get the face grids
    ``face_height_m`` above their points facing ±x of their frame; ``directions`` must be a
    multiple of 4 (the facing directions and the half circles' ends among them)."""
    night = study.scene.night
    if not night.on:
        return None
    dirs = face_plane_directions(directions)
    pts, nrm, spans = [], [], []
    start = 0
    for f in fields:
        n = f.points_m.shape[0]
        pts.append(f.points_m)
        nrm.append(f.normals)
        spans.append(("h", f, start))
        start += n
        if f.name.startswith("footway "):
            up = f.points_m + [0.0, 0.0, face_height_m]
            for k in range(directions):
                pts.append(up)
                nrm.append(f.to_world(dirs[k]))
            spans.append(("face", f, start))
            start += n * directions
    per_unit = study.night_illuminance_per_unit_lx(
        np.concatenate(pts), np.concatenate(nrm), bounces=bounces, paths=paths
    )
    levels = _levels(night)

    def grid(values: np.ndarray, f: CalculationField) -> NightGrid:
        return NightGrid(values.reshape(*f.shape, len(levels)), levels, int(bounces), int(paths))

    horizontal: dict[str, NightGrid] = {}
    vertical: dict[tuple[str, int], NightGrid] = {}
    semi: dict[tuple[str, int], NightGrid] = {}
    half = directions // 2
    for kind, f, s0 in spans:
        n = f.points_m.shape[0]
        if kind == "h":
            horizontal[f.name] = grid(per_unit[s0 : s0 + n], f)
            continue
        ev = per_unit[s0 : s0 + n * directions].reshape(directions, n, len(levels))
        for sign, centre in ((1, 0), (-1, half)):
            vertical[(f.name, sign)] = grid(ev[centre], f)
            idx, w = half_circle_rule(directions, centre)
            semi[(f.name, sign)] = grid(np.einsum("k,kpa->pa", w, ev[idx]), f)
    return NightFields(horizontal, vertical, semi, float(face_height_m))
