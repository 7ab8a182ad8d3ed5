"""Stage runners: each computes one part of the analysis, writes its files (CSV, JSON, PNG)
atomically and returns a frozen result dataclass (its JSON file is that result, serialised by
:mod:`fields.io.serialize`). The CLI and the report call these; the physics lives in the modules
they import.

One module per stage: :mod:`.curves`, :mod:`.stability`, :mod:`.coil`, :mod:`.sensors`,
:mod:`.control`, :mod:`.exports`; :mod:`.report` runs them all, :mod:`.figures` makes the
README's pictures.
"""

from fields.studies.stages.coil import CoilResult, run_coil
from fields.studies.stages.control import ControlResult, run_control
from fields.studies.stages.curves import CurvesResult, run_curves
from fields.studies.stages.exports import ExportsResult, run_exports
from fields.studies.stages.figures import make_figures
from fields.studies.stages.report import STAGES, CheckResult, ReportRun, run_check, run_report
from fields.studies.stages.sensors import SensorsResult, run_sensors
from fields.studies.stages.stability import StabilityResult, run_stability

__all__ = ["STAGES", "CheckResult", "CoilResult", "ControlResult", "CurvesResult", "ExportsResult", "ReportRun",
           "SensorsResult", "StabilityResult", "make_figures", "run_check", "run_coil", "run_control", "run_curves",
           "run_exports", "run_report", "run_sensors", "run_stability"]
