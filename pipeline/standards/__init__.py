"""Reference standards: lots, expected values, tolerance verdicts and uncertainty budgets.

Expected values and verdicts are computed in SQL by the view `check_results_live` and stored
in the table `check_results`; the Python functions here state the same formulas for tests and
for the uncertainty budget. Every writer calls `sync_standards_settings(con, settings)` before reading `check_results`.
"""

from pipeline.standards.parameters import sync_standards_settings

__all__ = ["sync_standards_settings"]
