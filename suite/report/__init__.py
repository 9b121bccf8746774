"""Reports of a store: Markdown and LaTeX tables, PNG/SVG figures, the solver ladder, a manifest.

:func:`write_report` is the one entry point (the ``lyapbench report`` command calls it).
"""

from .figures import critical_difference, error_vs_horizon, sweep_curve, work_precision
from .render import check_out_dir, write_report
from .style import PALETTE
from .tables import Table, TableRow, build_tables, cell_frame, rank_tests, table_latex, table_markdown
from .workplane import REPORT_LADDERS, REPORT_METHODS, cell_speedups, forecast_ladders

__all__ = [
    "PALETTE", "REPORT_LADDERS", "REPORT_METHODS", "Table", "TableRow", "build_tables", "cell_frame",
    "cell_speedups", "check_out_dir", "critical_difference", "error_vs_horizon", "forecast_ladders",
    "rank_tests", "sweep_curve", "table_latex", "table_markdown", "work_precision", "write_report",
]
