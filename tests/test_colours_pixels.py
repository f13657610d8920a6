"""The colour analysis' per-pixel inputs: object ids per pixel and cone signals at chosen pixels.

The buffers are written by hand (a few pixels of a few camera samples each); the expected ids
are read off them by the definitions in :mod:`render.analysis.view_colours`. Source of the
expected values: common practice, no source -- the ids follow from the buffers by counting, and
the cone signals at chosen pixels must equal those of the whole image, which the colorimetry
tests check against their published sources.
"""

from __future__ import annotations

import numpy as np
from test_colorimetry import FACTORS, LAMPS, _buffers, _reflectances

from render.analysis.view_colours import pixel_main_surface_ids, pixel_object_ids
from render.colour.colorimetry import resolve_responses
from render.light.integrator import LightBuffers
from render.vision.discrimination.cones import cone_rod_weights


def test_responses_at_chosen_pixels_are_those_of_the_whole_image():
    # Source: common practice, no source -- resolving a subset of the pixels gives, at those
    # pixels, the values of resolving every pixel to the bit (the same arithmetic per pixel),
    # and 0 elsewhere.
    b, refl = _buffers(), _reflectances()
    whole = resolve_responses(b, FACTORS, LAMPS, refl, cone_rod_weights())
    for mask in (
        np.array([[True, False, True], [False, True, False]]),
        np.array([[False, False, False], [False, False, True]]),
        np.zeros((2, 3), bool),
        np.ones((2, 3), bool),
    ):
        part = resolve_responses(b, FACTORS, LAMPS, refl, cone_rod_weights(), pixels=mask)
        assert part.shape == whole.shape
        assert part[mask].tobytes() == whole[mask].tobytes()
        assert not part[~mask].any()


def _id_buffers() -> LightBuffers:
    # 4 × 1 pixels, 3 samples each. Objects 0 and 1 (main surfaces: materials 2 and 0); object 2
    # has no main surface (-1); -1 is the sky.
    object_id = np.array([0, 0, 0, 0, 0, 1, 1, 1, 1, 2, 2, 2], np.int32)
    response = np.array([2, 2, 2, 2, 2, 0, 0, 0, 0, 1, 1, 1], np.int32)
    emitter = np.full(12, -1, np.int32)
    return LightBuffers(
        width_px=4,
        height_px=1,
        spp=3,
        response=response,
        value_cd_m2=np.zeros((12, 1), np.float32),
        emitter=emitter,
        object_id=object_id,
        material_names=["a", "b", "c"],
        channels=[],
    )


def test_pixel_ids_follow_their_definitions():
    # Source: the definitions (module text of render.analysis.view_colours): a pixel has an
    # object when every sample sees it and none a luminous opening; its main surface when
    # moreover every sample sees the object's main material.
    b = _id_buffers()
    main = np.array([2, 0, -1], np.int32)
    # pixel 0: object 0 on its main surface; 1: objects 0 and 1 mixed; 2: object 1 on its main
    # surface; 3: object 2, which has no main surface.
    assert pixel_object_ids(b).tolist() == [[0, -1, 1, 2]]
    assert pixel_main_surface_ids(b, main).tolist() == [[0, -1, 1, -1]]
    # One sample of pixel 2 sees another material of object 1: not its main surface.
    b.response[7] = 1
    assert pixel_main_surface_ids(b, main).tolist() == [[0, -1, -1, -1]]
    # One sample of pixel 0 sees a luminous opening: no object.
    b.emitter[1] = 0
    assert pixel_object_ids(b).tolist() == [[-1, -1, 1, 2]]
    assert pixel_main_surface_ids(b, main).tolist() == [[-1, -1, -1, -1]]
    # Sky samples (object -1) never make a main surface; ids beyond the table neither.
    b.object_id[9:12] = -1
    assert pixel_object_ids(b).tolist() == [[-1, -1, 1, -1]]
    assert pixel_main_surface_ids(b, np.array([2], np.int32)).tolist() == [[-1, -1, -1, -1]]
    assert pixel_object_ids(b).dtype == np.int32
