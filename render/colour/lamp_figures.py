"""Colour and photometric figures of a lamp: CCT, rendering indices, S/P, efficacy, fractions.

:func:`lamp_figures` computes, from a :class:`render.colour.lamps.Lamp`'s 1 nm spectrum, a
:class:`LampFigures` record:

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

Where a figure is undefined its value is ``None`` and ``figures.undefined[key]`` gives the
reason; it is never a number. The conventions used:

* CCT is not given when the chromaticity lies more than Duv = 0.05 from the Planckian locus
  (CIE S 017:2020 International Lighting Vocabulary, term 17-23-068 "correlated colour
  temperature", Note 1: the concept should not be used beyond ΔC = 5·10⁻² in the (u', 2/3 v'),
  i.e. CIE 1960 (u, v), diagram), nor outside the 1000-100 000 K range of the Ohno tables.
* The colour rendering and fidelity indices need a reference illuminant at the lamp's CCT; when
  the CCT is undefined, or outside 1000-25 000 K (where the CIE daylight series and the CIE 224
  reference are defined), Ra, R9, Rf and Rg are ``None``.
* CIE 13.3-1995 asks that the lamp's chromaticity lie within DC = 5.4·10⁻³ of its reference;
  beyond that Ra and R9 are still given, with a warning in ``figures.warnings``.

colour-science's own warnings are silenced; those that bear on a figure are kept in
``figures.warnings`` with the prefix ``colour-science:``. :meth:`LampFigures.to_json` gives the
record ``lampcast lamps --json`` prints (floats rounded as :data:`FIGURE_KEYS` says); the table,
the JSON text and the spectrum plots are in :mod:`render.output.lamp_sheet`.

References
----------
- Y. Ohno, "Practical use and calculation of CCT and Duv", *LEUKOS* 10(1), 2014 (2013 online).
- CIE 13.3-1995, *Method of measuring and specifying colour rendering properties of light
  sources* (Ra, R9, DC).
- CIE 224:2017, *Colour fidelity index for accurate scientific use* (Rf).
- ANSI/IES TM-30-18, *Method for evaluating light source color rendition* (Rf, Rg).
- CIE S 017:2020, *International Lighting Vocabulary*, 17-23-068 (limits of CCT).
- CIE 1951 scotopic and CIE 1924 photopic luminous efficiency functions (S/P ratio, LER).
- colour-science (``colour.temperature``, ``colour.colour_rendering_index``,
  ``colour.colour_fidelity_index``), the implementations used.
"""

from __future__ import annotations

import math
import warnings
from collections.abc import Mapping
from dataclasses import dataclass, field, fields
from functools import lru_cache
from typing import Any

import numpy as np

from render.colour.lamps import Lamp
from render.colour.observers import photopic, sp_ratio, tristimulus
from render.colour.spectra import BIN_WIDTH_NM, WAVELENGTHS_NM
from render.colour.tables import stored_lamp_figures

__all__ = [
    "BLUE_LIMIT_NM",
    "CCT_RANGE_OHNO_K",
    "CCT_RANGE_REFERENCE_K",
    "DC_LIMIT_CIE133",
    "DUV_LIMIT_CCT",
    "FIGURE_KEYS",
    "NOTCH_HALF_WIDTH_NM",
    "LampFigures",
    "computed_lamp_figures",
    "lamp_figures",
]

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


def _figure(unit: str = "", decimals: int | None = None) -> Any:
    """A field of :class:`LampFigures` with its unit and the decimals it is published with."""
    return field(metadata={"unit": unit, "decimals": decimals})


def _round(value: Any, decimals: int | None) -> Any:
    """A figure as published: ``None`` for NaN or infinity, floats rounded to ``decimals``
    (an int when 0), text unchanged."""
    if value is None or isinstance(value, (str, bool)):
        return value
    if isinstance(value, float) and not math.isfinite(value):
        return None
    if decimals is None:
        return value
    value = round(float(value), decimals)
    return int(value) if decimals == 0 else value


@dataclass(frozen=True)
class LampFigures:
    """Colour and photometric figures of one lamp (see the module docstring).

    Units: ``cct_K`` K, ``ler_lm_per_w`` lm per W of 380-780 nm optical power, ``peak_nm`` nm,
    fractions 0-1; the rest dimensionless. A figure that is not defined is ``None`` and
    ``undefined`` gives the reason; ``warnings`` lists caveats (validity limits, colour-science
    warnings that bear on a figure).
    """

    id: str = _figure()
    name: str = _figure()
    type: str = _figure()
    x: float = _figure(decimals=4)
    y: float = _figure(decimals=4)
    u: float = _figure(decimals=4)
    v: float = _figure(decimals=4)
    cct_K: float | None = _figure("K", 0)
    duv: float | None = _figure(decimals=4)
    ra: float | None = _figure(decimals=1)
    r9: float | None = _figure(decimals=1)
    cri_dc: float | None = _figure(decimals=4)
    rf_cie2017: float | None = _figure(decimals=1)
    rf_tm30: float | None = _figure(decimals=1)
    rg_tm30: float | None = _figure(decimals=1)
    sp_ratio: float | None = _figure(decimals=3)
    ler_lm_per_w: float | None = _figure("lm/W", 1)
    blue_fraction: float = _figure(decimals=4)
    notch_fraction: float = _figure(decimals=4)
    peak_nm: float = _figure("nm", 0)
    undefined: Mapping[str, str] = field(default_factory=dict)
    warnings: tuple[str, ...] = ()

    def to_json(self) -> dict[str, Any]:
        """The record ``lampcast lamps --json`` prints: the figures in :data:`FIGURE_KEYS` order,
        rounded to their decimals, ``None`` for undefined or non-finite ones (never NaN), then
        ``undefined`` (figure -> reason, in the same order) and ``warnings``."""
        out = {key: _round(getattr(self, key), decimals) for key, (_, decimals) in FIGURE_KEYS.items()}
        out["undefined"] = {k: self.undefined[k] for k in FIGURE_KEYS if k in self.undefined}
        out["warnings"] = list(self.warnings)
        return out

    @classmethod
    def from_json(cls, data: Mapping[str, Any]) -> LampFigures:
        """The record of a :meth:`to_json` result (figures as published, i.e. rounded)."""
        return cls(
            **{key: data.get(key) for key in FIGURE_KEYS},
            undefined=dict(data.get("undefined") or {}),
            warnings=tuple(data.get("warnings") or ()),
        )


#: The figures of :class:`LampFigures`, in output order, with (unit, decimals for JSON/table).
FIGURE_KEYS: dict[str, tuple[str, int | None]] = {
    f.name: (f.metadata["unit"], f.metadata["decimals"]) for f in fields(LampFigures) if "unit" in f.metadata
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


def computed_lamp_figures(spd: np.ndarray) -> tuple[dict, tuple[str, ...], dict]:
    """``(values, notes, undefined)`` of a gridded spectrum computed with colour-science, never
    the stored figures (``tools/make_colour_tables.py`` stores these for the built-in lamps)."""
    values, notes, undefined = _figures_of_spectrum(np.ascontiguousarray(spd, dtype=np.float64).tobytes())
    return dict(values), notes, dict(undefined)


def _relevant_warning(message: str) -> bool:
    """colour-science warnings worth passing on (not the routine ones about shapes/interpolation)."""
    routine = ("interval", "shape", "align", "interpolat", "extrapolat", "aligning")
    return not any(word in message.lower() for word in routine)


def lamp_figures(lamp: Lamp) -> LampFigures:
    """Colour and photometric figures of a lamp (see the module docstring).

    A built-in lamp's figures are read from ``render/data/colour/lamp_figures.json`` (computed
    with colour-science by ``tools/make_colour_tables.py``, keyed by the spectrum, so a changed
    spectrum is computed afresh); others are computed and cached on the spectrum, so computing
    a lamp twice costs about as much as once.
    """
    spd = np.ascontiguousarray(lamp.spd, dtype=np.float64)
    stored = stored_lamp_figures(spd)
    values, notes, undefined = stored if stored is not None else _figures_of_spectrum(spd.tobytes())
    figures = {key: values.get(key) for key in FIGURE_KEYS if key not in ("id", "name", "type")}
    return LampFigures(
        id=lamp.id, name=lamp.name, type=lamp.type, **figures, undefined=dict(undefined), warnings=tuple(notes)
    )
