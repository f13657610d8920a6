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

from importlib import import_module
from typing import Any

#: Where each public name lives; imported on first use (module ``__getattr__``, PEP 562), so that
#: importing one light module (e.g. :mod:`render.vision.observer` while a scene loads) does not
#: pull in the whole stage and its scipy and numba dependencies.
_HOMES = {
    "AdaptationState": "render.vision.adaptation",
    "extra_channel_weights": "render.vision.appearance",
    "ObserverSettings": "render.vision.observer",
    "MODES": "render.vision.pipeline",
    "DisplayResult": "render.vision.pipeline",
    "ViewLight": "render.vision.pipeline",
    "photometric_display": "render.vision.pipeline",
    "render_display": "render.vision.pipeline",
    "shared_and_adapted": "render.vision.pipeline",
    "shared_display": "render.vision.pipeline",
    "ViewGeometry": "render.vision.view",
}


def __getattr__(name: str) -> Any:
    if name in _HOMES:
        value = getattr(import_module(_HOMES[name]), name)
        globals()[name] = value
        return value
    raise AttributeError(f"module 'render.vision' has no attribute {name!r}")


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
