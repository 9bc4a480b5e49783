"""gainboard.core: the numeric library behind gainboard.

Pure functions of arrays and small frozen dataclasses; no user-interface imports.
This module is the table of contents of the public API: every name below is
defined in one private module and re-exported here.
"""

from ._errors import *  # noqa: F401,F403
from ._plant import *  # noqa: F401,F403
from ._specs import *  # noqa: F401,F403
from ._plant_file import *  # noqa: F401,F403
from ._structure import *  # noqa: F401,F403
from ._closed_loop import *  # noqa: F401,F403
from ._placement import *  # noqa: F401,F403
from ._single_entry import *  # noqa: F401,F403
from ._responses import *  # noqa: F401,F403
from ._spec_checks import *  # noqa: F401,F403
from ._lqr import *  # noqa: F401,F403
from ._margins import *  # noqa: F401,F403
from ._loop_frequency import *  # noqa: F401,F403
from ._integral_action import *  # noqa: F401,F403
from ._sampling_check import *  # noqa: F401,F403
from ._emulation import *  # noqa: F401,F403
from ._view_ranges import *  # noqa: F401,F403
from ._design_evaluation import *  # noqa: F401,F403
from ._noise import *  # noqa: F401,F403
from ._observability import *  # noqa: F401,F403
from ._reduced_estimator import *  # noqa: F401,F403
from ._estimator import *  # noqa: F401,F403
from ._kalman import *  # noqa: F401,F403
from ._compensator import *  # noqa: F401,F403
from ._compensator_responses import *  # noqa: F401,F403
from ._compensator_evaluation import *  # noqa: F401,F403
from ._compensator_sampling import *  # noqa: F401,F403
from ._expressions import *  # noqa: F401,F403
from ._plant_family import *  # noqa: F401,F403
from ._robustness import *  # noqa: F401,F403
from ._monte_carlo import *  # noqa: F401,F403
from ._distributed import *  # noqa: F401,F403  (imports Dask only when a run uses it)
