"""Colour and photometric figures of a lamp, the lamp table, JSON and spectrum plots.

:func:`lamp_figures` computes, from a :class:`render.colour.lamps.Lamp`'s 1 nm spectrum:

* chromaticity x, y (CIE 1931 2°) and u, v (CIE 1960 UCS);
* CCT and Duv by Ohno (2013), *LEUKOS* 10(1), "Practical use and calculation of CCT and Duv"
  (``colour.temperature.uv_to_CCT_Ohno2013``);
* CIE 13.3-1995 general colour rendering index Ra and special index R9
  (``colour.colour_rendering_index``), with the chromaticity distance DC between lamp and
  reference illuminant;
* CIE 224:2017 colour fidelity index Rf (``colour.colour_fidelity_index``, ``'CIE 2017'``);
* ANSI/IES TM-30-18 fidelity Rf and gamut Rg (``'ANSI/IES TM-30-18'``);
* S/P ratio K'm∫SV' / Km∫SV (:func:`render.colour.observers.sp_ratio`);
* luminous efficacy of radiation, lm per W of 380-780 nm optical power;
* blue fraction: the share of the 380-780 nm power below 500 nm (the 500 nm bin counts half);
* notch-filterable fraction: the share of the 380-780 nm power within ±2 nm (five 1 nm bins)
  of the strongest bin -- what an ideal 4 nm wide notch filter on the lamp's peak could remove;
* peak wavelength (centre of the strongest bin).

Where a figure is undefined its value is ``None`` and ``figures["undefined"][key]`` gives the
reason; it is never a number. The conventions used:

* CCT is not given when the chromaticity lies more than Duv = 0.05 from the Planckian locus
  (CIE S 017:2020 International Lighting Vocabulary, term 17-23-068 "correlated colour
  temperature", Note 1: the concept should not be used beyond ΔC = 5·10⁻² in the (u', 2/3 v'),
  i.e. CIE 1960 (u, v), diagram), nor outside the 1000-100 000 K range of the Ohno tables.
* The colour rendering and fidelity indices need a reference illuminant at the lamp's CCT; when
  the CCT is undefined, or outside 1000-25 000 K (where the CIE daylight series and the CIE 224
  reference are defined), Ra, R9, Rf and Rg are ``None``.
* CIE 13.3-1995 asks that the lamp's chromaticity lie within DC = 5.4·10⁻³ of its reference;
  beyond that Ra and R9 are still given, with a warning in ``figures["warnings"]``.

colour-science's own warnings are silenced; those that bear on a figure are kept in
``figures["warnings"]`` with the prefix ``colour-science:``.
"""

from __future__ import annotations

import copy
import json
import math
import warnings
from collections.abc import Sequence
from functools import lru_cache
from pathlib import Path

import numpy as np

from render.colour.lamps import Lamp
from render.colour.observers import photopic, photopic_lef, scotopic_lef, sp_ratio, tristimulus
from render.colour.spectra import BIN_WIDTH_NM, WAVELENGTHS_NM
from render.fileio import save_figure

#: Largest |Duv| for which a CCT is given (CIE S 017:2020, term 17-23-068, Note 1).
DUV_LIMIT_CCT = 0.05
#: Largest DC of CIE 13.3-1995 for which Ra is strictly valid.
DC_LIMIT_CIE133 = 5.4e-3
#: CCT range, K, of the reference illuminants of CIE 13.3 / CIE 224 (Planckian and CIE daylight).
CCT_RANGE_REFERENCE_K = (1000.0, 25000.0)
#: CCT range, K, of Ohno's (2013) method as implemented in colour-science.
CCT_RANGE_OHNO_K = (1000.0, 100000.0)
#: Half width of the notch band, nm.
NOTCH_HALF_WIDTH_NM = 2.0
#: Upper limit of the "blue" band, nm.
BLUE_LIMIT_NM = 500.0

#: Keys of :func:`lamp_figures`, in output order, with (unit, decimals for JSON/table).
FIGURE_KEYS = {
    "id": ("", None),
    "name": ("", None),
    "type": ("", None),
    "x": ("", 4),
    "y": ("", 4),
    "u": ("", 4),
    "v": ("", 4),
    "cct_K": ("K", 0),
    "duv": ("", 4),
    "ra": ("", 1),
    "r9": ("", 1),
    "cri_dc": ("", 4),
    "rf_cie2017": ("", 1),
    "rf_tm30": ("", 1),
    "rg_tm30": ("", 1),
    "sp_ratio": ("", 3),
    "ler_lm_per_w": ("lm/W", 1),
    "blue_fraction": ("", 4),
    "notch_fraction": ("", 4),
    "peak_nm": ("nm", 0),
}


def _sd(spd: np.ndarray, name: str):
    """The gridded spectrum as a colour-science SpectralDistribution, zero outside 380-780 nm
    (colour-science extends it to 360 nm for CIE 13.3)."""
    import colour

    return colour.SpectralDistribution(
        np.asarray(spd, dtype=np.float64),
        WAVELENGTHS_NM,
        name=name,
        extrapolator_kwargs={"method": "Constant", "left": 0.0, "right": 0.0},
    )


def _uv_from_xy(x: float, y: float) -> tuple[float, float]:
    """CIE 1960 UCS u, v from CIE 1931 x, y."""
    d = -2.0 * x + 12.0 * y + 3.0
    return 4.0 * x / d, 6.0 * y / d


def _cie133_dc(uv: np.ndarray) -> float:
    """CIE 13.3-1995 DC: distance in the CIE 1960 UCS diagram between the lamp and the reference
    illuminant colour-science uses (Robertson 1968 CCT; Planckian below 5000 K, else CIE
    daylight)."""
    from colour.temperature import CCT_to_uv_Ohno2013, CCT_to_xy_CIE_D, uv_to_CCT_Robertson1968

    cct = float(uv_to_CCT_Robertson1968(uv)[0])
    if cct < 5000.0:
        ref = np.asarray(CCT_to_uv_Ohno2013(np.array([cct, 0.0])))
    else:
        ref = np.array(_uv_from_xy(*CCT_to_xy_CIE_D(cct)))
    return float(np.hypot(*(np.asarray(uv) - ref)))


def _band_share(spd: np.ndarray, hi_nm: float) -> float:
    """Share of the total power in bins below ``hi_nm`` (a bin centred on ``hi_nm`` counts half)."""
    w = np.where(WAVELENGTHS_NM < hi_nm - 1e-9, 1.0, np.where(np.abs(WAVELENGTHS_NM - hi_nm) < 1e-9, 0.5, 0.0))
    return float((spd * w).sum() / spd.sum())


def _clean(value) -> float | None:
    if value is None:
        return None
    value = float(value)
    return value if math.isfinite(value) else None


@lru_cache(maxsize=256)
def _figures_of_spectrum(spd_bytes: bytes) -> tuple[dict, tuple[str, ...], dict]:
    """Figures of a spectrum (cached on its bytes): (values, warnings, undefined reasons)."""
    import colour

    spd = np.frombuffer(spd_bytes, dtype=np.float64)
    values: dict = {}
    undefined: dict[str, str] = {}
    notes: list[str] = []

    XYZ = tristimulus(spd)
    x, y = float(XYZ[0] / XYZ.sum()), float(XYZ[1] / XYZ.sum())
    u, v = _uv_from_xy(x, y)
    values.update(x=x, y=y, u=u, v=v)

    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        cct, duv = (float(c) for c in colour.temperature.uv_to_CCT_Ohno2013(np.array([u, v])))
        values["duv"] = _clean(duv)
        if abs(duv) > DUV_LIMIT_CCT:
            undefined["cct_K"] = (
                f"chromaticity is Duv = {duv:+.3f} from the Planckian locus; CCT is not defined "
                f"beyond |Duv| = {DUV_LIMIT_CCT} (CIE S 017:2020, 17-23-068)"
            )
            cct_ok = None
        elif not CCT_RANGE_OHNO_K[0] <= cct <= CCT_RANGE_OHNO_K[1]:
            undefined["cct_K"] = (
                f"CCT {cct:.0f} K is outside the {CCT_RANGE_OHNO_K[0]:.0f}-{CCT_RANGE_OHNO_K[1]:.0f} K range of the method"
            )
            cct_ok = None
        else:
            cct_ok = cct
        values["cct_K"] = _clean(cct_ok)

        reference_ok = cct_ok is not None and CCT_RANGE_REFERENCE_K[0] <= cct_ok <= CCT_RANGE_REFERENCE_K[1]
        fidelity_keys = ("ra", "r9", "cri_dc", "rf_cie2017", "rf_tm30", "rg_tm30")
        if not reference_ok:
            reason = (
                "no reference illuminant: " + undefined["cct_K"]
                if "cct_K" in undefined
                else f"no reference illuminant: CCT {cct_ok:.0f} K is outside {CCT_RANGE_REFERENCE_K[0]:.0f}-{CCT_RANGE_REFERENCE_K[1]:.0f} K"
            )
            for key in fidelity_keys:
                values[key] = None
                undefined[key] = reason
        else:
            sd = _sd(spd, "lamp")
            cri = colour.colour_rendering_index(sd, additional_data=True)
            values["ra"] = _clean(cri.Q_a)
            values["r9"] = _clean(cri.Q_as[9].Q_a)
            dc = _cie133_dc(np.array([u, v]))
            values["cri_dc"] = _clean(dc)
            if dc >= DC_LIMIT_CIE133:
                notes.append(
                    f"CIE 13.3: DC = {dc:.4f} is not below {DC_LIMIT_CIE133:.1e}, so the lamp is "
                    "too far from its reference illuminant for Ra and R9 to be strictly valid"
                )
            rf = colour.colour_fidelity_index(sd, additional_data=False, method="CIE 2017")
            values["rf_cie2017"] = _clean(rf)
            tm30 = colour.colour_fidelity_index(sd, additional_data=True, method="ANSI/IES TM-30-18")
            values["rf_tm30"] = _clean(tm30.R_f)
            values["rg_tm30"] = _clean(tm30.R_g)
            for key in fidelity_keys:
                if values[key] is None and key not in undefined:
                    undefined[key] = "colour-science returned no finite value"

    seen = set()
    for w in caught:
        message = str(w.message).strip()
        if not issubclass(w.category, Warning) or message in seen:
            continue
        seen.add(message)
        if _relevant_warning(message):
            notes.append(f"colour-science: {message}")

    values["sp_ratio"] = _clean(sp_ratio(spd))
    values["ler_lm_per_w"] = _clean(photopic(spd) / (spd.sum() * BIN_WIDTH_NM))
    values["blue_fraction"] = _band_share(spd, BLUE_LIMIT_NM)
    peak = int(np.argmax(spd))
    half = int(round(NOTCH_HALF_WIDTH_NM / BIN_WIDTH_NM))
    values["notch_fraction"] = float(spd[max(0, peak - half) : peak + half + 1].sum() / spd.sum())
    values["peak_nm"] = float(WAVELENGTHS_NM[peak])
    return values, tuple(notes), undefined


def _relevant_warning(message: str) -> bool:
    """colour-science warnings worth passing on (not the routine ones about shapes/interpolation)."""
    routine = ("interval", "shape", "align", "interpolat", "extrapolat", "aligning")
    return not any(word in message.lower() for word in routine)


def lamp_figures(lamp: Lamp) -> dict:
    """Colour and photometric figures of a lamp (see the module docstring).

    Returns
    -------
    dict
        Keys in the order of :data:`FIGURE_KEYS`, then ``"undefined"`` (figure -> reason) and
        ``"warnings"`` (list of str). Units: ``cct_K`` K, ``ler_lm_per_w`` lm/W, ``peak_nm``
        nm, fractions 0-1; the rest dimensionless. Cached on the spectrum, so computing all
        built-in lamps twice costs about as much as once.
    """
    values, notes, undefined = _figures_of_spectrum(np.ascontiguousarray(lamp.spd, dtype=np.float64).tobytes())
    out: dict = {"id": lamp.id, "name": lamp.name, "type": lamp.type}
    for key in FIGURE_KEYS:
        if key not in out:
            out[key] = values.get(key)
    out["undefined"] = dict(undefined)
    out["warnings"] = list(notes)
    return copy.deepcopy(out)


# --- table and JSON --------------------------------------------------------------------------

_TABLE_COLUMNS = (
    # (header, unit, key, width, format)
    ("lamp", "", "id", 0, None),
    ("CCT", "K", "cct_K", 6, "{:.0f}"),
    ("Duv", "", "duv", 7, "{:+.4f}"),
    ("Ra", "", "ra", 6, "{:.1f}"),
    ("R9", "", "r9", 6, "{:.0f}"),
    ("Rf", "CIE224", "rf_cie2017", 6, "{:.1f}"),
    ("Rg", "TM-30", "rg_tm30", 6, "{:.1f}"),
    ("S/P", "", "sp_ratio", 5, "{:.2f}"),
    ("LER", "lm/W", "ler_lm_per_w", 5, "{:.0f}"),
    ("blue", "<500nm%", "blue_fraction", 7, "{:.1%}"),
    ("notch", "±2nm%", "notch_fraction", 6, "{:.1%}"),
    ("x", "", "x", 6, "{:.4f}"),
    ("y", "", "y", 6, "{:.4f}"),
)


def format_lamp_table(figures: Sequence[dict]) -> str:
    """A fixed-width text table of :func:`lamp_figures` results, one lamp per row.

    Undefined figures show as ``n/a``; a ``*`` marks a figure with a warning. Reasons and
    warnings are listed under the table.
    """
    id_width = max([len("lamp")] + [len(f["id"]) for f in figures])
    widths = [
        id_width if key == "id" else max(width, len(head), len(unit)) for head, unit, key, width, _ in _TABLE_COLUMNS
    ]
    head = "  ".join(h.ljust(w) if k == "id" else h.rjust(w) for (h, _, k, _, _), w in zip(_TABLE_COLUMNS, widths))
    units = "  ".join(u.ljust(w) if k == "id" else u.rjust(w) for (_, u, k, _, _), w in zip(_TABLE_COLUMNS, widths))
    lines = [head, units, "-" * len(head)]
    footnotes: list[str] = []
    for fig in figures:
        cells = []
        flagged = {"ra", "r9"} if any(w.startswith("CIE 13.3") for w in fig.get("warnings", [])) else set()
        for (_, _, key, _, fmt), width in zip(_TABLE_COLUMNS, widths):
            if key == "id":
                cells.append(fig["id"].ljust(width))
                continue
            value = fig.get(key)
            text = "n/a" if value is None else fmt.format(value).replace("%", "")
            if key in flagged and value is not None:
                text += "*"
            cells.append(text.rjust(width))
        lines.append("  ".join(cells).rstrip())
        reasons: dict[str, list[str]] = {}
        for key, why in fig.get("undefined", {}).items():
            reasons.setdefault(why, []).append(key)
        for why, keys in reasons.items():
            footnotes.append(f"{fig['id']}: {', '.join(keys)} n/a -- {why}")
        for w in fig.get("warnings", []):
            footnotes.append(f"{fig['id']}: {'* ' if w.startswith('CIE 13.3') else ''}{w}")
    if footnotes:
        lines += ["", *footnotes]
    return "\n".join(lines)


def _round(key: str, value):
    if value is None or isinstance(value, (str, bool)):
        return value
    if isinstance(value, float) and not math.isfinite(value):
        return None
    decimals = FIGURE_KEYS.get(key, ("", 6))[1]
    if decimals is None:
        return value
    value = round(float(value), decimals)
    return int(value) if decimals == 0 else value


def figures_json(figures: Sequence[dict]) -> str:
    """JSON text of a list of :func:`lamp_figures` results: stable key order, floats rounded
    (see :data:`FIGURE_KEYS`), ``null`` for undefined figures, never NaN."""
    rows = []
    for fig in figures:
        row = {key: _round(key, fig.get(key)) for key in FIGURE_KEYS}
        row["undefined"] = {k: fig.get("undefined", {})[k] for k in FIGURE_KEYS if k in fig.get("undefined", {})}
        row["warnings"] = list(fig.get("warnings", []))
        rows.append(row)
    return json.dumps(rows, indent=2, ensure_ascii=False, allow_nan=False)


# --- plots -----------------------------------------------------------------------------------


def _title(lamp: Lamp, fig: dict) -> str:
    parts = []
    parts.append("CCT n/a" if fig["cct_K"] is None else f"{fig['cct_K']:.0f} K")
    parts.append("Ra n/a" if fig["ra"] is None else f"Ra {fig['ra']:.0f}")
    parts.append(f"S/P {fig['sp_ratio']:.2f}")
    parts.append(f"{fig['ler_lm_per_w']:.0f} lm/W")
    return f"{lamp.id}\n{lamp.name} -- " + ", ".join(parts)


def plot_lamp_spectrum(lamp: Lamp, path: str | Path, dpi: int = 110) -> Path:
    """Write a PNG of the lamp's relative spectrum with V(λ) and V'(λ).

    Top panel: the spectrum per 1 nm bin scaled to a peak of 1 (steps), V(λ) and V'(λ); the
    modelled emission lines are marked. Bottom panel: the same spectrum on a log scale, so that
    weak lines and the continuum are visible. The file is written atomically (temporary file
    in the same folder, then ``os.replace``).

    Returns the path written.
    """
    from matplotlib.backends.backend_agg import FigureCanvasAgg
    from matplotlib.figure import Figure

    path = Path(path)
    fig_values = lamp_figures(lamp)
    rel = lamp.spd_peak_normalised()
    peak = float(lamp.spd.max())
    edges = np.concatenate([WAVELENGTHS_NM - 0.5 * BIN_WIDTH_NM, [WAVELENGTHS_NM[-1] + 0.5 * BIN_WIDTH_NM]])

    figure = Figure(figsize=(8.0, 5.6))
    FigureCanvasAgg(figure)
    top, bottom = figure.subplots(2, 1, sharex=True, gridspec_kw={"height_ratios": [2.2, 1.0]})
    top.stairs(rel, edges, fill=True, color="0.25", alpha=0.35, linewidth=0)
    top.stairs(rel, edges, color="0.1", linewidth=0.9, label="lamp, relative power per nm")
    top.plot(WAVELENGTHS_NM, photopic_lef(), color="tab:green", linewidth=1.2, label="V(λ) photopic")
    top.plot(WAVELENGTHS_NM, scotopic_lef(), color="tab:blue", linewidth=1.2, linestyle="--", label="V'(λ) scotopic")
    if lamp.lines:
        wl = np.array([w for w, _ in lamp.lines])
        height = np.array([p for _, p in lamp.lines]) / BIN_WIDTH_NM / peak
        top.vlines(wl, 0.0, np.minimum(height, 1.0), color="tab:red", linewidth=1.0, label="emission lines")
        top.plot(wl, np.minimum(height, 1.0), "v", color="tab:red", markersize=4)
    top.set_ylim(0.0, 1.08)
    top.set_ylabel("relative (peak = 1)")
    top.legend(loc="best", fontsize=7, framealpha=0.85)
    top.set_title(_title(lamp, fig_values), fontsize=9)

    floor = 1e-5
    bottom.stairs(np.maximum(rel, floor), edges, color="0.1", linewidth=0.8, baseline=floor)
    if lamp.lines:
        bottom.plot(wl, np.clip(height, floor, None), "v", color="tab:red", markersize=3)
    bottom.set_yscale("log")
    bottom.set_ylim(floor, 2.0)
    bottom.set_ylabel("log scale")
    bottom.set_xlabel("wavelength (nm)")
    bottom.set_xlim(WAVELENGTHS_NM[0] - 0.5, WAVELENGTHS_NM[-1] + 0.5)
    for ax in (top, bottom):
        ax.set_axisbelow(True)
        ax.grid(True, color="0.9", linewidth=0.6)
    figure.subplots_adjust(left=0.09, right=0.98, top=0.9, bottom=0.09, hspace=0.08)

    save_figure(figure, path, dpi=dpi)
    return path
