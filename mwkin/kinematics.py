"""From astrometry to Galactic positions and velocities, with uncertainties, and back.

:func:`to_galactocentric` turns a star table (ra, dec, a distance choice, proper motions, radial
velocity) into heliocentric Galactic Cartesian coordinates (X, Y, Z, U, V, W), Galactocentric
Cartesian coordinates (x, y, z, vx, vy, vz) and Galactocentric cylindrical coordinates
(R, phi, z, v_R, v_phi, v_z), optionally with linear or Monte Carlo uncertainties.
:func:`from_galactocentric` is its exact inverse, for mock catalogues. The array-level functions
(:func:`galactocentric_from_observables`, :func:`heliocentric_from_observables`,
:func:`observables_from_galactocentric`, :func:`cylindrical_from_cartesian`) work on plain float64
arrays.

Conventions
-----------
* Galactocentric Cartesian axes are those of :class:`astropy.coordinates.Galactocentric` for the same
  :class:`~mwkin.frames.SolarFrame`: the Sun near x = -R0, y = 0, z = z_sun; y along Galactic
  rotation at the Sun; z toward the north Galactic pole. Results agree with astropy to round-off.
* Cylindrical: R = sqrt(x^2 + y^2); phi = atan2(y, -x), 0 at the Sun and **increasing in the
  direction of Galactic rotation**; v_R = (x vx + y vy) / R, positive outward;
  v_phi = (y vx - x vy) / R, **positive in the sense of rotation** (the Sun has about +245 km/s).
  astropy's cylindrical representation uses atan2(y, x) and the opposite sense of rotation.
* Heliocentric Galactic: X toward the Galactic centre (l = 0, b = 0), Y toward l = 90 deg, Z toward
  the north Galactic pole, built with the Hipparcos ICRS-to-Galactic matrix (:mod:`mwkin.galactic`);
  U, V, W are velocities along X, Y, Z relative to the Sun (U positive toward the centre).
* Units: kpc, km/s, mas/yr; angles in deg at the boundary (phi of :func:`cylindrical_from_cartesian`
  is in radians). k = 4.740470463533 km/s per (mas/yr kpc), one au per Julian year.

Implementation notes
--------------------
Stars are processed in blocks of 32768 (:func:`mwkin._blocks.run_blocks`) on ``MWKIN_THREADS``
threads (default min(2, CPUs)): numpy releases the interpreter lock inside its loops, and each
block's scratch arrays are made once per thread and reused, so that no large temporary arrays are
made. Smaller blocks would fit the cache better, but then the threads spend their time waiting for
the interpreter lock between the short numpy calls; 32768 was measured best for both the plain
conversion and the linear uncertainties. Outputs are rows of one preallocated array, written in
place. The constant rotations are matrix products (BLAS, in chunks small enough that OpenBLAS does
not start threads of its own), the rest plain numpy.
"""

from __future__ import annotations

import math
import numbers
from dataclasses import dataclass

import numpy as np
import astropy.units as u
from astropy.table import QTable

from ._blocks import run_blocks
from .distances import InverseParallax, _column_values
from .frames import SolarFrame
from .galactic import ICRS_TO_GALACTIC, K_KMS_PER_MASYR_KPC
from .units import KMS, MASYR, to_value

__all__ = [
    "KinematicsError",
    "to_galactocentric",
    "from_galactocentric",
    "galactocentric_from_observables",
    "heliocentric_from_observables",
    "observables_from_galactocentric",
    "cylindrical_from_cartesian",
    "OUTPUT_COLUMNS",
    "ERROR_METHODS",
]

_K = K_KMS_PER_MASYR_KPC  # km/s per (mas/yr kpc)
_MAS_TO_RAD = math.pi / (180.0 * 3.6e6)
_DEG = 180.0 / math.pi
_BLOCK = 1 << 15  # stars per block (see the module notes)
_BLAS_CHUNK = 1 << 19  # multiply-adds per matrix product call (see _matmul)
_ROTATION_CHUNK = 1 << 13  # stars per step of the covariance rotations (see _Linear)
_MC_DRAWS_PER_BLOCK = 1 << 18  # stars x samples per Monte Carlo block: bounds memory
#: Percentiles of a Gaussian at -1 and +1 sigma (15.87 and 84.13).
_SIGMA_LEVELS = (50.0 * math.erfc(1.0 / math.sqrt(2.0)), 50.0 * math.erfc(-1.0 / math.sqrt(2.0)))

ERROR_METHODS = ("none", "linear", "montecarlo")

_ROT = "in the direction of Galactic rotation"
#: Output column -> (unit, description) of :func:`to_galactocentric`, in output order.
OUTPUT_COLUMNS = {
    "x": (u.kpc, "Galactocentric x (astropy Galactocentric axes; the Sun is near x = -R0)"),
    "y": (u.kpc, f"Galactocentric y, {_ROT} at the Sun"),
    "z": (u.kpc, "Galactocentric z, toward the north Galactic pole (height above the mid-plane)"),
    "vx": (KMS, "Galactocentric velocity along x"),
    "vy": (KMS, "Galactocentric velocity along y"),
    "vz": (KMS, "Galactocentric velocity along z"),
    "R": (u.kpc, "Galactocentric cylindrical radius sqrt(x^2 + y^2)"),
    "phi": (u.deg, f"Galactocentric azimuth atan2(y, -x): 0 at the Sun, increasing {_ROT} "
                   "(astropy's cylindrical phi is atan2(y, x), the other sense)"),
    "v_R": (KMS, "Galactocentric radial velocity (x vx + y vy)/R, positive outward"),
    "v_phi": (KMS, f"Galactocentric azimuthal velocity (y vx - x vy)/R, positive {_ROT} (the Sun has "
                   "about +245 km/s); astropy's cylindrical differential has the opposite sign"),
    "v_z": (KMS, "Galactocentric vertical velocity (= vz)"),
    "X": (u.kpc, "heliocentric Galactic X, toward the Galactic centre (l = 0, b = 0)"),
    "Y": (u.kpc, "heliocentric Galactic Y, toward l = 90 deg (direction of rotation)"),
    "Z": (u.kpc, "heliocentric Galactic Z, toward the north Galactic pole"),
    "U": (KMS, "velocity along X relative to the Sun (positive toward the Galactic centre)"),
    "V": (KMS, "velocity along Y relative to the Sun (positive in the direction of rotation)"),
    "W": (KMS, "velocity along Z relative to the Sun (positive toward the north Galactic pole)"),
    "l": (u.deg, "Galactic longitude (Hipparcos ICRS-to-Galactic matrix)"),
    "b": (u.deg, "Galactic latitude (Hipparcos ICRS-to-Galactic matrix)"),
    "distance": (u.kpc, "heliocentric distance used (see meta['distance'])"),
}
_ANGLES = ("phi", "l", "b")  # radians inside, degrees in the output
_WRAPPING = ("phi", "l")  # Monte Carlo percentiles of these are taken around the nominal value
_CARTESIAN = ("x", "y", "z", "vx", "vy", "vz")
_HELIO = ("X", "Y", "Z", "U", "V", "W")
_POSITION_ROWS = ("X", "Y", "Z", "x", "y", "z")  # rows of the position block
_VELOCITY_ROWS = ("U", "V", "W", "vx", "vy", "vz")
_SCALARS = ("R", "phi", "v_R", "v_phi", "l", "b")
_VELOCITY_COLUMNS = ("vx", "vy", "vz", "v_R", "v_phi", "v_z", "U", "V", "W")

# Parameter order of the 6x6 covariance: (ra*, dec, parallax or distance, pmra, pmdec, radial_velocity).
_CORRELATIONS = {
    (0, 1): "ra_dec_corr", (0, 2): "ra_parallax_corr", (0, 3): "ra_pmra_corr", (0, 4): "ra_pmdec_corr",
    (1, 2): "dec_parallax_corr", (1, 3): "dec_pmra_corr", (1, 4): "dec_pmdec_corr",
    (2, 3): "parallax_pmra_corr", (2, 4): "parallax_pmdec_corr", (3, 4): "pmra_pmdec_corr",
}
# Unique entries of a symmetric 3x3 block, in the order the blocks are stored.
_SYM = ((0, 0), (0, 1), (0, 2), (1, 1), (1, 2), (2, 2))
_SYM_DIAG = (0, 3, 5)

_SKY_REASON = "no_sky_position"
_CORR_REASON = "invalid_correlation"
# A correlation matrix is accepted when its smallest eigenvalue is at least -_EIGEN_TOLERANCE (positive
# semi-definite up to round-off); the same tolerance decides which Monte Carlo draws count as clipped.
_EIGEN_TOLERANCE = 1e-12
# Pivots of the LDL^T factorisation above this settle "positive definite" at once; smaller ones
# (singular or invalid matrices, rare) are decided by the eigenvalues.
_PIVOT_TOLERANCE = 1e-9


class KinematicsError(ValueError):
    """Bad arguments to a kinematics function (the message names the argument and the value)."""


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
            want = {"sym": [("gc", 0, 0), ("gc", 0, 1), ("gc", 1, 1), ("gc", 2, 2),
                            ("h", 0, 0), ("h", 1, 1), ("h", 2, 2)],
                    "cross_sym": [("gc", 0, 0), ("gc", 0, 1), ("gc", 1, 1)], "cross_anti": [("gc", 0, 1)]}
        full_maps = {f: {"sym": _sym_map(R), "anti": _antisym_map(R)} for f, R in frames.items()}
        maps, rows = {}, {}
        for name, entries in want.items():
            kind, keys = ("anti", ((0, 1), (0, 2), (1, 2))) if name == "cross_anti" else ("sym", _SYM)
            maps[name] = np.array([full_maps[f][kind][keys.index((a, b))] for f, a, b in entries])
            rows[name] = {axes[f][a] + axes[f][b]: i for i, (f, a, b) in enumerate(entries)}
        return maps, rows


def _frame_or_default(frame):
    if frame is None:
        return SolarFrame.preset("astropy v4.0")
    if not isinstance(frame, SolarFrame):
        raise KinematicsError(f"frame must be a SolarFrame (or None for the default), got {type(frame).__name__}")
    return frame


# ====================================================================== forward conversion
# Scratch names that share memory with names whose values are no longer needed by then: fewer
# distinct arrays keep more of a block's working set in the processor cache. Forward-only
# temporaries serve the first steps of the uncertainties, and the Jacobian rows and their
# correlation-weighted sums (dead once the local covariance is made) serve the last steps.
_SHARED_SCRATCH = {
    "kma": "t_ra", "kmd": "t_dec", "kt": "w", "pa": "t2", "rot_t2": "g",
    "cyl_c": "h30", "cyl_s": "h31", "cyl_c2": "h40", "cyl_s2": "h50", "cyl_cs": "h42", "cyl_2cs": "h43",
    "cyl_cos2": "h51", "var_p1": "h52", "var_w0": "h54", "var_w1": "W30", "cov_p1_w0": "W31",
    "cov_p1_w1": "W32", "cyl_half": "W40", "cyl_f": "W41",
    "gal_p": "h30", "gal_q": "h31", "inv_cb2": "h40", "gal_ja": "h50", "gal_jd": "h42", "gal_x": "h43",
}


class _Scratch:
    """Arrays reused by every block one thread works on (fresh temporaries would cost page faults).

    ``vec(name, m)`` is a 1-D array of length m, ``mat(name, rows, m)`` a (rows, m) array; both are
    views of arrays made once per thread with room for a whole block. Names listed in
    _SHARED_SCRATCH share the memory of another name.
    """

    def __init__(self, capacity=None):
        self._arrays = {}
        self.capacity = _BLOCK if capacity is None else capacity

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
    capacity = max(1, min(n, _BLOCK))
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
        np.matmul(A, X[:, start:start + step], out=out[:, start:start + step])
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
        np.multiply(np.less(lon, 0.0, out=ws.mask("negative", m)), 360.0 if self.degrees else 2.0 * math.pi, t1)
        np.add(lon, t1, lon)
        if self.then is not None:
            self.then(start, stop, ws, dict(sa=sa, ca=ca, sd=sd, cd=cd, kd=kd, inv_R=inv_R, cos2_b=cos2_b))


def _forward_all(sa, ca, sd, cd, d, pmra, pmdec, rv, geo):
    """The forward conversion of arrays of any length; returns {column: array} (angles in radians)."""
    n = sa.shape[0]
    (pos, vel), columns = _allocate(n)
    inputs = dict(sa=sa, ca=ca, sd=sd, cd=cd, d=d, pmra=pmra, pmdec=pmdec, rv=rv)
    run_blocks(n, _BLOCK, _Forward(inputs, geo, pos, vel, columns, degrees=False), _scratch_for(n))
    columns["v_z"] = columns["vz"]
    columns["distance"] = d
    return columns


def _as_arrays(names_values):
    arrays = [np.asarray(v, dtype=float) for v in names_values.values()]
    try:
        arrays = np.broadcast_arrays(*arrays)
    except ValueError:
        shapes = ", ".join(f"{n} {np.shape(v)}" for n, v in names_values.items())
        raise KinematicsError(f"arrays of different shapes: {shapes}") from None
    return [np.array(a, dtype=float, ndmin=1).ravel() for a in arrays]


def _observables_forward(ra_deg, dec_deg, distance_kpc, pmra, pmdec, rv_kms, frame):
    ra, dec, d, pa, pd, rv = _as_arrays({"ra_deg": ra_deg, "dec_deg": dec_deg, "distance_kpc": distance_kpc,
                                         "pmra": pmra, "pmdec": pmdec, "rv_kms": rv_kms})
    n = ra.shape[0]
    (pos, vel), columns = _allocate(n)
    inputs = dict(ra=ra, dec=dec, d=d, pmra=pa, pmdec=pd, rv=rv)
    geo = _Geometry.of(_frame_or_default(frame))
    run_blocks(n, _BLOCK, _Forward(inputs, geo, pos, vel, columns, degrees=False), _scratch_for(n))
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
    return {"ra": ra_deg, "dec": np.degrees(dec), "distance": d, "pmra": pmra, "pmdec": pmdec,
            "radial_velocity": rv}


# ====================================================================== linear propagation
def _nonzero(value):
    return not (isinstance(value, float) and value == 0.0)


def _combine(out, tmp, terms, alias=False):
    """out = the sum of ``terms``; returns out, or None when no term is left.

    A term is an array, or a pair (a, b) standing for a * b, or a triple (a, b, -1) for -a * b.
    None terms, and pairs or triples with a None factor (a parameter without uncertainty, an absent
    correlation), are left out. Products are evaluated first, a positive one first of all, so that
    no operation is spent on copies or signs; ``out`` must not be one of the factors. With
    ``alias``, a sum of a single array is that array itself (nothing is written to ``out``).
    """
    plus, minus, plain = [], [], []
    for term in terms:
        if term is None:
            continue
        if isinstance(term, tuple):
            if term[0] is not None and term[1] is not None:
                (minus if len(term) == 3 else plus).append(term)
        else:
            plain.append(term)
    if not (plus or minus):
        if not plain:
            return None
        if alias and len(plain) == 1:
            return plain[0]
        if len(plain) == 1:
            np.copyto(out, plain[0])
            return out
        np.add(plain[0], plain[1], out)
        plain = plain[2:]
    elif plus:
        np.multiply(plus[0][0], plus[0][1], out)
        plus = plus[1:]
    elif plain:  # only negative products and arrays: out = array - a b
        np.multiply(minus[0][0], minus[0][1], tmp)
        np.subtract(plain[0], tmp, out)
        minus, plain = minus[1:], plain[1:]
    else:
        np.multiply(minus[0][0], minus[0][1], out)
        np.negative(out, out)
        minus = minus[1:]
    for a, b in plus:
        np.multiply(a, b, tmp)
        np.add(out, tmp, out)
    for a, b, _ in minus:
        np.multiply(a, b, tmp)
        np.subtract(out, tmp, out)
    for a in plain:
        np.add(out, a, out)
    return out


def _rotation(c, s, ws, name, m):
    """(c, s, cos 2t, sin 2t, cos(2t)/2, sin(2t)/2) of a plane rotation by t, in scratch arrays."""
    out = ws.mat(name, 4, m)
    C, S, C_half, S_half = out
    np.multiply(c, c, C)
    np.multiply(s, s, S_half)
    np.subtract(C, S_half, C)  # cos 2t = c^2 - s^2
    np.multiply(c, s, S_half)  # sin(2t)/2 = c s
    np.add(S_half, S_half, S)
    np.multiply(C, 0.5, C_half)
    return c, s, C, S, C_half, S_half


def _rotate_in_place(P, Z, rot, i, j, ws, m):
    """P -> G P G^T and Z -> G Z G^T in place, for the plane rotation G in the plane of axes i < j.

    P is a (k, 6, m) stack of symmetric 3x3 matrices (unique entries in _SYM order), Z a (3, m)
    antisymmetric matrix (entries 01, 02, 12). With T = (P_ii + P_jj)/2, D2 = P_ii - P_jj and the
    double angle 2t, Q_ii = T + E, Q_jj = T - E with E = cos(2t) D2/2 - sin(2t) P_ij and
    Q_ij = sin(2t) D2/2 + cos(2t) P_ij: 11 operations instead of 14. The in-plane entry of an
    antisymmetric matrix does not change, and off-plane pairs turn like vectors.
    """
    c, s, C, S, C_half, S_half = rot
    k = 3 - i - j
    e = {key: p for p, key in enumerate(_SYM)}
    Pii, Pjj, Pij = P[:, e[i, i]], P[:, e[j, j]], P[:, e[i, j]]
    Pik, Pjk = P[:, e[min(i, k), max(i, k)]], P[:, e[min(j, k), max(j, k)]]
    n_blocks = P.shape[0]
    t2, d2, big_e, tmp = (ws.mat(f"rot_{name}", n_blocks, m) for name in ("t2", "d2", "e", "tmp"))
    np.add(Pii, Pjj, t2)
    np.subtract(Pii, Pjj, d2)
    np.multiply(d2, C_half, big_e)
    np.multiply(Pij, S, tmp)
    np.subtract(big_e, tmp, big_e)  # (Q_ii - Q_jj)/2
    np.multiply(Pij, C, Pij)
    np.multiply(d2, S_half, tmp)
    np.add(Pij, tmp, Pij)  # Q_ij
    np.multiply(t2, 0.5, t2)
    np.add(t2, big_e, Pii)
    np.subtract(t2, big_e, Pjj)
    _turn_pair(Pik, Pjk, c, s, tmp, t2)
    # Antisymmetric part: Z_ij stays and (Z_ik, Z_jk) turn like (P_ik, P_jk). Only entries above the
    # diagonal are stored (Z_ki = -Z_ik), so when exactly one of the two lies below it the turn
    # goes the other way.
    z = {(0, 1): 0, (0, 2): 1, (1, 2): 2}
    _turn_pair(Z[z[min(i, k), max(i, k)]], Z[z[min(j, k), max(j, k)]], c, s, tmp[0], t2[0],
               flip=(i < k) != (j < k))


def _turn_pair(a, b, c, s, tmp, tmp2, flip=False):
    """(a, b) -> (c a - s b, s a + c b) in place (s -> -s with ``flip``)."""
    np.multiply(a, s, tmp2)
    np.multiply(b, s, tmp)
    np.multiply(a, c, a)
    (np.add if flip else np.subtract)(a, tmp, a)
    np.multiply(b, c, b)
    (np.subtract if flip else np.add)(b, tmp2, b)


class _Linear:
    """Linear uncertainties of rows [start, stop), run after :class:`_Forward` on the same block.

    ``sig`` maps the six parameters ("ra", "dec", "p", "pmra", "pmdec", "rv") to full-length
    standard deviations (ra* and dec in mas, the third parameter -- parallax in mas or distance in
    kpc -- proper motions in mas/yr, rv in km/s) or None for a parameter without uncertainty;
    ``rho`` maps parameter index pairs (k, l), k < l, to full-length correlations (absent = 0).

    The Jacobian is written in each star's local basis (r_hat, e_ra, e_dec), where it is sparse. The
    covariance there -- position block, velocity block, and the position-velocity block split into
    its symmetric and antisymmetric parts, which turn like a covariance and like a vector -- goes
    to ICRS axes with two plane rotations per star (E = Rz(ra) B(dec)), then to the Galactocentric
    and Galactic axes with constant matrices acting on the entries (matrix products).
    """

    def __init__(self, sig, rho, parallax, maps, inputs, columns, sigmas, covs):
        self.sig, self.rho, self.parallax, self.maps = sig, rho, parallax, maps
        self.inputs, self.columns, self.sigmas, self.covs = inputs, columns, sigmas, covs

    def __call__(self, start, stop, ws, bv):
        m = stop - start
        sl = slice(start, stop)
        inp = self.inputs
        d, pmra, pmdec, rv = inp["d"][sl], inp["pmra"][sl], inp["pmdec"][sl], inp["rv"][sl]
        sa, ca, sd, cd, kd = bv["sa"], bv["ca"], bv["sd"], bv["cd"], bv["kd"]
        sig = {k: (None if v is None else v[sl]) for k, v in self.sig.items()}
        rho = {k: v[sl] for k, v in self.rho.items()}
        tmp = ws.vec("t1", m)
        out = {name: col[sl] for name, col in self.sigmas.items()}

        def mul(name, a, b):
            return None if a is None or b is None else np.multiply(a, b, ws.vec(name, m))

        # Jacobian rows times the standard deviation of each parameter (0 ra*, 1 dec, 2 parallax or
        # distance, 3 pmra, 4 pmdec, 5 rv), in the local basis. The tan(dec) terms come from the
        # turning of e_ra and e_dec when the position moves in ra.
        s_a = mul("s_a", sig["ra"], _MAS_TO_RAD)
        s_d = mul("s_d", sig["dec"], _MAS_TO_RAD)
        pa, pd = mul("pa", d, s_a), mul("pd", d, s_d)  # d sigma(ra*), d sigma(dec)
        if self.parallax:  # d(distance)/d(parallax) = -d^2
            a = mul("a", d, d)
            a = None if sig["p"] is None else np.negative(np.multiply(a, sig["p"], a), a)
        else:
            a = sig["p"]
        kma, kmd = mul("kma", pmra, _K), mul("kmd", pmdec, _K)
        with np.errstate(invalid="ignore", divide="ignore"):
            kt = np.divide(sd, cd, ws.vec("kt", m))
        np.multiply(kt, kd, kt)  # k d tan(dec)
        h30 = _combine(ws.vec("h30", m), tmp, [(kma, pa, -1)])
        h31 = _combine(ws.vec("h31", m), tmp, [(kmd, pd, -1)])
        h40 = h50 = None
        if s_a is not None:
            h40 = np.multiply(kt, pmdec, ws.vec("h40", m))
            np.subtract(rv, h40, h40)
            np.multiply(h40, s_a, h40)
            h50 = np.multiply(kt, pmra, ws.vec("h50", m))
            np.multiply(h50, s_a, h50)
        H = [
            {2: a}, {0: pa}, {1: pd},
            {0: h30, 1: h31, 5: sig["rv"]},
            {0: h40, 2: mul("h42", kma, a), 3: mul("h43", kd, sig["pmra"])},
            {0: h50, 1: mul("h51", rv, s_d), 2: mul("h52", kmd, a), 4: mul("h54", kd, sig["pmdec"])},
        ]
        H = [{k: h for k, h in row.items() if h is not None} for row in H]
        P, Z = self._local_covariance(H, rho, ws, m, tmp)

        # Local basis -> ICRS (in place), then constant maps to the Galactocentric and Galactic axes.
        for lo in range(0, m, _ROTATION_CHUNK):  # in chunks that stay in the cache for both turns
            c = slice(lo, min(lo + _ROTATION_CHUNK, m))
            k = c.stop - c.start
            Pc, Zc = P[:, :, c], Z[:, c]
            _rotate_in_place(Pc, Zc, _rotation(cd[c], sd[c], ws, "rot_dec", k), 0, 2, ws, k)
            _rotate_in_place(Pc, Zc, _rotation(ca[c], sa[c], ws, "rot_ra", k), 0, 1, ws, k)
        maps, rows = self.maps
        rr = _matmul(maps["sym"], P[0], ws.mat("rr", maps["sym"].shape[0], m))
        vv = _matmul(maps["sym"], P[1], ws.mat("vv", maps["sym"].shape[0], m))
        yy = _matmul(maps["cross_sym"], P[2], ws.mat("yy", maps["cross_sym"].shape[0], m))
        zz = _matmul(maps["cross_anti"], Z, ws.mat("zz", maps["cross_anti"].shape[0], m))
        sym, ysym, zanti = rows["sym"], rows["cross_sym"], rows["cross_anti"]

        with np.errstate(invalid="ignore"):
            for i, axis in enumerate("xyz"):
                np.sqrt(rr[sym[axis + axis]], out[_CARTESIAN[i]])
                np.sqrt(vv[sym[axis + axis]], out[_CARTESIAN[i + 3]])
                helio = axis.upper() * 2
                np.sqrt(rr[sym[helio]], out[_HELIO[i]])
                np.sqrt(vv[sym[helio]], out[_HELIO[i + 3]])
            self._cylindrical([rr[sym[k]] for k in ("xx", "xy", "yy")], [vv[sym[k]] for k in ("xx", "xy", "yy")],
                              [yy[ysym[k]] for k in ("xx", "xy", "yy")], zz[zanti["xy"]], sl, bv["inv_R"], ws, m,
                              tmp, out)
            self._galactic(sa, ca, sd, cd, bv["cos2_b"], s_a, s_d, rho.get((0, 1)), ws, m, tmp, out)
        if a is None:
            out["distance"][...] = 0.0
        else:
            np.abs(a, out["distance"])
        if self.covs is not None:  # the maps then give every entry, Galactocentric first
            for key, f in (("cov_galactocentric", 0), ("cov_heliocentric", 1)):
                _fill_covariance(self.covs[key][sl], rr[6 * f:6 * f + 6], vv[6 * f:6 * f + 6],
                                 yy[6 * f:6 * f + 6], zz[3 * f:3 * f + 3])

    @staticmethod
    def _local_covariance(H, rho, ws, m, tmp):
        """Covariance H rho H^T in the local basis, as P (3, 6, m) and Z (3, m).

        P holds the position block, the velocity block and Y = X + X^T (X the position-velocity block
        Cov(position_i, velocity_j)), each symmetric, in _SYM order; Z = X - X^T (entries 01, 02, 12).
        With W_j = rho H_j^T (only the entries needed), H_i rho H_j^T = sum over the parameters l of
        row i of H_il W_jl; rows 0-2 (position) have one parameter each.
        """
        P = ws.arr("S_sym", (3, 6), m)
        Z = ws.mat("S_anti", 3, m)
        memo = {}

        def r(k, l):
            return rho.get((min(k, l), max(k, l)))

        def W(j, l):
            if (j, l) not in memo:
                terms = [h if k == l else (r(k, l), h) for k, h in H[j].items()]
                memo[j, l] = _combine(ws.vec(f"W{j}{l}", m), tmp, terms, alias=True)
            return memo[j, l]

        def entry(i, j, target):
            if j < 3:  # position-position
                if not H[i] or not H[j]:
                    return None
                (k, hi), = H[i].items()
                (l, hj), = H[j].items()
                if i == j:
                    return np.multiply(hi, hi, target)
                c = r(k, l)
                return None if c is None else np.multiply(np.multiply(hi, hj, target), c, target)
            return _combine(target, tmp, [(h, W(j, l)) for l, h in H[i].items()])

        for block, i0 in ((0, 0), (1, 3)):
            for p, (a, b) in enumerate(_SYM):
                if entry(i0 + a, i0 + b, P[block, p]) is None:
                    P[block, p] = 0.0
        # Position-velocity block X_ab = Cov(position a, velocity b): Y = X + X^T, Z = X - X^T.
        x_ab, x_ba = ws.vec("x_ab", m), ws.vec("x_ba", m)
        for p, (a, b) in enumerate(_SYM):
            y = P[2, p]
            if a == b:
                if entry(a, 3 + a, y) is None:
                    y[...] = 0.0
                else:
                    np.add(y, y, y)
                continue
            ab = entry(a, 3 + b, x_ab)
            ba = entry(b, 3 + a, x_ba)
            z = Z[{(0, 1): 0, (0, 2): 1, (1, 2): 2}[a, b]]
            if ab is not None and ba is not None:
                np.add(ab, ba, y)
                np.subtract(ab, ba, z)
            elif ab is not None:
                np.copyto(y, ab)
                np.copyto(z, ab)
            elif ba is not None:
                np.copyto(y, ba)
                np.negative(ba, z)
            else:
                y.fill(0.0)
                z.fill(0.0)
        return P, Z

    def _cylindrical(self, rr, vv, yy, zxy, sl, inv_R, ws, m, tmp, out):
        """sigma of R, phi, v_R, v_phi from the Galactocentric covariance entries.

        With (c, s) = (x, y)/R, the rotated offsets p = (dR, R dphi) = (c dx + s dy, s dx - c dy) and
        w = (c dvx + s dvy, s dvx - c dvy) give dv_R = w0 + (v_phi/R) p1 and dv_phi = w1 - (v_R/R) p1.
        rr, vv and yy (= X + X^T of the position-velocity block X): the xx, xy, yy entries; zxy the
        xy entry of X - X^T. Then 2 cov(p1, w0) = c s (Yxx - Yyy) - (c^2 - s^2) Yxy + Zxy and
        2 cov(p1, w1) = s^2 Yxx - 2 c s Yxy + c^2 Yyy.
        """
        cols = self.columns
        c = np.multiply(cols["x"][sl], inv_R, ws.vec("cyl_c", m))
        s = np.multiply(cols["y"][sl], inv_R, ws.vec("cyl_s", m))
        c2, s2, cs, two_cs, cos2 = (ws.vec(k, m) for k in ("cyl_c2", "cyl_s2", "cyl_cs", "cyl_2cs", "cyl_cos2"))
        np.multiply(c, c, c2)
        np.multiply(s, s, s2)
        np.multiply(c, s, cs)
        np.add(cs, cs, two_cs)
        np.subtract(c2, s2, cos2)
        var_p1, var_w0, var_w1 = (ws.vec(k, m) for k in ("var_p1", "var_w0", "var_w1"))
        cov0, cov1 = ws.vec("cov_p1_w0", m), ws.vec("cov_p1_w1", m)
        half = ws.vec("cyl_half", m)
        # Along and across the radius: T +- (cos 2phi D + sin 2phi xy) with T, D the half sum and difference.
        for (xx, xy, yy_), along, across in ((rr, out["R"], var_p1), (vv, var_w0, var_w1)):
            np.add(xx, yy_, half)
            np.multiply(half, 0.5, half)
            np.subtract(xx, yy_, tmp)
            np.multiply(tmp, 0.5, tmp)
            np.multiply(tmp, cos2, tmp)
            np.multiply(xy, two_cs, across)
            np.add(tmp, across, tmp)
            np.add(half, tmp, along)
            np.subtract(half, tmp, across)
        np.sqrt(out["R"], out["R"])
        yxx, yxy, yyy = yy
        np.subtract(yxx, yyy, cov0)
        np.multiply(cov0, cs, cov0)
        np.multiply(yxy, cos2, tmp)
        np.subtract(cov0, tmp, cov0)
        np.add(cov0, zxy, cov0)  # 2 cov(p1, w0)
        _combine(cov1, tmp, [(s2, yxx), (two_cs, yxy, -1), (c2, yyy)])  # 2 cov(p1, w1)
        # var(v_R) = var_w0 + f (2 cov(p1, w0) + f var_p1) with f = v_phi / R; var(v_phi) likewise with -v_R / R.
        for name, f_of, cov, sign, base in (("v_R", "v_phi", cov0, 1.0, var_w0), ("v_phi", "v_R", cov1, -1.0, var_w1)):
            f = np.multiply(cols[f_of][sl], inv_R, ws.vec("cyl_f", m))
            if sign < 0:
                np.negative(f, f)
            np.multiply(f, var_p1, tmp)
            np.add(tmp, cov, tmp)
            np.multiply(tmp, f, tmp)
            np.add(tmp, base, out[name])
            np.sqrt(out[name], out[name])
        np.sqrt(var_p1, out["phi"])
        np.multiply(out["phi"], inv_R, out["phi"])
        out["phi"] *= _DEG

    @staticmethod
    def _galactic(sa, ca, sd, cd, cos2_b, s_a, s_d, r_ad, ws, m, tmp, out):
        """sigma of l and b, which depend on (ra*, dec) alone.

        With the Galactic pole n (ICRS), the Galactic north at the star is (n - (n.r_hat) r_hat) / cos b,
        so its components along e_ra and e_dec are p / cos b and q / cos b; east is the
        perpendicular direction. sigma_l is in degrees of longitude (sigma of l cos b over cos b).
        """
        n_gp = ICRS_TO_GALACTIC[2]
        p = _combine(ws.vec("gal_p", m), tmp, [(sa, -n_gp[0]), (ca, n_gp[1])])
        q = _combine(ws.vec("gal_q", m), tmp, [(ca, n_gp[0]), (sa, n_gp[1])])
        np.multiply(q, sd, q)
        np.multiply(cd, n_gp[2], tmp)
        np.subtract(tmp, q, q)  # q = n_z cos(dec) - sin(dec) (n_x cos(ra) + n_y sin(ra))
        with np.errstate(divide="ignore"):
            inv_cb2 = np.divide(1.0, cos2_b, ws.vec("inv_cb2", m))
        ja, jd = ws.vec("gal_ja", m), ws.vec("gal_jd", m)
        for name, (u_a, u_d) in (("l", (q, p)), ("b", (p, q))):
            # l: the east direction (q, -p), variance over cos^4 b; b: the north direction (p, q), over cos^2 b.
            ja_ = None if s_a is None else np.multiply(u_a, s_a, ja)
            jd_ = None if s_d is None else np.multiply(u_d, s_d, jd)
            if jd_ is not None and name == "l":
                np.negative(jd_, jd_)
            cross = None
            if ja_ is not None and jd_ is not None and r_ad is not None:
                cross = ws.vec("gal_x", m)
                np.multiply(ja_, jd_, cross)
                np.multiply(cross, r_ad, cross)
                np.add(cross, cross, cross)
            total = _combine(out[name], tmp, [(ja_, ja_), (jd_, jd_), cross])
            if total is None:
                out[name][...] = 0.0
                continue
            np.multiply(total, inv_cb2, total)
            if name == "l":
                np.multiply(total, inv_cb2, total)
            np.sqrt(total, total)
            total *= _DEG


def _fill_covariance(cov, rr, vv, yy, zz):
    """(m, 6, 6) covariance block from the unique entries of its parts.

    rr, vv: position and velocity blocks; yy = X + X^T and zz = X - X^T (entries 01, 02, 12) of the
    position-velocity block X; all (6, m) in _SYM order, zz (3, m).
    """
    sym = {key: p for p, key in enumerate(_SYM)}
    anti = {(0, 1): 0, (0, 2): 1, (1, 2): 2}
    flat = cov.reshape(cov.shape[0], 36)
    for i in range(3):
        for j in range(3):
            e = sym[min(i, j), max(i, j)]
            flat[:, 6 * i + j] = rr[e]
            flat[:, 6 * (i + 3) + j + 3] = vv[e]
            x = 0.5 * yy[e]  # X_ij = (Y_ij + Z_ij) / 2
            if i != j:
                z = 0.5 * zz[anti[min(i, j), max(i, j)]]
                x = x + z if i < j else x - z
            flat[:, 6 * i + j + 3] = x
            flat[:, 6 * (j + 3) + i] = x


def _error_columns(table, res):
    """Standard deviations {parameter: array or None} and correlations {(k, l): array} of a table.

    A missing uncertainty column gives None (its terms are skipped), a missing correlation column no
    entry; ra_error and dec_error stay in mas. The radial velocity is uncorrelated with the astrometry.
    """
    def err(name, unit):
        return _column_values(table, name, unit) if name in table.colnames else None

    p_err = res.parameter_error
    if p_err is not None and not np.any(p_err):
        p_err = None
    sig = {"ra": err("ra_error", u.mas), "dec": err("dec_error", u.mas), "p": p_err,
           "pmra": err("pmra_error", MASYR), "pmdec": err("pmdec_error", MASYR),
           "rv": err("radial_velocity_error", KMS)}
    rho = {}
    for key, name in _CORRELATIONS.items():
        if res.parameter != "parallax" and 2 in key:
            continue  # a distance column is independent of the astrometric solution
        if name in table.colnames:
            rho[key] = _column_values(table, name, u.dimensionless_unscaled)
    return sig, rho


def _error_inputs(table, res, d):
    """Standard deviations (list, ra* and dec in rad; the float 0.0 for a missing column),
    correlations and d(distance)/d(parameter), for the Monte Carlo draws."""
    sig, rho = _error_columns(table, res)
    scale = {"ra": _MAS_TO_RAD, "dec": _MAS_TO_RAD}
    sig = [0.0 if sig[k] is None else (sig[k] * scale[k] if k in scale else sig[k])
           for k in ("ra", "dec", "p", "pmra", "pmdec", "rv")]
    dd_dp = -d * d if res.parameter == "parallax" else np.ones_like(d)
    return sig, rho, dd_dp


def _take(value, index):
    """value[index] for arrays, the value itself for the float 0.0."""
    return value[index] if _nonzero(value) else value


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
        E, L, D = {}, {}, []
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
    run_blocks(n, _BLOCK, _CorrelationCheck(rho, suspect), _scratch_for(n))
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
        invalid[finite] = np.linalg.eigvalsh(corr[finite])[:, 0] < -_EIGEN_TOLERANCE
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
    clipped = (lam < -_EIGEN_TOLERANCE).any(axis=1) & ~bad
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
    draws = _forward_all(sa_s.ravel(), ca_s.ravel(), uz.ravel(), cd_s.ravel(), d.ravel(), pmra.ravel(),
                         pmdec.ravel(), rv.ravel(), geo)
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
    counts = {"draws": int(np.count_nonzero(bad_draw)), "stars": int(np.count_nonzero(bad_draw.any(axis=1))),
              "clipped": n_clipped}
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
        idx = rows[start:start + block]
        chunk = {k: v[idx] for k, v in inp.items()}
        chunk["d"] = d[idx]
        chunk["p"] = res.parameter_value[idx]
        result, counts, frac = _montecarlo_block(
            chunk, [_take(s, idx) for s in sig_all], {k: v[idx] for k, v in rho_all.items()},
            n_samples, rng, res.parameter, geo, all_levels)
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
        columns[f"sigma_{name}"] = (0.5 * (hi - lo), unit,
                                    f"Monte Carlo uncertainty of {name}: half the central 68.27% width")
    columns["mc_excluded_fraction"] = (
        excluded, None, "fraction of Monte Carlo draws excluded for a non-positive parallax or distance")
    meta = {"mc_nonpositive_draws": totals["draws"], "mc_stars_with_nonpositive_draws": totals["stars"],
            "mc_clipped_correlations": totals["clipped"]}
    return columns, meta


# ====================================================================== table level
def _standard_table(stars):
    """The input as a checked table with standard column names (through mwkin.catalog).

    The standard columns may share the input's memory: nothing here writes to them, and the result
    table holds only arrays of our own.
    """
    from .catalog import _read_catalog  # imported here: catalog is a sibling with its own job

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
        if not (seed is None or isinstance(seed, np.random.Generator)
                or (isinstance(seed, numbers.Integral) and not isinstance(seed, bool) and seed >= 0)):
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


def to_galactocentric(stars, frame=None, *, errors="none", distance=None, n_samples=1000, seed=None,
                      percentiles=(16, 50, 84), return_covariance=False):
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
    reasons.update({name: (res.reason_code == i) if counts.get(name, 1) else np.zeros(n, dtype=bool)
                    for i, name in enumerate(res.reason_names, start=1)})
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
        covs = ({k: np.empty((n, 6, 6)) for k in ("cov_galactocentric", "cov_heliocentric")}
                if return_covariance else None)
        then = _Linear(sig, rho, res.parameter == "parallax", maps, inputs, columns, sigmas, covs)
    if montecarlo:
        trig = {k: np.empty(n) for k in ("sa", "ca", "sd", "cd")}
    # The Monte Carlo percentiles are taken in radians; otherwise the angles come out in degrees.
    run_blocks(n, _BLOCK, _Forward(inputs, geo, pos, vel, columns, degrees=not montecarlo, trig=trig, then=then),
               _scratch_for(n))
    columns["v_z"] = columns["vz"]
    columns["distance"] = d
    extra = {}
    if montecarlo:
        inp = dict(trig, pmra=pmra, pmdec=pmdec, rv=rv, nominal_phi=columns["phi"].copy(),
                   nominal_l=columns["l"].copy())
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
            missing = no_sky if name in ("l", "b") else (no_velocity if name in _VELOCITY_COLUMNS else no_position)
            if bad_corr is not None:
                missing = missing | bad_corr
            if missing.any():
                values[missing] = np.nan
            extra[f"sigma_{name}"] = (values, OUTPUT_COLUMNS[name][0], f"linear uncertainty (1 sigma) of {name}")
        for key, cov in (covs or {}).items():
            cov[no_position] = np.nan
            if bad_corr is not None:
                cov[bad_corr] = np.nan
            cov[no_velocity, 3:, :] = np.nan
            cov[no_velocity, :, 3:] = np.nan
            order = "x, y, z, vx, vy, vz" if key == "cov_galactocentric" else "X, Y, Z, U, V, W"
            extra[key] = (cov, None, f"linear 6x6 covariance of ({order}); kpc and km/s "
                                     "(kpc^2, kpc km/s, km^2/s^2)")
    elif montecarlo:
        extra.update(mc_columns)
        meta.update(mc_meta)
        meta.update(n_samples=int(n_samples), percentiles=list(levels),
                    seed=int(seed) if isinstance(seed, numbers.Integral) else None)

    cols, descriptions = {}, {}
    if "source_id" in table.colnames:
        cols["source_id"] = np.array(table["source_id"])
    for name, (unit, description) in OUTPUT_COLUMNS.items():
        cols[name], descriptions[name] = columns[name] << unit, description
    cols["flag"] = _flags(reasons, n)
    descriptions["flag"] = ("why a star lacks positions, velocities or (invalid_correlation) uncertainties "
                            "(comma-joined reasons); '' if nothing is missing")
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


def from_galactocentric(phase_space, frame=None):
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
                f"a phase-space array must have shape (N, 6) with columns x y z vx vy vz, got shape {arr.shape}")
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
                f"phase_space must be a table, a mapping or an (N, 6) array, got {type(phase_space).__name__}")
        missing = [k for k in _PHASE_SPACE if k not in names]
        if missing:
            raise KinematicsError(f"from_galactocentric needs columns x y z (kpc) and vx vy vz (km/s); "
                                  f"missing: {', '.join(missing)}")
        values = []
        for name, unit in _PHASE_SPACE.items():
            col = phase_space[name]
            values.append(to_value(col if isinstance(col, u.Quantity) else np.asarray(col, dtype=float), unit, name))
        if "source_id" in names:
            source_id = np.array(phase_space["source_id"])
    obs = observables_from_galactocentric(*values, frame=frame)
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
    for name, unit, values, _ in spec:
        cols[name] = values << unit
    result = QTable(cols, copy=False)
    for name, _, _, description in spec:
        result[name].info.description = description
    result.meta["frame"] = frame.to_dict()
    return result
