"""Regenerate lampcast's material library (``materials/*.csv`` and ``materials/README.md``).

Reads the open reflectance data in the ``earthlib`` package (PyPI, MIT) and in colour-science
(CIE 13.3 test colour samples, BabelColor ColorChecker averages), picks the samples listed
below, completes each to 380-780 nm by the documented rule and writes one CSV per material.
The output is deterministic: running the script twice gives byte-identical files.

    pip install earthlib            # only needed here, not to run lampcast
    python tools/build_materials.py            # rewrite materials/
    python tools/build_materials.py --check    # exit 1 if materials/ differs from a fresh build
    python tools/build_materials.py --out DIR  # write elsewhere

Completion rules (also written into every file's ``# completion:`` line):

* earthlib spectra start at 400 nm (10 nm steps): rows at 380 and 390 nm repeat the 400 nm
  value (constant extension). This is the most conservative choice: it adds no trend that the
  data do not show. The 380-400 nm band carries about 0.002 % of the D65-weighted ȳ(λ) integral
  (0.3 % of z̄), so luminous reflectance does not depend on it.
* The BabelColor ColorChecker averages stop at 730 nm (10 nm steps): rows at 740-780 nm repeat
  the 730 nm value (constant extension; 730-780 nm carries about 0.005 % of the D65-weighted
  ȳ(λ) integral).
* The CIE 13.3 test colour samples cover 360-830 nm: only the 380-780 nm rows are kept.

Values are written with 6 decimals; nothing else is changed (no smoothing). A value outside
[0, 1] after completion would be clipped and the clipping stated; none of the chosen samples
needs it.
"""

from __future__ import annotations

import argparse
import difflib
import filecmp
import math
import sys
import tempfile
from dataclasses import dataclass
from pathlib import Path

import numpy as np

REPO = Path(__file__).resolve().parents[1]
DEFAULT_OUT = REPO / "materials"

# --- licences and sources ----------------------------------------------------------------------

LIC_UCSB = (
    "earthlib package: MIT (Copyright 2023 Christopher Anderson). Original measurement: UCSB "
    "Santa Barbara urban reflectance spectra (ASD field spectrometer, 2004), released by its "
    "authors as public information for research and education, with credit to the source"
)
LIC_JFSP = (
    "earthlib package: MIT (Copyright 2023 Christopher Anderson). Original measurement: Joint "
    "Fire Science Program spectral library (US federal research programme), as redistributed "
    "in earthlib"
)
LIC_USGS = (
    "earthlib package: MIT (Copyright 2023 Christopher Anderson). Original measurement: USGS "
    "spectral library (US Geological Survey, a US Government work in the public domain), as "
    "redistributed in earthlib"
)
LIC_PROSAIL = (
    "earthlib package: MIT (Copyright 2023 Christopher Anderson). Simulated by the earthlib "
    "author with the PROSAIL canopy model"
)
LIC_TCS = (
    "colour-science: BSD-3-Clause. Data: CIE 13.3-1995 test colour samples (CIE), as tabulated "
    "in NIST CQS 7.4 (Ohno & Davis 2008) and colour-science"
)
LIC_BABEL = (
    "colour-science: BSD-3-Clause. BabelColor ColorChecker data Copyright (C) 2004-2012 Danny "
    "Pascale (www.babelcolor.com), used by permission (colour-science notice)"
)
LIC_COMPUTED = "Computed by tools/build_materials.py (lampcast, MIT)"

UCSB_NOTE = (
    " UCSB sample codes: the first letter matches the earthlib class of each group (r road, "
    "s sidewalk, p parking lot, f roofing); the fifth letter (y/m/o) reads as age "
    "(young/medium/old) - our reading, not a documented key."
)

EARTHLIB_COMPLETION = (
    "Rows at 380 and 390 nm repeat the 400 nm value (constant extension; the source starts at "
    "400 nm). Rows 400-780 nm are the source's 10 nm samples, rounded to 6 decimals. No clipping "
    "needed."
)
BABEL_COMPLETION = (
    "Rows at 740-780 nm repeat the 730 nm value (constant extension; the source stops at 730 nm). "
    "Rows 380-730 nm are the source's 10 nm samples. No clipping needed."
)
TCS_COMPLETION = "None needed: the source covers 360-830 nm; its 5 nm rows within 380-780 nm are kept unchanged."


# --- the selection -----------------------------------------------------------------------------


@dataclass(frozen=True)
class Pick:
    """One material taken from earthlib: our id and text, and the sample it comes from."""

    id: str
    name: str
    category: str
    sample: str  # NAME in earthlib's metadata table (data/spectra.csv)
    expect: tuple[str, str]  # (LEVEL_2, LEVEL_3) the metadata must show
    licence: str
    description: str


EARTHLIB_PICKS: tuple[Pick, ...] = (
    # road surfaces
    Pick(
        "asphalt-new",
        "Asphalt road surface, new",
        "road",
        "rpaeye.010-",
        ("built", "road"),
        LIC_UCSB,
        "Dark, hydrocarbon-dominated asphalt carriageway (earthlib class 'road'; code rpae-y-, read as a young "
        "asphalt road). Chosen as a middle member of the darkest asphalt-road group; Herold & Roberts "
        "found asphalt brightening as it ages." + UCSB_NOTE,
    ),
    Pick(
        "asphalt-weathered",
        "Asphalt road surface, weathered",
        "road",
        "rpaemm.001-",
        ("built", "road"),
        LIC_UCSB,
        "Asphalt carriageway of middle age (earthlib class 'road'; code rpae-m-)." + UCSB_NOTE,
    ),
    Pick(
        "asphalt-worn",
        "Asphalt road surface, old and worn",
        "road",
        "rpaeop.004-",
        ("built", "road"),
        LIC_UCSB,
        "Old asphalt carriageway with exposed, lighter aggregate (earthlib class 'road'; code rpae-o-)." + UCSB_NOTE,
    ),
    Pick(
        "asphalt-car-park",
        "Asphalt car park surface",
        "road",
        "ppaemf.001-",
        ("built", "parking_lot"),
        LIC_UCSB,
        "Asphalt parking-lot surface (earthlib class 'parking_lot')." + UCSB_NOTE,
    ),
    Pick(
        "concrete-road",
        "Concrete road surface",
        "road",
        "rpcsye.001-",
        ("built", "road"),
        LIC_UCSB,
        "Concrete carriageway (earthlib class 'road'; code rpcs, read as paved concrete)." + UCSB_NOTE,
    ),
    # footways and kerbs
    Pick(
        "concrete-paving",
        "Concrete footway paving",
        "paving",
        "spcemg.001-",
        ("built", "sidewalk"),
        LIC_UCSB,
        "Concrete sidewalk of typical brightness for the group (earthlib class 'sidewalk')." + UCSB_NOTE,
    ),
    Pick(
        "concrete-paving-light",
        "Concrete footway paving, light",
        "paving",
        "spceye.001-",
        ("built", "sidewalk"),
        LIC_UCSB,
        "Light-toned concrete sidewalk, among the brightest of the group (earthlib class 'sidewalk')." + UCSB_NOTE,
    ),
    Pick(
        "concrete-kerb",
        "Concrete kerb (footway concrete stands in)",
        "kerb",
        "spcsmg.001-",
        ("built", "sidewalk"),
        LIC_UCSB,
        "earthlib has no kerb class; a concrete sidewalk sample stands in for a concrete kerb "
        "(earthlib class 'sidewalk')." + UCSB_NOTE,
    ),
    # paints
    Pick(
        "paint-road-white",
        "White road-marking paint",
        "paint",
        "trawyg.001-",
        ("built", "paint"),
        LIC_UCSB,
        "White traffic paint on asphalt in good condition (earthlib class 'paint'; flat, high spectrum; code "
        "traw read as traffic paint, white)." + UCSB_NOTE,
    ),
    Pick(
        "paint-road-white-worn",
        "White road-marking paint, worn",
        "paint",
        "trawmm.001-",
        ("built", "paint"),
        LIC_UCSB,
        "White traffic paint, darker and worn (earthlib class 'paint')." + UCSB_NOTE,
    ),
    Pick(
        "paint-road-yellow",
        "Yellow road-marking paint",
        "paint",
        "trayye.001-",
        ("built", "paint"),
        LIC_UCSB,
        "Yellow traffic paint (earthlib class 'paint'; reflectance rises steeply from 500 to 560 nm; code tray "
        "read as traffic paint, yellow)." + UCSB_NOTE,
    ),
    Pick(
        "paint-kerb-red",
        "Red kerb paint",
        "paint",
        "tccrye.001-",
        ("built", "paint"),
        LIC_UCSB,
        "Red paint on a concrete kerb (earthlib class 'paint'; reflectance low below 580 nm and high above "
        "620 nm; code tccr read as traffic paint on a concrete curb, red)." + UCSB_NOTE,
    ),
    Pick(
        "paint-road-blue",
        "Blue surface paint",
        "paint",
        "tpabmg.001-",
        ("built", "paint"),
        LIC_UCSB,
        "Blue paint on asphalt, as used for reserved parking bays (earthlib class 'paint'; peak near 450 nm)."
        + UCSB_NOTE,
    ),
    # masonry
    Pick(
        "brick",
        "Red brick",
        "masonry",
        "subrmg.001-",
        ("built", "sidewalk"),
        LIC_UCSB,
        "Red brick pavers in a footway (earthlib class 'sidewalk'; red-brown spectrum; code subr read as "
        "sidewalk, brick); stands in for brick walls too." + UCSB_NOTE,
    ),
    Pick(
        "concrete",
        "Concrete, structural",
        "masonry",
        "rbcsyg.005-",
        ("built", "bridge"),
        LIC_UCSB,
        "Concrete bridge surface (earthlib class 'bridge'); a generic grey concrete for walls and structures."
        + UCSB_NOTE,
    ),
    # roofs
    Pick(
        "roof-tile",
        "Clay roof tile, red",
        "roof",
        "fttrme.001-",
        ("built", "tile"),
        LIC_UCSB,
        "Red clay (terracotta) roof tile (earthlib class 'tile')." + UCSB_NOTE,
    ),
    Pick(
        "roof-tile-concrete",
        "Concrete roof tile, grey",
        "roof",
        "fsfnye.012-",
        ("built", "concrete_tile"),
        LIC_UCSB,
        "Grey concrete roof tile (earthlib class 'concrete_tile')." + UCSB_NOTE,
    ),
    Pick(
        "roof-shingle",
        "Composition (asphalt) roof shingle, grey",
        "roof",
        "fscemg.002-",
        ("built", "comp_shingle"),
        LIC_UCSB,
        "Grey composition shingle roof (earthlib class 'comp_shingle')." + UCSB_NOTE,
    ),
    Pick(
        "roof-shingle-wood",
        "Wood shingle roof",
        "roof",
        "fswnog.001-",
        ("built", "wood_shingle"),
        LIC_UCSB,
        "Weathered wood shingle roof (earthlib class 'wood_shingle')." + UCSB_NOTE,
    ),
    Pick(
        "roof-asphalt",
        "Asphalt (tar) roof",
        "roof",
        "frrkof.002-",
        ("built", "asphalt"),
        LIC_UCSB,
        "Dark asphalt roofing (earthlib class 'asphalt'; roofing code prefix f)." + UCSB_NOTE,
    ),
    # metal and glass
    Pick(
        "metal-galvanised",
        "Metal sheet, light grey (galvanised steel stand-in)",
        "metal",
        "fozkyg.001-",
        ("built", "metal"),
        LIC_UCSB,
        "Flat, light-grey metal roofing sheet (earthlib class 'metal'); stands in for galvanised steel "
        "columns and poles. Field-measured diffuse reflectance; metal's specular part is not modelled." + UCSB_NOTE,
    ),
    Pick(
        "metal-weathered",
        "Metal sheet, weathered",
        "metal",
        "foznof.002-",
        ("built", "metal"),
        LIC_UCSB,
        "Old metal roofing sheet whose reflectance rises towards red (earthlib class 'metal')." + UCSB_NOTE,
    ),
    Pick(
        "metal-painted-dark",
        "Metal sheet, dark (dark-painted furniture stand-in)",
        "metal",
        "fozkmg.001-",
        ("built", "metal"),
        LIC_UCSB,
        "Dark, slightly bluish-grey metal roofing sheet (earthlib class 'metal'; whether painted is not "
        "recorded); stands in for dark-painted street furniture." + UCSB_NOTE,
    ),
    Pick(
        "manhole-cover",
        "Cast-iron manhole cover",
        "metal",
        "mozkmm.001-",
        ("built", "manhole"),
        LIC_UCSB,
        "Manhole cover in a street (earthlib class 'manhole'; flat grey spectrum)." + UCSB_NOTE,
    ),
    Pick(
        "glass-roof",
        "Glass roofing (field spectrum)",
        "glass",
        "folwmm.001-",
        ("built", "glass"),
        LIC_UCSB,
        "Field spectrum of a glass roof (earthlib class 'glass'). Its reflectance (about 0.7) is far above "
        "the about 0.08 of a clean clear pane (common practice, no source) and must include light from "
        "under the glass or a coating; not for window panes (use glass-clear)." + UCSB_NOTE,
    ),
    # wood and vegetation
    Pick(
        "wood",
        "Wood, weathered",
        "wood",
        "oldwood",
        ("npv", "wood"),
        LIC_JFSP,
        "Old, grey-brown weathered wood (earthlib class 'wood'; JFSP sample name 'oldwood'); for doors, "
        "benches and fences.",
    ),
    Pick(
        "wood-cut",
        "Wood, freshly cut",
        "wood",
        "crosscut",
        ("npv", "wood"),
        LIC_JFSP,
        "Freshly cut wood cross-section (earthlib class 'wood'; JFSP sample name 'crosscut').",
    ),
    Pick(
        "bark",
        "Tree bark",
        "vegetation",
        "coulbark",
        ("npv", "bark"),
        LIC_JFSP,
        "Tree bark (earthlib class 'bark'; JFSP sample name 'coulbark'); for tree trunks.",
    ),
    Pick(
        "grass",
        "Grass (simulated canopy)",
        "vegetation",
        "v-LAI-2.5-LMA-0.012-CHL-40.5-N-1.9",
        ("vegetation", "canopy"),
        LIC_PROSAIL,
        "SIMULATED, not measured: a green canopy modelled with PROSAIL (leaf area index 2.5, chlorophyll "
        "40.5, leaf mass per area 0.012, leaf structure N 1.9, as the sample name says); earthlib has no "
        "measured green grass. Stands in for lawns and verges.",
    ),
    Pick(
        "foliage",
        "Tree foliage (simulated canopy)",
        "vegetation",
        "v-LAI-4.2-LMA-0.012-CHL-37.0-N-1.8",
        ("vegetation", "canopy"),
        LIC_PROSAIL,
        "SIMULATED, not measured: a dense green canopy modelled with PROSAIL (leaf area index 4.2, chlorophyll "
        "37.0, leaf mass per area 0.012, leaf structure N 1.8, as the sample name says). For tree crowns and "
        "hedges.",
    ),
    Pick(
        "grass-dry",
        "Dry grass with some green",
        "vegetation",
        "Grass_dry.9+.1green",
        ("npv", "litter"),
        LIC_USGS,
        "Measured dry grass, read from the sample name as about 90 % dry and 10 % green (earthlib class "
        "'litter', source notes 'usgs').",
    ),
    # soil and stone
    Pick(
        "soil",
        "Garden soil",
        "soil",
        "lrxnxx.009-",
        ("bare", "soil"),
        LIC_UCSB,
        "Bare urban soil from Santa Barbara (earthlib class 'soil').",
    ),
    Pick(
        "soil-dirt",
        "Bare earth path",
        "soil",
        "lcxnxx.001-",
        ("bare", "dirt"),
        LIC_UCSB,
        "Bare compacted dirt (earthlib class 'dirt').",
    ),
    Pick(
        "sand",
        "Sand",
        "soil",
        "lbxsxx.003-",
        ("bare", "sand"),
        LIC_UCSB,
        "Beach sand from Santa Barbara (earthlib class 'sand').",
    ),
    Pick(
        "gravel",
        "Gravel",
        "stone",
        "mugexx.001-",
        ("bare", "gravel"),
        LIC_UCSB,
        "Loose gravel surface (earthlib class 'gravel', LEVEL_2 'bare').",
    ),
)

#: CIE 13.3 test colour samples: our id, name (ISCC-NBS style names from memory), and use hints.
TCS_PICKS: tuple[tuple[str, str, str, str], ...] = (
    ("TCS01", "tcs01-greyish-red", "Light greyish red (CIE 13.3 TCS01)", "painted objects, doors"),
    ("TCS02", "tcs02-greyish-yellow", "Dark greyish yellow (CIE 13.3 TCS02)", "painted objects, stone-coloured render"),
    ("TCS03", "tcs03-yellow-green", "Strong yellow green (CIE 13.3 TCS03)", "painted objects, clothing"),
    ("TCS04", "tcs04-yellowish-green", "Moderate yellowish green (CIE 13.3 TCS04)", "painted objects, clothing"),
    ("TCS05", "tcs05-bluish-green", "Light bluish green (CIE 13.3 TCS05)", "painted objects, clothing"),
    ("TCS06", "tcs06-light-blue", "Light blue (CIE 13.3 TCS06)", "painted objects, signs, clothing"),
    ("TCS07", "tcs07-light-violet", "Light violet (CIE 13.3 TCS07)", "painted objects, clothing"),
    ("TCS08", "tcs08-reddish-purple", "Light reddish purple (CIE 13.3 TCS08)", "painted objects, clothing"),
    ("TCS09", "tcs09-strong-red", "Strong red (CIE 13.3 TCS09, the R9 sample)", "cars, signs, bins"),
    ("TCS10", "tcs10-strong-yellow", "Strong yellow (CIE 13.3 TCS10)", "cars, signs, high-visibility items"),
    ("TCS11", "tcs11-strong-green", "Strong green (CIE 13.3 TCS11)", "bins, signs, cars"),
    ("TCS12", "tcs12-strong-blue", "Strong blue (CIE 13.3 TCS12)", "cars, signs, bins"),
    ("TCS13", "tcs13-complexion", "Light yellowish pink, light complexion (CIE 13.3 TCS13)", "faces and hands"),
    ("TCS14", "tcs14-leaf-green", "Moderate olive green, leaf green (CIE 13.3 TCS14)", "foliage-coloured objects"),
)

#: BabelColor ColorChecker averages: (patch name in colour-science, our id, name, use hints).
CHECKER_PICKS: tuple[tuple[str, str, str, str], ...] = (
    ("red", "object-red", "Red paint (ColorChecker red)", "cars, bins, signs, clothing"),
    ("green", "object-green", "Green paint (ColorChecker green)", "bins, shop fascias, clothing"),
    ("blue", "object-blue", "Blue paint (ColorChecker blue)", "cars, signs, clothing"),
    ("yellow", "object-yellow", "Yellow paint (ColorChecker yellow)", "signs, bins, high-visibility items"),
    ("magenta", "object-magenta", "Magenta paint (ColorChecker magenta)", "clothing, signs"),
    ("cyan", "object-cyan", "Cyan paint (ColorChecker cyan)", "signs, clothing"),
    ("orange", "object-orange", "Orange paint (ColorChecker orange)", "clothing, cones, signs"),
    ("purple", "object-purple", "Purple paint (ColorChecker purple)", "clothing, doors"),
    ("moderate red", "object-moderate-red", "Moderate red paint (ColorChecker moderate red)", "cars, doors"),
    ("purplish blue", "object-purplish-blue", "Purplish blue paint (ColorChecker purplish blue)", "cars, clothing"),
    ("dark skin", "skin-dark", "Dark skin tone (ColorChecker dark skin patch)", "faces and hands"),
    ("light skin", "skin-light", "Light skin tone (ColorChecker light skin patch)", "faces and hands"),
    ("white 9.5 (.05 D)", "object-white", "White paint (ColorChecker white 9.5)", "signs, lamp covers, clothing"),
    ("neutral 8 (.23 D)", "object-light-grey", "Light grey paint (ColorChecker neutral 8)", "cars, render"),
    ("neutral 6.5 (.44 D)", "object-mid-grey", "Mid grey paint (ColorChecker neutral 6.5)", "cars, street furniture"),
    ("neutral 5 (.70 D)", "object-grey", "Grey paint (ColorChecker neutral 5)", "cars, street furniture"),
    ("neutral 3.5 (1.05 D)", "object-dark-grey", "Dark grey paint (ColorChecker neutral 3.5)", "cars, clothing"),
    ("black 2 (1.5 D)", "object-black", "Black paint (ColorChecker black 2)", "cars, tyres, clothing"),
)

#: Stand-ins built from a ColorChecker patch for surfaces without an open measured spectrum.
STANDIN_PICKS: tuple[tuple[str, str, str, str, str], ...] = (
    (
        "black 2 (1.5 D)",
        "rubber-black",
        "Black rubber (stand-in)",
        "rubber",
        "Stand-in: the source packages hold no measured tyre or rubber spectrum; this is the ColorChecker "
        "black 2 patch (same data as object-black), a neutral black of luminous reflectance about 0.03.",
    ),
    (
        "neutral 3.5 (1.05 D)",
        "fabric-dark",
        "Dark fabric (stand-in)",
        "fabric",
        "Stand-in: the source packages hold no measured fabric spectrum; this is the ColorChecker neutral 3.5 "
        "patch (same data as object-dark-grey), a neutral dark grey for dark clothing.",
    ),
)

# N-BK7 Sellmeier coefficients (SCHOTT optical glass data sheet; from memory): B in 1, C in µm².
NBK7_B = (1.03961212, 0.231792344, 1.01046945)
NBK7_C = (0.00600069867, 0.0200179144, 103.560653)


# --- reading the sources -----------------------------------------------------------------------


def _fmt_wl(w: float) -> str:
    return f"{round(float(w), 6):g}"


def _fmt_val(v: float) -> str:
    s = f"{float(v):.6f}"
    return "0.000000" if s == "-0.000000" else s


def earthlib_rows(pick: Pick, lib, names: list[str], meta) -> tuple[list[tuple[float, float]], dict[str, str]]:
    """Rows (380-780 nm, completed) and header extras for one earthlib sample."""
    idx = [i for i, n in enumerate(names) if n == pick.sample]
    if len(idx) != 1:
        raise SystemExit(f"{pick.id}: earthlib sample {pick.sample!r} found {len(idx)} times; expected once")
    i = idx[0]
    row = meta.iloc[i]
    if (row["LEVEL_2"], row["LEVEL_3"]) != pick.expect:
        raise SystemExit(f"{pick.id}: {pick.sample!r} is {row['LEVEL_2']}/{row['LEVEL_3']}, expected {pick.expect}")
    sli_name = lib.names[i].strip()
    if sli_name != pick.sample:
        raise SystemExit(f"{pick.id}: spectral library name {sli_name!r} differs from the metadata's {pick.sample!r}")
    wl = np.round(np.asarray(lib.sensor.band_centers, dtype=np.float64) * 1000.0, 3)
    if lib.sensor.wavelength_unit.lower() not in ("micrometers", "micrometer", "um", "µm"):
        raise SystemExit(f"unexpected earthlib wavelength unit {lib.sensor.wavelength_unit!r}")
    values = np.asarray(lib.data[i], dtype=np.float64)
    keep = wl <= 780.0 + 1e-9
    wl, values = wl[keep], values[keep]
    if wl[0] != 400.0 or not np.all(np.diff(wl) == 10.0) or wl[-1] != 780.0:
        raise SystemExit(f"{pick.id}: unexpected earthlib sampling {wl[0]}..{wl[-1]}")
    rows = [(380.0, values[0]), (390.0, values[0])] + list(zip(wl.tolist(), values.tolist()))
    _check_unit_interval(pick.id, rows)
    metadata = ", ".join(f"{k}={row[k]}" for k in ("LEVEL_1", "LEVEL_2", "LEVEL_3", "LEVEL_4", "SOURCE", "NOTES"))
    extra = {
        "source_metadata": f"earthlib data/spectra.csv row {i} (0-based, = full_library index): {metadata}",
    }
    full_hi = float(np.round(float(lib.sensor.band_centers[-1]) * 1000.0, 3))
    extra["_measured"] = f"400-{full_hi:g}"
    extra["_sample_id"] = f"{pick.sample} (earthlib full_library index {i})"
    return rows, extra


def _check_unit_interval(mid: str, rows) -> None:
    bad = [(w, v) for w, v in rows if not (0.0 <= v <= 1.0) or not math.isfinite(v)]
    if bad:
        raise SystemExit(f"{mid}: values outside [0, 1] {bad[:3]}; add a stated clipping rule before using it")


def tcs_rows(name: str) -> list[tuple[float, float]]:
    from colour.quality import SDS_TCS

    sd = SDS_TCS["CIE 1995"][name]
    rows = [(float(w), float(v)) for w, v in zip(sd.wavelengths, sd.values) if 380.0 <= w <= 780.0]
    if rows[0][0] != 380.0 or rows[-1][0] != 780.0:
        raise SystemExit(f"{name}: unexpected range")
    _check_unit_interval(name, rows)
    return rows


def checker_rows(patch: str) -> list[tuple[float, float]]:
    from colour.characterisation import SDS_COLOURCHECKERS

    sd = SDS_COLOURCHECKERS["BabelColor Average"][patch]
    rows = [(float(w), float(v)) for w, v in zip(sd.wavelengths, sd.values)]
    if rows[0][0] != 380.0 or rows[-1][0] != 730.0:
        raise SystemExit(f"{patch}: unexpected range {rows[0][0]}..{rows[-1][0]}")
    last = rows[-1][1]
    rows += [(w, last) for w in (740.0, 750.0, 760.0, 770.0, 780.0)]
    _check_unit_interval(patch, rows)
    return rows


def glass_rows() -> list[tuple[float, float]]:
    """Normal-incidence reflectance of a clear, non-absorbing glass slab, 380-780 nm, 5 nm.

    Fresnel: R = ((n-1)/(n+1))^2 per surface; incoherent multiple reflections between the two
    faces of a non-absorbing slab give R_slab = 2R/(1+R). n(λ) from the N-BK7 Sellmeier formula.
    """
    out = []
    for w in range(380, 781, 5):
        lam2 = (w / 1000.0) ** 2
        n = math.sqrt(1.0 + sum(b * lam2 / (lam2 - c) for b, c in zip(NBK7_B, NBK7_C)))
        r = ((n - 1.0) / (n + 1.0)) ** 2
        out.append((float(w), 2.0 * r / (1.0 + r)))
    return out


# --- writing -----------------------------------------------------------------------------------


def render_csv(header: dict[str, str], rows: list[tuple[float, float]]) -> str:
    lines = []
    for key, value in header.items():
        text = " ".join(str(value).split())  # one line, single spaces
        lines.append(f"# {key}: {text}")
    lines.append("wavelength_nm,reflectance")
    lines += [f"{_fmt_wl(w)},{_fmt_val(v)}" for w, v in rows]
    return "\n".join(lines) + "\n"


def build_all() -> dict[str, str]:
    """Every material file's text, keyed by file name, in id order."""
    import colour
    import earthlib

    el_version = earthlib.__version__
    cs_version = colour.__version__
    lib = earthlib.full_library
    meta = lib.metadata
    names = [str(n).strip() for n in meta["NAME"]]
    files: dict[str, str] = {}

    def add(mid: str, header: dict[str, str], rows) -> None:
        if f"{mid}.csv" in files:
            raise SystemExit(f"duplicate id {mid}")
        header = {"id": mid, **header, "generated_by": "tools/build_materials.py"}
        files[f"{mid}.csv"] = render_csv(header, rows)

    for pick in EARTHLIB_PICKS:
        rows, extra = earthlib_rows(pick, lib, names, meta)
        add(
            pick.id,
            {
                "name": pick.name,
                "description": pick.description,
                "category": pick.category,
                "source": f"earthlib {el_version} (PyPI), full_library (data/spectra.sli)",
                "sample_id": extra["_sample_id"],
                "licence": pick.licence,
                "measured_range_nm": extra["_measured"],
                "completion": EARTHLIB_COMPLETION,
                "source_metadata": extra["source_metadata"],
            },
            rows,
        )

    from colour.quality.datasets.tcs import APPROXIMATE_MUNSELL_NOTATIONS_TCS_CIE1995 as MUNSELL

    for key, mid, name, use in TCS_PICKS:
        add(
            mid,
            {
                "name": name,
                "description": (
                    f"CIE 13.3-1995 test colour sample {key} (approximate Munsell notation {MUNSELL[key]}), a "
                    f"measured Munsell paint chip used for colour rendering. Typical use: {use}. Colour name from "
                    "memory; data from colour-science."
                ),
                "category": "object paint",
                "source": f"colour-science {cs_version} SDS_TCS['CIE 1995'] (CIE 13.3 test colour sample {int(key[3:])})",
                "sample_id": key,
                "licence": LIC_TCS,
                "measured_range_nm": "360-830",
                "completion": TCS_COMPLETION,
            },
            tcs_rows(key),
        )

    for patch, mid, name, use in CHECKER_PICKS:
        add(
            mid,
            {
                "name": name,
                "description": (
                    f"Average of 30 ColorChecker Classic charts measured by BabelColor, patch '{patch}' (a matte "
                    f"paint patch). Typical use: {use}."
                ),
                "category": "object paint",
                "source": f"colour-science {cs_version} BabelColor Average (SDS_COLOURCHECKERS['BabelColor Average'])",
                "sample_id": patch,
                "licence": LIC_BABEL,
                "measured_range_nm": "380-730",
                "completion": BABEL_COMPLETION,
            },
            checker_rows(patch),
        )

    for patch, mid, name, category, description in STANDIN_PICKS:
        add(
            mid,
            {
                "name": name,
                "description": description,
                "category": category,
                "source": f"colour-science {cs_version} BabelColor Average (SDS_COLOURCHECKERS['BabelColor Average'])",
                "sample_id": patch,
                "licence": LIC_BABEL,
                "measured_range_nm": "380-730",
                "completion": BABEL_COMPLETION,
            },
            checker_rows(patch),
        )

    add(
        "glass-clear",
        {
            "name": "Clear window glass (computed)",
            "description": (
                "COMPUTED, not measured: normal-incidence reflectance of a clear, non-absorbing glass pane, "
                "Fresnel R = ((n-1)/(n+1))^2 per face and 2R/(1+R) for the two faces with multiple reflections; "
                "n(lambda) from the SCHOTT N-BK7 Sellmeier formula (n_d = 1.5168) as a proxy for soda-lime float "
                "glass (n_d about 1.52). Treats the pane as a diffuse reflector and ignores light coming through "
                "it from behind. For windows and glazing."
            ),
            "category": "glass",
            "source": "computed: Fresnel equations with the SCHOTT N-BK7 Sellmeier dispersion formula",
            "sample_id": "N-BK7 Sellmeier B = 1.03961212, 0.231792344, 1.01046945; C = 0.00600069867, 0.0200179144, 103.560653 um^2",
            "licence": LIC_COMPUTED,
            "measured_range_nm": "380-780",
            "completion": "None needed: computed every 5 nm over 380-780 nm.",
        },
        glass_rows(),
    )

    return dict(sorted(files.items()))


# --- README ------------------------------------------------------------------------------------

README_HEAD = """\
# Materials

*This file is generated by `tools/build_materials.py`; edit the script, not this file.*

Every surface in a lampcast scene refers to one of these materials by id (`lampcast materials`
lists them, `--json` gives every field, `--plots` draws each spectrum). A material is a diffuse
reflectance spectrum with its provenance, one CSV file per material.

## File format

```
# id: asphalt-new                      (= file name without .csv; lowercase, digits, hyphens)
# name: Asphalt road surface, new
# description: what the surface is, how the sample was chosen
# category: road                       (road, paving, kerb, paint, masonry, roof, metal, glass,
#                                        wood, vegetation, soil, stone, object paint, fabric, ...)
# source: dataset and version
# sample_id: the sample's identifier in the dataset
# licence: licence of the data
# measured_range_nm: 400-2450          (range of the original measurement)
# completion: how the rows were extended to cover 380-780 nm
# ...: further keys are kept verbatim (e.g. source_metadata, generated_by)
wavelength_nm,reflectance
380,0.047079
390,0.047079
400,0.047079
...
```

Rules checked when a file is read (`render.colour.materials.load_material_csv`; each mistake is reported
with the file and line):

- every line before the column row is a `# key: value` line (blank lines are ignored);
- all nine keys above present, none twice, none empty; `id` equal to the file name;
- the column row `wavelength_nm,reflectance`, then rows of two finite numbers, no comments
  between them;
- wavelengths strictly increasing (no duplicates), first row at or below 380 nm, last at or above
  780 nm, at least 9 rows, no gap over 50 nm inside 380-780 nm;
- reflectances in [0, 1]; values at most 0.005 outside (measurement noise) are clipped to 0 or
  1, anything further out is an error.

**Sampling.** Files keep their source's sampling (10 nm for earthlib and the ColorChecker, 5 nm
for the CIE test colour samples); nothing is resampled or smoothed when a file is built. When a
file is read, the samples are joined by straight lines and averaged over each 1 nm bin of the
lampcast grid (`render.colour.spectra.bin_mean`). Keeping the source samples makes every file checkable
against its source, value for value.

**Completion.** Where a source does not cover 380-780 nm, the missing end is filled by holding the
last measured value (constant extension): earthlib spectra start at 400 nm, so the 380 and
390 nm rows repeat the 400 nm value; the BabelColor ColorChecker averages stop at 730 nm, so the
740-780 nm rows repeat the 730 nm value. This adds no trend the data do not show. The filled
bands carry about 0.002 % (380-400 nm) and 0.005 % (730-780 nm) of the D65-weighted ȳ(λ)
integral, so the luminous reflectance does not depend on the choice; 380-400 nm carries 0.3 % of
the z̄ integral, so the colour of strongly violet surfaces can, slightly.

**Luminous reflectance** in the table below and in `lampcast materials` is the photopic value
Y/100 under CIE standard illuminant D65 with the CIE 1931 2° observer.

## Other folders

`LAMPCAST_MATERIALS=/path/to/folder` makes lampcast read its materials from that folder instead
of this one (copy this folder and add your own CSV files to extend the library).

## Regenerating

```sh
pip install earthlib                     # only for this; lampcast itself does not need it
python tools/build_materials.py          # rewrites materials/*.csv and this README
python tools/build_materials.py --check  # exits 1 if the committed files differ from a fresh build
```

The build is deterministic (same inputs, byte-identical files).

## Sources and licences

- **earthlib** (PyPI, MIT, Christopher Anderson): a merged spectral library, 400-2450 nm at
  10 nm. The urban samples come from the UCSB Santa Barbara urban reflectance spectra (ASD field
  spectrometer; Herold, Roberts, Gardner & Dennison 2004, Remote Sensing of Environment 91,
  "Spectrometry for urban area remote sensing" - citation from memory), which their authors
  publish for research and education with credit to the source. Wood and bark come from the Joint
  Fire Science Program library, the dry grass from the USGS spectral library. The green
  vegetation canopies (`grass`, `foliage`) are **simulated** with PROSAIL by the earthlib author,
  not measured. Each file gives the exact sample name and its row in earthlib's metadata table.
  Our reading of the UCSB sample codes (first letter r road, s sidewalk, p parking lot, f roofing,
  matching earthlib's classes; fifth letter y/m/o as young/medium/old) is an inference, not a
  documented key; the choice between new and worn asphalt also follows the measured brightness
  (Herold & Roberts, "Mapping asphalt road conditions with hyperspectral remote sensing": asphalt
  brightens as it ages).
- **CIE 13.3-1995 test colour samples** TCS01-TCS14 (colour-science `SDS_TCS['CIE 1995']`,
  BSD-3-Clause; values as in NIST CQS 7.4): Munsell paint chips, 5 nm. Colour names are from
  memory; the Munsell notations are colour-science's.
- **BabelColor ColorChecker averages** (colour-science `SDS_COLOURCHECKERS['BabelColor Average']`,
  BSD-3-Clause; data Copyright (C) 2004-2012 Danny Pascale, used by permission): averages of 30
  ColorChecker Classic charts, 380-730 nm at 10 nm. The skin patches are paint imitations of
  skin, not skin.
- **Stand-ins**: `rubber-black` and `fabric-dark` repeat ColorChecker patches because the
  sources hold no measured rubber or fabric; `concrete-kerb`, `metal-galvanised` and
  `metal-painted-dark` are measured samples standing in for a related surface; `glass-clear` is
  computed (Fresnel reflectance of a clear pane with the N-BK7 dispersion formula). Their
  descriptions say so.

## The materials

"""


def render_readme(directory: Path) -> str:
    if str(REPO) not in sys.path:
        sys.path.insert(0, str(REPO))
    from render.colour.materials import material_library
    from render.output.material_sheet import material_table

    short_licence = {
        LIC_UCSB: "MIT (earthlib); UCSB data, credit the source",
        LIC_JFSP: "MIT (earthlib); JFSP data",
        LIC_USGS: "MIT (earthlib); USGS data, public domain",
        LIC_PROSAIL: "MIT (earthlib); simulated",
        LIC_TCS: "BSD-3-Clause (colour-science); CIE data",
        LIC_BABEL: "BSD-3-Clause (colour-science); BabelColor data by permission",
        LIC_COMPUTED: "MIT (computed here)",
    }
    rows = material_table(material_library(directory))
    out = [README_HEAD.rstrip("\n") + "\n"]
    out.append(f"{len(rows)} materials. Y(D65): photopic luminous reflectance under D65.\n")
    out.append("| id | category | Y(D65) | source | sample id | measured nm | licence |")
    out.append("|---|---|---:|---|---|---|---|")
    for r in rows:
        lo, hi = r["measured_range_nm"]
        src = r["source"].split(" (")[0] if not r["source"].startswith("colour-science 0.4.7 SDS_TCS") else r["source"]
        cells = [
            f"`{r['id']}`",
            r["category"],
            f"{r['luminous_reflectance_d65']:.3f}",
            src,
            r["sample_id"],
            f"{lo:g}-{hi:g}",
            short_licence.get(r["licence"], r["licence"]),
        ]
        out.append("| " + " | ".join(c.replace("|", "/") for c in cells) + " |")
    out.append("")
    return "\n".join(out)


# --- main --------------------------------------------------------------------------------------


def write_tree(out: Path, files: dict[str, str]) -> None:
    out.mkdir(parents=True, exist_ok=True)
    for stale in sorted(out.glob("*.csv")):
        if stale.name not in files:
            stale.unlink()
    for name, text in files.items():
        (out / name).write_bytes(text.encode("utf-8"))
    (out / "README.md").write_bytes(render_readme(out).encode("utf-8"))


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--out", type=Path, default=DEFAULT_OUT, help="folder to write (default: materials/)")
    parser.add_argument("--check", action="store_true", help="build into a temporary folder and compare with --out")
    args = parser.parse_args(argv)

    files = build_all()
    if not args.check:
        write_tree(args.out, files)
        print(f"wrote {len(files)} materials and README.md to {args.out}")
        return 0

    with tempfile.TemporaryDirectory() as tmp:
        fresh = Path(tmp)
        write_tree(fresh, files)
        wanted = sorted(p.name for p in fresh.iterdir())
        have = sorted(p.name for p in args.out.glob("*.csv")) + (
            ["README.md"] if (args.out / "README.md").exists() else []
        )
        differ = [
            n for n in wanted if not (args.out / n).exists() or not filecmp.cmp(fresh / n, args.out / n, shallow=False)
        ]
        extra = sorted(set(have) - set(wanted))
        for n in differ[:5]:
            a = (args.out / n).read_text(encoding="utf-8").splitlines() if (args.out / n).exists() else []
            b = (fresh / n).read_text(encoding="utf-8").splitlines()
            sys.stdout.writelines(
                line + "\n"
                for line in list(difflib.unified_diff(a, b, f"{args.out}/{n}", f"fresh/{n}", lineterm=""))[:20]
            )
    if differ or extra:
        print(f"materials differ from a fresh build: {len(differ)} changed or missing, {len(extra)} extra {extra}")
        return 1
    print(f"{len(wanted)} files match a fresh build")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
