"""Design studies: many scenes and options, computed on Dask, gathered in one table.

* :mod:`.spec` -- study files (scenes, a template swept over key paths, what to compute).
* :mod:`.variants` -- the scene variants and their content keys.
* :mod:`.evaluate` -- one task: a variant built once, every setup evaluated (calculation,
  energy, sky, optional colour figures and thumbnails).
* :mod:`.table` -- rows kept as they finish, the tidy table as CSV and Parquet.
* :mod:`.rank` -- ranking by the objective and the Pareto front.
* :mod:`.run` -- running it serially or on a Dask cluster, resuming what was done.

Not to be confused with :class:`render.study.Study`, one scene made ready to render.
"""

from render.studies.run import StudyRun, run_study
from render.studies.spec import StudySpec, read_study

__all__ = ["StudyRun", "StudySpec", "read_study", "run_study"]
