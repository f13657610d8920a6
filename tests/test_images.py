"""The one PNG writer (render.output.images) and the provenance every lampcast PNG carries.

Sources: the PNG specification (ISO/IEC 15948:2004 / W3C PNG Second Edition): the small reader
``_decode_png`` below is written from it (chunk layout, CRC-32, zlib IDAT, the five filter
types with the Paeth predictor) for the checks Pillow cannot make (16-bit RGB); Pillow as an
independent PNG reader (pixels and tEXt/iTXt chunks, also through imageio); matplotlib's own
PNG output as the reference for figures; ``hashlib`` for the scene hash.
"""

from __future__ import annotations

import hashlib
import io
import os
import struct
import zlib
from pathlib import Path

import imageio.v3 as iio
import numpy as np
import pytest
from PIL import Image

from render.cli import main
from render.output.images import (
    animated_webp_bytes,
    figure_pixels,
    fit_width,
    gif_bytes,
    png_bytes,
    webp_bytes,
    write_figure_png,
    write_png,
)

SCENES = Path(__file__).resolve().parents[1] / "scenes" / "tests"


def _decode_png(data: bytes) -> tuple[np.ndarray, dict[bytes, list[bytes]]]:
    """Minimal reader written from the PNG specification: checks the signature and every
    CRC-32, inflates IDAT and undoes the per-row filters (0 None, 1 Sub, 2 Up, 3 Average,
    4 Paeth). Returns the image (H, W, channels) as uint8/uint16 and the chunks by type."""
    assert data[:8] == b"\x89PNG\r\n\x1a\n"
    pos, idat, chunks = 8, b"", {}
    while pos < len(data):
        n, kind = struct.unpack(">I4s", data[pos : pos + 8])
        body = data[pos + 8 : pos + 8 + n]
        crc = struct.unpack(">I", data[pos + 8 + n : pos + 12 + n])[0]
        assert zlib.crc32(kind + body) & 0xFFFFFFFF == crc
        chunks.setdefault(kind, []).append(body)
        if kind == b"IDAT":
            idat += body
        pos += 12 + n
    w, h, depth, ctype = struct.unpack(">IIBBBBB", chunks[b"IHDR"][0])[:4]
    channels = {0: 1, 4: 2, 2: 3, 6: 4}[ctype]
    bpp = channels * depth // 8
    stride = w * bpp
    raw = np.frombuffer(zlib.decompress(idat), dtype=np.uint8).reshape(h, 1 + stride)
    out = np.zeros((h, stride), dtype=np.int64)
    for y in range(h):
        ftype, line = raw[y, 0], raw[y, 1:].astype(np.int64)
        prior = out[y - 1] if y > 0 else np.zeros(stride, np.int64)
        row = out[y]
        for i in range(stride):
            a = row[i - bpp] if i >= bpp else 0
            b = prior[i]
            c = prior[i - bpp] if i >= bpp else 0
            if ftype == 0:
                pred = 0
            elif ftype == 1:
                pred = a
            elif ftype == 2:
                pred = b
            elif ftype == 3:
                pred = (a + b) // 2
            elif ftype == 4:
                p = a + b - c
                pa, pb, pc = abs(p - a), abs(p - b), abs(p - c)
                pred = a if pa <= pb and pa <= pc else (b if pb <= pc else c)
            else:
                raise AssertionError(f"unknown filter type {ftype}")
            row[i] = (line[i] + pred) % 256
    img = out.astype(np.uint8)
    if depth == 16:
        img = img.copy().view(">u2").astype(np.uint16)
    return img.reshape(h, w, channels), chunks


def _filter_types(data: bytes) -> set[int]:
    _, chunks = _decode_png(data)
    w, h, depth, ctype = struct.unpack(">IIBBBBB", chunks[b"IHDR"][0])[:4]
    stride = w * {0: 1, 4: 2, 2: 3, 6: 4}[ctype] * depth // 8
    raw = np.frombuffer(zlib.decompress(b"".join(chunks[b"IDAT"])), np.uint8).reshape(h, 1 + stride)
    return set(raw[:, 0].tolist())


@pytest.mark.parametrize("bits", [8, 16])
def test_png_round_trip_with_text(tmp_path, bits):
    rng = np.random.default_rng(3)
    top = 255 if bits == 8 else 65535
    img = rng.integers(0, top + 1, (7, 11, 3)).astype(np.uint8 if bits == 8 else np.uint16)
    path = write_png(tmp_path / "x.png", img, {"Software": "lampcast", "lampcast.mode": "adapted"})
    back = iio.imread(path)
    # Pillow (behind imageio) reads 16-bit RGB PNGs as 8-bit, keeping the high byte.
    assert np.array_equal(back, img if bits == 8 else (img >> 8).astype(np.uint8))
    with Image.open(path) as im:
        assert im.text["Software"] == "lampcast" and im.text["lampcast.mode"] == "adapted"
        assert im.size == (11, 7)
    decoded, chunks = _decode_png(path.read_bytes())
    assert np.array_equal(decoded, img) and chunks[b"sRGB"] == [b"\x00"]  # perceptual intent
    # Atomic write: no temporary file left behind; overwriting replaces the file.
    write_png(path, img[::-1], {"a": "b"})
    assert np.array_equal(iio.imread(path), img[::-1] if bits == 8 else (img[::-1] >> 8).astype(np.uint8))
    assert sorted(os.listdir(tmp_path)) == ["x.png"]


@pytest.mark.parametrize(
    "shape, dtype, mode",
    [
        ((9, 13), np.uint8, "L"),
        ((9, 13), np.uint16, "I;16"),
        ((9, 13, 4), np.uint8, "RGBA"),
        ((9, 13, 2), np.uint8, "LA"),
    ],
)
def test_grey_and_alpha_images(shape, dtype, mode):
    rng = np.random.default_rng(5)
    img = rng.integers(0, np.iinfo(dtype).max + 1, shape).astype(dtype)
    data = png_bytes(img)
    decoded, _ = _decode_png(data)
    assert np.array_equal(decoded.reshape(shape), img)
    import io

    with Image.open(io.BytesIO(data)) as im:
        assert im.mode == mode
        assert np.array_equal(np.asarray(im).astype(dtype), img)


def test_every_filter_type_is_used_and_undone():
    # A smooth image with a noisy band: the per-row choice (PNG spec, section 12.8) should use
    # more than filter type 0, and both readers must still give back the exact pixels.
    y, x = np.mgrid[0:64, 0:96]
    img = np.stack([x * 2, y * 3, (x + y) % 256], axis=-1).astype(np.uint8)
    img[40:48] = np.random.default_rng(1).integers(0, 256, (8, 96, 3))
    data = png_bytes(img)
    assert len(_filter_types(data) - {0}) >= 2
    assert np.array_equal(_decode_png(data)[0], img)
    assert np.array_equal(iio.imread(data, extension=".png"), img)
    # Filtering pays: the smooth image is far smaller than its unfiltered rows would be.
    unfiltered = zlib.compress(np.concatenate([np.zeros((64, 1), np.uint8), img.reshape(64, -1)], axis=1).tobytes(), 6)
    assert len(data) < len(unfiltered)


def test_text_chunks_and_determinism():
    import io

    img = np.zeros((2, 3, 3), np.uint8)
    text = {"lampcast.observer": "display peak 100 cd/m²", "lampcast.lamp": "λ 589 nm line"}
    data = png_bytes(img, text)
    _, chunks = _decode_png(data)
    # Latin-1 text goes in tEXt; text outside Latin-1 in iTXt (UTF-8), both read by Pillow.
    assert any(c.startswith(b"lampcast.observer\x00") for c in chunks[b"tEXt"])
    assert any(c.startswith(b"lampcast.lamp\x00") for c in chunks[b"iTXt"])
    assert b"tIME" not in chunks  # no time stamp: reruns give the same bytes
    with Image.open(io.BytesIO(data)) as im:
        assert im.text["lampcast.lamp"] == "λ 589 nm line" and im.text["lampcast.observer"] == text["lampcast.observer"]
        assert im.text["Software"].startswith("lampcast ")
    assert png_bytes(img, text) == data
    with pytest.raises(ValueError, match="keyword"):
        png_bytes(img, {"": "empty keyword"})
    with pytest.raises(ValueError, match="uint8 or uint16"):
        png_bytes(img.astype(np.float32))


def test_figure_matches_matplotlib_png(tmp_path):
    from matplotlib.figure import Figure

    fig = Figure(figsize=(3.2, 2.4), dpi=50)
    ax = fig.add_subplot()
    ax.plot([0, 1, 2], [0, 1, 0.5], color="tab:orange")
    ax.set_title("check")
    fig.savefig(tmp_path / "matplotlib.png", format="png")  # matplotlib's own Agg + PNG writer
    reference = iio.imread(tmp_path / "matplotlib.png")
    ours = write_figure_png(fig, tmp_path / "ours.png", {"lampcast.kind": "test"})
    pixels = iio.imread(ours)
    assert pixels.shape == (120, 160, 3)  # opaque figures are written as RGB
    assert np.array_equal(pixels, reference[..., :3]) and np.all(reference[..., 3] == 255)
    assert figure_pixels(fig, dpi=100).shape == (240, 320, 4) and fig.dpi == 50  # dpi restored
    with Image.open(ours) as im:
        assert im.text["lampcast.kind"] == "test"


def test_fit_width_averages_in_linear_light():
    # A 1-pixel black/white checkerboard halved has linear-light mean 0.5, which the sRGB curve
    # (IEC 61966-2-1: 1.055 * 0.5**(1/2.4) - 0.055 = 0.7354) encodes as 188 of 255; averaging
    # the encoded values instead would give 128 (analytic).
    board = (np.indices((64, 96)).sum(axis=0) % 2 * 255).astype(np.uint8)
    small = fit_width(np.repeat(board[..., None], 3, axis=2), 48)
    assert small.shape == (32, 48, 3) and np.all(small == 188)
    # A uniform colour is kept exactly; an image that fits is returned as it is.
    flat = np.full((30, 100, 3), (200, 100, 50), np.uint8)
    assert np.array_equal(fit_width(flat, 40), np.full((12, 40, 3), (200, 100, 50), np.uint8))
    assert fit_width(flat, 100) is flat


def test_render_aov_pngs_carry_provenance_and_rerun_identically(tmp_path):
    # README: every PNG carries the tool version, scene hash, view, mode and seed.
    scene = SCENES / "point_over_plane.toml"
    runs = []
    for run in ("a", "b"):
        out = tmp_path / run
        assert main(["render", str(scene), "--aov", "--mode", "adapted", "--out", str(out), "--quiet"]) == 0
        runs.append(out)
    pngs = sorted(p.name for p in runs[0].glob("*.png"))
    aov = {f"above-{k}.png" for k in ("depth", "normal", "material", "object", "coverage")}
    assert aov <= set(pngs)
    sha = hashlib.sha256(scene.read_bytes()).hexdigest()
    for name in pngs:
        with Image.open(runs[0] / name) as im:
            text = dict(im.text)
        assert text.get("Software", "").startswith("lampcast "), name
        assert text.get("lampcast.scene_sha256") == sha, name
        assert text.get("lampcast.scene") == scene.name and text.get("lampcast.view") == "above", name
        assert text.get("lampcast.seed") == "3" and text.get("lampcast.samples_per_pixel") == "2", name
        if name in aov:
            assert text["lampcast.mode"] == "aov " + name.removeprefix("above-").removesuffix(".png")
        # Same scene and seed: the same bytes.
        assert (runs[0] / name).read_bytes() == (runs[1] / name).read_bytes(), name
    assert (runs[0] / "above-aov.npz").read_bytes() == (runs[1] / "above-aov.npz").read_bytes()


def test_palette_png_is_colour_type_3_with_its_palette():
    # ISO/IEC 15948 colour type 3: IHDR depth 8, a PLTE chunk of 3-byte entries, indices in IDAT;
    # Pillow (an independent reader) must give back the palette's colours at the indices.
    rng = np.random.default_rng(7)
    palette = rng.integers(0, 256, (37, 3), dtype=np.uint8)
    indices = rng.integers(0, 37, (23, 31), dtype=np.uint8)
    data = png_bytes(indices, {"a": "b"}, palette=palette)
    assert data[24:26] == b"\x08\x03" and b"PLTE" in data[: data.index(b"IDAT")]
    with Image.open(io.BytesIO(data)) as im:
        assert im.mode == "P" and im.text["a"] == "b"
        assert np.array_equal(np.asarray(im.convert("RGB")), palette[indices])
    assert png_bytes(indices, {"a": "b"}, palette=palette) == data
    with pytest.raises(ValueError):
        png_bytes(indices, palette=palette[:5])  # an index beyond the palette
    with pytest.raises(ValueError):
        png_bytes(indices, palette=np.zeros((257, 3), np.uint8))


def test_gif_and_webp_writers():
    # GIF89a (looping, per-frame duration, comment) and WebP (RFC 9649) read back by Pillow;
    # lossless WebP gives the same pixels, and every writer the same bytes for the same frames.
    rng = np.random.default_rng(8)
    frames = [rng.integers(0, 256, (20, 30, 3), dtype=np.uint8) for _ in range(3)]
    gif = gif_bytes(frames, 120, {"lampcast.picture": "rendered"})
    with Image.open(io.BytesIO(gif)) as im:
        assert im.n_frames == 3 and im.info["loop"] == 0 and im.info["duration"] == 120
        assert b"lampcast.picture: rendered" in im.info["comment"]
    assert gif_bytes(frames, 120, {"lampcast.picture": "rendered"}) == gif
    still = webp_bytes(frames[0])
    with Image.open(io.BytesIO(still)) as im:
        assert np.array_equal(np.asarray(im.convert("RGB")), frames[0])
    assert webp_bytes(frames[0]) == still and webp_bytes(frames[0], 80) == webp_bytes(frames[0], 80)
    anim = animated_webp_bytes(frames, [100, 200, 300])
    with Image.open(io.BytesIO(anim)) as im:
        assert im.n_frames == 3 and im.info.get("loop") == 0
        for k, frame in enumerate(frames):
            im.seek(k)
            im.load()
            assert im.info["duration"] == 100 * (k + 1)
            assert np.array_equal(np.asarray(im.convert("RGB")), frame)
    with pytest.raises(ValueError):
        webp_bytes(frames[0], 101)


def test_repeated_gif_frames_quantised_once_give_pillows_own_file():
    # A frame that occurs twice (a wipe there and back) is quantised once; the file must be the
    # one Pillow's GIF89a writer makes from the RGB frames themselves (reference: Pillow).
    from render import __version__

    rng = np.random.default_rng(9)
    base = rng.integers(0, 256, (24, 40, 3), dtype=np.uint8)
    frames = []
    for x in (0, 10, 20, 30, 30, 20, 10, 0):
        f = base.copy()
        f[:, :x] = 255 - f[:, :x]
        frames.append(f)
    text = {"lampcast.picture": "rendered"}
    comment = "\n".join(f"{k}: {v}" for k, v in {"Software": f"lampcast {__version__}", **text}.items())
    buf = io.BytesIO()
    images = [Image.fromarray(f) for f in frames]
    images[0].save(
        buf, "GIF", save_all=True, append_images=images[1:], duration=90, loop=0, comment=comment.encode("utf-8")
    )
    assert gif_bytes(frames, 90, text) == buf.getvalue()


def test_continuous_tones_and_charts_keep_their_pixels():
    # Continuous-tone images are deflated with zlib's run-length strategy, charts at level 6:
    # either way Pillow and imageio (independent PNG readers) give back the same pixels.
    from render.output.images import CHART, PICTURE_KEY, RENDERED

    y, x = np.mgrid[0:90, 0:120]
    img = np.stack([(x * 2) % 256, (y * 3) % 256, (x * y) % 256], axis=-1).astype(np.uint8)
    for kind in (RENDERED, CHART, None):
        data = png_bytes(img, {PICTURE_KEY: kind} if kind else None)
        assert np.array_equal(iio.imread(data, extension=".png"), img)
        with Image.open(io.BytesIO(data)) as im:
            assert np.array_equal(np.asarray(im), img)
        assert png_bytes(img, {PICTURE_KEY: kind} if kind else None) == data


def test_image_writer_writes_what_the_writers_write_and_raises_their_errors(tmp_path):
    from render.output.images import ImageWriter, write_gif

    rng = np.random.default_rng(10)
    img = rng.integers(0, 256, (30, 40, 3), dtype=np.uint8)
    frames = [img, img[::-1].copy()]
    with ImageWriter() as writer:
        writer.png(tmp_path / "a.png", img, {"k": "v"})
        writer.gif(tmp_path / "a.gif", frames, 50, {"k": "v"})
        writer.call(write_png, tmp_path / "b.png", img[:, ::-1].copy())
    write_png(tmp_path / "c.png", img, {"k": "v"})
    write_gif(tmp_path / "c.gif", frames, 50, {"k": "v"})
    assert (tmp_path / "a.png").read_bytes() == (tmp_path / "c.png").read_bytes()
    assert (tmp_path / "a.gif").read_bytes() == (tmp_path / "c.gif").read_bytes()
    assert np.array_equal(iio.imread(tmp_path / "b.png"), img[:, ::-1])
    writer = ImageWriter()
    writer.png(tmp_path / "bad.png", img.astype(np.float32))
    writer.png(tmp_path / "d.png", img)
    with pytest.raises(ValueError, match="uint8 or uint16"):
        writer.wait()
    writer.close()
    assert (tmp_path / "d.png").is_file() and not (tmp_path / "bad.png").exists()
