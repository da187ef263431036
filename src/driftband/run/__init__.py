"""The whole job of a study in one output folder: ``driftband run`` and ``driftband demo``.

- :mod:`~driftband.run.study`: study files (TOML) or flags → :class:`Study`;
- :mod:`~driftband.run.stages`: one function per stage, each over its stage's API;
- :mod:`~driftband.run.cache`: the stage cache, the run log and stage errors;
- :mod:`~driftband.run.driver`: :func:`run_study` (output folder, stage order, resume)
  and the demo study.
"""

from .cache import StageError
from .driver import STAGES, RunResult, demo_study, demo_study_path, output_paths, run_study
from .stages import (
    stage_bootstrap,
    stage_classify,
    stage_compare,
    stage_fit,
    stage_report,
    stage_spectra,
    study_model,
)
from .study import (
    STUDY_KEYS,
    BootstrapSettings,
    CompareSettings,
    Dataset,
    FitSettings,
    Study,
    check_files,
    read_study,
    study_from_dict,
)

__all__ = [
    "STAGES",
    "STUDY_KEYS",
    "BootstrapSettings",
    "CompareSettings",
    "Dataset",
    "FitSettings",
    "RunResult",
    "StageError",
    "Study",
    "check_files",
    "demo_study",
    "demo_study_path",
    "output_paths",
    "read_study",
    "run_study",
    "stage_bootstrap",
    "stage_classify",
    "stage_compare",
    "stage_fit",
    "stage_report",
    "stage_spectra",
    "study_from_dict",
    "study_model",
]
