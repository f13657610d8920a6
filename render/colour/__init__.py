"""Colour: spectra, observers, lamps, materials and colorimetry.

* :mod:`render.colour.spectra` -- the one wavelength grid and moving spectra onto it.
* :mod:`render.colour.observers` -- CIE colour-matching and luminous efficiency functions.
* :mod:`render.colour.lamps` -- lamp spectra: the built-in catalogue and user lamp files.
* :mod:`render.colour.lamp_figures` -- CCT, rendering indices, S/P and other lamp figures.
* :mod:`render.colour.materials` -- measured surface reflectances with provenance.
* :mod:`render.colour.colorimetry` -- response tables and light buffers to absolute X, Y, Z, Y'.
"""

__all__: list[str] = []
