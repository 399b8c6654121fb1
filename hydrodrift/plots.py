"""Figures for people: a unit's weekly drift and its reference curve with recent windows.

Rendered with matplotlib's Agg back end (no display, no GPU) to PNG or PDF.
"""

from __future__ import annotations

from pathlib import Path

import matplotlib

matplotlib.use("Agg")

import matplotlib.dates as mdates
import matplotlib.pyplot as plt
import numpy as np
import pandas as pd
from sqlalchemy import select
from sqlalchemy.orm import Session

from jobs.reference import reference_chart
from store.models import EfficiencyWindow, Plant, ReferenceModel, Unit, WeeklyDrift

#: Weeks of steady windows drawn over the reference curve.
RECENT_WEEKS = 4

CAUTION = ("Index-test estimates; hydrodrift advises and never commands a unit. Operating "
           "limits, protection settings, local codes and licensed practice prevail.")


class PlotError(ValueError):
    """Nothing computed to draw."""


def unit_drift_figure(session: Session, plant_code: str, unit_code: str, path: Path) -> Path:
    """Draw the unit's weekly deviation (with intervals, trend, change point, baseline) and
    its reference efficiency curve with the last weeks' steady windows; write ``path``."""
    unit = session.scalar(select(Unit).join(Plant).where(Plant.code == plant_code,
                                                         Unit.code == unit_code))
    if unit is None:
        raise PlotError(f"no unit {plant_code}/{unit_code} in the store")
    plant = session.get(Plant, unit.plant_id)
    weeks = pd.DataFrame(session.execute(
        select(WeeklyDrift.week, WeeklyDrift.week_start, WeeklyDrift.deviation_median,
               WeeklyDrift.deviation_low, WeeklyDrift.deviation_high,
               WeeklyDrift.trend_points_per_year, WeeklyDrift.change_point_week,
               WeeklyDrift.change_point_size, WeeklyDrift.reference_model_id,
               WeeklyDrift.cumulative_lost_mwh)
        .where(WeeklyDrift.unit_id == unit.id).order_by(WeeklyDrift.week_start)).all(),
        columns=["week", "start", "median", "low", "high", "trend", "cp_week", "cp_size",
                 "ref", "cum_mwh"])
    if weeks.empty or weeks["median"].notna().sum() == 0:
        raise PlotError(f"{plant_code}/{unit_code}: no weekly drift computed yet; run "
                        "`hydrodrift compute`")
    weeks["start"] = pd.to_datetime(weeks["start"], utc=True)
    reference = session.get(ReferenceModel, int(weeks["ref"].iloc[-1]))
    chart = reference_chart(reference)
    since = weeks["start"].iloc[-1] - pd.Timedelta(weeks=RECENT_WEEKS - 1)
    windows = pd.DataFrame(session.execute(
        select(EfficiencyWindow.generator_power, EfficiencyWindow.generator_efficiency,
               EfficiencyWindow.net_head, EfficiencyWindow.eta_index)
        .where(EfficiencyWindow.unit_id == unit.id, EfficiencyWindow.steady.is_(True),
               EfficiencyWindow.eta_index.is_not(None),
               EfficiencyWindow.start >= since.to_pydatetime())).all(),
        columns=["p_gen", "eta_gen", "head", "eta"])

    fig, (ax1, ax2) = plt.subplots(2, 1, figsize=(10, 8.8), layout="constrained")
    fig.get_layout_engine().set(rect=(0, 0.03, 1, 0.97))  # room for the caution line
    fig.suptitle(f"{plant.name}: unit {unit.code} ({unit.runner_type}), reference "
                 f"v{reference.version}", fontsize=13)
    _drift_panel(ax1, weeks, reference, plant.timezone)
    _curve_panel(ax2, chart, windows)
    fig.text(0.5, 0.003, CAUTION, ha="center", va="bottom", fontsize=8, style="italic",
             color="#444444")
    path = Path(path)
    path.parent.mkdir(parents=True, exist_ok=True)
    fig.savefig(path, dpi=110)
    plt.close(fig)
    return path


def _drift_panel(ax, weeks: pd.DataFrame, reference: ReferenceModel, timezone: str) -> None:
    t = weeks["start"].dt.tz_convert(timezone).dt.tz_localize(None) + pd.Timedelta(days=3.5)
    med = 100 * weeks["median"].astype(float)
    ax.fill_between(t, 100 * weeks["low"].astype(float), 100 * weeks["high"].astype(float),
                    color="#9ecae1", alpha=0.7, label="90 % interval of the weekly median",
                    step=None)
    ax.plot(t, med, "o-", color="#08519c", ms=3.5, lw=1.2, label="weekly median deviation")
    ax.axhline(0.0, color="#555555", lw=0.8)
    last = weeks.iloc[-1]
    finite = med.notna()
    if pd.notna(last["trend"]) and finite.sum() >= 2:
        years = (t - t.iloc[0]).dt.total_seconds() / (365.25 * 86400)
        intercept = float(np.median(med[finite] - last["trend"] * years[finite]))
        ax.plot(t, intercept + last["trend"] * years, "--", color="#cb181d", lw=1.2,
                label=f"Theil-Sen trend {last['trend']:+.2f} points/year")
    if last["cp_week"]:
        cp = weeks.loc[weeks["week"] == last["cp_week"]]
        if len(cp):
            x = t[cp.index[0]] - pd.Timedelta(days=3.5)
            ax.axvline(x, color="#cb181d", lw=1.0, ls=":")
            ax.annotate(f"change point {last['cp_week']}\n{100 * last['cp_size']:+.2f} points",
                        (x, ax.get_ylim()[1]), xytext=(6, -28), textcoords="offset points",
                        color="#cb181d", fontsize=9,
                        bbox={"boxstyle": "round", "fc": "white", "ec": "none", "alpha": 0.8})
    if reference.baseline_start is not None and reference.baseline_end is not None:
        b0 = pd.Timestamp(reference.baseline_start).tz_convert(timezone).tz_localize(None)
        b1 = pd.Timestamp(reference.baseline_end).tz_convert(timezone).tz_localize(None)
        ax.axvspan(b0, b1, color="#d9d9d9", alpha=0.6, label="baseline (index constant)")
    ax.set_ylabel("index minus reference efficiency [points]")
    ax.set_title(f"Weekly efficiency deviation; lost so far {last['cum_mwh']:,.0f} MWh"
                 if pd.notna(last["cum_mwh"]) else "Weekly efficiency deviation", fontsize=11)
    ax.xaxis.set_major_formatter(mdates.DateFormatter("%Y-%m"))
    ax.grid(alpha=0.3)
    ax.legend(loc="lower left", fontsize=8)


def _curve_panel(ax, chart, windows: pd.DataFrame) -> None:
    head = float(np.nanmedian(windows["head"])) if len(windows) else float(
        np.median(chart.heads))
    p_max = float(chart.max_power_at(head))
    power = np.linspace(0.05, 1.0, 200) * p_max
    eta_ref = chart.efficiency_at_power(power, np.full(power.shape, head))
    ax.plot(power / 1e6, 100 * eta_ref, color="#08519c", lw=2,
            label=f"reference at {head:.1f} m net head")
    if len(windows):
        p_turb = windows["p_gen"] / windows["eta_gen"]
        ax.scatter(p_turb / 1e6, 100 * windows["eta"], s=6, color="#ef6548", alpha=0.5,
                   label=f"steady windows, last {RECENT_WEEKS} weeks "
                         f"({windows['head'].min():.1f}-{windows['head'].max():.1f} m)")
    ax.set_xlabel("turbine power [MW]")
    ax.set_ylabel("turbine efficiency [%]")
    finite = eta_ref[np.isfinite(eta_ref)]
    if finite.size:
        ax.set_ylim(100 * finite.max() - 12, 100 * finite.max() + 2)
    ax.set_title("Reference curve and index efficiency", fontsize=11)
    ax.grid(alpha=0.3)
    ax.legend(loc="lower right", fontsize=8)
