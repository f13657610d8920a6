"""lampcast: spectral night-time street previews under candidate street lamps.

The package is laid out in the order data flows through it:

scene -> geometry -> rays -> light -> colour -> vision -> analysis -> output

See DEVELOPERS.md at the repository root for the map of modules.
"""

import os as _os

from render.resources import installed_version as _installed_version
from render.resources import numba_cache_dir as _numba_cache_dir

__all__ = ["__version__"]


def __getattr__(name: str) -> str:
    """``render.__version__``, read from the installed metadata when first asked for."""
    if name == "__version__":
        return _installed_version()
    raise AttributeError(f"module 'render' has no attribute {name!r}")


# Before any kernel module imports numba: a read-only installation caches compiled kernels in
# a per-user folder (see render.resources.numba_cache_dir).
_cache = _numba_cache_dir()
if _cache is not None:
    _os.environ["NUMBA_CACHE_DIR"] = str(_cache)
del _cache
# GNU OpenMP (numba's "omp" threading layer) keeps its idle threads spinning between parallel
# kernels by default; between a render's kernels run numpy and Python, so the spinning thread
# took a core for nothing (about 0.5 processor-seconds per 960×540 render of the demo, and a
# core another job could use). Passive threads sleep instead. The user's setting wins.
_os.environ.setdefault("OMP_WAIT_POLICY", "PASSIVE")
