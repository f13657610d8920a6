"""Night vision: from absolute light buffers to honest sRGB images.

See :mod:`render.vision.pipeline` for the order of the steps and the sources behind each.
Public entry points:

* :func:`render_display`, :func:`shared_display`, :func:`shared_and_adapted` -- the whole stage.
* :class:`ViewLight` (input contract), :class:`ViewGeometry`, :class:`ObserverSettings`,
  :class:`DisplayResult`, :class:`AdaptationState`.
* :func:`extra_channel_weights` -- an optional extra renderer channel (exact cone signals).

References
----------
Each module names the methods it uses; docs/references.md lists them all.
"""

from render.vision.adaptation import AdaptationState
from render.vision.appearance import extra_channel_weights
from render.vision.observer import ObserverSettings
from render.vision.pipeline import (
    MODES,
    DisplayResult,
    ViewLight,
    photometric_display,
    render_display,
    shared_and_adapted,
    shared_display,
)
from render.vision.view import ViewGeometry

__all__ = [
    "AdaptationState",
    "DisplayResult",
    "ViewLight",
    "MODES",
    "ObserverSettings",
    "ViewGeometry",
    "extra_channel_weights",
    "photometric_display",
    "render_display",
    "shared_and_adapted",
    "shared_display",
]
