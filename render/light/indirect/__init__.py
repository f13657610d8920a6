"""Interreflected light: spectral path tracing whose stored transport keeps relighting exact.

* :mod:`render.light.indirect.paths` -- the path tracer (numba): cosine-sampled diffuse
  bounces, next-event estimation to a luminaire chosen by its unshadowed illuminance, Russian
  roulette, counter-based random numbers; throughput at 1 nm.
* :mod:`render.light.indirect.transport` -- the stored transport: node values every 5 nm
  (L2 projection onto hat functions), float16 per pixel, and the response tables at the nodes.
* :mod:`render.light.indirect.night` -- the night's other light: sky glow (a uniform sky dome)
  and moonlight (a parallel beam), as lamp-independent ambient channels beside the
  luminaires' (:func:`ambient_responses` at any level).
* :mod:`render.light.indirect.view` -- a view's or a set of points' interreflected transport
  (:func:`trace_view`, :func:`transport_at_points`) and its absolute colorimetry for any lamps
  (:func:`indirect_xyz`).
"""

from render.light.indirect.transport import NODE_STEP_NM, TransportBasis, transport_basis, transport_table
from render.light.indirect.view import (
    DEFAULT_BOUNCES,
    DEFAULT_PATHS_PER_PIXEL,
    IndirectBuffers,
    IndirectSettings,
    PathTracer,
    ambient_responses,
    illuminance_from_transport,
    indirect_responses,
    indirect_xyz,
    trace_view,
    transport_at_points,
)

__all__ = [
    "DEFAULT_BOUNCES",
    "DEFAULT_PATHS_PER_PIXEL",
    "NODE_STEP_NM",
    "IndirectBuffers",
    "IndirectSettings",
    "PathTracer",
    "TransportBasis",
    "ambient_responses",
    "illuminance_from_transport",
    "indirect_responses",
    "indirect_xyz",
    "trace_view",
    "transport_at_points",
    "transport_basis",
    "transport_table",
]
