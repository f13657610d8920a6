"""Calculation text and CSV: the tables ``lampcast calc`` prints and the grid files it writes.

:func:`format_calculation` gives a compact table per setup (units in the headings) and the
standing caution; :func:`write_field_csvs` writes one CSV per field and setup with the grid's
points and horizontal illuminance (``x_m,y_m,illuminance_lx``), and one per footway face grid,
setup and quantity (vertical and semicylindrical illuminance 1.5 m above the footway's points,
every facing the calculation has, the facing as an azimuth column), each file atomically.
Figures with interreflected light (``lampcast calc --bounces N``) are rows and columns of their
own, labelled :data:`render.calc.fields.INTERREFLECTED_LABEL`; the direct figures stay as they
are. With the scene's ``[night]`` light, rows marked "night light" give its illuminance on each
field and face grid beside the luminaires' (:mod:`render.calc.night`, labelled
:data:`render.calc.night.NIGHT_LABEL`), and the CSVs get the columns ``night_lx`` and
``illuminance_incl_night_not_en13201_lx``, then one column per term of the night light in lx
(``night_sky_glow_lx``, ``night_moonlight_lx``, ``night_lit_windows_lx``,
``night_lit_shop_windows_lx``, then ``night_lit_windows_3_lx`` … for further window lamps:
:func:`night_term_columns` of :func:`render.calc.night.night_terms`), which sum to ``night_lx``.
Every column name is declared once below (:data:`FIELD_COLUMNS`, :data:`FACE_COLUMNS`,
:data:`INTERREFLECTED_COLUMNS`, :data:`NIGHT_COLUMNS`, :data:`NIGHT_TERM_COLUMN`).
"""

from __future__ import annotations

import os
from collections.abc import Sequence
from pathlib import Path
from typing import Any

import numpy as np

from render.calc.fields import INTERREFLECTED_LABEL, CalculationField, FaceResult, row_fields
from render.calc.night import NIGHT_LABEL, NightGrid, further_window_lamp
from render.calc.run import CalculationReport
from render.calc.sky import MAP_SOURCE
from render.fileio import atomic_write_text, file_stem
from render.scene.model import Scene

__all__ = [
    "FACE_COLUMNS",
    "FACE_QUANTITIES",
    "FIELD_COLUMNS",
    "INTERREFLECTED_COLUMNS",
    "NIGHT_COLUMNS",
    "NIGHT_TERM_COLUMN",
    "face_grid_csvs",
    "format_calculation",
    "night_term_columns",
    "write_field_csvs",
]

#: A field CSV's columns: the point on the lane or footway (scene coordinates, m) and its
#: horizontal illuminance (the luminaires' direct light, as the standard's calculation takes it).
FIELD_COLUMNS = ("x_m", "y_m", "illuminance_lx")
#: A face grid CSV's leading columns: the point 1.5 m above the footway (scene coordinates, m)
#: and the horizontal direction the vertical plane or half-cylinder faces there, in degrees from
#: the scene's +x toward +y (0: facing +x, 180: facing -x; on a road it turns with the road).
FACE_COLUMNS = ("x_m", "y_m", "z_m", "facing_azimuth_deg_from_x_toward_y")
#: The face grid quantities: (file name part, value column).
FACE_QUANTITIES = (("vertical", "vertical_illuminance_lx"), ("semicylindrical", "semicylindrical_illuminance_lx"))
#: Columns added with interreflected light: its illuminance alone, and the direct value plus it
#: (not part of the EN 13201 calculation).
INTERREFLECTED_COLUMNS = ("interreflected_lx", "illuminance_incl_interreflected_not_en13201_lx")
#: Columns added with the night light: its illuminance alone, and the luminaires' direct value
#: plus it (not part of the EN 13201 calculation).
NIGHT_COLUMNS = ("night_lx", "illuminance_incl_night_not_en13201_lx")
#: The column of one term of the night light after :data:`NIGHT_COLUMNS`: the term's
#: illuminance in lx at the scene's level, by the term's name of
#: :func:`render.calc.night.night_terms` (the terms' columns sum to ``night_lx``).
NIGHT_TERM_COLUMN = "night_{}_lx"


def night_term_columns(terms: Sequence[tuple[str, str]]) -> tuple[str, ...]:
    """The columns of the night light's ``terms`` (names and units of
    :func:`render.calc.night.night_terms`, in their order): :data:`NIGHT_TERM_COLUMN` of each."""
    return tuple(NIGHT_TERM_COLUMN.format(name) for name, _ in terms)


def _num(x: float | None, digits: int = 2) -> str:
    return "-" if x is None else f"{x:.{digits}f}"


def _way(direction: int) -> str:
    return "+x" if direction > 0 else "-x"


def format_calculation(report: CalculationReport) -> str:
    """The report as text: per setup, fields, faces, edge ratio, luminance and TI per observer,
    the worst observer, obtrusive light, sky, energy and the class check."""
    o = report.options
    objects = (
        "objects included: " + ", ".join(o.include_objects) if o.include_objects else "an empty road (objects left out)"
    )
    lines = [f"{report.scene}: calculation (observer age {o.age_years:g} years, {o.traffic} traffic, {objects})"]
    if o.bounces > 0:
        lines.append(
            f"fields and footway faces also with interreflected light (up to {o.bounces} bounces), rows marked "
            "'+ interreflected': "
            f"{INTERREFLECTED_LABEL}; every other figure and the class check are direct light only"
        )
    if o.night is not None:
        from render.light.indirect.night import describe_night

        bounced = f"up to {o.bounces} interreflections" if o.bounces > 0 else "its direct part only"
        lines.append(f"{describe_night(o.night)}; rows marked 'night light' ({bounced}): {NIGHT_LABEL}")
    for s in report.setups:
        lines.append("")
        lines.append(f"setup: {s.setup or '(the scene as given)'}")
        lines.append(f"  {'field':<16}{'Ē lx':>9}{'Emin lx':>9}{'Emax lx':>9}{'U0':>7}")
        for f in s.fields:
            lines.append(f"  {f.name:<16}{_num(f.mean_lx):>9}{_num(f.min_lx):>9}{_num(f.max_lx):>9}{_num(f.u0):>7}")
            total = f.with_interreflected_lx
            if total is not None:
                mean, lo = float(total.mean()), float(total.min())
                lines.append(
                    f"  {'+ interreflected':<16}{_num(mean):>9}{_num(lo):>9}{_num(float(total.max())):>9}"
                    f"{_num(lo / mean if mean > 0 else 0.0):>7}  ({INTERREFLECTED_LABEL})"
                )
            if f.night is not None:
                n, terms = f.night, f.night.term_means_lx()
                lines.append(
                    f"  {'night light':<16}{_num(n.mean_lx, 3):>9}{_num(n.min_lx, 3):>9}{_num(n.max_lx, 3):>9}{'':>7}"
                    f"  (sky {terms['sky_glow']:.3f}, moon {terms['moonlight']:.3f}, windows "
                    f"{terms['lit_windows']:.3f}, shop windows {terms['lit_shop_windows']:.3f}"
                    # Further window lamps (lit_windows_3, ...), each its own term.
                    + "".join(
                        f", window lamp {further_window_lamp(name)} {v:.3f}"
                        for name, v in terms.items()
                        if further_window_lamp(name) is not None
                    )
                    + " lx)"
                )
        for face in s.faces:
            sc, v = face.semicylindrical_lx, face.vertical_lx
            lines.append(
                f"  {face.name} at {face.height_m:g} m facing {_way(int(np.sign(face.facing[0])))}: "
                f"E_sc mean {sc.mean():.2f} lx, min {sc.min():.2f} lx; E_v mean {v.mean():.2f} lx, min {v.min():.2f} lx"
            )
            isc, iv = face.with_interreflected_semicylindrical_lx, face.with_interreflected_vertical_lx
            if isc is not None and iv is not None:
                lines.append(
                    f"    + interreflected: E_sc mean {isc.mean():.2f} lx, min {isc.min():.2f} lx; "
                    f"E_v mean {iv.mean():.2f} lx, min {iv.min():.2f} lx  ({INTERREFLECTED_LABEL})"
                )
            if face.night_semicylindrical is not None and face.night_vertical is not None:
                nsc, nv = face.night_semicylindrical, face.night_vertical
                lines.append(
                    f"    night light: E_sc mean {nsc.mean_lx:.3f} lx, min {nsc.min_lx:.3f} lx; "
                    f"E_v mean {nv.mean_lx:.3f} lx, min {nv.min_lx:.3f} lx"
                )
        for e in s.edge:
            lines.append(
                f"  edge ratio R_EI {e.side}: {e.ratio:.2f} (outside {e.outside_mean_lx:.2f} lx / "
                f"inside {e.inside_mean_lx:.2f} lx, strips {e.strip_width_m:g} m)"
            )
        label = s.luminance_model
        if s.road_reflectance is not None:
            label += f", road reflectance {s.road_reflectance:.3f}"
        lines.append(f"  road luminance ({label}):")
        lines.append(f"  {'observer in':<16}{'looking':>8}{'L̄ cd/m²':>10}{'U0':>7}{'Ul':>7}{'TI %':>8}")
        ti = {(t.lane, t.direction): t.ti_percent for t in s.ti}
        for r in s.luminance:
            lines.append(
                f"  {r.observer_lane:<16}{_way(r.direction):>8}{_num(r.mean_cd_m2, 3):>10}{_num(r.u0):>7}"
                f"{_num(r.ul):>7}{_num(ti.get((r.observer_lane, r.direction)), 1):>8}"
            )
        w = s.worst
        if w is not None:
            ti_part = (
                f", TI {w.ti_percent:.1f} % ({w.ti_observer[0]}, {_way(w.ti_observer[1])})"
                if w.ti_percent is not None and w.ti_observer is not None
                else ", TI not computed"
            )
            lines.append(
                f"  worst observer: L̄ {w.mean_cd_m2:.3f} cd/m² ({w.mean_observer[0]}, {_way(w.mean_observer[1])}), "
                f"U0 {w.u0:.2f}, Ul {w.ul:.2f}{ti_part}"
            )
        for ob in s.obtrusive:
            verdict = (
                ""
                if ob.limits.max_vertical_lx is None and ob.limits.max_intensity_cd is None
                else (" - within the limits" if ob.passes else " - ABOVE a limit")
            )
            lines.append(
                f"  facade {ob.name}: E_v up to {ob.max_vertical_lx:.2f} lx, intensity toward its windows up to "
                f"{ob.max_intensity_cd:.0f} cd{verdict}"
            )
        sky = s.sky
        from_map = sky.reflected_upward_map_lm is not None and sky.reflected_upward_source == MAP_SOURCE
        reflected = sky.reflected_upward_map_lm if from_map else sky.reflected_upward_lm
        where = "reflected upward through a plane above the scene" if from_map else "reflected by the ground"
        lines.append(
            f"  to the sky: {sky.upward_lm:.1f} lm ({sky.direct_upward_lm:.1f} direct + {reflected:.1f} {where}), "
            f"{sky.upward_lm_per_m:.2f} lm per metre of street ({sky.street_length_m:g} m)"
        )
        if from_map:
            bounced = (
                f", interreflections up to {sky.reflected_upward_map_bounces} bounces"
                if sky.reflected_upward_map_bounces
                else ", one reflection"
            )
            lines.append(
                f"  (the upward exitance map: facades, roofs and objects included{bounced}; the ground's reflected "
                f"light counted whole, as if all of it went up, would be {sky.reflected_upward_lm:.1f} lm)"
            )
        if s.sky_relative is not None:
            r = s.sky_relative
            lines.append(
                f"  relative to {report.setups[0].setup or 'the first setup'}: upward x{_num(r.upward)}, "
                f"Rayleigh-weighted x{_num(r.rayleigh_weighted)}, scotopic-weighted x{_num(r.scotopic_weighted)}"
            )
        if sky.notch_fraction is not None:
            lines.append(
                f"  a notch filter on the strongest line could remove {100 * sky.notch_fraction:.0f} % of the power"
            )
        if s.energy is not None:
            en = s.energy
            cur = f" {en.currency}" if en.currency else ""
            lines.append(
                f"  energy: {en.installed_watts_w:.0f} W installed, {en.annual_kwh:.0f} kWh/year, "
                f"{en.annual_cost:.0f}{cur}/year, {en.annual_co2_kg:.0f} kg CO2/year"
            )
            if s.energy_vs_before is not None:
                d = s.energy_vs_before
                rel = "" if d.relative is None else f" ({100 * d.relative:+.0f} %)"
                lines.append(
                    f"  energy vs {report.setups[0].setup or 'the first setup'}: {d.annual_kwh:+.0f} kWh/year{rel}"
                )
        else:
            lines.append(f"  energy: {s.energy_note}")
        c = s.class_check
        if c is not None:
            lines.append(f"  class {c.lighting_class.name} ({c.lighting_class.source}): {c.verdict}")
            if c.mesopic is not None:
                lines.append(
                    f"    mesopic (CIE 191): S/P {c.mesopic.s_p_ratio:.2f}, factor {c.mesopic.factor:.3f} on illuminance"
                )
            for k in c.criteria:
                unit = f" {k.unit}" if k.unit else ""
                margin = "-" if k.margin is None else f"{100 * k.margin:+.0f} %"
                lines.append(
                    f"    {k.symbol:<5} {k.bound} {k.required:g}{unit}, achieved {_num(k.achieved, 3)}{unit}: "
                    f"{k.status} (margin {margin})"
                )
    lines.append("")
    lines.append(f"caution: {report.caution}")
    return "\n".join(lines)


def _grid_csv(
    head: Sequence[str],
    leading: np.ndarray,
    values: np.ndarray,
    interreflected: np.ndarray | None,
    night: Sequence[NightGrid] | None,
) -> str:
    """A grid's CSV text: the columns ``head`` (the ``leading`` (n, k) numbers', then the
    value's), one row per point with ``values`` (n,); with ``interreflected`` (n,) the
    :data:`INTERREFLECTED_COLUMNS` (it, and the value plus it); with ``night`` (the night
    light's grids of the rows, one after another, all with the same terms) the
    :data:`NIGHT_COLUMNS` (it, and the value plus it) and :func:`night_term_columns` (each
    term). Numbers as Python writes a float exactly."""
    names = list(head)
    columns = [*np.asarray(leading, np.float64).T, values]
    if interreflected is not None:
        names += INTERREFLECTED_COLUMNS
        columns += [interreflected, values + interreflected]
    if night is not None:
        terms = night[0].terms
        if any(g.terms != terms for g in night):
            raise ValueError("the night light's grids of one CSV must have the same terms")
        total = np.concatenate([g.illuminance_lx.ravel() for g in night])
        each = np.concatenate([g.terms_lx.reshape(-1, len(terms)) for g in night])
        names += [*NIGHT_COLUMNS, *night_term_columns(terms)]
        columns += [total, values + total, *each.T]
    rows = np.column_stack([np.asarray(c, np.float64) for c in columns]).tolist()
    return "\n".join([",".join(names), *(",".join(map(repr, row)) for row in rows)]) + "\n"


def write_field_csvs(scene: Scene, report: CalculationReport, out_dir: str | os.PathLike) -> list[Path]:
    """One CSV per setup and field in ``out_dir`` (``SETUP-FIELD.csv``): ``x_m,y_m,illuminance_lx``
    per grid point, in the order of the fields' points (along the street, then across); with
    interreflected light two more columns, ``interreflected_lx`` and
    ``illuminance_incl_interreflected_not_en13201_lx`` (direct plus interreflected: not part of
    the EN 13201 calculation); with the night light two more, ``night_lx`` and
    ``illuminance_incl_night_not_en13201_lx`` (the luminaires' direct light plus it), then
    one per term of the night light, :func:`night_term_columns` (sky glow, moonlight, each
    window lamp's lit windows, in lx; they sum to ``night_lx``).

    Then, per setup, footway and quantity, one CSV of its face grid
    (``SETUP-FOOTWAY-vertical.csv``, ``SETUP-FOOTWAY-semicylindrical.csv``):
    ``x_m,y_m,z_m,facing_azimuth_deg_from_x_toward_y`` and ``vertical_illuminance_lx`` or
    ``semicylindrical_illuminance_lx`` (direct light), a row per point and facing (every facing
    the calculation has, in its order, each over the field's points in their order), with the
    same interreflected and night-light columns as the fields' when the calculation has them.
    Returns the files (each setup's fields, then its face grids)."""
    out = Path(out_dir)
    out.mkdir(parents=True, exist_ok=True)
    fields = {f.name: f for f in row_fields(scene)}
    written = []
    for s in report.setups:
        setup = s.setup or "scene"
        for result in s.fields:
            night = None if result.night is None else [result.night]
            extra = None if result.interreflected_lx is None else result.interreflected_lx.ravel()
            text = _grid_csv(
                FIELD_COLUMNS, fields[result.name].points_m[:, :2], result.illuminance_lx.ravel(), extra, night
            )
            written.append(atomic_write_text(out / f"{file_stem(f'{setup}-{result.name}')}.csv", text))
        for name in dict.fromkeys(face.name for face in s.faces):
            faces = [face for face in s.faces if face.name == name]
            for part, text in face_grid_csvs(fields[name], faces):
                written.append(atomic_write_text(out / f"{file_stem(f'{setup}-{name}-{part}')}.csv", text))
    return written


def face_grid_csvs(field: CalculationField, faces: Sequence[FaceResult]) -> list[tuple[str, str]]:
    """(quantity, CSV text) of each of :data:`FACE_QUANTITIES` for the face grids ``faces`` of
    ``field`` (every facing of one footway, all with or all without interreflected and night
    light): :data:`FACE_COLUMNS` and the quantity's column, a row per point and facing, the
    facings in the order given, each over the field's points in their order; with
    interreflected light the :data:`INTERREFLECTED_COLUMNS`, with night light the
    :data:`NIGHT_COLUMNS` and :func:`night_term_columns`."""
    leading = np.concatenate(
        [
            np.column_stack(
                [
                    field.points_m[:, :2],
                    field.points_m[:, 2] + face.height_m,
                    _azimuth_deg(field.to_world(np.asarray(face.facing, np.float64))),
                ]
            )
            for face in faces
        ]
    )
    out = []
    for part, column in FACE_QUANTITIES:
        grids = [_face_grids(face, part) for face in faces]
        text = _grid_csv(
            (*FACE_COLUMNS, column),
            leading,
            np.concatenate([np.ravel(direct) for direct, _, _ in grids]),
            _joined([bounced for _, bounced, _ in grids]),
            _all_or_none([night for _, _, night in grids]),
        )
        out.append((part, text))
    return out


def _face_grids(face: FaceResult, part: str) -> tuple[np.ndarray, np.ndarray | None, NightGrid | None]:
    """(direct, interreflected, night light) grids of ``face`` for the quantity ``part`` of
    :data:`FACE_QUANTITIES`."""
    if part == "vertical":
        return face.vertical_lx, face.interreflected_vertical_lx, face.night_vertical
    return face.semicylindrical_lx, face.interreflected_semicylindrical_lx, face.night_semicylindrical


def _joined(grids: Sequence[np.ndarray | None]) -> np.ndarray | None:
    """The ``grids`` one after another, flattened (None when any of them is None)."""
    every = _all_or_none(grids)
    return None if every is None else np.concatenate([np.ravel(g) for g in every])


def _all_or_none(grids: Sequence[Any]) -> list[Any] | None:
    """The ``grids`` as a list, or None when any of them is None."""
    return None if any(g is None for g in grids) else list(grids)


def _azimuth_deg(directions: np.ndarray) -> np.ndarray:
    """(n,) the azimuth of horizontal ``directions`` (n, 3), degrees from +x toward +y in [0, 360)."""
    return np.degrees(np.arctan2(directions[:, 1], directions[:, 0])) % 360.0
