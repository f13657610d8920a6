"""Where an output came from: hashes of inputs, for image metadata and reports."""

from __future__ import annotations

import hashlib
from pathlib import Path


def scene_sha256(path: str | Path) -> str:
    """SHA-256 of the scene file's bytes (hex)."""
    return hashlib.sha256(Path(path).read_bytes()).hexdigest()


def image_metadata(study, rendered, mode: str, observer, seed: int, spp: int) -> dict[str, str]:
    """PNG/EXR text metadata: how an image was made (no timestamps, so reruns are identical)."""
    from render import __version__

    return {
        "Software": f"lampcast {__version__}",
        "lampcast.scene": study.scene.path.name,
        "lampcast.scene_sha256": study.scene_sha256,
        "lampcast.setup": rendered.setup or "(scene)",
        "lampcast.view": rendered.name,
        "lampcast.mode": mode,
        "lampcast.observer": f"age {observer.age_years:g} y, pigmentation {observer.pigmentation:g}, "
        f"display peak {observer.display_peak_cd_m2:g} cd/m², glare {'on' if observer.glare else 'off'}, "
        f"acuity {'on' if observer.acuity else 'off'}",
        "lampcast.seed": str(seed),
        "lampcast.samples_per_pixel": str(spp),
    }
