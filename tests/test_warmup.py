"""The helper process that compiles a command's later kernels on a first run (render.warmup).

Checks of behaviour, not of physics: the helper must compile the very specialisations the
command looks up (else it only costs time), must end with the command, and must not start
when it cannot help. Common practice, no source.
"""

from __future__ import annotations

import json
import os
import subprocess
import sys
import textwrap
import time
from pathlib import Path

import pytest

import render.warmup as warmup
from render.resources import demo_scene_path

ROOT = Path(__file__).resolve().parents[1]

# Record the top-level kernels numba compiles (not those loaded from its cache) while running
# CODE, and print their names as JSON on the last line.
_LISTENER = textwrap.dedent(
    """
    import json, sys, threading
    from numba.core import event
    compiled, depth = [], threading.local()
    class Listener(event.Listener):
        def on_start(self, ev):
            depth.n = getattr(depth, "n", 0) + 1
        def on_end(self, ev):
            depth.n -= 1
            if depth.n == 0:
                compiled.append(ev.data["dispatcher"].py_func.__qualname__)
    event.register("numba:compile", Listener())
    {code}
    print(json.dumps(compiled))
    """
)


def _compiled_by(code: str, cache: Path, tmp: Path) -> list[str]:
    env = {**os.environ, "NUMBA_CACHE_DIR": str(cache), warmup.ENV_SWITCH: "0", "PYTHONPATH": str(ROOT)}
    done = subprocess.run(
        [sys.executable, "-c", _LISTENER.format(code=code)],
        cwd=tmp,
        env=env,
        capture_output=True,
        text=True,
        timeout=900,
        check=True,
    )
    return json.loads(done.stdout.strip().splitlines()[-1])


def test_helper_compiles_what_the_command_then_loads(tmp_path):
    """With a fresh kernel cache, the kernels the helper compiles for the demo are loaded from
    the cache by the demo itself (a tiny one, with interreflected light), not compiled again.
    Breaking the helper's inputs (int64 opening indices for the openings kernel, say, or a
    view's float32 points for the path tracer) makes the demo compile them again, which this
    check catches (the tiny demo sees openings at 96 pixels wide)."""
    cache = tmp_path / "numba"
    scene = str(demo_scene_path())
    helper = _compiled_by(f"from render.warmup import warm\nwarm({scene!r}, None, 1)", cache, tmp_path)
    assert "_direct_light" in helper and "_emitter_values" in helper and "_candidates" in helper
    assert "trace_paths" in helper
    out = tmp_path / "out"
    command = _compiled_by(
        "from render.cli import main\n"
        f"assert main(['demo', '--width', '96', '--spp', '1', '--bounces', '1', '--out', {str(out)!r}, '-q']) == 0",
        cache,
        tmp_path,
    )
    # The rod-intrusion kernel's array flags (read-only views or copies) follow the image's
    # dtype path through the glare step, which a synthetic view does not reproduce.
    again = set(helper) & set(command) - {"_rod_kernel"}
    assert not again, f"compiled by the helper and again by the command: {sorted(again)}"
    # The command's own early kernels (the camera rays'; the BVH's build kernel is the
    # helper's too here, since its path tracer step builds the BVH).
    assert "_ray_kernel" in command


def test_helper_not_started_when_it_cannot_help(monkeypatch):
    monkeypatch.setenv(warmup.ENV_SWITCH, "0")
    assert warmup.start(demo_scene_path()) is None
    monkeypatch.delenv(warmup.ENV_SWITCH)
    monkeypatch.setattr(warmup, "kernels_cached", lambda bounces=0: True)
    assert warmup.start(demo_scene_path()) is None
    assert warmup.start(demo_scene_path(), 3) is None


def test_helper_stops_with_the_command(monkeypatch, tmp_path):
    """The command line's handler stops a helper still running when the command ends."""
    started: list[warmup.Warmup] = []
    real_start = warmup.start

    def start(scene_path, bounces=None):
        w = real_start(scene_path, bounces)
        started.append(w)
        return w

    monkeypatch.setattr(warmup, "kernels_cached", lambda bounces=0: False)
    monkeypatch.setattr(warmup, "start", start)
    from render.cli import main

    t0 = time.monotonic()
    assert main(["demo", "--width", "8", "--spp", "1", "--view", "footway", "--out", str(tmp_path / "o"), "-q"]) == 0
    assert started and started[0] is not None
    assert started[0].process.poll() is not None, "the helper outlived the command"
    assert time.monotonic() - t0 < 600


def test_close_stops_a_running_helper():
    w = warmup.Warmup(subprocess.Popen([sys.executable, "-c", "import time; time.sleep(60)"]))
    assert w.running()
    t0 = time.monotonic()
    w.close()
    assert not w.running() and time.monotonic() - t0 < 10


@pytest.mark.parametrize("value", ["0", "no", "off", "False"])
def test_switch_values(monkeypatch, value):
    monkeypatch.setenv(warmup.ENV_SWITCH, value)
    assert warmup._switched_off()


def test_steps_are_shared_front_and_back(monkeypatch, tmp_path):
    """Each step is taken by one process only: the helper from the front of STEPS, the
    waiting command from the back; a step another process took is skipped."""
    ran: list[str] = []
    monkeypatch.setattr(warmup._Steps, "run", lambda self, step: ran.append(step))
    board = tmp_path / "steps"
    board.mkdir()
    w = warmup.Warmup(subprocess.Popen([sys.executable, "-c", "pass"]), str(demo_scene_path()), board)
    assert w.assist() and ran == [warmup.STEPS[-1]] and w.done(warmup.STEPS[-1])
    warmup.warm(demo_scene_path(), board)  # the helper's side: every step but the one taken
    assert ran == [warmup.STEPS[-1], *warmup.STEPS[:-1]]
    assert all(w.done(s) for s in warmup.STEPS)
    assert not w.assist() and len(ran) == len(warmup.STEPS)  # none left
    w.close()
    assert not board.exists()


def test_command_waits_for_the_helpers_light_kernel(monkeypatch, tmp_path):
    """The command waits while the helper compiles the light kernel, however long (no fixed
    cut-off that would make it compile the kernel a second time), compiling the other steps
    meanwhile, and goes on as soon as the helper marks the light kernel done."""
    board = tmp_path / "steps"
    board.mkdir()
    for step in warmup.STEPS:  # every step taken, as by a helper
        warmup._claim(board, step)
    # A helper that marks the light kernel done after a while.
    marker = board / "light.done"
    code = f"import time, pathlib; time.sleep(1.5); pathlib.Path({str(marker)!r}).touch(); time.sleep(60)"
    w = warmup.Warmup(subprocess.Popen([sys.executable, "-c", code]), str(demo_scene_path()), board)
    monkeypatch.setattr(warmup, "_running", [w])
    monkeypatch.setattr(warmup, "_LIGHT_WAIT_S", 30.0)
    t0 = time.monotonic()
    warmup.wait_for_light_kernel()
    waited = time.monotonic() - t0
    assert marker.exists() and w.running() and 1.0 <= waited < 20.0
    w.close()
    assert not w.running()


def test_command_waits_for_a_step_the_helper_is_compiling(monkeypatch, tmp_path):
    """Where the command first needs a step's kernels it waits while the helper compiles that
    step (not compiling them side by side), and takes a step nobody has taken, so that the
    helper skips it (common practice, no source)."""
    board = tmp_path / "steps"
    board.mkdir()
    warmup._claim(board, "colour")  # taken by the helper, which finishes it after a while
    marker = board / "colour.done"
    code = f"import time, pathlib; time.sleep(1.5); pathlib.Path({str(marker)!r}).touch(); time.sleep(60)"
    w = warmup.Warmup(subprocess.Popen([sys.executable, "-c", code]), str(demo_scene_path()), board)
    monkeypatch.setattr(warmup, "_running", [w])
    t0 = time.monotonic()
    warmup.before_use("colour")
    assert marker.exists() and time.monotonic() - t0 >= 1.0
    warmup.before_use("vision")  # nobody's yet: the command's now
    assert w.done("vision") and not warmup._claim(board, "vision")
    w.close()
