"""Images of the report: read once each from the output folder and embedded compactly as ``data:`` URIs.

The page fetches nothing: every image is inlined as base64 (RFC 2397 ``data:`` URI, RFC 4648
base64). The files beside the report stay as they were written (full-quality PNG, the wipe
GIFs); what the page embeds is chosen per image by :func:`compact_image` from the kind of
picture the file says it is (:data:`render.output.images.PICTURE_KEY`, written by lampcast):

* a **rendered** image (a view, its luminance map, the side-by-side image) with at most 256
  colours (the luminance maps: one colour per band of the scale) -> lossless WebP, the same
  pixels;
* any other **rendered** image -> lossy WebP at quality :data:`RENDERED_QUALITY`
  (libwebp, colour at half resolution). On the demo's 40 views (960 x 540) it differs from the
  PNG by CIEDE2000 0.78 on average (the worst image 0.93; 95th percentiles at most 2.5, around
  1 being a just-noticeable difference), by 0.85 of 8 bits on average, the largest differences
  (up to 114) on the rims of lanterns, where colour changes within a pixel or two;
* a lampcast **animation** (the wipe GIF) -> animated lossy WebP at
  :data:`ANIMATION_QUALITY`, every frame and its duration kept (on the demo: CIEDE2000 1.3 on
  average from the GIF's frames, 1.6 of 8 bits);
* a **chart** (figures, legends) -> a palette PNG when it has at most 256 colours (the same
  pixels), or when a 256-colour palette (Pillow's maximum-coverage quantiser, no dithering)
  keeps every colour within CIEDE2000 :data:`CHART_MAX_DE00` (tried for charts of at most
  :data:`CHART_QUANTISE_MAX_COLOURS` colours); otherwise the file as written;
* a file that does not say what it is (not written by lampcast) -> embedded byte for byte.

An encoding is used only when it is smaller than the file. Every encoder has fixed settings and
no metadata that varies, so the same files give the same page. The type and pixel size come from
the file's own header (PNG: ISO/IEC 15948 IHDR; GIF89a logical screen descriptor) or from the
decoded image, so the browser can lay the page out before decoding.

References
----------
* RFC 2397, The "data" URL scheme; RFC 4648, base64.
* ISO/IEC 15948:2004 (PNG) and the GIF89a specification, for the signatures and sizes;
  RFC 9649 (WebP) through :mod:`render.output.images`.
* CIE 142-2001 / ISO/CIE 11664-6, CIEDE2000 (through scikit-image's ``deltaE_ciede2000`` on
  CIELAB of the sRGB values, IEC 61966-2-1, D65); a difference of about 1 as just noticeable is
  common practice (no single source).
"""

from __future__ import annotations

import base64
import io
import os
from concurrent.futures import Future, ThreadPoolExecutor
from dataclasses import dataclass
from pathlib import Path

import numpy as np

__all__ = [
    "ANIMATION_QUALITY",
    "CHART_MAX_DE00",
    "CHART_QUANTISE_MAX_COLOURS",
    "RENDERED_QUALITY",
    "Compacted",
    "EmbeddedImage",
    "Embedding",
    "ImageFolder",
    "compact_image",
    "image_info",
]

#: Lossy WebP quality of rendered images with more than 256 colours.
RENDERED_QUALITY = 90
#: Lossy WebP quality of lampcast's animations (the wipes).
ANIMATION_QUALITY = 80
#: Largest CIEDE2000 between a chart's colour and its palette colour for a quantised palette PNG.
CHART_MAX_DE00 = 1.0
#: Charts with more colours than this are not tried with a palette: their colour ramps (heat
#: maps, a rendered view in a figure) cannot keep :data:`CHART_MAX_DE00` with 256 colours (none
#: of the demo's did; trying costs a quantisation and a check).
CHART_QUANTISE_MAX_COLOURS = 4096


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
class Compacted:
    """An image file as the page embeds it: MIME type, bytes, pixel size (``None``: not known)
    and how it was encoded (``how``: e.g. ``"rendered: lossy WebP q90"``, ``"as written"``)."""

    mime: str
    data: bytes
    width: int | None
    height: int | None
    how: str


def _picture_kind(im) -> str | None:
    """What the file says it is (PNG text or GIF comment line), or ``None``."""
    from render.output.images import PICTURE_KEY

    if im.format == "PNG":
        return im.text.get(PICTURE_KEY)
    comment = im.info.get("comment")
    if im.format == "GIF" and isinstance(comment, bytes):
        for line in comment.decode("utf-8", "replace").splitlines():
            key, _, value = line.partition(": ")
            if key == PICTURE_KEY:
                return value
    return None


def _is_rgb8_png(data: bytes) -> bool:
    """An 8-bit RGB PNG without transparency (IHDR bit depth 8, colour type 2)."""
    return data[24:26] == b"\x08\x02" and b"tRNS" not in data[: data.find(b"IDAT")]


def _rgb(im) -> np.ndarray:
    return np.asarray(im.convert("RGB"), dtype=np.uint8)


def _exact_palette(pixels: np.ndarray, colours: list[tuple[int, tuple[int, int, int]]]):
    """(indices (H, W) uint8, palette (N, 3) uint8) of an image with N <= 256 colours; the
    palette in ascending order of the colours' 24-bit values."""
    palette = np.array(sorted(c for _, c in colours), dtype=np.uint8).reshape(-1, 3)
    keys = palette.astype(np.uint32) @ np.array([65536, 256, 1], np.uint32)
    packed = pixels.astype(np.uint32) @ np.array([65536, 256, 1], np.uint32)
    return np.searchsorted(keys, packed).astype(np.uint8), palette


def _quantised_palette(im, pixels: np.ndarray):
    """(indices, palette, largest CIEDE2000 from a colour to its palette colour) of a
    256-colour palette by Pillow's maximum-coverage quantiser without dithering."""
    from PIL import Image
    from skimage.color import deltaE_ciede2000, rgb2lab

    q = im.convert("RGB").quantize(colors=256, method=Image.Quantize.MAXCOVERAGE, dither=Image.Dither.NONE)
    indices = np.asarray(q, dtype=np.uint8)
    n = int(indices.max()) + 1
    palette = np.array(q.getpalette()[: 3 * n], dtype=np.uint8).reshape(n, 3)
    # Each distinct (colour, palette colour) pair once.
    pairs = np.unique(
        (pixels.astype(np.uint64) @ np.array([65536, 256, 1], np.uint64)) << np.uint64(8) | indices.astype(np.uint64),
    )
    colour = (pairs >> np.uint64(8)).astype(np.int64)
    original = np.stack([(colour >> 16) & 255, (colour >> 8) & 255, colour & 255], axis=-1) / 255.0
    mapped = palette[(pairs & np.uint64(255)).astype(np.int64)] / 255.0
    de = deltaE_ciede2000(rgb2lab(original[None]), rgb2lab(mapped[None]))
    return indices, palette, float(de.max())


def _as_written(data: bytes) -> Compacted:
    mime, width, height = image_info(data)
    return Compacted(mime, data, width, height, "as written")


def compact_image(data: bytes) -> Compacted:
    """The encoding of an image file the report embeds (see the module text for the rules).

    Raises ``ValueError`` when ``data`` is not a PNG, GIF, JPEG or WebP image."""
    from PIL import Image, ImageSequence

    from render.output.images import CHART, RENDERED, animated_webp_bytes, png_bytes, webp_bytes

    as_written = _as_written(data)
    mime, width, height = as_written.mime, as_written.width, as_written.height
    if mime not in ("image/png", "image/gif"):
        return as_written
    with Image.open(io.BytesIO(data)) as im:
        kind = _picture_kind(im)
        if kind == RENDERED and mime == "image/gif":
            frames, durations = [], []
            for frame in ImageSequence.Iterator(im):
                frames.append(_rgb(frame))
                durations.append(int(frame.info.get("duration", 100)))
            out = Compacted(
                "image/webp",
                animated_webp_bytes(frames, durations, ANIMATION_QUALITY),
                width,
                height,
                f"animation: lossy WebP q{ANIMATION_QUALITY}",
            )
        elif kind not in (RENDERED, CHART) or mime != "image/png" or not _is_rgb8_png(data):
            return as_written
        else:
            pixels = _rgb(im)
            colours = im.getcolors(256)
            if kind == RENDERED and colours is not None:
                out = Compacted("image/webp", webp_bytes(pixels), width, height, "rendered: lossless WebP")
            elif kind == RENDERED:
                out = Compacted(
                    "image/webp",
                    webp_bytes(pixels, RENDERED_QUALITY),
                    width,
                    height,
                    f"rendered: lossy WebP q{RENDERED_QUALITY}",
                )
            elif colours is not None:
                indices, palette = _exact_palette(pixels, colours)
                out = Compacted("image/png", png_bytes(indices, palette=palette), width, height, "chart: palette PNG")
            else:
                if im.getcolors(CHART_QUANTISE_MAX_COLOURS) is None:
                    return Compacted(mime, data, width, height, "chart: as written")
                indices, palette, worst = _quantised_palette(im, pixels)
                if worst > CHART_MAX_DE00:
                    return Compacted(mime, data, width, height, "chart: as written")
                out = Compacted(
                    "image/png", png_bytes(indices, palette=palette), width, height, "chart: quantised palette PNG"
                )
    return out if len(out.data) < len(data) else Compacted(mime, data, width, height, f"{kind}: as written")


class EmbeddedImage:
    """An image as the page shows it: its ``data:`` URI and size (px; ``None``: not known).

    Made by :class:`ImageFolder` while the image may still be encoding; reading ``src``,
    ``width`` or ``height`` waits for it."""

    __slots__ = ("_value", "_future")

    def __init__(self, src: str, width: int | None, height: int | None) -> None:
        self._value: tuple[str, int | None, int | None] | None = (src, width, height)
        self._future: Future | None = None

    @classmethod
    def pending(cls, future: Future) -> EmbeddedImage:
        """An image whose ``(src, width, height)`` the first item of ``future``'s result will be."""
        image = cls("", None, None)
        image._value, image._future = None, future
        return image

    def _resolved(self) -> tuple[str, int | None, int | None]:
        if self._value is None:
            self._value = self._future.result()[0]
            self._future = None
        return self._value

    @property
    def src(self) -> str:
        return self._resolved()[0]

    @property
    def width(self) -> int | None:
        return self._resolved()[1]

    @property
    def height(self) -> int | None:
        return self._resolved()[2]

    def __eq__(self, other: object) -> bool:
        return isinstance(other, EmbeddedImage) and self._resolved() == other._resolved()

    def __hash__(self) -> int:
        return hash(self._resolved())

    def __repr__(self) -> str:
        src, width, height = self._resolved()
        return f"EmbeddedImage({src[:40]!r}..., {width}, {height})"


#: What a missing or unreadable image becomes (the problem is reported; no page is written).
_NOTHING = ("data:,", None, None)


@dataclass(frozen=True)
class Embedding:
    """How one file went into the page: its path, size on disk, the encoding, its MIME type
    and size."""

    relpath: str
    file_bytes: int
    how: str
    mime: str
    embedded_bytes: int


class ImageFolder:
    """The images named by relative path under ``out_dir``, each read and encoded once, the
    encodings running side by side on ``workers`` threads (default: one per processor).

    Problems (a path outside the folder, a missing file, not an image) are collected in
    :attr:`problems` rather than raised, so that all of them can be reported together;
    :attr:`embedded` lists how each image went into the page. Both wait for the encodings
    under way. ``compact=False`` embeds every file byte for byte.
    """

    def __init__(self, out_dir: Path, *, compact: bool = True, workers: int | None = None):
        self.root = Path(out_dir).resolve()
        self.compact = compact
        self._workers = max(1, workers or os.cpu_count() or 1)
        self._pool: ThreadPoolExecutor | None = None
        self._problems: list[str] = []
        self._cache: dict[str, EmbeddedImage] = {}
        self._done: dict[str, Future] = {}

    @property
    def problems(self) -> list[str]:
        """Every problem found, in the order the images were asked for."""
        self._finish()
        return list(self._problems) + [p for f in self._done.values() if isinstance(p := f.result()[1], str)]

    @property
    def embedded(self) -> list[Embedding]:
        """How each image went into the page, in the order they were asked for."""
        self._finish()
        return [e for f in self._done.values() if isinstance(e := f.result()[1], Embedding)]

    def _finish(self) -> None:
        for future in self._done.values():
            future.exception()
        if self._pool is not None:
            self._pool.shutdown()
            self._pool = None

    def get(self, relpath: str) -> EmbeddedImage:
        """The image at ``relpath`` (relative to the folder) as a :class:`EmbeddedImage`."""
        if relpath in self._cache:
            return self._cache[relpath]
        path = (self.root / relpath).resolve()
        if Path(relpath).is_absolute() or not path.is_relative_to(self.root):
            self._problems.append(f"{relpath}: image path must be relative to, and inside, {self.root}")
            entry = EmbeddedImage(*_NOTHING)
        elif not path.is_file():
            self._problems.append(f"{relpath}: image file not found in {self.root}")
            entry = EmbeddedImage(*_NOTHING)
        else:
            if self._pool is None:
                self._pool = ThreadPoolExecutor(self._workers, thread_name_prefix="report-image")
            outcome = self._pool.submit(_embed, relpath, path.read_bytes(), self.compact)
            self._done[relpath] = outcome
            entry = EmbeddedImage.pending(outcome)
        self._cache[relpath] = entry
        return entry


def _embed(relpath: str, data: bytes, compact: bool) -> tuple[tuple[str, int | None, int | None], Embedding | str]:
    """``((src, width, height), how it was embedded)`` of a file, or the problem in place of how."""
    try:
        c = compact_image(data) if compact else _as_written(data)
    except (ValueError, OSError, EOFError, SyntaxError) as exc:
        return _NOTHING, f"{relpath}: {exc}"
    src = f"data:{c.mime};base64,{base64.b64encode(c.data).decode('ascii')}"
    return (src, c.width, c.height), Embedding(relpath, len(data), c.how, c.mime, len(c.data))
