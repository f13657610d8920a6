"""``python -m render.bench COMMAND``: benchmarks that print figures and ratios side by side.

* ``rays`` -- BVH build time and ray throughput, with an Embree comparison (:mod:`render.bench.rays`).
* ``light`` -- full render vs relight, luminaire-count scaling, 1 nm vs 5 nm (:mod:`render.bench.light`).
* ``denoise`` -- the interreflection denoise: its error against a reference, its cost per pixel (:mod:`render.bench.denoise`).
* ``indirect`` -- interreflection: time per path per pixel, 10 vs 100 luminaires, stored-transport errors (:mod:`render.bench.indirect`).
* ``calc`` -- a full calculation of a scene vs one view's render (:mod:`render.bench.calc`).
* ``report`` -- report.html's size, bytes per embedded image kind, figure drawing time (:mod:`render.bench.report`).
* ``peer`` -- a direct-light render against Mitsuba 3, side by side (:mod:`render.bench.peer`).
* ``peer-indirect`` -- interreflected light per region against Mitsuba 3's spectral path tracer (:mod:`render.bench.peer_indirect`).
* ``study`` -- design-study throughput on 1 and 2 Dask workers (:mod:`render.bench.study`).
* ``demo`` -- the whole ``lampcast demo``, warm, optionally against another tree (:mod:`render.bench.demo`).
* ``startup`` -- quick commands as new processes, a 1M-triangle OBJ, a cold demo (:mod:`render.bench.startup`).
* ``windows`` -- lit windows: time per path with 10, 100, 400 lit windows, against another tree (:mod:`render.bench.windows`).
* ``vision`` -- the vision stage of a comparison, glare optics shared vs per image (:mod:`render.bench.vision`).
"""

from __future__ import annotations

import argparse
import sys

from render.bench import calc, demo, denoise, indirect, light, peer, peer_indirect, rays, report, startup, windows
from render.bench import study as study_bench
from render.bench import vision as vision_bench


def build_parser() -> argparse.ArgumentParser:
    parser = argparse.ArgumentParser(prog="python -m render.bench", description="lampcast benchmarks")
    sub = parser.add_subparsers(dest="command", required=True, metavar="COMMAND")
    rays.add_parser(sub)
    light.add_parser(sub)
    indirect.add_parser(sub)
    denoise.add_parser(sub)
    calc.add_parser(sub)
    report.add_parser(sub)
    peer.add_parser(sub)
    peer_indirect.add_parser(sub)
    study_bench.add_parser(sub)
    startup.add_parser(sub)
    demo.add_parser(sub)
    vision_bench.add_parser(sub)
    windows.add_parser(sub)
    return parser


def main(argv: list[str] | None = None) -> int:
    args = build_parser().parse_args(argv)
    return int(args.func(args))


if __name__ == "__main__":
    sys.exit(main())
