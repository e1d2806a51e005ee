"""From a star table to the arrays the Oort-constant fit works on.

:func:`prepare_sample` applies the selections (quality, distance, distance range, the data the chosen
``use`` needs), converts positions and proper motions to Galactic coordinates with the Hipparcos
rotation (:data:`mwkin.coords.ICRS_TO_GALACTIC`), rotates the proper-motion covariance (with the Gaia
``pmra_pmdec_corr``) into (mu_l*, mu_b), and groups the stars by which directions they observe
(sky plane and line of sight, sky plane only, line of sight only). It records, for every input row, why
it was not used.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import astropy.units as u
import numpy as np

from ..columns import column_values
from ..coords import K_KMS_PER_MASYR_KPC, galactic_geometry, rotate_proper_motions
from ..units import KMS, MASYR, to_value
from .solver import CHUNK, Block

__all__ = [
    "STATUS",
    "STATUS_CODE",
    "USES",
    "OortInputError",
    "Prepared",
    "prepare_sample",
    "galactic_geometry",
    "sky_motions",
]


class OortInputError(ValueError):
    """Input the Oort fit cannot use: an unknown option, a missing column, or no stars left."""


#: Per-row status codes (int8) and their meaning, in the order the checks are made.
STATUS = {
    0: ("used", "used in the fit"),
    1: ("quality", "failed the quality selection"),
    2: ("no_distance", "no usable distance"),
    3: ("distance_range", "distance outside the fitted range"),
    4: ("no_proper_motion", "no proper motion (pmra or pmdec is NaN)"),
    5: ("no_radial_velocity", "no radial velocity (needed for use='radial_velocities')"),
    6: ("no_error", "a needed measurement uncertainty is NaN"),
    7: ("outlier", "rejected as an outlier by sigma clipping"),
    8: ("no_data", "neither proper motion nor radial velocity"),
    9: ("no_position", "no position (ra or dec is NaN)"),
}
#: Status name -> code.
STATUS_CODE = {name: code for code, (name, _) in STATUS.items()}
_CODE = STATUS_CODE

#: Accepted values of ``use`` and the observables each one fits.
USES = {
    "proper_motions": "mu_l* and mu_b",
    "radial_velocities": "v_r",
    "both": "mu_l*, mu_b and v_r (stars without a radial velocity contribute their proper motions)",
}


@dataclass
class Prepared:
    """Stars grouped for the solver plus the bookkeeping of the rows left out."""

    blocks: list
    status: np.ndarray  # int8 per input row, see STATUS
    n_rows: int
    distance_reasons: dict  # DistanceResult counts (reason -> rows) among rows without a distance
    notes: list = field(default_factory=list)

    def counts(self):
        """Dropped rows by reason (names of STATUS), zero counts left out."""
        out = {}
        for code, (name, _) in STATUS.items():
            if code == 0:
                continue
            n = int(np.count_nonzero(self.status == code))
            if n:
                out[name] = n
        return out

    @property
    def n_used(self):
        return int(sum(len(b) for b in self.blocks))


def _column(table, name, unit):
    """Column as float64 in ``unit`` (:func:`mwkin.columns.column_values`)."""
    return column_values(table, name, unit, error=OortInputError)


def _optional(table, name, unit, n, fill):
    if name in table.colnames:
        return _column(table, name, unit), True
    return np.full(n, fill), False


def sky_motions(stars):
    """Galactic longitude, latitude and proper motions of every star, as the Oort fit sees them.

    The same rotation (:func:`galactic_geometry`, the Hipparcos ICRS-to-Galactic matrix) the fit
    applies, so data shown beside a fit and the fit's own residuals agree exactly.

    Parameters
    ----------
    stars : astropy Table or QTable
        With ``ra``, ``dec`` (deg) and ``pmra``, ``pmdec`` (mas/yr; pmra is mu_alpha cos(dec)); plain
        columns are taken in those units, columns with units are converted.

    Returns
    -------
    l_deg : numpy.ndarray
        Galactic longitude in [0, 360) deg.
    b_deg : numpy.ndarray
        Galactic latitude in [-90, 90] deg.
    mu_l_star : numpy.ndarray
        Proper motion along l, mu_l cos(b), mas/yr.
    mu_b : numpy.ndarray
        Proper motion along b, mas/yr.

    All 1-d float64, one per row; NaN where an input is missing (masked or NaN).

    Raises
    ------
    OortInputError
        If a column is missing or not numeric.
    mwkin.units.UnitMismatchError
        If a column's unit cannot be converted.

    Examples
    --------
    The north Galactic pole's neighbourhood has b near +90 deg:

    >>> from astropy.table import Table
    >>> t = Table({"ra": [192.85948], "dec": [27.12825], "pmra": [0.0], "pmdec": [0.0]})
    >>> l, b, mu_l, mu_b = sky_motions(t)
    >>> round(float(b[0]), 3)
    90.0
    """
    for name in ("ra", "dec", "pmra", "pmdec"):
        if name not in stars.colnames:
            raise OortInputError(f"sky_motions: the star table has no {name!r} column")
    sl, cl, sb, cb, c1, c2 = galactic_geometry(_column(stars, "ra", u.deg), _column(stars, "dec", u.deg))
    mu_l, mu_b = rotate_proper_motions(c1, c2, _column(stars, "pmra", MASYR), _column(stars, "pmdec", MASYR))
    l_deg = np.degrees(np.mod(np.arctan2(sl, cl), 2.0 * np.pi))
    b_deg = np.degrees(np.arctan2(sb, cb))
    return l_deg, b_deg, mu_l, mu_b


def _quality_mask(table, quality, n):
    if quality is None:
        return np.ones(n, dtype=bool)
    if callable(quality):
        mask = quality(table)
    elif isinstance(quality, str):
        if quality not in table.colnames:
            raise OortInputError(f"quality: there is no column {quality!r} in the table")
        mask = table[quality]
    else:
        mask = quality
    mask = np.asarray(mask)
    if mask.dtype != bool or mask.shape != (n,):
        raise OortInputError(
            f"quality must give one boolean per row ({n} rows), got dtype {mask.dtype} and shape {mask.shape}"
        )
    return mask


def _check_range(distance_range):
    try:
        lo, hi = distance_range
    except (TypeError, ValueError):
        raise OortInputError(f"distance_range must be (min, max) in kpc, got {distance_range!r}") from None
    lo = to_value(lo, "kpc", "distance_range")
    hi = to_value(hi, "kpc", "distance_range")
    if not (np.isfinite(lo) and lo >= 0 and hi > lo):
        raise OortInputError(f"distance_range must satisfy 0 <= min < max (kpc), got ({lo}, {hi})")
    return float(lo), float(hi)


def prepare_sample(table, *, use, distance, distance_range, quality=None, propagate_distance_errors=True):
    """Select the stars and build the solver blocks.

    Parameters
    ----------
    table : astropy Table or QTable
        Standard mwkin columns (see :func:`mwkin.catalog.read_catalog`).
    use : {"proper_motions", "radial_velocities", "both"}
    distance : object with ``resolve(table) -> DistanceResult``
    distance_range : (float, float)
        kpc; stars with min <= d < max are kept.
    quality : None, bool array, column name or callable(table) -> bool array
    propagate_distance_errors : bool
        Include the distance uncertainty (and its correlation with the proper motions when the
        distance comes from the parallax) in the per-star covariance.

    Returns
    -------
    Prepared

    Raises
    ------
    OortInputError
        For an unknown ``use``, a bad ``distance_range`` or ``quality``, or missing columns.
    """
    if use not in USES:
        raise OortInputError(f"use must be one of {', '.join(map(repr, USES))}; got {use!r}")
    lo, hi = _check_range(distance_range)
    n = len(table)
    notes = []
    for name in ("ra", "dec") + (("pmra", "pmdec") if use != "radial_velocities" else ()):
        if name not in table.colnames:
            raise OortInputError(f"the star table has no {name!r} column (needed for use={use!r})")
    if use == "radial_velocities" and "radial_velocity" not in table.colnames:
        raise OortInputError("use='radial_velocities' needs a 'radial_velocity' column (km/s); none found")

    status = np.zeros(n, dtype=np.int8)

    def drop(mask, name):
        status[(status == 0) & mask] = _CODE[name]

    drop(~_quality_mask(table, quality, n), "quality")
    ra_all, dec_all = _column(table, "ra", u.deg), _column(table, "dec", u.deg)
    drop(~(np.isfinite(ra_all) & np.isfinite(dec_all)), "no_position")
    result = distance.resolve(table)
    d_all = np.asarray(result.distance_kpc, dtype=float)
    usable = np.asarray(result.usable, dtype=bool) & np.isfinite(d_all) & (d_all > 0)
    drop(~usable, "no_distance")
    distance_reasons = {}
    no_distance = status == _CODE["no_distance"]
    if no_distance.any():
        names, counts = np.unique(np.asarray(result.reason)[no_distance], return_counts=True)
        distance_reasons = {str(k): int(v) for k, v in zip(names, counts) if str(k)}
    with np.errstate(invalid="ignore"):
        drop(~((d_all >= lo) & (d_all < hi)), "distance_range")

    pmra, _ = _optional(table, "pmra", MASYR, n, np.nan)
    pmdec, _ = _optional(table, "pmdec", MASYR, n, np.nan)
    rv, has_rv_col = _optional(table, "radial_velocity", KMS, n, np.nan)
    has_pm = np.isfinite(pmra) & np.isfinite(pmdec)
    has_rv = np.isfinite(rv)
    pm_err_a, has_pm_err = _optional(table, "pmra_error", MASYR, n, 0.0)
    pm_err_d, has_pm_err_d = _optional(table, "pmdec_error", MASYR, n, 0.0)
    has_pm_err = has_pm_err and has_pm_err_d
    rv_err, has_rv_err = _optional(table, "radial_velocity_error", KMS, n, 0.0)
    pm_err_ok = np.isfinite(pm_err_a) & np.isfinite(pm_err_d)
    rv_err_ok = np.isfinite(rv_err)

    if use == "proper_motions":
        drop(~has_pm, "no_proper_motion")
        drop(~pm_err_ok, "no_error")
        want_pm, want_rv = has_pm, np.zeros(n, dtype=bool)
    elif use == "radial_velocities":
        drop(~has_rv, "no_radial_velocity")
        drop(~rv_err_ok, "no_error")
        want_pm, want_rv = np.zeros(n, dtype=bool), has_rv
    else:
        drop(~(has_pm | has_rv), "no_data")
        pm_ok = has_pm & pm_err_ok
        rv_ok = has_rv & rv_err_ok
        drop(~(pm_ok | rv_ok), "no_error")
        n_rv_no_err = int(np.count_nonzero((status == 0) & has_rv & ~rv_err_ok & pm_ok))
        if n_rv_no_err:
            notes.append(
                f"{n_rv_no_err} stars have a radial velocity without an uncertainty; only their "
                "proper motions were used"
            )
        want_pm, want_rv = pm_ok, rv_ok
        if not np.any(rv_ok & (status == 0)):
            notes.append("no star in the selection has a radial velocity: use='both' fitted the proper motions only")

    if use != "radial_velocities" and not has_pm_err:
        notes.append(
            "no proper-motion uncertainties (pmra_error, pmdec_error): the weights come from the "
            "fitted velocity dispersion alone"
        )
    if use != "proper_motions" and has_rv_col and not has_rv_err:
        notes.append(
            "no radial-velocity uncertainties (radial_velocity_error): the weights come from the "
            "fitted velocity dispersion alone"
        )

    kinds = {
        "full": (status == 0) & want_pm & want_rv,
        "sky": (status == 0) & want_pm & ~want_rv,
        "los": (status == 0) & ~want_pm & want_rv,
    }
    derr = result.distance_error_kpc if propagate_distance_errors else None
    if propagate_distance_errors and derr is None:
        notes.append("the distance choice gives no distance uncertainties: they are not propagated")
    from_parallax = getattr(result, "parameter", None) == "parallax"
    ctx = dict(
        ra=ra_all,
        dec=dec_all,
        table=table,
        d=d_all,
        pmra=pmra,
        pmdec=pmdec,
        rv=rv,
        pm_err_a=pm_err_a,
        pm_err_d=pm_err_d,
        rv_err=rv_err,
        derr=derr,
        from_parallax=from_parallax,
        result=result,
    )
    blocks = []
    for kind, mask in kinds.items():
        rows = np.flatnonzero(mask)
        for start in range(0, len(rows), CHUNK):
            blocks.append(_make_block(kind, rows[start : start + CHUNK], ctx))
    return Prepared(blocks=blocks, status=status, n_rows=n, distance_reasons=distance_reasons, notes=notes)


def _make_block(kind, rows, ctx):
    table = ctx["table"]
    ra = ctx["ra"][rows]
    dec = ctx["dec"][rows]
    d = ctx["d"][rows]
    sl, cl, sb, cb, c1, c2 = galactic_geometry(ra, dec)
    kd = K_KMS_PER_MASYR_KPC * d
    x = d * cb * cl
    y = d * cb * sl
    e_ll = e_lb = e_bb = e_rr = None
    cov_ld = cov_bd = None
    vel = np.zeros((3, len(rows)))
    ux, uy, uz = vel
    if kind in ("full", "sky"):
        pma, pmd = ctx["pmra"][rows], ctx["pmdec"][rows]
        mu_l, mu_b = rotate_proper_motions(c1, c2, pma, pmd)
        t_l, t_b = kd * mu_l, kd * mu_b
        # e_l = (-sl, cl, 0), e_b = (-sb cl, -sb sl, cb)
        ux += -sl * t_l - sb * cl * t_b
        uy += cl * t_l - sb * sl * t_b
        uz += cb * t_b
        sa, sd = ctx["pm_err_a"][rows], ctx["pm_err_d"][rows]
        rho = _corr(table, "pmra_pmdec_corr", rows)
        va, vd, cad = sa * sa, sd * sd, rho * sa * sd
        kd2 = kd * kd
        e_ll = kd2 * (c1 * c1 * va + 2.0 * c1 * c2 * cad + c2 * c2 * vd)
        e_bb = kd2 * (c2 * c2 * va - 2.0 * c1 * c2 * cad + c1 * c1 * vd)
        e_lb = kd2 * (-c1 * c2 * va + (c1 * c1 - c2 * c2) * cad + c1 * c2 * vd)
    if kind in ("full", "los"):
        v_r = ctx["rv"][rows]
        ux += cb * cl * v_r
        uy += cb * sl * v_r
        uz += sb * v_r
        e_rr = ctx["rv_err"][rows] ** 2
    var_d = None
    if ctx["derr"] is not None:
        sig_d = np.asarray(ctx["derr"], dtype=float)[rows]
        sig_d = np.where(np.isfinite(sig_d), sig_d, 0.0)
        var_d = sig_d * sig_d
        cov_ld = np.zeros(len(rows))
        cov_bd = np.zeros(len(rows))
        if kind in ("full", "sky") and ctx["from_parallax"]:
            # d = 1/parallax: cov(mu, d) = -d^2 cov(mu, parallax) (first order).
            plx_err = np.asarray(ctx["result"].parameter_error, dtype=float)[rows]
            plx_err = np.where(np.isfinite(plx_err), plx_err, 0.0)
            r_a = _corr(table, "parallax_pmra_corr", rows)
            r_d = _corr(table, "parallax_pmdec_corr", rows)
            cov_ad = -d * d * r_a * plx_err * ctx["pm_err_a"][rows]
            cov_dd = -d * d * r_d * plx_err * ctx["pm_err_d"][rows]
            cov_ld = kd * (c1 * cov_ad + c2 * cov_dd)
            cov_bd = kd * (-c2 * cov_ad + c1 * cov_dd)
    return Block(
        kind=kind,
        rows=rows,
        x=x,
        y=y,
        sl=sl,
        cl=cl,
        sb=sb,
        cb=cb,
        u=vel,
        distance=d,
        e_ll=e_ll,
        e_lb=e_lb,
        e_bb=e_bb,
        e_rr=e_rr,
        var_d=var_d,
        cov_ld=cov_ld,
        cov_bd=cov_bd,
    )


def _corr(table, name, rows):
    if name not in table.colnames:
        return np.zeros(len(rows))
    values = _column(table, name, u.dimensionless_unscaled)[rows]
    return np.where(np.isfinite(values), values, 0.0)
