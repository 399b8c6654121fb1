"""Lost energy and its money value from the weekly relative loss of a unit.

The same water at the reference efficiency would have produced ``E_gen * r`` more energy,
with ``r = eta_ref / eta_i - 1`` the relative loss (domain.md §4; IEC 60041 index method):
``E_gen = eta_i * E_h`` and ``E_ref = eta_ref * E_h`` for the same hydraulic energy ``E_h``,
so ``E_ref - E_gen = E_gen * (eta_ref / eta_i - 1)``. The generator efficiency cancels in
the ratio as long as it is the same in both states.

Sign: positive lost energy means the unit produced less than its reference would have;
NEGATIVE lost energy means it did better than its reference (a gain).

Energy is in joules inside; MWh appears only in the columns named ``*_mwh``, through the
single constant :data:`J_PER_MWH`. The figures advise refurbishment planning; they are
estimates, not metered quantities, and never a basis for commanding a unit.
"""

from __future__ import annotations

from typing import Any, NamedTuple

import numpy as np
import pandas as pd
from numpy.typing import ArrayLike, NDArray

from analytics.drift import iso_week

#: Joules per megawatt-hour: 1 W h = 3600 J by definition of the hour (SI Brochure, 9th
#: ed., table 8), so 1 MWh = 1e6 * 3600 J.
J_PER_MWH = 3.6e9

#: Columns weekly_lost_energy needs in its frame.
REQUIRED_COLUMNS = (
    "generated_energy_j", "relative_loss_median", "relative_loss_low", "relative_loss_high",
)


def j_to_mwh(energy_j: Any) -> Any:
    """Energy [J] -> [MWh]; scalars, arrays and Series keep their kind."""
    return energy_j / J_PER_MWH


def mwh_to_j(energy_mwh: Any) -> Any:
    """Energy [MWh] -> [J]; scalars, arrays and Series keep their kind."""
    return energy_mwh * J_PER_MWH


class LostEnergy(NamedTuple):
    """Lost energy [J] and its band [J] (``low <= lost <= high`` elementwise)."""

    lost: NDArray
    low: NDArray
    high: NDArray


def lost_energy(generated_energy_j: ArrayLike, relative_loss: ArrayLike,
                relative_loss_low: ArrayLike, relative_loss_high: ArrayLike) -> LostEnergy:
    """Energy the unit did not produce because it ran below its reference efficiency.

    Parameters
    ----------
    generated_energy_j : [J] energy generated in the period (e.g. one ISO week, all windows,
        steady or not)
    relative_loss : fraction, ``eta_ref / eta_i - 1`` (e.g. the week's median)
    relative_loss_low, relative_loss_high : fraction, its confidence interval

    Returns
    -------
    LostEnergy(lost, low, high) [J]: ``lost = E_gen * r``; the band is ``E_gen`` times the
    interval's ends, ordered so that ``low <= high``. Negative values mean the unit did
    better than its reference. NaN in, NaN out.

    Notes
    -----
    Applying the steady-window loss to all the energy of the period assumes the unit's
    unsteady operation lost the same fraction; the band carries only the statistical
    uncertainty of ``r`` (the bootstrap interval), not that of ``E_gen`` or the reference.
    """
    energy = np.asarray(generated_energy_j, dtype=float)
    lost = energy * np.asarray(relative_loss, dtype=float)
    a = energy * np.asarray(relative_loss_low, dtype=float)
    b = energy * np.asarray(relative_loss_high, dtype=float)
    return LostEnergy(lost, np.fmin(a, b), np.fmax(a, b))


def weekly_generated_energy(window_start: Any, generated_energy_j: ArrayLike,
                            timezone: str) -> pd.DataFrame:
    """Generated energy per ISO week of the plant, from per-window energies.

    Parameters
    ----------
    window_start : UTC start of every window (steady or not); see analytics.drift
    generated_energy_j : [J] energy of each window
    timezone : plant IANA zone

    Returns
    -------
    DataFrame with ``week``, ``week_start_utc`` and ``generated_energy_j`` [J], in time
    order, ready to merge on ``week`` with :func:`analytics.drift.weekly_drift`. Windows with
    a NaT start or non-finite energy are left out. A window is assigned to the week of its
    start.
    """
    energy = np.asarray(generated_energy_j, dtype=float).reshape(-1)
    labels, starts = iso_week(window_start, timezone)
    ok = np.isfinite(energy) & ~np.asarray(starts.isna())
    frame = pd.DataFrame({"week": np.asarray(labels)[ok], "week_start_utc": starts[ok],
                          "generated_energy_j": energy[ok]})
    out = frame.groupby(["week_start_utc", "week"], as_index=False, sort=True).sum()
    return out[["week", "week_start_utc", "generated_energy_j"]]


def weekly_lost_energy(frame: pd.DataFrame, price_per_mwh: float | ArrayLike,
                       currency: str) -> pd.DataFrame:
    """Lost energy and money per week, with bands and cumulative totals.

    Parameters
    ----------
    frame : one row per week with ``generated_energy_j`` [J] and ``relative_loss_median``,
        ``relative_loss_low``, ``relative_loss_high`` (fractions), e.g. weekly_drift merged
        with weekly_generated_energy; sorted by ``week_start_utc`` when that column exists
    price_per_mwh : [currency/MWh] energy price, a scalar or one value per row (after the
        sort); may be negative
    currency : currency code (e.g. ISO 4217 ``"EUR"``), stored in a ``currency`` column

    Returns
    -------
    A copy of ``frame`` with ``lost_mwh``, ``lost_mwh_low``, ``lost_mwh_high``,
    ``lost_money``, ``lost_money_low``, ``lost_money_high``, ``currency``, and
    ``cumulative_lost_mwh(_low/_high)``, ``cumulative_lost_money(_low/_high)``.

    Notes
    -----
    ``lost_money = lost_mwh * price`` and its band is the product of the energy band with
    the price, ordered so that low <= high (a negative price swaps the ends).

    Cumulative band: the bounds are SUMMED (``cumulative_low = cumsum(low)``), the
    conservative choice that treats the weeks' errors as fully correlated. Adding the
    half-widths in quadrature would assume independent weeks; the weekly medians share the
    reference curve and the index-test constant, whose errors are common to all weeks, so
    independence would understate the band. Weeks without an estimate (NaN, too few steady
    windows) add nothing to the cumulative columns; the weekly columns stay NaN there.
    """
    missing = [c for c in REQUIRED_COLUMNS if c not in frame.columns]
    if missing:
        raise KeyError(f"frame lacks columns {missing}")
    out = frame.copy()
    if "week_start_utc" in out.columns:
        out = out.sort_values("week_start_utc", kind="stable", ignore_index=True)
    energy = lost_energy(out["generated_energy_j"].to_numpy(dtype=float),
                         out["relative_loss_median"].to_numpy(dtype=float),
                         out["relative_loss_low"].to_numpy(dtype=float),
                         out["relative_loss_high"].to_numpy(dtype=float))
    price = np.broadcast_to(np.asarray(price_per_mwh, dtype=float), (len(out),))
    mwh, mwh_low, mwh_high = (j_to_mwh(v) for v in energy)
    money_a, money_b = mwh_low * price, mwh_high * price
    columns = {
        "lost_mwh": mwh, "lost_mwh_low": mwh_low, "lost_mwh_high": mwh_high,
        "lost_money": mwh * price, "lost_money_low": np.fmin(money_a, money_b),
        "lost_money_high": np.fmax(money_a, money_b),
    }
    for name, values in columns.items():
        out[name] = values
    out["currency"] = currency
    for name in columns:
        out[f"cumulative_{name}"] = np.cumsum(np.nan_to_num(columns[name], nan=0.0))
    return out
