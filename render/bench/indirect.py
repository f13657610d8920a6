"""Interreflection benchmark (``python -m render.bench indirect``): figures and ratios side by side.

* time per interreflection path per pixel (an "indirect sample per pixel") on a view of the
  demo: the view traced with ``--paths`` and with twice as many paths per pixel, alternating,
  the difference per path and pixel (the rest -- casting the camera samples again and the
  set-up -- is printed apart), in wall and processor seconds;
* the same street with 10 and with 100 luminaires (:func:`render.bench.light.long_street`),
  interreflection traced from the same viewpoint, and their ratio;
* relighting with interreflection: the direct light's colorimetry and the interreflected
  part's for a new lamp, side by side;
* with ``--storage``: the stored transport measured against references traced with the same
  paths -- nodes every 5 nm against every 1 nm under every built-in lamp, and per pixel / per
  2 × 2 block / per camera sample in float16 against per camera sample in float64 -- as the
  largest CIEDE2000 (colour-science; Lab relative to the lamp's light on a white diffuser at the
  view's mean illuminance) and luminance errors of the whole image and of the interreflected
  part alone; and the bytes each layout needs at 1920×1080 with the view's light channels.
"""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path

import numpy as np

from render.bench.timing import interleaved_cpu, ratios
from render.resources import demo_scene_path

DEMO = demo_scene_path()

#: Interreflected luminance below this share of the view's largest is left out of the
#: relative errors of the interreflected part alone (ratios of nearly nothing).
INDIRECT_FLOOR = 1e-3


@dataclass(frozen=True)
class ImageError:
    """Largest CIEDE2000 and relative luminance errors of an image against its reference, and
    the largest relative luminance error of the interreflected part alone."""

    max_delta_e00: float
    max_luminance: float
    max_indirect_luminance: float

    def text(self) -> str:
        return (
            f"max ΔE00 {self.max_delta_e00:.4f}, luminance {100 * self.max_luminance:.3f} %, "
            f"interreflected part alone {100 * self.max_indirect_luminance:.3f} %"
        )


def image_error(direct: np.ndarray, indirect: np.ndarray, reference: np.ndarray, white_xyz: np.ndarray) -> ImageError:
    """Errors of ``direct + indirect`` against ``direct + reference`` (each (H, W, ≥3) X, Y, Z)."""
    import colour

    xy = colour.XYZ_to_xy(white_xyz)
    test = direct[..., :3] + indirect[..., :3]
    ref = direct[..., :3] + reference[..., :3]
    de = colour.delta_E(
        colour.XYZ_to_Lab(test / white_xyz[1], xy), colour.XYZ_to_Lab(ref / white_xyz[1], xy), method="CIE 2000"
    )
    seen = ref[..., 1] > 0
    lum = np.abs(test[..., 1][seen] / ref[..., 1][seen] - 1.0)
    r = reference[..., 1]
    bright = r > INDIRECT_FLOOR * r.max() if r.size and r.max() > 0 else np.zeros(r.shape, bool)
    ind = np.abs(indirect[..., 1][bright] / r[bright] - 1.0)
    return ImageError(float(de.max()), float(lum.max()) if lum.size else 0.0, float(ind.max()) if ind.size else 0.0)


def _xyz_rows(values, rows_of_sample, response, spp, factors, table, lamp_of_channel, n_pix):
    """X, Y, Z, Y' per pixel from float64 rows, sample ``s`` reading row ``rows_of_sample[s]``
    (the reference and the other layouts of :func:`storage_errors`)."""
    pixel = np.arange(response.size) // spp
    out = np.zeros((n_pix, 4))
    for k in range(table.shape[0]):
        sel = response == k
        if not np.any(sel):
            continue
        part = np.zeros((int(sel.sum()), 4))
        for c in range(values.shape[1]):
            part += factors[c] * values[rows_of_sample[sel], c, :] @ table[k, lamp_of_channel[c]]
        np.add.at(out, pixel[sel], part / spp)
    return out


def storage_errors(study, rendered, paths: int, bounces: int, seed: int) -> None:
    """Print the measured errors of the stored transport (see the module text)."""
    from render.colour.colorimetry import lamps_of_channels, resolve
    from render.colour.lamps.catalogue import builtin_lamps
    from render.light.indirect import IndirectSettings, PathTracer, indirect_xyz, trace_view, transport_table
    from render.light.indirect.view import pack_rows, view_transport_tiles
    from render.light.luminaires import channel_factors

    buffers, lights = rendered.buffers, rendered.lights
    C = lights.n_channels
    ones = np.ones(C)
    n_pix = buffers.width_px * buffers.height_px
    shape = (buffers.height_px, buffers.width_px, 4)
    traced = {
        step: trace_view(
            buffers, lights, study.bvh, study.reflectances, IndirectSettings(bounces, paths, node_step_nm=step), seed
        )
        for step in (5, 1)
    }
    print(
        f"nodes every 5 nm against every 1 nm (the same paths; per pixel, float16), "
        f"{buffers.width_px}x{buffers.height_px} px, {buffers.spp} samples/px, {paths} paths/px, {bounces} bounces:"
    )
    worst: list[tuple[ImageError, str]] = []
    for lamp_id, lamp in builtin_lamps().items():
        spds = [lamp.spd] * C
        d = resolve(buffers, ones, spds, study.reflectances)
        direct = np.concatenate([d.xyz_cd_m2, d.scotopic_cd_m2[..., None]], axis=-1)
        a = indirect_xyz(traced[5], buffers.response, ones, spds, study.reflectances)
        b = indirect_xyz(traced[1], buffers.response, ones, spds, study.reflectances)
        worst.append((image_error(direct, a, b, d.white_xyz), lamp_id))
    for err, lamp_id in sorted(worst, key=lambda x: x[0].max_luminance)[-4:]:
        print(f"  {lamp_id:45s} {err.text()}")
    print(
        f"  every built-in lamp ({len(worst)}): max ΔE00 {max(e.max_delta_e00 for e, _ in worst):.4f}, "
        f"luminance {100 * max(e.max_luminance for e, _ in worst):.3f} %, "
        f"interreflected part alone {100 * max(e.max_indirect_luminance for e, _ in worst):.3f} %"
    )

    # Layouts: the same paths kept per camera sample in float64 (the reference), then grouped.
    mesh = buffers.rays.mesh
    tracer = PathTracer(mesh, study.bvh, lights, study.reflectances, IndirectSettings(bounces, paths))
    S = buffers.n_samples
    n = tracer.basis.n_nodes
    per_sample = np.zeros((S, C, n))
    count = np.zeros(S)
    for index, moments, paths_s in view_transport_tiles(buffers, tracer, seed, per_sample=True):
        per_sample[index] = moments
        count[index] = paths_s
    pix = np.arange(S) // buffers.spp
    W = buffers.width_px
    plain = np.zeros((n_pix, C, n))
    np.add.at(plain, pix, per_sample * count[:, None, None])
    pix_paths = np.bincount(pix, weights=count, minlength=n_pix)
    block_of_pixel = (np.arange(n_pix) // W // 2) * ((W + 1) // 2) + (np.arange(n_pix) % W) // 2
    n_blocks = int(block_of_pixel.max()) + 1
    block = np.zeros((n_blocks, C, n))
    np.add.at(block, block_of_pixel, plain)
    block /= np.maximum(np.bincount(block_of_pixel, weights=pix_paths, minlength=n_blocks), 1)[:, None, None]
    plain /= np.maximum(pix_paths, 1)[:, None, None]

    def unpacked(rows):
        v, s = pack_rows(rows)
        return v.astype(np.float64) * s[:, None, None].astype(np.float64)

    print("layouts, float16 (5 nm nodes), against the same paths kept per camera sample in float64:")
    for other_lamp in (None, "led-3000k-cie-b2"):
        factors, lamps = channel_factors(lights, study.setup(rendered.setup))
        if other_lamp:
            lamps = [other_lamp] * C
        spds = study.lamp_spds(lamps)
        distinct, lamp_of_channel = lamps_of_channels(spds)
        table = transport_table(study.reflectances, np.array(distinct), tracer.basis)
        d = resolve(buffers, factors, spds, study.reflectances)
        direct = np.concatenate([d.xyz_cd_m2, d.scotopic_cd_m2[..., None]], axis=-1)
        args = (buffers.response, buffers.spp, factors, table, lamp_of_channel, n_pix)
        ref = _xyz_rows(per_sample, np.arange(S), *args).reshape(shape)
        label = other_lamp or ", ".join(sorted(set(lamps)))
        kept = indirect_xyz(traced[5], buffers.response, factors, spds, study.reflectances)
        print(
            f"  {label}: {'per pixel, reflectance-weighted (kept)':42s} {image_error(direct, kept, ref, d.white_xyz).text()}"
        )
        for name, rows, row_of_sample in (
            ("per pixel, plain mean", plain, pix),
            ("per 2x2 block, plain mean", block, block_of_pixel[pix]),
            ("per camera sample", per_sample, np.arange(S)),
        ):
            test = _xyz_rows(unpacked(rows), row_of_sample, *args).reshape(shape)
            print(f"  {label}: {name:42s} {image_error(direct, test, ref, d.white_xyz).text()}")
    row_bytes = C * n * 2 + 4 + 4
    sizes = {"per pixel": 1920 * 1080, "per 2x2 block": 960 * 540, "per camera sample": 1920 * 1080 * buffers.spp}
    print(
        f"bytes at 1920x1080 with {C} light channels ({n} nodes in float16, a float32 scale and an int32 path "
        f"count per row; {buffers.spp} samples/px): "
        + ", ".join(f"{k} {v * row_bytes / 2**20:.0f} MiB" for k, v in sizes.items())
    )


def cmd_indirect(args) -> int:
    from render.bench.light import long_street
    from render.colour.colorimetry import resolve
    from render.light.indirect import IndirectSettings, indirect_xyz, trace_view
    from render.light.integrator import render_buffers
    from render.light.luminaires import channel_factors
    from render.study import Study

    study = Study(args.scene)
    _ = study.bvh, study.reflectances
    if args.storage:
        rendered = study.render_view(args.view, width_px=args.storage_width, samples_per_pixel=args.spp)
        storage_errors(study, rendered, args.paths, args.bounces, seed=1)
        return 0

    v = study.scene.view(args.view)
    camera = study.camera(v.name, args.width)
    small = study.camera(v.name, 64)

    def direct(st, cam):
        from render.light.luminaires import luminaire_set

        lights = luminaire_set(st.scene)
        return render_buffers(st.mesh, st.bvh, lights, cam, args.spp, 0), lights

    def trace(st, buffers, lights, paths):
        return trace_view(buffers, lights, st.bvh, st.reflectances, IndirectSettings(args.bounces, paths), 0)

    warm, warm_lights = direct(study, small)
    trace(study, warm, warm_lights, 1)
    buffers, lights = direct(study, camera)
    n_pix = camera.width_px * camera.height_px
    print(
        f"scene {Path(args.scene).name}, view '{v.name}', {camera.width_px}x{camera.height_px} px, "
        f"{args.spp} camera samples/px, {args.bounces} bounces, {study.mesh.n_triangles} triangles, "
        f"{lights.n_luminaires} luminaires"
    )
    p = args.paths
    wall, cpu, last = interleaved_cpu(
        {
            "p": lambda: trace(study, buffers, lights, p),
            "2p": lambda: trace(study, buffers, lights, 2 * p),
        },
        args.repeat,
    )
    print(f"figures are min / median / max over {args.repeat} rounds, the measurements alternating within a round")
    for label, t in (("wall", wall), ("processor", cpu)):
        per = [(b - a) / (p * n_pix) for a, b in zip(t["p"].values, t["2p"].values)]
        rest = [2 * a - b for a, b in zip(t["p"].values, t["2p"].values)]
        print(
            f"{label}: {p} paths/px {t['p'].text()} s, {2 * p} paths/px {t['2p'].text()} s; per path per pixel "
            f"{1e9 * min(per):.0f} / {1e9 * float(np.median(per)):.0f} / {1e9 * max(per):.0f} ns "
            f"({1e3 * float(np.median(per)) * n_pix:.0f} ms per indirect sample per pixel for the frame); "
            f"casting and set-up {float(np.median(rest)):.2f} s"
        )
    factors, lamps = channel_factors(lights)
    new = study.lamp_spds(["led-4000k-cie-b3"] * len(lamps))
    ind = last["p"]
    t, _, _ = interleaved_cpu(
        {
            "direct": lambda: resolve(buffers, factors, new, study.reflectances),
            "indirect": lambda: indirect_xyz(ind, buffers.response, factors, new, study.reflectances),
        },
        max(args.repeat, 3),
    )
    print(
        f"relight for a new lamp: direct light {t['direct'].text(1000, '.1f')} ms, interreflected "
        f"{t['indirect'].text(1000, '.1f')} ms; interreflected/direct {ratios(t['indirect'], t['direct']).text(1, '.2f')}"
    )
    studies = {}
    for n in (10, 100):
        st = Study(long_street(study.scene, n))
        _ = st.bvh, st.reflectances
        b, lum = direct(st, camera)
        studies[n] = (st, b, lum)
        print(f"{n:3d} luminaires: {st.scene.street.length_m:.0f} m street, {st.mesh.n_triangles} triangles")
    wall, cpu, _ = interleaved_cpu(
        {n: (lambda x=x: trace(x[0], x[1], x[2], p)) for n, x in studies.items()},
        args.repeat,
    )
    print(f"interreflection with 10 luminaires: {wall[10].text()} s; with 100: {wall[100].text()} s")
    print(
        f"100 / 10 luminaires = {ratios(wall[100], wall[10]).text(1, '.2f')} "
        f"(processor time {ratios(cpu[100], cpu[10]).text(1, '.2f')})"
    )
    return 0


def add_parser(sub) -> None:
    p = sub.add_parser(
        "indirect", help="interreflection: time per path per pixel, 10 vs 100 luminaires, stored-transport errors"
    )
    p.add_argument("--scene", default=str(DEMO))
    p.add_argument("--view", default=None)
    p.add_argument("--width", type=int, default=1280, help="view width in pixels (height in proportion)")
    p.add_argument("--spp", type=int, default=4, help="camera samples per pixel")
    p.add_argument("--paths", type=int, default=4, help="interreflection paths per pixel (and twice as many)")
    p.add_argument("--bounces", type=int, default=3)
    p.add_argument("--repeat", type=int, default=3)
    p.add_argument("--storage", action="store_true", help="measure the stored transport's errors instead")
    p.add_argument("--storage-width", type=int, default=256, help="view width of --storage")
    p.set_defaults(func=cmd_indirect)
