"""Luminaire photometry: ANSI/IES LM-63 and EULUMDAT files, the C-γ intensity table, flux and orientation.

The package reads in data-flow order; each module can be read on its own:

* :mod:`.model` -- :class:`Photometry` and :class:`TiltData`, the luminaire frame and the C-γ
  and type B angle conventions;
* :mod:`.lm63` -- the LM-63 reader (1986–2019 editions, tilt data, symmetry expansion, type B
  resampling); the only place that parses LM-63 text;
* :mod:`.eulumdat` -- the EULUMDAT (``.ldt``) reader, giving the same model;
* :mod:`.formats` -- which photometric format a text resembles (dispatch and messages);
* :mod:`.kernels` -- luminaire orientation and the numba intensity lookups;
* :mod:`.integrals` -- exact flux, zonal flux, ULOR, peak intensity, lumen scaling and tilt;
* :mod:`.builtin` -- the generic distributions shipped as package data, and loading by id or path.

Text summaries and the polar plot of a distribution are output, in
:mod:`render.output.photometry_sheet`.

References
----------
- ANSI/IESNA LM-63-2002 and IES LM-63-2019, "Standard file format for the electronic transfer of
  photometric data" **(from memory)**; the modules cite what each uses.
"""

from render.light.photometry.builtin import BUILTIN_PHOTOMETRY_DIR, builtin_photometry_ids, load_photometry
from render.light.photometry.eulumdat import parse_eulumdat, read_eulumdat
from render.light.photometry.formats import guess_photometric_format
from render.light.photometry.integrals import (
    apply_tilt,
    luminous_flux_lm,
    peak_intensity,
    scale_to_lumens,
    tilt_factor,
    ulor,
    zonal_flux_lm,
)
from render.light.photometry.lm63 import FEET_TO_M, parse_lm63, read_lm63
from render.light.photometry.model import (
    Photometry,
    TiltData,
    c_gamma_to_direction,
    c_gamma_to_type_b,
    luminaire_rotation,
    type_b_to_c_gamma,
)

__all__ = [
    "BUILTIN_PHOTOMETRY_DIR",
    "FEET_TO_M",
    "Photometry",
    "TiltData",
    "apply_tilt",
    "builtin_photometry_ids",
    "c_gamma_to_direction",
    "c_gamma_to_type_b",
    "direction_to_c_gamma",
    "guess_photometric_format",
    "intensity_cd",
    "intensity_lookup",
    "intensity_toward",
    "load_photometry",
    "lookup_tables",
    "luminaire_rotation",
    "luminous_flux_lm",
    "parse_lm63",
    "parse_eulumdat",
    "peak_intensity",
    "read_eulumdat",
    "read_lm63",
    "scale_to_lumens",
    "tilt_factor",
    "type_b_to_c_gamma",
    "ulor",
    "world_to_c_gamma",
    "zonal_flux_lm",
]


# The numba kernels are imported on first use (PEP 562): reading a photometric file (the scene
# check) needs no compiler.
_KERNELS = frozenset(
    {
        "direction_to_c_gamma",
        "intensity_cd",
        "intensity_lookup",
        "intensity_toward",
        "lookup_tables",
        "world_to_c_gamma",
    }
)


def __getattr__(name: str):
    """A kernel of :mod:`.kernels` named in ``__all__``, imported when first asked for."""
    if name not in _KERNELS:
        raise AttributeError(f"module {__name__!r} has no attribute {name!r}")
    from render.light.photometry import kernels

    value = getattr(kernels, name)
    globals()[name] = value
    return value
