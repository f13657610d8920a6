"""Analyses of rendered views: telling colours apart at night.

* :mod:`render.analysis.colours` -- object colours as seen (after the vision stage) and under
  daylight, CIEDE2000 matrices, every pair judged by the light-level-aware discrimination
  model (:mod:`render.vision.discrimination`: multiple of threshold and verdict), the pairs
  that become hard to tell apart, luminance contrast, and :func:`colour_analysis` that
  assembles them into a :class:`ColourAnalysis` record (``to_json()``: the content of
  ``colours.json``).
* :mod:`render.analysis.naming` -- basic colour terms (Berlin & Kay) from the nearest
  Centore (2020) prototype in CAM16-UCS, and the night name where hue is not available
  ("looks grey; colour not reliable at this light level"); the rows of the "name it" table
  (printed by :mod:`render.output.colour_text`).
* :mod:`render.analysis.view_colours` -- rendered views under several setups to a
  :class:`ColourAnalysis`: each object's main surface, each object in its chosen or best view,
  the cone signals and scotopic luminance from the light buffers, the pixels' solid angles and
  each setup's own adaptation state (its JSON file and pictures are written by
  :mod:`render.output.colour_files`).
"""

from render.analysis.colours import (
    CONFUSED_VERDICTS,
    DISTINCT_IN_DAYLIGHT_DE00,
    ColourAnalysis,
    PairDifference,
    SetupDiscrimination,
    SetupView,
    TaggedObject,
    colour_analysis,
    confusions,
    delta_e_matrix,
    luminance_contrast,
    mixture_reflectance,
    object_colour_stats,
    perceived_view,
    reference_colour,
    reference_colour_mixture,
    relative_colour_image,
    ring_background,
    white_mesopic_cd_m2,
)
from render.analysis.naming import BASIC_TERMS, colour_name, name_changes, name_table, night_name

__all__ = [
    "BASIC_TERMS",
    "CONFUSED_VERDICTS",
    "DISTINCT_IN_DAYLIGHT_DE00",
    "ColourAnalysis",
    "PairDifference",
    "SetupDiscrimination",
    "SetupView",
    "TaggedObject",
    "colour_analysis",
    "colour_name",
    "confusions",
    "delta_e_matrix",
    "luminance_contrast",
    "mixture_reflectance",
    "name_changes",
    "name_table",
    "night_name",
    "object_colour_stats",
    "perceived_view",
    "reference_colour",
    "reference_colour_mixture",
    "relative_colour_image",
    "ring_background",
    "white_mesopic_cd_m2",
]
