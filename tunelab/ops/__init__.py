"""One function per shell verb; the CLI parses, calls one of these, and renders the result."""

from tunelab.ops._run import (
    RunRequest,
    RunResult,
    StudyStart,
    create_objective_study,
    join_objective_study,
    resume_study,
    run_objective_study,
    run_study,
)
from tunelab.ops._insight import FreezeResult, freeze_parameters, study_importance
from tunelab.ops._learn import Neighbour, similar_studies
from tunelab.ops._profile import ProfileReport, profile_data
from tunelab.ops._report import ReportResult, default_report_path, report_data, write_report
from tunelab.ops._ship import ExportResult, PredictResult, export_model, predict_file
from tunelab.ops._status import StudyDetail, StudyLine, TrialLine, list_studies, study_detail

__all__ = [
    "ExportResult", "ProfileReport", "profile_data", "FreezeResult", "freeze_parameters", "study_importance", "create_objective_study", "join_objective_study", "PredictResult", "RunRequest", "RunResult", "StudyDetail", "StudyLine", "StudyStart",
    "TrialLine", "export_model", "list_studies", "predict_file", "resume_study", "run_objective_study", "run_study", "study_detail",
    "ReportResult", "default_report_path", "report_data", "write_report", "Neighbour", "similar_studies",
]
