"""The luminaires' interreflected light at the calculation points: fields and footway faces.

With ``lampcast calc --bounces N`` the calculation gives, beside the direct figures, the light
the luminaires send to the calculation points by way of one or more reflections (kerbs,
footways, facades, the carriageway itself), labelled
:data:`render.calc.fields.INTERREFLECTED_LABEL`:

* on every field, the horizontal illuminance grid
  (:attr:`render.calc.fields.FieldResult.interreflected_lx`);
* on footways, the vertical and semicylindrical illuminance at the face fields' points
  (:attr:`render.calc.fields.FaceResult.interreflected_vertical_lx`,
  ``interreflected_semicylindrical_lx``), facing both ways along the field.

The direct figures (Ē, Emin, Emax, U0, E_v, E_sc, the headline and the class check) are not
touched: they are computed as before and the interreflected grids are kept beside them.

**How.** :meth:`render.study.Study.interreflected_transport` traces the lamp-independent
transport at the points (the scene's ``indirect_samples_per_pixel`` paths per point, up to N
interreflections, the scene's seed): each horizontal field on its own (point ``i`` of a field
hashes id ``i``, so the grid equals
:meth:`~render.study.Study.interreflected_illuminance_lx` at the field's points to the bit),
and every footway point 1.5 m up on :data:`~render.calc.fields.FACE_PLANES` vertical planes
round it in one pass. The vertical illuminance facing ±x is the plane facing that way; the
semicylindrical illuminance E_sc = (1/π)·∫ E_v(φ) dφ over the half circle is the trapezoidal
rule over those planes (:func:`render.calc.fields.half_circle_rule`, as for the night light),
taken on the transport itself (it is linear in the light).

**Relighting.** What is kept is the transport per light channel (:class:`InterreflectedFields`,
:class:`render.light.indirect.view.StoredTransport`), traced once per run with the first
setup's luminaires; every setup with the same photometric distributions gets its lamps,
lumens and dimming as a multiply (:meth:`InterreflectedFields.at`), without a ray. Exactness:
a new lamp spectrum or dimming changes nothing the paths depend on (the throughput is kept on
the 1 nm grid, the luminaire chosen at each vertex by its photometric illuminance), so the
relit grid equals a fresh trace up to rounding; a new lumens figure equals it exactly in
expectation (the choice of luminaire by illuminance shifts between groups, so the noise
differs, not the mean). A setup that changes a photometric distribution is traced again
(once per distinct set of distributions).

Derivations used by the checks (``tests/test_calc_interreflection.py``). Semicylindrical
illuminance is the luminous flux on the curved surface of a small vertical half-cylinder over
that surface's area (the definition of the International Lighting Vocabulary, CIE S 017, and
EN 13201-3, *memory*). A radiance L from elevation ε and azimuth α from the facing direction
lights the curved face's element facing φ with L·cos ε·max(cos(φ − α), 0) dω, whose mean over
φ ∈ [−π/2, π/2] is L·cos ε·(1 + cos α)/π dω. Seen from a point at height h above an infinite
Lambertian ground of reflectance ρ under a uniform illuminance E, the ground has L = ρE/π and
fills the lower hemisphere; with dω = cos ε dε dα:

* horizontal plane facing down: E = π·L = ρE (not a field's case);
* vertical plane: E_v = L·∫_{−π/2}^{π/2} cos α dα·∫_0^{π/2} cos² ε dε = L·2·π/4 = π·L/2 = ρE/2;
* half-cylinder: E_sc = (L/π)·∫_0^{2π} (1 + cos α) dα·∫_0^{π/2} cos² ε dε = (L/π)·2π·π/4
  = π·L/2 = ρE/2, the same as the vertical plane (in a uniform field every vertical element
  of the curved face receives the same).

References
----------
* EN 13201-3:2015 *Road lighting — Part 3: Calculation of performance* and CIE S 017:2020
  *ILV: International Lighting Vocabulary* (semicylindrical illuminance, its definition;
  *memory*).
* The Lambertian ground's luminance L = ρE/π and the illuminances above it: derived above
  (*own*, from the definition of luminance and the cosine law).
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass, field
from typing import TYPE_CHECKING

import numpy as np

from render.calc.fields import FACE_PLANES, face_plane_directions, half_circle_rule
from render.light.luminaires import LuminaireSet, needs_new_evaluation
from render.scene.model import Setup

if TYPE_CHECKING:
    from render.calc.fields import CalculationField
    from render.light.indirect.view import StoredTransport
    from render.study import Study

__all__ = ["InterreflectedFields", "InterreflectedGrids", "interreflected_on_fields"]

#: Hash ids of the face points start here, apart from the horizontal fields' (0, 1, …), so
#: that a face point and a field point below it draw independent paths.
FACE_FIRST_ID = 1 << 32


@dataclass(frozen=True)
class InterreflectedGrids:
    """The interreflected light on a calculation's grids under one setup, lx: ``horizontal``
    by field name (along, across), and per footway field and facing along the field (+1, −1)
    its ``vertical`` and ``semicylindrical`` grids at ``face_height_m``."""

    horizontal: dict[str, np.ndarray]
    vertical: dict[tuple[str, int], np.ndarray]
    semicylindrical: dict[tuple[str, int], np.ndarray]
    face_height_m: float


@dataclass(frozen=True)
class _Traced:
    """The transport of every grid, traced with one set of photometric distributions (``lights``)."""

    lights: LuminaireSet
    horizontal: dict[str, StoredTransport]
    vertical: dict[tuple[str, int], StoredTransport]
    semicylindrical: dict[tuple[str, int], StoredTransport]


@dataclass
class InterreflectedFields:
    """The interreflected transport on a calculation's fields, traced once and relit per setup
    (:meth:`at`; module text). ``traced`` keeps one trace per set of photometric
    distributions met so far (the first under ``first_setup``)."""

    study: Study
    fields: tuple[CalculationField, ...]
    bounces: int
    face_height_m: float
    planes: int = FACE_PLANES
    traced: list[_Traced] = field(default_factory=list)

    def _trace(self, setup: Setup | None) -> _Traced:
        study, b = self.study, self.bounces
        horizontal = {
            f.name: study.interreflected_transport(f.points_m, f.normals, setup, bounces=b) for f in self.fields
        }
        footways = [f for f in self.fields if f.name.startswith("footway ")]
        vertical: dict[tuple[str, int], StoredTransport] = {}
        semi: dict[tuple[str, int], StoredTransport] = {}
        if footways:
            dirs = face_plane_directions(self.planes)
            pts, nrm = [], []
            for f in footways:
                up = f.points_m + [0.0, 0.0, self.face_height_m]
                for k in range(self.planes):
                    pts.append(up)
                    nrm.append(f.to_world(dirs[k]))
            stored = study.interreflected_transport(
                np.concatenate(pts), np.concatenate(nrm), setup, bounces=b, first_id=FACE_FIRST_ID
            )
            start = 0
            half = self.planes // 2
            for f in footways:
                n = f.points_m.shape[0]
                # (plane, point) indices into the stored points of this field.
                index = start + np.arange(self.planes)[:, None] * n + np.arange(n)[None, :]
                for sign, centre in ((1, 0), (-1, half)):
                    vertical[(f.name, sign)] = stored.subset(index[centre])
                    idx, w = half_circle_rule(self.planes, centre)
                    semi[(f.name, sign)] = stored.combined(w, index[idx])
                start += n * self.planes
        return _Traced(study.lights(setup), horizontal, vertical, semi)

    def _for(self, setup: Setup | None) -> _Traced:
        for t in self.traced:
            if not needs_new_evaluation(t.lights, setup):
                return t
        t = self._trace(setup)
        self.traced.append(t)
        return t

    def at(self, setup: str | Setup | None = None) -> InterreflectedGrids:
        """The interreflected grids under ``setup`` (lx): a multiply of the stored transport
        when its photometric distributions are those traced, a new trace otherwise."""
        s = self.study.setup(setup)
        t = self._for(s)
        shape = {f.name: f.shape for f in self.fields}

        def lx(stored: StoredTransport, name: str) -> np.ndarray:
            return stored.illuminance_lx(self.study, s).reshape(shape[name])

        return InterreflectedGrids(
            horizontal={k: lx(v, k) for k, v in t.horizontal.items()},
            vertical={k: lx(v, k[0]) for k, v in t.vertical.items()},
            semicylindrical={k: lx(v, k[0]) for k, v in t.semicylindrical.items()},
            face_height_m=self.face_height_m,
        )


def interreflected_on_fields(
    study: Study,
    fields: Sequence[CalculationField],
    setup: str | Setup | None,
    *,
    bounces: int,
    face_height_m: float,
    planes: int = FACE_PLANES,
) -> InterreflectedFields:
    """The interreflected transport on ``fields`` traced under ``setup``'s luminaires (module
    text); :meth:`InterreflectedFields.at` gives it under any setup."""
    out = InterreflectedFields(study, tuple(fields), int(bounces), float(face_height_m), int(planes))
    out.traced.append(out._trace(study.setup(setup)))
    return out
