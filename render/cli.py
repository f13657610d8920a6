"""The ``lampcast`` command line (also ``python -m render``).

Each sub-command is a thin wrapper: it parses options, calls the library and prints.

Conventions shared by every command:

- ``--quiet`` (``-q``): no progress bars and no status notes on standard error (errors and
  warnings are still shown). Progress bars are drawn only when standard error is a terminal
  (:mod:`render.progress`); the flag is passed down as an argument, never set globally.
- ``--json`` on every command that prints figures: the figures go to standard output as one JSON
  document and nothing else is printed there (notes go to standard error).
- Exit status: 0 done; 2 a user mistake (an :class:`~render.errors.InputError` printed one line
  per problem, an argparse usage error, no command given) or an operating-system error on an
  output (unwritable folder, full disk, permission denied: one line); 130 interrupted (Ctrl-C);
  1 a bug in lampcast: a short message names the file in the per-user cache where the
  traceback was saved (:func:`save_traceback`). No case shows a traceback.
"""

from __future__ import annotations

import argparse
import json
import sys
from collections.abc import Sequence
from pathlib import Path
from typing import TYPE_CHECKING, Any

import numpy as np

from render.errors import InputError, Problem, input_error
from render.fileio import file_stem
from render.resources import demo_scene_path

if TYPE_CHECKING:
    from render.scene.model import Setup, View
    from render.study import RenderedView, Study
    from render.vision.observer import ObserverSettings

__all__ = [
    "BARE_BOUNCES",
    "DEMO_SCENE",
    "OBSERVER_FLAGS",
    "build_parser",
    "cmd_calc",
    "cmd_check",
    "cmd_colours",
    "cmd_compare",
    "cmd_demo",
    "cmd_import_map",
    "cmd_lamps",
    "cmd_materials",
    "cmd_photometry",
    "cmd_relight",
    "cmd_render",
    "main",
    "save_traceback",
]

DEMO_SCENE = demo_scene_path()
#: ``--bounces`` given without a number: the path tracer's default limit
#: (:data:`render.light.indirect.DEFAULT_BOUNCES`), put in place after parsing.
BARE_BOUNCES = -1


def _out_dir(path: str | None, default: str) -> Path:
    out = Path(path) if path else Path("outputs") / default
    out.mkdir(parents=True, exist_ok=True)
    return out


def _note(args: argparse.Namespace, text: str) -> None:
    """A status note on standard error, left out with ``--quiet``."""
    if not getattr(args, "quiet", False):
        print(text, file=sys.stderr)


def _json_safe(value: Any) -> Any:
    """``value`` with numpy scalars and arrays as Python numbers and lists, paths as strings,
    typed results through their ``to_json()``, and non-finite numbers as null (strict JSON)."""
    if hasattr(value, "to_json"):
        value = value.to_json()
    if isinstance(value, dict):
        return {str(k): _json_safe(v) for k, v in value.items()}
    if isinstance(value, (list, tuple)):
        return [_json_safe(v) for v in value]
    if isinstance(value, np.ndarray):
        return _json_safe(value.tolist())
    if isinstance(value, np.generic):
        value = value.item()
    if isinstance(value, float) and not np.isfinite(value):
        return None
    if isinstance(value, Path):
        return str(value)
    return value


def _print_json(data: Any) -> None:
    """The one JSON document a ``--json`` command prints on standard output."""
    print(json.dumps(_json_safe(data), indent=2, ensure_ascii=False, allow_nan=False))


# --- lamps -----------------------------------------------------------------------------------


def cmd_lamps(args: argparse.Namespace) -> int:
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
        _note(args, f"spectrum plots written to {out}/")
    return 0


# --- materials -------------------------------------------------------------------------------


def cmd_materials(args: argparse.Namespace) -> int:
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
        _note(args, f"reflectance plots written to {out}/")
    return 0


# --- photometry ----------------------------------------------------------------------------


def cmd_photometry(args: argparse.Namespace) -> int:
    """Key figures of a photometric file; a polar plot only with ``--plot PNG``."""
    from render.light.photometry import load_photometry
    from render.output.photometry_sheet import format_summary, plot_polar, summarise

    photometry = load_photometry(args.file, base_dir=Path.cwd())
    summary = summarise(photometry)
    plot = plot_polar(photometry, args.plot) if args.plot else None
    if args.json:
        _print_json({**summary.to_json(), "plot": plot})
        return 0
    print(format_summary(summary))
    if plot is not None:
        print(f"polar plot      {plot}")
    return 0


# --- check -----------------------------------------------------------------------------------


def cmd_check(args: argparse.Namespace) -> int:
    """Check a scene file and print what it holds (the problems found are an InputError), then
    one ``warning:`` line per likely mistake (:mod:`render.scene.warnings`; exit status 0)."""
    from render.scene.loader import check_scene_mesh
    from render.scene.warnings import scene_warnings

    scene, mesh = check_scene_mesh(args.scene, strict_paths=args.strict_paths)
    warnings = scene_warnings(scene, mesh)
    figures = {
        "scene": str(args.scene),
        "ok": True,
        "triangles": mesh.n_triangles,
        "objects": len(mesh.objects),
        "materials": len(mesh.material_names),
        "luminaires": len(scene.luminaires),
        "groups": list(scene.groups),
        "views": [v.name for v in scene.views],
        "setups": list(scene.setups),
        "inspected_objects": [o.name for o in mesh.objects if o.inspect],
        "warnings": [{"where": w.where, "message": w.message} for w in warnings],
    }
    if args.json:
        _print_json(figures)
        return 0
    f = figures
    print(f"{args.scene}: OK")
    print(f"  {f['triangles']} triangles, {f['objects']} objects, {f['materials']} materials")
    print(f"  {f['luminaires']} luminaires in groups: {', '.join(f['groups']) or '(none)'}")
    print(f"  views: {', '.join(f['views'])}")
    if f["setups"]:
        print(f"  setups: {', '.join(f['setups'])}")
    if f["inspected_objects"]:
        print(f"  inspected objects: {', '.join(f['inspected_objects'])}")
    for w in warnings:
        print(f"warning: {w}")
    return 0


# --- render ----------------------------------------------------------------------------------


def _setup_from_args(study: Study, args: argparse.Namespace) -> Setup | None:
    """The setup named by --setup, or one made from --lamp (all groups), or None; both given
    is an error naming both."""
    from render.colour.lamps import get_lamp
    from render.scene.model import GroupSetting, Setup

    if getattr(args, "lamp", None) and getattr(args, "setup", None):
        raise input_error(
            "command line",
            "--setup, --lamp",
            f"--setup {args.setup!r} and --lamp {args.lamp!r} both choose the lamps: give one of them",
        )
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


def _observer_from_args(study: Study, args: argparse.Namespace) -> ObserverSettings:
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


def _write_rendered(rendered: RenderedView, out: Path, stem: str, displays: dict, meta: dict) -> list[Path]:
    """EXR of the absolute light, and a PNG (8- and 16-bit) per display mode."""
    from render.output.hdr import write_exr
    from render.output.images import write_png

    written = [
        write_exr(out / f"{stem}.exr", rendered.colorimetry, {k.replace("lampcast.", ""): v for k, v in meta.items()})
    ]
    for mode, result in displays.items():
        extra = {**meta, "lampcast.mode": mode}
        written.append(write_png(out / f"{stem}-{mode}.png", result.srgb8, result.png_text(extra)))
        written.append(write_png(out / f"{stem}-{mode}-16bit.png", result.srgb16, result.png_text(extra)))
    return written


def _image_figures(rendered: RenderedView, files: Sequence[Path]) -> dict[str, Any]:
    """The figures ``render`` and ``relight`` print for one image: its size, the luminance of the
    surfaces seen (:func:`render.output.comparison.luminance_stats`, the same figures as the
    comparison's), the brightest pixel, and the files written."""
    from render.output.comparison import luminance_stats

    Y = rendered.colorimetry.luminance_cd_m2
    return {
        "view": rendered.name,
        "setup": rendered.setup,
        "width_px": int(Y.shape[1]),
        "height_px": int(Y.shape[0]),
        "surface_luminance_cd_m2": _json_safe(luminance_stats(rendered)),
        "brightest_pixel_cd_m2": float(Y.max()),
        "files": [str(p) for p in files],
    }


def _print_images(args: argparse.Namespace, images: list[dict[str, Any]]) -> None:
    """``render``/``relight`` output: JSON with ``--json``, else a line of figures per image and
    the files written."""
    if args.json:
        _print_json({"scene": str(args.scene), "images": images})
        return

    def cd(x: float | None) -> str:
        return "n/a" if x is None else f"{x:.3g} cd/m²"

    for f in images:
        stats = f["surface_luminance_cd_m2"]
        print(
            f"{f['view']} / {f['setup'] or 'scene lamps'}: {f['width_px']}x{f['height_px']} px; "
            f"luminance of surfaces seen: mean {cd(stats['mean'])}, median {cd(stats['median'])}; "
            f"brightest pixel {cd(f['brightest_pixel_cd_m2'])}"
        )
    for f in images:
        for path in f["files"]:
            print(path)


def cmd_render(args: argparse.Namespace) -> int:
    """Render one view: an absolute EXR and display PNGs (and AOV images with ``--aov``)."""
    _start_warmup(args)
    study = _study(args)
    view = study.scene.view(args.view)
    out = _out_dir(args.out, Path(args.scene).stem)
    spp = args.spp or study.scene.render.samples_per_pixel
    seed = study.scene.render.seed if args.seed is None else args.seed
    observer = _observer_from_args(study, args)
    written: list[Path] = []
    if args.aov:
        from render.limits import check_render_size
        from render.output.aov_previews import write_aov_previews
        from render.output.provenance import view_metadata
        from render.rays.aov import render_aovs

        camera = study.camera(view.name, args.width)
        check_render_size(camera.width_px, camera.height_px, spp, 1, study.scene.path, f"view {view.name!r}")
        aovs = render_aovs(study.mesh, study.bvh, camera, samples_per_pixel=spp, seed=seed)
        meta = view_metadata(study, view.name, "aov", seed, spp)
        written += write_aov_previews(aovs, out, file_stem(view.name), meta)
    setup = _setup_from_args(study, args)
    if not study.scene.luminaires:
        print(
            f"note: {args.scene} has no luminaires: only the night sky's darkness is rendered (no sky light is modelled)",
            file=sys.stderr,
        )
    rendered = study.render_view(
        view.name, setup, samples_per_pixel=spp, seed=seed, width_px=args.width, progress=not args.quiet
    )
    modes = args.mode or ["adapted", "photometric"]
    displays = {mode: study.display(rendered, mode, observer) for mode in modes}
    stem = file_stem(f"{view.name}-{rendered.setup or 'scene'}")
    from render.output.provenance import image_metadata

    written += _write_rendered(rendered, out, stem, displays, image_metadata(study, rendered, "", observer, seed, spp))
    _print_images(args, [_image_figures(rendered, written)])
    return 0


def _render_setups(
    study: Study, view: View, texts: list[str] | None, spp: int | None, width: int | None, *, quiet: bool
) -> tuple[list[Setup], list[RenderedView]]:
    """Cast a view once under the first setup and re-light it for the others; setups are
    scene setup names, lamp ids or key=value items (see render.output.comparison.parse_setup).
    ``quiet`` leaves out the progress bars and the re-light timings."""
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
    first = study.render_view(view.name, setups[0], samples_per_pixel=spp, width_px=width, progress=not quiet)
    rendered = [first]
    for s in setups[1:]:
        t0 = time.perf_counter()
        rendered.append(study.relight(first, s, progress=not quiet))
        if not quiet:
            print(f"relit {view.name} for {s.name} in {(time.perf_counter() - t0) * 1000:.0f} ms", file=sys.stderr)
    return setups, rendered


def cmd_relight(args: argparse.Namespace) -> int:
    """Render a view once, then re-light it for each setup without casting camera rays."""
    study = _study(args)
    view = study.scene.view(args.view)
    out = _out_dir(args.out, Path(args.scene).stem)
    spp = args.spp or study.scene.render.samples_per_pixel
    seed = study.scene.render.seed
    observer = _observer_from_args(study, args)
    _, rendered = _render_setups(study, view, args.setups, spp, args.width, quiet=args.quiet)
    # One adaptation state for all: the images keep their true brightness relation.
    shared = study.display(rendered, "shared", observer)
    photometric = study.display(rendered, "photometric", observer)
    images = []
    from render.output.provenance import image_metadata

    for r, sh, ph in zip(rendered, shared, photometric):
        meta = image_metadata(study, r, "", observer, seed, spp)
        written = _write_rendered(r, out, file_stem(f"{view.name}-{r.setup}"), {"shared": sh, "photometric": ph}, meta)
        images.append(_image_figures(r, written))
    _print_images(args, images)
    return 0


# --- colours -----------------------------------------------------------------------------------


def cmd_colours(args: argparse.Namespace) -> int:
    """Colour discrimination and naming of the tagged objects under each setup, each object in
    the chosen view (--view, else the scene's [colour] view) or in the view showing it best."""
    from collections import Counter

    from render.analysis.colours import CAVEAT
    from render.analysis.view_colours import analyse_colours
    from render.output.colour_files import write_colour_json, write_colour_pictures
    from render.output.colour_text import format_confusions, format_name_changes, format_name_table, format_pairs

    study = _study(args)
    observer = _observer_from_args(study, args)
    chosen = args.view or study.scene.colour_view
    views = [study.scene.view(chosen)] if chosen else list(study.scene.views)
    if not any(o.inspect for o in study.mesh.objects):
        raise input_error(args.scene, "", "no object has `inspect = true`: tag the objects to analyse")
    out = _out_dir(args.out, f"{Path(args.scene).stem}-colours")
    renders = {}
    own_states = {}
    for v in views:
        setups, rendered = _render_setups(study, v, args.setups, args.spp, args.width, quiet=args.quiet)
        # The colours are those of the shared images; each setup's pairs are judged at the
        # adaptation of its own (adapted) image.
        shared, adapted = study.display_both(rendered, observer)
        renders[v.name] = (rendered, shared)
        own_states[v.name] = [d.state for d in adapted]
    result = analyse_colours(
        study, renders, observer, [s.name for s in setups], chosen, setups=setups, own_states=own_states
    )
    # The outlined picture shows the view most objects are analysed in.
    used = Counter(o.view for o in result.objects)
    view = study.scene.view(max(renders, key=lambda n: (used[n], -list(renders).index(n))))
    rendered, displays = renders[view.name]
    first = rendered[0]
    from render.output.provenance import image_metadata

    text = image_metadata(study, first, "colour analysis", observer, study.scene.render.seed, first.buffers.spp)
    text["lampcast.setup"] = "; ".join(s.name for s in setups)
    pictures = write_colour_pictures(
        result,
        rendered,
        displays,
        study.setup_lamps(rendered, setups),
        out,
        prefix=file_stem(view.name) + "-",
        text=text,
    )
    written = [write_colour_json(result, out / f"{file_stem(view.name)}-colours.json"), *pictures.values()]
    if args.json:
        _print_json({"scene": str(args.scene), "view": view.name, "analysis": result, "files": written})
        return 0
    where = f"in view '{view.name}'" if chosen else "with each object in the view showing most of it"
    print(f"Colour names {where} (daylight vs as seen):")
    print(format_name_table(result.name_rows()))
    print()
    print(format_name_changes(result))
    print()
    print(format_pairs(result))
    print()
    print(format_confusions(result))
    print()
    print(f"Caution: {CAVEAT}.")
    for path in written:
        print(path)
    return 0


# --- import-map --------------------------------------------------------------------------------


def cmd_import_map(args: argparse.Namespace) -> int:
    from render.mapdata.importer import import_map, parse_centre

    try:
        centre = parse_centre(args.centre)
    except ValueError as err:
        raise input_error("--centre", "", str(err)) from None
    result = import_map(
        args.extract, centre, args.radius_m, args.out, name=args.name, attribution=args.attribution or None
    )
    if args.json:
        _print_json({"scene": result.path, "counts": result.counts, "left_out": result.left_out})
    else:
        counts = ", ".join(f"{n} {k}" for k, n in result.counts.items())
        _note(args, f"wrote {result.path}: {counts}")
        for reason, n in sorted(result.left_out.items()):
            _note(args, f"left out: {n} {reason}")
    return 0


# --- study -------------------------------------------------------------------------------------


def cmd_study(args: argparse.Namespace) -> int:
    """A design study (:mod:`render.studies`): every scene variant × setup, on Dask."""
    import importlib.util

    missing = [m for m in ("dask", "distributed", "pyarrow") if importlib.util.find_spec(m) is None]
    if missing:
        raise input_error(
            "command line",
            "study",
            f"design studies need {', '.join(missing)}: install them with pip install 'lampcast[study]'",
        )
    from render.studies import read_study, run_study

    if args.workers is not None and not 0 <= args.workers <= 1024:
        raise input_error("command line", "--workers", f"expected 0 (serial) to 1024 workers, got {args.workers}")
    spec = read_study(args.study)
    out = _out_dir(args.out, f"{Path(args.study).stem}-study")
    _note(args, _caution())
    run = run_study(
        spec, out, workers=args.workers, scheduler=args.scheduler, quiet=args.quiet, dashboard=args.dashboard
    )
    n_rows = len(run.table.get("key", []))
    if args.json:
        _print_json(
            {
                "study": str(args.study),
                "rows": n_rows,
                "computed_variants": [r.variant for r in run.computed],
                "skipped_variants": list(run.skipped_variants),
                "csv": run.csv,
                "parquet": run.parquet,
                "report": run.report,
                "workers": run.workers,
            }
        )
        return 0
    print(
        f"{n_rows} rows ({len(run.computed)} variant(s) computed, {len(run.skipped_variants)} kept from before); "
        f"written to {run.out_dir}/" + (f" (open {run.report})" if run.report else "")
    )
    return 0


# --- calc --------------------------------------------------------------------------------------


def cmd_calc(args: argparse.Namespace) -> int:
    """Calculation fields, road luminance, TI, obtrusive light, sky, energy and a class check per
    setup (:mod:`render.calc.run`); the scene's ``[calc]`` gives the defaults the options
    override. ``--csv DIR`` also writes one CSV per field and setup, and per footway face grid,
    quantity and setup."""
    from render.calc.classes import CAUTION as CALC_CAUTION
    from render.calc.run import calc_options, run_calculation
    from render.limits import MAX_BOUNCES
    from render.output.calc_text import format_calculation, write_field_csvs

    if args.q0 is not None and not (np.isfinite(args.q0) and args.q0 > 0):
        raise input_error("command line", "--q0", f"expected a positive number, got {args.q0}")
    if args.age is not None and not (np.isfinite(args.age) and 0 < args.age <= 120):
        raise input_error("command line", "--age", f"expected an age in years from 0 to 120, got {args.age}")
    if args.bounces is not None and not 0 <= args.bounces <= MAX_BOUNCES:
        raise input_error("command line", "--bounces", f"expected 0 to {MAX_BOUNCES}, got {args.bounces}")
    study = _study(args)
    scene = study.scene
    sections = ([scene.street] if scene.street is not None else []) + [road.section for road in scene.roads]
    if args.q0 is not None and args.r_table is None and all(s.r_table_file is None for s in sections):
        raise input_error(
            "command line",
            "--q0",
            "--q0 scales an r-table: give --r-table FILE (or r_table in the scene's [street] or [[roads]])",
        )
    if args.classes is not None and args.lighting_class is None and scene.calc.lighting_class is None:
        raise input_error("command line", "--classes", "a class file is used with --class NAME")
    include = None
    if args.include_objects is not None:
        text = args.include_objects.strip()
        include = (
            "all"
            if text == "all"
            else ()
            if text in ("", "none")
            else tuple(n.strip() for n in text.split(",") if n.strip())
        )
    overrides = {}
    if args.no_class:
        overrides["lighting_class"] = None
    elif args.lighting_class is not None:
        overrides["lighting_class"] = args.lighting_class
    options = calc_options(
        scene,
        classes_file=args.classes,
        r_table_file=args.r_table,
        q0_sr=args.q0,
        age_years=args.age,
        traffic=args.traffic,
        include_objects=include,
        mesopic=True if args.mesopic else None,
        bounces=args.bounces,
        night=False if args.no_night else None,
        **overrides,
    )
    setups = args.setups or ([scene.compare_before, *scene.compare_options] if scene.compare_before else [None])
    for name in setups:
        study.setup(name)
    _note(args, CALC_CAUTION)
    report = run_calculation(study, setups, options)
    written = write_field_csvs(scene, report, args.csv) if args.csv else []
    pictures = []
    if args.pictures:
        from render.calc.plan import compute_plan
        from render.calc.run import calc_study
        from render.output.calc_pictures import write_calc_pictures

        used = calc_study(study, options.include_objects)
        plans = {s: compute_plan(used, s) for s in setups}
        pictures = write_calc_pictures(report, plans, args.pictures)
    if args.json:
        _print_json({**report.to_json(), "csv_files": written, "pictures": pictures})
        return 0
    print(format_calculation(report))
    if written:
        print(f"CSV files written to {args.csv}/")
    if pictures:
        print(f"pictures written to {args.pictures}/")
    return 0


# --- compare and demo --------------------------------------------------------------------------


def cmd_compare(args: argparse.Namespace) -> int:
    """Before and options: images, metrics.json and report.html per view; prints the summary."""
    from render.output.comparison import run_comparison

    _start_warmup(args)
    study = _study(args)
    observer = _observer_from_args(study, args)
    out = _out_dir(args.out, f"{Path(args.scene).stem}-compare")
    before = args.before or study.scene.compare_before
    after = args.after or list(study.scene.compare_options)
    if not before or not after:
        missing = " and ".join(f for f, v in (("--before", before), ("--after", after)) if not v)
        raise input_error(
            "command line",
            missing,
            f"give {missing}, or a [compare] table (before = SETUP, options = [SETUP, ...]) in {Path(args.scene).name}",
        )
    _note(args, _caution())
    result = run_comparison(
        study,
        before,
        after,
        args.views,
        out,
        width_px=args.width,
        samples_per_pixel=args.spp,
        observer=observer,
        report=not args.no_report,
        progress=not args.quiet,
        colour_view=args.colour_view,
    )
    metrics = _json_safe(result.metrics)
    if args.json:
        views = [{k: v[k] for k in v if k not in ("images", "notes")} for v in metrics["views"]]
        _print_json(
            {
                "scene": str(args.scene),
                "summary": metrics["summary"],
                "views": views,
                "out_dir": result.out_dir,
                "metrics_json": Path(result.out_dir) / "metrics.json",
                "report": result.report,
            }
        )
        return 0
    for line in metrics["summary"]:
        print(f"- {line}")
    print(f"written to {result.out_dir}/" + (f" (open {result.report})" if result.report else ""))
    return 0


def cmd_demo(args: argparse.Namespace) -> int:
    """The main job on the bundled demo street: sodium before; two options, 3000 K LED at full
    output and the same dimmed to 50 % (relit from the same rays)."""
    ns = argparse.Namespace(
        scene=str(DEMO_SCENE),
        before=None,  # the demo scene's [compare]: sodium; led-3000k, led-3000k-half
        after=None,
        views=args.views,
        colour_view=None,
        out=args.out or "outputs/demo",
        width=args.width,
        spp=args.spp,
        bounces=args.bounces,
        denoise=args.denoise,
        no_report=False,
        age=args.age,
        pigmentation=None,
        adaptation=None,
        display_peak=None,
        no_glare=False,
        no_acuity=False,
        quiet=args.quiet,
        json=args.json,
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


def _bounces(text: str) -> int:
    from render.limits import MAX_BOUNCES

    try:
        value = int(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"expected a whole number, got {text!r}") from None
    if not 0 <= value <= MAX_BOUNCES:
        raise argparse.ArgumentTypeError(f"expected a whole number from 0 to {MAX_BOUNCES}, got {value}")
    return value


def _observer_options(p: argparse.ArgumentParser) -> None:
    g = p.add_argument_group("observer (defaults from the scene's [observer] table)")
    g.add_argument("--age", type=float, metavar="YEARS", help="observer age (glare grows with age; CIE 146)")
    g.add_argument("--pigmentation", type=float, metavar="P", help="eye pigmentation, 0 dark ... 1.2 light blue")
    g.add_argument("--adaptation", type=float, metavar="CD_M2", help="adaptation luminance instead of the measured one")
    g.add_argument("--display-peak", type=float, metavar="CD_M2", help="luminance of the display's white (default 100)")
    g.add_argument("--no-glare", action="store_true", help="leave out disability glare")
    g.add_argument("--no-acuity", action="store_true", help="leave out the low-light loss of acuity")


def _run_options(p: argparse.ArgumentParser, out_default: str) -> None:
    """Options every rendering command shares."""
    p.add_argument(
        "--spp", type=_positive_int, help="samples per pixel (default: the scene's render.samples_per_pixel)"
    )
    p.add_argument(
        "--width", type=_positive_int, help="override the image width in pixels (the height keeps the aspect ratio)"
    )
    p.add_argument(
        "--bounces",
        type=_bounces,
        nargs="?",
        const=BARE_BOUNCES,
        metavar="N",
        help="interreflections per path, 0 for direct light only; --bounces alone: the default limit, 3 "
        "(default: the scene's render.bounces)",
    )
    p.add_argument(
        "--denoise",
        action="store_true",
        help="filter the images' interreflected light, edge-aware, once per view (default: the scene's "
        "render.indirect_denoise; calculations never)",
    )
    p.add_argument("--out", help=f"output folder (default {out_default})")


def _scene_argument(p: argparse.ArgumentParser) -> None:
    """The SCENE argument and ``--strict-paths`` of every command that reads a scene."""
    p.add_argument("scene", help="scene file (TOML)")
    p.add_argument(
        "--strict-paths",
        action="store_true",
        help="for scenes from elsewhere: every file the scene names (OBJ, lamp, photometry, tilt) must lie "
        "inside the scene's folder (no absolute paths, no '..', no links out)",
    )


def _study(args: argparse.Namespace) -> Study:
    """The scene of ``args`` loaded (with ``--strict-paths`` if given) and ready to render."""
    from render.scene import load_scene
    from render.study import Study

    scene = load_scene(args.scene, strict_paths=getattr(args, "strict_paths", False))
    if getattr(args, "bounces", None) is not None:
        scene.render.bounces = args.bounces
    if getattr(args, "denoise", False):
        scene.render.indirect_denoise = True
    return Study(scene)


def _start_warmup(args: argparse.Namespace) -> None:
    """On a first run (kernels not yet cached), compile the later kernels in a helper process
    while this one loads the scene and traces (:mod:`render.warmup`; stopped by :func:`main`).
    Called before the scene is loaded, so that the helper starts as early as it can."""
    from render.warmup import start

    start(args.scene, getattr(args, "bounces", None))


def _output_options(p: argparse.ArgumentParser) -> None:
    """Options every command shares: ``--quiet`` and ``--json``."""
    g = p.add_argument_group("output")
    g.add_argument(
        "-q", "--quiet", action="store_true", help="no progress bars or status notes (errors and warnings still shown)"
    )
    g.add_argument(
        "--json", action="store_true", help="print the figures as one JSON document on standard output, nothing else"
    )


class _VersionAction(argparse.Action):
    """``--version``: print lampcast's version (read from the installed metadata only then)."""

    def __init__(self, option_strings, dest=argparse.SUPPRESS, default=argparse.SUPPRESS, help=None):
        super().__init__(option_strings, dest=dest, default=default, nargs=0, help="show the version and exit")

    def __call__(self, parser, namespace, values, option_string=None):
        from render.resources import installed_version

        print(f"lampcast {installed_version()}")
        parser.exit()


#: The command's description; ``--help`` adds the standing caution of the report.
DESCRIPTION = "Spectral night-time previews of a street under candidate street lamps."


def _caution() -> str:
    """The one wording of the standing caution (:data:`render.output.report.STANDING_CAUTION`),
    imported when a command shows it: the report package takes longer to import than a quick
    command may."""
    from render.output.report import STANDING_CAUTION

    return STANDING_CAUTION


class _TopParser(argparse.ArgumentParser):
    """The top-level parser: its help ends the description with the standing caution."""

    def format_help(self) -> str:
        self.description = f"{DESCRIPTION} {_caution()}"
        return super().format_help()


def build_parser() -> argparse.ArgumentParser:
    """The ``lampcast`` argument parser with every sub-command."""
    parser = _TopParser(
        prog="lampcast",
        description=DESCRIPTION,
    )
    parser.add_argument("--version", action=_VersionAction)
    sub = parser.add_subparsers(dest="command", metavar="COMMAND")

    p = sub.add_parser("lamps", help="list built-in lamps (or lamp files) with their colour and photometric figures")
    p.add_argument("ids", nargs="*", metavar="ID", help="lamp ids or spectrum files (default: all built-in lamps)")
    p.add_argument(
        "--plots",
        nargs="?",
        const="outputs/lamps",
        metavar="DIR",
        help="also write a spectrum plot per lamp (default DIR outputs/lamps)",
    )
    p.set_defaults(func=cmd_lamps)

    p = sub.add_parser("materials", help="list the surface materials with their sources")
    p.add_argument(
        "--plots",
        nargs="?",
        const="outputs/materials",
        metavar="DIR",
        help="also write a reflectance plot per material",
    )
    p.set_defaults(func=cmd_materials)

    p = sub.add_parser(
        "photometry", help="summarise an LM-63 or EULUMDAT photometric file (flux, peak, ULOR); plot it on request"
    )
    p.add_argument("file", help="LM-63 (.ies) or EULUMDAT (.ldt) file, or a built-in generic distribution id")
    p.add_argument("--plot", metavar="PNG", help="also write a polar plot to this file")
    p.set_defaults(func=cmd_photometry)

    p = sub.add_parser("check", help="check a scene file without rendering; lists every problem found")
    _scene_argument(p)
    p.set_defaults(func=cmd_check)

    p = sub.add_parser("render", help="render one view of a scene (absolute X, Y, Z, scotopic EXR and a preview)")
    _scene_argument(p)
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
    _scene_argument(p)
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
        "colours",
        help="can people tell the tagged objects' colours apart? names, CIEDE2000 and a light-level verdict per pair, "
        "confusions, pictures",
    )
    _scene_argument(p)
    p.add_argument(
        "--setup",
        dest="setups",
        action="append",
        metavar="SETUP",
        help="setup to analyse (repeat; a scene setup, a lamp id or key=value items; default every setup in the scene)",
    )
    p.add_argument(
        "--view",
        "--colour-view",
        dest="view",
        help="view to analyse every object in (default: the scene's [colour] view, else each object in the view "
        "showing most of its main surface)",
    )
    _observer_options(p)
    _run_options(p, "outputs/SCENE-colours")
    p.set_defaults(func=cmd_colours)

    p = sub.add_parser(
        "compare",
        help="before and options: images, luminance maps, metrics.json and report.html per view (--after repeats)",
    )
    _scene_argument(p)
    p.add_argument(
        "--before",
        metavar="SETUP",
        help="a setup named in the scene, a lamp id, or key=value items (lamp, lumens, dimming, photometry), "
        "per group as 'GROUP:lamp=ID,dimming=0.8;GROUP2:...' (default: the scene's [compare] before)",
    )
    p.add_argument(
        "--after",
        action="append",
        metavar="SETUP",
        help="an option to compare with the before setup, as --before (repeat for several options; "
        "default: the scene's [compare] options)",
    )
    p.add_argument(
        "--view", dest="views", action="append", metavar="NAME", help="view to render (repeat; default all views)"
    )
    p.add_argument(
        "--colour-view",
        metavar="NAME",
        help="view to analyse every tagged object's colour in (default: the scene's [colour] view, else each "
        "object in the view showing most of its main surface)",
    )
    p.add_argument("--no-report", action="store_true", help="skip report.html")
    _observer_options(p)
    _run_options(p, "outputs/SCENE-compare")
    p.set_defaults(func=cmd_compare)

    p = sub.add_parser(
        "calc",
        help="calculation fields, road luminance, TI, upward flux and a lighting-class check per setup",
    )
    _scene_argument(p)
    p.add_argument(
        "--setup",
        dest="setups",
        action="append",
        metavar="NAME",
        help="setup to calculate (repeat; the first is the before; default: [compare], else the scene's lamps)",
    )
    p.add_argument(
        "--class",
        dest="lighting_class",
        metavar="NAME",
        help="lighting class to check against (e.g. P4, M3, C2; default: [calc] lighting_class)",
    )
    p.add_argument("--no-class", action="store_true", help="no class check, whatever [calc] says")
    p.add_argument("--classes", metavar="FILE", help="a class file (TOML) adding or replacing classes")
    p.add_argument(
        "--r-table", metavar="FILE", help="road r-table CSV (see scenes/README.md; default: Lambertian road)"
    )
    p.add_argument("--q0", type=float, metavar="X", help="the road's Q0 (sr⁻¹), scaling the r-table")
    p.add_argument("--age", type=float, metavar="YEARS", help="observer age for TI (default: [calc], else 23)")
    p.add_argument(
        "--traffic",
        choices=("two-way", "one-way"),
        help="observers looking both ways along the street, or along +x only (default: [calc], else two-way)",
    )
    p.add_argument(
        "--include-objects",
        metavar="NAMES",
        help='objects that obstruct light: "all", "none" or NAME,NAME (default: [calc], else none: an empty road)',
    )
    p.add_argument("--mesopic", action="store_true", help="P classes: compare illuminance in mesopic photometry")
    p.add_argument(
        "--bounces",
        type=_bounces,
        nargs="?",
        const=BARE_BOUNCES,
        metavar="N",
        help="also give the fields' and the footways' face grids' illuminance with interreflected light (up to N bounces, labelled; "
        "not part of the EN 13201 calculation; class checks stay direct light; --bounces alone: 3; default 0)",
    )
    p.add_argument(
        "--no-night",
        action="store_true",
        help="leave the scene's [night] light (sky glow, moonlight, lit windows) out; with it, its illuminance "
        "on the fields is given beside the luminaires' figures, never in them",
    )
    p.add_argument(
        "--csv",
        metavar="DIR",
        help="also write the grid values as CSV: one file per field and setup, and per footway face grid "
        "(vertical, semicylindrical) and setup",
    )
    p.add_argument("--pictures", metavar="DIR", help="also write the isolux plan, heat map and bar chart PNGs")
    p.set_defaults(func=cmd_calc)

    p = sub.add_parser(
        "import-map", help="an editable scene from an OpenStreetMap extract (.osm, .osm.pbf) around a centre"
    )
    p.add_argument("extract", help="the map extract (.osm XML or .osm.pbf)")
    p.add_argument("--centre", required=True, metavar="LAT,LON", help="centre of the scene, degrees (WGS84)")
    p.add_argument("--radius-m", type=float, required=True, metavar="R", help="radius of the scene, m (1 to 5000)")
    p.add_argument("--out", required=True, metavar="SCENE.toml", help="the scene file to write")
    p.add_argument("--name", help="the scene's name (default: the extract's file name)")
    p.add_argument(
        "--attribution",
        help="the data's attribution carried into outputs (default: © OpenStreetMap contributors, ODbL)",
    )
    p.set_defaults(func=cmd_import_map)

    p = sub.add_parser("study", help="a design study: scene variants x setups on Dask, ranked, in one table")
    p.add_argument("study", help="study file (TOML; see scenes/README.md)")
    p.add_argument("--scheduler", metavar="ADDRESS", help="an existing Dask scheduler (default: a local cluster)")
    p.add_argument(
        "--workers", type=int, metavar="N", help="local worker processes (default: one per core; 0: serial, no Dask)"
    )
    p.add_argument("--dashboard", action="store_true", help="start Dask's dashboard and print its address")
    p.add_argument("--out", metavar="DIR", help="output folder (default: outputs/STUDY-study)")
    p.set_defaults(func=cmd_study)

    p = sub.add_parser(
        "demo",
        help="run the main job on the bundled demo street: sodium before; 3000 K LED, full and dimmed to 50 %%",
    )
    p.add_argument("--view", dest="views", action="append", metavar="NAME", help="view to render (default all)")
    p.add_argument("--age", type=float, metavar="YEARS", help="observer age")
    _run_options(p, "outputs/demo")
    p.set_defaults(func=cmd_demo)
    for command in sub.choices.values():
        _output_options(command)
    return parser


# --- the one top-level handler -----------------------------------------------------------------


def save_traceback(error: BaseException, argv: Sequence[str] | None = None) -> Path | None:
    """Write ``error``'s traceback (with the version and the command line) atomically to a new
    file in the per-user cache (``$XDG_CACHE_HOME/lampcast/crashes``, see
    :func:`render.resources.user_cache_dir`), or, if that cannot be written, to a new private
    temporary folder. Returns the file, or None if neither could be written."""
    import os
    import platform
    import tempfile
    import time
    import traceback

    from render.fileio import atomic_write_text
    from render.resources import installed_version, user_cache_dir

    command = " ".join(["lampcast", *(sys.argv[1:] if argv is None else argv)])
    text = (
        f"lampcast {installed_version()}, Python {platform.python_version()} on {platform.platform()}\n"
        f"command: {command}\n\n" + "".join(traceback.format_exception(error))
    )
    name = f"crash-{time.strftime('%Y%m%d-%H%M%S')}-{os.getpid()}.txt"
    try:
        return atomic_write_text(user_cache_dir() / "crashes" / name, text)
    except OSError:
        pass
    try:
        return atomic_write_text(Path(tempfile.mkdtemp(prefix="lampcast-crash-")) / name, text)
    except OSError:
        return None


def _os_error_line(error: OSError) -> str:
    """One line for an operating-system error: the file(s) and the system's reason."""
    where = " -> ".join(str(f) for f in (error.filename, error.filename2) if f is not None)
    reason = error.strerror or str(error) or type(error).__name__
    return f"error: {where}: {reason}" if where else f"error: {reason}"


def main(argv: list[str] | None = None) -> int:
    """Run ``lampcast`` with ``argv`` (default the process's arguments); returns the exit status
    (see the module documentation). argparse usage errors exit with status 2 as usual."""
    parser = build_parser()
    args = parser.parse_args(argv)
    if getattr(args, "bounces", None) == BARE_BOUNCES:
        from render.light.indirect import DEFAULT_BOUNCES

        args.bounces = DEFAULT_BOUNCES
    if not getattr(args, "func", None):
        parser.print_help(sys.stderr)
        return 2
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
    except OSError as err:
        # An unwritable output folder, a full disk, a permission denied: the user can fix it.
        print(_os_error_line(err), file=sys.stderr)
        return 2
    except KeyboardInterrupt:
        return 130
    except MemoryError:
        # The limits refuse what is known to be too large before it starts; an input that still
        # outgrows the machine (a huge mesh near the file-size cap) is the user's to reduce.
        print(
            "error: not enough memory for this run; use smaller inputs (meshes, resolution, samples per pixel)",
            file=sys.stderr,
        )
        return 2
    except Exception as err:  # anything else is a bug in lampcast
        saved = save_traceback(err, argv)
        first = (str(err).splitlines() or [""])[0][:200]
        where = f"the traceback is saved in {saved}" if saved else "the traceback could not be saved"
        print(
            f"error: this is a bug in lampcast ({type(err).__name__}: {first}); {where}. "
            "Please report it with that file.",
            file=sys.stderr,
        )
        return 1
    finally:
        warmup = sys.modules.get("render.warmup")
        if warmup is not None:
            warmup.stop_all()
