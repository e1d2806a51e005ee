"""The numerical core of the Oort-constant fit: weighted least squares plus a fitted velocity ellipsoid.

Everything here works on plain float64 arrays prepared by :mod:`mwkin.oort.sample` (kpc, km/s); the
public front is :func:`mwkin.oort.fit_oort`.

The model, in velocity space
----------------------------
A star at heliocentric Galactic position (x, y, z) (x toward the centre, y toward rotation, kpc) has,
to first order, the heliocentric velocity (km/s)

    u_model = M (x, y) - (U, V, W),     M = [[K + C, A - B], [A + B, K - C]]  (acting on x, y; no z part)

where (U, V, W) is the Sun's motion relative to the local mean flow. Projected on the line of sight
and the sky this is exactly the textbook first-order set (mu_l*, mu_b, v_r) of REFERENCES.md. Each
star observes the projection of its velocity on the directions it has data for: the sky plane
(proper motions, converted to km/s with k d), the line of sight (radial velocity), or both. Writing
every star's data as a 3-vector ``u`` in Galactic Cartesian axes (unobserved directions set to zero)
with a 3x3 weight ``Wt = P^T S^-1 P`` (P the observed directions, S the covariance of the observed
components) makes the likelihood of every kind of star the same formula,

    -2 ln L = sum_i (u_i - X_i p)^T Wt_i (u_i - X_i p) + ln det S_i + const,

and, because the design X_i only involves the numbers 1, x_i, y_i, the normal equations of the 7
parameters p = (A, B, C, K, U, V, W) are built from 36 + 9 weighted sums (moments) over the stars,
without any (N, 7) design matrix.

The covariance S_i is the measurement covariance plus the velocity ellipsoid of the stars about the
mean flow, diag(sigma_U^2, sigma_V^2, sigma_W^2) in Galactic axes (or one isotropic sigma^2), projected
on the observed directions. The ellipsoid is fitted by maximum likelihood with Fisher scoring,
alternating with the exact weighted least-squares solution for p at the current ellipsoid; the fixed
point is the joint maximum-likelihood estimate. Since dS/dtheta_k = a_k a_k^T (a_k the observed
projections of axis k), the score and the Fisher matrix are again simple sums:

    d lnL / d theta_k = 1/2 sum_i [ (Wt_i (u_i - X_i p))_k^2 - (Wt_i)_kk ],
    F_kj = 1/2 sum_i (Wt_i)_kj^2.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from .model import DESIGN, N_PARAMETERS, design_coefficients

__all__ = ["Block", "Solution", "solve", "bootstrap_parameters", "sym_apply"]

#: Largest number of stars in one block; keeps the per-star arithmetic in the processor cache.
CHUNK = 16384

_N_PAR = N_PARAMETERS
_T = DESIGN  # the design of the first-order model (see model.py)

# Unique index pairs of a symmetric 3x3 matrix, in the order the weights are stored.
_PAIRS = ((0, 0), (0, 1), (0, 2), (1, 1), (1, 2), (2, 2))
_PAIR_INDEX = {}
for _n, (_a, _b) in enumerate(_PAIRS):
    _PAIR_INDEX[(_a, _b)] = _PAIR_INDEX[(_b, _a)] = _n

#: Change of the model velocity (km/s) below which the distance-error term is not recomputed.
_REFRESH_KMS = 0.01

#: Relative size below which an eigenvalue of the scaled normal matrix counts as zero (no information).
_NULL_TOL = 1e-10


def _dot(a, b):
    """Sum of a * b without BLAS (single-threaded; BLAS threads fare badly on a shared machine)."""
    return np.einsum("i,i->", a, b)


def _inv_sym3(s, out):
    """Inverse of symmetric 3x3 matrices (6 rows of ``s``) into ``out`` (6, n); returns ln det."""
    s00, s01, s02, s11, s12, s22 = s
    c00 = s11 * s22 - s12 * s12
    c01 = s02 * s12 - s01 * s22
    c02 = s01 * s12 - s02 * s11
    det = s00 * c00 + s01 * c01 + s02 * c02
    inv_det = 1.0 / det
    np.multiply(c00, inv_det, out=out[0])
    np.multiply(c01, inv_det, out=out[1])
    np.multiply(c02, inv_det, out=out[2])
    np.multiply(s00 * s22 - s02 * s02, inv_det, out=out[3])
    np.multiply(s01 * s02 - s00 * s12, inv_det, out=out[4])
    np.multiply(s00 * s11 - s01 * s01, inv_det, out=out[5])
    return np.log(det)


_ROWS = ((0, 1, 2), (1, 3, 4), (2, 4, 5))


def sym_apply(w, v):
    """Per-star product of the symmetric 3x3 matrices ``w`` (6, n) with the vectors ``v`` (3, n)."""
    out = np.empty_like(v)
    tmp = np.empty(v.shape[1])
    for a, (i, j, k) in enumerate(_ROWS):
        np.multiply(w[i], v[0], out=out[a])
        out[a] += np.multiply(w[j], v[1], out=tmp)
        out[a] += np.multiply(w[k], v[2], out=tmp)
    return out


@dataclass(eq=False)
class Block:
    """Stars that observe the same directions: ``kind`` "full" (sky + line of sight), "sky" or "los".

    The fit splits a sample into blocks of at most a few ten thousand stars so that the arithmetic
    stays in the processor cache. All arrays have one entry per star: velocities in km/s, positions
    in kpc, covariances in (km/s)^2.

    Attributes
    ----------
    rows : int array
        Positions of the stars in the input table.
    x, y : arrays
        Heliocentric Galactic position in the plane, kpc.
    sl, cl, sb, cb : arrays
        sin and cos of Galactic longitude and latitude.
    u : array, shape (3, n)
        Observed heliocentric velocity in Galactic Cartesian axes (unobserved direction(s) zero).
    distance : array
        Heliocentric distance, kpc.
    e_ll, e_lb, e_bb : arrays or None
        Measurement covariance of the sky-plane velocity (k d mu_l*, k d mu_b).
    e_rr : array or None
        Variance of the radial velocity.
    var_d : array or None
        Distance variance, kpc^2 (None: distance errors not propagated).
    cov_ld, cov_bd : arrays or None
        Covariance of (k d mu_l*, k d mu_b) with the distance, km/s kpc.
    """

    kind: str
    rows: np.ndarray
    x: np.ndarray
    y: np.ndarray
    sl: np.ndarray
    cl: np.ndarray
    sb: np.ndarray
    cb: np.ndarray
    u: np.ndarray
    distance: np.ndarray
    e_ll: np.ndarray | None = None
    e_lb: np.ndarray | None = None
    e_bb: np.ndarray | None = None
    e_rr: np.ndarray | None = None
    var_d: np.ndarray | None = None
    cov_ld: np.ndarray | None = None
    cov_bd: np.ndarray | None = None
    _cache: dict = field(default_factory=dict, repr=False)

    def __len__(self):
        return len(self.rows)

    def subset(self, keep):
        """A new block with only the stars selected by ``keep`` (bool mask, indices or slice)."""

        def pick(a):
            return None if a is None else a[keep]

        return Block(
            kind=self.kind,
            rows=self.rows[keep],
            x=self.x[keep],
            y=self.y[keep],
            sl=self.sl[keep],
            cl=self.cl[keep],
            sb=self.sb[keep],
            cb=self.cb[keep],
            u=self.u[:, keep],
            distance=self.distance[keep],
            e_ll=pick(self.e_ll),
            e_lb=pick(self.e_lb),
            e_bb=pick(self.e_bb),
            e_rr=pick(self.e_rr),
            var_d=pick(self.var_d),
            cov_ld=pick(self.cov_ld),
            cov_bd=pick(self.cov_bd),
        )

    @property
    def n_observed(self):
        """Number of scalar data per star (3, 2 or 1)."""
        return {"full": 3, "sky": 2, "los": 1}[self.kind]

    # ------------------------------------------------------------------ geometry
    def basis(self):
        """Unit vectors e_l, e_b, r_hat, each an array of shape (3, n), cached."""
        if "basis" not in self._cache:
            sl, cl, sb, cb = self.sl, self.cl, self.sb, self.cb
            e_l = np.stack([-sl, cl, np.zeros_like(sl)])
            e_b = np.stack([-sb * cl, -sb * sl, cb])
            r_hat = np.stack([cb * cl, cb * sl, sb])
            self._cache["basis"] = (e_l, e_b, r_hat)
        return self._cache["basis"]

    def _moment_basis(self):
        """The per-star products x, y, x^2, xy, y^2 used in the moments, cached."""
        if "fg" not in self._cache:
            x, y = self.x, self.y
            self._cache["fg"] = (x, y, x * x, x * y, y * y)
        return self._cache["fg"]

    # ------------------------------------------------------------------ covariance
    def _distance_vector(self, p):
        """d(residual)/d(distance), km/s/kpc, shape (3, n).

        The observed sky-plane velocity scales with the distance (k d mu) and so does the model's
        position-dependent part (d times a direction); the solar-motion part and v_r do not.
        """
        coef = design_coefficients(p)
        inv_d = 1.0 / self.distance
        g = np.zeros((3, len(self)))
        for a in range(2):
            g[a] = -(coef[a, 1] * self.x + coef[a, 2] * self.y) * inv_d
        if self.kind == "sky":
            g += self.u * inv_d
        elif self.kind == "full":
            e_l, e_b, _ = self.basis()
            t_l = np.einsum("ij,ij->j", self.u, e_l)
            t_b = np.einsum("ij,ij->j", self.u, e_b)
            g += (t_l * e_l + t_b * e_b) * inv_d
        return g

    def measurement_covariance(self, p=None):
        """Measurement covariance in the block's own coordinates, with the distance term at ``p``.

        "full": 6 rows, Galactic Cartesian velocity; "sky": (ll, lb, bb) of the sky-plane velocity;
        "los": the v_r variance (1 row). Cached until called again with another ``p``.
        """
        if "e0" not in self._cache:
            self._cache["e0"] = self._base_covariance()
        e0 = self._cache["e0"]
        if self.var_d is None or p is None:
            return e0
        g = self._distance_vector(p)
        e_l, e_b, r_hat = self.basis()
        if self.kind == "full":
            c_vec = self.cov_ld * e_l + self.cov_bd * e_b
            return np.stack(
                [
                    e0[n] + self.var_d * g[a] * g[b] + c_vec[a] * g[b] + g[a] * c_vec[b]
                    for n, (a, b) in enumerate(_PAIRS)
                ]
            )
        if self.kind == "sky":
            # Set together with var_d (oort.sample.make_block).
            assert self.cov_ld is not None and self.cov_bd is not None
            g_l = np.einsum("ij,ij->j", g, e_l)
            g_b = np.einsum("ij,ij->j", g, e_b)
            return np.stack(
                [
                    e0[0] + self.var_d * g_l * g_l + 2.0 * self.cov_ld * g_l,
                    e0[1] + self.var_d * g_l * g_b + self.cov_ld * g_b + self.cov_bd * g_l,
                    e0[2] + self.var_d * g_b * g_b + 2.0 * self.cov_bd * g_b,
                ]
            )
        g_r = np.einsum("ij,ij->j", g, r_hat)
        return (e0[0] + self.var_d * g_r * g_r)[None, :]

    def _base_covariance(self):
        if self.kind == "sky":
            assert self.e_ll is not None and self.e_lb is not None and self.e_bb is not None
            return np.stack([self.e_ll, self.e_lb, self.e_bb])
        if self.kind == "los":
            assert self.e_rr is not None
            return self.e_rr[None, :]
        e_l, e_b, r_hat = self.basis()
        # P^T E P + e_rr r r^T with P = [e_l; e_b]: first G = E P (rows g_l, g_b).
        g_l = self.e_ll * e_l + self.e_lb * e_b
        g_b = self.e_lb * e_l + self.e_bb * e_b
        rr = self.e_rr * r_hat
        return np.stack([e_l[a] * g_l[b] + e_b[a] * g_b[b] + rr[a] * r_hat[b] for a, b in _PAIRS])

    def covariance(self, theta, cov):
        """Total covariance (measurement ``cov`` + ellipsoid ``theta``) in the block's coordinates."""
        tu, tv, tw = theta
        if self.kind == "full":
            return (cov[0] + tu, cov[1], cov[2], cov[3] + tv, cov[4], cov[5] + tw)
        if self.kind == "sky":
            cl2 = self.cl * self.cl
            sl2 = 1.0 - cl2
            sb2 = self.sb * self.sb
            return np.stack(
                [
                    cov[0] + tu * sl2 + tv * cl2,
                    cov[1] + (tu - tv) * self.sb * self.sl * self.cl,
                    cov[2] + sb2 * (tu * cl2 + tv * sl2) + tw * (1.0 - sb2),
                ]
            )
        _, _, r_hat = self.basis()
        return (cov[0] + tu * r_hat[0] ** 2 + tv * r_hat[1] ** 2 + tw * r_hat[2] ** 2)[None, :]

    def weights(self, theta, cov):
        """Velocity-space weights Wt = P^T S^-1 P, shape (6, n), and ln det S, for ellipsoid ``theta``.

        Parameters
        ----------
        theta : sequence of 3 floats
            sigma_U^2, sigma_V^2, sigma_W^2 in (km/s)^2.
        cov : array
            The block's measurement covariance (:meth:`measurement_covariance`).
        """
        s = self.covariance(theta, cov)
        w = np.empty((6, len(self)))
        if self.kind == "full":
            return w, _inv_sym3(s, w)
        e_l, e_b, r_hat = self.basis()
        if self.kind == "sky":
            det = s[0] * s[2] - s[1] * s[1]
            inv_det = 1.0 / det
            i_ll, i_lb, i_bb = s[2] * inv_det, -s[1] * inv_det, s[0] * inv_det
            f_l = i_ll * e_l + i_lb * e_b
            f_b = i_lb * e_l + i_bb * e_b
            for n, (a, b) in enumerate(_PAIRS):
                np.add(e_l[a] * f_l[b], e_b[a] * f_b[b], out=w[n])
            return w, np.log(det)
        inv = 1.0 / s[0]
        for n, (a, b) in enumerate(_PAIRS):
            np.multiply(r_hat[a] * r_hat[b], inv, out=w[n])
        return w, np.log(s[0])

    def observed_variances(self, theta, cov):
        """Total variance of each observed component (k d mu_l*, k d mu_b, v_r), (km/s)^2; NaN if unobserved."""
        s = self.covariance(theta, cov)
        nan = np.full(len(self), np.nan)
        if self.kind == "full":
            e_l, e_b, r_hat = self.basis()

            def quad(v):
                return np.einsum("ij,ij->j", sym_apply(s, v), v)

            return quad(e_l), quad(e_b), quad(r_hat)
        if self.kind == "sky":
            return s[0], s[2], nan
        return nan, nan, s[0]

    # ------------------------------------------------------------------ sums
    def moments(self, w):
        """Weighted sums for the normal equations: mom[pair, fg] (6x6) and rhs[a, f] (3x3)."""
        fg = self._moment_basis()
        beta0 = sym_apply(w, self.u)
        mom = np.empty((6, 6))
        rhs = np.empty((3, 3))
        for n in range(6):
            mom[n, 0] = w[n].sum()
            for m in range(5):
                mom[n, m + 1] = _dot(w[n], fg[m])
        for a in range(3):
            rhs[a, 0] = beta0[a].sum()
            rhs[a, 1] = _dot(beta0[a], self.x)
            rhs[a, 2] = _dot(beta0[a], self.y)
        return mom, rhs

    def per_star_moments(self, w):
        """Per-star contributions to the moments, shape (n, 36 + 9), for bootstrap resampling."""
        fg = self._moment_basis()
        beta0 = sym_apply(w, self.u)
        out = np.empty((len(self), 45))
        for n in range(6):
            out[:, 6 * n] = w[n]
            for m in range(5):
                out[:, 6 * n + m + 1] = w[n] * fg[m]
        for a in range(3):
            out[:, 36 + 3 * a] = beta0[a]
            out[:, 37 + 3 * a] = beta0[a] * self.x
            out[:, 38 + 3 * a] = beta0[a] * self.y
        return out

    def residual(self, p):
        """u - X p, the velocity residual in Galactic axes, shape (3, n), km/s."""
        coef = design_coefficients(p)
        model = coef[:, :1] + coef[:, 1:2] * self.x + coef[:, 2:3] * self.y
        return self.u - model

    def score_terms(self, w, p):
        """Sums for the dispersion step: sum beta_k^2, sum Wt_n, sum Wt_n^2 and sum delta.beta."""
        delta = self.residual(p)
        beta = sym_apply(w, delta)
        beta2 = np.einsum("ij,ij->i", beta, beta)
        w_sum = w.sum(axis=1)
        w_sq = np.einsum("ij,ij->i", w, w)
        quad = np.einsum("ij,ij->", beta, delta)
        return beta2, w_sum, w_sq, quad

    def chi2_per_star(self, w, p):
        """(u - X p)^T Wt (u - X p) for every star."""
        delta = self.residual(p)
        return np.einsum("ij,ij->j", sym_apply(w, delta), delta)


def _normal_equations(mom, rhs):
    """Assemble the 7x7 normal matrix and right-hand side from summed moments."""
    # mom[pair, fg]: expand to M4[a, b, f, g] = sum_i Wt_ab f g.
    fg_index = np.array([[0, 1, 2], [1, 3, 4], [2, 4, 5]])
    pair_index = np.array([[_PAIR_INDEX[(a, b)] for b in range(3)] for a in range(3)])
    m4 = mom[pair_index[:, :, None, None], fg_index[None, None, :, :]]
    normal = np.einsum("ajf,bkg,abfg->jk", _T, _T, m4)
    vector = np.einsum("ajf,af->j", _T, rhs)
    return normal, vector


@dataclass
class LinearSolve:
    """Solution of the normal equations with the directions the data do not constrain set aside."""

    p: np.ndarray
    covariance: np.ndarray
    null: np.ndarray  # bool per parameter: no information (value and error undefined)


def _solve_normal(normal, vector, fixed=None):
    """Solve N p = r, robust to parameters without information (zero rows) and exact degeneracies.

    Parameters with no information, or that load on a null direction of the scaled normal matrix,
    are flagged in ``null``; their value is set to zero and their variance to infinity. ``fixed`` (bool
    per parameter) forces parameters out of the fit the same way.
    """
    diag = np.diag(normal).copy()
    null = ~(diag > 0)
    if fixed is not None:
        null |= fixed
    free = ~null
    p = np.zeros(_N_PAR)
    cov = np.full((_N_PAR, _N_PAR), np.nan)
    if not free.any():
        return LinearSolve(p, cov, null)
    sub = normal[np.ix_(free, free)]
    scale = 1.0 / np.sqrt(np.diag(sub))
    scaled = sub * scale[:, None] * scale[None, :]
    evals, evecs = np.linalg.eigh(scaled)
    small = evals < _NULL_TOL * evals.max()
    if small.any():
        loading = np.abs(evecs[:, small]).max(axis=1)
        degenerate = loading > 1e-6
        idx = np.flatnonzero(free)
        null[idx[degenerate]] = True
        return _solve_normal(normal, vector, fixed=null)
    inv_scaled = (evecs / evals) @ evecs.T
    cov_free = inv_scaled * scale[:, None] * scale[None, :]
    p[free] = cov_free @ vector[free]
    cov[np.ix_(free, free)] = cov_free
    cov[null, :] = np.nan
    cov[:, null] = np.nan
    cov[null, null] = np.inf
    return LinearSolve(p, cov, null)


@dataclass(eq=False)
class Solution:
    """Result of :func:`solve` (plain numbers; the public wrapper turns it into an OortFit)."""

    p: np.ndarray
    covariance: np.ndarray
    null: np.ndarray  # bool per parameter: no information (value and error undefined)
    theta: np.ndarray  # sigma_U^2, sigma_V^2, sigma_W^2, (km/s)^2
    theta_covariance: np.ndarray
    theta_free: np.ndarray  # bool: ellipsoid axis seen by the data
    chi2: float
    loglike: float
    n_obs: int
    n_iterations: int
    converged: bool
    isotropic: bool
    weights_theta: np.ndarray | None = None  # the ellipsoid ``weights`` were made with
    covs: list = field(repr=False, default_factory=list)  # per block: measurement covariance used
    weights: list = field(repr=False, default_factory=list)  # per block: (Wt, ln det S) at the solution


def _linear_step(blocks, covs, theta):
    """Weights at ``theta`` and the weighted least-squares solution for the 7 parameters."""
    mom = np.zeros((6, 6))
    rhs = np.zeros((3, 3))
    weights = []
    for block, cov in zip(blocks, covs):
        w, logdet = block.weights(theta, cov)
        m, r = block.moments(w)
        mom += m
        rhs += r
        weights.append((w, logdet))
    normal, vector = _normal_equations(mom, rhs)
    return _solve_normal(normal, vector), weights


def _dispersion_step(blocks, weights, p, isotropic, free):
    """Score and Fisher matrix of the ellipsoid, and -2 lnL and chi2, at (p, theta)."""
    beta2 = np.zeros(3)
    w_sum = np.zeros(6)
    w_sq = np.zeros(6)
    quad = 0.0
    logdet = 0.0
    for block, (w, ld) in zip(blocks, weights):
        b2, ws, wq, q = block.score_terms(w, p)
        beta2 += b2
        w_sum += ws
        w_sq += wq
        quad += q
        logdet += ld.sum()
    diag = [_PAIR_INDEX[(k, k)] for k in range(3)]
    score = 0.5 * (beta2 - w_sum[diag])
    fisher = 0.5 * np.array([[w_sq[_PAIR_INDEX[(k, j)]] for j in range(3)] for k in range(3)])
    if isotropic:
        score = np.array([score.sum()])
        fisher = np.array([[fisher.sum()]])
    else:
        score = np.where(free, score, 0.0)
        fisher = np.where(np.outer(free, free), fisher, 0.0) + np.diag((~free).astype(float))
    return score, fisher, quad + logdet, quad


def solve(blocks, *, isotropic=False, theta0=None, p0=None, max_iter=50, tol=1e-3):
    """Joint maximum-likelihood fit of the 7 linear parameters and the velocity ellipsoid.

    Each iteration solves the weighted least squares for p at the current ellipsoid, then takes one
    Fisher-scoring step for the ellipsoid at that p. The distance-error term of the covariance depends
    on p through the model velocity M (x, y); it is refreshed while that still changes by more than
    0.01 km/s anywhere in the sample.

    Parameters
    ----------
    blocks : list of Block
        Non-empty blocks of stars.
    isotropic : bool
        One dispersion for all three axes instead of (sigma_U, sigma_V, sigma_W).
    theta0, p0 : optional
        Starting values (warm start of refits, e.g. in sigma clipping).
    max_iter : int
        Largest number of iterations.
    tol : float
        Converged when the Fisher-scoring step changes no dispersion^2 by more than ``tol`` relatively
        (and the distance term no longer moves).

    Returns
    -------
    Solution
    """
    theta = np.full(3, 30.0**2) if theta0 is None else np.array(theta0, dtype=float)
    if isotropic:
        theta[:] = theta.mean()
    p = None if p0 is None else np.array(p0, dtype=float)
    n_obs = sum(len(b) * b.n_observed for b in blocks)
    free = _dispersion_free(blocks, isotropic)
    distance_terms = any(b.var_d is not None for b in blocks)
    d_max = max(float(b.distance.max()) for b in blocks)
    covs = [b.measurement_covariance(p) for b in blocks]
    p_used = p
    floor = 1e-8
    converged = False
    for iteration in range(1, max_iter + 1):  # noqa: B007 (the count is reported after the loop)
        lin, weights = _linear_step(blocks, covs, theta)
        p = lin.p
        score, fisher, m2ll, quad = _dispersion_step(blocks, weights, p, isotropic, free)
        theta_at_p = theta
        step = np.linalg.lstsq(fisher, score, rcond=None)[0]
        if isotropic:
            step = np.repeat(step, 3)
        new_theta = theta + step
        # Keep variances positive: a step through zero goes a tenth of the way there instead.
        new_theta = np.where(new_theta > floor, new_theta, np.maximum(theta * 0.1, floor))
        change = np.max(np.abs(new_theta - theta) / np.maximum(theta, 1e-6))
        theta = new_theta
        moved = False
        if distance_terms:
            # The distance term depends on p through the model velocity M (x, y) only.
            moved = p_used is None or np.max(np.abs(p[:4] - p_used[:4])) * d_max > _REFRESH_KMS
            if moved:
                covs = [b.measurement_covariance(p) for b in blocks]
                p_used = p
        if change < tol and not moved:
            converged = True
            break
    if not converged:
        theta = theta_at_p
    # Converged: theta is the ellipsoid after the last (small) Fisher-scoring step, which converges
    # quadratically, so it is accurate to ~tol^2; p comes from the solve one step before, and a
    # relative change ~tol of the weights moves it by a negligible fraction of its error.
    theta_cov = np.linalg.pinv(fisher)
    if isotropic:
        theta_cov = np.full((3, 3), theta_cov[0, 0])
    theta_cov = np.where(np.outer(free, free), theta_cov, np.nan)
    assert p is not None  # set by the first iteration
    return Solution(
        p=p,
        covariance=lin.covariance,
        null=lin.null,
        theta=theta,
        theta_covariance=theta_cov,
        theta_free=free,
        chi2=float(quad),
        loglike=float(-0.5 * m2ll),
        n_obs=int(n_obs),
        n_iterations=iteration,
        converged=converged,
        isotropic=isotropic,
        weights_theta=theta_at_p,
        covs=covs,
        weights=weights,
    )


def _dispersion_free(blocks, isotropic):
    """Which ellipsoid axes the data see at all (stars all in one direction cannot see every axis)."""
    if isotropic:
        return np.ones(3, dtype=bool)
    seen = np.zeros(3)
    for block in blocks:
        e_l, e_b, r_hat = block.basis()
        for vec in {"full": (e_l, e_b, r_hat), "sky": (e_l, e_b), "los": (r_hat,)}[block.kind]:
            seen += np.einsum("ij,ij->i", vec, vec)
    total = sum(len(b) for b in blocks)
    return seen > 1e-6 * total


def bootstrap_parameters(blocks, solution, n_resamples, rng, chunk=50):
    """Linear parameters refitted on ``n_resamples`` multinomial resamples of the stars.

    Each resample draws as many stars as there are, with replacement; the number of times a star is
    drawn enters the normal equations as a weight, so the resampled normal equations are a
    counts-weighted sum of per-star moments (one matrix product for many resamples). The ellipsoid and
    the distance-error term are held at the full-sample solution; their own uncertainty affects the
    other parameters only at second order.

    Returns
    -------
    numpy.ndarray, shape (n_resamples, 7)
        Parameter values (NaN for parameters without information).
    """
    q = np.concatenate([block.per_star_moments(w) for block, (w, _) in zip(blocks, solution.weights)])
    n = len(q)
    out = np.empty((n_resamples, _N_PAR))
    done = 0
    while done < n_resamples:
        size = min(chunk, n_resamples - done)
        counts = np.empty((size, n))
        for k in range(size):
            counts[k] = np.bincount(rng.integers(0, n, n), minlength=n)
        sums = counts @ q
        for k in range(size):
            normal, vector = _normal_equations(sums[k, :36].reshape(6, 6), sums[k, 36:45].reshape(3, 3))
            lin = _solve_normal(normal, vector, fixed=solution.null)
            values = lin.p.copy()
            values[lin.null] = np.nan
            out[done + k] = values
        done += size
    return out
