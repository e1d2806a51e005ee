"""The fit itself: :func:`fit_oort` and :func:`fit_in_distance_bins` (see :mod:`mwkin.oort`)."""

from __future__ import annotations

import math
import warnings
from typing import TYPE_CHECKING

import astropy.units as u
import numpy as np
from astropy.table import QTable, Table

from ..coords import K_KMS_PER_MASYR_KPC
from ..frames import frame_or_default
from ..units import to_value
from .model import KMS_KPC, PARAMETERS, UNITS, derived_from_samples, derived_quantities
from .result import OortFit
from .sample import STATUS, STATUS_CODE, USES, OortInputError, prepare_sample
from .solver import bootstrap_parameters, solve, sym_apply

if TYPE_CHECKING:
    from ..frames import SolarFrame

__all__ = [
    "fit_oort",
    "fit_in_distance_bins",
    "OortFit",
    "OortInputError",
    "OortOutlierWarning",
    "heavy_tail_outliers",
    "UNCONSTRAINED_ERROR",
    "DISPERSIONS",
]

#: A parameter whose 1-sigma error exceeds this is reported as not constrained (the data say little
#: more than its sign): km/s/kpc for the Oort constants, km/s for the solar motion.
UNCONSTRAINED_ERROR = {"A": 20.0, "B": 20.0, "C": 20.0, "K": 20.0, "U": 50.0, "V": 50.0, "W": 50.0}

#: Accepted ``dispersion`` models.
DISPERSIONS = {
    "ellipsoid": "velocity ellipsoid (sigma_U, sigma_V, sigma_W) aligned with the Galactic axes",
    "isotropic": "one velocity dispersion for all directions",
}

_FIRST_ORDER_NOTE = (
    "first-order model: the velocity field is taken as linear around the Sun. Its error grows with "
    "distance (for a disc model the largest mu_l* error is about 0.02 mas/yr at 0.05 kpc, 0.09 at 0.2 kpc "
    "and 0.5 at 1 kpc, against a signal of ~6 mas/yr); compare fits in distance bins to see where it "
    "stops holding"
)
_FAR_NOTE = (
    "the distance range reaches beyond ~1 kpc, where the first-order model is no longer adequate: "
    "the fitted values there mix the local gradients with higher-order terms"
)
_PM_ONLY_NOTE = (
    "proper motions only: K (and the radial part of the flow) enters only through mu_b at "
    "|b| > 0 (its signal is K sin b cos b) and the 1/d solar-motion terms; check its error"
)
_RV_ONLY_NOTE = (
    "radial velocities only: B does not appear in v_r and is not measured, so Omega0, dV/dR, V0 and kappa are not given"
)
_V0_NOTE = (
    "V0 = R0 (A - B) is the speed of the stars' local mean flow from a first-order model, not the "
    "circular velocity: a warm population lags it (asymmetric drift)"
)
_DISPERSION_NOTE = (
    "the velocity dispersion is fitted by maximum likelihood, so chi2/dof is close to 1 by "
    "construction and is not a test of the model"
)


def _as_frame(frame):
    return frame_or_default(frame, error=OortInputError)


def _standard_table(stars):
    """The star table with standard columns: passed through if it already is one, else read."""
    if isinstance(stars, (Table, QTable)) and "mwkin_source" in stars.meta:
        return stars
    from ..catalog import read_catalog

    return read_catalog(stars)


def _default_distance(distance):
    if distance is not None:
        if not hasattr(distance, "resolve"):
            raise OortInputError(
                "distance must be a distance choice such as mwkin.distances.InverseParallax() or "
                f"DistanceColumn('distance'); got {type(distance).__name__}"
            )
        return distance
    from ..distances import InverseParallax

    return InverseParallax()


# ---------------------------------------------------------------------- potential comparison
def _potential_oort(potential, frame):
    """A and B implied by ``potential`` at the frame's in-plane R0 (km/s/kpc)."""
    R = frame.inplane_radius
    result = potential.oort_constants(R)
    out = {"R_kpc": R}
    for key in ("A", "B", "Omega", "kappa"):
        value = None
        if isinstance(result, dict):
            value = result.get(key)
        elif hasattr(result, key):
            value = getattr(result, key)
        elif hasattr(result, "colnames") and key in result.colnames:
            value = result[key]
        if value is None:
            continue
        unit = KMS_KPC
        value = np.asarray(to_value(value, unit, f"potential Oort constant {key}"), dtype=float).ravel()
        out[key] = float(value[0])
    if isinstance(result, (tuple, list)) and "A" not in out:
        out["A"] = float(to_value(result[0], KMS_KPC, "potential A"))
        out["B"] = float(to_value(result[1], KMS_KPC, "potential B"))
    if "A" not in out or "B" not in out:
        raise OortInputError("potential.oort_constants(R) did not return A and B")
    return out


# ---------------------------------------------------------------------- the fit
def fit_oort(
    stars,
    frame: SolarFrame | None = None,
    *,
    use="both",
    distance=None,
    distance_range=(0.0, 0.5),
    quality=None,
    robust=False,
    clip=4.0,
    bootstrap=0,
    seed=None,
    bins=None,
    potential=None,
    dispersion="ellipsoid",
    propagate_distance_errors=True,
) -> OortFit:
    """Fit the Oort constants and the solar motion to a stellar sample.

    Parameters
    ----------
    stars : astropy Table / QTable, pandas DataFrame or path
        Star table with the standard columns of :func:`mwkin.catalog.read_catalog` (``ra``, ``dec``
        [deg], ``parallax`` [mas] or ``distance`` [kpc], ``pmra`` = mu_alpha*, ``pmdec`` [mas/yr],
        ``radial_velocity`` [km/s], their ``*_error`` columns and the Gaia ``*_corr`` columns). A table
        that has not been through ``read_catalog`` is passed through it first.
    frame : SolarFrame, optional
        Gives R0 for V0 and the potential comparison; default ``SolarFrame()`` (astropy v4.0 values).
        The fit itself only needs the Galactic coordinates of the stars.
    use : {"both", "proper_motions", "radial_velocities"}, default "both"
        The observables to fit. "both" uses every star's proper motion and, where it has one, its
        radial velocity.
    distance : distance choice, optional
        :class:`mwkin.distances.InverseParallax` (default, ``min_snr=5``) or
        :class:`mwkin.distances.DistanceColumn`.
    distance_range : (float, float) or Quantity, default (0, 0.5)
        Stars with ``min <= d < max`` (kpc) are fitted.
    quality : bool array, column name or callable(table) -> bool array, optional
        Extra selection; rows where it is False are left out (reason ``quality``).
    robust : bool, default False
        Iterative sigma clipping: stars whose squared normalised residual exceeds the chi-square
        quantile with the tail probability of ``clip`` Gaussian sigma (for their number of data) are
        rejected and the fit repeated until the set of rejected stars stops changing.
    clip : float, default 4.0
        Clipping threshold in Gaussian sigma.
    bootstrap : int, default 0
        Number of bootstrap resamples (multinomial counts of the used stars) for percentile intervals,
        at most :data:`MAX_BOOTSTRAP`.
    seed : int, optional
        Seed of the bootstrap (numpy ``default_rng``); the same seed gives the same resamples.
    bins : sequence of (min, max), optional
        Distance bins (kpc): each is fitted separately (same settings) and ``fit.bins`` lists A, B, C, K
        per bin. :func:`fit_in_distance_bins` does only that.
    potential : Potential, optional
        Anything with ``oort_constants(R)`` (e.g. ``mwkin.potentials.Potential.preset("MWPotential2014")``):
        the A, B it implies at the frame's in-plane R0 go to ``fit.potential_oort``.
    dispersion : {"ellipsoid", "isotropic"}, default "ellipsoid"
        Model of the stars' velocity spread about the mean flow (fitted by maximum likelihood).
    propagate_distance_errors : bool, default True
        Add the distance uncertainty's effect (and, for inverse-parallax distances, its correlation with
        the proper motions) to each star's covariance.

    Returns
    -------
    OortFit

    Raises
    ------
    OortInputError
        For an unknown ``use`` or ``dispersion``, a bad ``distance_range``, ``bins``, ``quality``, ``clip``,
        ``bootstrap`` or ``seed``, a missing column, or when no star is left after the selections (the
        message gives the counts by reason). Errors of :func:`mwkin.catalog.read_catalog` and of the
        distance choice pass through (both are ValueError subclasses).

    Notes
    -----
    * Weights: each star's measurement covariance -- the pmra/pmdec errors with ``pmra_pmdec_corr``
      rotated into (mu_l*, mu_b), the radial-velocity error, and the distance term -- plus the velocity
      ellipsoid of the stars, diag(sigma_U^2, sigma_V^2, sigma_W^2) in Galactic axes (constant over
      the sample, no vertex deviation), converted per star to mas/yr with k d. The ellipsoid is fitted
      by maximum likelihood jointly with the 7 linear parameters. Positional errors are neglected.
    * Errors come from the inverse Fisher matrix at the solution. A parameter is reported as not
      constrained when the normal matrix has no information on it (a zero or degenerate direction) or
      its error exceeds :data:`UNCONSTRAINED_ERROR`.
    * First-order model: accurate only near the Sun (see the module docstring and ``fit.notes``).
    * The bootstrap refits the linear parameters with the ellipsoid held at the full-sample value.

    References
    ----------
    Oort, J. H. 1927, BAN 3, 275 (the constants A and B); Ogorodnikov, K. F. 1932 and Milne, E. A.
    1935 (the general linear field with C and K); Binney & Tremaine 2008, Galactic Dynamics, 2nd ed.,
    Sect. 3.2.3; Bovy, J. 2017, MNRAS 468, L63 (a Gaia measurement of A, B, C, K).

    Examples
    --------
    >>> from mwkin.distances import DistanceColumn
    >>> fit = fit_oort(stars, use="proper_motions", distance=DistanceColumn())   # doctest: +SKIP
    >>> print(fit.summary())                                                     # doctest: +SKIP

    The defaults: proper motions and radial velocities, stars within 0.5 kpc.

    >>> from mwkin.demo import survey
    >>> fit = fit_oort(survey(n=3000, seed=1))
    >>> fit.use, fit.distance_range
    ('both', (0.0, 0.5))
    """
    frame = _as_frame(frame)
    if dispersion not in DISPERSIONS:
        raise OortInputError(f"dispersion must be one of {', '.join(map(repr, DISPERSIONS))}; got {dispersion!r}")
    if use not in USES:
        raise OortInputError(f"use must be one of {', '.join(map(repr, USES))}; got {use!r}")
    if (
        isinstance(bootstrap, bool)
        or not isinstance(bootstrap, (int, np.integer))
        or not 0 <= bootstrap <= MAX_BOOTSTRAP
    ):
        raise OortInputError(
            f"bootstrap must be a whole number of resamples from 0 to {MAX_BOOTSTRAP}, got {bootstrap!r}"
        )
    if seed is not None:
        if isinstance(seed, bool) or not isinstance(seed, (int, np.integer)) or seed < 0:
            raise OortInputError(f"seed must be a whole number >= 0 or None, got {seed!r}")
        seed = int(seed)
    if robust and not (np.isfinite(clip) and clip > 0):
        raise OortInputError(f"clip must be a positive number of sigma, got {clip!r}")
    table = _standard_table(stars)
    distance = _default_distance(distance)
    bin_edges = _check_bins(bins) if bins is not None else None
    opts = dict(use=use, distance=distance, quality=quality, propagate_distance_errors=propagate_distance_errors)
    prep = prepare_sample(table, distance_range=distance_range, **opts)
    lo, hi = (float(to_value(x, "kpc", "distance_range")) for x in distance_range)
    fit = _fit_prepared(
        prep,
        frame=frame,
        use=use,
        distance=distance,
        distance_range=(lo, hi),
        robust=robust,
        clip=clip,
        bootstrap=bootstrap,
        seed=seed,
        dispersion=dispersion,
        potential=potential,
    )
    if bin_edges is not None:
        fit.bins = fit_in_distance_bins(
            table, bin_edges, frame=frame, robust=robust, clip=clip, dispersion=dispersion, **opts
        )
        fit.notes.append("distance bins: where A and B drift with distance, the first-order model stops holding")
    return fit


def _check_bins(bins):
    edges = []
    try:
        for lo, hi in bins:
            lo, hi = float(to_value(lo, "kpc", "bins")), float(to_value(hi, "kpc", "bins"))
            if not (0 <= lo < hi):
                raise OortInputError(f"each distance bin must satisfy 0 <= min < max (kpc), got ({lo}, {hi})")
            edges.append((lo, hi))
    except (TypeError, ValueError) as exc:
        if isinstance(exc, OortInputError):
            raise
        raise OortInputError(f"bins must be a sequence of (min, max) pairs in kpc, got {bins!r}") from None
    if not edges:
        raise OortInputError("bins is empty")
    return edges


def _no_stars_message(prep, distance_range):
    counts = prep.counts()
    detail = ", ".join(f"{k}: {v}" for k, v in counts.items()) or "the table has no rows"
    extra = ""
    if prep.distance_reasons:
        extra = " (no_distance: " + ", ".join(f"{k}: {v}" for k, v in prep.distance_reasons.items()) + ")"
    return (
        f"no star is left to fit after the selections ({prep.n_rows} rows; left out by reason: "
        f"{detail}{extra}; distance range {distance_range[0]:g}-{distance_range[1]:g} kpc)"
    )


def _fit_prepared(prep, *, frame, use, distance, distance_range, robust, clip, bootstrap, seed, dispersion, potential):
    if not prep.blocks:
        raise OortInputError(_no_stars_message(prep, distance_range))
    isotropic = dispersion == "isotropic"
    status = prep.status.copy()
    candidates = prep.blocks
    blocks = candidates
    solution = solve(blocks, isotropic=isotropic)
    n_rejected = 0
    if robust:
        limits = {m: _chi2_limit(clip, m) for m in (1, 2, 3)}
        rejected_prev = None
        for _ in range(20):
            masks = []
            for block in candidates:
                w, _ = block.weights(solution.theta, block.measurement_covariance(solution.p))
                chi2 = block.chi2_per_star(w, solution.p)
                masks.append(chi2 <= limits[block.n_observed])
            rejected = np.concatenate([b.rows[~m] for b, m in zip(candidates, masks)])
            unchanged = rejected_prev is not None and np.array_equal(rejected, rejected_prev)
            if unchanged or (rejected_prev is None and rejected.size == 0):
                rejected_prev = rejected
                break
            rejected_prev = rejected
            blocks = [b.subset(m) for b, m in zip(candidates, masks) if m.any()]
            if not blocks:
                raise OortInputError("sigma clipping rejected every star; raise clip")
            solution = solve(blocks, isotropic=isotropic, theta0=solution.theta, p0=solution.p)
        assert rejected_prev is not None  # set by the first pass of the loop
        n_rejected = len(rejected_prev)
        status[rejected_prev] = STATUS_CODE["outlier"]
    n_counts = {}
    for code, (name, _) in STATUS.items():
        k = int(np.count_nonzero(status == code))
        if code and k:
            n_counts[name] = k
    notes = list(prep.notes)
    return _build_fit(
        solution,
        blocks,
        candidates,
        status,
        n_counts,
        prep,
        frame=frame,
        use=use,
        distance=distance,
        distance_range=distance_range,
        robust=robust,
        clip=clip,
        n_rejected=n_rejected,
        bootstrap=bootstrap,
        seed=seed,
        dispersion=dispersion,
        potential=potential,
        notes=notes,
    )


#: Most bootstrap resamples one fit runs (our choice): percentile intervals settle long before this,
#: and each resample keeps 7 numbers (10^5 resamples: 5.6 MB, a few minutes for 10^5 stars).
MAX_BOOTSTRAP = 100_000


class OortOutlierWarning(UserWarning):
    """A least-squares Oort fit whose residuals have heavy tails; ``robust=True`` is the remedy."""


#: Residual, in robust standard deviations (1.4826 x the median absolute deviation), beyond which a star
#: counts as an outlier for the heavy-tail check (our choice: 5 sigma, 6e-7 of a Gaussian sample).
OUTLIER_SIGMA = 5.0

#: Fraction of outliers above which a fit without clipping warns (our choice; a Gaussian sample of
#: 10^5 stars has about 0.2 such stars in all, a sample with 0.1 % wild values has 100).
OUTLIER_FRACTION = 1e-3


def heavy_tail_outliers(z, used):
    """Stars whose normalised residual lies beyond :data:`OUTLIER_SIGMA` robust standard deviations.

    Parameters
    ----------
    z : ndarray, shape (3, n)
        Normalised residuals of mu_l*, mu_b and v_r (NaN where not observed).
    used : ndarray of bool, shape (n,)
        Stars in the fit.

    Returns
    -------
    ndarray of bool, shape (n,)
        True for a used star with any component beyond the limit.

    Notes
    -----
    The scale is the median absolute deviation of the used stars' residuals, not the fitted dispersion:
    wild values inflate a least-squares dispersion until they no longer look wild against it, but they
    barely move the median absolute deviation (common practice, no source).
    """
    outlier = np.zeros(z.shape[1], dtype=bool)
    for component in z:
        ok = used & np.isfinite(component)
        if np.count_nonzero(ok) < 20:
            continue
        values = component[ok]
        centre = np.median(values)
        scale = 1.4826 * np.median(np.abs(values - centre))
        if scale > 0:
            outlier[ok] |= np.abs(values - centre) > OUTLIER_SIGMA * scale
    return outlier


def _chi2_limit(clip, dof):
    """Chi-square value with the same upper-tail probability as |z| > clip for a Gaussian z.

    dof 1: clip^2; dof 2: the tail is exp(-x/2); dof 3: the tail is erfc(sqrt(x/2)) + sqrt(2x/pi)
    exp(-x/2), solved by bisection (Abramowitz & Stegun 1964, 26.4.4-26.4.5 [from memory]).
    """
    tail = math.erfc(clip / math.sqrt(2.0))
    if dof == 1:
        return clip * clip
    if dof == 2:
        return -2.0 * math.log(tail)

    def sf3(x):
        return math.erfc(math.sqrt(x / 2.0)) + math.sqrt(2.0 * x / math.pi) * math.exp(-x / 2.0)

    lo, hi = 0.0, clip * clip + 40.0
    for _ in range(200):
        mid = 0.5 * (lo + hi)
        lo, hi = (mid, hi) if sf3(mid) > tail else (lo, mid)
    return 0.5 * (lo + hi)


def _constrained(solution):
    errors = np.sqrt(np.abs(np.diag(solution.covariance)))
    constrained = {}
    for j, name in enumerate(PARAMETERS):
        constrained[name] = bool(
            not solution.null[j] and np.isfinite(errors[j]) and errors[j] <= UNCONSTRAINED_ERROR[name]
        )
    return errors, constrained


def _build_fit(
    solution,
    blocks,
    candidates,
    status,
    n_counts,
    prep,
    *,
    frame,
    use,
    distance,
    distance_range,
    robust,
    clip,
    n_rejected,
    bootstrap,
    seed,
    dispersion,
    potential,
    notes,
):
    p = solution.p.copy()
    cov = solution.covariance.copy()
    errors, constrained = _constrained(solution)
    p[solution.null] = np.nan
    errors[solution.null] = np.nan
    theta = solution.theta
    sig = np.sqrt(theta)
    with np.errstate(invalid="ignore", divide="ignore"):
        sig_err = np.sqrt(np.diag(solution.theta_covariance)) / (2.0 * sig)
    n_par = int(np.count_nonzero(~solution.null))
    n_disp = 1 if solution.isotropic else int(np.count_nonzero(solution.theta_free))
    dof = solution.n_obs - n_par - n_disp
    derived = derived_quantities(p, cov, solution.null, frame.R0)
    if not (constrained["A"] and constrained["B"]):
        derived = {k: (float("nan"), float("nan")) for k in derived}
    notes = list(notes)
    notes.insert(0, _FIRST_ORDER_NOTE)
    if distance_range[1] > 1.0:
        notes.append(_FAR_NOTE)
    if use == "proper_motions":
        notes.append(_PM_ONLY_NOTE)
    if use == "radial_velocities":
        notes.append(_RV_ONLY_NOTE)
    loose = [name for name in PARAMETERS if not constrained[name]]
    if loose:
        notes.append(
            "not constrained by these data (no information, or error above the limit in "
            f"UNCONSTRAINED_ERROR): {', '.join(loose)}"
        )
    notes.append(_V0_NOTE)
    notes.append(
        _DISPERSION_NOTE
        + (
            ""
            if dispersion == "isotropic"
            else "; the ellipsoid is aligned with the Galactic axes and constant over the sample"
        )
    )
    if hasattr(distance, "describe"):
        notes.append(f"distances: {distance.describe()}")
    if not solution.converged:
        notes.append(
            f"the dispersion fit did not converge in {solution.n_iterations} iterations; treat the errors with care"
        )
    boot = None
    if bootstrap:
        boot = _bootstrap(blocks, solution, bootstrap, seed, frame.R0)
    pot = None
    pot_desc = ""
    if potential is not None:
        pot = _potential_oort(potential, frame)
        pot_desc = potential.describe() if hasattr(potential, "describe") else type(potential).__name__
    if candidates is blocks:
        theta_used = solution.weights_theta
        evaluated = [(b, c, w) for b, c, (w, _) in zip(blocks, solution.covs, solution.weights)]
    else:  # after clipping: evaluate the rejected stars too
        theta_used = solution.theta
        evaluated = []
        for block in candidates:
            cov = block.measurement_covariance(solution.p)
            evaluated.append((block, cov, block.weights(theta_used, cov)[0]))
    per_star = _per_star(evaluated, solution.p, theta_used, status, prep.n_rows)
    if not robust:
        used = status == 0
        n_out = int(np.count_nonzero(heavy_tail_outliers(per_star["z"], used)))
        n_used = int(np.count_nonzero(used))
        if n_out >= 3 and n_out > OUTLIER_FRACTION * n_used:
            message = (
                f"{n_out} of {n_used} stars ({100.0 * n_out / n_used:.2g}%) lie more than "
                f"{OUTLIER_SIGMA:g} robust standard deviations from the fitted model: outliers of this "
                "kind pull a least-squares fit (A, B and the solar motion can be far off); refit with "
                "robust=True to reject them by sigma clipping"
            )
            notes.append(message)
            warnings.warn(message, OortOutlierWarning, stacklevel=4)
    return OortFit(
        A=float(p[0]),
        B=float(p[1]),
        C=float(p[2]),
        K=float(p[3]),
        solar_motion=(float(p[4]), float(p[5]), float(p[6])),
        errors={name: float(e) for name, e in zip(PARAMETERS, errors)},
        covariance=cov,
        constrained=constrained,
        sigma_intrinsic=tuple(float(s) for s in sig),
        sigma_intrinsic_error=tuple(float(e) for e in sig_err),
        dispersion=dispersion,
        chi2=solution.chi2,
        dof=int(dof),
        n_used=int(sum(len(b) for b in blocks)),
        n_data=int(solution.n_obs),
        n_dropped=n_counts,
        derived=derived,
        frame=frame,
        distance_choice=distance.to_dict() if hasattr(distance, "to_dict") else {"method": repr(distance)},
        distance_description=distance.describe() if hasattr(distance, "describe") else repr(distance),
        use=use,
        distance_range=tuple(distance_range),
        notes=notes,
        robust=robust,
        clip=float(clip) if robust else None,
        n_rejected=int(n_rejected),
        distance_reasons=dict(prep.distance_reasons),
        bootstrap=boot,
        potential_oort=pot,
        potential_description=pot_desc,
        converged=solution.converged,
        n_iterations=solution.n_iterations,
        seed=seed,
        _per_star=per_star,
    )


def _bootstrap(blocks, solution, n, seed, R0):
    rng = np.random.default_rng(seed)
    samples = bootstrap_parameters(blocks, solution, n, rng)
    intervals = {}
    columns = {name: samples[:, j] for j, name in enumerate(PARAMETERS)}
    columns.update(derived_from_samples(samples, R0))
    for name, values in columns.items():
        values = values[np.isfinite(values)]
        if len(values) < 2:
            intervals[name] = [float("nan")] * 4
            continue
        intervals[name] = [float(x) for x in np.percentile(values, [15.865, 84.135, 2.5, 97.5])]
    return {"n": int(n), "seed": seed, "samples": samples, "intervals": intervals}


def _per_star(evaluated, p, theta, status, n_rows):
    """Residuals of every candidate star (used or rejected) in observation coordinates.

    ``evaluated`` lists (block, measurement covariance, weights at ``theta``) for parameters ``p``.
    """
    delta_out = np.full((3, n_rows), np.nan)
    z_out = np.full((3, n_rows), np.nan)
    chi2_out = np.full(n_rows, np.nan)
    n_data = np.zeros(n_rows, dtype=np.int8)
    for block, cov, w in evaluated:
        delta = block.residual(p)
        chi2_out[block.rows] = np.einsum("ij,ij->j", sym_apply(w, delta), delta)
        var = block.observed_variances(theta, cov)
        e_l, e_b, r_hat = block.basis()
        kd = K_KMS_PER_MASYR_KPC * block.distance
        comps = {
            0: (e_l, kd),
            1: (e_b, kd),
            2: (r_hat, 1.0),
        }
        observed = {"full": (0, 1, 2), "sky": (0, 1), "los": (2,)}[block.kind]
        for c in observed:
            vec, scale = comps[c]
            proj = vec[0] * delta[0] + vec[1] * delta[1] + vec[2] * delta[2]
            delta_out[c, block.rows] = proj / scale
            z_out[c, block.rows] = proj / np.sqrt(var[c])
        n_data[block.rows] = block.n_observed
    return {"delta": delta_out, "z": z_out, "chi2": chi2_out, "status": status, "n_data": n_data}


def fit_in_distance_bins(
    stars,
    bins,
    frame: SolarFrame | None = None,
    *,
    use="both",
    distance=None,
    quality=None,
    robust=False,
    clip=4.0,
    dispersion="ellipsoid",
    propagate_distance_errors=True,
) -> Table:
    """Fit the Oort constants separately in distance bins, to show where the first-order model holds.

    Parameters
    ----------
    stars, frame, use, distance, quality, robust, clip, dispersion, propagate_distance_errors
        As in :func:`fit_oort`.
    bins : sequence of (min, max)
        Distance bins in kpc.

    Returns
    -------
    astropy.table.Table
        One row per bin: ``d_min``, ``d_max``, ``d_median`` (kpc), ``n_used``, and for A, B, C, K, U, V, W
        the value and ``<name>_error`` (NaN when a bin has no star or the parameter is not constrained).

    Notes
    -----
    The first-order model's error grows with distance; values that drift from bin to bin beyond their
    errors show where it stops holding. Each bin fits its own velocity ellipsoid.
    """
    frame = _as_frame(frame)
    edges = _check_bins(bins)
    table = _standard_table(stars)
    distance = _default_distance(distance)
    rows = []
    for lo, hi in edges:
        prep = prepare_sample(
            table,
            use=use,
            distance=distance,
            distance_range=(lo, hi),
            quality=quality,
            propagate_distance_errors=propagate_distance_errors,
        )
        row = {"d_min": lo, "d_max": hi, "d_median": float("nan"), "n_used": prep.n_used}
        for name in PARAMETERS:
            row[name] = float("nan")
            row[f"{name}_error"] = float("nan")
        if prep.blocks:
            fit = _fit_prepared(
                prep,
                frame=frame,
                use=use,
                distance=distance,
                distance_range=(lo, hi),
                robust=robust,
                clip=clip,
                bootstrap=0,
                seed=None,
                dispersion=dispersion,
                potential=None,
            )
            row["n_used"] = fit.n_used
            row["d_median"] = float(np.median(np.concatenate([b.distance for b in prep.blocks])))
            for name in PARAMETERS:
                if fit.constrained[name]:
                    row[name] = fit.values[name]
                    row[f"{name}_error"] = fit.errors[name]
        rows.append(row)
    names = ["d_min", "d_max", "d_median", "n_used"] + [c for name in PARAMETERS for c in (name, f"{name}_error")]
    out = Table(rows=[[r[n] for n in names] for r in rows], names=names)
    for name in ("d_min", "d_max", "d_median"):
        out[name].unit = u.kpc
    for name in PARAMETERS:
        out[name].unit = out[f"{name}_error"].unit = UNITS[name]
    out.meta["note"] = (
        "first-order model: values that drift from bin to bin beyond their errors show where it stops holding"
    )
    return out
