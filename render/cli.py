"""The ``lampcast`` command line (also ``python -m render``).

Each sub-command is a thin wrapper: it parses options, calls the library and prints. A user
mistake (:class:`~render.errors.InputError`) is printed as one line per problem and the command
exits with status 2, without a traceback.
"""

from __future__ import annotations

import argparse
import json
import sys
from pathlib import Path

from render import __version__
from render.errors import InputError

CAUTION = (
    "Caution: lampcast images and figures are illustrative previews, not a lighting design or a "
    "compliance calculation. Road-lighting design and compliance follow local codes and standards "
    "and the judgement of qualified, licensed practitioners."
)

REPO_ROOT = Path(__file__).resolve().parents[1]
DEMO_SCENE = REPO_ROOT / "scenes" / "demo" / "linden_row.toml"


def _out_dir(path: str | None, default: str) -> Path:
    out = Path(path) if path else Path("outputs") / default
    out.mkdir(parents=True, exist_ok=True)
    return out


# --- lamps -----------------------------------------------------------------------------------

def cmd_lamps(args) -> int:
    from render.lampfigures import figures_json, format_lamp_table, lamp_figures, plot_lamp_spectrum
    from render.lamps import builtin_lamps, get_lamp

    lamps = [get_lamp(ref, base_dir=Path.cwd()) for ref in args.ids] if args.ids else list(builtin_lamps().values())
    figures = [lamp_figures(lamp) for lamp in lamps]
    if args.json:
        print(figures_json(figures))
    else:
        print(format_lamp_table(figures))
    if args.plots:
        out = _out_dir(args.plots, "lamps")
        for lamp in lamps:
            plot_lamp_spectrum(lamp, out / f"{lamp.id}.png")
        print(f"spectrum plots written to {out}/", file=sys.stderr)
    return 0


# --- materials -------------------------------------------------------------------------------

def cmd_materials(args) -> int:
    from render.materials import format_material_table, material_library, material_table, plot_material

    lib = material_library()
    rows = material_table(lib)
    if args.json:
        print(json.dumps(rows, indent=2))
    else:
        print(format_material_table(rows))
    if args.plots:
        out = _out_dir(args.plots, "materials")
        for material in lib.values():
            plot_material(material, out / f"{material.id}.png")
        print(f"reflectance plots written to {out}/", file=sys.stderr)
    return 0


# --- photometry ----------------------------------------------------------------------------

def cmd_photometry(args) -> int:
    from render.photometry import describe_photometry_file

    plot = args.plot
    if plot is None and not args.no_plot:
        out = _out_dir(args.out, "photometry")
        plot = str(out / f"{Path(args.file).stem}-polar.png")
    print(describe_photometry_file(args.file, base_dir=Path.cwd(), plot_path=plot))
    if plot:
        print(f"polar plot written to {plot}", file=sys.stderr)
    return 0


# --- check -----------------------------------------------------------------------------------

def cmd_check(args) -> int:
    from render.scene import check_scene, compile_scene

    scene = check_scene(args.scene)
    mesh = compile_scene(scene)
    inspect = [o.name for o in mesh.objects if o.inspect]
    print(f"{args.scene}: OK")
    print(f"  {mesh.n_triangles} triangles, {len(mesh.objects)} objects, {len(mesh.material_names)} materials")
    print(f"  {len(scene.luminaires)} luminaires in groups: {', '.join(scene.groups) or '(none)'}")
    print(f"  views: {', '.join(v.name for v in scene.views)}")
    if scene.setups:
        print(f"  setups: {', '.join(scene.setups)}")
    if inspect:
        print(f"  inspected objects: {', '.join(inspect)}")
    return 0


# --- render ----------------------------------------------------------------------------------

def cmd_render(args) -> int:
    from render.aov import render_aovs, write_aov_previews
    from render.bvh import build_bvh
    from render.cameras import Camera
    from render.scene import compile_scene, load_scene

    scene = load_scene(args.scene)
    view = scene.view(args.view)
    mesh = compile_scene(scene)
    bvh = build_bvh(mesh.triangles_m)
    width, height = view.width_px, view.height_px
    if args.width:
        height = max(1, round(height * args.width / width))
        width = args.width
    camera = Camera(position_m=view.position_m, target_m=view.target_m, hfov_deg=view.hfov_deg, width_px=width, height_px=height)
    out = _out_dir(args.out, Path(args.scene).stem)
    spp = args.spp or scene.render.samples_per_pixel
    seed = scene.render.seed if args.seed is None else args.seed
    if not args.aov:
        print("lampcast render: only --aov (depth, normal, material and object id images) is available in this version", file=sys.stderr)
        return 2
    aovs = render_aovs(mesh, bvh, camera, samples_per_pixel=spp, seed=seed)
    written = write_aov_previews(aovs, out, view.name)
    for path in written:
        print(path)
    return 0


# --- demo ------------------------------------------------------------------------------------

def cmd_demo(args) -> int:
    """The main job on the bundled demo street, as far as this version goes."""
    from render.lampfigures import format_lamp_table, lamp_figures
    from render.lamps import get_lamp

    print(CAUTION)
    print()
    print("Lamps compared for Linden Row (before: low-pressure sodium, after: 3000 K LED):")
    lamps = [get_lamp(i) for i in DEMO_LAMPS]
    print(format_lamp_table([lamp_figures(lamp) for lamp in lamps]))
    print()
    ns = argparse.Namespace(scene=str(DEMO_SCENE))
    cmd_check(ns)
    print()
    ns = argparse.Namespace(scene=str(DEMO_SCENE), view=None, out=args.out or "outputs/demo", aov=True, spp=1, seed=None, width=args.width)
    return cmd_render(ns)


DEMO_LAMPS = ("sodium-low-pressure", "sodium-high-pressure-cie-hp1", "led-3000k-cie-b2")


# --- parser ----------------------------------------------------------------------------------

def build_parser() -> argparse.ArgumentParser:
    parser = argparse.ArgumentParser(
        prog="lampcast",
        description="Spectral night-time previews of a street under candidate street lamps. " + CAUTION,
    )
    parser.add_argument("--version", action="version", version=f"lampcast {__version__}")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND")

    p = sub.add_parser("lamps", help="list built-in lamps (or lamp files) with their colour and photometric figures")
    p.add_argument("ids", nargs="*", metavar="ID", help="lamp ids or spectrum files (default: all built-in lamps)")
    p.add_argument("--json", action="store_true", help="print JSON instead of a table")
    p.add_argument("--plots", nargs="?", const="outputs/lamps", metavar="DIR", help="also write a spectrum plot per lamp (default DIR outputs/lamps)")
    p.set_defaults(func=cmd_lamps)

    p = sub.add_parser("materials", help="list the surface materials with their sources")
    p.add_argument("--json", action="store_true", help="print JSON instead of a table")
    p.add_argument("--plots", nargs="?", const="outputs/materials", metavar="DIR", help="also write a reflectance plot per material")
    p.set_defaults(func=cmd_materials)

    p = sub.add_parser("photometry", help="summarise an LM-63 photometric file (flux, peak, ULOR) and plot it")
    p.add_argument("file", help="LM-63 (.ies) file or a built-in generic distribution id")
    p.add_argument("--plot", metavar="PNG", help="where to write the polar plot (default outputs/photometry/NAME-polar.png)")
    p.add_argument("--no-plot", action="store_true", help="do not write a polar plot")
    p.add_argument("--out", help="output folder for the default plot path")
    p.set_defaults(func=cmd_photometry)

    p = sub.add_parser("check", help="check a scene file without rendering; lists every problem found")
    p.add_argument("scene", help="scene file (TOML)")
    p.set_defaults(func=cmd_check)

    p = sub.add_parser("render", help="render one view of a scene")
    p.add_argument("scene", help="scene file (TOML)")
    p.add_argument("--view", help="view name (default: the scene's first view)")
    p.add_argument("--aov", action="store_true", help="write depth, normal, material-id and object-id images and arrays")
    p.add_argument("--spp", type=int, help="samples per pixel (default: the scene's render.samples_per_pixel)")
    p.add_argument("--seed", type=int, help="random seed (default: the scene's render.seed)")
    p.add_argument("--width", type=int, help="override the image width in pixels (height keeps the aspect ratio)")
    p.add_argument("--out", help="output folder (default outputs/SCENE)")
    p.set_defaults(func=cmd_render)

    p = sub.add_parser("demo", help="run the main job on the bundled demo street (outputs/demo)")
    p.add_argument("--out", help="output folder (default outputs/demo)")
    p.add_argument("--width", type=int, help="override the image width in pixels")
    p.set_defaults(func=cmd_demo)
    return parser


def main(argv: list[str] | None = None) -> int:
    parser = build_parser()
    args = parser.parse_args(argv)
    if not getattr(args, "func", None):
        parser.print_help()
        return 0
    try:
        return int(args.func(args) or 0)
    except InputError as err:
        for problem in err.problems:
            print(f"error: {problem}", file=sys.stderr)
        return 2
    except BrokenPipeError:
        # Output piped into e.g. `head`: stop quietly.
        import os

        devnull = os.open(os.devnull, os.O_WRONLY)
        os.dup2(devnull, sys.stdout.fileno())
        return 0
    except KeyboardInterrupt:
        print("interrupted", file=sys.stderr)
        return 130
