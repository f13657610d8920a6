"""The stated defaults of ``lampcast import-map``: what a map feature gets when its tags do not say.

Every value here is written into the imported scene beside the feature it was used for (in the
object's ``notes`` or a comment), so a designer can see and change it. The sizes are common
practice, with no single source; a local survey or the highway authority's records should replace
them where they matter.
"""

from __future__ import annotations

__all__ = [
    "ATTRIBUTION",
    "BUILDING_HEIGHT_M",
    "BUILDING_MATERIALS",
    "DEFAULT_LAMP",
    "FOOTWAY_WIDTH_M",
    "GROUND_MATERIAL",
    "HEDGE_DEPTH_M",
    "HEDGE_HEIGHT_M",
    "LAMP_HEIGHT_M",
    "LAMP_LUMENS",
    "LAMP_PHOTOMETRY",
    "LAMPS_BY_TAG",
    "LANE_WIDTH_M",
    "PATH_MATERIAL",
    "PATH_WIDTH_M",
    "PATH_TYPES",
    "ROAD_LANES",
    "ROAD_WIDTHS_M",
    "STOREY_HEIGHT_M",
    "WALL_HEIGHT_M",
    "WALL_THICKNESS_M",
]

#: The attribution OpenStreetMap data requires (the Open Database Licence, ODbL 1.0, §4.3;
#: the wording the OpenStreetMap Foundation asks for on its copyright page).
ATTRIBUTION = "© OpenStreetMap contributors, ODbL"

#: Height of one storey, m, for a building with ``building:levels`` but no ``height``
#: (common practice, no source: 2.7-3.3 m floor to floor in housing).
STOREY_HEIGHT_M = 3.0
#: Height of a building with neither ``height`` nor ``building:levels``, m: two storeys.
BUILDING_HEIGHT_M = 2 * STOREY_HEIGHT_M
#: ``building:material`` -> lampcast material; anything else is brick.
BUILDING_MATERIALS = {"brick": "brick", "concrete": "concrete", "wood": "wood", "timber_framing": "wood"}

#: Carriageway width, m, by ``highway`` type when a way gives neither ``width`` nor ``lanes``
#: (common practice, no source: about 3 m lanes on minor roads, 3.65 m on main roads).
ROAD_WIDTHS_M = {
    "motorway": 11.0,
    "trunk": 7.3,
    "primary": 7.3,
    "secondary": 7.3,
    "tertiary": 6.5,
    "unclassified": 5.5,
    "residential": 5.5,
    "living_street": 4.5,
    "service": 3.5,
    "road": 5.5,
}
#: Width of a lane, m, for a way with ``lanes`` but no ``width`` (common practice, no source).
LANE_WIDTH_M = 3.0
#: Lanes of a way without a ``lanes`` tag: one for service roads, two otherwise.
ROAD_LANES = {"service": 1}
#: Footway width on each side of a road, m, unless ``sidewalk`` says there is none (common
#: practice, no source: 2 m lets two people pass); service roads get none.
FOOTWAY_WIDTH_M = 2.0
#: ``highway`` types drawn as paths (a surfaced strip on the ground) rather than roads.
PATH_TYPES = ("footway", "path", "cycleway", "pedestrian", "steps", "bridleway", "track")
#: Width of a path without a ``width`` tag, m, and its surface.
PATH_WIDTH_M = 2.0
PATH_MATERIAL = "concrete-paving"
#: The ground around the roads, 1 cm below the carriageway.
GROUND_MATERIAL = "grass"

#: A hedge without ``height``, m, and its depth (the ``hedge`` object's own defaults).
HEDGE_HEIGHT_M = 1.2
HEDGE_DEPTH_M = 0.8
#: A wall without ``height``, m, and its thickness (common practice, no source: garden walls).
WALL_HEIGHT_M = 1.5
WALL_THICKNESS_M = 0.25

#: Mounting height of an existing street lamp without ``height``, m (residential streets 4-6 m;
#: common practice, no source).
LAMP_HEIGHT_M = 6.0
#: The placeholder lamp of the ``existing`` setup, chosen from ``lamp_type`` or
#: ``light:method`` where the map gives it; the user assigns the real one.
LAMPS_BY_TAG = {
    "sodium": "sodium-high-pressure-cie-hp1",
    "high_pressure_sodium": "sodium-high-pressure-cie-hp1",
    "low_pressure_sodium": "sodium-low-pressure",
    "led": "led-4000k-cie-b3",
    "mercury": "mercury-vapour-lines",
    "metal-halide": "metal-halide-cie-hp3",
    "metal_halide": "metal-halide-cie-hp3",
}
DEFAULT_LAMP = "sodium-high-pressure-cie-hp1"
LAMP_PHOTOMETRY = "generic-road-asymmetric"
#: Placeholder lamp lumens (a 70 W high-pressure sodium lamp is about 6 000 lm; common
#: practice, no source).
LAMP_LUMENS = 6000.0
