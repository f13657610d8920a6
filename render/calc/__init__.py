"""Calculation fields: the numbers a lighting designer checks, computed from the scene's light.

* :mod:`.fields` -- the calculation grids of EN 13201-3:2015 / CIE 140 on the carriageway's
  lanes and the footways, and their horizontal illuminance (Ē, Emin, Emax, U0).

References
----------
EN 13201-3:2015 and CIE 140-2000 (road lighting calculations); see :mod:`.fields`.
"""

from render.calc.fields import (
    CalculationField,
    FieldResult,
    evaluate_field,
    footway_across,
    lane_across,
    points_along,
    row_fields,
    row_positions,
    street_fields,
)

__all__ = [
    "CalculationField",
    "FieldResult",
    "evaluate_field",
    "footway_across",
    "lane_across",
    "points_along",
    "row_fields",
    "row_positions",
    "street_fields",
]
