"""Resource limits (render/limits.py): views too large for the limits or for memory are refused
before anything is allocated, with a message naming the view or option and the limit.

Source: the reproducers of the project's hostile-input review (``render --width 1000000`` tried
to allocate about 2 TiB); the limits themselves are the project's documented choices.
"""

from __future__ import annotations

from pathlib import Path

import pytest

from render import limits
from render.cli import main
from render.errors import InputError

SCENE = Path(__file__).resolve().parents[1] / "scenes" / "tests" / "minimal_street.toml"


@pytest.mark.parametrize(
    ("option", "value", "limit"),
    [("--width", "1000000", limits.MAX_IMAGE_SIDE_PX), ("--spp", "100000", limits.MAX_SAMPLES_PER_PIXEL)],
)
def test_render_options_over_the_limit_exit_2(option, value, limit, tmp_path, capsys):
    assert main(["render", str(SCENE), option, value, "--out", str(tmp_path), "--quiet"]) == 2
    err = capsys.readouterr().err
    assert "Traceback" not in err
    assert f"{limit:,}" in err and "--width/--spp" in err
    assert not any(tmp_path.iterdir())


def test_memory_estimate_refuses_before_start():
    estimate = limits.render_memory_estimate(1920, 1080, 4, 5)
    assert estimate.bytes > 1920 * 1080 * 4 * 100  # at least 100 bytes per camera sample
    with pytest.raises(InputError) as err:
        limits.check_memory(estimate, "scene.toml", "view 'x'", available=estimate.bytes // 2)
    assert "view 'x'" in str(err.value) and "GiB" in str(err.value)
    limits.check_memory(estimate, "scene.toml", "view 'x'", available=estimate.bytes * 2)  # fits: no error


def test_camera_samples_bound_the_index_type():
    # 8192 x 8192 pixels at 64 samples is 4.3e9 samples: past int32 indices whatever the memory.
    with pytest.raises(InputError) as err:
        limits.check_render_size(8192, 8192, 64, 1, "scene.toml", "view 'x'")
    assert "2,147,483,647" in str(err.value)


@pytest.mark.parametrize("value", [float("nan"), float("inf"), 10**400, -1, "many"])
def test_check_count_rejects_non_counts(value):
    with pytest.raises(InputError):
        limits.check_count(value, 100, "f.ies", "line 3", "the number of angles")
    assert limits.check_count(100, 100, "f.ies", "line 3", "the number of angles") == 100
