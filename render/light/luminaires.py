"""Luminaires as arrays for the light evaluation, gathered into light channels.

:func:`luminaire_set` turns a scene's luminaires into arrays of positions, orientations and
candela tables (:class:`LuminaireSet`) for the numba kernels of :mod:`render.light.integrator`.

A **light channel** is a set of luminaires that share a group, a photometric distribution, a
lumen rating, a dimming level and a lamp. Light buffers (:mod:`render.light.integrator`) keep one value
per channel, evaluated at full output (dimming 1), so that a lamp swap, a lumens change or a
dimming change per group is exact without casting a ray (:mod:`render.colour.colorimetry` applies them).
Changing the photometric distribution changes where the light goes and needs a new light
evaluation (the camera rays are reused).

References
----------
- ANSI/IESNA LM-63-2002, IES LM-63-2019: the photometric frame, luminous opening and relative
  versus absolute photometry (via :mod:`render.light.photometry`) **(from memory)**.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from render.errors import InputError, ProblemList
from render.light.photometry import (
    Photometry,
    apply_tilt,
    load_photometry,
    luminaire_rotation,
    luminous_flux_lm,
    scale_to_lumens,
)
from render.scene.model import GroupSetting, Luminaire, Scene, Setup

__all__ = [
    "DEFAULT_OPENING_M",
    "Channel",
    "LuminaireSet",
    "channel_factors",
    "luminaire_set",
    "needs_new_evaluation",
    "setting_for",
]

#: Opening size used when a photometric file gives zero luminous dimensions, m (length along
#: C0, width along C90). Common practice for a residential lantern, no source.
DEFAULT_OPENING_M = (0.5, 0.25)


@dataclass(frozen=True)
class Channel:
    """One light channel: luminaires that change together and share their light's spectrum."""

    group: str
    photometry: str
    lumens: float  # lamp lumens the candela tables are scaled to
    dimming: float  # the scene's dimming; buffers are evaluated at 1 and scaled by this
    lamp: str


@dataclass
class LuminaireSet:
    """Array form of a scene's luminaires for the numba kernels.

    Attributes
    ----------
    names : (L,) the luminaires' names.
    channels : the light channels, in channel-index order.
    position_m : (L, 3) centre of each luminous opening.
    rotation : (L, 3, 3) luminaire-to-world matrices (photometric frame: x = C0, y = C90,
        z up, γ = 0 toward -z).
    scale : (L,) multiplier on the candela table (maintenance factor; dimming is in the channel).
    table : (L,) index of the luminaire's candela table.
    c_grid, g_grid : (P, n) padded angle grids (degrees); ``n_c``, ``n_g`` their lengths.
    cd_table : (P, nc, ng) absolute candela (already scaled to the channel's lumens).
    i_max_beyond : (P, ng) max over C of the intensity at γ >= g_grid[j], cd (for culling).
    channel : (L,) channel index of each luminaire.
    opening_m : (L, 2) luminous opening length (along C0) and width (along C90), m.
    photometries : (P,) the distributions behind ``cd_table`` (scaled and tilted).
    cull_grids : culling grids built for these luminaires (:func:`render.light.integrator.cull_grid`),
        kept so that each is built once.
    """

    names: list[str]
    channels: list[Channel]
    position_m: np.ndarray
    rotation: np.ndarray
    scale: np.ndarray
    table: np.ndarray
    c_grid: np.ndarray
    g_grid: np.ndarray
    n_c: np.ndarray
    n_g: np.ndarray
    cd_table: np.ndarray
    i_max_beyond: np.ndarray
    channel: np.ndarray
    opening_m: np.ndarray
    photometries: list[Photometry] = field(default_factory=list)
    cull_grids: dict = field(default_factory=dict, repr=False, compare=False)

    @property
    def n_luminaires(self) -> int:
        """Number of luminaires, L."""
        return int(self.position_m.shape[0])

    @property
    def n_channels(self) -> int:
        """Number of light channels."""
        return len(self.channels)


def setting_for(setup: Setup | None, group: str) -> GroupSetting:
    """A group's settings under ``setup``: the group's own keys, else the all-luminaires ones."""
    if setup is None:
        return GroupSetting()
    base = setup.groups.get("*", GroupSetting())
    own = setup.groups.get(group, GroupSetting())
    return GroupSetting(
        lamp=own.lamp or base.lamp,
        photometry=own.photometry or base.photometry,
        lumens=own.lumens if own.lumens is not None else base.lumens,
        dimming=own.dimming if own.dimming is not None else base.dimming,
        input_watts=own.input_watts if own.input_watts is not None else base.input_watts,
    )


def luminaire_set(scene: Scene, setup: Setup | None = None) -> LuminaireSet:
    """Resolve the scene's luminaires (with a setup's photometry and lumens, if given).

    Raises
    ------
    InputError
        Listing every photometric reference that cannot be loaded.
    """
    problems = ProblemList(scene.path)
    tables: dict[tuple, int] = {}
    loaded: list[Photometry] = []
    channels: list[Channel] = []
    rows: list[tuple[Luminaire, int, int]] = []
    for lum in scene.luminaires:
        s = setting_for(setup, lum.group)
        ref = s.photometry or lum.photometry
        try:
            photometry = load_photometry(ref, base_dir=scene.base_dir, allowed_root=scene.reference_root)
        except InputError as err:
            problems.extend(err)
            continue
        lumens = s.lumens if s.lumens is not None else lum.lumens
        if lumens is None:
            lumens = photometry.rated_lumens_lm if not photometry.is_absolute else luminous_flux_lm(photometry)
        key = (ref, float(lumens), float(lum.tilt_deg))
        if key not in tables:
            scaled = apply_tilt(scale_to_lumens(photometry, lumens), lum.tilt_deg)
            tables[key] = len(loaded)
            loaded.append(scaled)
        lamp = s.lamp or lum.lamp
        channel = Channel(lum.group, ref, float(lumens), float(lum.dimming), lamp)
        if channel not in channels:
            channels.append(channel)
        rows.append((lum, tables[key], channels.index(channel)))
    problems.raise_if_any()
    n_c = np.array([p.c_deg.size for p in loaded], np.int64)
    n_g = np.array([p.gamma_deg.size for p in loaded], np.int64)
    P = len(loaded)
    mc = int(n_c.max()) if P else 1
    mg = int(n_g.max()) if P else 1
    c_grid = np.zeros((P, mc))
    g_grid = np.zeros((P, mg))
    cd = np.zeros((P, mc, mg))
    beyond = np.zeros((P, mg))
    for i, p in enumerate(loaded):
        c_grid[i, : n_c[i]] = p.c_deg
        g_grid[i, : n_g[i]] = p.gamma_deg
        cd[i, : n_c[i], : n_g[i]] = p.candela_cd
        per_gamma = p.candela_cd.max(axis=0)
        beyond[i, : n_g[i]] = np.maximum.accumulate(per_gamma[::-1])[::-1]
    L = len(rows)
    position = np.zeros((L, 3))
    rotation = np.zeros((L, 3, 3))
    scale = np.zeros(L)
    table = np.zeros(L, np.int64)
    channel = np.zeros(L, np.int64)
    opening = np.zeros((L, 2))
    for i, (lum, t, c) in enumerate(rows):
        position[i] = lum.position_m
        rotation[i] = luminaire_rotation(lum.rotation_deg, lum.tilt_deg)
        scale[i] = lum.maintenance_factor
        table[i] = t
        channel[i] = c
        p = loaded[t]
        length, width = abs(p.opening_length_m or 0.0), abs(p.opening_width_m or 0.0)
        opening[i] = (length, width) if length > 0 and width > 0 else DEFAULT_OPENING_M
    return LuminaireSet(
        names=[r[0].name for r in rows],
        channels=channels,
        position_m=position,
        rotation=rotation,
        scale=scale,
        table=table,
        c_grid=c_grid,
        g_grid=g_grid,
        n_c=n_c,
        n_g=n_g,
        cd_table=cd,
        i_max_beyond=beyond,
        channel=channel,
        opening_m=opening,
        photometries=loaded,
    )


def channel_factors(lights: LuminaireSet, setup: Setup | None = None) -> tuple[np.ndarray, list[str]]:
    """Per channel: the multiplier on the buffered values (dimming; lumens changes relative to
    the channel's rating) and the lamp id, under ``setup`` (None: as in the scene).

    A setup that changes a group's *photometry* cannot be applied to existing buffers; use
    :func:`needs_new_evaluation` to check."""
    factors = np.ones(lights.n_channels)
    lamps = []
    for k, ch in enumerate(lights.channels):
        s = setting_for(setup, ch.group)
        dimming = s.dimming if s.dimming is not None else ch.dimming
        lumens = s.lumens if s.lumens is not None else ch.lumens
        factors[k] = dimming * lumens / ch.lumens
        lamps.append(s.lamp or ch.lamp)
    return factors, lamps


def needs_new_evaluation(lights: LuminaireSet, setup: Setup | None) -> bool:
    """True if ``setup`` changes the photometric distribution of any channel."""
    return any(setting_for(setup, ch.group).photometry not in (None, ch.photometry) for ch in lights.channels)
