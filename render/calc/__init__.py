"""Calculation fields: the numbers a lighting designer checks, computed from the scene's light.

* :mod:`.fields` -- the calculation grids of EN 13201-3:2015 / CIE 140 on the carriageway's
  lanes and the footways, their horizontal illuminance (Ē, Emin, Emax, U0), and on footways the
  semicylindrical and vertical illuminance at 1.5 m.
* :mod:`.classes` -- the lighting classes of EN 13201-2:2015 (P, M, C) as data, user class files,
  and a pass/fail check of achieved figures with margins, mesopic for P classes per CIE 191.

References
----------
EN 13201-3:2015 and CIE 140-2000 (road lighting calculations); see :mod:`.fields`.
EN 13201-2:2015 (lighting classes) and CIE 191:2010 (mesopic photometry); see :mod:`.classes`.
"""

from render.calc.classes import ClassCheck, ClassFigures, LightingClass, check_class, lighting_classes
from render.calc.fields import (
    CalculationField,
    FaceResult,
    FieldResult,
    evaluate_face_field,
    evaluate_field,
    footway_across,
    lane_across,
    points_along,
    row_fields,
    row_positions,
    semicylindrical_illuminance_lx,
    street_fields,
)

__all__ = [
    "CalculationField",
    "ClassCheck",
    "ClassFigures",
    "FaceResult",
    "FieldResult",
    "LightingClass",
    "check_class",
    "evaluate_face_field",
    "evaluate_field",
    "footway_across",
    "lane_across",
    "lighting_classes",
    "points_along",
    "row_fields",
    "row_positions",
    "semicylindrical_illuminance_lx",
    "street_fields",
]
