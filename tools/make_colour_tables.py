"""Write the colour tables lampcast reads at run time (``render/data/colour/``) from colour-science.

    python tools/make_colour_tables.py [--check]

Writes, with every number in Python's shortest round-trip repr (reading it back gives the same
double):

* ``observers.csv`` -- CIE 1931 2° x̄ȳz̄, CIE 1924 V(λ) and CIE 1951 V'(λ) taken onto the grid's
  bin centres (380-780 nm, 1 nm) with colour-science's ``align``;
* ``spectra.csv`` -- each colour-science table the lamp catalogue (``render/data/lamps/
  catalogue.toml``) builds a lamp from, and CIE D65, at the table's own wavelengths;
* ``lamp_figures.json`` -- the figures of every built-in lamp computed with colour-science
  (:func:`render.colour.lamp_figures.computed_lamp_figures`), keyed by the SHA-256 of the
  lamp's spectrum (:func:`render.colour.tables.spectrum_key`);
* ``naming_prototypes.json`` -- CIELAB of the colour-naming prototypes
  (:func:`render.analysis.naming.munsell_to_lab` of each Munsell notation, with the notation).

Run it after changing the catalogue, the lamp figures or the colour-science version; ``--check``
compares with the committed files instead of writing (exit status 1 if they differ).
``tests/test_colour_tables.py`` checks the committed files against colour-science too.
"""

from __future__ import annotations

import argparse
import json
import math
import sys
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parents[1]
if str(ROOT) not in sys.path:
    sys.path.insert(0, str(ROOT))

from render.colour.spectra import BIN_WIDTH_NM, WAVELENGTHS_NM  # noqa: E402
from render.colour.tables import OBSERVER_COLUMNS, spectrum_key  # noqa: E402

OUT = ROOT / "render" / "data" / "colour"


def observer_functions() -> dict[str, np.ndarray]:
    """The observer functions on the grid, by column name of ``observers.csv``."""
    import colour
    from colour.colorimetry import SDS_LEFS_PHOTOPIC, SDS_LEFS_SCOTOPIC

    shape = colour.SpectralShape(float(WAVELENGTHS_NM[0]), float(WAVELENGTHS_NM[-1]), BIN_WIDTH_NM)

    def on_grid(sd) -> np.ndarray:
        return np.asarray(sd.copy().align(shape).values, dtype=np.float64)

    xyz = on_grid(colour.MSDS_CMFS["CIE 1931 2 Degree Standard Observer"])
    return {
        "x_bar": xyz[:, 0],
        "y_bar": xyz[:, 1],
        "z_bar": xyz[:, 2],
        "v_photopic": on_grid(SDS_LEFS_PHOTOPIC["CIE 1924 Photopic Standard Observer"]),
        "v_scotopic": on_grid(SDS_LEFS_SCOTOPIC["CIE 1951 Scotopic Standard Observer"]),
    }


def stored_datasets() -> list[tuple[str, str]]:
    """``(attribute, key)`` of every colour-science table stored: the catalogue's, then D65."""
    from render.colour.lamps.catalogue import catalogue_entries

    out: list[tuple[str, str]] = []
    for entry in catalogue_entries().values():
        if entry.dataset is not None and entry.dataset not in out:
            out.append(entry.dataset)
    if ("SDS_ILLUMINANTS", "D65") not in out:
        out.append(("SDS_ILLUMINANTS", "D65"))
    return out


def colour_science_spectrum(dataset: str, key: str) -> tuple[np.ndarray, np.ndarray]:
    import colour

    sd = getattr(colour, dataset)[key]
    return np.asarray(sd.wavelengths, dtype=np.float64), np.asarray(sd.values, dtype=np.float64)


def _header(what: str) -> str:
    import colour

    return (
        f"# {what}\n# Written by tools/make_colour_tables.py from colour-science {colour.__version__}; "
        "do not edit by hand.\n"
    )


def observers_csv() -> str:
    functions = observer_functions()
    lines = [
        _header("CIE observer functions at the grid's bin centres (CIE 015:2018; CIE 1924 V, CIE 1951 V')"),
        ",".join(("wavelength_nm", *OBSERVER_COLUMNS)) + "\n",
    ]
    for i, w in enumerate(WAVELENGTHS_NM):
        lines.append(",".join(repr(float(x)) for x in (w, *(functions[c][i] for c in OBSERVER_COLUMNS))) + "\n")
    return "".join(lines)


def spectra_csv() -> str:
    lines = [
        _header("Illuminant and lamp spectra used by lampcast (CIE 015:2018 tables, NIST CQS 7.4)"),
        "dataset,key,wavelength_nm,value\n",
    ]
    for dataset, key in stored_datasets():
        if "," in key or "\n" in key:
            raise ValueError(f"table key {key!r} cannot be stored in a CSV row")
        for w, v in zip(*colour_science_spectrum(dataset, key)):
            lines.append(f"{dataset},{key},{float(w)!r},{float(v)!r}\n")
    return "".join(lines)


def lamp_figures_json() -> str:
    import colour

    from render.colour.lamp_figures import computed_lamp_figures
    from render.colour.lamps import builtin_lamps

    lamps = {}
    for lamp in builtin_lamps().values():
        values, notes, undefined = computed_lamp_figures(lamp.spd)
        lamps[spectrum_key(lamp.spd)] = {"id": lamp.id, "values": values, "notes": list(notes), "undefined": undefined}
    document = {
        "about": "Figures of the built-in lamps computed with colour-science (render.colour.lamp_figures), "
        "keyed by the SHA-256 of each lamp's spectrum; written by tools/make_colour_tables.py.",
        "colour_science": colour.__version__,
        "lamps": lamps,
    }
    return json.dumps(document, indent=1, ensure_ascii=False, allow_nan=False, sort_keys=False) + "\n"


def naming_prototypes_json() -> str:
    import colour

    from render.analysis.naming import PROTOTYPES_MUNSELL, munsell_to_lab

    prototypes = {
        term: {"munsell": notation, "lab": [float(v) for v in munsell_to_lab(notation)]}
        for term, notation in PROTOTYPES_MUNSELL.items()
    }
    document = {
        "about": "CIELAB (D65) of the colour-naming prototypes' Munsell notations computed with colour-science "
        "(render.analysis.naming.munsell_to_lab), keyed by term with the notation they were computed from; "
        "written by tools/make_colour_tables.py.",
        "colour_science": colour.__version__,
        "prototypes": prototypes,
    }
    return json.dumps(document, indent=1, ensure_ascii=False, allow_nan=False, sort_keys=False) + "\n"


def tables() -> dict[str, str]:
    """The files' texts by name. The spectra come first: the lamps are built from them."""
    out = {"observers.csv": observers_csv(), "spectra.csv": spectra_csv()}
    return out


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--check", action="store_true", help="compare with the committed files; write nothing")
    args = parser.parse_args(argv)
    texts = tables()
    if not args.check:
        OUT.mkdir(parents=True, exist_ok=True)
        for name, text in texts.items():
            (OUT / name).write_text(text, encoding="utf-8")
    # The lamp figures are computed from lamps built out of the stored spectra.
    texts["lamp_figures.json"] = lamp_figures_json()
    texts["naming_prototypes.json"] = naming_prototypes_json()
    differ = []
    for name, text in texts.items():
        path = OUT / name
        if args.check:
            if not path.is_file() or not _same_json(path.read_text(encoding="utf-8"), text):
                differ.append(name)
        elif name in ("lamp_figures.json", "naming_prototypes.json"):
            path.write_text(text, encoding="utf-8")
    if differ:
        print("differ from colour-science: " + ", ".join(differ), file=sys.stderr)
        return 1
    print(("checked " if args.check else "wrote ") + ", ".join(str(OUT / n) for n in texts))
    return 0


#: Relative tolerance of ``--check`` on computed numbers: the lamp figures' last digits move with
#: the numerical libraries' summation order (about 1e-14 relative), far below any figure's use.
CHECK_RTOL = 1e-9


def _same_json(stored: str, computed: str) -> bool:
    """Whether two JSON texts hold the same values, numbers within :data:`CHECK_RTOL`."""
    if stored == computed:
        return True
    try:
        a, b = json.loads(stored), json.loads(computed)
    except ValueError:
        return False
    return _same_value(a, b)


def _same_value(a: object, b: object) -> bool:
    if isinstance(a, dict) and isinstance(b, dict):
        return a.keys() == b.keys() and all(_same_value(a[k], b[k]) for k in a)
    if isinstance(a, list) and isinstance(b, list):
        return len(a) == len(b) and all(_same_value(x, y) for x, y in zip(a, b, strict=True))
    if isinstance(a, float | int) and isinstance(b, float | int) and not isinstance(a, bool | str):
        return math.isclose(a, b, rel_tol=CHECK_RTOL, abs_tol=1e-15)
    return a == b


if __name__ == "__main__":
    sys.exit(main())
