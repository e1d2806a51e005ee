"""Table level: :func:`to_galactocentric` and :func:`from_galactocentric`."""

from __future__ import annotations

import numbers
from typing import TYPE_CHECKING

import astropy.units as u
import numpy as np
from astropy.table import QTable

from .._blocks import run_blocks
from ..columns import OUTPUT_COLUMNS
from ..distances import InverseParallax, _column_values
from ..units import KMS, MASYR, to_value
from . import _shared
from ._shared import (
    _ANGLES,
    _CORR_REASON,
    _DEG,
    _SKY_REASON,
    _VELOCITY_COLUMNS,
    ERROR_METHODS,
    KinematicsError,
)
from .linear import _error_columns, _Linear
from .montecarlo import _invalid_correlations, _montecarlo
from .transforms import (
    _allocate,
    _Forward,
    _frame_or_default,
    _Geometry,
    _scratch_for,
    observables_from_galactocentric,
)

if TYPE_CHECKING:
    from ..frames import SolarFrame


# ====================================================================== table level
def _standard_table(stars):
    """The input as a checked table with standard column names (through mwkin.catalog).

    The standard columns may share the input's memory: nothing here writes to them, and the result
    table holds only arrays of our own.
    """
    from ..catalog import (
        _read_catalog,  # imported here: catalog is a sibling with its own job
    )

    return _read_catalog(stars, copy=False)


def _flags(reason_arrays, n):
    """Comma-joined reasons per star from {reason: bool array}, through a small integer code."""
    names = [name for name, mask in reason_arrays.items() if mask.any()]
    if not names:
        return np.zeros(n, dtype="<U1")  # all "" (zeroed memory costs nothing until read)
    code = np.zeros(n, dtype=np.uint16)
    for bit, name in enumerate(names):
        code[reason_arrays[name]] |= np.uint16(1 << bit)
    present = np.flatnonzero(np.bincount(code))
    labels = {int(c): ",".join(name for bit, name in enumerate(names) if c >> bit & 1) for c in present if c}
    flags = np.zeros(n, dtype=f"<U{max(len(s) for s in labels.values())}")
    for c, label in labels.items():
        flags[code == c] = label
    return flags


def _check_options(errors, n_samples, percentiles, return_covariance, distance, seed=None):
    if errors not in ERROR_METHODS:
        raise KinematicsError(f"errors must be one of {', '.join(map(repr, ERROR_METHODS))}, got {errors!r}")
    if errors == "montecarlo":
        if isinstance(n_samples, bool) or not isinstance(n_samples, numbers.Integral) or n_samples < 2:
            raise KinematicsError(f"n_samples must be an integer >= 2, got {n_samples!r}")
        if not (
            seed is None
            or isinstance(seed, np.random.Generator)
            or (isinstance(seed, numbers.Integral) and not isinstance(seed, bool) and int(seed) >= 0)
        ):
            raise KinematicsError(f"seed must be a whole number >= 0, a numpy Generator or None, got {seed!r}")
        try:
            levels = np.asarray(percentiles, dtype=float).ravel()
        except (TypeError, ValueError):
            levels = np.array([np.nan])
        if levels.size == 0 or not np.all((levels >= 0) & (levels <= 100)):
            raise KinematicsError(f"percentiles must be numbers in [0, 100], got {percentiles!r}")
    if return_covariance and errors != "linear":
        raise KinematicsError(f"return_covariance=True needs errors='linear', got errors={errors!r}")
    if distance is not None and not (hasattr(distance, "resolve") and hasattr(distance, "to_dict")):
        raise KinematicsError(
            f"distance must be a distance choice such as InverseParallax() or DistanceColumn(), got {distance!r}"
        )


def to_galactocentric(
    stars,
    frame: SolarFrame | None = None,
    *,
    errors="none",
    distance=None,
    n_samples=1000,
    seed=None,
    percentiles=(16, 50, 84),
    return_covariance: bool = False,
) -> QTable:
    """Galactocentric and heliocentric positions and velocities of the stars in a table.

    Parameters
    ----------
    stars : table, pandas.DataFrame or path
        Anything :func:`mwkin.catalog.read_catalog` reads: ra, dec (deg), parallax (mas) and/or
        distance (kpc), pmra (mu_alpha*), pmdec (mas/yr), radial_velocity (km/s, optional), their
        ``*_error`` columns and the Gaia ``*_corr`` columns (optional).
    frame : SolarFrame, optional
        The Sun's position and velocity; default ``SolarFrame.preset("astropy v4.0")``.
    errors : {"none", "linear", "montecarlo"}
        Uncertainty propagation, see Notes.
    distance : InverseParallax or DistanceColumn, optional
        How distances are obtained; default ``InverseParallax()`` (1/parallax, parallax/error >= 5).
    n_samples : int, default 1000
        Monte Carlo draws per star.
    seed : int, numpy.random.Generator or None
        Seed of the Monte Carlo draws (the same seed gives the same numbers).
    percentiles : sequence of float, default (16, 50, 84)
        Monte Carlo percentiles to report, in [0, 100].
    return_covariance : bool, default False
        With ``errors="linear"``: add ``cov_galactocentric`` and ``cov_heliocentric``, each (N, 6, 6)
        for (x, y, z, vx, vy, vz) and (X, Y, Z, U, V, W), in kpc and km/s.

    Returns
    -------
    astropy.table.QTable
        One row per input star, in input order: ``source_id`` (if given), then the columns of
        :data:`OUTPUT_COLUMNS` with units and descriptions (x y z vx vy vz R phi v_R v_phi v_z X Y Z U V
        W l b distance), ``flag`` ("" when fully usable, else comma-joined reasons; with ``errors``
        other than "none" also ``invalid_correlation``, see Notes) and ``has_velocity``.
        ``errors="linear"`` adds ``sigma_<col>`` for every column; ``errors="montecarlo"`` adds
        ``<col>_p16``, ``<col>_p50``, ``<col>_p84`` (for the percentiles asked), ``sigma_<col>`` and
        ``mc_excluded_fraction``. ``meta`` holds ``frame`` and ``distance`` (their ``to_dict()``),
        ``n_input``, ``n_position``, ``n_velocity``, ``dropped`` (reason -> number of stars, each
        reason counted for every star it applies to; ``invalid_correlation`` only with ``errors``),
        ``errors``, ``provenance`` (one line), ``distance_ignored_columns`` (columns that could give
        distances but that the distance choice leaves out, e.g. ``["parallax"]`` under
        ``DistanceColumn``) and ``distance_notes`` (one sentence for each).

    Raises
    ------
    mwkin.catalog.CatalogError
        For a table that cannot be read or has bad values (see :func:`~mwkin.catalog.read_catalog`).
    mwkin.distances.DistanceError
        If the table lacks the columns the distance choice needs.
    KinematicsError
        For bad arguments.

    Notes
    -----
    **Missing inputs.** Rows are never dropped and nothing raises for missing values: a star without a
    usable distance (no parallax, parallax below the cut, non-positive parallax, no distance) or
    without ra/dec gets NaN positions and velocities; a star without proper motions or radial velocity
    gets its positions and NaN velocities. ``flag`` says why; ``l`` and ``b`` need only ra and dec.

    **Linear errors** (``errors="linear"``). The covariance of (ra*, dec, parallax or distance, pmra,
    pmdec, radial_velocity) -- ra_error and dec_error in mas, with the ten Gaia correlations; the radial
    velocity uncorrelated with the astrometry -- is propagated to first order through the analytic
    Jacobian. A missing uncertainty column counts as zero uncertainty, a missing correlation column
    as zero correlation; a NaN uncertainty or correlation of a star gives NaN sigmas for what depends
    on it. A star whose correlations do not form a valid correlation matrix (not positive
    semi-definite, e.g. ra_dec_corr = 0.99, ra_pmra_corr = -0.99, dec_pmra_corr = 0.99) is flagged
    ``invalid_correlation`` and gets NaN uncertainties (and covariances): no uncertainty can be
    derived from an impossible covariance. Its positions and velocities are kept. The check costs a
    vectorised LDL^T factorisation of the (at most 5x5) matrix, and only runs when the table has
    correlation columns.
    A distance column is taken as uncorrelated with the astrometry. Velocity sigmas (and the velocity
    rows of the covariances) are NaN where a star has no velocity. ``sigma_distance`` is
    sigma_parallax / parallax^2; ``sigma_l`` is in degrees of longitude (sigma of l cos b over cos b,
    so it grows near the Galactic poles); ``sigma_phi`` is in degrees. First order is good while
    sigma_parallax / parallax is small (a few per cent: the Monte Carlo agrees within ~1-2 per cent
    at 6 per cent); at ~20 per cent and beyond the distance distribution is visibly skewed and
    ``errors="montecarlo"`` is the honest choice.

    **Monte Carlo** (``errors="montecarlo"``). ``n_samples`` draws per star from the same
    covariance (seeded numpy Generator, processed in blocks to bound memory). Offsets in ra* and dec
    move the direction on the sphere. Percentiles use numpy's linear interpolation;
    ``sigma_<col>`` is half the width between the 15.87th and 84.13th percentiles. Percentiles of
    ``l`` and ``phi`` are taken around the nominal value, so they may run slightly outside
    [0, 360) deg. Draws with a non-positive parallax (or distance) have no distance: they are excluded
    (set to NaN) and the percentiles use the remaining draws, so with many such draws the far side is
    under-represented; ``mc_excluded_fraction`` gives the excluded fraction per star and
    ``meta["mc_nonpositive_draws"]`` / ``meta["mc_stars_with_nonpositive_draws"]`` the totals.
    Stars whose correlation matrix is not positive semi-definite are flagged ``invalid_correlation``
    and not drawn (NaN Monte Carlo columns), as for the linear errors; eigenvalues that are negative by
    round-off only (down to -1e-12) are set to zero, and the stars concerned counted in
    ``meta["mc_clipped_correlations"]``. ``meta`` also records ``n_samples``, ``percentiles`` and an
    integer ``seed``.

    References
    ----------
    Johnson, D. R. H. & Soderblom, D. R. 1987, AJ 93, 864 (space velocities and their uncertainties).
    ESA 1997, The Hipparcos and Tycho Catalogues, ESA SP-1200, Vol. 1, Sect. 1.5.3 (Galactic axes).
    Bailer-Jones, C. A. L. 2015, PASP 127, 994 (why 1/parallax needs a signal-to-noise cut).

    Examples
    --------
    By default no uncertainties are propagated (``errors="none"``) and the frame is the default one:

    >>> from mwkin.demo import survey
    >>> out = to_galactocentric(survey(n=10, seed=1))
    >>> out.meta["frame"]["label"], [name for name in out.colnames if name.startswith("sigma_")]
    ('astropy v4.0', [])
    """
    _check_options(errors, n_samples, percentiles, return_covariance, distance, seed)
    frame = _frame_or_default(frame)
    choice = InverseParallax() if distance is None else distance
    table = _standard_table(stars)
    n = len(table)
    res = choice.resolve(table)

    ra = _column_values(table, "ra", u.deg)
    dec = _column_values(table, "dec", u.deg)
    pmra = _column_values(table, "pmra", MASYR)
    pmdec = _column_values(table, "pmdec", MASYR)
    rv = _column_values(table, "radial_velocity", KMS)

    nan_counts = table.meta["nan_counts"]  # made by the catalogue reader in this very call

    def missing(**columns):
        """Rows where any of the columns is NaN (no pass over the data when the reader counted none)."""
        arrays = [values for name, values in columns.items() if nan_counts.get(name, 1)]
        if not arrays:
            return np.zeros(n, dtype=bool)
        mask = np.isnan(arrays[0])
        for values in arrays[1:]:
            mask |= np.isnan(values)
        return mask

    no_sky = missing(ra=ra, dec=dec)
    reasons = {_SKY_REASON: no_sky}
    counts = getattr(res, "counts", {})
    reasons.update(
        {
            name: (res.reason_code == i) if counts.get(name, 1) else np.zeros(n, dtype=bool)
            for i, name in enumerate(res.reason_names, start=1)
        }
    )
    reasons["no_proper_motion"] = missing(pmra=pmra, pmdec=pmdec)
    reasons["no_radial_velocity"] = missing(radial_velocity=rv)
    has_position = res.usable & ~no_sky
    has_velocity = has_position & ~reasons["no_proper_motion"] & ~reasons["no_radial_velocity"]
    d = res.distance_kpc  # NaN where the distance is unusable
    if no_sky.any():
        d = np.where(no_sky, np.nan, d)

    geo = _Geometry.of(frame)
    (pos, vel), columns = _allocate(n)
    inputs = dict(ra=ra, dec=dec, d=d, pmra=pmra, pmdec=pmdec, rv=rv)
    linear = errors == "linear"
    montecarlo = errors == "montecarlo"
    then = trig = None
    bad_corr = None
    if linear or montecarlo:
        sig, rho = _error_columns(table, res)
        # Correlations that no star can have (not positive semi-definite) would give made-up
        # uncertainties: those stars are flagged and get NaN uncertainties instead.
        bad_corr = _invalid_correlations(rho, n)
        reasons[_CORR_REASON] = bad_corr
        if not bad_corr.any():
            bad_corr = None
    if linear:
        maps = geo.covariance_maps(full=return_covariance)
        names = [name for name in OUTPUT_COLUMNS if name != "v_z"]
        sigmas = dict(zip(names, np.empty((len(names), n))))  # rows of one array, see _allocate
        covs = (
            {k: np.empty((n, 6, 6)) for k in ("cov_galactocentric", "cov_heliocentric")} if return_covariance else None
        )
        then = _Linear(sig, rho, res.parameter == "parallax", maps, inputs, columns, sigmas, covs)
    if montecarlo:
        trig = {k: np.empty(n) for k in ("sa", "ca", "sd", "cd")}
    # The Monte Carlo percentiles are taken in radians; otherwise the angles come out in degrees.
    run_blocks(
        n,
        _shared.BLOCK,
        _Forward(inputs, geo, pos, vel, columns, degrees=not montecarlo, trig=trig, then=then),
        _scratch_for(n),
    )
    columns["v_z"] = columns["vz"]
    columns["distance"] = d
    extra = {}
    if montecarlo:
        assert trig is not None  # allocated above for montecarlo
        inp = dict(
            trig, pmra=pmra, pmdec=pmdec, rv=rv, nominal_phi=columns["phi"].copy(), nominal_l=columns["l"].copy()
        )
        levels = tuple(float(q) for q in np.ravel(percentiles))
        drawn = has_position if bad_corr is None else has_position & ~bad_corr
        mc_columns, mc_meta = _montecarlo(table, res, d, drawn, inp, n_samples, seed, levels, geo)
        for name in _ANGLES:
            columns[name] *= _DEG
    if no_sky.any():  # l and b need only the direction; stars without ra/dec have none.
        columns["l"][no_sky] = np.nan
        columns["b"][no_sky] = np.nan

    meta = {
        "frame": frame.to_dict(),
        "distance": choice.to_dict(),
        "n_input": n,
        "n_position": int(np.count_nonzero(has_position)),
        "n_velocity": int(np.count_nonzero(has_velocity)),
        "dropped": {name: int(np.count_nonzero(mask)) for name, mask in reasons.items()},
        "errors": errors,
        "provenance": f"frame {frame.describe()}; {choice.describe()}"
        + "".join(f"; {note}" for note in getattr(res, "notes", ())),
        "distance_ignored_columns": list(getattr(res, "ignored_columns", ())),
        "distance_notes": list(getattr(res, "notes", ())),
    }
    if linear:
        sigmas["v_z"] = sigmas["vz"]
        no_position, no_velocity = ~has_position, ~has_velocity
        for name, values in sigmas.items():
            undefined = no_sky if name in ("l", "b") else (no_velocity if name in _VELOCITY_COLUMNS else no_position)
            if bad_corr is not None:
                undefined = undefined | bad_corr
            if undefined.any():
                values[undefined] = np.nan
            extra[f"sigma_{name}"] = (values, OUTPUT_COLUMNS[name][0], f"linear uncertainty (1 sigma) of {name}")
        for key, cov in (covs or {}).items():
            cov[no_position] = np.nan
            if bad_corr is not None:
                cov[bad_corr] = np.nan
            cov[no_velocity, 3:, :] = np.nan
            cov[no_velocity, :, 3:] = np.nan
            order = "x, y, z, vx, vy, vz" if key == "cov_galactocentric" else "X, Y, Z, U, V, W"
            extra[key] = (cov, None, f"linear 6x6 covariance of ({order}); kpc and km/s (kpc^2, kpc km/s, km^2/s^2)")
    elif montecarlo:
        extra.update(mc_columns)
        meta.update(mc_meta)
        meta.update(
            n_samples=int(n_samples),
            percentiles=list(levels),
            seed=int(seed) if isinstance(seed, numbers.Integral) else None,
        )

    cols, descriptions = {}, {}
    if "source_id" in table.colnames:
        cols["source_id"] = np.array(table["source_id"])
    for name, (unit, description) in OUTPUT_COLUMNS.items():
        cols[name], descriptions[name] = columns[name] << unit, description
    cols["flag"] = _flags(reasons, n)
    descriptions["flag"] = (
        "why a star lacks positions, velocities or (invalid_correlation) uncertainties "
        "(comma-joined reasons); '' if nothing is missing"
    )
    cols["has_velocity"] = has_velocity
    descriptions["has_velocity"] = "True where velocities could be computed"
    for name, (values, unit, description) in extra.items():
        cols[name], descriptions[name] = (values if unit is None else values << unit), description
    result = QTable(cols, copy=False)  # built once; every array above is our own
    for name, description in descriptions.items():
        result[name].info.description = description
    result.meta.update(meta)
    return result


# ====================================================================== inverse, for mocks
_PHASE_SPACE = {"x": u.kpc, "y": u.kpc, "z": u.kpc, "vx": KMS, "vy": KMS, "vz": KMS}


def from_galactocentric(phase_space, frame: SolarFrame | None = None) -> QTable:
    """Observables of stars given by Galactocentric positions and velocities (the inverse conversion).

    Parameters
    ----------
    phase_space : table, mapping, pandas.DataFrame or array of shape (N, 6)
        Columns ``x y z`` (kpc) and ``vx vy vz`` (km/s) in astropy's Galactocentric axes, as
        :func:`to_galactocentric` returns them (Quantity or plain numbers in those units); or a plain
        array whose columns are x, y, z, vx, vy, vz. A ``source_id`` column is carried over.
    frame : SolarFrame, optional
        Default ``SolarFrame.preset("astropy v4.0")``.

    Returns
    -------
    astropy.table.QTable
        ``ra``, ``dec`` (deg), ``parallax`` (mas, = 1/distance), ``distance`` (kpc), ``pmra``
        (mu_alpha*), ``pmdec`` (mas/yr), ``radial_velocity`` (km/s), in the standard column names of
        :mod:`mwkin.catalog`; ``meta["frame"]`` is the frame's ``to_dict()``.

    Raises
    ------
    KinematicsError
        If a column is missing or the array has the wrong shape.
    mwkin.units.UnitMismatchError
        If a column carries a unit that is not a length (positions) or a speed (velocities).

    Notes
    -----
    Exact inverse of :func:`to_galactocentric` (to round-off). No noise is added and no uncertainty
    columns are made. A point exactly at the Sun has no direction: NaN everywhere but ``distance`` = 0.
    """
    frame = _frame_or_default(frame)
    source_id = None
    if isinstance(phase_space, np.ndarray) and phase_space.dtype.names is None:
        arr = np.asarray(phase_space, dtype=float)
        if arr.ndim != 2 or arr.shape[1] != 6:
            raise KinematicsError(
                f"a phase-space array must have shape (N, 6) with columns x y z vx vy vz, got shape {arr.shape}"
            )
        values = [arr[:, i] for i in range(6)]
    else:
        if hasattr(phase_space, "colnames"):
            names = list(phase_space.colnames)
        elif hasattr(phase_space, "columns"):
            names = [str(c) for c in phase_space.columns]
        elif hasattr(phase_space, "keys"):
            names = list(phase_space.keys())
        else:
            raise KinematicsError(
                f"phase_space must be a table, a mapping or an (N, 6) array, got {type(phase_space).__name__}"
            )
        missing = [k for k in _PHASE_SPACE if k not in names]
        if missing:
            raise KinematicsError(
                f"from_galactocentric needs columns x y z (kpc) and vx vy vz (km/s); missing: {', '.join(missing)}"
            )
        values = []
        for name, unit in _PHASE_SPACE.items():
            col = phase_space[name]
            values.append(to_value(col if isinstance(col, u.Quantity) else np.asarray(col, dtype=float), unit, name))
        if "source_id" in names:
            source_id = np.array(phase_space["source_id"])
    x, y, z, vx, vy, vz = values
    obs = observables_from_galactocentric(x, y, z, vx, vy, vz, frame=frame)
    with np.errstate(divide="ignore"):
        parallax = np.where(obs["distance"] > 0, 1.0 / obs["distance"], np.nan)
    cols = {}
    if source_id is not None:
        cols["source_id"] = source_id
    spec = (
        ("ra", u.deg, obs["ra"], "ICRS right ascension"),
        ("dec", u.deg, obs["dec"], "ICRS declination"),
        ("parallax", u.mas, parallax, "parallax = 1/distance (exact, no noise)"),
        ("distance", u.kpc, obs["distance"], "heliocentric distance"),
        ("pmra", MASYR, obs["pmra"], "proper motion mu_alpha* = mu_alpha cos(dec)"),
        ("pmdec", MASYR, obs["pmdec"], "proper motion mu_delta"),
        ("radial_velocity", KMS, obs["radial_velocity"], "heliocentric radial velocity"),
    )
    for name, unit, column, _ in spec:
        cols[name] = column << unit
    result = QTable(cols, copy=False)
    for name, _, _, description in spec:
        result[name].info.description = description
    result.meta["frame"] = frame.to_dict()
    return result
