"""The fast array-level transforms: observables to Galactocentric and heliocentric coordinates and back.

See :mod:`mwkin.kinematics` for the conventions and the implementation notes (blocks, scratch buffers)."""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from .._blocks import run_blocks
from ..coords import ICRS_TO_GALACTIC
from ..frames import frame_or_default
from . import _shared
from ._shared import (
    _BLAS_CHUNK,
    _CARTESIAN,
    _DEG,
    _HELIO,
    _K,
    _POSITION_ROWS,
    _SCALARS,
    _SYM,
    _VELOCITY_ROWS,
    KinematicsError,
)


# ====================================================================== frame geometry
def _sym_map(R):
    """Matrix acting on the unique entries (_SYM order) of S, giving those of R S R^T."""
    T = np.zeros((6, 6))
    for p, (a, b) in enumerate(_SYM):
        for q, (i, j) in enumerate(_SYM):
            T[p, q] = R[a, i] * R[b, j] + (R[a, j] * R[b, i] if i != j else 0.0)
    return T


def _antisym_map(R):
    """Matrix acting on the entries 01, 02, 12 of an antisymmetric Z, giving those of R Z R^T."""
    keys = ((0, 1), (0, 2), (1, 2))
    T = np.zeros((3, 3))
    for q, (i, j) in enumerate(keys):
        basis = np.zeros((3, 3))
        basis[i, j], basis[j, i] = 1.0, -1.0
        turned = R @ basis @ R.T
        for p, (a, b) in enumerate(keys):
            T[p, q] = turned[a, b]
    return T


@dataclass(frozen=True)
class _Geometry:
    """Constant matrices of one solar frame, prepared once per call."""

    icrs_to_gc: np.ndarray
    offset: np.ndarray
    v_sun: np.ndarray
    position_map: np.ndarray  # (6, 4): [X Y Z x y z] = map @ [r_icrs; 1]
    velocity_map: np.ndarray  # (6, 4): [U V W vx vy vz] = map @ [v_icrs; 1]

    @classmethod
    def of(cls, frame):
        matrix, offset = frame.galactocentric_transform()
        v_sun = np.asarray(frame.v_sun, dtype=float)
        pos = np.zeros((6, 4))
        vel = np.zeros((6, 4))
        pos[:3, :3] = vel[:3, :3] = ICRS_TO_GALACTIC
        pos[3:, :3] = vel[3:, :3] = matrix
        pos[3:, 3] = offset
        vel[3:, 3] = v_sun
        return cls(matrix, offset, v_sun, pos, vel)

    def covariance_maps(self, full):
        """Maps from ICRS covariance entries to Galactocentric and heliocentric ones.

        Returns (maps, rows): ``maps["sym"]`` acts on the unique entries (_SYM order) of a symmetric
        block, ``maps["cross_sym"]`` likewise for the symmetric part of the position-velocity block,
        ``maps["cross_anti"]`` on the antisymmetric part (entries 01, 02, 12); ``rows[name]`` names
        the rows of each product ("xx", "xy", ... and "XX", ... for the Galactic axes). With ``full``
        every entry of both frames is made, Galactocentric first (for the covariance matrices);
        otherwise only those the uncertainties need.
        """
        frames = {"gc": self.icrs_to_gc, "h": ICRS_TO_GALACTIC}
        axes = {"gc": "xyz", "h": "XYZ"}
        every_sym = [(f, a, b) for f in frames for a, b in _SYM]
        every_anti = [(f, a, b) for f in frames for a, b in ((0, 1), (0, 2), (1, 2))]
        if full:
            want = {"sym": every_sym, "cross_sym": every_sym, "cross_anti": every_anti}
        else:
            # Variances of both frames, and the x-y entries the cylindrical coordinates need.
            want = {
                "sym": [("gc", 0, 0), ("gc", 0, 1), ("gc", 1, 1), ("gc", 2, 2), ("h", 0, 0), ("h", 1, 1), ("h", 2, 2)],
                "cross_sym": [("gc", 0, 0), ("gc", 0, 1), ("gc", 1, 1)],
                "cross_anti": [("gc", 0, 1)],
            }
        full_maps = {f: {"sym": _sym_map(R), "anti": _antisym_map(R)} for f, R in frames.items()}
        maps, rows = {}, {}
        for name, entries in want.items():
            kind, keys = ("anti", ((0, 1), (0, 2), (1, 2))) if name == "cross_anti" else ("sym", _SYM)
            maps[name] = np.array([full_maps[f][kind][keys.index((a, b))] for f, a, b in entries])
            rows[name] = {axes[f][a] + axes[f][b]: i for i, (f, a, b) in enumerate(entries)}
        return maps, rows


def _frame_or_default(frame):
    return frame_or_default(frame, error=KinematicsError)


# ====================================================================== forward conversion
# Scratch names that share memory with names whose values are no longer needed by then: fewer
# distinct arrays keep more of a block's working set in the processor cache. Forward-only
# temporaries serve the first steps of the uncertainties, and the Jacobian rows and their
# correlation-weighted sums (dead once the local covariance is made) serve the last steps.
_SHARED_SCRATCH = {
    "kma": "t_ra",
    "kmd": "t_dec",
    "kt": "w",
    "pa": "t2",
    "rot_t2": "g",
    "cyl_c": "h30",
    "cyl_s": "h31",
    "cyl_c2": "h40",
    "cyl_s2": "h50",
    "cyl_cs": "h42",
    "cyl_2cs": "h43",
    "cyl_cos2": "h51",
    "var_p1": "h52",
    "var_w0": "h54",
    "var_w1": "W30",
    "cov_p1_w0": "W31",
    "cov_p1_w1": "W32",
    "cyl_half": "W40",
    "cyl_f": "W41",
    "gal_p": "h30",
    "gal_q": "h31",
    "inv_cb2": "h40",
    "gal_ja": "h50",
    "gal_jd": "h42",
    "gal_x": "h43",
}


class _Scratch:
    """Arrays reused by every block one thread works on (fresh temporaries would cost page faults).

    ``vec(name, m)`` is a 1-D array of length m, ``mat(name, rows, m)`` a (rows, m) array; both are
    views of arrays made once per thread with room for a whole block. Names listed in
    _SHARED_SCRATCH share the memory of another name.
    """

    def __init__(self, capacity=None):
        self._arrays = {}
        self.capacity = _shared.BLOCK if capacity is None else capacity

    def vec(self, name, m):
        name = _SHARED_SCRATCH.get(name, name)
        a = self._arrays.get(name)
        if a is None or a.shape[0] < m:
            a = self._arrays[name] = np.empty(max(m, self.capacity))
        return a[:m]

    def mat(self, name, rows, m, fill_last=None):
        """(rows, m) view; ``fill_last`` is written into the last row once, when the array is made."""
        name = _SHARED_SCRATCH.get(name, name)
        a = self._arrays.get(name)
        if a is None or a.shape[-1] < m:
            a = self._arrays[name] = np.empty((rows, max(m, self.capacity)))
            if fill_last is not None:
                a[-1] = fill_last
        return a[:, :m]

    def arr(self, name, shape, m):
        """(*shape, m) view."""
        a = self._arrays.get(name)
        if a is None or a.shape[-1] < m:
            a = self._arrays[name] = np.empty(tuple(shape) + (max(m, self.capacity),))
        return a[..., :m]

    def mask(self, name, m):
        """Boolean (m,) view."""
        a = self._arrays.get(name)
        if a is None or a.shape[0] < m:
            a = self._arrays[name] = np.empty(max(m, self.capacity), dtype=bool)
        return a[:m]


def _scratch_for(n):
    """Maker of per-thread scratch for n rows (no larger than a block)."""
    capacity = max(1, min(n, _shared.BLOCK))
    return lambda: _Scratch(capacity)


def _matmul(A, X, out):
    """out = A @ X for a small constant matrix A and a (k, m) block X, in column chunks.

    OpenBLAS starts its own threads for products above about 1e6 multiply-adds; those threads spin
    while waiting and take the cores from the block threads, so the chunks stay below that size.
    """
    step = max(1024, _BLAS_CHUNK // A.size)
    m = X.shape[1]
    if m <= step:
        return np.matmul(A, X, out=out)
    for start in range(0, m, step):
        np.matmul(A, X[:, start : start + step], out=out[:, start : start + step])
    return out


def _sin_cos_deg(angles_deg, sin_out, cos_out, t, den):
    """sin and cos of angles in degrees, through the tangent of the half angle, into (k, m) arrays.

    ``angles_deg`` is a sequence of k arrays of length m; ``t`` and ``den`` are (k, m) scratch.
    numpy evaluates tan with SIMD instructions but not sin or cos; this is several times faster and
    accurate to a few 1e-16 (absolute) for any angle: with t = tan(angle/2), sin = 2t/(1 + t^2) and
    cos = (1 - t^2)/(1 + t^2). The k rows go through each step together, in fewer numpy calls.
    """
    for row, angle in zip(t, angles_deg):
        np.multiply(angle, math.pi / 360.0, row)
    np.tan(t, t)
    np.multiply(t, t, den)
    np.subtract(1.0, den, cos_out)
    np.add(den, 1.0, den)
    np.divide(cos_out, den, cos_out)
    np.add(t, t, sin_out)
    np.divide(sin_out, den, sin_out)
    return sin_out, cos_out


def _allocate(n):
    """Output arrays: position and velocity blocks (6, n) and the scalar columns; returns (blocks, columns).

    All are rows of one array: one large allocation is backed by huge pages where the system offers
    them, which makes the first writes cheaper than into many separate arrays.
    """
    rows = np.empty((12 + len(_SCALARS), n))
    pos, vel = rows[:6], rows[6:12]
    columns = {name: pos[i] for i, name in enumerate(_POSITION_ROWS)}
    columns.update({name: vel[i] for i, name in enumerate(_VELOCITY_ROWS)})
    columns.update({name: rows[12 + i] for i, name in enumerate(_SCALARS)})
    return (pos, vel), columns


class _Forward:
    """The forward conversion of rows [start, stop), written into preallocated output arrays.

    ``inputs`` holds full-length arrays: ``ra`` and ``dec`` in deg (or ``sa ca sd cd``, their sines
    and cosines), ``d`` (kpc), ``pmra`` and ``pmdec`` (mas/yr), ``rv`` (km/s). ``pos`` and ``vel``
    are the (6, n) outputs for _POSITION_ROWS and _VELOCITY_ROWS, ``columns`` the (n,) outputs of
    _SCALARS; with ``degrees`` the angles are written in degrees (l in [0, 360)), else in radians
    (l in [0, 2 pi)). With ``trig`` (dict of full-length arrays sa, ca, sd, cd) the sines and cosines
    are kept there. ``then`` is called as ``then(start, stop, scratch, block_values)`` after the
    block, with the block's trigonometry and a few intermediate values (see :meth:`__call__`).
    """

    def __init__(self, inputs, geo, pos, vel, columns, degrees=True, trig=None, then=None):
        self.inputs, self.geo, self.pos, self.vel = inputs, geo, pos, vel
        self.columns, self.degrees, self.trig, self.then = columns, degrees, trig, then

    def __call__(self, start, stop, ws):
        m = stop - start
        sl = slice(start, stop)
        inp, geo = self.inputs, self.geo
        d, pmra, pmdec, rv = inp["d"][sl], inp["pmra"][sl], inp["pmdec"][sl], inp["rv"][sl]
        t1, t2 = ws.vec("t1", m), ws.vec("t2", m)
        if "ra" in inp:
            sin, cos = ws.mat("sin", 2, m), ws.mat("cos", 2, m)
            _sin_cos_deg((inp["ra"][sl], inp["dec"][sl]), sin, cos, ws.mat("trig_t", 2, m), ws.mat("trig_den", 2, m))
            sa, sd = sin
            ca, cd = cos
            if self.trig is not None:  # kept for the Monte Carlo draws
                for name, values in zip(("sa", "ca", "sd", "cd"), (sa, ca, sd, cd)):
                    np.copyto(self.trig[name][sl], values)
        else:
            sa, ca, sd, cd = (inp[k][sl] for k in ("sa", "ca", "sd", "cd"))

        # Position: r = d r_hat in ICRS, the last row of ones brings in the constant offset.
        r = ws.mat("r", 4, m, fill_last=1.0)
        np.multiply(cd, ca, r[0])
        np.multiply(cd, sa, r[1])
        np.copyto(r[2], sd)
        g = ws.mat("g", 3, m)
        _matmul(ICRS_TO_GALACTIC, r[:3], g)  # direction in Galactic axes, needs no distance
        r[:3] *= d
        pos, vel = self.pos[:, sl], self.vel[:, sl]
        _matmul(geo.position_map, r, pos)  # [X Y Z x y z]

        # Heliocentric velocity in ICRS: v_r r_hat + k d (mu_a* e_ra + mu_d e_dec).
        kd, t_ra, t_dec = ws.vec("kd", m), ws.vec("t_ra", m), ws.vec("t_dec", m)
        np.multiply(d, _K, kd)
        np.multiply(kd, pmra, t_ra)
        np.multiply(kd, pmdec, t_dec)
        v = ws.mat("v", 4, m, fill_last=1.0)
        w = ws.vec("w", m)
        np.multiply(rv, cd, w)
        np.multiply(t_dec, sd, t1)
        np.subtract(w, t1, w)
        np.multiply(ca, w, v[0])
        np.multiply(t_ra, sa, t1)
        np.subtract(v[0], t1, v[0])
        np.multiply(sa, w, v[1])
        np.multiply(t_ra, ca, t1)
        np.add(v[1], t1, v[1])
        np.multiply(rv, sd, v[2])
        np.multiply(t_dec, cd, t1)
        np.add(v[2], t1, v[2])
        _matmul(geo.velocity_map, v, vel)  # [U V W vx vy vz]

        # Cylindrical.
        cols = {k: self.columns[k][sl] for k in _SCALARS}
        x, y, vx, vy = pos[3], pos[4], vel[3], vel[4]
        R, inv_R = cols["R"], ws.vec("inv_R", m)
        np.multiply(x, x, t1)
        np.multiply(y, y, t2)
        np.add(t1, t2, R)
        np.sqrt(R, R)
        with np.errstate(invalid="ignore", divide="ignore"):
            np.divide(1.0, R, inv_R)
        np.negative(x, t1)
        np.arctan2(y, t1, cols["phi"])
        np.multiply(x, vx, t1)
        np.multiply(y, vy, t2)
        np.add(t1, t2, t1)
        np.multiply(t1, inv_R, cols["v_R"])
        np.multiply(y, vx, t1)
        np.multiply(x, vy, t2)
        np.subtract(t1, t2, t1)
        np.multiply(t1, inv_R, cols["v_phi"])

        # Galactic longitude and latitude; cos^2 b is kept for the uncertainties.
        lon, lat, cos2_b = cols["l"], cols["b"], ws.vec("cos2_b", m)
        np.arctan2(g[1], g[0], lon)
        np.multiply(g[0], g[0], t1)
        np.multiply(g[1], g[1], t2)
        np.add(t1, t2, cos2_b)
        np.sqrt(cos2_b, t1)
        np.arctan2(g[2], t1, lat)
        if self.degrees:
            for col in (cols["phi"], lon, lat):
                col *= _DEG
        # l in [0, 360) deg: add a full turn where arctan2 gave a negative angle (a product with the
        # mask is several times faster than a masked add).
        turn = 360.0 if self.degrees else 2.0 * math.pi
        np.multiply(np.less(lon, 0.0, out=ws.mask("negative", m)), turn, t1)
        np.add(lon, t1, lon)
        # a hair below 0 plus a full turn rounds to exactly one turn: that is l = 0
        np.copyto(lon, 0.0, where=np.greater_equal(lon, turn, out=ws.mask("negative", m)))
        if self.then is not None:
            self.then(start, stop, ws, dict(sa=sa, ca=ca, sd=sd, cd=cd, kd=kd, inv_R=inv_R, cos2_b=cos2_b))


def _forward_all(sa, ca, sd, cd, d, pmra, pmdec, rv, geo):
    """The forward conversion of arrays of any length; returns {column: array} (angles in radians)."""
    n = sa.shape[0]
    (pos, vel), columns = _allocate(n)
    inputs = dict(sa=sa, ca=ca, sd=sd, cd=cd, d=d, pmra=pmra, pmdec=pmdec, rv=rv)
    run_blocks(n, _shared.BLOCK, _Forward(inputs, geo, pos, vel, columns, degrees=False), _scratch_for(n))
    columns["v_z"] = columns["vz"]
    columns["distance"] = d
    return columns


def _as_arrays(names_values):
    arrays = [np.asarray(v, dtype=float) for v in names_values.values()]
    try:
        broadcast = np.broadcast_arrays(*arrays)
    except ValueError:
        shapes = ", ".join(f"{n} {np.shape(v)}" for n, v in names_values.items())
        raise KinematicsError(f"arrays of different shapes: {shapes}") from None
    return [np.array(a, dtype=float, ndmin=1).ravel() for a in broadcast]


def _observables_forward(ra_deg, dec_deg, distance_kpc, pmra, pmdec, rv_kms, frame):
    ra, dec, d, pa, pd, rv = _as_arrays(
        {
            "ra_deg": ra_deg,
            "dec_deg": dec_deg,
            "distance_kpc": distance_kpc,
            "pmra": pmra,
            "pmdec": pmdec,
            "rv_kms": rv_kms,
        }
    )
    n = ra.shape[0]
    (pos, vel), columns = _allocate(n)
    inputs = dict(ra=ra, dec=dec, d=d, pmra=pa, pmdec=pd, rv=rv)
    geo = _Geometry.of(_frame_or_default(frame))
    run_blocks(n, _shared.BLOCK, _Forward(inputs, geo, pos, vel, columns, degrees=False), _scratch_for(n))
    return columns


def galactocentric_from_observables(ra_deg, dec_deg, distance_kpc, pmra, pmdec, rv_kms, frame=None):
    """Galactocentric Cartesian positions and velocities from observables (plain arrays).

    Parameters
    ----------
    ra_deg, dec_deg : array-like
        ICRS position, deg.
    distance_kpc : array-like
        Heliocentric distance, kpc.
    pmra, pmdec : array-like
        Proper motions mu_alpha* = mu_alpha cos(dec) and mu_delta, mas/yr.
    rv_kms : array-like
        Heliocentric radial velocity, km/s (NaN gives NaN velocities).
    frame : SolarFrame, optional
        Default ``SolarFrame.preset("astropy v4.0")``.

    Returns
    -------
    dict of numpy.ndarray
        ``x, y, z`` (kpc) and ``vx, vy, vz`` (km/s) in astropy's Galactocentric axes (1-D arrays).

    Notes
    -----
    x_gc = M r_icrs + offset and v_gc = M v_icrs + v_sun with the matrix and offset of
    :meth:`SolarFrame.galactocentric_transform`; the same construction as astropy, so the results
    agree with ``SkyCoord(...).transform_to(Galactocentric)`` to round-off.
    """
    out = _observables_forward(ra_deg, dec_deg, distance_kpc, pmra, pmdec, rv_kms, frame)
    return {name: out[name].copy() for name in _CARTESIAN}


def heliocentric_from_observables(ra_deg, dec_deg, distance_kpc, pmra, pmdec, rv_kms):
    """Heliocentric Galactic Cartesian positions and velocities (X, Y, Z, U, V, W) from observables.

    Parameters are as for :func:`galactocentric_from_observables` (deg, kpc, mas/yr, km/s).

    Returns
    -------
    dict of numpy.ndarray
        ``X, Y, Z`` (kpc) toward l = 0, l = 90 deg and the north Galactic pole; ``U, V, W`` (km/s)
        along them, relative to the Sun.

    References
    ----------
    ESA 1997, The Hipparcos and Tycho Catalogues, ESA SP-1200, Vol. 1, Sect. 1.5.3 (the rotation).
    Johnson, D. R. H. & Soderblom, D. R. 1987, AJ 93, 864 (space velocities from observables).
    """
    out = _observables_forward(ra_deg, dec_deg, distance_kpc, pmra, pmdec, rv_kms, None)
    return {name: out[name].copy() for name in _HELIO}


def cylindrical_from_cartesian(x, y, z, vx, vy, vz):
    """Galactocentric cylindrical coordinates from Galactocentric Cartesian ones (plain arrays).

    Parameters
    ----------
    x, y, z : array-like
        Galactocentric position, kpc (astropy axes).
    vx, vy, vz : array-like
        Galactocentric velocity, km/s.

    Returns
    -------
    dict of numpy.ndarray
        ``R`` (kpc), ``phi`` (**radians**, in (-pi, pi]), ``z`` (kpc), ``v_R``, ``v_phi``, ``v_z`` (km/s).

    Notes
    -----
    phi = atan2(y, -x) is 0 at the Sun and increases in the direction of Galactic rotation;
    v_R = (x vx + y vy)/R is positive outward; v_phi = (y vx - x vy)/R is positive in the sense of
    rotation (the Sun has about +245 km/s). On the z axis (R = 0) v_R and v_phi are NaN.
    """
    x, y, z, vx, vy, vz = _as_arrays(dict(x=x, y=y, z=z, vx=vx, vy=vy, vz=vz))
    R = np.sqrt(x * x + y * y)
    with np.errstate(invalid="ignore", divide="ignore"):
        v_R = (x * vx + y * vy) / R
        v_phi = (y * vx - x * vy) / R
    return {"R": R, "phi": np.arctan2(y, -x), "z": z, "v_R": v_R, "v_phi": v_phi, "v_z": vz}


def observables_from_galactocentric(x, y, z, vx, vy, vz, frame=None):
    """Observables from Galactocentric Cartesian positions and velocities (plain arrays).

    Parameters
    ----------
    x, y, z : array-like
        Galactocentric position, kpc (astropy axes).
    vx, vy, vz : array-like
        Galactocentric velocity, km/s.
    frame : SolarFrame, optional
        Default ``SolarFrame.preset("astropy v4.0")``.

    Returns
    -------
    dict of numpy.ndarray
        ``ra`` in [0, 360) and ``dec`` (deg), ``distance`` (kpc), ``pmra`` (mu_alpha* = mu_alpha cos dec)
        and ``pmdec`` (mas/yr), ``radial_velocity`` (km/s).

    Notes
    -----
    The exact inverse of :func:`galactocentric_from_observables`. A point at the Sun's position has no
    direction: its distance is 0 and everything else NaN.
    """
    x, y, z, vx, vy, vz = _as_arrays(dict(x=x, y=y, z=z, vx=vx, vy=vy, vz=vz))
    geo = _Geometry.of(_frame_or_default(frame))
    # The inverse of the rotation is its transpose.
    r = geo.icrs_to_gc.T @ (np.stack([x, y, z]) - geo.offset[:, None])
    w = geo.icrs_to_gc.T @ (np.stack([vx, vy, vz]) - geo.v_sun[:, None])
    d = np.sqrt(np.einsum("ij,ij->j", r, r))
    with np.errstate(invalid="ignore", divide="ignore"):
        ra = np.where(d > 0, np.arctan2(r[1], r[0]), np.nan)
        dec = np.where(d > 0, np.arctan2(r[2], np.hypot(r[0], r[1])), np.nan)
        sa, ca, sd, cd = np.sin(ra), np.cos(ra), np.sin(dec), np.cos(dec)
        rv = np.einsum("ij,ij->j", r, w) / d
        kd = _K * d
        pmra = (-sa * w[0] + ca * w[1]) / kd
        pmdec = (-sd * ca * w[0] - sd * sa * w[1] + cd * w[2]) / kd
    ra_deg = np.degrees(ra)
    ra_deg[ra_deg < 0] += 360.0
    ra_deg[ra_deg >= 360.0] -= 360.0
    return {"ra": ra_deg, "dec": np.degrees(dec), "distance": d, "pmra": pmra, "pmdec": pmdec, "radial_velocity": rv}
