"""Correlation checks and Monte Carlo propagation of the observables' uncertainties."""

from __future__ import annotations

import math

import numpy as np

from .._blocks import run_blocks
from ..columns import OUTPUT_COLUMNS
from . import _shared
from ._shared import (
    _ANGLES,
    _DEG,
    _MC_DRAWS_PER_BLOCK,
    _PIVOT_TOLERANCE,
    _SIGMA_LEVELS,
    _WRAPPING,
    EIGEN_TOLERANCE,
)
from .linear import _error_inputs, _take
from .transforms import _forward_all, _scratch_for


# ====================================================================== correlation check
class _CorrelationCheck:
    """Rows [start, stop) whose correlation matrix may not be positive semi-definite, into ``out``.

    An LDL^T factorisation of the unit-diagonal matrix, one row of stars at a time: with
    E_ij = L_ij D_j, E_ij = A_ij - sum_{k<j} L_ik E_jk, L_ij = E_ij / D_j and
    D_i = 1 - sum_{k<i} L_ik E_ik; the matrix is positive definite exactly when every pivot D_i is
    positive (Golub & Van Loan 2013, Matrix Computations, 4th ed., Sect. 4.1-4.2, from memory).
    Only the parameters that have a correlation column take part (the others are independent).
    ``out`` is True where a pivot is not clearly positive or is NaN; :func:`_invalid_correlations`
    settles those rows.
    """

    def __init__(self, rho, out):
        self.rho, self.out = rho, out
        self.params = sorted({k for key in rho for k in key})

    def __call__(self, start, stop, ws):
        m = stop - start
        sl = slice(start, stop)
        p = self.params
        E: dict[tuple[int, int], np.ndarray] = {}
        L: dict[tuple[int, int], np.ndarray] = {}
        D: list[np.ndarray] = []
        tmp = ws.vec("corr_tmp", m)
        ok = ws.mask("corr_ok", m)
        ok.fill(True)
        with np.errstate(invalid="ignore", divide="ignore"):
            for i in range(len(p)):
                for j in range(i):
                    a = self.rho.get((p[j], p[i]))
                    e = ws.vec(f"corr_E{i}{j}", m)
                    if a is None:
                        e.fill(0.0)
                    else:
                        np.copyto(e, a[sl])
                    for k in range(j):
                        np.multiply(L[i, k], E[j, k], tmp)
                        np.subtract(e, tmp, e)
                    E[i, j] = e
                    L[i, j] = np.divide(e, D[j], ws.vec(f"corr_L{i}{j}", m))
                d = ws.vec(f"corr_D{i}", m)
                d.fill(1.0)
                for k in range(i):
                    np.multiply(L[i, k], E[i, k], tmp)
                    np.subtract(d, tmp, d)
                D.append(d)
                ok &= d > _PIVOT_TOLERANCE  # False for NaN too
        np.logical_not(ok, self.out[sl])


def _invalid_correlations(rho, n):
    """Boolean (n,): True where the correlations used do not form a positive semi-definite matrix.

    ``rho`` maps parameter index pairs (k, l), k < l, of (ra*, dec, parallax or distance, pmra,
    pmdec) to full-length correlation arrays (an absent pair is zero). A star with a NaN correlation
    is not flagged here: its uncertainties are NaN anyway. The fast vectorised factorisation clears
    almost every star; the few it cannot clear (singular or invalid matrices) get their eigenvalues.
    """
    suspect = np.zeros(n, dtype=bool)
    if not rho or n == 0:
        return suspect
    run_blocks(n, _shared.BLOCK, _CorrelationCheck(rho, suspect), _scratch_for(n))
    rows = np.flatnonzero(suspect)
    if rows.size == 0:
        return suspect
    corr = np.zeros((rows.size, 5, 5))
    corr[:, range(5), range(5)] = 1.0
    for (k, col), c in rho.items():
        corr[:, k, col] = corr[:, col, k] = c[rows]
    finite = np.isfinite(corr).all(axis=(1, 2))
    invalid = np.zeros(rows.size, dtype=bool)
    if finite.any():
        invalid[finite] = np.linalg.eigvalsh(corr[finite])[:, 0] < -EIGEN_TOLERANCE
    out = np.zeros(n, dtype=bool)
    out[rows[invalid]] = True
    return out


# ====================================================================== Monte Carlo
def _sqrt_correlation(rho, n):
    """Per-star L, shape (n, 6, 6), with L L^T = the correlation matrix (rv uncorrelated).

    A symmetric square root from the eigen-decomposition, so that singular or slightly invalid
    correlation matrices still work; negative eigenvalues are set to zero and counted. Stars with a
    NaN correlation get NaN.
    """
    corr = np.zeros((n, 5, 5))
    corr[:, range(5), range(5)] = 1.0
    for (k, col), c in rho.items():
        corr[:, k, col] = corr[:, col, k] = c
    bad = ~np.isfinite(corr).all(axis=(1, 2))
    corr[bad] = np.eye(5)
    lam, vec = np.linalg.eigh(corr)
    clipped = (lam < -EIGEN_TOLERANCE).any(axis=1) & ~bad
    L = np.zeros((n, 6, 6))
    L[:, :5, :5] = vec * np.sqrt(np.clip(lam, 0.0, None))[:, None, :]
    L[:, 5, 5] = 1.0
    L[bad] = np.nan
    return L, int(np.count_nonzero(clipped))


def _sorted_percentiles(values, levels):
    """Linear-interpolation percentiles along axis 1 ignoring NaN (numpy's default method)."""
    v = np.sort(values, axis=1)  # NaN sort last
    m = np.count_nonzero(~np.isnan(v), axis=1)
    top = np.maximum(m - 1, 0)
    rows = np.arange(v.shape[0])
    out = []
    for q in levels:
        pos = q / 100.0 * top
        lo = np.floor(pos).astype(int)
        hi = np.minimum(lo + 1, top)
        lo_v, hi_v = v[rows, lo], v[rows, hi]
        res = lo_v + (pos - lo) * (hi_v - lo_v)
        res[m == 0] = np.nan
        out.append(res)
    return out


def _montecarlo_block(inp, sig, rho, n_samples, rng, parameter, geo, levels):
    """Monte Carlo percentiles for one block of stars.

    Returns ({column: [one array per level]}, counts, excluded fraction per star).
    """
    n = inp["d"].shape[0]
    L, n_clipped = _sqrt_correlation(rho, n)
    z = rng.standard_normal((n, n_samples, 6))
    scale = np.stack([np.broadcast_to(s, (n,)) for s in sig], axis=1)
    noise = np.matmul(z, L.transpose(0, 2, 1)) * scale[:, None, :]
    sa, ca, sd, cd = (inp[k][:, None] for k in ("sa", "ca", "sd", "cd"))
    # Offsets in ra* and dec move the direction on the sphere (no trouble at the poles).
    da, dd = noise[..., 0], noise[..., 1]
    ux = cd * ca - da * sa - dd * sd * ca
    uy = cd * sa + da * ca - dd * sd * sa
    uz = sd + dd * cd
    norm = 1.0 / np.sqrt(ux * ux + uy * uy + uz * uz)
    ux, uy, uz = ux * norm, uy * norm, uz * norm
    cd_s = np.sqrt(ux * ux + uy * uy)
    with np.errstate(invalid="ignore", divide="ignore"):
        ca_s = np.where(cd_s > 0, ux / cd_s, 1.0)
        sa_s = np.where(cd_s > 0, uy / cd_s, 0.0)
        p = inp["p"][:, None] + noise[..., 2]
        bad_draw = ~(p > 0) & np.isfinite(p)
        d = np.where(p > 0, 1.0 / p if parameter == "parallax" else p, np.nan)
    pmra = inp["pmra"][:, None] + noise[..., 3]
    pmdec = inp["pmdec"][:, None] + noise[..., 4]
    rv = inp["rv"][:, None] + noise[..., 5]
    draws = _forward_all(
        sa_s.ravel(), ca_s.ravel(), uz.ravel(), cd_s.ravel(), d.ravel(), pmra.ravel(), pmdec.ravel(), rv.ravel(), geo
    )
    result = {}
    for name in OUTPUT_COLUMNS:
        values = draws[name].reshape(n, n_samples)
        if name in _WRAPPING:  # percentiles of the offset from the nominal angle, wrapped to [-pi, pi)
            centre = inp["nominal_" + name][:, None]
            offsets = np.mod(values - centre + math.pi, 2.0 * math.pi) - math.pi
            qs = [q + centre[:, 0] for q in _sorted_percentiles(offsets, levels)]
        else:
            qs = _sorted_percentiles(values, levels)
        result[name] = [q * _DEG for q in qs] if name in _ANGLES else qs
    counts = {
        "draws": int(np.count_nonzero(bad_draw)),
        "stars": int(np.count_nonzero(bad_draw.any(axis=1))),
        "clipped": n_clipped,
    }
    return result, counts, bad_draw.mean(axis=1)


def _montecarlo(table, res, d, has_position, inp, n_samples, seed, levels, geo):
    """Monte Carlo columns {name: (values, unit, description)} and meta for :func:`to_galactocentric`."""
    n = len(table)
    sig_all, rho_all, _ = _error_inputs(table, res, d)
    rng = seed if isinstance(seed, np.random.Generator) else np.random.default_rng(seed)
    all_levels = tuple(levels) + _SIGMA_LEVELS
    stats = {name: [np.full(n, np.nan) for _ in all_levels] for name in OUTPUT_COLUMNS}
    excluded = np.full(n, np.nan)
    rows = np.flatnonzero(has_position)
    block = max(1, _MC_DRAWS_PER_BLOCK // n_samples)
    totals = {"draws": 0, "stars": 0, "clipped": 0}
    for start in range(0, rows.size, block):
        idx = rows[start : start + block]
        chunk = {k: v[idx] for k, v in inp.items()}
        chunk["d"] = d[idx]
        chunk["p"] = res.parameter_value[idx]
        result, counts, frac = _montecarlo_block(
            chunk,
            [_take(s, idx) for s in sig_all],
            {k: v[idx] for k, v in rho_all.items()},
            n_samples,
            rng,
            res.parameter,
            geo,
            all_levels,
        )
        for name, qs in result.items():
            for target, q in zip(stats[name], qs):
                target[idx] = q
        excluded[idx] = frac
        for k in totals:
            totals[k] += counts[k]
    columns = {}
    for name, (unit, _) in OUTPUT_COLUMNS.items():
        for q, values in zip(levels, stats[name]):
            columns[f"{name}_p{q:g}"] = (values, unit, f"Monte Carlo {q:g}th percentile of {name}")
    for name, (unit, _) in OUTPUT_COLUMNS.items():
        lo, hi = stats[name][-2], stats[name][-1]
        columns[f"sigma_{name}"] = (
            0.5 * (hi - lo),
            unit,
            f"Monte Carlo uncertainty of {name}: half the central 68.27% width",
        )
    columns["mc_excluded_fraction"] = (
        excluded,
        None,
        "fraction of Monte Carlo draws excluded for a non-positive parallax or distance",
    )
    meta = {
        "mc_nonpositive_draws": totals["draws"],
        "mc_stars_with_nonpositive_draws": totals["stars"],
        "mc_clipped_correlations": totals["clipped"],
    }
    return columns, meta
