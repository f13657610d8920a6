"""Packaging: bundled data, the version's one source, the numba cache folder, the wheel's contents.

Sources: Python Packaging User Guide, "Writing your pyproject.toml" (the version lives in
``[project]``) and the wheel format (PEP 427: a wheel is a zip archive of the installed files);
numba documentation, ``NUMBA_CACHE_DIR``; XDG Base Directory Specification (``XDG_CACHE_HOME``).
"""

from __future__ import annotations

import importlib.metadata
import shutil
import subprocess
import sys
import tomllib
import zipfile
from pathlib import Path

import render
from render.resources import bundled_path, demo_scene_path, numba_cache_dir, user_cache_dir

ROOT = Path(__file__).resolve().parents[1]


def test_version_comes_from_pyproject():
    # The installed metadata (built from pyproject.toml) is the one source of the version.
    declared = tomllib.loads((ROOT / "pyproject.toml").read_text())["project"]["version"]
    assert importlib.metadata.version("lampcast") == declared
    assert render.__version__ == declared


def test_bundled_data_are_the_source_files():
    # The bundled library and demo are the top-level folders' files, byte for byte.
    for src in sorted((ROOT / "materials").glob("*.csv")):
        assert (bundled_path("materials") / src.name).read_bytes() == src.read_bytes()
    assert demo_scene_path().read_bytes() == (ROOT / "scenes" / "demo" / "linden_row.toml").read_bytes()


def test_numba_cache_dir_choice(tmp_path):
    env = {"XDG_CACHE_HOME": str(tmp_path / "cache")}
    # The user's own NUMBA_CACHE_DIR always wins.
    assert numba_cache_dir({**env, "NUMBA_CACHE_DIR": "/somewhere"}, tmp_path, lambda p: False) is None
    # A writable package folder keeps numba's own __pycache__ cache.
    assert numba_cache_dir(env, tmp_path, lambda p: True) is None
    # A read-only installation caches per user, per version.
    chosen = numba_cache_dir(env, tmp_path, lambda p: False)
    assert chosen == tmp_path / "cache" / "lampcast" / f"numba-{render.__version__}"
    assert user_cache_dir({}) == Path.home() / ".cache" / "lampcast"


def test_read_only_install_sets_numba_cache_dir(tmp_path):
    # End to end in a child process: an unwritable package folder (simulated, since the tests may
    # run as root, who can write anywhere) must lead to NUMBA_CACHE_DIR being set on import.
    code = (
        "import os, render.resources as r; r._writable = lambda p: False; "
        "import importlib, render; importlib.reload(render); print(os.environ['NUMBA_CACHE_DIR'])"
    )
    env = {"PATH": "/usr/bin:/bin", "HOME": str(tmp_path), "XDG_CACHE_HOME": str(tmp_path / "c")}
    out = subprocess.run([sys.executable, "-c", code], env=env, capture_output=True, text=True, check=True)
    assert out.stdout.strip() == str(tmp_path / "c" / "lampcast" / f"numba-{render.__version__}")


def test_wheel_carries_the_data(tmp_path):
    # Build the wheel the way `pip install .` does, from a clean copy of the source tree (no stale
    # build/ folder), and look inside (PEP 427).
    src = tmp_path / "src"
    skip = shutil.ignore_patterns(".git", ".venv", "build", "dist", "outputs", "__pycache__", "*.egg-info", ".*cache")
    shutil.copytree(ROOT, src, symlinks=True, ignore=skip)
    subprocess.run(
        [
            sys.executable,
            "-m",
            "pip",
            "wheel",
            "--no-deps",
            "--no-build-isolation",
            "-q",
            "-w",
            str(tmp_path),
            str(src),
        ],
        check=True,
        capture_output=True,
    )
    (wheel,) = tmp_path.glob("lampcast-*.whl")
    names = set(zipfile.ZipFile(wheel).namelist())
    for csv in (ROOT / "materials").glob("*.csv"):
        assert f"render/bundled/materials/{csv.name}" in names
    assert "render/bundled/scenes/demo/linden_row.toml" in names
    assert any(n.startswith("render/data/photometry/") and n.endswith(".ies") for n in names)
    for template in (ROOT / "render" / "output" / "report" / "templates").iterdir():
        assert f"render/output/report/templates/{template.name}" in names  # the report's template files
    assert not any(n.startswith("tests/") for n in names)
