"""One study task: a scene variant built and cast once, every setup of it evaluated.

:func:`evaluate_variant` runs on a worker (a Dask worker process, or the calling process in a
serial run). It loads the variant's scene document, computes the calculation of every setup
(:func:`render.calc.run.run_calculation`, the scene's ``[calc]`` with the study's class if
given), and where asked renders the colour view once and relights it for every other setup
(colour figures from :func:`render.analysis.view_colours.analyse_view_colours`) and renders
small thumbnails. Its result holds one :class:`ResultRow` per setup, the time it took and the
worker's peak resident memory.

Columns (units in the names where they have one): the headline figures of
:meth:`render.calc.run.SetupCalculation.headline` under their keys; ``annual_cost`` with
``currency``; ``installed_watts_w``; ``class_name``, ``class_verdict`` and ``class_margin_min``
(the smallest margin over the class's criteria: > 0 every criterion met with room, < 0 the
worst shortfall, as a fraction); ``colour_hard_pairs`` (pairs distinct in daylight that are hard
to tell apart) and ``colour_min_delta_e00`` (the smallest CIEDE2000 between such pairs as seen);
``thumbnail`` (a PNG path relative to the study's output folder). A figure that cannot be
computed for a variant is empty (``None``) and ``note`` says why.
"""

from __future__ import annotations

import copy
import resource
import sys
import time
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from render.errors import InputError
from render.studies.spec import ComputeSettings
from render.studies.variants import Variant

__all__ = ["ResultRow", "VariantResult", "VariantTask", "evaluate_variant", "scene_setups"]


@dataclass(frozen=True)
class VariantTask:
    """What a worker needs for one variant: the variant, the setups, what to compute, where
    thumbnails go, and each setup's row key."""

    variant: Variant
    setups: tuple[str, ...]
    compute: ComputeSettings
    keys: tuple[str, ...]
    out_dir: str
    progress: bool = False


@dataclass(frozen=True)
class ResultRow:
    """One scene variant × setup: identification and figures (JSON-safe values)."""

    key: str
    variant: int
    scene: str
    label: str
    setup: str
    parameters: tuple[tuple[str, Any], ...]
    figures: dict[str, Any] = field(default_factory=dict)
    note: str = ""

    def to_json(self) -> dict[str, Any]:
        return {
            "key": self.key,
            "variant": self.variant,
            "scene": self.scene,
            "label": self.label,
            "setup": self.setup,
            "parameters": [[k, v] for k, v in self.parameters],
            "figures": self.figures,
            "note": self.note,
        }

    @classmethod
    def from_json(cls, data: dict[str, Any]) -> ResultRow:
        return cls(
            key=data["key"],
            variant=int(data["variant"]),
            scene=data["scene"],
            label=data["label"],
            setup=data["setup"],
            parameters=tuple((k, v) for k, v in data["parameters"]),
            figures=dict(data["figures"]),
            note=data.get("note", ""),
        )


@dataclass(frozen=True)
class VariantResult:
    """The rows of one variant, the seconds it took and the worker's peak memory (MiB)."""

    variant: int
    rows: tuple[ResultRow, ...]
    seconds: float
    peak_rss_mib: float


def scene_setups(variant: Variant, wanted: tuple[str, ...]) -> tuple[str, ...]:
    """The setups a variant is evaluated under: ``wanted`` (each must exist in the scene), or
    every setup the scene defines, in file order."""
    defined = list((variant.document.get("setups") or {}).keys())
    if not wanted:
        return tuple(defined)
    missing = [s for s in wanted if s not in defined]
    if missing:
        from render.errors import input_error

        raise input_error(
            variant.scene_path,
            "setups",
            f"the study asks for setup(s) {', '.join(missing)} the scene does not define "
            f"(it has {', '.join(defined) or 'none'})",
        )
    return wanted


def _peak_rss_mib() -> float:
    peak = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss
    return peak / (1024.0 * 1024.0) if sys.platform == "darwin" else peak / 1024.0


def _calculation_figures(study, setups: tuple[str, ...], compute: ComputeSettings) -> tuple[list[dict], str]:
    from render.calc.run import calc_options, run_calculation

    try:
        kwargs = {} if compute.lighting_class is None else {"lighting_class": compute.lighting_class}
        report = run_calculation(study, list(setups), calc_options(study.scene, **kwargs))
    except InputError as err:
        return [{} for _ in setups], f"no calculation: {err}"
    out = []
    for s in report.setups:
        figures: dict[str, Any] = {h.key: h.value for h in s.headline()}
        e = s.energy
        figures["annual_cost"] = e.annual_cost if e is not None else None
        figures["currency"] = e.currency if e is not None else None
        figures["installed_watts_w"] = e.installed_watts_w if e is not None else None
        c = s.class_check
        margins = [k.margin for k in c.criteria if k.margin is not None] if c is not None else []
        figures["class_name"] = c.lighting_class.name if c is not None else None
        figures["class_verdict"] = c.verdict if c is not None else None
        figures["class_margin_min"] = min(margins) if margins else None
        out.append(figures)
    return out, ""


def _colour_figures(study, setups: tuple[str, ...], compute: ComputeSettings) -> list[dict]:
    from render.analysis.view_colours import analyse_view_colours

    view = compute.colour_view or study.scene.colour_view
    first = study.render_view(view, setups[0])
    rendered = [first, *(study.relight(first, s) for s in setups[1:])]
    observer = study.observer
    shared, adapted = study.display_both(rendered, observer)
    result = analyse_view_colours(
        study, rendered, shared, observer, list(setups), own_states=[d.state for d in adapted]
    )
    out = []
    daylight = result.daylight.delta_e00
    distinct = result.thresholds.distinct_in_daylight_delta_e00
    pairs = [
        (i, j)
        for i in range(len(result.objects))
        for j in range(i + 1, len(result.objects))
        if daylight[i][j] is not None and daylight[i][j] >= distinct
    ]
    for label in setups:
        seen = result.setups[label]
        values = [seen.delta_e00[i][j] for i, j in pairs if seen.delta_e00[i][j] is not None]
        out.append(
            {
                "colour_hard_pairs": len(seen.confusions),
                "colour_min_delta_e00": min(values) if values else None,
            }
        )
    return out


def _thumbnails(
    study, setups: tuple[str, ...], compute: ComputeSettings, variant: Variant, out_dir: Path
) -> list[dict]:
    from render.output.images import write_png

    paths: list[dict] = [{} for _ in setups]
    for view in compute.thumbnails:
        first = study.render_view(view, setups[0], width_px=compute.thumbnail_width)
        rendered = [first, *(study.relight(first, s) for s in setups[1:])]
        shared, _ = study.display_both(rendered, study.observer)
        for i, (setup, shown) in enumerate(zip(setups, shared, strict=True)):
            rel = Path("thumbnails") / f"{variant.index:05d}-{setup}-{view}.png"
            write_png(out_dir / rel, shown.srgb8, {"lampcast.study.variant": variant.label, "lampcast.setup": setup})
            paths[i][f"thumbnail_{view}"] = rel.as_posix()
    return paths


def evaluate_variant(task: VariantTask) -> VariantResult:
    """Every figure of one variant under each of its setups (module text)."""
    from render.scene.loader import load_scene_document
    from render.study import Study

    start = time.perf_counter()
    v = task.variant
    rows_figures: list[dict] = [{} for _ in task.setups]
    notes: list[str] = []
    try:
        study = Study(load_scene_document(copy.deepcopy(v.document), v.scene_path))
    except InputError as err:
        study = None
        notes.append(f"scene not loaded: {err}")
    if study is not None and task.setups:
        calc, note = _calculation_figures(study, task.setups, task.compute)
        if note:
            notes.append(note)
        for figures, more in zip(rows_figures, calc, strict=True):
            figures.update(more)
        if task.compute.colours:
            for figures, more in zip(rows_figures, _colour_figures(study, task.setups, task.compute), strict=True):
                figures.update(more)
        if task.compute.thumbnails:
            out = Path(task.out_dir)
            for figures, more in zip(rows_figures, _thumbnails(study, task.setups, task.compute, v, out), strict=True):
                figures.update(more)
    rows = tuple(
        ResultRow(
            key=key,
            variant=v.index,
            scene=v.scene_name,
            label=v.label,
            setup=setup,
            parameters=v.parameters,
            figures=figures,
            note="; ".join(notes),
        )
        for key, setup, figures in zip(task.keys, task.setups, rows_figures, strict=True)
    )
    return VariantResult(v.index, rows, time.perf_counter() - start, _peak_rss_mib())
