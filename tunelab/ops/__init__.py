"""One function per shell verb; the CLI parses, calls one of these, and renders the result."""

from tunelab.ops._insight import (
    DecisionOptions,
    FreezeResult,
    decisions_for,
    freeze_parameters,
    study_evidence,
    study_importance,
)
from tunelab.ops._learn import Neighbour, similar_studies
from tunelab.ops._portfolio import PortfolioStarts, data_shape, portfolio_starts
from tunelab.ops._profile import ProfileReport, built_space, profile_data
from tunelab.ops._report import ReportResult, default_report_path, report_data, write_report
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
from tunelab.ops._ship import ExportResult, PredictResult, export_model, predict_file
from tunelab.ops._status import StudyDetail, StudyLine, TrialLine, list_studies, study_detail

__all__ = [
    "DecisionOptions", "ExportResult", "FreezeResult", "Neighbour", "PortfolioStarts", "PredictResult",
    "ProfileReport", "ReportResult", "built_space", "data_shape", "portfolio_starts",
    "RunRequest", "RunResult", "StudyDetail", "StudyLine", "StudyStart", "TrialLine", "create_objective_study",
    "decisions_for", "default_report_path", "export_model", "freeze_parameters", "join_objective_study",
    "list_studies", "predict_file", "profile_data", "report_data", "resume_study", "run_objective_study",
    "run_study", "similar_studies", "study_detail", "study_evidence", "study_importance", "write_report",
]
