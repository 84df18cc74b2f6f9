"""The report of one run folder: a single self-contained HTML page (plots as inline SVG, style
inline, no outside requests) and the exports beside it.

Four steps, each its own: read the folder once (``tuneopt.report.run_data``), collect what the
page shows (``tuneopt.report.run_page``), draw its figures (``tuneopt.report.run_figures``),
and write the files (the exports, the setup sheets and the page, here).
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from pathlib import Path
from typing import Any

from markupsafe import Markup

from tuneopt.model import Scenario
from tuneopt.report._templates import render
from tuneopt.report.exports import write_exports
from tuneopt.report.run_data import (
    RESULT_FILE,
    RunFolder,
    RunResult,
    read_result,
    read_run_folder,
    trial_metrics,
)
from tuneopt.report.run_figures import draw_run_figures
from tuneopt.report.run_page import HEADLINE_METRICS, RunPage, collect_run_page, flatten_inputs

__all__ = [
    "EXPORTS_DIR",
    "HEADLINE_METRICS",
    "REPORT_FILE",
    "RunReport",
    "folder_inputs",
    "render_run_report",
    "report_of",
    "trial_metrics",
    "write_page",
    "write_run_report",
]

REPORT_FILE = "report.html"
EXPORTS_DIR = "exports"
RANKED_CSV = "ranked.csv"  # written with result.json by the study (tuneopt.optimise.result)


@dataclass(frozen=True)
class RunReport:
    """The page ready to render: what it shows, its figures as SVG, and the files beside it
    that it lists (paths relative to the run folder)."""

    page: RunPage
    figures: Mapping[str, Markup | None]
    files: tuple[str, ...] = ()


def folder_inputs(folder: RunFolder) -> list[tuple[str, str]]:
    """The inputs the page echoes: the scenario and the plan as the run recorded them."""
    inputs = flatten_inputs(folder.settings["scenario"], "scenario")
    inputs += flatten_inputs(folder.settings["plan"], "plan")
    inputs.append(("realisations", str(folder.settings["realisations"])))
    return inputs


def render_run_report(report: RunReport) -> str:
    """The page as HTML."""
    return render(
        "run",
        title=report.page.title,
        r=report.page,
        figures=report.figures,
        files=report.files,
        cautions=report.page.cautions,
    )


def write_page(folder: Path, report: RunReport) -> Path:
    """Write ``report`` as ``folder/report.html`` (atomically); return its path."""
    path = folder / REPORT_FILE
    tmp = path.with_suffix(".html.tmp")
    tmp.write_text(render_run_report(report), encoding="utf-8")
    tmp.replace(path)
    return path


def _write_exports(export_dir: Path, result: RunResult, page: RunPage) -> list[str]:
    paths = write_exports(export_dir, result, page.rides)
    return [f"{export_dir.name}/{p.name}" for p in paths]


def report_of(
    scenario: Scenario,
    result: RunResult | Mapping[str, Any],
    seed: int,
    realisations: int,
    trials: Sequence[Mapping[str, float | None]],
    inputs: Sequence[tuple[str, str]] | None = None,
    ranks: Sequence[int] = (1,),
    export_dir: Path | None = None,
) -> RunReport:
    """The page from a study's pieces (for a caller without a run folder): collect, draw, and
    write the exports to ``export_dir`` when given. ``result``: result.json's data or a
    ``RunResult``; the other pieces as ``collect_run_page`` takes them."""
    data = read_result(result)
    page = collect_run_page(scenario, data, seed, realisations, trials, inputs, ranks)
    figures = draw_run_figures(page)
    files = _write_exports(export_dir, data, page) if export_dir is not None else []
    return RunReport(page, figures, (*files, RESULT_FILE, RANKED_CSV))


def write_run_report(run_dir: Path, ranks: Sequence[int] = (1,), exports: bool = True) -> Path:
    """Write ``report.html`` (and the exports) into ``run_dir``, with ``sheet.html`` (the setup
    sheets) beside it; return the page's path."""
    from tuneopt.report.setup_sheet import write_study_sheets

    folder = read_run_folder(run_dir)
    page = collect_run_page(
        folder.scenario,
        folder.result,
        folder.seed,
        folder.realisations,
        folder.trials,
        folder_inputs(folder),
        ranks,
    )
    figures = draw_run_figures(page)
    files = _write_exports(run_dir / EXPORTS_DIR, folder.result, page) if exports else []
    sheets = write_study_sheets(run_dir)
    return write_page(run_dir, RunReport(page, figures, (*sheets, *files, RESULT_FILE, RANKED_CSV)))
