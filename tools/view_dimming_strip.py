"""One view of a scene dimmed from 10 to 0.01 cd/m², through the night-vision stage.

The view is rendered once; each frame scales every light channel so that the mean luminance of
the surfaces seen takes the next level (10, 3, 1, 0.3, 0.1, 0.03, 0.01 cd/m²), without casting
a ray. Top row: each frame for an eye adapted to it; bottom row: one shared adaptation state
(from all frames together), so the true brightness relation is kept. Demo data only.

    python tools/view_dimming_strip.py [SCENE] [--view NAME] [--setup NAME] [--width 320]
                                       [--out outputs/view_dimming_strip.png]
"""

from __future__ import annotations

import argparse
import sys
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parents[1]
if str(ROOT) not in sys.path:
    sys.path.insert(0, str(ROOT))

from render.colour.colorimetry import resolve  # noqa: E402
from render.light.luminaires import channel_factors  # noqa: E402
from render.output.images import write_png  # noqa: E402
from render.study import RenderedView, Study  # noqa: E402

LEVELS_CD_M2 = (10.0, 3.0, 1.0, 0.3, 0.1, 0.03, 0.01)


def _label(image: np.ndarray, text: str) -> np.ndarray:
    from PIL import Image, ImageDraw, ImageFont

    band = Image.new("RGB", (image.shape[1], 22), (20, 20, 20))
    ImageDraw.Draw(band).text((6, 11), text, fill=(235, 235, 235), font=ImageFont.load_default(size=13), anchor="lm")
    return np.concatenate([np.asarray(band), image], axis=0)


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("scene", nargs="?", default=str(ROOT / "scenes" / "demo" / "linden_row.toml"))
    ap.add_argument("--view", default=None)
    ap.add_argument("--setup", default="led-warm")
    ap.add_argument("--width", type=int, default=320)
    ap.add_argument("--out", default=str(ROOT / "outputs" / "view_dimming_strip.png"))
    args = ap.parse_args(argv)

    study = Study(args.scene)
    base = study.render_view(args.view, args.setup, width_px=args.width)
    b = base.buffers
    surf = ((b.response >= 0) & (b.response != b.emitter_response)).reshape(-1, b.spp).all(axis=1)
    mean = float(base.colorimetry.luminance_cd_m2.reshape(-1)[surf].mean())
    factors, lamps = channel_factors(base.lights, study.setup(args.setup))
    spds = study.lamp_spds(lamps)
    frames = [
        RenderedView(
            base.name,
            f"{level:g} cd/m²",
            base.camera,
            b,
            base.lights,
            resolve(b, factors * (level / mean), spds, study.reflectances),
        )
        for level in LEVELS_CD_M2
    ]
    adapted = [study.display(f, "adapted") for f in frames]
    shared = study.display(frames, "shared")
    gap = np.full((22 + frames[0].camera.height_px, 4, 3), 255, np.uint8)
    rows = []
    for results, name in ((adapted, "adapted"), (shared, "shared")):
        tiles = []
        for level, r in zip(LEVELS_CD_M2, results):
            tiles += [_label(r.srgb8, f"{name}, {level:g} cd/m2"), gap]
        rows.append(np.concatenate(tiles[:-1], axis=1))
    strip = np.concatenate([rows[0], np.full((6, rows[0].shape[1], 3), 255, np.uint8), rows[1]], axis=0)
    path = write_png(
        args.out,
        strip,
        {
            "Software": "lampcast tools/view_dimming_strip.py",
            "lampcast.scene": Path(args.scene).name,
            "lampcast.view": base.name,
            "lampcast.setup": args.setup,
        },
    )
    print(path)
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
