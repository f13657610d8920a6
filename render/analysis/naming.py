"""Colour names: the basic colour term an observer would give a colour.

Model: nearest category centroid in CAM16-UCS
---------------------------------------------
The eleven basic colour terms of Berlin & Kay (1969, "Basic color terms: their universality and
evolution"): black, white, grey, red, green, yellow, blue, brown, orange, pink, purple.

Each term is represented by one prototype colour, and a colour gets the term whose prototype is
nearest in CAM16-UCS (Li et al. 2017, Color Res. Appl. 42(6); colour-science
``XYZ_to_CAM16UCS``), the uniform colour space of CAM16 made for both small and large colour
differences. Naming margin = distance to the runner-up minus distance to the winner (CAM16-UCS
units, roughly ΔE units): small margins are boundary colours that observers name
inconsistently.

Prototypes: **Centore (2020)**, "Beige, aqua, fuchsia, etc.: Definitions for some non-basic
surface colour names", J. International Colour Association 25, 24-54. From about 16,000
measured and named samples of the Color Association of the United States, Centore builds a
convex polyhedron in Munsell space for each name and gives its centroid, which "can be taken as
the name's focal colour". Ten of the eleven basic terms are covered (not black). The centroids,
Munsell notation (illuminant C), from the paper's supplementary polyhedron files
(``PolyhedronDataFor<name>.txt``, "Centroid in Munsell coordinates"), as transcribed in the public
repository ChrisGVE/MunsellSpace; blue, brown, red and white were read in the polyhedron files
themselves, the others in the repository's summary table of the same files:

========  ================
blue      0.56PB 4.69/4.64
brown     2.84YR 3.95/3.70
grey      9.62P 5.25/0.55
green     2.04G 5.33/4.75
orange    2.50YR 5.69/8.86
pink      0.70R 5.76/7.88
purple    6.81P 3.53/6.45
red       4.27R 3.79/8.82
white     2.07Y 8.01/2.02
yellow    2.64Y 7.44/7.98
========  ================

**black** is our choice, not from Centore: Munsell N 1.5/, a near-black neutral.

Conversion: Munsell renotation to xyY with colour-science (``munsell_colour_to_xyY``, ASTM
D1535 / the 1943 renotation, illuminant C), CAT16 (von Kries form, complete adaptation) from C to
D65, then CIELAB with the D65 white and CAM16-UCS for reference conditions: D65 white, adapting
luminance ``L_A = 1000 lx · 0.2 / π = 63.7 cd/m²`` (the 1000 lx of CIE 142-2001's reference
conditions with a Y_b = 20 background), average surround, illuminant discounted.

The lightness/chroma rule for the achromatic terms is the model itself: black, grey and white
are three prototypes among the eleven, so a colour is achromatic when it is nearer to one of
them than to any chromatic prototype (a low-chroma colour of middle lightness is grey; the
boundary between white and grey falls near Munsell value 6.6, half-way between the white and
grey centroids).

Input is CIELAB relative to a D65 white (the analysis's colours, see
:mod:`render.analysis.colours`): the colour as the adapted observer sees it, named as if shown
under reference conditions. The loss of colour at night is the vision stage's business
(rod intrusion, incomplete adaptation), not the naming model's.

Night names where hue is not available
--------------------------------------
Below the light level at which the discrimination model has chromatic data, or in rod vision
(:func:`render.vision.discrimination.hue_availability`), no hue is named: the colour gets the
achromatic term (black, grey, white) whose prototype's CAM16-UCS lightness J' is nearest
(:func:`lightness_name_details`), said as "looks grey; colour not reliable at this light level"
(:func:`night_name`). Lightness survives where hue does not; the phrase is lampcast's own.

References
----------
- B. Berlin, P. Kay (1969), "Basic color terms: their universality and evolution", University
  of California Press: the eleven basic terms.
- P. Centore (2020), "Beige, aqua, fuchsia, etc.: Definitions for some non-basic surface colour
  names", Journal of the International Colour Association 25, 24-54: the prototypes (see the
  module text for how they were read).
- C. Li et al. (2017), "Comprehensive color solutions: CAM16, CAT16, and CAM16-UCS", Color
  Research & Application 42(6): CAM16-UCS and CAT16 (colour-science's implementations).
- ASTM D1535 and the 1943 Munsell renotation (colour-science ``munsell_colour_to_xyY``).
- CIE 142-2001, "Improvement to industrial colour-difference evaluation": the 1000 lx of the
  reference conditions.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from functools import lru_cache

import numpy as np
import numpy.typing as npt

__all__ = [
    "ACHROMATIC_TERMS",
    "BASIC_TERMS",
    "COLOUR_NOT_RELIABLE",
    "NAMING_ADAPTING_LUMINANCE_CD_M2",
    "NAMING_BACKGROUND_Y",
    "PROTOTYPES_MUNSELL",
    "PROTOTYPE_SOURCE",
    "colour_name",
    "colour_name_details",
    "colour_names",
    "lab_to_cam16ucs",
    "lightness_name_details",
    "munsell_to_lab",
    "name_changes",
    "name_table",
    "naming_model_notes",
    "night_name",
    "prototypes",
    "term_distances",
]

#: The eleven basic colour terms (Berlin & Kay 1969), in their order.
BASIC_TERMS = ("black", "white", "grey", "red", "green", "yellow", "blue", "brown", "orange", "pink", "purple")
#: The terms that name no hue, used where hue is not available at night.
ACHROMATIC_TERMS = ("black", "grey", "white")
#: What a night name says where hue is not available.
COLOUR_NOT_RELIABLE = "colour not reliable at this light level"

#: Prototype of each term in Munsell notation (illuminant C); see the module text for sources.
PROTOTYPES_MUNSELL = {
    "black": "N1.5",
    "white": "2.07Y 8.01/2.02",
    "grey": "9.62P 5.25/0.55",
    "red": "4.27R 3.79/8.82",
    "green": "2.04G 5.33/4.75",
    "yellow": "2.64Y 7.44/7.98",
    "blue": "0.56PB 4.69/4.64",
    "brown": "2.84YR 3.95/3.70",
    "orange": "2.50YR 5.69/8.86",
    "pink": "0.70R 5.76/7.88",
    "purple": "6.81P 3.53/6.45",
}

#: Where each prototype comes from, in words (for reports).
PROTOTYPE_SOURCE = {
    term: (
        "lampcast's choice (Centore 2020 gives no black)"
        if term == "black"
        else "Centore 2020, JAIC 25:24-54, polyhedron centroid"
    )
    for term in BASIC_TERMS
}

#: CAM16 viewing conditions of the naming model (see module text).
NAMING_ADAPTING_LUMINANCE_CD_M2 = 1000.0 * 0.2 / np.pi
NAMING_BACKGROUND_Y = 20.0


def naming_model_notes() -> dict[str, object]:
    """The naming model and its sources, JSON-safe."""
    return {
        "model": "nearest category prototype in CAM16-UCS (Li et al. 2017), reference conditions "
        "D65, L_A = 63.7 cd/m2, Y_b = 20, average surround",
        "terms": "Berlin & Kay (1969) eleven basic colour terms",
        "prototypes": "Centore (2020) J. Int. Colour Assoc. 25:24-54, polyhedron centroids (Munsell, "
        "illuminant C); black = N 1.5/ (lampcast's choice)",
        "prototypes_munsell": dict(PROTOTYPES_MUNSELL),
        "margin": "distance to the runner-up minus distance to the chosen term, CAM16-UCS units",
    }


@lru_cache(maxsize=1)
def _d65_xy() -> np.ndarray:
    import colour

    return np.asarray(colour.CCS_ILLUMINANTS["CIE 1931 2 Degree Standard Observer"]["D65"], dtype=np.float64)


def lab_to_cam16ucs(lab: npt.ArrayLike) -> np.ndarray:
    """CAM16-UCS J', a', b' of CIELAB (..., 3) relative to D65, in the naming model's
    reference viewing conditions."""
    import colour

    lab = np.asarray(lab, dtype=np.float64)
    xy = _d65_xy()
    xyz = np.asarray(colour.Lab_to_XYZ(lab, xy), dtype=np.float64) * 100.0
    white = np.asarray(colour.xy_to_XYZ(xy), dtype=np.float64) * 100.0
    with np.errstate(invalid="ignore", divide="ignore"):
        return np.asarray(
            colour.XYZ_to_CAM16UCS(
                xyz,
                XYZ_w=white,
                L_A=NAMING_ADAPTING_LUMINANCE_CD_M2,
                Y_b=NAMING_BACKGROUND_Y,
                surround=colour.VIEWING_CONDITIONS_CAM16["Average"],
                discount_illuminant=True,
            ),
            dtype=np.float64,
        )


def munsell_to_lab(notation: str) -> np.ndarray:
    """CIELAB (D65 white) of a Munsell notation: colour-science renotation (illuminant C),
    CAT16 C -> D65 (complete adaptation)."""
    import colour

    xyy = np.asarray(colour.munsell_colour_to_xyY(notation), dtype=np.float64)
    xyz = np.asarray(colour.xyY_to_XYZ(xyy), dtype=np.float64)
    obs = colour.CCS_ILLUMINANTS["CIE 1931 2 Degree Standard Observer"]
    w_c = colour.xy_to_XYZ(obs["C"])
    w_d = colour.xy_to_XYZ(_d65_xy())
    xyz_d = colour.chromatic_adaptation(xyz, w_c, w_d, method="Von Kries", transform="CAT16")
    return np.asarray(colour.XYZ_to_Lab(xyz_d, _d65_xy()), dtype=np.float64)


@lru_cache(maxsize=1)
def prototypes() -> tuple[tuple[str, ...], np.ndarray, np.ndarray]:
    """``(terms, lab (11, 3), cam16ucs (11, 3))`` of the prototypes, in :data:`BASIC_TERMS` order.
    Their CIELAB is read from the stored table (:func:`render.colour.tables.stored_prototype_lab`,
    the same numbers colour-science gives) where it holds the term's notation, else computed."""
    from render.colour.tables import stored_prototype_lab

    def lab_of(term: str) -> np.ndarray:
        stored = stored_prototype_lab(term, PROTOTYPES_MUNSELL[term])
        return munsell_to_lab(PROTOTYPES_MUNSELL[term]) if stored is None else stored

    lab = np.stack([lab_of(t) for t in BASIC_TERMS])
    ucs = lab_to_cam16ucs(lab)
    lab.setflags(write=False)
    ucs.setflags(write=False)
    return BASIC_TERMS, lab, ucs


def term_distances(lab: npt.ArrayLike) -> np.ndarray:
    """CAM16-UCS distance from CIELAB colour(s) (..., 3) to each prototype, (..., 11)."""
    _, _, ucs = prototypes()
    j = lab_to_cam16ucs(lab)
    return np.linalg.norm(j[..., None, :] - ucs, axis=-1)


def _defined_lab(lab: npt.ArrayLike | None) -> np.ndarray | None:
    """One CIELAB colour as a (3,) float array, or None when it is missing or not finite."""
    if lab is None:
        return None
    lab = np.asarray(lab, dtype=np.float64)
    return lab if lab.shape == (3,) and np.all(np.isfinite(lab)) else None


def _nearest_terms(terms: tuple[str, ...], d: np.ndarray) -> dict[str, object]:
    """Term, margin over the runner-up, runner-up and every distance ``d`` (one per term)."""
    order = np.argsort(d, kind="stable")
    return {
        "term": terms[order[0]],
        "margin": float(d[order[1]] - d[order[0]]),
        "runner_up": terms[order[1]],
        "distances": {t: float(v) for t, v in zip(terms, d)},
    }


def colour_name_details(lab: npt.ArrayLike | None) -> dict[str, object] | None:
    """Term, margin, runner-up and all distances for one CIELAB colour (None if undefined)."""
    lab = _defined_lab(lab)
    return None if lab is None else _nearest_terms(BASIC_TERMS, term_distances(lab))


def lightness_name_details(lab: npt.ArrayLike | None) -> dict[str, object] | None:
    """Like :func:`colour_name_details` among :data:`ACHROMATIC_TERMS` only, by the distance of
    CAM16-UCS lightness J' alone (no hue, no chroma): the name of a colour whose hue is not
    available. ``None`` for an undefined colour."""
    lab = _defined_lab(lab)
    if lab is None:
        return None
    terms, _, ucs = prototypes()
    rows = [terms.index(t) for t in ACHROMATIC_TERMS]
    d = np.abs(lab_to_cam16ucs(lab)[0] - ucs[rows, 0])
    return _nearest_terms(ACHROMATIC_TERMS, d)


def night_name(term: str) -> str:
    """The name shown where hue is not available: ``"looks TERM; colour not reliable at this
    light level"``."""
    return f"looks {term}; {COLOUR_NOT_RELIABLE}"


def colour_name(lab: npt.ArrayLike | None) -> tuple[str | None, float | None]:
    """Basic colour term of a CIELAB colour (D65 white) and its naming margin.

    Returns ``(term, margin)``: the nearest prototype in CAM16-UCS and how much nearer it is
    than the runner-up (CAM16-UCS units). ``(None, None)`` for an undefined colour (NaN).
    """
    d = colour_name_details(lab)
    return (None, None) if d is None else (d["term"], d["margin"])


def colour_names(labs: npt.ArrayLike) -> list[tuple[str | None, float | None]]:
    """:func:`colour_name` of each row of ``labs`` (n, 3)."""
    return [colour_name(row) for row in np.asarray(labs, dtype=np.float64).reshape(-1, 3)]


def name_table(
    object_names: Sequence[str], daylight_labs: npt.ArrayLike, setup_labs: Mapping[str, npt.ArrayLike]
) -> list[dict]:
    """A colour-naming experiment's table: daylight name vs predicted name under each setup.

    Parameters
    ----------
    object_names
        n object labels.
    daylight_labs
        (n, 3) daylight reference CIELAB.
    setup_labs
        setup label -> (n, 3) CIELAB as seen (NaN rows: not visible).

    Returns
    -------
    One row per object: ``{"object", "daylight", "setups": {label: term or None},
    "changed": [labels where the term differs]}``.
    """
    day = colour_names(daylight_labs)
    per_setup = {k: colour_names(v) for k, v in setup_labs.items()}
    rows = []
    for i, name in enumerate(object_names):
        seen = {k: v[i][0] for k, v in per_setup.items()}
        rows.append(
            {
                "object": name,
                "daylight": day[i][0],
                "setups": seen,
                "changed": [k for k, t in seen.items() if t is not None and t != day[i][0]],
            }
        )
    return rows


def name_changes(rows: Sequence[dict]) -> list[dict]:
    """The names that change: ``{"object", "setup", "daylight", "seen", "text"}`` per change,
    e.g. text ``"car: green → brown"``."""
    out = []
    for r in rows:
        for setup in r["changed"]:
            seen = r["setups"][setup]
            out.append(
                {
                    "object": r["object"],
                    "setup": setup,
                    "daylight": r["daylight"],
                    "seen": seen,
                    "text": f"{r['object']}: {r['daylight']} → {seen}",
                }
            )
    return out
