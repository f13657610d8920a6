"""Outputs: images, the comparison, the consultation report and their provenance.

* :mod:`render.output.images` -- the one PNG writer (arrays and matplotlib figures).
* :mod:`render.output.aov_previews` -- the files of ``render --aov``: PNG previews, raw arrays.
* :mod:`render.output.hdr` -- OpenEXR X, Y, Z, Ys in cd/m².
* :mod:`render.output.comparison` -- before and after, per view: images, ``metrics.json``.
* :mod:`render.output.metrics` -- the comparison's figures as typed records (``to_json``).
* :mod:`render.output.report` -- the self-contained ``report.html`` (jinja2 template).
* :mod:`render.output.colour_files` -- the colour analysis's files: ``colours.json``, pictures.
* :mod:`render.output.colour_pictures` -- pictures of the colour analysis (the drawing).
* :mod:`render.output.colour_text` -- the colour analysis's "name it" table as text.
* :mod:`render.output.luminance_legend` -- the false-colour legend in cd/m², a map with it.
* :mod:`render.output.photometry_sheet` -- key figures, text and polar plot of a distribution.
* :mod:`render.output.provenance` -- scene hashes and image metadata.
"""

__all__: list[str] = []
