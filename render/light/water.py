"""A water film's optical constants, for the specular layer of wet surfaces.

Kept apart from the layer's kernels (:mod:`render.light.gloss`) so that checking a scene's
``wet`` keys needs no compiler.

References
----------
- Fresnel equations at normal incidence, R = ((n₁ − n₂)/(n₁ + n₂))² (analytic); the refractive
  index of water, n ≈ 1.333 at 589 nm **(from memory)**.
"""

from __future__ import annotations

__all__ = ["WATER_F0", "WET_ROUGHNESS"]

#: F0 of water (n = 1.333): ((n - 1) / (n + 1))², analytic.
WATER_F0 = ((1.333 - 1.0) / (1.333 + 1.0)) ** 2
#: GGX roughness α used for a wet street (common practice, no source).
WET_ROUGHNESS = 0.1
