"""Open map data: OpenStreetMap extracts as editable scenes (``lampcast import-map``).

* :mod:`render.mapdata.projection` -- local metric coordinates (the WGS84 tangent plane).
* :mod:`render.mapdata.osm` -- reading ``.osm`` and ``.osm.pbf`` extracts with osmium.
* :mod:`render.mapdata.defaults` -- the stated defaults for missing tags.
* :mod:`render.mapdata.importer` -- :func:`import_map`, the scene written.
"""

from __future__ import annotations

__all__: list[str] = []
