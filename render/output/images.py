"""Image files: the one writer of each format every image and figure of lampcast goes through.

:func:`png_bytes` encodes a numpy image, :func:`write_png` writes it atomically
(:func:`render.fileio.atomic_write_bytes`), :func:`figure_pixels` and :func:`write_figure_png`
do the same for a matplotlib figure (drawn by the Agg renderer, then through the same
encoder). :func:`gif_bytes` / :func:`write_gif` make the looping GIF animations (the wipes),
:func:`webp_bytes` and :func:`animated_webp_bytes` the compact copies the report embeds
(:mod:`render.output.report.images`). Other modules hold arrays; only this one turns them into
image files.

Every image lampcast writes says what kind of picture it is under :data:`PICTURE_KEY`:
:data:`RENDERED` (a rendered view or a map of one: continuous tones, shown to the eye) or
:data:`CHART` (drawn lines, text and flat colours: figures, legends). The report chooses its
compact encoding by it; the files themselves are always written in full.

The encoder follows the PNG specification: signature, ``IHDR``, an ``sRGB`` chunk (rendering
intent perceptual: every image we write is sRGB-encoded), one ``tEXt`` chunk per metadata
entry (``iTXt``, UTF-8, for values outside Latin-1), one zlib ``IDAT`` and ``IEND``. Images are
grey (H, W), RGB (H, W, 3) or RGBA (H, W, 4), 8 or 16 bits per channel. Each row gets the
filter type (None, Sub, Up, Average, Paeth) with the smallest sum of absolute filtered bytes,
the heuristic the specification recommends for true-colour images. Palette images (colour type
3, a ``PLTE`` chunk of at most 256 colours) are written with filter type None on every row,
as the specification recommends for them. The deflate settings are fixed per kind of picture:
charts and palette images at zlib level 6 with the default strategy (flat colours and text:
long repeated strings pay); every other image (continuous tones) with zlib's run-length
strategy (``Z_RLE``: matches at distance one only). On the demo's 960 x 540 views the
run-length strategy encodes 4-7 times as fast as level 6 for files 8-20 % larger; the pixels
are the same. There is no time chunk, so the same pixels and text always give the same bytes.

GIF animations are Pillow's GIF89a writer (each frame quantised to its own palette by Pillow's
median cut, frames that repeat the previous one merged into a longer one) with a comment
extension holding the text entries; a frame that occurs more than once (a wipe there and back)
is quantised once and the palette image handed to the writer, which is what the writer would
have made of it. WebP files are Pillow's libwebp encoder at fixed settings (lossless, or lossy
at a given quality), single-threaded and without metadata chunks. Neither holds a timestamp, so
the same frames give the same bytes.

:class:`ImageWriter` writes files on threads of its own while the caller goes on: the encoders
(zlib, the filter kernel, Pillow's quantiser and LZW coder, file writes) release the
interpreter's lock, and each file is a pure function of its arguments, so the files are the
same whichever thread writes them and whenever.

Every PNG carries ``Software`` = ``lampcast <version>`` unless the caller's text sets it;
callers that know the run (scene, view, seed, ...) add the entries of
:func:`render.output.provenance.image_metadata`.

:func:`fit_width` shrinks a display image for small files (the frames of the wipe GIF):
scikit-image's anti-aliased resize (Gaussian pre-filter, bilinear sampling) applied in linear
light, so that fine light and dark detail averages to the right brightness instead of the
darker average of the encoded values.

References
----------
- ISO/IEC 15948:2004 / W3C, "Portable Network Graphics (PNG) Specification (Second
  Edition)": chunk layout, CRC-32, filter types and the Paeth predictor (Paeth, A. W. 1991,
  "Image file compression made easy", Graphics Gems II), filter selection heuristic (section
  12.8), ``tEXt``/``iTXt`` and ``sRGB`` chunks.
- RFC 1950 / RFC 1951: the zlib stream inside ``IDAT`` (Python's :mod:`zlib`).
- CompuServe, "Graphics Interchange Format Version 89a" (1990): comment extension, looping.
- Google, "WebP Container Specification" and "WebP Lossless Bitstream Specification"
  (RFC 9649, 2024), through Pillow's libwebp binding.
- IEC 61966-2-1:1999 (sRGB transfer curve, through :mod:`render.vision.display`) and
  scikit-image ``skimage.transform.resize`` (van der Walt et al. 2014, PeerJ 2:e453).
"""

from __future__ import annotations

import io
import os
import struct
import zlib
from collections.abc import Callable, Mapping, Sequence
from concurrent.futures import Future, ThreadPoolExecutor
from pathlib import Path
from typing import Any

import numba
import numpy as np

from render.fileio import atomic_write_bytes

__all__ = [
    "CHART",
    "PICTURE_KEY",
    "RENDERED",
    "WEBP_METHOD",
    "WRITER_THREADS",
    "ImageWriter",
    "animated_webp_bytes",
    "figure_pixels",
    "fit_width",
    "gif_bytes",
    "png_bytes",
    "webp_bytes",
    "write_figure_png",
    "write_gif",
    "write_png",
]

#: Text key naming what kind of picture an image is: :data:`RENDERED` or :data:`CHART`.
PICTURE_KEY = "lampcast.picture"
#: A rendered view or a map of one (continuous tones).
RENDERED = "rendered"
#: A drawn figure or legend (lines, text, flat colours).
CHART = "chart"
#: libwebp's effort (0 fastest .. 6 smallest). On the demo's 40 rendered views at quality 90, 2 gave
#: 1.17 MB in 0.77 s of processor time, 3 gave 1.13 MB in 1.74 s, 0 gave 1.55 MB in 0.62 s.
WEBP_METHOD = 2
#: Effort of lossless WebP (its "quality" setting, 0-100).
_WEBP_LOSSLESS_EFFORT = 50

#: PNG colour types by channel count: grey, grey + alpha, RGB, RGBA.
_COLOUR_TYPE = {1: 0, 2: 4, 3: 2, 4: 6}
#: zlib compression level of charts and palette images (fixed: part of what makes the bytes
#: repeatable).
_ZLIB_LEVEL = 6
#: zlib level and strategy of continuous-tone images (module text); with ``Z_RLE`` the level
#: changes nothing but the header's level hint.
_ZLIB_TONES = (6, zlib.Z_RLE)
#: Threads of an :class:`ImageWriter`: one, since the writes go on beside a render whose parallel
#: kernels already use every processor (on the 2-core machine two writer threads cost the demo
#: processor time and gained no wall time, median of 3 alternating rounds).
WRITER_THREADS = 1


def _chunk(kind: bytes, data: bytes) -> bytes:
    return struct.pack(">I", len(data)) + kind + data + struct.pack(">I", zlib.crc32(kind + data) & 0xFFFFFFFF)


def _text_chunk(key: str, value: str) -> bytes:
    """``tEXt`` for Latin-1 text, ``iTXt`` (uncompressed UTF-8) otherwise."""
    k = str(key).encode("latin-1", "replace")
    if not 1 <= len(k) <= 79 or b"\x00" in k or k != k.strip():
        raise ValueError(f"bad PNG text keyword {key!r}: 1-79 Latin-1 characters, no leading or trailing space")
    text = str(value)
    try:
        return _chunk(b"tEXt", k + b"\x00" + text.encode("latin-1"))
    except UnicodeEncodeError:
        # keyword, null, compression flag 0, method 0, empty language tag, null, empty translated keyword, null
        return _chunk(b"iTXt", k + b"\x00\x00\x00" + b"\x00" + b"\x00" + text.encode("utf-8"))


@numba.njit(cache=True, nogil=True)
def _filter_kernel(rows: np.ndarray, bpp: int, out: np.ndarray) -> None:
    """Per row: the five filtered versions' costs (sum of |byte| read as signed), then the
    cheapest written to ``out[y, 1:]`` with its type in ``out[y, 0]`` (first minimum, so ties
    go to the simpler filter). Serial, so that several threads may run it at once (files are
    encoded side by side, :class:`ImageWriter`)."""
    h, stride = rows.shape
    for y in range(h):
        costs = np.zeros(5, np.int64)
        for i in range(stride):
            x = np.int32(rows[y, i])
            a = np.int32(rows[y, i - bpp]) if i >= bpp else np.int32(0)
            b = np.int32(rows[y - 1, i]) if y > 0 else np.int32(0)
            c = np.int32(rows[y - 1, i - bpp]) if (y > 0 and i >= bpp) else np.int32(0)
            for k in range(5):
                d = (x - _predict(k, a, b, c)) & 0xFF
                costs[k] += d if d < 128 else 256 - d
        best = 0
        for k in range(1, 5):
            if costs[k] < costs[best]:
                best = k
        out[y, 0] = best
        for i in range(stride):
            x = np.int32(rows[y, i])
            a = np.int32(rows[y, i - bpp]) if i >= bpp else np.int32(0)
            b = np.int32(rows[y - 1, i]) if y > 0 else np.int32(0)
            c = np.int32(rows[y - 1, i - bpp]) if (y > 0 and i >= bpp) else np.int32(0)
            out[y, i + 1] = (x - _predict(best, a, b, c)) & 0xFF


@numba.njit(cache=True, nogil=True, inline="always")
def _predict(kind: int, a: np.int32, b: np.int32, c: np.int32) -> np.int32:
    """The PNG predictor of filter type ``kind`` from the left, upper and upper-left bytes."""
    if kind == 0:
        return np.int32(0)
    if kind == 1:
        return a
    if kind == 2:
        return b
    if kind == 3:
        return (a + b) >> 1
    p = a + b - c  # Paeth
    pa, pb, pc = abs(p - a), abs(p - b), abs(p - c)
    if pa <= pb and pa <= pc:
        return a
    return b if pb <= pc else c


def _filtered_rows(rows: np.ndarray, bpp: int) -> np.ndarray:
    """Per-row adaptive filtering: (H, 1 + stride) bytes, each row led by its filter type.

    ``rows`` (H, stride) uint8 raw scanlines; ``bpp`` bytes per complete pixel (at least 1).
    Each row keeps the filter whose output, read as signed bytes, has the smallest sum of
    absolute values.
    """
    out = np.empty((rows.shape[0], rows.shape[1] + 1), np.uint8)
    _filter_kernel(np.ascontiguousarray(rows, dtype=np.uint8), int(bpp), out)
    return out


def png_bytes(image: np.ndarray, text: Mapping[str, Any] | None = None, *, palette: np.ndarray | None = None) -> bytes:
    """PNG file contents for a grey (H, W), grey-alpha (H, W, 2), RGB (H, W, 3) or RGBA
    (H, W, 4) uint8 or uint16 image, sRGB, with ``text`` as metadata chunks (in the given
    order, after ``Software``).

    With ``palette`` ((N, 3) uint8 sRGB colours, 1 <= N <= 256), ``image`` is (H, W) uint8
    indices into it and the file is a palette image (colour type 3).

    Keywords must be 1-79 Latin-1 characters; values are any text (``str()`` of the value).
    """
    img = np.asarray(image)
    if palette is not None:
        plte = np.asarray(palette)
        if plte.dtype != np.uint8 or plte.ndim != 2 or plte.shape[1] != 3 or not 1 <= len(plte) <= 256:
            raise ValueError(f"a palette is (N, 3) uint8 with 1 <= N <= 256, got {plte.dtype} {plte.shape}")
        if img.ndim != 2 or img.dtype != np.uint8:
            raise ValueError(f"a palette image is (H, W) uint8 indices, got {img.dtype} {img.shape}")
        if img.size and int(img.max()) >= len(plte):
            raise ValueError(f"palette index {int(img.max())} beyond the {len(plte)} colours")
        h, w = img.shape
        colour_type, depth = 3, 8
        filtered = np.concatenate([np.zeros((h, 1), np.uint8), img], axis=1)  # filter type None
    else:
        if img.ndim == 2:
            img = img[:, :, None]
        if img.ndim != 3 or img.shape[2] not in _COLOUR_TYPE or img.dtype not in (np.uint8, np.uint16):
            raise ValueError(
                f"expected an (H, W), (H, W, 3) or (H, W, 4) uint8 or uint16 image, got {img.dtype} {img.shape}"
            )
        h, w, channels = img.shape
        colour_type, depth = _COLOUR_TYPE[channels], 8 if img.dtype == np.uint8 else 16
    if h == 0 or w == 0:
        raise ValueError("a PNG needs at least one pixel")
    if palette is None:
        raw = np.ascontiguousarray(img.astype(">u2") if depth == 16 else img).view(np.uint8).reshape(h, -1)
        filtered = _filtered_rows(raw, channels * depth // 8)
    from render import __version__

    metadata = {"Software": f"lampcast {__version__}", **{str(k): v for k, v in (text or {}).items()}}
    parts = [
        b"\x89PNG\r\n\x1a\n",
        _chunk(b"IHDR", struct.pack(">IIBBBBB", w, h, depth, colour_type, 0, 0, 0)),
        _chunk(b"sRGB", b"\x00"),
        *(() if palette is None else (_chunk(b"PLTE", np.ascontiguousarray(plte).tobytes()),)),
        *(_text_chunk(k, v) for k, v in metadata.items()),
        _chunk(b"IDAT", _deflate(filtered, palette is None and metadata.get(PICTURE_KEY) != CHART)),
        _chunk(b"IEND", b""),
    ]
    return b"".join(parts)


def _deflate(filtered: np.ndarray, tones: bool) -> bytes:
    """The zlib stream of the filtered rows: :data:`_ZLIB_TONES` for continuous tones, else
    level :data:`_ZLIB_LEVEL` with the default strategy (module text)."""
    data = np.ascontiguousarray(filtered).tobytes()
    if not tones:
        return zlib.compress(data, _ZLIB_LEVEL)
    level, strategy = _ZLIB_TONES
    z = zlib.compressobj(level, zlib.DEFLATED, zlib.MAX_WBITS, 8, strategy)
    return z.compress(data) + z.flush()


def write_png(path: str | os.PathLike, image: np.ndarray, text: Mapping[str, Any] | None = None) -> Path:
    """Write ``image`` as a PNG (see :func:`png_bytes`) atomically; returns the path."""
    return atomic_write_bytes(path, png_bytes(image, text))


def figure_pixels(fig: Any, dpi: float | None = None) -> np.ndarray:
    """A matplotlib figure drawn by the Agg renderer: (H, W, 4) uint8 RGBA, at ``dpi``
    (default the figure's own), on the figure's face colour. The figure's canvas becomes
    an Agg canvas; its dpi is restored afterwards."""
    from matplotlib.backends.backend_agg import FigureCanvasAgg

    canvas = FigureCanvasAgg(fig)
    own_dpi = fig.dpi
    try:
        if dpi is not None:
            fig.set_dpi(dpi)
        canvas.draw()
        return np.array(canvas.buffer_rgba(), dtype=np.uint8, copy=True)
    finally:
        fig.set_dpi(own_dpi)


def write_figure_png(
    fig: Any, path: str | os.PathLike, text: Mapping[str, Any] | None = None, *, dpi: float | None = None
) -> Path:
    """Write a matplotlib figure as a PNG through :func:`write_png` (RGB when the figure is
    opaque, RGBA otherwise), marked a :data:`CHART` unless ``text`` says otherwise; returns the
    path."""
    rgba = figure_pixels(fig, dpi)
    image = rgba[..., :3] if np.all(rgba[..., 3] == 255) else rgba
    return write_png(path, image, {PICTURE_KEY: CHART, **(text or {})})


def _frames_rgb(frames: Sequence[np.ndarray]) -> list[np.ndarray]:
    out = [np.asarray(f) for f in frames]
    if not out or any(f.ndim != 3 or f.shape[2] != 3 or f.dtype != np.uint8 or f.shape != out[0].shape for f in out):
        raise ValueError("expected one or more (H, W, 3) uint8 frames of one size")
    return out


def gif_bytes(frames: Sequence[np.ndarray], duration_ms: int = 90, text: Mapping[str, Any] | None = None) -> bytes:
    """An endlessly looping GIF89a of ``frames`` ((H, W, 3) uint8 sRGB, ``duration_ms`` each),
    with ``Software`` and ``text`` as "key: value" lines of its comment."""
    from PIL import Image

    from render import __version__

    # Each distinct frame quantised once (Pillow's writer would quantise every frame the same way).
    palettised: dict[bytes, Any] = {}
    images = []
    for f in _frames_rgb(frames):
        key = np.ascontiguousarray(f).tobytes()
        if key not in palettised:
            palettised[key] = Image.fromarray(f).convert("P", palette=Image.Palette.ADAPTIVE)
        images.append(palettised[key])
    metadata = {"Software": f"lampcast {__version__}", **{str(k): v for k, v in (text or {}).items()}}
    comment = "\n".join(f"{k}: {v}" for k, v in metadata.items()).encode("utf-8")
    buf = io.BytesIO()
    images[0].save(
        buf, "GIF", save_all=True, append_images=images[1:], duration=int(duration_ms), loop=0, comment=comment
    )
    return buf.getvalue()


def write_gif(
    path: str | os.PathLike, frames: Sequence[np.ndarray], duration_ms: int = 90, text: Mapping[str, Any] | None = None
) -> Path:
    """Write :func:`gif_bytes` of ``frames`` atomically; returns the path."""
    return atomic_write_bytes(path, gif_bytes(frames, duration_ms, text))


def webp_bytes(image: np.ndarray, quality: int | None = None) -> bytes:
    """A WebP of an (H, W, 3) uint8 sRGB image: lossless when ``quality`` is ``None``, else
    lossy at that quality (0-100; libwebp codes colour at half resolution, 4:2:0). No metadata."""
    from PIL import Image

    (img,) = _frames_rgb([image])
    buf = io.BytesIO()
    Image.fromarray(img).save(buf, "WEBP", **_webp_options(quality))
    return buf.getvalue()


def animated_webp_bytes(frames: Sequence[np.ndarray], durations_ms: Sequence[int], quality: int | None = None) -> bytes:
    """An endlessly looping animated WebP of ``frames`` ((H, W, 3) uint8 sRGB) shown for
    ``durations_ms`` each; lossless when ``quality`` is ``None``, else lossy at that quality."""
    from PIL import Image

    images = [Image.fromarray(f) for f in _frames_rgb(frames)]
    if len(durations_ms) != len(images):
        raise ValueError(f"{len(images)} frames but {len(durations_ms)} durations")
    buf = io.BytesIO()
    images[0].save(
        buf,
        "WEBP",
        save_all=True,
        append_images=images[1:],
        duration=[int(d) for d in durations_ms],
        loop=0,
        **_webp_options(quality),
    )
    return buf.getvalue()


def _webp_options(quality: int | None) -> dict[str, Any]:
    if quality is None:
        return {"lossless": True, "quality": _WEBP_LOSSLESS_EFFORT, "method": WEBP_METHOD}
    if not 0 <= quality <= 100:
        raise ValueError(f"WebP quality must be 0-100, got {quality}")
    return {"lossless": False, "quality": int(quality), "method": WEBP_METHOD}


def fit_width(image: np.ndarray, max_width_px: int) -> np.ndarray:
    """An 8-bit sRGB image (H, W, 3) scaled down to ``max_width_px`` wide (aspect kept, height
    rounded), or returned as it is when not wider.

    Decoded to linear light (IEC 61966-2-1), resized by :func:`skimage.transform.resize` with
    anti-aliasing (mirror boundaries, so a pattern keeps its mean up to the edges), encoded and
    quantised again. Deterministic.
    """
    from skimage.transform import resize

    from render.vision.display import quantise, srgb_decode, srgb_encode

    img = np.asarray(image)
    if img.ndim != 3 or img.dtype != np.uint8:
        raise ValueError(f"expected an (H, W, channels) uint8 image, got {img.dtype} {img.shape}")
    if max_width_px < 1:
        raise ValueError(f"max_width_px must be at least 1, got {max_width_px}")
    h, w = img.shape[:2]
    if w <= max_width_px:
        return img
    out_h = max(1, round(h * max_width_px / w))
    linear = srgb_decode(np.arange(256) / 255.0)[img]  # the decoded value of each 8-bit code
    small = resize(linear, (out_h, max_width_px, img.shape[2]), order=1, mode="reflect", anti_aliasing=True)
    return quantise(srgb_encode(small), 8)


class ImageWriter:
    """Image files written on :data:`WRITER_THREADS` threads while the caller goes on (module
    text). :meth:`png` and :meth:`gif` take what :func:`write_png` and :func:`write_gif` take,
    :meth:`call` any function (one that writes a file, or makes what such a function needs);
    each returns a future of its result (the path written). Work starts in the order asked. Use it as
    a context manager, or call :meth:`wait`: that waits for every file and raises the first
    error (in the order the files were asked for). The arrays handed over must not be changed
    until then."""

    def __init__(self, threads: int = WRITER_THREADS) -> None:
        self._pool = ThreadPoolExecutor(max(1, int(threads)), thread_name_prefix="image-writer")
        self._futures: list[Future] = []

    def call(self, fn: Callable[..., Any], *args: Any, **kwargs: Any) -> Future:
        """``fn(*args, **kwargs)`` on a writer thread."""
        future = self._pool.submit(fn, *args, **kwargs)
        self._futures.append(future)
        return future

    def png(self, path: str | os.PathLike, image: np.ndarray, text: Mapping[str, Any] | None = None) -> Future:
        """:func:`write_png` on a writer thread."""
        return self.call(write_png, path, image, text)

    def gif(
        self,
        path: str | os.PathLike,
        frames: Sequence[np.ndarray],
        duration_ms: int = 90,
        text: Mapping[str, Any] | None = None,
    ) -> Future:
        """:func:`write_gif` on a writer thread."""
        return self.call(write_gif, path, frames, duration_ms, text)

    def wait(self) -> list[Any]:
        """Wait for everything asked for so far; the results (paths of the files written), or
        the first error raised."""
        futures, self._futures = self._futures, []
        for f in futures:
            f.exception()  # every one finished before any error is raised
        return [f.result() for f in futures]

    def close(self) -> None:
        """Wait for every file, then stop the threads (errors are not raised: see :meth:`wait`)."""
        for f in self._futures:
            f.exception()
        self._pool.shutdown()

    def __enter__(self) -> ImageWriter:
        return self

    def __exit__(self, kind: Any, error: Any, trace: Any) -> None:
        try:
            if kind is None:
                self.wait()
        finally:
            self.close()
