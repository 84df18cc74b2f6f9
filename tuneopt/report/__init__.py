"""Reports: tables, plots, pages and exports built from results (numbers first, drawing second).

What other packages use is named here. Names load on first use: ``tuneopt check`` asks for the
static check's text and should not pay for the simulator, pandas or matplotlib.
"""

from __future__ import annotations

from importlib import import_module
from typing import TYPE_CHECKING

if TYPE_CHECKING:
    from tuneopt.report._templates import CAUTIONS, STYLE
    from tuneopt.report.comparison import (
        COMPARISON_FILE,
        compare_setting_rows,
        score_matrix,
        write_comparison,
        write_comparison_page,
    )
    from tuneopt.report.day_pages import render_day_page
    from tuneopt.report.day_scenario import (
        SETTINGS_FILE,
        day_settings_text,
        read_chosen,
        read_study,
        successor_path,
        toml_text,
        write_successor,
    )
    from tuneopt.report.fit_page import write_fit_page
    from tuneopt.report.ranked_table import print_ranking, ranking_columns
    from tuneopt.report.ride_log_page import write_ride_log_page
    from tuneopt.report.run_data import (
        RunFolder,
        RunResult,
        SetupEntry,
        journal_trial_metrics,
        read_result,
        read_run_folder,
        trial_metrics,
    )
    from tuneopt.report.run_figures import draw_run_figures
    from tuneopt.report.run_page import HEADLINE_METRICS, RunPage, collect_run_page
    from tuneopt.report.run_report import (
        EXPORTS_DIR,
        REPORT_FILE,
        RunReport,
        render_run_report,
        report_of,
        write_page,
        write_run_report,
    )
    from tuneopt.report.setup_sheet import (
        PLAN_FILE,
        SHEET_FILE,
        build_setup_sheets,
        setup_sheet_lines,
        write_setup_sheets,
        write_study_sheets,
    )
    from tuneopt.report.static_text import STATIC_CHECK_CAUTION, check_data, print_static_check
    from tuneopt.report.terrain_plot import draw_segment_plot, segment_plot_data
    from tuneopt.report.test_day import build_test_day, dialed_rows, test_day_lines

# public name -> the module (under tuneopt.report) that defines it. A name may not be that of
# a module here (fit_page.fit_page): importing the module would set the package's attribute.
_HOMES = {
    "CAUTIONS": "_templates",
    "STYLE": "_templates",
    "COMPARISON_FILE": "comparison",
    "compare_setting_rows": "comparison",
    "score_matrix": "comparison",
    "write_comparison": "comparison",
    "write_comparison_page": "comparison",
    "render_day_page": "day_pages",
    "SETTINGS_FILE": "day_scenario",
    "day_settings_text": "day_scenario",
    "read_chosen": "day_scenario",
    "read_study": "day_scenario",
    "successor_path": "day_scenario",
    "toml_text": "day_scenario",
    "write_successor": "day_scenario",
    "write_fit_page": "fit_page",
    "print_ranking": "ranked_table",
    "ranking_columns": "ranked_table",
    "write_ride_log_page": "ride_log_page",
    "RunFolder": "run_data",
    "RunResult": "run_data",
    "SetupEntry": "run_data",
    "journal_trial_metrics": "run_data",
    "read_result": "run_data",
    "read_run_folder": "run_data",
    "trial_metrics": "run_data",
    "draw_run_figures": "run_figures",
    "HEADLINE_METRICS": "run_page",
    "RunPage": "run_page",
    "collect_run_page": "run_page",
    "EXPORTS_DIR": "run_report",
    "REPORT_FILE": "run_report",
    "RunReport": "run_report",
    "render_run_report": "run_report",
    "report_of": "run_report",
    "write_page": "run_report",
    "write_run_report": "run_report",
    "PLAN_FILE": "setup_sheet",
    "SHEET_FILE": "setup_sheet",
    "build_setup_sheets": "setup_sheet",
    "setup_sheet_lines": "setup_sheet",
    "write_setup_sheets": "setup_sheet",
    "write_study_sheets": "setup_sheet",
    "STATIC_CHECK_CAUTION": "static_text",
    "check_data": "static_text",
    "print_static_check": "static_text",
    "draw_segment_plot": "terrain_plot",
    "segment_plot_data": "terrain_plot",
    "build_test_day": "test_day",
    "dialed_rows": "test_day",
    "test_day_lines": "test_day",
}

__all__ = [
    "CAUTIONS",
    "COMPARISON_FILE",
    "EXPORTS_DIR",
    "HEADLINE_METRICS",
    "PLAN_FILE",
    "REPORT_FILE",
    "RunFolder",
    "RunPage",
    "RunReport",
    "RunResult",
    "SETTINGS_FILE",
    "SHEET_FILE",
    "STATIC_CHECK_CAUTION",
    "STYLE",
    "SetupEntry",
    "build_setup_sheets",
    "build_test_day",
    "check_data",
    "collect_run_page",
    "compare_setting_rows",
    "day_settings_text",
    "dialed_rows",
    "draw_run_figures",
    "draw_segment_plot",
    "journal_trial_metrics",
    "print_ranking",
    "print_static_check",
    "ranking_columns",
    "read_chosen",
    "read_result",
    "read_run_folder",
    "read_study",
    "render_day_page",
    "render_run_report",
    "report_of",
    "score_matrix",
    "segment_plot_data",
    "setup_sheet_lines",
    "successor_path",
    "test_day_lines",
    "toml_text",
    "trial_metrics",
    "write_comparison",
    "write_comparison_page",
    "write_fit_page",
    "write_page",
    "write_ride_log_page",
    "write_run_report",
    "write_setup_sheets",
    "write_study_sheets",
    "write_successor",
]


def __getattr__(name: str) -> object:
    home = _HOMES.get(name)
    if home is None:
        raise AttributeError(f"module {__name__!r} has no attribute {name!r}")
    value = getattr(import_module(f"{__name__}.{home}"), name)
    globals()[name] = value  # found directly from now on
    return value


def __dir__() -> list[str]:
    return sorted({*globals(), *__all__})
