"""Every file reagentplan writes (CSV, JSON, xlsx), written atomically.  The stages
return data; only this package writes it."""

from .files import save_workbook, staged_output, write_bytes, write_csv, write_json
from .plan_workbook import write_plan_workbook
from .run import input_warnings, plan_summary, run_summary, write_plan_files, write_run
from .study import write_study

__all__ = ["save_workbook", "staged_output", "write_bytes", "write_csv", "write_json", "run_summary",
           "plan_summary", "input_warnings", "write_plan_files", "write_plan_workbook", "write_run",
           "write_study"]
