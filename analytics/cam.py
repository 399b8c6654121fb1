"""Kaplan cam check from steady windows: the blade angle of best efficiency per band.

For each (opening band, head band) cell the index efficiency of the steady windows is fitted
by least squares with a quadratic in the blade angle (plus, by default, linear terms in the
opening and head offsets from the cell centre and their products with the blade angle, so
that the efficiency trend across the band and the optimum's drift with opening and head do
not pass for a blade-angle effect). The vertex of a concave fit, kept inside the observed
blade-angle range, is the best angle at the cell centre; the installed cam is read at the
same centre; the fitted efficiency difference is the gain a re-tuned cam would bring, and
the window energy times ``gain / efficiency`` is the energy it would add (the same water at
the better efficiency).

This is the "on-cam / off-cam" step of an index test on a double-regulated unit
(IEC 60041:1991, index test, whose uses include the best relationship between guide-vane
and runner-blade openings of double-regulated turbines; ASME PTC 18 index testing; both
from memory): the blade angle is varied around the cam at steady opening and head, and
the peak of relative efficiency against blade angle gives the best cam point. Relative
(index) efficiency is enough: the gain scales with it and ``energy_gain`` does not depend
on the index constant.

Caution: the results are advice only. A cam is changed by qualified staff, with the
governor manufacturer's procedure and an index test to confirm it; operating limits,
protection settings and local codes and licensed practice always prevail.
"""

from __future__ import annotations

from collections.abc import Callable
from typing import NamedTuple

import numpy as np
import pandas as pd
from numpy.typing import ArrayLike, NDArray

#: Default minimum number of windows per cell: the fit has 7 parameters; about three windows
#: per parameter (common practice for a regression).
MIN_WINDOWS = 20
#: Default minimum blade-angle spread per cell [rad], 1.5 deg: an index-test blade sweep
#: covers a few degrees either side of the cam (common practice).
MIN_ANGLE_SPREAD = np.radians(1.5)
#: Normal matrices with a condition number above this are treated as singular.
_MAX_CONDITION = 1e10

CELL_COLUMNS = (
    "opening_low", "opening_high", "head_low", "head_high", "opening_centre", "head_centre",
    "windows", "blade_angle_min", "blade_angle_max", "independent_spread", "curvature",
    "best_blade_angle", "best_at_edge", "installed_blade_angle", "angle_change",
    "efficiency_installed", "efficiency_best", "efficiency_gain", "relative_gain",
    "energy", "energy_gain", "rmse", "accepted", "reason",
)


class CamCheck(NamedTuple):
    """Result of :func:`cam_check`.

    cells : DataFrame, one row per (opening band, head band), columns
        ``opening_low``, ``opening_high`` (fraction), ``head_low``, ``head_high`` [m],
        ``opening_centre`` (fraction), ``head_centre`` [m], ``windows`` (count),
        ``blade_angle_min``, ``blade_angle_max`` [rad] observed,
        ``independent_spread`` [rad] blade-angle range not explained by opening and head
        (``sqrt(12)`` times the partial standard deviation; the range of a uniform spread),
        ``curvature`` [efficiency / rad^2] second derivative of the fit / 2 (< 0 concave),
        ``best_blade_angle`` [rad] the fit's maximum within the observed range,
        ``best_at_edge`` (bool) the maximum sits on the observed range's edge (the true
        optimum may lie beyond: extend the sweep),
        ``installed_blade_angle`` [rad] the installed cam at the cell centre,
        ``angle_change`` [rad] best - installed,
        ``efficiency_installed``, ``efficiency_best`` fitted, at the cell centre (the
        installed angle is clipped to the observed range, which can only lower the gain),
        ``efficiency_gain`` best - installed (units of the input efficiency),
        ``relative_gain`` gain / efficiency_installed,
        ``energy`` [J] produced in the cell's windows, ``energy_gain`` [J] energy *
        relative_gain, ``rmse`` fit residual (efficiency units),
        ``accepted`` (bool), ``reason`` (why refused; empty when accepted).
        Fit quantities are NaN in refused cells.
    totals : Series: ``cells``, ``cells_accepted``, ``windows``, ``windows_used``
        (in accepted cells), ``windows_outside`` (outside the bands or not finite),
        ``energy`` [J] all windows in the bands, ``energy_accepted`` [J],
        ``energy_gain`` [J], ``relative_gain`` = energy_gain / energy_accepted.
    """

    cells: pd.DataFrame
    totals: pd.Series


def cam_check(opening: ArrayLike, head: ArrayLike, blade_angle: ArrayLike,
              efficiency: ArrayLike, energy: ArrayLike,
              installed_cam: Callable[[NDArray, NDArray], ArrayLike], *,
              opening_bands: ArrayLike, head_bands: ArrayLike,
              min_windows: int = MIN_WINDOWS, min_angle_spread: float = MIN_ANGLE_SPREAD,
              position_terms: bool = True, local_refit: bool = True) -> CamCheck:
    """Best blade angle per opening and head band against the installed cam.

    Parameters
    ----------
    opening : array, fraction 0..1 of guide-vane opening per steady window
    head : array [m] net head per window
    blade_angle : array [rad] runner blade angle per window
    efficiency : array, index efficiency per window (relative is fine)
    energy : array [J] energy produced in each window (>= 0)
    installed_cam : callable ``(opening, head [m]) -> blade angle [rad]``, vectorised
    opening_bands : ascending band edges (fraction), at least two
    head_bands : ascending band edges [m], at least two
    min_windows : fewer windows in a cell refuse it
    min_angle_spread : [rad] a smaller observed (or independent) blade-angle range
        refuses the cell
    position_terms : also fit the opening and head offsets and their products with the blade
        angle (recommended, 7 parameters; without them the fit has 3)
    local_refit : refit once with weights centred on the first fit's vertex (recommended)

    Returns
    -------
    CamCheck ``(cells, totals)``; see :class:`CamCheck` for the columns.

    Notes
    -----
    Ordinary least squares per cell,
    ``eta = a + b x + c x^2 [+ d u + e v + f x u + g x v]`` with
    ``x = (phi - mean(phi)) / s`` (``s`` half the observed range), ``u``, ``v`` the opening
    and head offsets from the cell centre over the half band widths; the normal equations
    of all cells are built at once and solved as a stack. With ``local_refit`` a second,
    weighted fit follows, with tricube weights ``(1 - (d/d_max)^3)^3`` in the distance
    ``d`` from the first fit's vertex (the weights of locally weighted regression,
    Cleveland 1979, J. Am. Stat. Assoc. 74, 829-836; from memory): an off-cam efficiency
    curve is not symmetric (it falls faster towards closed blades), and weighting the
    windows near the peak lessens the bias of a quadratic vertex fitted to it.

    A cell is refused, with the reason, when it has too few windows, too narrow a
    blade-angle spread, a blade angle that follows opening and head (on-cam data only: no
    independent variation to fit), a singular fit, a fit that is not concave (``c >= 0``),
    or a non-finite installed angle.

    Advice only: cam changes are made by qualified staff with the governor manufacturer's
    procedure.
    """
    y, h, phi, eta, e = (np.asarray(a, dtype=float).ravel()
                         for a in (opening, head, blade_angle, efficiency, energy))
    if not y.size == h.size == phi.size == eta.size == e.size:
        raise ValueError("opening, head, blade_angle, efficiency and energy need one length")
    y_edges = _edges(opening_bands, "opening_bands")
    h_edges = _edges(head_bands, "head_bands")
    if min_windows < (7 if position_terms else 3) + 1:
        raise ValueError("min_windows must exceed the number of fitted parameters")
    n_y, n_h = y_edges.size - 1, h_edges.size - 1
    n_cells = n_y * n_h

    finite = np.isfinite(y) & np.isfinite(h) & np.isfinite(phi) & np.isfinite(eta)
    finite &= np.isfinite(e) & (e >= 0.0)
    inside = finite & (y >= y_edges[0]) & (y <= y_edges[-1])
    inside &= (h >= h_edges[0]) & (h <= h_edges[-1])
    iy = np.clip(np.searchsorted(y_edges, y, side="right") - 1, 0, n_y - 1)
    ih = np.clip(np.searchsorted(h_edges, h, side="right") - 1, 0, n_h - 1)
    cell = (iy * n_h + ih)[inside]
    y, h, phi, eta, e = y[inside], h[inside], phi[inside], eta[inside], e[inside]

    ci, cj = np.divmod(np.arange(n_cells), n_h)
    y_lo, y_hi = y_edges[ci], y_edges[ci + 1]
    h_lo, h_hi = h_edges[cj], h_edges[cj + 1]
    y_c, h_c = 0.5 * (y_lo + y_hi), 0.5 * (h_lo + h_hi)

    count = np.bincount(cell, minlength=n_cells)
    energy_cell = np.bincount(cell, weights=e, minlength=n_cells)
    phi_min = np.full(n_cells, np.inf)
    phi_max = np.full(n_cells, -np.inf)
    np.minimum.at(phi_min, cell, phi)
    np.maximum.at(phi_max, cell, phi)
    with np.errstate(invalid="ignore", divide="ignore"):
        phi_mean = np.bincount(cell, weights=phi, minlength=n_cells) / count
    half = np.where(count > 0, np.maximum(0.5 * (phi_max - phi_min), 1e-12), 1.0)
    phi_mean = np.where(count > 0, phi_mean, 0.0)

    x = (phi - phi_mean[cell]) / half[cell]
    columns = [np.ones_like(x), x, x * x]
    if position_terms:
        u = (y - y_c[cell]) / (0.5 * (y_hi - y_lo))[cell]
        v = (h - h_c[cell]) / (0.5 * (h_hi - h_lo))[cell]
        columns += [u, v, x * u, x * v]
    design = np.stack(columns, axis=1)
    p = design.shape[1]
    normal, rhs = _normal_equations(cell, design, eta, np.ones_like(eta), n_cells)

    enough = count >= min_windows
    spread = np.where(count > 0, phi_max - phi_min, 0.0)
    wide = spread >= min_angle_spread
    idx = np.flatnonzero(enough & wide)
    independent = np.zeros(n_cells)
    # partial variance of x given 1, u, v (Schur complement of the normal matrix)
    others = [0, 3, 4] if position_terms else [0]
    if idx.size:
        nm = normal[idx]
        s_zx = nm[:, others, 1]
        proj = np.einsum("ci,cij,cj->c", s_zx,
                         np.linalg.pinv(nm[:, others][:, :, others]), s_zx)
        independent[idx] = np.sqrt(12.0 * np.maximum(nm[:, 1, 1] - proj, 0.0)
                                   / count[idx]) * half[idx]
    idx = idx[independent[idx] >= min_angle_spread]
    coef, cond = _solve_cells(normal, rhs, idx)

    x_lo = np.where(count > 0, (phi_min - phi_mean) / half, np.nan)
    x_hi = np.where(count > 0, (phi_max - phi_mean) / half, np.nan)
    if local_refit:
        # second pass: tricube weights in the distance from the first vertex
        first = idx[coef[idx, 2] < 0.0]
        x_v = np.zeros(n_cells)
        x_v[first] = np.clip(-coef[first, 1] / (2.0 * coef[first, 2]), x_lo[first],
                             x_hi[first])
        dist = np.abs(x - x_v[cell])
        far = np.zeros(n_cells)
        np.maximum.at(far, cell, dist)
        weight = np.clip(1.0 - (dist / np.maximum(far[cell], 1e-12)) ** 3, 0.0, None) ** 3
        normal_w, rhs_w = _normal_equations(cell, design, eta, weight, n_cells)
        coef_w, cond_w = _solve_cells(normal_w, rhs_w, first)
        better = first[cond_w[first] < _MAX_CONDITION]
        coef[better] = coef_w[better]

    curvature_scaled = coef[:, 2]
    installed = np.asarray(installed_cam(y_c, h_c), dtype=float) * np.ones(n_cells)
    cam_ok = np.isfinite(installed)
    accepted = (cond < _MAX_CONDITION) & (curvature_scaled < 0.0) & cam_ok

    with np.errstate(invalid="ignore", divide="ignore"):
        x_vertex = -coef[:, 1] / (2.0 * curvature_scaled)
    x_best = np.clip(x_vertex, x_lo, x_hi)
    x_inst = np.clip((installed - phi_mean) / half, x_lo, x_hi)

    def fitted(xv: NDArray) -> NDArray:
        return coef[:, 0] + coef[:, 1] * xv + coef[:, 2] * xv * xv

    eta_best, eta_inst = fitted(x_best), fitted(x_inst)
    gain = eta_best - eta_inst
    residual = eta - np.einsum("np,np->n", design, coef[cell])
    with np.errstate(invalid="ignore", divide="ignore"):
        relative = gain / eta_inst
        rmse = np.sqrt(np.bincount(cell, weights=residual ** 2, minlength=n_cells)
                       / (count - p))
    best = phi_mean + half * x_best
    at_edge = np.abs(x_best - x_vertex) > 0.0

    reason = [_reason(n, sp, ind, c, cv, ok, min_windows, min_angle_spread)
              for n, sp, ind, c, cv, ok in zip(count, spread, independent, cond,
                                                curvature_scaled, cam_ok, strict=True)]
    nan = np.where(accepted, 1.0, np.nan)
    cells = pd.DataFrame({
        "opening_low": y_lo, "opening_high": y_hi, "head_low": h_lo, "head_high": h_hi,
        "opening_centre": y_c, "head_centre": h_c, "windows": count,
        "blade_angle_min": np.where(count > 0, phi_min, np.nan),
        "blade_angle_max": np.where(count > 0, phi_max, np.nan),
        "independent_spread": np.where(enough & wide, independent, np.nan),
        "curvature": curvature_scaled / half ** 2 * nan,
        "best_blade_angle": best * nan, "best_at_edge": accepted & at_edge,
        "installed_blade_angle": installed, "angle_change": (best - installed) * nan,
        "efficiency_installed": eta_inst * nan, "efficiency_best": eta_best * nan,
        "efficiency_gain": gain * nan, "relative_gain": relative * nan,
        "energy": energy_cell, "energy_gain": energy_cell * relative * nan,
        "rmse": rmse * nan, "accepted": accepted, "reason": reason,
    }, columns=list(CELL_COLUMNS))
    used = cells["accepted"].to_numpy()
    energy_accepted = float(energy_cell[used].sum())
    energy_gain = float(np.nansum(cells["energy_gain"].to_numpy()[used]))
    totals = pd.Series({
        "cells": n_cells, "cells_accepted": int(used.sum()), "windows": int(finite.size),
        "windows_used": int(count[used].sum()), "windows_outside": int((~inside).sum()),
        "energy": float(energy_cell.sum()), "energy_accepted": energy_accepted,
        "energy_gain": energy_gain,
        "relative_gain": energy_gain / energy_accepted if energy_accepted > 0 else np.nan,
    }, dtype=object)
    return CamCheck(cells, totals)


def _normal_equations(cell: NDArray, design: NDArray, eta: NDArray, weight: NDArray,
                      n_cells: int) -> tuple[NDArray, NDArray]:
    """Per-cell weighted normal matrices ``X'WX`` and right-hand sides ``X'Wy``."""
    p = design.shape[1]
    normal = np.zeros((n_cells, p, p))
    np.add.at(normal, cell, weight[:, None, None] * design[:, :, None] * design[:, None, :])
    rhs = np.zeros((n_cells, p))
    np.add.at(rhs, cell, (weight * eta)[:, None] * design)
    return normal, rhs


def _solve_cells(normal: NDArray, rhs: NDArray, idx: NDArray) -> tuple[NDArray, NDArray]:
    """Least-squares coefficients (NaN where not solved) and condition numbers per cell."""
    n_cells, p = rhs.shape
    coef = np.full((n_cells, p), np.nan)
    cond = np.full(n_cells, np.inf)
    if idx.size:
        cond[idx] = np.linalg.cond(normal[idx])
        good = idx[cond[idx] < _MAX_CONDITION]
        coef[good] = np.linalg.solve(normal[good], rhs[good][..., None])[..., 0]
    return coef, cond


def _edges(values: ArrayLike, name: str) -> NDArray:
    edges = np.asarray(values, dtype=float).ravel()
    if edges.size < 2 or not np.all(np.isfinite(edges)) or np.any(np.diff(edges) <= 0):
        raise ValueError(f"{name} must be at least two ascending finite edges")
    return edges


def _reason(n: int, spread: float, independent: float, cond: float, curvature: float,
            cam_ok: bool, min_windows: int, min_spread: float) -> str:
    """Why a cell is refused ('' when accepted); the first failing check wins."""
    deg = 180.0 / np.pi
    if n == 0:
        return "no windows"
    if n < min_windows:
        return f"too few windows ({n} < {min_windows})"
    if spread < min_spread:
        return (f"blade-angle spread {spread * deg:.2f} deg < {min_spread * deg:.2f} deg")
    if independent < min_spread:
        return (f"blade angle follows opening and head (independent spread "
                f"{independent * deg:.2f} deg < {min_spread * deg:.2f} deg)")
    if not cond < _MAX_CONDITION:
        return "singular fit (condition number too large)"
    if not curvature < 0.0:
        return "fit not concave (no efficiency maximum against blade angle)"
    if not cam_ok:
        return "installed cam gives no finite angle at the cell centre"
    return ""
