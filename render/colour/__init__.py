"""Colour: spectra, observers, lamps, materials, colorimetry and Oklab.

* :mod:`render.colour.spectra` -- the one wavelength grid and moving spectra onto it.
* :mod:`render.colour.observers` -- CIE colour-matching and luminous efficiency functions.
* :mod:`render.colour.lamps` -- lamp spectra: the built-in catalogue (data in
  ``render/data/lamps/catalogue.toml``) and user lamp files.
* :mod:`render.colour.lamp_figures` -- CCT, rendering indices, S/P and other lamp figures.
* :mod:`render.colour.materials` -- measured surface reflectances with provenance.
* :mod:`render.colour.colorimetry` -- response tables and light buffers to absolute X, Y, Z, Y'.
* :mod:`render.colour.oklab` -- the one route into and out of Oklab.
* :mod:`render.colour.matrices` -- a 3×3 colour matrix applied to every colour of an image.

Tables, JSON and plots of lamps and materials are in :mod:`render.output.lamp_sheet` and
:mod:`render.output.material_sheet`.

References
----------
- CIE 015:2018 *Colorimetry*, 4th ed., and the other sources each module names.
"""

__all__: list[str] = []
