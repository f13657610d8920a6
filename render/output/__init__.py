"""Outputs: images, the comparison, the consultation report and their provenance.

* :mod:`render.output.hdr` -- OpenEXR X, Y, Z, Ys in cd/m².
* :mod:`render.output.comparison` -- before and after, per view; metrics.
* :mod:`render.output.report` -- the self-contained ``report.html``.
* :mod:`render.output.colour_pictures` -- pictures of the colour analysis.
* :mod:`render.output.photometry_sheet` -- key figures, text and polar plot of a distribution.
* :mod:`render.output.provenance` -- scene hashes and image metadata.
"""

__all__: list[str] = []
