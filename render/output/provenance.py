"""Where an output came from: hashes of inputs, for image metadata and reports.

The text goes into PNG ``tEXt``/``iTXt`` chunks (:mod:`render.output.images`) and EXR header
attributes (:mod:`render.output.hdr`); it holds no timestamps, so reruns give the same bytes.

References
----------
- FIPS 180-4, Secure Hash Standard (SHA-256), through Python's :mod:`hashlib`.
- ISO/IEC 15948:2004 (PNG): the ``Software`` keyword of the text chunks.
"""

from __future__ import annotations

import hashlib
from pathlib import Path
from typing import TYPE_CHECKING

if TYPE_CHECKING:
    from render.study import RenderedView, Study
    from render.vision.observer import ObserverSettings

__all__ = ["image_metadata", "scene_sha256", "view_metadata"]


def scene_sha256(path: str | Path) -> str:
    """SHA-256 of the scene file's bytes (hex)."""
    return hashlib.sha256(Path(path).read_bytes()).hexdigest()


def view_metadata(study: Study, view: str, mode: str, seed: int, spp: int) -> dict[str, str]:
    """PNG/EXR text metadata of an image of the scene's geometry alone (no setup, no observer,
    e.g. the inspection images of ``render --aov``): tool, scene and its hash, view, mode,
    seed and samples per pixel. No timestamps, so reruns are identical."""
    from render import __version__

    meta = {
        "Software": f"lampcast {__version__}",
        "lampcast.scene": study.scene.path.name,
        "lampcast.scene_sha256": study.scene_sha256,
        "lampcast.view": view,
        "lampcast.mode": mode,
        "lampcast.seed": str(seed),
        "lampcast.samples_per_pixel": str(spp),
    }
    if study.scene.attribution:  # the scene's data require it (e.g. a map licence): [scene] attribution
        meta["lampcast.attribution"] = study.scene.attribution
    return meta


def image_metadata(
    study: Study, rendered: RenderedView, mode: str, observer: ObserverSettings, seed: int, spp: int
) -> dict[str, str]:
    """PNG/EXR text metadata: how an image was made (no timestamps, so reruns are identical):
    :func:`view_metadata` plus the setup and the observer, and how interreflected light was
    traced (:meth:`render.light.indirect.IndirectSettings.describe`) when the view holds it,
    and the night's sky glow and moonlight (``lampcast.night_light``) when on
    (none of this when it is direct light only, so such images keep their bytes)."""
    meta = {
        **view_metadata(study, rendered.name, mode, seed, spp),
        "lampcast.setup": rendered.setup or "(scene)",
        "lampcast.observer": f"age {observer.age_years:g} y, pigmentation {observer.pigmentation:g}, "
        f"display peak {observer.display_peak_cd_m2:g} cd/m², glare {'on' if observer.glare else 'off'}, "
        f"acuity {'on' if observer.acuity else 'off'}",
    }
    indirect = rendered.buffers.indirect
    if indirect is not None:
        if indirect.settings.bounces > 0:
            meta["lampcast.interreflection"] = indirect.settings.describe()
        if indirect.settings.ambient:
            from render.light.indirect.night import describe_night

            meta["lampcast.night_light"] = describe_night(indirect.settings.night)
    return meta
