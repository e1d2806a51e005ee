"""Linear propagation of the full 6x6 observables covariance to every output column (fast path)."""

from __future__ import annotations

import astropy.units as u
import numpy as np

from ..coords import ICRS_TO_GALACTIC
from ..distances import _column_values
from ..units import KMS, MASYR
from ._shared import (
    _CARTESIAN,
    _CORRELATIONS,
    _DEG,
    _HELIO,
    _K,
    _MAS_TO_RAD,
    _ROTATION_CHUNK,
    _SYM,
)
from .transforms import _matmul


# ====================================================================== linear propagation
def _sigma_from_variance(variance, out):
    """sqrt(variance) into ``out``, with variances that rounded below zero taken as zero.

    A rotated covariance gives the variance of a component that is ~0 along the line of sight (Z for
    a star in the Galactic plane, y toward the Galactic centre) as the difference of terms of size
    sigma_distance^2, which can round to a tiny negative number. Its true value is below the
    rounding error of those terms, so zero is as accurate as the arithmetic allows; NaN would be a
    silent failure. NaN variances (missing inputs) stay NaN.
    """
    np.maximum(variance, 0.0, out=out)
    return np.sqrt(out, out)


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
    plus: list[tuple] = []
    minus: list[tuple] = []
    plain: list = []
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
    _turn_pair(Z[z[min(i, k), max(i, k)]], Z[z[min(j, k), max(j, k)]], c, s, tmp[0], t2[0], flip=(i < k) != (j < k))


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
            {2: a},
            {0: pa},
            {1: pd},
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
                _sigma_from_variance(rr[sym[axis + axis]], out[_CARTESIAN[i]])
                _sigma_from_variance(vv[sym[axis + axis]], out[_CARTESIAN[i + 3]])
                helio = axis.upper() * 2
                _sigma_from_variance(rr[sym[helio]], out[_HELIO[i]])
                _sigma_from_variance(vv[sym[helio]], out[_HELIO[i + 3]])
            self._cylindrical(
                [rr[sym[k]] for k in ("xx", "xy", "yy")],
                [vv[sym[k]] for k in ("xx", "xy", "yy")],
                [yy[ysym[k]] for k in ("xx", "xy", "yy")],
                zz[zanti["xy"]],
                sl,
                bv["inv_R"],
                ws,
                m,
                tmp,
                out,
            )
            self._galactic(sa, ca, sd, cd, bv["cos2_b"], s_a, s_d, rho.get((0, 1)), ws, m, tmp, out)
        if a is None:
            out["distance"][...] = 0.0
        else:
            np.abs(a, out["distance"])
        if self.covs is not None:  # the maps then give every entry, Galactocentric first
            for key, f in (("cov_galactocentric", 0), ("cov_heliocentric", 1)):
                _fill_covariance(
                    self.covs[key][sl],
                    rr[6 * f : 6 * f + 6],
                    vv[6 * f : 6 * f + 6],
                    yy[6 * f : 6 * f + 6],
                    zz[3 * f : 3 * f + 3],
                )

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
                ((k, hi),) = H[i].items()
                ((l, hj),) = H[j].items()
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
        _sigma_from_variance(out["R"], out["R"])
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
            _sigma_from_variance(out[name], out[name])
        _sigma_from_variance(var_p1, out["phi"])
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
            _sigma_from_variance(total, total)
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
    sig = {
        "ra": err("ra_error", u.mas),
        "dec": err("dec_error", u.mas),
        "p": p_err,
        "pmra": err("pmra_error", MASYR),
        "pmdec": err("pmdec_error", MASYR),
        "rv": err("radial_velocity_error", KMS),
    }
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
    sig = [
        0.0 if sig[k] is None else (sig[k] * scale[k] if k in scale else sig[k])
        for k in ("ra", "dec", "p", "pmra", "pmdec", "rv")
    ]
    dd_dp = -d * d if res.parameter == "parallax" else np.ones_like(d)
    return sig, rho, dd_dp


def _take(value, index):
    """value[index] for arrays, the value itself for the float 0.0."""
    return value[index] if _nonzero(value) else value
