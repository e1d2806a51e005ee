"""The :class:`OrbitSet` of integrated orbits, and the metadata every orbit result carries."""

from __future__ import annotations

from dataclasses import dataclass, field

import astropy.units as u
import numpy as np
from astropy.table import QTable

from ..frames import SolarFrame
from ..potentials import Potential, PotentialError, _galpy
from ..units import KMS
from .flags import PARAMETERS, OrbitError
from .inputs import _cartesian


# --------------------------------------------------------------------------------------- OrbitSet
def _parameters_from_tracks(track):
    """rperi, rapo, zmax, eccentricity from (N, nt, 6) cylindrical tracks."""
    r = np.hypot(track[..., 0], track[..., 2])
    rperi = r.min(axis=1)
    rapo = r.max(axis=1)
    zmax = np.abs(track[..., 2]).max(axis=1)
    with np.errstate(invalid="ignore", divide="ignore"):
        ecc = (rapo - rperi) / (rapo + rperi)
    return rperi, rapo, zmax, ecc


def _flag_strings(flags):
    return np.array([";".join(f) for f in flags], dtype=object).astype(str)


@dataclass(frozen=True, eq=False)
class OrbitSet:
    """Integrated orbits of N stars on a common time grid.

    Attributes
    ----------
    t : Quantity, shape (nt,)
        Times, Gyr (t[0] = 0; negative for backward integration).
    rperi, rapo, zmax, eccentricity, energy, Lz : Quantity, shape (N,)
        Orbital parameters from the tracks (see the module notes for definitions and zero points).
    flags : numpy.ndarray of str, shape (N,)
        "" or ";"-joined reasons (:data:`FLAGS`).
    frame : SolarFrame
    potential : Potential
    meta : dict
        Integrator, method, energy zero point and the frame/potential reconciliation numbers
        (``vc_at_sun_kms``, ``v_phi_sun_kms``, ``v_phi_sun_minus_vc_kms``, ...).
    ids : numpy.ndarray or None
        ``source_id`` of the input rows, when given.

    Notes
    -----
    Track arrays (``x``, ``R``, ``v_phi``...) have shape (N, nt) and are computed from the stored
    cylindrical tracks on access.
    """

    t: u.Quantity
    cylindrical: np.ndarray = field(repr=False)  # (N, nt, 6): R, phi, z, v_R, v_phi, v_z (kpc, rad, km/s)
    rperi: u.Quantity = field(repr=False)
    rapo: u.Quantity = field(repr=False)
    zmax: u.Quantity = field(repr=False)
    eccentricity: u.Quantity = field(repr=False)
    energy: u.Quantity = field(repr=False)
    Lz: u.Quantity = field(repr=False)
    flags: np.ndarray = field(repr=False)
    frame: SolarFrame = field(repr=False)
    potential: Potential = field(repr=False)
    meta: dict = field(default_factory=dict, repr=False)
    ids: np.ndarray | None = field(default=None, repr=False)

    def __len__(self):
        return self.cylindrical.shape[0]

    # --------------------------------------------------------------- tracks
    @property
    def R(self):
        return self.cylindrical[..., 0] * u.kpc

    @property
    def phi(self):
        """Azimuth atan2(y, -x), rad, increasing with rotation, wrapped to [-pi, pi)."""
        return self.cylindrical[..., 1] * u.rad

    @property
    def z(self):
        return self.cylindrical[..., 2] * u.kpc

    @property
    def v_R(self):
        return self.cylindrical[..., 3] * KMS

    @property
    def v_phi(self):
        """Azimuthal velocity, positive in the sense of Galactic rotation, km/s."""
        return self.cylindrical[..., 4] * KMS

    @property
    def v_z(self):
        return self.cylindrical[..., 5] * KMS

    def _cart(self):
        c = self.cylindrical
        return _cartesian(c[..., 0], c[..., 1], c[..., 2], c[..., 3], c[..., 4], c[..., 5])

    @property
    def x(self):
        c = self.cylindrical
        return -c[..., 0] * np.cos(c[..., 1]) * u.kpc

    @property
    def y(self):
        c = self.cylindrical
        return c[..., 0] * np.sin(c[..., 1]) * u.kpc

    @property
    def vx(self):
        return self._cart()[3] * KMS

    @property
    def vy(self):
        return self._cart()[4] * KMS

    @property
    def vz(self):
        return self.v_z

    def track(self, i):
        """The orbit of star ``i`` as a QTable: t, x, y, z, vx, vy, vz, R, phi, v_R, v_phi, v_z."""
        n = len(self)
        if not -n <= i < n:
            raise IndexError(f"star index {i} out of range for {n} orbits")
        c = self.cylindrical[i]
        x, y, z, vx, vy, vz = _cartesian(*(c[:, k] for k in range(6)))
        table = QTable(meta={"star": int(i) % n, "flag": str(self.flags[i]), **self._provenance()})
        columns = [
            ("t", self.t, "time since the observation, Gyr"),
            ("x", x * u.kpc, "Galactocentric x (astropy axes; Sun near -R0)"),
            ("y", y * u.kpc, "Galactocentric y (direction of rotation at the Sun)"),
            ("z", z * u.kpc, "Galactocentric z (toward the north Galactic pole)"),
            ("vx", vx * KMS, "Galactocentric vx"),
            ("vy", vy * KMS, "Galactocentric vy"),
            ("vz", vz * KMS, "Galactocentric vz"),
            ("R", c[:, 0] * u.kpc, "cylindrical radius"),
            ("phi", c[:, 1] * u.rad, "azimuth atan2(y, -x), increasing with rotation"),
            ("v_R", c[:, 3] * KMS, "radial velocity, outward positive"),
            ("v_phi", c[:, 4] * KMS, "azimuthal velocity, positive in the sense of Galactic rotation"),
            ("v_z", c[:, 5] * KMS, "vertical velocity"),
        ]
        for name, value, description in columns:
            table[name] = value
            table[name].info.description = description
        return table

    # --------------------------------------------------------------- summaries
    def _provenance(self):
        return {
            "frame": self.frame.describe(),
            "potential": self.potential.describe(),
            "method": self.meta.get("method"),
            "integrator": self.meta.get("integrator"),
        }

    def table(self):
        """One row per star: orbital parameters and flag (QTable; meta carries the provenance)."""
        table = QTable(meta={**self._provenance(), **{k: v for k, v in self.meta.items() if np.isscalar(v)}})
        if self.ids is not None:
            table["source_id"] = self.ids
        for name, (_unit, description) in PARAMETERS.items():
            table[name] = getattr(self, name)
            table[name].info.description = description
        table["flag"] = self.flags
        table["method"] = np.full(len(self), "integrate")
        return table

    def to_dict(self, include_tracks=True):
        """JSON-able dict (lists of floats, NaN kept as float NaN) with the frame and potential.

        Parameters
        ----------
        include_tracks : bool
            Include the (N, nt, 6) cylindrical tracks (needed by :meth:`from_dict`).
        """
        try:
            pot = self.potential.to_dict()
        except PotentialError:
            pot = {"description": self.potential.describe()}
        out = {
            "t_gyr": self.t.to_value(u.Gyr).tolist(),
            "parameters": {name: getattr(self, name).value.tolist() for name in PARAMETERS},
            "flags": [str(f) for f in self.flags],
            "frame": self.frame.to_dict(),
            "potential": pot,
            "meta": _jsonable(self.meta),
        }
        if self.ids is not None:
            out["ids"] = np.asarray(self.ids).tolist()
        if include_tracks:
            out["cylindrical"] = self.cylindrical.tolist()
        return out

    @classmethod
    def from_dict(cls, data):
        """Inverse of :meth:`to_dict` (with tracks)."""
        if "cylindrical" not in data:
            raise OrbitError("from_dict needs the tracks: export with to_dict(include_tracks=True)")
        params = {name: np.asarray(data["parameters"][name], dtype=float) * PARAMETERS[name][0] for name in PARAMETERS}
        return cls(
            t=np.asarray(data["t_gyr"], dtype=float) * u.Gyr,
            cylindrical=np.asarray(data["cylindrical"], dtype=float),
            **params,
            flags=np.asarray(data["flags"], dtype=str),
            frame=SolarFrame.from_dict(data["frame"]),
            potential=Potential.from_dict(data["potential"]),
            meta=dict(data.get("meta", {})),
            ids=np.asarray(data["ids"]) if "ids" in data else None,
        )


def _jsonable(obj):
    if isinstance(obj, dict):
        return {k: _jsonable(v) for k, v in obj.items()}
    if isinstance(obj, (list, tuple)):
        return [_jsonable(v) for v in obj]
    if isinstance(obj, np.generic):
        return obj.item()
    return obj


def _base_meta(pot, frame, ps):
    value, how = pot.model.potential_at_infinity_kms2()
    meta = {
        "input": ps.source,
        "energy_zero_point": pot.describe_zero_point(),
        "potential_at_infinity_kms2": value,
        "n_stars": int(len(ps.flags)),
        "n_flagged": int(np.sum(~ps.usable)),
    }
    meta.update(pot.reconcile(frame))
    return meta


def _energy_lz(pot, cyl):
    energy = _galpy.energy_kms2(pot.model, cyl)
    return energy, cyl[:, 0] * cyl[:, 4]
