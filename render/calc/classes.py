"""Lighting classes: presets of EN 13201-2:2015 and a pass/fail check with margins.

A *lighting class* is a set of criteria a lit area should meet: minima (mean luminance L̄,
mean and minimum illuminance Ē and Emin, uniformities U0 and Ul, edge illuminance ratio R_EI)
and a maximum (threshold increment f_TI, %). The classes are data, not code: the P, M and C
classes of EN 13201-2:2015 ship as ``render/data/classes/en13201-2.toml`` (its header
documents the schema); a user's class file of the same schema adds classes or replaces a
preset whole (:func:`lighting_classes`).

:func:`check_class` compares a :class:`ClassFigures` record of achieved values with a class.
For each criterion the class sets it reports the required and achieved value, ``"pass"``,
``"fail"`` or ``"not computed"`` (the figure is missing: never a pass), and the margin

* for a minimum, ``achieved/required − 1`` (0 at the limit, > 0 with room to spare);
* for a maximum (f_TI), ``1 − achieved/required``.

A value exactly at the limit passes; values are compared as given, without rounding. U0 is
one figure: the caller gives the uniformity the class means (of luminance for M classes, of
illuminance for C classes).

Mesopic adjustment (CIE 191:2010, MES2), where the user asks, for P classes only: given the
lamp's S/P ratio, Ē and Emin are replaced by their mesopic values at the adaptation state of
the area. The adaptation luminance is taken as that of a diffuse surface of reflectance ρ
under Ē, ``L_p = ρ·Ē/π``, with ``L_s = S/P·L_p`` (default ρ = 0.2, lampcast's own choice for
footway and minor-road surfaces, no source; CIE 191 leaves the adaptation field to the
application). :func:`render.vision.mesopic.solve_mes2` gives the adaptation coefficient m, and
every illuminance is scaled by the same factor as the adaptation luminance,
``L_mes(m)/L_p`` (the MES2 equation is linear in the stimulus at fixed m). At S/P = 1 the factor
is 1; at or above 5 cd/m² (m = 1) it is 1; for S/P > 1 in the mesopic range it exceeds 1. The
adjusted criteria are labelled ``"mesopic (CIE 191)"``.

Caution (also in every :meth:`ClassCheck.to_json`): a design check for discussion, not a
certificate; verify against the current edition and local codes.

References
----------
- EN 13201-2:2015 *Road lighting — Part 2: Performance requirements*: the P, M and C classes
  and their criteria. *secondary* (values read in a source quoting the standard; the data file
  marks each class so).
- CIE 191:2010 *Recommended system for mesopic photometry based on visual performance*, MES2:
  see :mod:`render.vision.mesopic`.
"""

from __future__ import annotations

import math
import os
import tomllib
from collections.abc import Mapping
from dataclasses import dataclass
from functools import lru_cache
from importlib.resources import files
from typing import Any

import numpy as np

from render.errors import ProblemList, did_you_mean

__all__ = [
    "CAUTION",
    "CLASSES_RESOURCE",
    "CRITERIA",
    "DEFAULT_ADAPTATION_REFLECTANCE",
    "MESOPIC_LABEL",
    "PHOTOPIC_LABEL",
    "ClassCheck",
    "ClassFigures",
    "Criterion",
    "CriterionCheck",
    "LightingClass",
    "MesopicAdjustment",
    "builtin_classes",
    "check_class",
    "lighting_classes",
    "mesopic_adjustment",
    "parse_classes",
    "read_class_file",
]

#: The standing caution of every class check.
CAUTION = "a design check for discussion, not a certificate; verify against the current edition and local codes"
#: Where the presets live, as package data of :mod:`render`.
CLASSES_RESOURCE = ("data", "classes", "en13201-2.toml")
#: Label of criteria compared in photopic and in mesopic photometry.
PHOTOPIC_LABEL = "photopic"
MESOPIC_LABEL = "mesopic (CIE 191)"
#: Reflectance of the surface whose luminance is the adaptation luminance of a P class (own choice).
DEFAULT_ADAPTATION_REFLECTANCE = 0.2


@dataclass(frozen=True)
class Criterion:
    """One kind of criterion: its key (in class files and :class:`ClassFigures`), symbol,
    whether the class value is a ``"min"`` or a ``"max"``, and unit (``""`` for a ratio)."""

    key: str
    symbol: str
    bound: str
    unit: str


#: Every criterion a class may set, in the order checks list them.
CRITERIA: tuple[Criterion, ...] = (
    Criterion("mean_luminance_cd_m2", "L̄", "min", "cd/m²"),
    Criterion("mean_illuminance_lx", "Ē", "min", "lx"),
    Criterion("min_illuminance_lx", "Emin", "min", "lx"),
    Criterion("overall_uniformity", "U0", "min", ""),
    Criterion("longitudinal_uniformity", "Ul", "min", ""),
    Criterion("threshold_increment_pct", "f_TI", "max", "%"),
    Criterion("edge_illuminance_ratio", "R_EI", "min", ""),
)
_CRITERION_KEYS = tuple(c.key for c in CRITERIA)
_ILLUMINANCE_KEYS = ("mean_illuminance_lx", "min_illuminance_lx")
_TEXT_KEYS = ("series", "source", "confidence")


@dataclass(frozen=True)
class LightingClass:
    """A lighting class: name, series (``"P"``, ``"M"``, ``"C"`` or a user's word), the
    criteria it sets (``None`` = not part of the class), where the values come from and how far
    they were checked."""

    name: str
    series: str
    source: str
    confidence: str
    mean_luminance_cd_m2: float | None = None
    mean_illuminance_lx: float | None = None
    min_illuminance_lx: float | None = None
    overall_uniformity: float | None = None
    longitudinal_uniformity: float | None = None
    threshold_increment_pct: float | None = None
    edge_illuminance_ratio: float | None = None


@dataclass(frozen=True)
class ClassFigures:
    """Achieved values of a design, photopic; any may be ``None`` (not computed)."""

    mean_luminance_cd_m2: float | None = None
    mean_illuminance_lx: float | None = None
    min_illuminance_lx: float | None = None
    overall_uniformity: float | None = None
    longitudinal_uniformity: float | None = None
    threshold_increment_pct: float | None = None
    edge_illuminance_ratio: float | None = None


@dataclass(frozen=True)
class CriterionCheck:
    """One criterion of a check: required and achieved value, status (``"pass"``, ``"fail"``,
    ``"not computed"``), margin (``None`` when not computed) and photometry label."""

    key: str
    symbol: str
    bound: str
    unit: str
    required: float
    achieved: float | None
    status: str
    margin: float | None
    photometry: str

    def to_json(self) -> dict[str, Any]:
        """The check as JSON-ready values."""
        return {
            "key": self.key,
            "symbol": self.symbol,
            "bound": self.bound,
            "unit": self.unit,
            "required": self.required,
            "achieved": self.achieved,
            "status": self.status,
            "margin": self.margin,
            "photometry": self.photometry,
        }


@dataclass(frozen=True)
class MesopicAdjustment:
    """The mesopic state of a P-class check: S/P ratio, assumed reflectance, photopic
    adaptation luminance, MES2 adaptation coefficient m and the factor applied to illuminance."""

    s_p_ratio: float
    reflectance: float
    adaptation_luminance_cd_m2: float
    adaptation_coefficient: float
    factor: float

    def to_json(self) -> dict[str, Any]:
        """The adjustment as JSON-ready values."""
        return {
            "method": MESOPIC_LABEL,
            "s_p_ratio": self.s_p_ratio,
            "reflectance": self.reflectance,
            "adaptation_luminance_cd_m2": self.adaptation_luminance_cd_m2,
            "adaptation_coefficient": self.adaptation_coefficient,
            "factor": self.factor,
        }


@dataclass(frozen=True)
class ClassCheck:
    """A class check: the class, each criterion's check and the overall verdict.

    ``verdict`` is ``"pass"`` when every criterion passes, ``"fail"`` when any fails, otherwise
    ``"not computed"`` (some figure missing).
    """

    lighting_class: LightingClass
    criteria: tuple[CriterionCheck, ...]
    mesopic: MesopicAdjustment | None = None

    @property
    def verdict(self) -> str:
        statuses = {c.status for c in self.criteria}
        if "fail" in statuses:
            return "fail"
        if "not computed" in statuses or not self.criteria:
            return "not computed"
        return "pass"

    def to_json(self) -> dict[str, Any]:
        """The check as JSON-ready values, with the standing caution."""
        cls = self.lighting_class
        return {
            "class": cls.name,
            "series": cls.series,
            "source": cls.source,
            "confidence": cls.confidence,
            "verdict": self.verdict,
            "criteria": [c.to_json() for c in self.criteria],
            "mesopic": self.mesopic.to_json() if self.mesopic is not None else None,
            "caution": CAUTION,
        }


# ----------------------------------------------------------------------------- reading


def _is_number(value: Any) -> bool:
    return isinstance(value, (int, float)) and not isinstance(value, bool)


def parse_classes(data: Mapping[str, Any], source: str) -> dict[str, LightingClass]:
    """The classes of a parsed class file (``{"classes": {NAME: {...}}}``), by name.

    Every mistake (an unknown or missing key, a value that is not a positive finite number, a
    class with no criterion) is collected and raised as one :class:`InputError` naming
    ``source`` and the key path, e.g. ``classes.P4.mean_illuminance_lx``.
    """
    problems = ProblemList(source)
    for key in data:
        if key != "classes":
            problems.add(
                key, f"unknown top-level key; a class file holds [classes.NAME] tables{did_you_mean(key, ['classes'])}"
            )
    tables = data.get("classes")
    if not isinstance(tables, Mapping) or not tables:
        problems.add("classes", "expected one or more [classes.NAME] tables")
        problems.raise_if_any()
    out: dict[str, LightingClass] = {}
    for name, table in tables.items():
        where = f"classes.{name}"
        if not isinstance(table, Mapping):
            problems.add(where, "expected a table of criteria")
            continue
        before = len(problems.items)
        values: dict[str, Any] = {}
        for key, value in table.items():
            path = f"{where}.{key}"
            if key in _TEXT_KEYS:
                if not isinstance(value, str) or not value.strip():
                    problems.add(path, "expected a non-empty text")
                else:
                    values[key] = value.strip()
            elif key in _CRITERION_KEYS:
                if not _is_number(value) or not math.isfinite(value) or value <= 0:
                    problems.add(path, "expected a positive number")
                else:
                    values[key] = float(value)
            else:
                problems.add(path, f"unknown key{did_you_mean(key, _TEXT_KEYS + _CRITERION_KEYS)}")
        if "series" not in table:
            problems.add(f"{where}.series", 'missing; expected e.g. "P", "M" or "C"')
        if not any(k in table for k in _CRITERION_KEYS):
            problems.add(where, f"sets no criterion; expected one or more of {', '.join(_CRITERION_KEYS)}")
        if len(problems.items) == before:
            values.setdefault("source", source)
            values.setdefault("confidence", "user file")
            out[str(name)] = LightingClass(name=str(name), **values)
    problems.raise_if_any()
    return out


def read_class_file(path: str | os.PathLike) -> dict[str, LightingClass]:
    """The classes of a user's class file (TOML, the schema of the shipped presets).

    A syntax error is an :class:`InputError` naming the line; a wrong key or value one naming
    the key path (:func:`parse_classes`).
    """
    from render.fileio import read_user_toml

    data = read_user_toml(path, "class file", "a UTF-8 TOML class file")
    return parse_classes(data, str(path))


@lru_cache(maxsize=1)
def builtin_classes() -> dict[str, LightingClass]:
    """The shipped EN 13201-2:2015 presets by name (read once)."""
    resource = files("render").joinpath(*CLASSES_RESOURCE)
    return parse_classes(tomllib.loads(resource.read_text(encoding="utf-8")), "/".join(CLASSES_RESOURCE))


def lighting_classes(user_file: str | os.PathLike | None = None) -> dict[str, LightingClass]:
    """The presets, with a user's class file's classes added or replacing presets of the same name."""
    out = dict(builtin_classes())
    if user_file is not None:
        out.update(read_class_file(user_file))
    return out


# ----------------------------------------------------------------------------- checking


def mesopic_adjustment(
    mean_illuminance_lx: float, s_p_ratio: float, reflectance: float = DEFAULT_ADAPTATION_REFLECTANCE
) -> MesopicAdjustment:
    """The MES2 state of an area lit to Ē with a lamp of the given S/P (see the module text).

    ``L_p = ρ·Ē/π``, ``L_s = S/P·L_p``; m from :func:`render.vision.mesopic.solve_mes2`;
    ``factor = L_mes/L_p`` (1 when ``L_p`` is 0).
    """
    from render.vision.mesopic import solve_mes2

    if not (math.isfinite(s_p_ratio) and s_p_ratio > 0):
        raise ValueError(f"S/P ratio must be a positive number, not {s_p_ratio!r}")
    if not (0 < reflectance <= 1):
        raise ValueError(f"reflectance must be in (0, 1], not {reflectance!r}")
    lp = reflectance * max(float(mean_illuminance_lx), 0.0) / math.pi
    lmes, m = solve_mes2(np.float64(lp), np.float64(s_p_ratio * lp))
    factor = float(lmes) / lp if lp > 0 else 1.0
    return MesopicAdjustment(float(s_p_ratio), float(reflectance), lp, float(m), factor)


def _criterion_check(criterion: Criterion, required: float, achieved: float | None, photometry: str) -> CriterionCheck:
    if achieved is None or not math.isfinite(achieved):
        return CriterionCheck(
            criterion.key,
            criterion.symbol,
            criterion.bound,
            criterion.unit,
            required,
            None,
            "not computed",
            None,
            photometry,
        )
    if criterion.bound == "min":
        ok = achieved >= required
        margin = achieved / required - 1.0
    else:
        ok = achieved <= required
        margin = 1.0 - achieved / required
    return CriterionCheck(
        criterion.key,
        criterion.symbol,
        criterion.bound,
        criterion.unit,
        required,
        float(achieved),
        "pass" if ok else "fail",
        margin,
        photometry,
    )


def check_class(
    cls: LightingClass,
    figures: ClassFigures,
    *,
    s_p_ratio: float | None = None,
    reflectance: float = DEFAULT_ADAPTATION_REFLECTANCE,
) -> ClassCheck:
    """Check achieved figures against a lighting class.

    Parameters
    ----------
    cls
        The class (:func:`lighting_classes`).
    figures
        Achieved photopic values; a missing one makes its criterion ``"not computed"``.
    s_p_ratio
        The lamp's S/P ratio to compare Ē and Emin in mesopic photometry (CIE 191, module
        text); only for P classes (``ValueError`` otherwise). ``None``: photopic.
    reflectance
        Reflectance of the surface whose luminance sets the adaptation state (mesopic only).
    """
    mesopic = None
    if s_p_ratio is not None:
        if cls.series != "P":
            raise ValueError(f"the mesopic adjustment applies to P classes, not to {cls.name} ({cls.series})")
        if figures.mean_illuminance_lx is not None:
            mesopic = mesopic_adjustment(figures.mean_illuminance_lx, s_p_ratio, reflectance)
    checks = []
    for criterion in CRITERIA:
        required = getattr(cls, criterion.key)
        if required is None:
            continue
        achieved = getattr(figures, criterion.key)
        photometry = PHOTOPIC_LABEL
        if s_p_ratio is not None and criterion.key in _ILLUMINANCE_KEYS:
            photometry = MESOPIC_LABEL
            achieved = None if (achieved is None or mesopic is None) else achieved * mesopic.factor
        checks.append(_criterion_check(criterion, required, achieved, photometry))
    return ClassCheck(cls, tuple(checks), mesopic)
