"""Collect the run page: everything it shows, as display strings and the numbers behind each
figure, from a study's result (``RunResult``) and its pieces. No drawing, no files.

Every number about the ranked setups comes from the result (the one source); the traces,
histograms and phase splits come from riding the current and the selected setups again over
the study's first terrain realisation.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from typing import Any

from tuneopt.model import InputError, Scenario, convert
from tuneopt.physics import StaticCheck, static_check
from tuneopt.report import ride_plots as rp
from tuneopt.report.fresh_terrain import fresh_terrain_lines, setting_notes
from tuneopt.report.ranked_table import ranking_columns
from tuneopt.report.rides import TRACE_RATE, SetupRide, ride_setups
from tuneopt.report.run_data import RunResult
from tuneopt.report.static_text import static_findings, static_rows
from tuneopt.report.tradeoff_plot import TradeoffData, tradeoff_data
from tuneopt.sim import UNLOADED_FRACTION

__all__ = [
    "HEADLINE_METRICS",
    "MetricRow",
    "RidePlots",
    "RunPage",
    "SettingRow",
    "collect_run_page",
    "flatten_inputs",
    "headline",
    "headline_metrics",
    "recommendation_rows",
    "trials_line",
]

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
)  # fmt: skip


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


@dataclass(frozen=True)
class RidePlots:
    """The numbers behind the four ride figures (``tuneopt.report.ride_plots``)."""

    tyre_loads: rp.TyreLoadPlotData
    travel: tuple[rp.TravelHistogram, rp.TravelHistogram]  # front, rear
    braking: rp.BrakingPlotData | None  # None: the course has no braking
    load_split: rp.LoadSplit


@dataclass(frozen=True)
class RunPage:
    """Everything the run page shows but its pictures and its list of files: display strings,
    the numbers behind each figure (None: no such figure) and the rides themselves (for the
    trace exports)."""

    title: str
    description: str
    trials_line: str
    headline: str
    fresh_terrain: tuple[str, ...]
    recommendation: tuple[SettingRow, ...]
    headline_metrics: tuple[MetricRow, ...]
    table_headers: tuple[str, ...]
    table_rows: tuple[tuple[str, ...], ...]
    tradeoffs: tuple[str, ...]
    tradeoff: TradeoffData | None
    tradeoff_caption: str
    rides: tuple[SetupRide, ...]
    ride_plots: RidePlots | None
    ride_labels: tuple[str, ...]
    ride_note: str
    unloaded_percent: int
    static_headers: tuple[str, ...]
    static_rows: tuple[tuple[str, ...], ...]
    findings: tuple[str, ...]
    inputs: tuple[tuple[str, str], ...]
    cautions: tuple[str, ...]


def recommendation_rows(result: RunResult) -> list[SettingRow]:
    """The winner's settings in trade units beside the current ones (the result's strings)."""
    if not result.ranked:
        return []
    best = result.ranked[0].settings
    now = result.baseline.settings if result.baseline else {}
    notes = setting_notes(result)
    return [
        SettingRow(
            k, result.label(k), now.get(k, "-"), v, now.get(k) not in (None, v), notes.get(k, "")
        )
        for k, v in best.items()
    ]


def _fmt(value: float | None, scale: float, fmt: str) -> str:
    return "-" if value is None else fmt.format(value * scale)


def _percent_change(change: float) -> str:
    """+12 %, -3 %; a change that rounds to nothing reads 0 % rather than -0 %."""
    text = f"{change:+.0%}"
    return "0%" if text in ("+0%", "-0%") else text


def headline_metrics(result: RunResult) -> list[MetricRow]:
    """Main metrics of the current and the recommended setup with the relative change."""
    if not result.ranked:
        return []
    best = result.ranked[0]
    now = result.baseline.metrics if result.baseline else {}
    rows = []
    for key, label, scale, fmt in HEADLINE_METRICS:
        change = best.change_vs_baseline.get(key)
        rows.append(
            MetricRow(
                key,
                label,
                _fmt(now.get(key), scale, fmt),
                _fmt(best.metrics.get(key), scale, fmt),
                "-" if change is None else _percent_change(change),
            )
        )
    return rows


def flatten_inputs(data: Any, prefix: str = "") -> list[tuple[str, str]]:
    """Nested input data as (dotted key, value) pairs; None values are left out; pressures
    [Pa] also in psi and bar."""
    out: list[tuple[str, str]] = []
    if isinstance(data, Mapping):
        for k, v in data.items():
            out += flatten_inputs(v, f"{prefix}.{k}" if prefix else str(k))
    elif isinstance(data, list) and data and isinstance(data[0], Mapping):
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


def trials_line(result: RunResult) -> str:
    """The study in one sentence: trials, sampler, seed, terrain, validation."""
    t = result.trials
    return (
        f"{t.finished} trials finished ({t.infeasible} outside the sag windows or "
        f"statically impossible, {t.failed} failed); sampler {result.sampler or '-'}, "
        f"seed {'-' if result.seed is None else result.seed}, "
        f"{'-' if result.realisations is None else result.realisations} terrain "
        f"realisation(s), {result.simulated_seconds_per_setup:.0f} s of riding in all "
        "for a setup that rides them all (setups clearly worse than the leader stopped early)"
        + (
            f"; the finalists ordered on {result.validation_realisations} fresh ones and "
            f"every figure taken from {result.validation_realisations} others."
            if result.validation_realisations
            else "."
        )
    )


def headline(result: RunResult) -> str:
    """The recommendation in one sentence ("" when nothing is ranked)."""
    if not result.ranked:
        return ""
    best = result.ranked[0]
    change = best.change_vs_baseline.get("score")
    text = f"Recommended: setup #1, score {best.score:.3f} (lower is better)"
    n = best.validation.realisations
    if n:
        text += f" on {n} fresh terrain realisations"
    if change is not None and result.baseline:
        text += f", {change:+.1%} against the current setup's {result.baseline.score:.3f}"
    if best.robustness is not None:
        text += (
            f"; one step off on any setting that stays ridable raises its score by at most "
            f"{best.robustness:.3f}"
        )
    return text + "."


def _ride_plots(rides: Sequence[SetupRide]) -> RidePlots:
    return RidePlots(
        tyre_loads=rp.tyre_load_plot_data(rides),
        travel=(rp.travel_histogram(rides, "front"), rp.travel_histogram(rides, "rear")),
        braking=rp.braking_plot_data(rides),
        load_split=rp.load_split(rides),
    )


def collect_run_page(
    scenario: Scenario,
    result: RunResult,
    seed: int,
    realisations: int,
    trials: Sequence[Mapping[str, float | None]],
    inputs: Sequence[tuple[str, str]] | None = None,
    ranks: Sequence[int] = (1,),
) -> RunPage:
    """The page from a study's pieces: the validated scenario, its result, the study seed and
    realisations, the ridable trials' metrics and the inputs to echo (default: the scenario).
    Rides the current setup and the ranked ones in ``ranks`` again for the figures."""
    from tuneopt.optimise import build_space

    ranked = {e.rank: e for e in result.ranked}
    unknown = [k for k in ranks if k not in ranked]
    if unknown and result.ranked:
        raise InputError.single(
            "--rank", f"{unknown} not among the ranked setups 1-{len(result.ranked)}"
        )
    chosen = ([result.baseline] if result.baseline else []) + [
        ranked[k] for k in ranks if k in ranked
    ]
    labels = [e.label for e in chosen]
    space = build_space(scenario)
    setups = [space.setup(dict(e.indices)) for e in chosen]

    tdata = tradeoff_data(trials, result)
    rides: tuple[SetupRide, ...] = ()
    if chosen and scenario.course is not None:
        rides = ride_setups(scenario, setups, labels, seed)

    checks: list[tuple[str, StaticCheck]] = [
        (label, static_check(scenario, setup)) for label, setup in zip(labels, setups, strict=True)
    ]
    if not checks:
        checks.append(("now", static_check(scenario)))
    s_headers, s_rows = static_rows(checks)

    if inputs is None:
        inputs = flatten_inputs(scenario.model_dump(mode="json"), "scenario")
    h_headers, h_rows = ranking_columns(result)
    ride_note = (
        f"Ridden again over terrain realisation 1 of {realisations} (seed {seed}), "
        f"traces at {TRACE_RATE:.0f} samples per second."
    )
    if any(r.failure for r in rides):
        ride_note += " " + "; ".join(f"{r.label}: {r.failure}" for r in rides if r.failure)
    return RunPage(
        title=f"Suspension report: {scenario.name}",
        description=scenario.description,
        trials_line=trials_line(result),
        headline=headline(result),
        fresh_terrain=tuple(fresh_terrain_lines(result)),
        recommendation=tuple(recommendation_rows(result)),
        headline_metrics=tuple(headline_metrics(result)),
        table_headers=tuple(h_headers),
        table_rows=tuple(tuple(row) for row in h_rows),
        tradeoffs=tuple(e.tradeoff for e in result.ranked if e.tradeoff),
        tradeoff=tdata if tdata.points.shape[0] or tdata.marks else None,
        tradeoff_caption=(
            f"{tdata.points.shape[0]} ridable trials; {int(tdata.front.sum())} of them are "
            "non-dominated over these three metrics. Each panel shows two of the three."
        ),
        rides=rides,
        ride_plots=_ride_plots(rides) if rides else None,
        ride_labels=tuple(labels) if rides else (),
        ride_note=ride_note,
        unloaded_percent=round(UNLOADED_FRACTION * 100),
        static_headers=tuple(s_headers),
        static_rows=tuple(tuple(row) for row in s_rows),
        findings=tuple(static_findings(checks)),
        inputs=tuple(inputs),
        cautions=result.cautions,
    )
