"""Images of the report: read once each from the output folder and embedded as ``data:`` URIs.

The page fetches nothing: every image is inlined as base64 (RFC 2397 ``data:`` URI, RFC 4648
base64). The type and pixel size come from the file's own header (PNG: ISO/IEC 15948 IHDR;
GIF89a logical screen descriptor), so the browser can lay the page out before decoding.

References
----------
* RFC 2397, The "data" URL scheme; RFC 4648, base64.
* ISO/IEC 15948:2004 (PNG) and the GIF89a specification, for the signatures and sizes.
"""

from __future__ import annotations

import base64
from dataclasses import dataclass
from pathlib import Path

__all__ = ["EmbeddedImage", "ImageFolder", "image_info"]


def image_info(data: bytes) -> tuple[str, int | None, int | None]:
    """(MIME type, width px, height px) from the file's signature and header; the size is
    ``None`` for JPEG and WebP. Raises ``ValueError`` for anything else."""
    if data[:8] == b"\x89PNG\r\n\x1a\n" and data[12:16] == b"IHDR":
        return "image/png", int.from_bytes(data[16:20], "big"), int.from_bytes(data[20:24], "big")
    if data[:6] in (b"GIF87a", b"GIF89a"):
        return "image/gif", int.from_bytes(data[6:8], "little"), int.from_bytes(data[8:10], "little")
    if data[:3] == b"\xff\xd8\xff":
        return "image/jpeg", None, None
    if data[:4] == b"RIFF" and data[8:12] == b"WEBP":
        return "image/webp", None, None
    raise ValueError("not a PNG, GIF, JPEG or WebP image")


@dataclass(frozen=True)
class EmbeddedImage:
    """An image as the page shows it: its ``data:`` URI and size (px; ``None``: not known)."""

    src: str
    width: int | None
    height: int | None


#: What a missing or unreadable image becomes (the problem is reported; no page is written).
_NOTHING = EmbeddedImage("data:,", None, None)


class ImageFolder:
    """The images named by relative path under ``out_dir``, each read once.

    Problems (a path outside the folder, a missing file, not an image) are collected in
    :attr:`problems` rather than raised, so that all of them can be reported together.
    """

    def __init__(self, out_dir: Path):
        self.root = Path(out_dir).resolve()
        self.problems: list[str] = []
        self._cache: dict[str, EmbeddedImage] = {}

    def get(self, relpath: str) -> EmbeddedImage:
        """The image at ``relpath`` (relative to the folder) as a :class:`EmbeddedImage`."""
        if relpath in self._cache:
            return self._cache[relpath]
        entry = _NOTHING
        path = (self.root / relpath).resolve()
        if Path(relpath).is_absolute() or not path.is_relative_to(self.root):
            self.problems.append(f"{relpath}: image path must be relative to, and inside, {self.root}")
        elif not path.is_file():
            self.problems.append(f"{relpath}: image file not found in {self.root}")
        else:
            data = path.read_bytes()
            try:
                mime, width, height = image_info(data)
            except ValueError as exc:
                self.problems.append(f"{relpath}: {exc}")
            else:
                entry = EmbeddedImage(f"data:{mime};base64,{base64.b64encode(data).decode('ascii')}", width, height)
        self._cache[relpath] = entry
        return entry
