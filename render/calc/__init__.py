"""Calculations: the numbers a lighting designer checks, computed from the scene's light.

* :mod:`.fields` -- the calculation grids of EN 13201-3:2015 / CIE 140 on the carriageway's
  lanes and the footways, their horizontal illuminance (Ē, Emin, Emax, U0), and on footways the
  semicylindrical and vertical illuminance at 1.5 m.
* :mod:`.classes` -- the lighting classes of EN 13201-2:2015 (P, M, C) as data, user class files,
  and a pass/fail check of achieved figures with margins, mesopic for P classes per CIE 191.
* :mod:`.road` -- road luminance for the standard observer from a user's r-table
  (:mod:`render.light.rtable`; none shipped) or, without one, the Lambertian result: L̄, U0, Ul.
* :mod:`.ti` -- the threshold increment TI from the luminaires' veiling luminance (20° screening
  angle, observer age), and the worst observer over lanes and both directions of traffic.
* :mod:`.edge` -- the edge illuminance ratio R_EI on strips beside each carriageway edge.
* :mod:`.obtrusive` -- obtrusive light: vertical illuminance on house fronts and luminous
  intensity toward their windows, against user-chosen limits.
* :mod:`.energy` -- input watts, dimming schedules, annual kWh, cost and CO₂ per setup.
* :mod:`.sky` -- direct and reflected upward flux, sky-glow weighting, notch-filterable share.
* :mod:`.interreflection` -- with ``--bounces N``, the luminaires' interreflected light on the
  fields and the footways' face grids, traced once and relit per setup, beside the direct figures.
* :mod:`.night` -- the night's other light (sky glow, moonlight, lit windows) on the same points.
* :mod:`.run` -- the whole calculation of a scene per setup (:class:`~render.calc.run.CalculationReport`),
  behind ``lampcast calc``.

References
----------
EN 13201-3:2015 and CIE 140-2000 (road lighting calculations); see :mod:`.fields`.
EN 13201-2:2015 (lighting classes) and CIE 191:2010 (mesopic photometry); see :mod:`.classes`.
CIE 140-2000 / EN 13201-3:2015 (road luminance, threshold increment); see :mod:`.road`, :mod:`.ti`.
EN 13201-2:2015 / CIE 140-2000 (edge illuminance ratio); see :mod:`.edge`.
CIE 150:2017 (obtrusive light); see :mod:`.obtrusive`.
"""

# Imported on first use (PEP 562), so that a module needing one part (the scene loader reads
# the dimming schedules of .energy) does not import the ray kernels of the others.
_LAZY = {
    "CalculationField": "fields",
    "ClassCheck": "classes",
    "ClassFigures": "classes",
    "EdgeResult": "edge",
    "FaceResult": "fields",
    "FieldResult": "fields",
    "LightingClass": "classes",
    "LuminanceResult": "road",
    "ObtrusiveLimits": "obtrusive",
    "ObtrusiveResult": "obtrusive",
    "RoadWorstCase": "ti",
    "TIResult": "ti",
    "check_class": "classes",
    "edge_illuminance_ratio": "edge",
    "edge_strip_width_m": "edge",
    "edge_strips": "edge",
    "evaluate_face_field": "fields",
    "evaluate_field": "fields",
    "evaluate_luminance_field": "road",
    "evaluate_obtrusive": "obtrusive",
    "facade_field": "obtrusive",
    "facade_fields": "obtrusive",
    "footway_across": "fields",
    "lane_across": "fields",
    "lighting_classes": "classes",
    "points_along": "fields",
    "road_luminance_cd_m2": "road",
    "road_worst_case": "ti",
    "row_fields": "fields",
    "row_positions": "fields",
    "semicylindrical_illuminance_lx": "fields",
    "street_fields": "fields",
    "threshold_increment": "ti",
    "veiling_luminance_cd_m2": "ti",
}


def __getattr__(name: str):
    """A name of ``__all__``, imported from its module when first asked for."""
    module = _LAZY.get(name)
    if module is None:
        raise AttributeError(f"module {__name__!r} has no attribute {name!r}")
    from importlib import import_module

    value = getattr(import_module(f"{__name__}.{module}"), name)
    globals()[name] = value
    return value


__all__ = [
    "CalculationField",
    "ClassCheck",
    "ClassFigures",
    "EdgeResult",
    "FaceResult",
    "FieldResult",
    "LightingClass",
    "LuminanceResult",
    "ObtrusiveLimits",
    "ObtrusiveResult",
    "RoadWorstCase",
    "TIResult",
    "check_class",
    "edge_illuminance_ratio",
    "edge_strip_width_m",
    "edge_strips",
    "evaluate_face_field",
    "evaluate_field",
    "evaluate_luminance_field",
    "evaluate_obtrusive",
    "facade_field",
    "facade_fields",
    "footway_across",
    "lane_across",
    "lighting_classes",
    "points_along",
    "road_luminance_cd_m2",
    "road_worst_case",
    "row_fields",
    "row_positions",
    "semicylindrical_illuminance_lx",
    "street_fields",
    "threshold_increment",
    "veiling_luminance_cd_m2",
]
