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

The helper writes nothing but the kernel cache, prints nothing, and ends with the command:
:meth:`Warmup.close` stops it if it is still running (the command's handler calls it on
every exit). The command waits for the helper's light kernel, the largest, rather than
compile it a second time (:func:`wait_for_light_kernel`). The helper is not started when
the light kernel is already cached, on a single core, when numba's cache cannot be written,
or with ``LAMPCAST_WARMUP=0`` in the environment. It inherits ``NUMBA_CACHE_DIR``
(:func:`render.resources.numba_cache_dir` sets it before numba is imported), so a read-only
installation fills its per-user cache folder.

References
----------
- numba documentation, "Notes on Caching" (``cache=True``: one index and data file per
  function in ``__pycache__`` or ``NUMBA_CACHE_DIR``).
- Python documentation, :mod:`subprocess` (``Popen``, ``terminate``, ``wait``).
"""

from __future__ import annotations

import atexit
import os
import signal
import subprocess
import sys
import threading
from pathlib import Path

__all__ = ["ENV_SWITCH", "Warmup", "kernels_cached", "start", "stop_all", "wait_for_light_kernel", "warm"]

#: Environment variable that turns the helper process off (``0``, ``no``, ``false`` or ``off``).
ENV_SWITCH = "LAMPCAST_WARMUP"
# Seconds the command waits for a stopped helper to exit before killing it.
_STOP_WAIT_S = 5.0
# Most seconds the command waits for the helper's light kernel, and how often it looks.
_LIGHT_WAIT_S = 60.0
_POLL_S = 0.05
# Width of the tiny view the helper renders synthetically (pixels).
_WIDTH_PX = 24
# Helpers started by this process and not yet stopped.
_running: list[Warmup] = []


class Warmup:
    """A running helper process (:func:`start`); :meth:`close` stops it. A context manager."""

    def __init__(self, process: subprocess.Popen) -> None:
        self.process = process

    def running(self) -> bool:
        """Whether the helper is still compiling."""
        return self.process.poll() is None

    def close(self) -> None:
        """Stop the helper if it is still running, and wait for it to exit."""
        p = self.process
        if p.poll() is not None:
            return
        p.terminate()
        try:
            p.wait(timeout=_STOP_WAIT_S)
        except subprocess.TimeoutExpired:
            p.kill()
            p.wait()

    def __enter__(self) -> Warmup:
        return self

    def __exit__(self, *exc) -> None:
        self.close()


def _switched_off() -> bool:
    return os.environ.get(ENV_SWITCH, "").strip().lower() in ("0", "no", "false", "off")


def kernels_cached() -> bool:
    """Whether numba's cache already holds the light kernel (then the other kernels of a
    command are almost surely there too); True when that cannot be told."""
    try:
        from render.light.integrator import _direct_light

        cache = _direct_light._cache
        return bool(cache._cache_file._load_index())
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
    wait until numba's cache holds it (at most a couple of minutes, and no longer than the
    helper runs) rather than compile it a second time; at once otherwise."""
    import time

    if not _running:
        return
    deadline = time.monotonic() + _LIGHT_WAIT_S
    while any(w.running() for w in _running) and not kernels_cached() and time.monotonic() < deadline:
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


def start(scene_path: str | os.PathLike) -> Warmup | None:
    """Start the helper for ``scene_path`` if it can help (see the module text), else None.
    It is stopped by :func:`stop_all` (at the latest when this process exits)."""
    if _switched_off() or _cores() < 2 or kernels_cached() or not _cache_writable():
        return None
    try:
        process = subprocess.Popen(
            [sys.executable, "-m", "render.warmup", str(scene_path)],
            stdin=subprocess.DEVNULL,
            stdout=subprocess.DEVNULL,
            stderr=subprocess.DEVNULL,
            env={**os.environ, ENV_SWITCH: "0"},
        )
    except OSError:
        return None
    if not _running:
        atexit.register(stop_all)
    _running.append(Warmup(process))
    return _running[-1]


# ------------------------------------------------------------------------------------------
# The helper's side
# ------------------------------------------------------------------------------------------


def _synthetic_view(study, setup, lights):
    """A :class:`render.study.RenderedView` of a few samples with the array types of a real
    render: every material, a luminous opening, the night sky, at street-lighting levels."""
    import numpy as np

    from render.light.integrator import LightBuffers, _material_gloss
    from render.study import RenderedView

    view = study.scene.views[0].name
    camera = study.camera(view, _WIDTH_PX)
    n = camera.width_px * camera.height_px
    mesh = study.mesh
    k = len(mesh.material_names)
    c = lights.n_channels
    response = (np.arange(n) % (k + 2) - 1).astype(np.int32)  # -1 sky, 0 … k-1, k opening
    emitter = np.where(response == k, 0, -1).astype(np.int32)
    # Street-lighting levels (a white diffuser at 0.05 … 0.35 cd/m²: mesopic, so that the rod
    # intrusion runs) and a bright opening (so that glare runs).
    value = np.where(response[:, None] == k, 2e4, 0.05 * (1 + np.arange(n)[:, None] % 7)).astype(np.float32)
    value = np.ascontiguousarray(np.broadcast_to(value, (n, c)), np.float32)
    buffers = LightBuffers(
        camera.width_px,
        camera.height_px,
        1,
        response,
        value,
        emitter,
        np.where(response >= 0, 0, -1).astype(np.int32),
        list(mesh.material_names),
        list(lights.channels),
        np.zeros((n, c), np.float32),
        _material_gloss(mesh),
    )
    return RenderedView(
        view, setup.name if setup else None, camera, buffers, lights, study.colorimetry(buffers, lights, setup)
    )


def warm(scene_path: str | os.PathLike) -> None:
    """Compile (or load) the kernels a rendering command on ``scene_path`` needs after its
    camera rays: the light kernels (:func:`render.light.integrator.compile_light_kernels`),
    colorimetry, the vision stage and the image writer, on a synthetic view of a few samples,
    then the calculation's intensity lookups. Each step stands alone: one that fails is left
    to the command."""
    import tempfile

    from render.study import Study

    study = Study(scene_path)
    names = [study.scene.compare_before, *study.scene.compare_options] if study.scene.compare_before else []
    setups = [study.setup(s) for s in names[:2]] or [study.setup(None)]
    lights = [study.lights(s) for s in setups]
    steps = []

    def light() -> None:
        from render.light.integrator import compile_light_kernels

        compile_light_kernels(lights[0], ("openings", "direct"))

    def vision() -> None:
        from render.output.images import write_png

        rendered = [_synthetic_view(study, s, x) for s, x in zip(setups, lights)]
        shared, adapted = study.display_both(rendered, study.observer)
        with tempfile.TemporaryDirectory(prefix="lampcast-warmup-") as tmp:
            write_png(Path(tmp) / "view.png", adapted[0].srgb8)

    def calc() -> None:
        from render.light.integrator import compile_light_kernels
        from render.light.photometry import intensity_cd

        compile_light_kernels(lights[0], ("pairs",))
        if lights[0].photometries:
            intensity_cd(lights[0].photometries[0], [0.0, 10.0], [0.0, 30.0])

    steps = [light, vision, calc]
    for step in steps:
        try:
            step()
        except Exception:  # left to the command, which compiles what it needs anyway
            pass


def _exit_with_parent() -> None:
    """End this helper when the command that started it has gone (it then belongs to
    another parent)."""
    parent = os.getppid()

    def watch() -> None:
        import time

        while os.getppid() == parent:
            time.sleep(0.5)
        os._exit(0)

    threading.Thread(target=watch, daemon=True).start()


def main(argv: list[str] | None = None) -> int:
    """``python -m render.warmup SCENE``: the helper process."""
    args = sys.argv[1:] if argv is None else argv
    if len(args) != 1:
        return 2
    # Stopped by the command: leave through Python so that a cache file being written is
    # removed rather than left half-written.
    signal.signal(signal.SIGTERM, lambda *_: sys.exit(0))
    _exit_with_parent()
    warm(args[0])
    return 0


if __name__ == "__main__":
    sys.exit(main())
