"""Light: luminaire photometry, the scene's luminaires, and direct light at surfaces.

* :mod:`render.light.photometry` -- LM-63 photometric files, intensity lookups, flux and ULOR.
* :mod:`render.light.luminaires` -- the scene's luminaires as arrays, light channels, setups.
* :mod:`render.light.integrator` -- direct illuminance with shadow rays; light buffers.
* :mod:`render.light.gloss` -- the optional specular layer (GGX, Smith, Schlick).
"""

__all__: list[str] = []
