"""Denoise benchmark (``python -m render.bench denoise``): the error it removes and what it costs.

* **Error.** A view of the demo traced with ``--paths`` interreflection paths per pixel under
  ``--seeds`` seeds, as traced and filtered with each number of passes of ``--passes``
  (:mod:`render.light.indirect.denoise`), against a reference of the same view traced with
  ``--reference-paths`` paths in two halves under other seeds. The figure is the RMS over the
  pixels that see a surface of the interreflected luminance's error (cd/m²), with the
  reference's own noise taken out: its variance is estimated from the halves' difference
  (var = mean((r1 − r2)²)/4) and subtracted from the mean squared error. Also given: the
  variance across seeds (the noise left) and the rest (squared bias), and the factor by which
  filtering lowers the RMS error.
* **Cost.** Tracing ``--paths`` paths per pixel, finding the guides (the camera samples cast
  again) and filtering, alternating, in wall and processor seconds, min / median / max over
  ``--repeat`` rounds (the filter with ``--time-passes``, default the scene key's), per pixel
  and per traced path per pixel.
"""

from __future__ import annotations

import numpy as np

from render.bench.timing import interleaved_cpu
from render.resources import demo_scene_path

DEMO = demo_scene_path()


def cmd_denoise(args) -> int:
    from dataclasses import replace

    from render.light.indirect import IndirectSettings, indirect_xyz, trace_view
    from render.light.indirect.denoise import DEFAULT_DENOISE, DenoiseSettings, filter_transport, view_guides
    from render.light.luminaires import channel_factors
    from render.study import Study

    study = Study(args.scene)
    rendered = study.render_view(args.view, args.setup, width_px=args.width, samples_per_pixel=args.spp, bounces=0)
    buffers, lights = rendered.buffers, rendered.lights
    factors, lamps = channel_factors(lights, study.setup(args.setup))
    spds = study.lamp_spds(lamps)
    W, H = buffers.width_px, buffers.height_px
    n_pix = W * H

    def trace(paths: int, seed: int):
        return trace_view(buffers, lights, study.bvh, study.reflectances, IndirectSettings(args.bounces, paths), seed)

    def luminance(indirect) -> np.ndarray:
        return indirect_xyz(indirect, buffers.response, factors, spds, study.reflectances)[..., 1].reshape(-1)

    print(
        f"scene {study.scene.path.name}, view '{rendered.name}', {W}x{H} px, {args.spp} camera samples/px, "
        f"{args.bounces} bounces, {lights.n_channels} light channels, setup {args.setup or '(scene)'}"
    )
    guides = view_guides(buffers)
    seen = guides.valid
    half = args.reference_paths // 2
    r1 = luminance(trace(half, 1001))
    r2 = luminance(trace(half, 1002))
    reference = 0.5 * (r1 + r2)
    var_ref = float(np.mean((r1 - r2)[seen] ** 2) / 4.0)
    print(
        f"reference: {2 * half} paths/px in two halves; mean interreflected luminance "
        f"{reference[seen].mean():.5f} cd/m², its own noise (RMS) {np.sqrt(var_ref):.5f} cd/m²"
    )
    traced = [trace(args.paths, seed) for seed in range(1, args.seeds + 1)]

    def figures(images: list[np.ndarray]) -> tuple[float, float, float]:
        ys = np.array(images)
        mse = float(np.mean([np.mean((y - reference)[seen] ** 2) for y in ys])) - var_ref
        noise = float(np.mean(ys.var(axis=0, ddof=1)[seen])) if len(ys) > 1 else float("nan")
        return np.sqrt(max(mse, 0.0)), np.sqrt(noise), np.sqrt(max(mse - noise, 0.0))

    base = figures([luminance(t) for t in traced])
    print(f"RMS error of the interreflected luminance, cd/m² ({args.paths} paths/px, {args.seeds} seeds):")
    print(f"  as traced:          {base[0]:.5f} (noise {base[1]:.5f}, rest {base[2]:.5f})")
    for passes in args.passes:
        st = DenoiseSettings(passes=passes)
        filtered = []
        for t in traced:
            values, scale = filter_transport(t.values, t.scale, guides, st)
            filtered.append(luminance(replace(t, values=values, scale=scale)))
        f = figures(filtered)
        print(
            f"  filtered, {passes} passes: {f[0]:.5f} (noise {f[1]:.5f}, rest {f[2]:.5f}); "
            f"error lower by a factor {base[0] / f[0]:.2f}"
        )

    one = traced[0]
    st = DenoiseSettings(passes=args.time_passes) if args.time_passes else DEFAULT_DENOISE
    wall, cpu, _ = interleaved_cpu(
        {
            "trace": lambda: trace(args.paths, 1),
            "guides": lambda: view_guides(buffers, st),
            "filter": lambda: filter_transport(one.values, one.scale, guides, st),
        },
        args.repeat,
    )
    print(f"cost ({args.repeat} rounds alternating; min / median / max; filter with {st.passes} passes), µs per pixel:")
    for label, t in (("wall", wall), ("processor", cpu)):
        print(
            f"  {label}: trace {args.paths} paths/px {t['trace'].text(1e6 / n_pix, '.1f')}, "
            f"guides {t['guides'].text(1e6 / n_pix, '.2f')}, filter {t['filter'].text(1e6 / n_pix, '.1f')}; "
            f"filter / trace {t['filter'].median / t['trace'].median:.2f} (median); "
            f"one traced path per pixel {t['trace'].median * 1e6 / n_pix / args.paths:.2f}"
        )
    return 0


def add_parser(sub) -> None:
    p = sub.add_parser("denoise", help="interreflection denoise: error against a reference, cost per pixel")
    p.add_argument("--scene", default=str(DEMO))
    p.add_argument("--view", default=None)
    p.add_argument("--setup", default="sodium")
    p.add_argument("--width", type=int, default=128, help="view width in pixels (height in proportion)")
    p.add_argument("--spp", type=int, default=4, help="camera samples per pixel")
    p.add_argument("--bounces", type=int, default=3)
    p.add_argument("--paths", type=int, default=8, help="interreflection paths per pixel of the images measured")
    p.add_argument("--seeds", type=int, default=3, help="seeds of the images measured")
    p.add_argument("--reference-paths", type=int, default=256, help="paths per pixel of the reference")
    p.add_argument("--passes", type=int, nargs="+", default=[2, 3, 4, 5], help="filter passes to measure")
    p.add_argument("--time-passes", type=int, default=None, help="filter passes of the cost figures (default 3)")
    p.add_argument("--repeat", type=int, default=3)
    p.set_defaults(func=cmd_denoise)
