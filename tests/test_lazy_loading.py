"""What quick commands load: light imports, and libraries read once but again when edited."""

from __future__ import annotations

import shutil
import subprocess
import sys

from render.colour.materials import default_materials_dir, material_library


def test_scene_loading_imports_no_display_stage():
    # The scene loader reads observer settings from render.vision.observer; that must not pull
    # in the display stage (scipy.ndimage, the pipeline) that only rendering needs.
    code = (
        "import sys, render.vision.observer; "
        "print('render.vision.pipeline' in sys.modules, 'scipy.ndimage' in sys.modules)"
    )
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True).stdout
    assert out.split() == ["False", "False"]
    from render.vision import DisplayResult, ObserverSettings  # the public names still resolve

    assert DisplayResult.__name__ == "DisplayResult" and ObserverSettings.__name__ == "ObserverSettings"


def test_material_library_is_read_again_after_an_edit(tmp_path):
    folder = tmp_path / "materials"
    shutil.copytree(default_materials_dir(), folder)
    first = material_library(folder)
    assert material_library(folder)["grass"] is first["grass"]  # read once
    path = folder / "grass.csv"
    text = path.read_text(encoding="utf-8")
    path.write_text(text.replace("# name: ", "# name: edited ", 1), encoding="utf-8")
    assert material_library(folder)["grass"].name.startswith("edited ")
