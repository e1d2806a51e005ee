"""The :class:`Potential` value: what a mass model answers in physical units (see :mod:`mwkin.potentials`)."""

from __future__ import annotations

import math
import warnings
from dataclasses import dataclass

import astropy.units as u
import numpy as np
from astropy.table import QTable

from .._validate import (
    check_keys,
    is_plain,
    real_number,
    require_mapping,
    text,
    warn_implausible,
)
from ..units import KMS, to_value
from . import _galpy
from .presets import (
    _DEFAULTS,
    _FREQ,
    _KMS2,
    _PRESETS,
    MAX_PLAUSIBLE_VC_KMS,
    NotSerialisableError,
    PotentialError,
    UnknownPotentialError,
    _column_name,
    _component_params,
)


@dataclass(frozen=True)
class OortConstants:
    """Oort constants and related frequencies implied by a rotation curve at radius ``R``.

    All are Quantities (km/s/kpc, except ``vc`` in km/s and ``R`` in kpc), scalars or arrays like ``R``.
    A = (vc/R - dvc/dR) / 2, B = -(vc/R + dvc/dR) / 2, Omega = A - B = vc / R, kappa = sqrt(-4 B (A - B)).
    """

    R: u.Quantity
    vc: u.Quantity
    dvc_dR: u.Quantity
    A: u.Quantity
    B: u.Quantity
    Omega: u.Quantity
    kappa: u.Quantity

    def to_dict(self):
        """JSON-able dict with units in the keys."""

        def plain(q):
            v = q.value
            return v.tolist() if np.ndim(v) else float(v)

        return {
            "R_kpc": plain(self.R),
            "vc_kms": plain(self.vc),
            "dvc_dR_kms_per_kpc": plain(self.dvc_dR),
            "A_kms_per_kpc": plain(self.A),
            "B_kms_per_kpc": plain(self.B),
            "Omega_kms_per_kpc": plain(self.Omega),
            "kappa_kms_per_kpc": plain(self.kappa),
        }


class Potential:
    """A Galactic mass model. Build with :meth:`preset`, :meth:`three_component` or :meth:`from_galpy`.

    Attributes
    ----------
    name : str
    citation : str
        The publication the model comes from ("" for user-built models).
    component_names : tuple of str
        Labels of the summed components (bulge, disc, halo, ...).
    kind : str
        "preset", "three_component" or "galpy".

    Notes
    -----
    Immutable: :meth:`scaled_to` returns a new potential. Lengths are in kpc, velocities in km/s;
    methods accept Quantities or plain numbers in those units and return Quantities.
    """

    def __init__(self, _model, *, name, citation, kind, component_names, spec=None, scale=None):
        self._model = _model
        self.name = name
        self.citation = citation
        self.kind = kind
        self.component_names = tuple(component_names)
        self._spec = spec  # what to_dict needs to rebuild the unscaled model
        self._scale = scale  # {"vc_kms": ..., "R_kpc": ..., "factor": ...} after scaled_to

    # ------------------------------------------------------------------ construction
    @classmethod
    def preset(cls, name):
        """A published Milky Way model by name; :meth:`presets` lists them.

        The models come from ``galpy.potential.mwpotentials`` in the units galpy defines them with.
        Expensive ones (McMillan17, Cautun20 and DehnenBinney98I take seconds to set up) are built
        once per process, on first use, and shared.

        Raises
        ------
        UnknownPotentialError
            With the list of known names.
        """
        if name not in _PRESETS:
            raise UnknownPotentialError(f"unknown potential preset {name!r}; known: {', '.join(_PRESETS)}")
        model, labels = _galpy.preset_model(name)
        return cls(
            model,
            name=name,
            citation=_PRESETS[name].citation,
            kind="preset",
            component_names=labels,
            spec={"kind": "preset", "name": name},
        )

    @staticmethod
    def presets():
        """Dictionary of preset name -> :class:`PresetInfo` (description and citation)."""
        return dict(_PRESETS)

    @classmethod
    def three_component(cls, bulge=None, disc=None, halo=None, name="bulge + disc + halo"):
        """Bulge + Miyamoto-Nagai disc + NFW halo from physical parameters.

        Parameters
        ----------
        bulge : dict, optional
            ``{"model": "power_law_cutoff", "mass": Msun, "alpha": ..., "cutoff": kpc}`` (density
            proportional to r^-alpha exp(-(r/cutoff)^2); mass is the total mass), or
            ``{"model": "hernquist", "mass": Msun, "scale": kpc}`` (total mass and scale radius).
        disc : dict, optional
            ``{"mass": Msun, "a": kpc, "b": kpc}``: Miyamoto-Nagai mass, scale length, scale height.
        halo : dict, optional
            ``{"mass": Msun, "scale": kpc}``: NFW scale radius and mass scale M_s = 4 pi rho_0 a^3
            (the mass inside r is M_s [ln(1 + r/a) - (r/a)/(1 + r/a)], so M_s equals the mass inside about 5.3 a).
        name : str, optional

        Returns
        -------
        Potential

        Raises
        ------
        PotentialError
            For an unknown parameter, a component that is not a dict, a value that is not a real
            number (strings and booleans included) or not finite and positive.

        Notes
        -----
        Missing parameters take the defaults, which are MWPotential2014's components (Bovy 2015) in
        physical units: bulge 4.501e9 Msun with alpha = 1.8 and cut-off 1.9 kpc, disc 6.819e10 Msun with
        a = 3 kpc, b = 0.28 kpc, halo M_s = 4.368e11 Msun with a = 16 kpc; vc(8 kpc) = 220 km/s.
        Values may be Quantities.

        References
        ----------
        Miyamoto & Nagai 1975, PASJ 27, 533; Navarro, Frenk & White 1997, ApJ 490, 493;
        Hernquist 1990, ApJ 356, 359; Bovy 2015, ApJS 216, 29.
        """
        return cls._three_component({"bulge": bulge, "disc": disc, "halo": halo}, name, _DEFAULTS)

    @classmethod
    def _three_component(cls, given, name, defaults):
        """three_component with the defaults to use per component (None entries: all required)."""
        name = text(name, "name", PotentialError)
        params = {
            label: _component_params(label, given[label], defaults.get(label), label)
            for label in ("bulge", "disc", "halo")
        }
        model = _galpy.three_component_model(**params)
        return cls(
            model,
            name=name,
            citation="",
            kind="three_component",
            component_names=("bulge", "disc", "halo"),
            spec={"kind": "three_component", "name": name, **params},
        )

    @classmethod
    def from_galpy(cls, pot, ro=None, vo=None, name=None, component_names=None, citation=""):
        """Wrap any 3D galpy potential (an instance, a list, or a sum).

        Parameters
        ----------
        pot : galpy potential
        ro, vo : float or Quantity, optional
            galpy's natural length (kpc) and velocity (km/s) units for this potential. Default: the
            potential's own (galpy's configured 8 kpc and 220 km/s unless it was built with others).
        name, component_names, citation : optional
            Labels; component names default to the galpy class names.

        Raises
        ------
        PotentialError
            If ``pot`` is not a galpy potential or ro/vo contradict the ones it was built with.

        Notes
        -----
        Such a potential cannot be written by :meth:`to_dict` (there is no JSON form of an arbitrary
        galpy object); rebuild it in code instead.
        """
        ro = None if ro is None else to_value(ro, "kpc", "ro")
        vo = None if vo is None else to_value(vo, KMS, "vo")
        try:
            model = _galpy.model_from_galpy(pot, ro=ro, vo=vo)
        except (TypeError, ValueError) as err:
            raise PotentialError(str(err)) from None
        names = component_names or [type(c).__name__ for c in model.components]
        if len(names) != len(model.components):
            raise PotentialError(f"{len(names)} component names for {len(model.components)} components")
        return cls(
            model,
            name=name or " + ".join(type(c).__name__ for c in model.components),
            citation=citation,
            kind="galpy",
            component_names=names,
        )

    def scaled_to(self, vc, R=8.0):
        """The same model with all masses scaled so that the circular velocity at ``R`` is ``vc``.

        Parameters
        ----------
        vc : float or Quantity
            Target circular velocity, km/s (> 0).
        R : float or Quantity, optional
            Mid-plane radius, kpc (default 8).

        Returns
        -------
        Potential
            vc(R') scales by the same factor at every radius; orbital times scale inversely.

        Raises
        ------
        PotentialError
            If vc or R is not a positive, finite real number.

        Warns
        -----
        ImplausibleValueWarning
            For a plain-number ``vc`` above 1000 km/s (probably m/s).
        """
        vc_given = vc
        vc = real_number(vc, "vc", "km/s", PotentialError, finite=False)
        R = real_number(R, "R", "kpc", PotentialError, finite=False)
        if not (vc > 0 and R > 0 and math.isfinite(vc * R)):
            raise PotentialError(f"scaled_to needs a positive vc (km/s) and R (kpc), got vc={vc}, R={R}")
        if is_plain(vc_given) and vc > MAX_PLAUSIBLE_VC_KMS:
            warn_implausible(
                f"vc = {vc:g} km/s (plain number, taken in km/s) is implausibly large for a "
                f"circular velocity (expected about 200-260 km/s); was it given in m/s?"
            )
        base = self._unscaled_model()
        now2 = float(base.vc2_kms2(R))
        if not now2 > 0:
            raise PotentialError(f"the circular velocity at R = {R} kpc is not real (vc^2 = {now2} km^2/s^2)")
        factor = vc**2 / now2
        return Potential(
            base.scaled(factor),
            name=self.name,
            citation=self.citation,
            kind=self.kind,
            component_names=self.component_names,
            spec=self._spec,
            scale={"vc_kms": vc, "R_kpc": R, "factor": factor},
        )

    @property
    def model(self):
        """The galpy adapter of this potential (:class:`mwkin.potentials._galpy.GalpyModel`).

        The interface between :mod:`mwkin.potentials` and :mod:`mwkin.orbits` (which integrates in
        it); users ask the :class:`Potential` itself.
        """
        return self._model

    def _unscaled_model(self):
        if self._scale is None:
            return self._model
        return self._model.scaled(1.0 / self._scale["factor"])

    # ------------------------------------------------------------------ serialisation
    @property
    def is_serialisable(self):
        """Whether :meth:`to_dict` works (presets and three-component models)."""
        return self._spec is not None

    def to_dict(self):
        """JSON-able description that :meth:`from_dict` rebuilds.

        Raises
        ------
        NotSerialisableError
            For potentials made with :meth:`from_galpy`.
        """
        if self._spec is None:
            raise NotSerialisableError(
                f"potential {self.name!r} was built from a galpy object and has no JSON form; "
                "rebuild it in code, or use a preset or Potential.three_component"
            )
        out = {k: (dict(v) if isinstance(v, dict) else v) for k, v in self._spec.items()}
        if self._scale is not None:
            out["scaled_to"] = {"vc_kms": self._scale["vc_kms"], "R_kpc": self._scale["R_kpc"]}
        return out

    @classmethod
    def from_dict(cls, data):
        """Inverse of :meth:`to_dict`.

        Parameters
        ----------
        data : dict
            ``{"kind": "preset", "name": ...}`` or ``{"kind": "three_component", "name": ..., "bulge":
            {...}, "disc": {...}, "halo": {...}}`` with every parameter of every component (the bulge
            with its ``model``), and optionally ``"scaled_to": {"vc_kms": ..., "R_kpc": ...}``.

        Raises
        ------
        PotentialError
            For a ``data`` that is not a mapping, an unknown kind, unknown or missing keys, or a value
            of the wrong type, each named. Unlike :meth:`three_component` there are no defaults: a
            missing physical parameter is an error naming it.
        """
        data = require_mapping(data, "potential", PotentialError)
        if "kind" not in data:
            raise PotentialError("potential: missing required key(s) 'kind' ('preset' or 'three_component')")
        kind = data.pop("kind")
        scale = data.pop("scaled_to", None)
        if kind == "preset":
            check_keys(data, "preset", PotentialError, required=("name",))
            pot = cls.preset(text(data["name"], "name", PotentialError))
        elif kind == "three_component":
            check_keys(data, "three_component", PotentialError, required=("bulge", "disc", "halo"), optional=("name",))
            name = data.pop("name", "bulge + disc + halo")
            pot = cls._three_component(data, name, {})
        else:
            raise PotentialError(f"unknown potential kind {kind!r}; expected 'preset' or 'three_component'")
        if scale is not None:
            scale = require_mapping(scale, "scaled_to", PotentialError)
            check_keys(scale, "scaled_to", PotentialError, required={"vc_kms": "km/s", "R_kpc": "kpc"})
            pot = pot.scaled_to(
                real_number(scale["vc_kms"], "scaled_to.vc_kms", "km/s", PotentialError),
                real_number(scale["R_kpc"], "scaled_to.R_kpc", "kpc", PotentialError),
            )
        return pot

    def describe(self):
        """One-line provenance: name, citation, scaling and galpy unit system."""
        parts = [self.name]
        if self.citation:
            parts.append(f"({self.citation})")
        if self.kind == "three_component":
            b, d, h = (self._spec[k] for k in ("bulge", "disc", "halo"))
            bulge = f"{b['model']} bulge {b['mass']:.4g} Msun" + (
                f", cut-off {b['cutoff']:g} kpc, alpha {b['alpha']:g}"
                if b["model"] == "power_law_cutoff"
                else f", a {b['scale']:g} kpc"
            )
            parts.append(
                f"[{bulge}; MN disc {d['mass']:.4g} Msun, a {d['a']:g}, b {d['b']:g} kpc; "
                f"NFW halo M_s {h['mass']:.4g} Msun, a {h['scale']:g} kpc]"
            )
        if self._scale is not None:
            parts.append(f"scaled to vc({self._scale['R_kpc']:g} kpc) = {self._scale['vc_kms']:g} km/s")
        parts.append(f"galpy units ro={self._model.ro:g} kpc, vo={self._model.vo:.6g} km/s")
        return " ".join(parts)

    def __repr__(self):
        return f"Potential({self.describe()})"

    # ------------------------------------------------------------------ derived quantities
    @property
    def units(self):
        """galpy's natural units for this model: {"ro_kpc": ..., "vo_kms": ...} (information only)."""
        return {"ro_kpc": self._model.ro, "vo_kms": self._model.vo}

    @property
    def is_axisymmetric(self):
        return self._model.is_axisymmetric

    @staticmethod
    def _radius(R, name="R"):
        R = to_value(R, "kpc", name)
        if np.any(~np.isfinite(R)) or np.any(np.asarray(R) <= 0):
            bad = np.atleast_1d(R)[~(np.isfinite(np.atleast_1d(R)) & (np.atleast_1d(R) > 0))]
            raise PotentialError(f"{name} must be positive and finite (kpc), got {bad[:5].tolist()}")
        return R

    def vcirc(self, R):
        """Circular velocity in the mid-plane at radius R.

        Parameters
        ----------
        R : float, array or Quantity
            Cylindrical radius, kpc.

        Returns
        -------
        Quantity
            km/s, sqrt(R dPhi/dR) at z = 0 (NaN where the net force points outward).
        """
        R = self._radius(R)
        vc2 = self._model.vc2_kms2(R)
        with np.errstate(invalid="ignore"):
            return np.sqrt(np.where(vc2 >= 0, vc2, np.nan)) * KMS

    def rotation_curve(self, R):
        """Circular velocity, total and per component.

        Parameters
        ----------
        R : array or Quantity
            Mid-plane radii, kpc.

        Returns
        -------
        QTable
            Columns ``R`` (kpc), ``vc`` and one ``vc_<component>`` per component (km/s); the squares of
            the components add up to the square of the total. A component whose own force points
            outward at some R (possible for a disc with a central hole) gets NaN there.
        """
        R = np.atleast_1d(self._radius(R))
        table = QTable(meta={"potential": self.describe()})
        table["R"] = R * u.kpc
        table["R"].info.description = "Galactocentric cylindrical radius in the mid-plane"
        table["vc"] = self.vcirc(R)
        table["vc"].info.description = "circular velocity of the whole model"
        seen: dict[str, int] = {}
        for comp, label in zip(self._model.components, self.component_names):
            col = _column_name(label)
            seen[col] = seen.get(col, 0) + 1
            if seen[col] > 1:
                col = f"{col}_{seen[col]}"
            vc2 = self._model.vc2_kms2(R, components=[comp])
            with np.errstate(invalid="ignore"):
                table[col] = np.sqrt(np.where(vc2 >= 0, vc2, np.nan)) * KMS
            table[col].info.description = f"circular velocity of the {label} alone"
        return table

    def oort_constants(self, R=8.0, *, R0=None):
        """Oort constants A, B and Omega, kappa, dvc/dR implied by the rotation curve at radius R.

        Parameters
        ----------
        R : float, array or Quantity
            Mid-plane (cylindrical) radius, kpc. For the Sun this is the in-plane distance
            :attr:`SolarFrame.inplane_radius <mwkin.SolarFrame.inplane_radius>`, not the Sun-centre
            distance R0 (see :meth:`circular_velocity_at_sun`).
        R0 : float, array or Quantity, optional
            Deprecated name of ``R`` (it is the name mwkin uses for the Sun-centre distance, which this
            is not); still accepted, with a DeprecationWarning.

        Returns
        -------
        OortConstants

        Notes
        -----
        A = (vc/R - dvc/dR)/2, B = -(vc/R + dvc/dR)/2, Omega = vc/R = A - B; kappa is galpy's epicycle
        frequency, which equals sqrt(-4 B (A - B)) for a circular orbit.

        References
        ----------
        Binney & Tremaine 2008, Galactic Dynamics, 2nd ed., Sect. 3.2.3.
        """
        if R0 is not None:
            warnings.warn(
                "Potential.oort_constants(R0=...) is deprecated: the argument is the in-plane radius R "
                "(R0 is the Sun-centre distance elsewhere in mwkin); use oort_constants(R=...)",
                DeprecationWarning,
                stacklevel=2,
            )
            R = R0
        R = self._radius(R, "R")
        vc = self.vcirc(R).value
        dvc = self._model.dvcdR(R)
        dvc = float(dvc) if np.ndim(R) == 0 else dvc
        A = 0.5 * (vc / R - dvc)
        B = -0.5 * (vc / R + dvc)
        kappa = self._model.epicycle_frequency(R)
        kappa = float(kappa) if np.ndim(R) == 0 else kappa
        return OortConstants(
            R=R * u.kpc,
            vc=vc * KMS,
            dvc_dR=dvc * _FREQ,
            A=A * _FREQ,
            B=B * _FREQ,
            Omega=(vc / R) * _FREQ,
            kappa=kappa * _FREQ,
        )

    def epicycle_frequency(self, R):
        """Radial epicycle frequency kappa at mid-plane radius R (kpc), km/s/kpc."""
        R = self._radius(R)
        out = self._model.epicycle_frequency(R)
        return (float(out) if np.ndim(R) == 0 else out) * _FREQ

    def vertical_frequency(self, R):
        """Vertical oscillation frequency nu = sqrt(d^2 Phi / dz^2 at z = 0) at radius R (kpc), km/s/kpc."""
        R = self._radius(R)
        out = self._model.vertical_frequency(R)
        return (float(out) if np.ndim(R) == 0 else out) * _FREQ

    def potential(self, R, z=0.0):
        """Potential at (R, z), km^2/s^2, in galpy's zero point for the model (see :meth:`potential_at_infinity`)."""
        R = to_value(R, "kpc", "R")
        z = to_value(z, "kpc", "z")
        out = self._model.potential_kms2(R, z)
        return (float(out) if np.ndim(out) == 0 else out) * _KMS2

    def potential_at_infinity(self):
        """The model's potential at infinite radius, km^2/s^2 (the reference for escape speeds).

        Zero for most components; MWPotential2014's bulge gives +65,094 km^2/s^2. When galpy's formulas
        give NaN at infinity, the value at r = 10^6 natural length units is used (see ``describe_zero_point``).
        """
        return self._model.potential_at_infinity_kms2()[0] * _KMS2

    def describe_zero_point(self):
        """Text stating the energy zero point used for this model."""
        value, how = self._model.potential_at_infinity_kms2()
        return (
            f"galpy's potential zero point for {self.name}; Phi(infinity) = {value:.6g} km^2/s^2 "
            f"(evaluated at {how}); bound orbits have E < Phi(infinity)"
        )

    def escape_speed(self, R, z=0.0, r_max=None):
        """Speed needed to escape from (R, z).

        Parameters
        ----------
        R, z : float, array or Quantity
            Position, kpc.
        r_max : float or Quantity, optional
            Spherical radius (kpc) to escape to. Default None: infinity.

        Returns
        -------
        Quantity
            km/s, sqrt(2 (Phi_ref - Phi(R, z))) with Phi_ref the potential at infinity (None) or at
            r_max in the mid-plane.

        Notes
        -----
        The NFW halos of these models have infinite mass but a potential that still tends to a
        finite value at infinity, so the escape speed to infinity is finite. It is larger than the
        speed needed to reach a given outer radius, which is what many observational estimates quote
        (they often use r_max of a few hundred kpc); pass ``r_max`` for that definition.
        """
        R = to_value(R, "kpc", "R")
        z = to_value(z, "kpc", "z")
        if r_max is None:
            ref, _ = self._model.potential_at_infinity_kms2()
        else:
            r_max = float(self._radius(r_max, "r_max"))
            ref = float(self._model.potential_kms2(r_max, 0.0))
        diff = 2.0 * (ref - self._model.potential_kms2(R, z))
        with np.errstate(invalid="ignore"):
            out = np.sqrt(np.where(diff >= 0, diff, np.nan))
        return (float(out) if np.ndim(out) == 0 else out) * KMS

    def circular_velocity_at_sun(self, frame):
        """vc of this model at the Sun's in-plane radius sqrt(R0^2 - z_sun^2) of a :class:`SolarFrame`."""
        R_sun = sun_inplane_radius(frame)
        return self.vcirc(R_sun)

    def reconcile(self, frame):
        """How this model's circular velocity at the Sun compares with a frame's solar motion.

        Returns
        -------
        dict
            ``R_sun_inplane_kpc``, ``vc_at_sun_kms`` (this model), ``v_phi_sun_kms`` (the frame's
            azimuthal solar velocity, v_sun[1]), ``v_phi_sun_minus_vc_kms`` (the solar motion relative to
            this model's circular velocity that the pair implies; measured values are near
            12 km/s, Schoenrich, Binney & Dehnen 2010, MNRAS 403, 1829), and ``potential_ro_kpc`` /
            ``potential_vo_kms``: the unit system of the model (for presets, the R0 and vc it was set up with).
        """
        R_sun = sun_inplane_radius(frame)
        vc = float(self.vcirc(R_sun).value)
        v_phi = float(frame.v_sun[1])
        return {
            "R_sun_inplane_kpc": R_sun,
            "vc_at_sun_kms": vc,
            "v_phi_sun_kms": v_phi,
            "v_phi_sun_minus_vc_kms": v_phi - vc,
            "potential_ro_kpc": self._model.ro,
            "potential_vo_kms": self._model.vo,
        }


def sun_inplane_radius(frame):
    """The Sun's cylindrical Galactocentric radius, kpc (:attr:`SolarFrame.inplane_radius`)."""
    return frame.inplane_radius
