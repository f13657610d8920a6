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

import numpy as np

from render import __version__
from render.resources import demo_scene_path
from render.errors import InputError, Problem, input_error
from render.fileio import file_stem
from render.output.provenance import image_metadata
from render.output.report import STANDING_CAUTION as CAUTION  # one wording of the caution everywhere

DEMO_SCENE = demo_scene_path()


def _out_dir(path: str | None, default: str) -> Path:
    out = Path(path) if path else Path("outputs") / default
    out.mkdir(parents=True, exist_ok=True)
    return out


# --- lamps -----------------------------------------------------------------------------------


def cmd_lamps(args) -> int:
    from render.colour.lamp_figures import lamp_figures
    from render.colour.lamps import builtin_lamps, get_lamp
    from render.output.lamp_sheet import format_lamp_table, lamp_figures_json, plot_lamp_spectrum

    lamps = [get_lamp(ref, base_dir=Path.cwd()) for ref in args.ids] if args.ids else list(builtin_lamps().values())
    figures = [lamp_figures(lamp) for lamp in lamps]
    if args.json:
        print(lamp_figures_json(figures))
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
    from render.colour.materials import material_library
    from render.output.material_sheet import format_material_table, material_table, plot_material

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
    from render.light.photometry import describe_photometry_file

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
    from render.geometry.build import compile_scene
    from render.scene import check_scene

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


def _setup_from_args(study, args):
    """The setup named by --setup, or one made from --lamp (all groups), or None."""
    from render.colour.lamps import get_lamp
    from render.scene.model import GroupSetting, Setup

    if getattr(args, "lamp", None):
        get_lamp(args.lamp, base_dir=Path.cwd(), source="--lamp")
        return Setup(f"lamp {args.lamp}", f"all luminaires with lamp {args.lamp}", {"*": GroupSetting(lamp=args.lamp)})
    return study.setup(getattr(args, "setup", None))


#: Observer options of the command line and the settings they set.
OBSERVER_FLAGS = {
    "age": "age_years",
    "pigmentation": "pigmentation",
    "adaptation": "adaptation_cd_m2",
    "display_peak": "display_peak_cd_m2",
}


def _observer_from_args(study, args):
    """The scene's observer with command-line overrides."""
    from dataclasses import replace

    obs = study.observer
    changes = {key: getattr(args, arg) for arg, key in OBSERVER_FLAGS.items() if getattr(args, arg, None) is not None}
    if getattr(args, "no_glare", False):
        changes["glare"] = False
    if getattr(args, "no_acuity", False):
        changes["acuity"] = False
    if not changes:
        return obs
    flag_of = {key: "--" + arg.replace("_", "-") for arg, key in OBSERVER_FLAGS.items()}
    try:
        return replace(obs, **changes)
    except InputError as err:
        raise InputError(
            [Problem("command line", flag_of.get(p.where, p.where), p.message) for p in err.problems]
        ) from None


def _write_rendered(rendered, out: Path, stem: str, displays: dict, meta: dict) -> list[Path]:
    """EXR of the absolute light, and a PNG (8- and 16-bit) per display mode."""
    from render.output.hdr import write_exr

    written = [
        write_exr(out / f"{stem}.exr", rendered.colorimetry, {k.replace("lampcast.", ""): v for k, v in meta.items()})
    ]
    for mode, result in displays.items():
        extra = {**meta, "lampcast.mode": mode}
        written.append(result.write_png(out / f"{stem}-{mode}.png", 8, extra))
        written.append(result.write_png(out / f"{stem}-{mode}-16bit.png", 16, extra))
    return written


def _luminance_line(rendered) -> str:
    Y = rendered.colorimetry.luminance_cd_m2
    lum = rendered.colorimetry.luminaire_mask
    surf = Y[~lum] if lum is not None else Y
    return (
        f"{rendered.name} / {rendered.setup or 'scene lamps'}: {Y.shape[1]}x{Y.shape[0]} px; luminance of surfaces seen: "
        f"mean {surf.mean():.3g} cd/m², median {np.median(surf):.3g} cd/m²; brightest pixel {Y.max():.3g} cd/m²"
    )


def cmd_render(args) -> int:
    from render.study import Study

    study = Study(args.scene)
    view = study.scene.view(args.view)
    out = _out_dir(args.out, Path(args.scene).stem)
    spp = args.spp or study.scene.render.samples_per_pixel
    seed = study.scene.render.seed if args.seed is None else args.seed
    observer = _observer_from_args(study, args)
    written: list[Path] = []
    if args.aov:
        from render.rays.aov import render_aovs, write_aov_previews

        camera = study.camera(view.name, args.width)
        aovs = render_aovs(study.mesh, study.bvh, camera, samples_per_pixel=spp, seed=seed)
        written += list(write_aov_previews(aovs, out, file_stem(view.name)))
    setup = _setup_from_args(study, args)
    if not study.scene.luminaires:
        print(
            f"note: {args.scene} has no luminaires: only the night sky's darkness is rendered (no sky light is modelled)",
            file=sys.stderr,
        )
    rendered = study.render_view(view.name, setup, samples_per_pixel=spp, seed=seed, width_px=args.width, progress=True)
    modes = args.mode or ["adapted", "photometric"]
    displays = {mode: study.display(rendered, mode, observer) for mode in modes}
    stem = file_stem(f"{view.name}-{rendered.setup or 'scene'}")
    written += _write_rendered(rendered, out, stem, displays, image_metadata(study, rendered, "", observer, seed, spp))
    print(_luminance_line(rendered))
    for path in written:
        print(path)
    return 0


def _render_setups(study, view, texts: list[str] | None, spp: int | None, width: int | None):
    """Cast a view once under the first setup and re-light it for the others; setups are
    scene setup names, lamp ids or key=value items (see render.output.comparison.parse_setup)."""
    import time

    from render.output.comparison import parse_setup

    texts = texts or list(study.scene.setups)
    if not texts:
        raise input_error(
            study.scene.path,
            "setups",
            "the scene has no [setups.NAME]; give --setup (a setup name, a lamp id or key=value items)",
        )
    setups = [parse_setup(t, study.scene, "--setup") for t in texts]
    first = study.render_view(view.name, setups[0], samples_per_pixel=spp, width_px=width, progress=True)
    rendered = [first]
    for s in setups[1:]:
        t0 = time.perf_counter()
        rendered.append(study.relight(first, s))
        print(f"relit {view.name} for {s.name} in {(time.perf_counter() - t0) * 1000:.0f} ms", file=sys.stderr)
    return setups, rendered


def cmd_relight(args) -> int:
    """Render a view once, then re-light it for each setup without casting camera rays."""
    from render.study import Study

    study = Study(args.scene)
    view = study.scene.view(args.view)
    out = _out_dir(args.out, Path(args.scene).stem)
    spp = args.spp or study.scene.render.samples_per_pixel
    seed = study.scene.render.seed
    observer = _observer_from_args(study, args)
    _, rendered = _render_setups(study, view, args.setups, spp, args.width)
    # One adaptation state for all: the images keep their true brightness relation.
    shared = study.display(rendered, "shared", observer)
    photometric = study.display(rendered, "photometric", observer)
    written = []
    for r, sh, ph in zip(rendered, shared, photometric):
        meta = image_metadata(study, r, "", observer, seed, spp)
        written += _write_rendered(r, out, file_stem(f"{view.name}-{r.setup}"), {"shared": sh, "photometric": ph}, meta)
        print(_luminance_line(r))
    for path in written:
        print(path)
    return 0


# --- colours -----------------------------------------------------------------------------------


def cmd_colours(args) -> int:
    """Colour discrimination and naming of the tagged objects in one view, under each setup."""
    from render.analysis.naming import format_name_table
    from render.analysis.run import analyse_view_colours, colour_pictures, write_colour_json
    from render.study import Study

    study = Study(args.scene)
    observer = _observer_from_args(study, args)
    view = study.scene.view(args.view)
    if not any(o.inspect for o in study.mesh.objects):
        raise input_error(args.scene, "", "no object has `inspect = true`: tag the objects to analyse")
    setups, rendered = _render_setups(study, view, args.setups, args.spp, args.width)
    first = rendered[0]
    displays = study.display(rendered, "shared", observer)
    result = analyse_view_colours(study, rendered, displays, observer, [s.name for s in setups])
    out = _out_dir(args.out, f"{Path(args.scene).stem}-colours")
    text = image_metadata(study, first, "colour analysis", observer, study.scene.render.seed, first.buffers.spp)
    text["lampcast.setup"] = "; ".join(s.name for s in setups)
    pictures = colour_pictures(
        result,
        rendered,
        displays,
        study.setup_lamps(rendered, setups),
        out,
        prefix=file_stem(view.name) + "-",
        text=text,
    )
    written = [write_colour_json(result, out / f"{file_stem(view.name)}-colours.json"), *pictures.values()]
    print(f"Colour names in view '{view.name}' (daylight vs as seen):")
    print(format_name_table(result.name_rows()))
    for s, seen in result.setups.items():
        pairs = seen.confusions
        print(f"\n{s}: {len(pairs)} pair(s) distinct in daylight become hard to tell apart")
        for c in pairs:
            print(f"  {c.a} / {c.b}: ΔE00 {c.daylight_delta_e00:.1f} in daylight → {c.delta_e00:.2f} ({c.level})")
    for path in written:
        print(path)
    return 0


# --- compare and demo --------------------------------------------------------------------------


def cmd_compare(args) -> int:
    from render.output.comparison import run_comparison
    from render.study import Study

    study = Study(args.scene)
    observer = _observer_from_args(study, args)
    out = args.out or str(Path("outputs") / f"{Path(args.scene).stem}-compare")
    print(CAUTION, file=sys.stderr)
    result = run_comparison(
        study,
        args.before,
        args.after,
        args.views,
        out,
        width_px=args.width,
        samples_per_pixel=args.spp,
        observer=observer,
        report=not args.no_report,
    )
    for line in result.metrics.summary:
        print(f"- {line}")
    print(f"written to {result.out_dir}/" + (f" (open {result.report})" if result.report else ""))
    return 0


def cmd_demo(args) -> int:
    """The main job on the bundled demo street: sodium before, warm-white LED after."""
    ns = argparse.Namespace(
        scene=str(DEMO_SCENE),
        before="sodium",
        after="led-warm",
        views=args.views,
        out=args.out or "outputs/demo",
        width=args.width,
        spp=args.spp,
        no_report=False,
        age=args.age,
        pigmentation=None,
        adaptation=None,
        display_peak=None,
        no_glare=False,
        no_acuity=False,
    )
    return cmd_compare(ns)


# --- parser ----------------------------------------------------------------------------------


def _positive_int(text: str) -> int:
    try:
        value = int(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"expected a whole number, got {text!r}") from None
    if value < 1:
        raise argparse.ArgumentTypeError(f"expected a whole number of at least 1, got {value}")
    return value


def _observer_options(p) -> None:
    g = p.add_argument_group("observer (defaults from the scene's [observer] table)")
    g.add_argument("--age", type=float, metavar="YEARS", help="observer age (glare grows with age; CIE 146)")
    g.add_argument("--pigmentation", type=float, metavar="P", help="eye pigmentation, 0 very dark ... 1 blue eyes")
    g.add_argument("--adaptation", type=float, metavar="CD_M2", help="adaptation luminance instead of the measured one")
    g.add_argument("--display-peak", type=float, metavar="CD_M2", help="luminance of the display's white (default 100)")
    g.add_argument("--no-glare", action="store_true", help="leave out disability glare")
    g.add_argument("--no-acuity", action="store_true", help="leave out the low-light loss of acuity")


def _run_options(p, out_default: str) -> None:
    """Options every rendering command shares."""
    p.add_argument(
        "--spp", type=_positive_int, help="samples per pixel (default: the scene's render.samples_per_pixel)"
    )
    p.add_argument(
        "--width", type=_positive_int, help="override the image width in pixels (the height keeps the aspect ratio)"
    )
    p.add_argument("--out", help=f"output folder (default {out_default})")


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
    p.add_argument(
        "--plots",
        nargs="?",
        const="outputs/lamps",
        metavar="DIR",
        help="also write a spectrum plot per lamp (default DIR outputs/lamps)",
    )
    p.set_defaults(func=cmd_lamps)

    p = sub.add_parser("materials", help="list the surface materials with their sources")
    p.add_argument("--json", action="store_true", help="print JSON instead of a table")
    p.add_argument(
        "--plots",
        nargs="?",
        const="outputs/materials",
        metavar="DIR",
        help="also write a reflectance plot per material",
    )
    p.set_defaults(func=cmd_materials)

    p = sub.add_parser("photometry", help="summarise an LM-63 photometric file (flux, peak, ULOR) and plot it")
    p.add_argument("file", help="LM-63 (.ies) file or a built-in generic distribution id")
    p.add_argument(
        "--plot", metavar="PNG", help="where to write the polar plot (default outputs/photometry/NAME-polar.png)"
    )
    p.add_argument("--no-plot", action="store_true", help="do not write a polar plot")
    p.add_argument("--out", help="output folder for the default plot path")
    p.set_defaults(func=cmd_photometry)

    p = sub.add_parser("check", help="check a scene file without rendering; lists every problem found")
    p.add_argument("scene", help="scene file (TOML)")
    p.set_defaults(func=cmd_check)

    p = sub.add_parser("render", help="render one view of a scene (absolute X, Y, Z, scotopic EXR and a preview)")
    p.add_argument("scene", help="scene file (TOML)")
    p.add_argument("--view", help="view name (default: the scene's first view)")
    p.add_argument("--setup", help="a setup named in the scene's [setups] (default: the lamps the scene gives)")
    p.add_argument("--lamp", help="one lamp id (or spectrum file) for every luminaire")
    p.add_argument(
        "--aov", action="store_true", help="also write depth, normal, material-id and object-id images and arrays"
    )
    p.add_argument(
        "--mode",
        action="append",
        choices=("adapted", "shared", "photometric"),
        help="display mode (repeat for several; default adapted and photometric): adapted = for an eye adapted "
        "to this image; shared = one adaptation state for a set (the same as adapted for one image); "
        "photometric = false-colour luminance with a cd/m² legend",
    )
    p.add_argument("--seed", type=int, help="random seed (default: the scene's render.seed)")
    _observer_options(p)
    _run_options(p, "outputs/SCENE")
    p.set_defaults(func=cmd_render)

    p = sub.add_parser(
        "relight", help="render a view once and re-light it for several setups without casting camera rays"
    )
    p.add_argument("scene", help="scene file (TOML)")
    p.add_argument("--view", help="view name (default: the scene's first view)")
    p.add_argument(
        "--setup",
        dest="setups",
        action="append",
        metavar="NAME",
        help="setup to render (repeat; default: every setup in the scene)",
    )
    _observer_options(p)
    _run_options(p, "outputs/SCENE")
    p.set_defaults(func=cmd_relight)

    p = sub.add_parser(
        "colours", help="can people tell the tagged objects' colours apart? names, CIEDE2000, confusions, pictures"
    )
    p.add_argument("scene", help="scene file (TOML)")
    p.add_argument(
        "--setup",
        dest="setups",
        action="append",
        metavar="SETUP",
        help="setup to analyse (repeat; a scene setup, a lamp id or key=value items; default every setup in the scene)",
    )
    p.add_argument("--view", help="view name (default: the scene's first view)")
    _observer_options(p)
    _run_options(p, "outputs/SCENE-colours")
    p.set_defaults(func=cmd_colours)

    p = sub.add_parser("compare", help="before and after: images, false colour, metrics.json and report.html per view")
    p.add_argument("scene", help="scene file (TOML)")
    p.add_argument(
        "--before",
        required=True,
        metavar="SETUP",
        help="a setup named in the scene, a lamp id, or key=value items (lamp, lumens, dimming, photometry), "
        "per group as 'GROUP:lamp=ID,dimming=0.8;GROUP2:...'",
    )
    p.add_argument("--after", required=True, metavar="SETUP", help="as --before")
    p.add_argument(
        "--view", dest="views", action="append", metavar="NAME", help="view to render (repeat; default all views)"
    )
    p.add_argument("--no-report", action="store_true", help="skip report.html")
    _observer_options(p)
    _run_options(p, "outputs/SCENE-compare")
    p.set_defaults(func=cmd_compare)

    p = sub.add_parser("demo", help="run the main job on the bundled demo street: sodium before, warm-white LED after")
    p.add_argument("--view", dest="views", action="append", metavar="NAME", help="view to render (default all)")
    p.add_argument("--age", type=float, metavar="YEARS", help="observer age")
    _run_options(p, "outputs/demo")
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
