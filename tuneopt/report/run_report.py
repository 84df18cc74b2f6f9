"""The report of one run folder: a single self-contained HTML page (plots as inline SVG, style
inline, no outside requests) and the exports beside it.

Every number about the ranked setups comes from result.json (the one source); the traces,
histograms and phase splits come from riding the current and the selected setups again over
the study's first terrain realisation.
"""

from __future__ import annotations

import json
from collections.abc import Sequence
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from markupsafe import Markup

from tuneopt.model import InputError, Scenario
from tuneopt.model._quantity import convert
from tuneopt.physics.static_check import StaticCheck, static_check
from tuneopt.report import ride_plots as rp
from tuneopt.report._svg import figure_svg
from tuneopt.report._templates import render
from tuneopt.report.exports import write_exports
from tuneopt.report.fresh_terrain import fresh_terrain_lines, setting_notes
from tuneopt.report.ranked_table import ranking_columns
from tuneopt.report.rides import TRACE_RATE, SetupRide, ride_setups
from tuneopt.report.tradeoff_plot import draw_tradeoff, tradeoff_data

__all__ = [
    "REPORT_FILE",
    "EXPORTS_DIR",
    "HEADLINE_METRICS",
    "MetricRow",
    "RunReport",
    "SettingRow",
    "build_run_report",
    "flatten_inputs",
    "headline_metrics",
    "journal_trial_metrics",
    "report_of",
    "trial_metrics",
    "write_page",
    "recommendation_rows",
    "render_run_report",
    "static_rows",
    "write_run_report",
]

REPORT_FILE = "report.html"
EXPORTS_DIR = "exports"

# (metric key, label with unit, scale to the shown unit, format)
HEADLINE_METRICS = (
    ("front_load_variation", "front tyre load variation (std / mean) [%]", 100.0, "{:.1f}"),
    ("rear_load_variation", "rear tyre load variation (std / mean) [%]", 100.0, "{:.1f}"),
    ("front_unloaded_share", "front tyre unloaded [% of time]", 100.0, "{:.1f}"),
    ("rear_unloaded_share", "rear tyre unloaded [% of time]", 100.0, "{:.1f}"),
    ("front_bottom_outs_per_min", "fork bottom-outs [1/min]", 1.0, "{:.2f}"),
    ("rear_bottom_outs_per_min", "shock bottom-outs [1/min]", 1.0, "{:.2f}"),
    ("front_rim_strikes_per_min", "front rim strikes [1/min]", 1.0, "{:.2f}"),
    ("rear_rim_strikes_per_min", "rear rim strikes [1/min]", 1.0, "{:.2f}"),
    ("front_grip_unmet_braking", "front grip asked and not there, braking [%]", 100.0, "{:.1f}"),
    ("front_grip_unmet_cornering", "front grip asked and not there, cornering [%]", 100.0,
     "{:.1f}"),
    ("kick_speed", "rebound speed after deep hits [m/s]", 1.0, "{:.2f}"),
    ("peak_dive_travel", "deepest fork dive while braking [mm]", 1e3, "{:.0f}"),
    ("pitch_rate_rms", "pitch rate RMS [rad/s]", 1.0, "{:.3f}"),
    ("rider_vibration_rms", "vibration at the rider, Wk RMS [m/s²]", 1.0, "{:.2f}"),
)


@dataclass(frozen=True)
class SettingRow:
    key: str
    label: str
    now: str
    recommended: str
    changed: bool
    note: str = ""


@dataclass(frozen=True)
class MetricRow:
    key: str
    label: str
    now: str
    recommended: str
    change: str


def recommendation_rows(result: dict[str, Any]) -> list[SettingRow]:
    """The winner's settings in trade units beside the current ones (result.json's strings)."""
    if not result["ranked"]:
        return []
    best = result["ranked"][0]["settings"]
    now = (result.get("baseline") or {}).get("settings", {})
    labels = result.get("labels", {})
    notes = setting_notes(result)
    return [
        SettingRow(
            k, labels.get(k, k), now.get(k, "-"), v, now.get(k) not in (None, v), notes.get(k, "")
        )
        for k, v in best.items()
    ]


def _fmt(value: float | None, scale: float, fmt: str) -> str:
    return "-" if value is None else fmt.format(value * scale)


def _percent_change(change: float) -> str:
    """+12 %, -3 %; a change that rounds to nothing reads 0 % rather than -0 %."""
    text = f"{change:+.0%}"
    return "0%" if text in ("+0%", "-0%") else text


def headline_metrics(result: dict[str, Any]) -> list[MetricRow]:
    """Main metrics of the current and the recommended setup with the relative change."""
    if not result["ranked"]:
        return []
    best = result["ranked"][0]
    now = (result.get("baseline") or {}).get("metrics", {})
    rows = []
    for key, label, scale, fmt in HEADLINE_METRICS:
        change = best.get("change_vs_baseline", {}).get(key)
        rows.append(
            MetricRow(
                key,
                label,
                _fmt(now.get(key), scale, fmt),
                _fmt(best["metrics"].get(key), scale, fmt),
                "-" if change is None else _percent_change(change),
            )
        )
    return rows


def static_rows(checks: Sequence[tuple[str, StaticCheck]]) -> tuple[list[str], list[list[str]]]:
    """Headers and rows of the static check, one column pair (fork, shock) per setup."""
    headers = [""]
    for label, _ in checks:
        headers += [f"{label}: fork", f"{label}: shock"]

    def both(fn: Any) -> list[str]:
        cells = []
        for _, c in checks:
            cells += [fn(c.front), fn(c.rear)]
        return cells

    def each(fn: Any) -> list[str]:
        cells = []
        for _, c in checks:
            cells += [fn(c), ""]
        return cells

    both_braking = []
    for _, c in checks:
        both_braking += [f"{c.braking_sag_front * 1e3:.0f}", f"{c.braking_sag_rear * 1e3:.0f}"]
    rows = [
        ["sag [% of stroke]", *both(lambda e: f"{e.sag_percent:.1f}")],
        ["sag at the wheel [mm]", *both(lambda e: f"{e.sag_wheel * 1e3:.1f}")],
        ["tyre load at rest [N]", *both(lambda e: f"{e.tyre_load:.0f}")],
        ["wheel rate at sag [N/mm]", *both(lambda e: f"{e.wheel_rate / 1e3:.1f}")],
        ["natural frequency [Hz]", *both(lambda e: f"{e.frequency:.2f}")],
        ["with the tyre in series [Hz]", *both(lambda e: f"{e.frequency_with_tyre:.2f}")],
        [
            "damping ratio, low-speed compression [-]",
            *both(lambda e: f"{e.damping_ratios.get('compression low-speed', float('nan')):.2f}"),
        ],
        [
            "damping ratio, low-speed rebound [-]",
            *both(lambda e: f"{e.damping_ratios.get('rebound low-speed', float('nan')):.2f}"),
        ],
        ["head angle at sag [deg]", *each(lambda c: f"{c.geometry_at_sag.head_angle:.1f}")],
        [
            "bottom bracket height at sag [mm]",
            *each(lambda c: f"{c.geometry_at_sag.bb_height * 1e3:.0f}"),
        ],
        ["head angle braking [deg]", *each(lambda c: f"{c.geometry_braking.head_angle:.1f}")],
        ["wheel travel braking [mm]", *both_braking],
        [
            "bounce / pitch modes [Hz]",
            *each(lambda c: "{:.2f} / {:.2f}".format(*c.mode_frequencies)),
        ],
    ]
    return headers, rows


def flatten_inputs(data: Any, prefix: str = "") -> list[tuple[str, str]]:
    """Nested input data as (dotted key, value) pairs; None values are left out; pressures
    [Pa] also in psi and bar."""
    out: list[tuple[str, str]] = []
    if isinstance(data, dict):
        for k, v in data.items():
            out += flatten_inputs(v, f"{prefix}.{k}" if prefix else str(k))
    elif isinstance(data, list) and data and isinstance(data[0], dict):
        for i, v in enumerate(data):
            out += flatten_inputs(v, f"{prefix}[{i + 1}]")
    elif isinstance(data, list):
        out.append((prefix, ", ".join(_short(v) for v in data)))
    elif data is not None:
        text = _short(data)
        last = prefix.rsplit(".", 1)[-1]
        if "pressure" in last and isinstance(data, int | float) and not isinstance(data, bool):
            psi, bar = convert(float(data), "Pa", "psi"), convert(float(data), "Pa", "bar")
            text += f" Pa ({psi:.1f} psi, {bar:.2f} bar)"
        out.append((prefix, text))
    return out


def _short(v: Any) -> str:
    if isinstance(v, float):
        return f"{v:.6g}"
    return str(v)


@dataclass(frozen=True)
class RunReport:
    """Everything the run page shows, as display strings and inline SVG."""

    title: str
    description: str
    trials_line: str
    headline: str
    fresh_terrain: list[str]
    recommendation: list[SettingRow]
    headline_metrics: list[MetricRow]
    table_headers: list[str]
    table_rows: list[list[str]]
    tradeoffs: list[str]
    tradeoff_caption: str
    ride_labels: list[str]
    ride_note: str
    unloaded_percent: int
    static_headers: list[str]
    static_rows: list[list[str]]
    findings: list[str]
    inputs: list[tuple[str, str]]
    cautions: list[str]
    figures: dict[str, Markup | None] = field(default_factory=dict)
    exports: list[str] = field(default_factory=list)


def trial_metrics(study: Any) -> list[dict[str, float | None]]:
    """Metrics of every ridable trial of an optuna study."""
    from optuna.trial import TrialState

    return [
        dict(t.user_attrs["metrics"])
        for t in study.get_trials(deepcopy=False, states=(TrialState.COMPLETE,))
        if t.value is not None and "failure" not in t.user_attrs and "metrics" in t.user_attrs
    ]


def journal_trial_metrics(run_dir: Path, study_name: str) -> list[dict[str, float | None]]:
    """``trial_metrics`` of the study in a run folder's journal (empty without a journal)."""
    journal = run_dir / "study.journal"
    if not journal.exists():
        return []
    import optuna
    from optuna.storages import JournalStorage
    from optuna.storages.journal import JournalFileBackend

    storage = JournalStorage(JournalFileBackend(str(journal)))
    return trial_metrics(optuna.load_study(study_name=study_name, storage=storage))


def _svg(fig: Any, title: str) -> Markup:
    return Markup(figure_svg(fig, title))  # noqa: S704 - our own SVG, attributes escaped


def build_run_report(run_dir: Path, ranks: Sequence[int] = (1,), exports: bool = True) -> RunReport:
    """Collect the page of the run folder ``run_dir`` (re-rides the current and the selected
    setups); exports go to ``run_dir/exports``."""
    from tuneopt.optimise.local import load_run

    run = load_run(run_dir)
    try:
        result = json.loads((run_dir / "result.json").read_text())
    except FileNotFoundError:
        raise InputError.single(
            str(run_dir), "holds no result.json: finish or resume the run first"
        ) from None
    settings = json.loads((run_dir / "run.json").read_text())
    inputs = flatten_inputs(settings["scenario"], "scenario")
    inputs += flatten_inputs(settings["plan"], "plan")
    inputs.append(("realisations", str(settings["realisations"])))
    return report_of(
        run.scenario,
        result,
        seed=run.plan.seed,
        realisations=run.realisations,
        trials=journal_trial_metrics(run_dir, run.plan.name),
        inputs=inputs,
        ranks=ranks,
        export_dir=run_dir / EXPORTS_DIR if exports else None,
    )


def report_of(
    scenario: Scenario,
    result: dict[str, Any],
    seed: int,
    realisations: int,
    trials: Sequence[dict[str, float | None]],
    inputs: list[tuple[str, str]] | None = None,
    ranks: Sequence[int] = (1,),
    export_dir: Path | None = None,
) -> RunReport:
    """Collect the page from a study's pieces: the validated scenario, result.json's data, the
    study seed and realisations, the ridable trials' metrics and the inputs to echo (default:
    the scenario). Exports are written to ``export_dir`` when given."""
    from tuneopt.optimise import build_space

    space = build_space(scenario)
    ranked = {e["rank"]: e for e in result["ranked"]}
    unknown = [k for k in ranks if k not in ranked]
    if unknown and result["ranked"]:
        raise InputError.single(
            "--rank", f"{unknown} not among the ranked setups 1-{len(result['ranked'])}"
        )
    chosen = ([result["baseline"]] if result.get("baseline") else []) + [
        ranked[k] for k in ranks if k in ranked
    ]
    labels = ["now" if e["rank"] == 0 else f"#{e['rank']}" for e in chosen]
    setups = [space.setup(e["indices"]) for e in chosen]

    figures: dict[str, Markup | None] = dict.fromkeys(
        ("tradeoff", "tyre_loads", "travel", "braking", "load_split")
    )
    tdata = tradeoff_data(trials, result)
    if tdata.points.shape[0] or tdata.marks:
        figures["tradeoff"] = _svg(draw_tradeoff(tdata), "Trade-offs among the trials")
    rides: tuple[SetupRide, ...] = ()
    if chosen and scenario.course is not None:
        rides = ride_setups(scenario, setups, labels, seed)
        figures["tyre_loads"] = _svg(
            rp.draw_tyre_loads(rp.tyre_load_plot_data(rides)), "Tyre load traces"
        )
        figures["travel"] = _svg(
            rp.draw_travel_histograms(
                rp.travel_histogram(rides, "front"), rp.travel_histogram(rides, "rear")
            ),
            "Travel histograms",
        )
        braking = rp.braking_plot_data(rides)
        if braking is not None:
            figures["braking"] = _svg(rp.draw_braking(braking), "Pitch and dive under braking")
        figures["load_split"] = _svg(rp.draw_load_split(rp.load_split(rides)), "Load split")

    checks: list[tuple[str, StaticCheck]] = []
    for label, setup in zip(labels, setups, strict=True):
        checks.append((label, static_check(scenario, setup)))
    if not checks:
        checks.append(("now", static_check(scenario)))
    s_headers, s_rows = static_rows(checks)
    findings = [
        f"{label}: {f.location}: {f.message} ({f.basis})" for label, c in checks for f in c.findings
    ]

    if inputs is None:
        inputs = flatten_inputs(scenario.model_dump(mode="json"), "scenario")

    export_names: list[str] = []
    if export_dir is not None:
        paths = write_exports(export_dir, result, rides)
        export_names = [f"{export_dir.name}/{p.name}" for p in paths]
    export_names += ["result.json", "ranked.csv"]

    t = result["trials"]
    trials_line = (
        f"{t['finished']} trials finished ({t['infeasible']} outside the sag windows or "
        f"statically impossible, {t['failed']} failed); sampler {result.get('sampler', '-')}, "
        f"seed {result.get('seed', '-')}, {result.get('realisations', '-')} terrain "
        f"realisation(s), {result.get('simulated_seconds_per_setup', 0):.0f} s of riding in all "
        "for a setup that rides them all (setups clearly worse than the leader stopped early)"
        + (
            f"; the finalists re-scored on {result['validation_realisations']} fresh ones."
            if result.get("validation_realisations")
            else "."
        )
    )
    headline = ""
    if result["ranked"]:
        best = result["ranked"][0]
        change = best.get("change_vs_baseline", {}).get("score")
        headline = f"Recommended: setup #1, score {best['score']:.3f} (lower is better)"
        n = (best.get("validation") or {}).get("realisations")
        if n:
            headline += f" on {n} fresh terrain realisations"
        if change is not None and result.get("baseline"):
            headline += (
                f", {change:+.1%} against the current setup's {result['baseline']['score']:.3f}"
            )
        if best.get("robustness") is not None:
            headline += (
                f"; one step off on any setting that stays ridable raises its score by at most "
                f"{best['robustness']:.3f}"
            )
        headline += "."
    h_headers, h_rows = ranking_columns(result)
    ride_note = (
        f"Ridden again over terrain realisation 1 of {realisations} (seed {seed}), "
        f"traces at {TRACE_RATE:.0f} samples per second."
    )
    if any(r.failure for r in rides):
        ride_note += " " + "; ".join(f"{r.label}: {r.failure}" for r in rides if r.failure)
    return RunReport(
        title=f"Suspension report: {scenario.name}",
        description=scenario.description,
        trials_line=trials_line,
        headline=headline,
        fresh_terrain=fresh_terrain_lines(result),
        recommendation=recommendation_rows(result),
        headline_metrics=headline_metrics(result),
        table_headers=h_headers,
        table_rows=h_rows,
        tradeoffs=[e["tradeoff"] for e in result["ranked"] if e.get("tradeoff")],
        tradeoff_caption=(
            f"{tdata.points.shape[0]} ridable trials; {int(tdata.front.sum())} of them are "
            "non-dominated over these three metrics. Each panel shows two of the three."
        ),
        ride_labels=labels if rides else [],
        ride_note=ride_note,
        unloaded_percent=round(rp.UNLOADED_FRACTION * 100),
        static_headers=s_headers,
        static_rows=s_rows,
        findings=findings,
        inputs=inputs,
        cautions=list(result["cautions"]),
        figures=figures,
        exports=export_names,
    )


def render_run_report(report: RunReport) -> str:
    return render("run", title=report.title, r=report, cautions=report.cautions)


def write_page(folder: Path, report: RunReport) -> Path:
    """Write ``report`` as ``folder/report.html`` (atomically); return its path."""
    path = folder / REPORT_FILE
    tmp = path.with_suffix(".html.tmp")
    tmp.write_text(render_run_report(report), encoding="utf-8")
    tmp.replace(path)
    return path


def write_run_report(run_dir: Path, ranks: Sequence[int] = (1,), exports: bool = True) -> Path:
    """Write ``report.html`` (and the exports) into ``run_dir``, with ``sheet.html`` (the setup
    sheets) beside it; return the page's path."""
    from dataclasses import replace

    from tuneopt.report.setup_sheet import write_study_sheets

    report = build_run_report(run_dir, ranks, exports)
    pages = write_study_sheets(run_dir)
    return write_page(run_dir, replace(report, exports=[*pages, *report.exports]))
