"""The Python API: one scene, its geometry, and the views and setups rendered from it.

>>> from render.study import Study
>>> study = Study("scenes/demo/linden_row.toml")             # doctest: +SKIP
>>> view = study.render_view("footway", setup="sodium")      # doctest: +SKIP
>>> view.colorimetry.luminance_cd_m2.mean()                  # doctest: +SKIP
>>> after = study.relight(view, "led-warm")                  # no ray cast  # doctest: +SKIP
>>> study.illuminance_lx([[40, 1.5, 0]], [[0, 0, 1]])         # doctest: +SKIP

A :class:`Study` compiles the scene and builds its BVH once. :meth:`Study.render_view` casts a
view's camera rays once and keeps its :class:`~render.light.integrator.LightBuffers`;
:meth:`Study.relight` re-colours them for another setup without casting a ray (a setup that
changes a photometric distribution re-evaluates the light at the same hit points, casting the
view's camera samples again tile by tile rather than keeping their geometry in memory).

References
----------
The methods are those of the modules it calls: direct light (:mod:`render.light.integrator`),
colorimetry (:mod:`render.colour.colorimetry`) and the vision stage (:mod:`render.vision`).
"""

from __future__ import annotations

import sys
from dataclasses import dataclass
from functools import cached_property
from pathlib import Path
from typing import TYPE_CHECKING, Any

import numpy as np
import numpy.typing as npt

from render.colour.colorimetry import ViewColorimetry, resolve
from render.errors import did_you_mean, input_error
from render.geometry.build import compile_scene
from render.light.gloss import view_gloss_share
from render.light.integrator import (
    NEGLIGIBLE_LX,
    SURFACE_OFFSET_M,
    LightBuffers,
    direct_illuminance_lx,
    evaluate_light,
    render_buffers,
)
from render.light.luminaires import LuminaireSet, channel_factors, luminaire_set, needs_new_evaluation
from render.light.rtable import view_road_shading
from render.limits import check_render_size
from render.scene import Scene, load_scene
from render.scene.model import Setup

if TYPE_CHECKING:
    from render.colour.materials import Material
    from render.geometry.mesh import TriangleMesh
    from render.light.indirect import IndirectSettings
    from render.light.indirect.view import StoredTransport
    from render.rays.bvh import BVH
    from render.rays.cameras import Camera
    from render.vision.observer import ObserverSettings
    from render.vision.pipeline import DisplayResult, ViewLight

__all__ = ["RenderedView", "Study"]


def _before_use(step: str) -> None:
    """On a first run, wait for the helper process's step ``step`` if it is compiling those
    kernels now (:func:`render.warmup.before_use`); nothing when no helper was started."""
    warmup = sys.modules.get("render.warmup")
    if warmup is not None:
        warmup.before_use(step)


@dataclass
class RenderedView:
    """A view rendered under one setup: its buffers, the lights they were evaluated with, and
    the resulting absolute colorimetry."""

    name: str
    setup: str | None
    camera: Any  # render.rays.cameras.Camera
    buffers: LightBuffers
    lights: LuminaireSet
    colorimetry: ViewColorimetry


class Study:
    """A scene ready to render: compiled geometry, BVH, material reflectances."""

    def __init__(
        self,
        scene: Scene | str | Path,
        *,
        negligible_lx: float = NEGLIGIBLE_LX,
        shadow_offset_m: float = SURFACE_OFFSET_M,
    ) -> None:
        self.scene = scene if isinstance(scene, Scene) else load_scene(scene)
        self.negligible_lx = negligible_lx
        #: How far above a surface the shadow rays of :meth:`illuminance_lx` start, m.
        self.shadow_offset_m = shadow_offset_m

    @cached_property
    def scene_sha256(self) -> str:
        """SHA-256 of the scene file (read once), for provenance metadata."""
        from render.output.provenance import scene_sha256

        return scene_sha256(self.scene.path)

    @cached_property
    def mesh(self) -> TriangleMesh:
        """The scene compiled to triangles (once)."""
        return compile_scene(self.scene)

    @cached_property
    def bvh(self) -> BVH:
        """The bounding volume hierarchy over the mesh (built once)."""
        from render.rays.bvh import build_bvh

        return build_bvh(self.mesh.triangles_m)

    @cached_property
    def materials(self) -> dict[str, Material]:
        """The material library (:func:`render.colour.materials.material_library`, read once)."""
        from render.colour.materials import material_library

        return material_library()

    @cached_property
    def reflectances(self) -> np.ndarray:
        """(K, N_BINS) reflectance of each material index of the mesh."""
        from render.colour.materials import get_material

        lib = self.materials
        return np.array(
            [get_material(m, lib, source=str(self.scene.path)).reflectance for m in self.mesh.material_names]
        )

    def setup(self, name: str | Setup | None) -> Setup | None:
        """The scene's setup called ``name`` (a :class:`Setup` or ``None`` passes through); an
        unknown name is an :class:`~render.errors.InputError`."""
        if name is None or isinstance(name, Setup):
            return name
        if name not in self.scene.setups:
            names = list(self.scene.setups)
            raise input_error(
                self.scene.path,
                "setups",
                f"no setup named {name!r}{did_you_mean(name, names)}; setups: {', '.join(names) or '(none)'}",
            )
        return self.scene.setups[name]

    def lights(self, setup: str | Setup | None = None) -> LuminaireSet:
        """The scene's luminaires under ``setup``, ready for the integrator (resolved once per
        setup of the scene; a :class:`Setup` from elsewhere is resolved each time)."""
        s = self.setup(setup)
        key = s.name if s is not None else None
        if s is not None and self.scene.setups.get(s.name) is not s:
            return luminaire_set(self.scene, s)
        cache = self.__dict__.setdefault("_lights_by_setup", {})
        if key not in cache:
            cache[key] = luminaire_set(self.scene, s)
        return cache[key]

    def camera(self, view: str | None = None, width_px: int | None = None) -> Camera:
        """The camera of a view, optionally at another width (height kept in proportion)."""
        from render.rays.cameras import Camera

        v = self.scene.view(view)
        w, h = v.width_px, v.height_px
        if width_px:
            h = max(1, round(h * width_px / w))
            w = int(width_px)
        return Camera(position_m=v.position_m, target_m=v.target_m, hfov_deg=v.hfov_deg, width_px=w, height_px=h)

    def lamp_spds(self, lamps: list[str]) -> list[np.ndarray]:
        """The spectrum of each lamp reference (built-in id or file, read once each)."""
        from render.colour.lamps import get_lamp

        cache: dict[str, np.ndarray] = {}
        out = []
        for ref in lamps:
            if ref not in cache:
                cache[ref] = get_lamp(ref, base_dir=self.scene.base_dir, source=str(self.scene.path)).spd
            out.append(cache[ref])
        return out

    def setup_lamps(
        self, rendered: list[RenderedView], setups: list[str | Setup | None]
    ) -> list[tuple[str, np.ndarray]]:
        """``(lamp id, spectrum)`` of every lamp the setups put into the rendered views, each once."""
        lamps: dict[str, np.ndarray] = {}
        for r, s in zip(rendered, setups):
            ids = channel_factors(r.lights, self.setup(s))[1]
            for lamp_id, spd in zip(ids, self.lamp_spds(ids)):
                lamps.setdefault(lamp_id, spd)
        return list(lamps.items())

    def colorimetry(
        self, buffers: LightBuffers, lights: LuminaireSet, setup: str | Setup | None = None
    ) -> ViewColorimetry:
        """Absolute colorimetry of kept buffers under ``setup``'s lamps, lumens and dimming,
        with the interreflected light where the buffers keep it (``buffers.indirect``)."""
        _before_use("colour")
        factors, lamps = channel_factors(lights, self.setup(setup))
        spds = self.lamp_spds(lamps)
        out = resolve(buffers, factors, spds, self.reflectances)
        if buffers.indirect is not None:
            from render.light.indirect import indirect_xyz

            extra = indirect_xyz(buffers.indirect, buffers.response, factors, spds, self.reflectances)
            out.xyz_cd_m2 += extra[..., :3]
            out.scotopic_cd_m2 += extra[..., 3]
        return out

    def indirect_settings(self, bounces: int | None = None) -> IndirectSettings | None:
        """How the scene's renders trace interreflected light (``[render] bounces`` and
        ``indirect_samples_per_pixel``; ``bounces`` overrides) and the night's sky glow and
        moonlight (``[night]``, traced even without bounces), or None for direct light only."""
        from render.light.indirect import IndirectSettings

        n = self.scene.render.bounces if bounces is None else int(bounces)
        night = self.scene.night if self.scene.night.on else None
        if n <= 0 and night is None:
            return None
        settings = IndirectSettings(
            bounces=max(n, 0), samples_per_pixel=self.scene.render.indirect_samples_per_pixel, night=night
        )
        if n > 0 and self.scene.render.indirect_denoise:
            from render.light.indirect.denoise import denoised_settings

            # The images' interreflected light is filtered once traced (_trace_indirect).
            settings = denoised_settings(settings)
        return settings

    def night_spectra(self) -> np.ndarray:
        """(2 + K, N_BINS) the spectra of the night light's ambient channels, any scale: the sky
        glow's (``[night] sky_spectrum``), the moon's (Planckian at ``moon_cct_k``), then the K
        window lamps' (:attr:`render.scene.model.NightLight.window_lamps`: the lit windows'
        ``window_lamp``, the shop windows' ``shop_window_lamp``, the further lamps frontages
        name)."""
        from render.light.indirect.night import planckian_spectrum

        night = self.scene.night
        sky, *windows = self.lamp_spds([night.sky_spectrum, *night.window_lamps])
        return np.stack([sky, planckian_spectrum(night.moon_cct_k), *windows])

    def _trace_indirect(
        self, buffers: LightBuffers, lights: LuminaireSet, settings: IndirectSettings, seed: int, progress: bool
    ) -> None:
        from render.light.indirect import trace_view

        _before_use("paths")
        buffers.indirect = trace_view(
            buffers,
            lights,
            self.bvh,
            self.reflectances,
            settings,
            seed,
            negligible_lx=self.negligible_lx,
            progress=progress,
            ambient_spds=self.night_spectra() if settings.ambient else None,
        )
        from render.light.indirect.denoise import DenoisedSettings, denoise_view

        if isinstance(settings, DenoisedSettings):
            # Images only, once per view: the filter is linear and lamp-independent, so every
            # setup relit from these buffers gets the filtered light exactly.
            buffers.indirect = denoise_view(buffers, overwrite=True)

    def render_view(
        self,
        view: str | None = None,
        setup: str | Setup | None = None,
        *,
        samples_per_pixel: int | None = None,
        seed: int | None = None,
        width_px: int | None = None,
        bounces: int | None = None,
        progress: bool = False,
    ) -> RenderedView:
        """Cast the view's camera rays, evaluate the light of ``setup`` (and, with bounces,
        trace its interreflected light) and resolve colorimetry. ``bounces`` overrides the
        scene's ``[render] bounces`` (0: direct light only)."""
        v = self.scene.view(view)
        camera = self.camera(v.name, width_px)
        spp = samples_per_pixel or self.scene.render.samples_per_pixel
        seed = self.scene.render.seed if seed is None else seed
        s = self.setup(setup)
        lights = self.lights(s)
        where = f"view {v.name!r}" + (" with --width/--spp" if width_px or samples_per_pixel else "")
        indirect = self.indirect_settings(bounces)
        # The night light's ambient channels (one per term on: sky glow, moonlight, each lit
        # window lamp) are stored beside the luminaires' interreflected ones.
        night_on = indirect is not None and indirect.ambient
        check_render_size(
            camera.width_px,
            camera.height_px,
            spp,
            lights.n_channels,
            self.scene.path,
            where,
            indirect is not None,
            # (Estimated from above by a coarse pass of the camera: render.light.gloss.)
            view_gloss_share(self.mesh, self.bvh, camera) if indirect is not None else 0.0,
            ambient_channels=indirect.night.terms_on if night_on else 0,
            window_lamps=len(indirect.night.window_lamps) if night_on else 0,
        )
        road = view_road_shading(self.scene, v, self.mesh, self.reflectances)
        buffers = render_buffers(
            self.mesh,
            self.bvh,
            lights,
            camera,
            spp,
            seed,
            road=road,
            negligible_lx=self.negligible_lx,
            progress=progress,
        )
        if indirect is not None:
            self._trace_indirect(buffers, lights, indirect, seed, progress)
        return RenderedView(
            v.name, s.name if s else None, camera, buffers, lights, self.colorimetry(buffers, lights, s)
        )

    def relight(self, rendered: RenderedView, setup: str | Setup | None, *, progress: bool = False) -> RenderedView:
        """The same view under another setup. Lamps, lumens and dimming are applied to the kept
        buffers (and interreflected light) without any ray; a changed photometric distribution
        re-evaluates the light at the same hit points (the camera samples cast again, tile by
        tile, with shadow rays) and traces the interreflected light again."""
        s = self.setup(setup)
        if needs_new_evaluation(rendered.lights, s):
            lights = self.lights(s)
            buffers = LightBuffers(**{**rendered.buffers.__dict__})
            evaluate_light(buffers, lights, self.bvh, negligible_lx=self.negligible_lx, progress=progress)
            kept = rendered.buffers.indirect
            if kept is not None:
                self._trace_indirect(buffers, lights, kept.settings, kept.seed, progress)
        else:
            lights, buffers = rendered.lights, rendered.buffers
        return RenderedView(
            rendered.name, s.name if s else None, rendered.camera, buffers, lights, self.colorimetry(buffers, lights, s)
        )

    @property
    def observer(self) -> ObserverSettings:
        """The scene's observer settings, or the defaults."""
        from render.vision.observer import ObserverSettings

        return self.scene.observer or ObserverSettings()

    def view_light(self, rendered: RenderedView) -> ViewLight:
        """The vision stage's input for a rendered view."""
        from render.vision.pipeline import ViewLight

        c = rendered.colorimetry
        return ViewLight(
            c.xyz_cd_m2,
            c.scotopic_cd_m2,
            luminaire_mask=c.luminaire_mask,
            white_xyz=c.white_xyz,
            white_scotopic=c.white_scotopic,
        )

    def display_both(
        self, rendered: list[RenderedView], observer: ObserverSettings | None = None
    ) -> tuple[list[DisplayResult], list[DisplayResult]]:
        """``(shared, adapted)`` display lists of the same views
        (:func:`render.vision.pipeline.shared_and_adapted`): glare once per view and setup, the
        glare optics once per view geometry, two images at a time. Each result keeps what the
        observer perceives (:attr:`~render.vision.pipeline.DisplayResult.perceived`) for the
        colour analysis."""
        from render.vision.pipeline import DISPLAY_WORKERS, shared_and_adapted
        from render.vision.view import ViewGeometry

        observer = observer or self.observer
        lights = [self.view_light(r) for r in rendered]
        geoms = [ViewGeometry.of(r.camera) for r in rendered]
        _before_use("vision")
        return shared_and_adapted(lights, geoms, observer, workers=DISPLAY_WORKERS)

    def display(
        self,
        rendered: list[RenderedView] | RenderedView,
        mode: str = "adapted",
        observer: ObserverSettings | None = None,
    ) -> list[DisplayResult] | DisplayResult:
        """Night-vision display images (:class:`render.vision.pipeline.DisplayResult`) of one or
        several rendered views. ``shared`` gives all of them one adaptation state (their true
        brightness relation); ``adapted`` adapts each to itself; ``photometric`` is false colour."""
        from render.vision.pipeline import DISPLAY_WORKERS, render_display, retinal_images, shared_display
        from render.vision.view import ViewGeometry

        items = rendered if isinstance(rendered, list) else [rendered]
        observer = observer or self.observer
        lights = [self.view_light(r) for r in items]
        geoms = [ViewGeometry.of(r.camera) for r in items]
        if mode == "shared":
            results = shared_display(lights, geoms, observer, workers=DISPLAY_WORKERS)
        elif mode == "photometric" and len(items) > 1:
            from render.vision.falsecolour import shared_range_decades

            lo_hi = shared_range_decades([x.xyz_cd_m2[..., 1] for x in lights])
            results = [
                render_display(x, g, observer, mode, photometric_range_cd_m2=lo_hi) for x, g in zip(lights, geoms)
            ]
        elif mode == "photometric":
            results = [render_display(x, g, observer, mode) for x, g in zip(lights, geoms)]
        else:
            retinas = retinal_images(lights, geoms, observer, DISPLAY_WORKERS)
            results = [render_display(x, g, observer, mode, retina=r) for x, g, r in zip(lights, geoms, retinas)]
        return results if isinstance(rendered, list) else results[0]

    def interreflected_illuminance_lx(
        self,
        points_m: npt.ArrayLike,
        normals: npt.ArrayLike,
        setup: str | Setup | None = None,
        *,
        bounces: int | None = None,
        paths: int | None = None,
        seed: int | None = None,
    ) -> np.ndarray:
        """Illuminance (lx) from interreflected light alone at points on surfaces with the
        given unit normals, with the setup's lamps, lumens and dimming: a Monte Carlo estimate
        (:mod:`render.light.indirect`) with ``paths`` per point (default the scene's
        ``indirect_samples_per_pixel``) and up to ``bounces`` interreflections (default the
        scene's, or :data:`render.light.indirect.DEFAULT_BOUNCES` where the scene has them
        off). Not part of any standard's calculation, which takes direct light only. The
        stored transport and its relighting: :meth:`interreflected_transport`."""
        s = self.setup(setup)
        stored = self.interreflected_transport(points_m, normals, s, bounces=bounces, paths=paths, seed=seed)
        return stored.illuminance_lx(self, s)

    def interreflected_transport(
        self,
        points_m: npt.ArrayLike,
        normals: npt.ArrayLike,
        setup: str | Setup | None = None,
        *,
        bounces: int | None = None,
        paths: int | None = None,
        seed: int | None = None,
        first_id: int = 0,
    ) -> StoredTransport:
        """The lamp-independent interreflected transport at bare points (what
        :meth:`interreflected_illuminance_lx` resolves), traced with the luminaires of
        ``setup`` (their photometry; defaults as there; point ``i`` hashes id ``first_id + i``):
        any lamps, lumens and dimming of the same photometry are a multiply of it
        (:meth:`StoredTransport.illuminance_lx`), no ray."""
        from render.light.indirect import DEFAULT_BOUNCES, IndirectSettings, PathTracer, transport_at_points
        from render.light.indirect.view import StoredTransport

        s = self.setup(setup)
        lights = self.lights(s)
        pts = np.asarray(points_m, np.float64).reshape(-1, 3)
        nrm = np.asarray(normals, np.float64).reshape(-1, 3)
        nrm = nrm / np.linalg.norm(nrm, axis=1, keepdims=True)
        render = self.scene.render
        n = bounces if bounces is not None else (render.bounces or DEFAULT_BOUNCES)
        settings = IndirectSettings(bounces=n, samples_per_pixel=paths or render.indirect_samples_per_pixel)
        tracer = PathTracer(
            self.mesh,
            self.bvh,
            lights,
            self.reflectances,
            settings,
            negligible_lx=self.negligible_lx,
            offset_m=self.shadow_offset_m,
        )
        moments, _ = transport_at_points(
            pts, nrm, None, tracer, render.seed if seed is None else seed, first_id=first_id
        )
        return StoredTransport(moments, lights, settings)

    def night_illuminance_per_unit_lx(
        self,
        points_m: npt.ArrayLike,
        normals: npt.ArrayLike,
        *,
        bounces: int = 0,
        paths: int,
        seed: int | None = None,
    ) -> np.ndarray:
        """(N, 2 + K) illuminance (lx) at bare points on surfaces with the given unit normals from
        the night's other light (``[night]``) per unit level of each term: per 1 cd/m² of sky
        glow, per 1 lx of the moon's normal illuminance, per 1 cd/m² of the lit windows of each
        of the K window lamps (houses', shops', further lamps; times :func:`render.light.indirect.night.ambient_levels` of the scene's
        ``[night]``: its illuminance). A Monte Carlo estimate with ``paths`` per point (the
        moon's direct part exact), its direct part alone with ``bounces`` 0, up to ``bounces``
        interreflections otherwise; the terms off in ``[night]`` are zero (turning one on
        traces again). Lamp-independent: the same for every setup. Zero without night light."""
        from render.light.indirect import IndirectSettings, PathTracer, transport_at_points
        from render.light.indirect.night import ambient_channel_count
        from render.light.indirect.view import ambient_illuminance_per_unit_lx, without_luminaires

        pts = np.asarray(points_m, np.float64).reshape(-1, 3)
        nrm = np.asarray(normals, np.float64).reshape(-1, 3)
        nrm = nrm / np.linalg.norm(nrm, axis=1, keepdims=True)
        night = self.scene.night
        if not night.on or pts.shape[0] == 0:
            return np.zeros((pts.shape[0], ambient_channel_count(night)))
        settings = IndirectSettings(bounces=max(int(bounces), 0), samples_per_pixel=int(paths), night=night)
        tracer = PathTracer(
            self.mesh,
            self.bvh,
            without_luminaires(self.lights(None)),
            self.reflectances,
            settings,
            negligible_lx=self.negligible_lx,
            offset_m=self.shadow_offset_m,
        )
        moments, _ = transport_at_points(pts, nrm, None, tracer, self.scene.render.seed if seed is None else seed)
        return ambient_illuminance_per_unit_lx(moments, self.night_spectra(), settings.basis)

    def illuminance_lx(
        self,
        points_m: npt.ArrayLike,
        normals: npt.ArrayLike,
        setup: str | Setup | None = None,
        *,
        shadows: bool = True,
        per_group: bool = False,
    ) -> np.ndarray | dict[str, np.ndarray]:
        """Direct illuminance (lx) at points on surfaces with the given unit normals, with the
        setup's lamps, lumens and dimming and the maintenance factor; shadows from the scene's
        geometry. Returns (N,) total, or a dict group -> (N,) with ``per_group``."""
        s = self.setup(setup)
        lights = self.lights(s)
        pts = np.asarray(points_m, np.float64).reshape(-1, 3)
        nrm = np.asarray(normals, np.float64).reshape(-1, 3)
        nrm = nrm / np.linalg.norm(nrm, axis=1, keepdims=True)
        e = direct_illuminance_lx(
            pts,
            nrm,
            lights,
            self.bvh if shadows else None,
            negligible_lx=self.negligible_lx,
            shadow_offset_m=self.shadow_offset_m,
        )
        factors, _ = channel_factors(lights, s)
        e = e * factors
        if not per_group:
            return e.sum(axis=1)
        out: dict[str, np.ndarray] = {}
        for k, ch in enumerate(lights.channels):
            out[ch.group] = out.get(ch.group, 0.0) + e[:, k]
        return out
