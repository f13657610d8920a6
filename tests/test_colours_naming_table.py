"""The stored CIELAB of the colour-naming prototypes against colour-science.

The naming model's prototypes are Munsell notations (render.analysis.naming); their CIELAB comes
from colour-science's Munsell renotation, which is slow, so ``tools/make_colour_tables.py``
stores it in ``render/data/colour/naming_prototypes.json``. Reference library: colour-science
(``munsell_colour_to_xyY``, the ASTM D1535 renotation data it bundles); every stored number must
equal what it gives, exactly (the file holds each double's round-trip repr).
"""

from __future__ import annotations

import numpy as np

from render.analysis import naming
from render.colour.tables import stored_prototype_lab


def test_stored_prototypes_equal_colour_science():
    for term, notation in naming.PROTOTYPES_MUNSELL.items():
        stored = stored_prototype_lab(term, notation)
        assert stored is not None, term
        assert stored.tobytes() == naming.munsell_to_lab(notation).tobytes(), term


def test_the_model_uses_the_prototypes_colour_science_gives():
    terms, lab, ucs = naming.prototypes()
    want = np.stack([naming.munsell_to_lab(naming.PROTOTYPES_MUNSELL[t]) for t in terms])
    assert lab.tobytes() == want.tobytes()
    assert ucs.tobytes() == naming.lab_to_cam16ucs(want).tobytes()


def test_a_changed_notation_is_not_given_the_stored_colour():
    assert stored_prototype_lab("red", "5R 4/14") is None
    assert stored_prototype_lab("teal", "5BG 5/6") is None
