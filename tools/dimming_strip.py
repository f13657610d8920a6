"""Render a synthetic colour-patch scene dimmed step by step, to document the vision stage.

The 24 ColorChecker reflectances (colour-science 'ColorChecker N Ohta') on a dark grey ground
(the N3.5 patch, about the reflectance of asphalt) are lit by a warm-white LED (CIE 15 LED-B2,
colour-science) or CIE D65, at white-diffuser luminances from 10 to 0.01 cd/m². Two rows:
each image shown to an observer adapted to it (``adapted``), and all images shown with one
shared adaptation state (``shared``: true brightness relation kept). Demo data only.

    python tools/dimming_strip.py [--lamp LED-B2|D65] [--out outputs/dimming_strip.png]
"""

from __future__ import annotations

import argparse
import sys
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parents[1]
for _folder in (ROOT, ROOT / "tests"):  # the package, and the synthetic patch charts of the tests
    if str(_folder) not in sys.path:
        sys.path.insert(0, str(_folder))

import synthetic  # noqa: E402

from render.output.images import write_png  # noqa: E402
from render.vision import ObserverSettings, ViewGeometry, ViewLight, render_display, shared_display  # noqa: E402

LEVELS_CD_M2 = (10.0, 3.0, 1.0, 0.3, 0.1, 0.03, 0.01)


def scene(lamp: str, white_cd_m2: float, patch_px: int = 24, gap_px: int = 4):
    _, refl = synthetic.colour_checker_reflectances()
    xyz, scot, wx, ws = synthetic.surface_buffers(refl, synthetic.illuminant_spd(lamp), white_cd_m2)
    ground = 22  # N3.5
    img = synthetic.patch_image(xyz, 4, 6, patch_px, gap_px, background=xyz[ground])
    s = synthetic.patch_image(scot, 4, 6, patch_px, gap_px, background=scot[ground])
    # The lamp white is known here: pass it as the adapting white.
    return ViewLight(img, s, white_xyz=wx, white_scotopic=ws)


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--lamp", default="LED-B2", help="colour-science illuminant name (default LED-B2)")
    ap.add_argument("--out", default=str(ROOT / "outputs" / "dimming_strip.png"))
    args = ap.parse_args(argv)

    buffers = [scene(args.lamp, lv) for lv in LEVELS_CD_M2]
    h, w = buffers[0].scotopic_cd_m2.shape
    geometry = ViewGeometry(20.0, w, h)
    observer = ObserverSettings()
    adapted = [render_display(b, geometry, observer, "adapted") for b in buffers]
    shared = shared_display(buffers, geometry, observer)

    from matplotlib.backends.backend_agg import FigureCanvasAgg
    from matplotlib.figure import Figure

    n = len(LEVELS_CD_M2)
    fig = Figure(figsize=(1.9 * n, 3.9), dpi=100, facecolor="white")
    canvas = FigureCanvasAgg(fig)
    for row, (name, results) in enumerate((("adapted", adapted), ("shared", shared))):
        for col, (lv, res) in enumerate(zip(LEVELS_CD_M2, results)):
            ax = fig.add_subplot(2, n, row * n + col + 1)
            ax.imshow(res.srgb8, interpolation="nearest")
            ax.set_xticks([])
            ax.set_yticks([])
            st = res.state
            ax.set_title(f"white {lv:g} cd/m²\nL_a {st.mesopic_cd_m2:.3g}, m {st.m:.2f}", fontsize=7)
            if col == 0:
                ax.set_ylabel(name, fontsize=9)
    fig.suptitle(
        f"ColorChecker under {args.lamp}, dimmed (observer {observer.age_years:g} y, "
        f"display {observer.display_peak_cd_m2:g} cd/m²)",
        fontsize=9,
    )
    fig.tight_layout()
    canvas.draw()
    rgb = np.asarray(canvas.buffer_rgba())[..., :3].copy()
    out = write_png(
        args.out,
        rgb,
        {
            "Software": "lampcast tools/dimming_strip.py",
            "lampcast.lamp": args.lamp,
            "lampcast.levels_cd_m2": " ".join(f"{v:g}" for v in LEVELS_CD_M2),
        },
    )
    for lv, a, s in zip(LEVELS_CD_M2, adapted, shared):
        print(
            f"white {lv:6g} cd/m²: adapted L_a={a.state.mesopic_cd_m2:.4g} m={a.state.m:.3f} "
            f"scale={a.diagnostics['display_scale']:.3g} | shared scale={s.diagnostics['display_scale']:.3g}"
        )
    print(f"wrote {out}")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
