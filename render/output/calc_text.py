"""Calculation text and CSV: the tables ``lampcast calc`` prints and the grid files it writes.

:func:`format_calculation` gives a compact table per setup (units in the headings) and the
standing caution; :func:`write_field_csvs` writes one CSV per field and setup with the grid's
points and horizontal illuminance (``x_m,y_m,illuminance_lx``), each file atomically.
"""

from __future__ import annotations

import os
from pathlib import Path

from render.calc.fields import row_fields
from render.calc.run import CalculationReport
from render.fileio import atomic_write_text, file_stem
from render.scene.model import Scene

__all__ = ["format_calculation", "write_field_csvs"]


def _num(x: float | None, digits: int = 2) -> str:
    return "-" if x is None else f"{x:.{digits}f}"


def format_calculation(report: CalculationReport) -> str:
    """The report as text: per setup, fields, faces, luminance, TI, upward flux and class check."""
    lines = [f"{report.scene}: calculation (observer age {report.age_years:g} years)"]
    for s in report.setups:
        lines.append("")
        lines.append(f"setup: {s.setup or '(the scene as given)'}")
        lines.append(f"  {'field':<16}{'Ē lx':>9}{'Emin lx':>9}{'Emax lx':>9}{'U0':>7}")
        for f in s.fields:
            lines.append(f"  {f.name:<16}{_num(f.mean_lx):>9}{_num(f.min_lx):>9}{_num(f.max_lx):>9}{_num(f.u0):>7}")
        for face in s.faces:
            sc, v = face.semicylindrical_lx, face.vertical_lx
            way = "+x" if face.facing[0] > 0 else "-x"
            lines.append(
                f"  {face.name} at {face.height_m:g} m facing {way}: "
                f"E_sc mean {sc.mean():.2f} lx, min {sc.min():.2f} lx; E_v mean {v.mean():.2f} lx, min {v.min():.2f} lx"
            )
        label = s.luminance_model
        if s.road_reflectance is not None:
            label += f", road reflectance {s.road_reflectance:.3f}"
        lines.append(f"  road luminance ({label}):")
        lines.append(f"  {'observer in':<16}{'L̄ cd/m²':>10}{'U0':>7}{'Ul':>7}{'TI %':>8}")
        ti = {t.lane: t.ti_percent for t in s.ti}
        for r in s.luminance:
            lines.append(
                f"  {r.observer_lane:<16}{_num(r.mean_cd_m2, 3):>10}{_num(r.u0):>7}{_num(r.ul):>7}"
                f"{_num(ti.get(r.observer_lane), 1):>8}"
            )
        lines.append(
            f"  direct upward flux {s.direct_upward_lm:.1f} lm, {s.direct_upward_lm_per_m:.2f} lm per metre "
            f"of street ({s.street_length_m:g} m; reflected light not included)"
        )
        c = s.class_check
        if c is not None:
            lines.append(f"  class {c.lighting_class.name} ({c.lighting_class.source}): {c.verdict}")
            for k in c.criteria:
                unit = f" {k.unit}" if k.unit else ""
                margin = "-" if k.margin is None else f"{100 * k.margin:+.0f} %"
                lines.append(
                    f"    {k.symbol:<5} {k.bound} {k.required:g}{unit}, achieved {_num(k.achieved, 3)}{unit}: "
                    f"{k.status} (margin {margin})"
                )
    lines.append("")
    lines.append("energy: not computed (the scene holds no energy inputs)")
    lines.append(f"caution: {report.caution}")
    return "\n".join(lines)


def write_field_csvs(scene: Scene, report: CalculationReport, out_dir: str | os.PathLike) -> list[Path]:
    """One CSV per setup and field in ``out_dir``: ``x_m,y_m,illuminance_lx`` per grid point,
    in the order of the fields' points (along the street, then across). Returns the files."""
    out = Path(out_dir)
    out.mkdir(parents=True, exist_ok=True)
    fields = {f.name: f for f in row_fields(scene)}
    written = []
    for s in report.setups:
        for result in s.fields:
            field = fields[result.name]
            values = result.illuminance_lx.ravel()
            rows = ["x_m,y_m,illuminance_lx"]
            rows += [f"{p[0]!r},{p[1]!r},{float(e)!r}" for p, e in zip(field.points_m.tolist(), values, strict=True)]
            stem = file_stem(f"{s.setup or 'scene'}-{result.name}")
            written.append(atomic_write_text(out / f"{stem}.csv", "\n".join(rows) + "\n"))
    return written
