"""Small scenes written out for tests: TOML text that more than one test file reads.

Each builder writes one scene file into a given folder and returns its path. The scenes are
made up for the tests; only what each one shows (which object stands in which view) matters.
"""

from __future__ import annotations

from pathlib import Path

from render.scene.model import Street, StreetSide

__all__ = ["TWO_OBJECTS_SETUPS_NIGHT", "TWO_OBJECTS_SETUPS_OLD_NEW", "street_model", "write_two_objects_scene"]

_TWO_OBJECTS_SCENE = """
[scene]
name = "a van and a bin far apart"

[street]
length_m = 60.0
carriageway_width_m = 6.0

[[objects]]
kind = "car"
name = "orange van"
inspect = true
position_m = [8.0, 2.2]
params = {{ body_style = "van" }}
materials = {{ body = "object-orange" }}

[[objects]]
kind = "wheelie_bin"
name = "green bin"
inspect = true
position_m = [50.0, -4.0]
materials = {{ body = "object-green" }}

[[luminaire_rows]]
spacing_m = 20.0
count = 3
start_m = 5.0
mounting_height_m = 5.0
lamp = "led-3000k-cie-b2"

[[views]]
name = "van"
position_m = [16.0, 0.0]
target_m = [8.0, 2.2, 1.0]
resolution = [96, 54]

[[views]]
name = "bin"
position_m = [44.0, -2.0]
target_m = [50.0, -4.0, 0.5]
resolution = [96, 54]
{extra}
[render]
samples_per_pixel = 1
{setups}"""

#: Setups of the two-objects scene for a comparison: "old" (low-pressure sodium) and "new" (LED).
TWO_OBJECTS_SETUPS_OLD_NEW = """
[setups.old]
lamp = "sodium-low-pressure"

[setups.new]
lamp = "led-3000k-cie-b2"
"""

#: The one setup of the two-objects scene for a single lighting: "night" (LED).
TWO_OBJECTS_SETUPS_NIGHT = """
[setups.night]
lamp = "led-3000k-cie-b2"
"""


def write_two_objects_scene(folder: Path, extra: str = "", setups: str = TWO_OBJECTS_SETUPS_OLD_NEW) -> Path:
    """Write a scene in which no view shows both tagged objects: an orange van seen in view
    "van", a green bin 42 m away seen in view "bin". ``extra`` is TOML text added before
    ``[render]`` (e.g. a ``[colour]`` table); ``setups`` the ``[setups.*]`` tables."""
    path = folder / f"two-{len(extra)}.toml"
    path.write_text(_TWO_OBJECTS_SCENE.format(extra=extra, setups=setups), encoding="utf-8")
    return path


def street_model(
    width_m: float = 7.0, lanes: int = 2, footway_m: float = 2.0, verge_m: float = 0.5, kerb_h: float = 0.12
) -> Street:
    """A 100 m straight street with the same footway and verge on both sides (the calculation
    tests work their expected grids out by hand from these widths)."""
    side = StreetSide(
        footway_width_m=footway_m,
        verge_width_m=verge_m,
        frontage_depth_m=3.0,
        footway_material="concrete-paving",
        verge_material="grass",
        frontage_material="grass",
    )
    return Street(
        length_m=100.0,
        carriageway_width_m=width_m,
        lanes=lanes,
        kerb_height_m=kerb_h,
        kerb_width_m=0.15,
        carriageway_material="asphalt-worn",
        kerb_material="concrete-kerb",
        centre_line="none",
        line_material="paint-road-white",
        left=side,
        right=side,
    )
