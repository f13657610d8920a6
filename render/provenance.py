"""Where an output came from: hashes of inputs, for image metadata and reports."""

from __future__ import annotations

import hashlib
from pathlib import Path


def scene_sha256(path: str | Path) -> str:
    """SHA-256 of the scene file's bytes (hex)."""
    return hashlib.sha256(Path(path).read_bytes()).hexdigest()
