"""Compiling kernels ahead, in a helper process, on a command's first run.

The first run of a rendering command (or any run after an upgrade) compiles its numba kernels
before numba's on-disk cache holds them: tens of seconds, one kernel after another, on one
core. Most of a command's kernels are needed only after the scene is loaded, its mesh and
BVH built and the first camera rays traced. :func:`start` therefore launches, when the cache
does not yet hold the light kernel, a helper process (``python -m render.warmup SCENE``)
that compiles those later kernels while the command itself loads the scene and compiles the
early ones (BVH build, camera rays, traversal, hit shading); numba's cache then hands the
helper's kernels to the command. The helper calls the same functions the command calls, on
inputs of a few samples with the same array types (:func:`warm`), so it compiles exactly the
specialisations the command will look up; results never depend on it (a kernel the helper
has not finished is compiled by the command as usual).

The work is split into small steps in the order the command needs their kernels
(:data:`STEPS`: the light kernels of direct light and luminous openings, the path tracer of
interreflected light (for a command that traces it), the interreflected light's filter, colorimetry, the vision stage, the image writer, the colour analysis, the
calculation's kernels and its measuring plane). The command starts the helper as soon as it
has parsed its arguments, before it loads the scene, and gives it a folder in which each step is claimed
by whichever process takes it first (a file created exclusively) and marked done when it
ends. The helper takes the steps from the front. The command waits for the light kernel,
the largest, rather than compile it a second time (:func:`wait_for_light_kernel`): as long
as the helper is still compiling it, however slowly a loaded machine lets it, and while it
waits it takes the steps from the back itself (on a synthetic view of its own, never
touching the command's data), so that neither process sits idle while the other compiles
what it will need.

The helper writes nothing but the kernel cache and the step files, prints nothing, and
ends with the command: :meth:`Warmup.close` stops it if it is still running and removes the
step folder (the command's handler calls it on every exit). The helper is not started when
the light kernel is already cached (and, for a command given ``--bounces``, the path tracer), on a single core, when numba's cache cannot be written,
or with ``LAMPCAST_WARMUP=0`` in the environment. It inherits ``NUMBA_CACHE_DIR``
(:func:`render.resources.numba_cache_dir` sets it before numba is imported), so a read-only
installation fills its per-user cache folder.

References
----------
- numba documentation, "Notes on Caching" (``cache=True``: one index and data file per
  function in ``__pycache__`` or ``NUMBA_CACHE_DIR``).
- Python documentation, :mod:`subprocess` (``Popen``, ``terminate``, ``wait``); :func:`os.open`
  with ``O_CREAT | O_EXCL`` (creation that fails when the file exists: one claimant per step).
"""

from __future__ import annotations

import atexit
import os
import shutil
import signal
import subprocess
import sys
import tempfile
import threading
import time
from pathlib import Path

__all__ = [
    "ENV_SWITCH",
    "STEPS",
    "Warmup",
    "before_use",
    "kernels_cached",
    "start",
    "stop_all",
    "wait_for_light_kernel",
    "warm",
]

#: Environment variable that turns the helper process off (``0``, ``no``, ``false`` or ``off``).
ENV_SWITCH = "LAMPCAST_WARMUP"
#: The helper's steps, in the order a rendering command needs their kernels: the light
#: kernels (direct light, then the luminous openings a view's first tiles also need), the
#: path tracer of interreflected light (when the command's or the scene's bounces are above
#: 0; the largest kernel after the light kernel, needed right after a view's direct light), the
#: interreflected light's filter (for a scene whose renders denoise it), colorimetry, the
#: vision stage, the image writer, the colour analysis of the tagged objects, the
#: calculation's candidate pairs and intensity lookups, the calculation's measuring plane (the
#: downward rays of the upward exitance map). Small steps, so that a command that takes one while it waits for the light
#: kernels is not held up long after they are ready.
STEPS = ("light", "paths", "denoise", "colour", "vision", "images", "colours", "calc", "plane")
# Steps that use what another step makes in the same process (its kernels compiled or loaded):
# run after that step is done when the other process has taken it, so that the two processes
# do not compile the same kernels side by side.
_AFTER = {"vision": "colour", "colours": "vision"}
# Most seconds a step waits for the step it follows (then it runs anyway).
_AFTER_WAIT_S = 300.0
# Seconds the command waits for a stopped helper to exit before killing it.
_STOP_WAIT_S = 5.0
# Most seconds the command waits for the helper's light kernel (a safety net only: it waits
# while the helper is alive and compiling it), and how often it looks.
_LIGHT_WAIT_S = 900.0
_POLL_S = 0.05
# Width of the tiny view the helper renders synthetically (pixels).
_WIDTH_PX = 24
# Luminance of the synthetic view's luminous opening, cd/m² (see _synthetic_view).
_OPENING_CD_M2 = 200.0
# Cells of the calculation's measuring plane compiled on (any small number).
_PLANE_CELLS = 2
# Name of the file that marks a step done, in the step folder.
_DONE = "{}.done"
# Helpers started by this process and not yet stopped.
_running: list[Warmup] = []
# Whether this process is running a step itself (then before_use does nothing).
_in_step = False


def _claim(board: Path, step: str) -> bool:
    """Take ``step`` for this process: True if no process had taken it."""
    try:
        os.close(os.open(board / step, os.O_CREAT | os.O_EXCL | os.O_WRONLY))
    except FileExistsError:
        return False
    except OSError:  # the folder is gone (the command ended): nothing more to do
        return False
    return True


def _await_before(board: Path, step: str, alive=lambda: True) -> None:
    """Wait until the step ``step`` follows (:data:`_AFTER`) is done, if a process has taken
    it, while ``alive()`` (the other process runs), at most :data:`_AFTER_WAIT_S`."""
    first = _AFTER.get(step)
    if first is None:
        return
    deadline = time.monotonic() + _AFTER_WAIT_S
    while (
        (board / first).exists()
        and not (board / _DONE.format(first)).exists()
        and alive()
        and time.monotonic() < deadline
    ):
        time.sleep(_POLL_S)


def _mark_done(board: Path, step: str) -> None:
    try:
        os.close(os.open(board / _DONE.format(step), os.O_CREAT | os.O_WRONLY))
    except OSError:
        pass


class Warmup:
    """A running helper process (:func:`start`) and its step folder (``board``, see the
    module text); :meth:`close` stops it. A context manager."""

    def __init__(
        self,
        process: subprocess.Popen,
        scene_path: str | None = None,
        board: Path | None = None,
        bounces: int | None = None,
    ) -> None:
        self.process = process
        self.scene_path = scene_path
        self.board = board
        self.bounces = bounces
        self._steps: _Steps | None = None

    def running(self) -> bool:
        """Whether the helper is still compiling."""
        return self.process.poll() is None

    def done(self, step: str) -> bool:
        """Whether ``step`` has been finished (by either process)."""
        return self.board is not None and (self.board / _DONE.format(step)).exists()

    def assist(self) -> bool:
        """Take the last step neither process has taken yet and run it in this process (on
        data of its own); False when none is left."""
        if self.board is None or self.scene_path is None:
            return False
        for step in reversed(STEPS):
            if _claim(self.board, step):
                if self._steps is None:
                    self._steps = _Steps(self.scene_path, self.bounces)
                global _in_step
                _in_step = True
                try:
                    _await_before(self.board, step, self.running)
                    self._steps.run(step)
                finally:
                    _in_step = False
                    _mark_done(self.board, step)
                return True
        return False

    def close(self) -> None:
        """Stop the helper if it is still running, wait for it to exit, and remove the step
        folder."""
        p = self.process
        if p.poll() is None:
            p.terminate()
            try:
                p.wait(timeout=_STOP_WAIT_S)
            except subprocess.TimeoutExpired:
                p.kill()
                p.wait()
        if self.board is not None:
            shutil.rmtree(self.board, ignore_errors=True)

    def __enter__(self) -> Warmup:
        return self

    def __exit__(self, *exc) -> None:
        self.close()


def _switched_off() -> bool:
    return os.environ.get(ENV_SWITCH, "").strip().lower() in ("0", "no", "false", "off")


def kernels_cached(bounces: int = 0) -> bool:
    """Whether numba's cache already holds the light kernel (then the other kernels of a
    command are almost surely there too) and, with ``bounces`` above 0, the path tracer; True
    when that cannot be told."""
    try:
        from render.light.integrator import _direct_light

        kernels = [_direct_light]
        if bounces > 0:
            from render.light.indirect.paths import trace_paths

            kernels.append(trace_paths)
        return all(bool(k._cache._cache_file._load_index()) for k in kernels)
    except Exception:  # numba's cache internals changed, or caching is off: do not start a helper
        return True


def _cache_writable() -> bool:
    """Whether the folder numba caches the light kernel in can be written."""
    try:
        from render.light.integrator import _direct_light

        folder = Path(_direct_light._cache._cache_path)
    except Exception:
        return False
    while not folder.exists() and folder.parent != folder:
        folder = folder.parent
    return os.access(folder, os.W_OK | os.X_OK)


def wait_for_light_kernel() -> None:
    """If a helper of this process is still compiling the light kernel (its first step),
    wait until it has finished it rather than compile it a second time, however long that
    takes while the helper runs; meanwhile compile the steps from the back of :data:`STEPS`
    here (:meth:`Warmup.assist`). At once when there is no helper or its light kernel is done."""
    if not _running:
        return
    w = _running[-1]
    deadline = time.monotonic() + _LIGHT_WAIT_S
    while w.running() and not w.done("light") and time.monotonic() < deadline:
        try:
            assisted = w.assist()
        except Exception:  # a step of a synthetic view failed: the command compiles it when it comes
            assisted = True
        if not assisted:
            time.sleep(_POLL_S)


def before_use(step: str) -> None:
    """Called by the command where it first needs the kernels of ``step`` (one of
    :data:`STEPS`): if its helper is compiling that step right now, wait until it is done
    rather than compile the same kernels side by side; if no process has taken it, take it
    (the command compiles those kernels as it goes, and the helper skips the step). At once
    without a helper, and inside a step this process runs itself."""
    if not _running or _in_step:
        return
    w = _running[-1]
    if w.board is None or w.done(step):
        return
    if _claim(w.board, step):
        _mark_done(w.board, step)
        return
    deadline = time.monotonic() + _AFTER_WAIT_S
    while w.running() and not w.done(step) and time.monotonic() < deadline:
        time.sleep(_POLL_S)


def stop_all() -> None:
    """Stop every helper this process started (the command line's handler calls it on exit;
    also registered with :mod:`atexit`)."""
    while _running:
        _running.pop().close()


def _cores() -> int:
    """Processor cores this process may run on."""
    try:
        return len(os.sched_getaffinity(0))
    except (AttributeError, OSError):
        return os.cpu_count() or 1


def start(scene_path: str | os.PathLike, bounces: int | None = None) -> Warmup | None:
    """Start the helper for ``scene_path`` if it can help (see the module text), else None;
    ``bounces`` the command's interreflections where its command line sets them (None: the
    scene's). It is stopped by :func:`stop_all` (at the latest when this process exits)."""
    if _switched_off() or _cores() < 2 or kernels_cached(bounces or 0) or not _cache_writable():
        return None
    try:
        board = Path(tempfile.mkdtemp(prefix="lampcast-warmup-"))
    except OSError:
        return None
    try:
        process = subprocess.Popen(
            [sys.executable, "-m", "render.warmup", str(scene_path), str(board)]
            + ([] if bounces is None else [str(int(bounces))]),
            stdin=subprocess.DEVNULL,
            stdout=subprocess.DEVNULL,
            stderr=subprocess.DEVNULL,
            env={**os.environ, ENV_SWITCH: "0"},
        )
    except OSError:
        shutil.rmtree(board, ignore_errors=True)
        return None
    if not _running:
        atexit.register(stop_all)
    _running.append(Warmup(process, str(scene_path), board, bounces))
    return _running[-1]


# ------------------------------------------------------------------------------------------
# The helper's side
# ------------------------------------------------------------------------------------------


def _synthetic_view(study, setup, lights):
    """A :class:`render.study.RenderedView` of a few samples with the array types of a real
    render: every material, a luminous opening, the night sky, at street-lighting levels."""
    from render.study import RenderedView

    view = study.scene.views[0].name
    camera = study.camera(view, _WIDTH_PX)
    buffers = _synthetic_buffers(study, lights, camera)
    return RenderedView(
        view, setup.name if setup else None, camera, buffers, lights, study.colorimetry(buffers, lights, setup)
    )


def _synthetic_buffers(study, lights, camera):
    """The light buffers of :func:`_synthetic_view` (one sample per pixel of ``camera``)."""
    import numpy as np

    from render.light.integrator import LightBuffers, _material_gloss

    n = camera.width_px * camera.height_px
    mesh = study.mesh
    k = len(mesh.material_names)
    c = lights.n_channels
    response = (np.arange(n) % (k + 2) - 1).astype(np.int32)  # -1 sky, 0 … k-1, k opening
    emitter = np.where(response == k, 0, -1).astype(np.int32)
    # Street-lighting levels (a white diffuser at 0.05 … 0.35 cd/m²: mesopic, so that the rod
    # intrusion runs) and an opening bright enough for glare to run but not so bright that its
    # veil over the tiny view adapts the eye to photopic levels: the rod-intrusion kernel then
    # gets the read-only scotopic image a street view gives it, not the empty array of a
    # photopic view (2e4 cd/m² did that, and the command compiled the kernel once more).
    value = np.where(response[:, None] == k, _OPENING_CD_M2, 0.05 * (1 + np.arange(n)[:, None] % 7)).astype(np.float32)
    value = np.ascontiguousarray(np.broadcast_to(value, (n, c)), np.float32)
    return LightBuffers(
        camera.width_px,
        camera.height_px,
        1,
        response,
        value,
        emitter,
        # Every object's id in turn, so that the colour analysis finds its tagged objects.
        np.where(response >= 0, np.arange(n) % max(1, len(mesh.object_names)), -1).astype(np.int32),
        list(mesh.material_names),
        list(lights.channels),
        np.zeros((n, c), np.float32),
        _material_gloss(mesh),
    )


class _Steps:
    """The steps of :data:`STEPS` for one scene, each run on inputs of a few samples with the
    array types of a real command; the scene, its setups and luminaires loaded when a step
    first needs them."""

    def __init__(self, scene_path: str | os.PathLike, bounces: int | None = None) -> None:
        self.scene_path = scene_path
        self.bounces = bounces

    def _load(self) -> None:
        if hasattr(self, "study"):
            return
        from render.study import Study

        study = Study(self.scene_path)
        scene = study.scene
        names = [scene.compare_before, *scene.compare_options] if scene.compare_before else []
        self.setups = [study.setup(s) for s in names[:2]] or [study.setup(None)]
        self.lights = [study.lights(s) for s in self.setups]
        self.study = study

    def run(self, step: str) -> None:
        """Run ``step`` (one of :data:`STEPS`)."""
        self._load()
        getattr(self, f"_{step}")()

    def _light(self) -> None:
        from render.light.integrator import compile_light_kernels

        compile_light_kernels(self.lights[0], ("direct",))
        compile_light_kernels(self.lights[0], ("openings",))

    def _paths(self) -> None:
        # The path tracer (render.light.indirect.paths), when the command traces interreflected
        # light: one path from a point, through the function calculations use (views pass the
        # kernel the same array types, so this is the specialisation they look up too).
        scene = self.study.scene
        bounces = scene.render.bounces if self.bounces is None else self.bounces
        if bounces <= 0:
            return
        import numpy as np

        from render.light.indirect import IndirectSettings, PathTracer
        from render.light.indirect.view import transport_at_points

        study = self.study
        tracer = PathTracer(study.mesh, study.bvh, self.lights[0], study.reflectances, IndirectSettings(bounces, 1))
        transport_at_points(np.zeros((1, 3)), np.array([[0.0, 0.0, 1.0]]), None, tracer, 0)

    def _denoise(self) -> None:
        # The interreflected light's filter (render.light.indirect.denoise), when the scene's
        # renders trace and denoise it: the guides from a view's samples, then the stored
        # transport filtered in place, as render.study does.
        scene = self.study.scene
        if scene.render.bounces <= 0 or not scene.render.indirect_denoise:
            return
        import numpy as np

        from render.light.indirect.denoise import filter_transport, view_guides
        from render.light.integrator import _empty_geometry

        lights = self.lights[0]
        buffers = _synthetic_buffers(self.study, lights, self.study.camera(scene.views[0].name, _WIDTH_PX))
        buffers.geometry = _empty_geometry(buffers.n_samples)
        guides = view_guides(buffers)
        n_pix = buffers.width_px * buffers.height_px
        values = np.zeros((n_pix, lights.n_channels, 1), np.float16)
        filter_transport(values, np.ones(n_pix, np.float32), guides, overwrite=True)

    def _views(self) -> list:
        """The synthetic views, one per setup (made once per process)."""
        if not hasattr(self, "views"):
            self.views = [_synthetic_view(self.study, s, x) for s, x in zip(self.setups, self.lights)]
        return self.views

    def _colour(self) -> None:
        self._views()

    def _vision(self) -> None:
        import numpy as np

        from render.colour.matrices import COMPILED_FROM_COLOURS, apply_matrix

        self.shared = self.study.display_both(self._views(), self.study.observer)[0]
        # The colour products of full-size images (a compiled pass from COMPILED_FROM_COLOURS
        # colours on), with a matrix made per call and with a read-only constant one, as the
        # vision stage passes them.
        image = np.zeros((COMPILED_FROM_COLOURS, 3))
        matrix = np.eye(3)
        apply_matrix(matrix, image)
        matrix.setflags(write=False)
        apply_matrix(matrix, image)

    def _images(self) -> None:
        import numpy as np

        from render.output.images import write_png

        # An 8-bit sRGB image as the vision stage gives it (height, width, 3), C order.
        with tempfile.TemporaryDirectory(prefix="lampcast-warmup-") as tmp:
            write_png(Path(tmp) / "view.png", np.zeros((2, _WIDTH_PX, 3), np.uint8))

    def _colours(self) -> None:
        from render.analysis.view_colours import analyse_colours

        if not hasattr(self, "shared"):
            self._vision()
        views = self._views()
        labels = [f"setup {k}" for k in range(len(views))]
        analyse_colours(
            self.study, {views[0].name: (views, self.shared)}, self.study.observer, labels, setups=self.setups
        )

    def _calc(self) -> None:
        from render.light.integrator import compile_light_kernels
        from render.light.photometry import intensity_cd

        lights = self.lights[0]
        compile_light_kernels(lights, ("pairs",))
        if lights.photometries:
            intensity_cd(lights.photometries[0], [0.0, 10.0], [0.0, 30.0])

    def _plane(self) -> None:
        # The calculation's upward exitance map casts a plane's downward rays
        # (render.calc.sky.upward_plane and render_buffers, through camera_rays).
        import numpy as np

        from render.rays.cameras import DownwardHemisphereCamera, camera_rays

        plane = DownwardHemisphereCamera(
            origin_xy_m=(0.0, 0.0), plane_z_m=1.0, cell_m=1.0, width_px=_PLANE_CELLS, height_px=1
        )
        render = self.study.scene.render
        camera_rays(plane, render.samples_per_pixel, render.seed, np.arange(plane.n_pixels, dtype=np.int64))


def warm(scene_path: str | os.PathLike, board: str | os.PathLike | None = None, bounces: int | None = None) -> None:
    """Compile (or load) the kernels a rendering command on ``scene_path`` needs after its
    camera rays, step by step in the order of :data:`STEPS`: the light kernels
    (:func:`render.light.integrator.compile_light_kernels`), the path tracer with ``bounces``
    (None: the scene's) above 0, the interreflected light's filter, colorimetry, the vision stage, the image writer and the colour analysis on a
    synthetic view of a few samples, then the calculation's kernels and the downward rays of
    its measuring plane. With ``board`` (the command's step folder), only the steps no process
    has taken yet, each marked done when it ends (a step that uses another's work in the same
    process, :data:`_AFTER`, waits while the other process runs that one). Each step stands
    alone: one that fails is left to the command."""
    steps = _Steps(scene_path, bounces)
    folder = Path(board) if board is not None else None
    for step in STEPS:
        if folder is not None and not _claim(folder, step):
            continue
        try:
            if folder is not None:
                _await_before(folder, step)
            steps.run(step)
        except Exception:  # left to the command, which compiles what it needs anyway
            pass
        if folder is not None:
            _mark_done(folder, step)


def _exit_with_parent() -> None:
    """End this helper when the command that started it has gone (it then belongs to
    another parent)."""
    parent = os.getppid()

    def watch() -> None:
        while os.getppid() == parent:
            time.sleep(0.5)
        os._exit(0)

    threading.Thread(target=watch, daemon=True).start()


def main(argv: list[str] | None = None) -> int:
    """``python -m render.warmup SCENE [STEP_FOLDER [BOUNCES]]``: the helper process."""
    args = sys.argv[1:] if argv is None else argv
    if len(args) not in (1, 2, 3):
        return 2
    # Stopped by the command: leave through Python so that a cache file being written is
    # removed rather than left half-written.
    signal.signal(signal.SIGTERM, lambda *_: sys.exit(0))
    _exit_with_parent()
    warm(args[0], args[1] if len(args) > 1 else None, int(args[2]) if len(args) > 2 else None)
    return 0


if __name__ == "__main__":
    sys.exit(main())
