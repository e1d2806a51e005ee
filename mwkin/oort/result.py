"""The result of an Oort-constant fit: :class:`OortFit`, with its table, text summary and JSON form.

Made by :func:`mwkin.oort.fit_oort`; see that module for the conventions (units, signs, the
first-order equations).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np
from astropy.table import QTable, Table

from ..frames import SolarFrame
from ..units import KMS, MASYR
from .model import DERIVED, PARAMETERS, UNITS, unit_text
from .sample import STATUS

__all__ = ["OortFit"]


def _finite_or_none(x):
    x = float(x)
    return x if math.isfinite(x) else None


def _from_none(x):
    return float("nan") if x is None else float(x)


@dataclass(eq=False)
class OortFit:
    """Result of :func:`mwkin.oort.fit_oort`: the local velocity field, its errors and how it was made.

    Attributes
    ----------
    A, B, C, K : float
        Oort constants, km/s/kpc (NaN when the data carry no information on them).
    solar_motion : tuple of float
        (U, V, W), km/s: the Sun's motion relative to the local mean flow of the stars (U toward the
        Galactic centre, V toward rotation, W toward the north Galactic pole). Also ``fit.U`` etc.
    errors : dict
        Parameter name -> 1-sigma error from the inverse Fisher matrix (NaN without information).
    covariance : numpy.ndarray, shape (7, 7)
        Covariance of (A, B, C, K, U, V, W); for a parameter without information its row and column
        are NaN and its variance infinite.
    constrained : dict
        Parameter name -> True if the data determine it: it has information and its error is below
        :data:`mwkin.oort.UNCONSTRAINED_ERROR`.
    sigma_intrinsic, sigma_intrinsic_error : tuple of float
        Fitted velocity dispersion (sigma_U, sigma_V, sigma_W) about the mean flow and its error, km/s.
    dispersion : str
        "ellipsoid" or "isotropic".
    chi2, dof : float, int
        Sum of squared normalised residuals and degrees of freedom (data minus fitted parameters).
    n_used, n_data : int
        Stars used and scalar data used (2 per proper motion, 1 per radial velocity).
    n_dropped : dict
        Reason -> number of input rows left out (names of :data:`mwkin.oort.sample.STATUS`);
        ``distance_reasons`` breaks ``no_distance`` down by the distance choice's own reasons, and
        ``n_rejected`` counts the outliers of sigma clipping (also ``n_dropped["outlier"]``).
    derived : dict
        "Omega0", "dV/dR", "V0", "kappa" -> (value, error) with first-order propagated errors; NaN
        unless both A and B are constrained. Also ``fit.Omega0``, ``fit.dVdR``, ``fit.V0``, ``fit.kappa``.
    frame : SolarFrame
        The frame used (R0 for V0, in-plane R0 for the potential comparison).
    distance_choice, distance_description : dict, str
        The distance choice's ``to_dict()`` and its one-line description.
    use, distance_range, robust, clip, seed
        The settings used.
    notes : list of str
        Caveats to show with the numbers.
    bootstrap : dict or None
        ``n``, ``seed``, ``samples`` (n x 7) and ``intervals``: name -> [16%, 84%, 2.5%, 97.5%]
        percentiles, for the seven parameters and the derived quantities.
    bins : astropy Table or None
        Fits in distance bins (see :func:`mwkin.oort.fit_in_distance_bins`).
    potential_oort, potential_description : dict or None, str
        A, B (and Omega, kappa when available), km/s/kpc, implied by the potential at the frame's
        in-plane R0 (``R_kpc``), and the potential's description.
    converged, n_iterations : bool, int
        Whether the dispersion fit converged, and in how many iterations.
    residuals : QTable (property)
        Per-row residuals aligned with the input table; see :attr:`residuals`.
    """

    A: float
    B: float
    C: float
    K: float
    solar_motion: tuple
    errors: dict
    covariance: np.ndarray
    constrained: dict
    sigma_intrinsic: tuple
    sigma_intrinsic_error: tuple
    dispersion: str
    chi2: float
    dof: int
    n_used: int
    n_data: int
    n_dropped: dict
    derived: dict
    frame: SolarFrame
    distance_choice: dict
    distance_description: str
    use: str
    distance_range: tuple
    notes: list
    robust: bool = False
    clip: float | None = None
    n_rejected: int = 0
    distance_reasons: dict = field(default_factory=dict)
    bootstrap: dict | None = None
    bins: Table | None = None
    potential_oort: dict | None = None
    potential_description: str = ""
    converged: bool = True
    n_iterations: int = 0
    seed: int | None = None
    _per_star: dict | None = field(default=None, repr=False)

    # ------------------------------------------------------------------ convenience
    parameter_names = PARAMETERS

    @property
    def values(self):
        """Parameter name -> value for A, B, C, K, U, V, W."""
        return dict(zip(PARAMETERS, (self.A, self.B, self.C, self.K) + tuple(self.solar_motion)))

    @property
    def U(self):
        return self.solar_motion[0]

    @property
    def V(self):
        return self.solar_motion[1]

    @property
    def W(self):
        return self.solar_motion[2]

    @property
    def Omega0(self):
        """A - B, km/s/kpc."""
        return self.derived["Omega0"][0]

    @property
    def dVdR(self):
        """-(A + B), km/s/kpc."""
        return self.derived["dV/dR"][0]

    @property
    def V0(self):
        """R0 (A - B), km/s (local mean-flow speed of a first-order model)."""
        return self.derived["V0"][0]

    @property
    def kappa(self):
        """sqrt(-4 B (A - B)), km/s/kpc."""
        return self.derived["kappa"][0]

    @property
    def residuals(self):
        """Per-row residuals aligned with the input table (QTable), or None after ``from_dict``.

        Columns: ``status`` (why a row was not used, "used" otherwise), ``used``, ``n_data`` (data of the
        row in the fit), ``delta_mu_l_star``, ``delta_mu_b`` (mas/yr) and ``delta_v_r`` (km/s): data minus
        model; ``z_mu_l_star``, ``z_mu_b``, ``z_v_r``: the same divided by the standard deviation of that
        datum (measurement error, distance term and intrinsic dispersion); ``chi2``: the star's squared
        normalised residual vector (with the correlations). NaN where a row or datum was not used;
        rejected outliers keep their residuals.
        """
        if self._per_star is None:
            return None
        per = self._per_star
        out = QTable()
        names = np.array([STATUS[c][0] for c in sorted(STATUS)])
        out["status"] = names[per["status"]]
        out["used"] = per["status"] == 0
        out["n_data"] = per["n_data"]
        out["delta_mu_l_star"] = per["delta"][0] * MASYR
        out["delta_mu_b"] = per["delta"][1] * MASYR
        out["delta_v_r"] = per["delta"][2] * KMS
        out["z_mu_l_star"] = per["z"][0]
        out["z_mu_b"] = per["z"][1]
        out["z_v_r"] = per["z"][2]
        out["chi2"] = per["chi2"]
        out["delta_mu_l_star"].info.description = "data minus model, mu_l* = mu_l cos b"
        out["z_v_r"].info.description = "normalised residual: (data - model) / standard deviation"
        return out

    # ------------------------------------------------------------------ tables and text
    def table(self):
        """Parameters, derived quantities and dispersions as a Table.

        Columns: ``parameter``, ``value``, ``error``, ``unit``, ``constrained`` and, after a bootstrap,
        ``ci68_low``, ``ci68_high``, ``ci95_low``, ``ci95_high`` (percentile intervals).
        """
        rows = []
        for name in PARAMETERS:
            rows.append((name, self.values[name], self.errors[name], unit_text(UNITS[name]), self.constrained[name]))
        for name, (value, error) in self.derived.items():
            rows.append((name, value, error, unit_text(DERIVED[name][1]), bool(np.isfinite(value))))
        for axis, s, e in zip("UVW", self.sigma_intrinsic, self.sigma_intrinsic_error):
            rows.append((f"sigma_{axis}", s, e, unit_text(KMS), bool(np.isfinite(e))))
        t = Table(
            rows=rows,
            names=("parameter", "value", "error", "unit", "constrained"),
            dtype=(str, float, float, str, bool),
        )
        if self.bootstrap is not None:
            intervals = self.bootstrap["intervals"]
            for col, idx in (("ci68_low", 0), ("ci68_high", 1), ("ci95_low", 2), ("ci95_high", 3)):
                t[col] = [intervals.get(name, [np.nan] * 4)[idx] for name in t["parameter"]]
        return t

    def summary(self):
        """A readable text block: the numbers, the sample, the settings and the caveats."""
        lines = [
            f"Oort-constant fit ({self.use.replace('_', ' ')}, {self.n_used} stars, "
            f"{self.distance_range[0]:g} <= d < {self.distance_range[1]:g} kpc)"
        ]
        for name in PARAMETERS:
            value, error = self.values[name], self.errors[name]
            unit = unit_text(UNITS[name])
            flag = "" if self.constrained[name] else "   not constrained by these data"
            lines.append(f"  {name:7s} = {_fmt(value, error)} {unit}{flag}")
        for name, (value, error) in self.derived.items():
            unit = unit_text(DERIVED[name][1])
            text = _fmt(value, error) if np.isfinite(value) else "not available"
            lines.append(f"  {name:7s} = {text} {unit if np.isfinite(value) else ''}".rstrip())
        sig = ", ".join(f"{s:.1f} +/- {e:.1f}" for s, e in zip(self.sigma_intrinsic, self.sigma_intrinsic_error))
        lines.append(f"  velocity dispersion (sigma_U, sigma_V, sigma_W) = ({sig}) km/s [{self.dispersion}]")
        if self.potential_oort is not None:
            pot = self.potential_oort
            lines.append(
                f"  potential ({self.potential_description}): A = {pot['A']:.2f}, B = {pot['B']:.2f} "
                f"km/s/kpc at R = {pot['R_kpc']:.3f} kpc"
            )
        lines.append(f"  chi2 / dof = {self.chi2:.1f} / {self.dof}")
        dropped = ", ".join(f"{k}: {v}" for k, v in self.n_dropped.items()) or "none"
        lines.append(f"  rows left out: {dropped}")
        if self.robust:
            lines.append(f"  sigma clipping at {self.clip:g} sigma rejected {self.n_rejected} stars")
        if self.bootstrap is not None:
            lines.append(f"  bootstrap: {self.bootstrap['n']} resamples (seed {self.bootstrap['seed']})")
        lines.append(f"  frame: {self.frame.describe()}")
        if self.bins is not None:
            lines.append("  distance bins:")
            for row in self.bins:
                lines.append(
                    f"    {row['d_min']:.2f}-{row['d_max']:.2f} kpc ({row['n_used']} stars): "
                    f"A = {_fmt(row['A'], row['A_error'])}, B = {_fmt(row['B'], row['B_error'])}"
                )
        lines.append("Caveats:")
        lines.extend(f"  - {note}" for note in self.notes)
        return "\n".join(lines)

    def __str__(self):
        return self.summary()

    # ------------------------------------------------------------------ serialisation
    def to_dict(self):
        """JSON-able dictionary (non-finite numbers as None). Per-star residuals are not included."""

        def clean(seq):
            return [_finite_or_none(x) for x in seq]

        bins = None
        if self.bins is not None:
            bins = [
                {
                    name: (_finite_or_none(row[name]) if name not in ("n_used",) else int(row[name]))
                    for name in self.bins.colnames
                }
                for row in self.bins
            ]
        boot = None
        if self.bootstrap is not None:
            boot = {
                "n": self.bootstrap["n"],
                "seed": self.bootstrap["seed"],
                "samples": [clean(row) for row in self.bootstrap["samples"]],
                "intervals": {k: clean(v) for k, v in self.bootstrap["intervals"].items()},
            }
        return {
            "parameters": {k: _finite_or_none(v) for k, v in self.values.items()},
            "errors": {k: _finite_or_none(v) for k, v in self.errors.items()},
            "covariance": [clean(row) for row in np.asarray(self.covariance)],
            "constrained": dict(self.constrained),
            "sigma_intrinsic_kms": clean(self.sigma_intrinsic),
            "sigma_intrinsic_error_kms": clean(self.sigma_intrinsic_error),
            "dispersion": self.dispersion,
            "chi2": _finite_or_none(self.chi2),
            "dof": int(self.dof),
            "n_used": int(self.n_used),
            "n_data": int(self.n_data),
            "n_dropped": dict(self.n_dropped),
            "distance_reasons": dict(self.distance_reasons),
            "derived": {k: clean(v) for k, v in self.derived.items()},
            "frame": self.frame.to_dict(),
            "distance_choice": dict(self.distance_choice),
            "distance_description": self.distance_description,
            "use": self.use,
            "distance_range_kpc": list(self.distance_range),
            "notes": list(self.notes),
            "robust": bool(self.robust),
            "clip": self.clip,
            "n_rejected": int(self.n_rejected),
            "bootstrap": boot,
            "bins": bins,
            "potential_oort": (
                None
                if self.potential_oort is None
                else {
                    k: (_finite_or_none(v) if isinstance(v, (int, float)) else v)
                    for k, v in self.potential_oort.items()
                }
            ),
            "potential_description": self.potential_description,
            "converged": bool(self.converged),
            "n_iterations": int(self.n_iterations),
            "seed": self.seed,
        }

    @classmethod
    def from_dict(cls, data):
        """Rebuild a fit from :meth:`to_dict` (without the per-star residuals)."""
        params = {k: _from_none(v) for k, v in data["parameters"].items()}
        boot = data.get("bootstrap")
        if boot is not None:
            boot = {
                "n": boot["n"],
                "seed": boot["seed"],
                "samples": np.array([[_from_none(x) for x in row] for row in boot["samples"]]),
                "intervals": {k: [_from_none(x) for x in v] for k, v in boot["intervals"].items()},
            }
        bins = data.get("bins")
        if bins is not None:
            bins = (
                Table(
                    rows=[[_from_none(r[c]) if c != "n_used" else r[c] for c in bins[0]] for r in bins],
                    names=list(bins[0]),
                )
                if bins
                else None
            )
        pot = data.get("potential_oort")
        if pot is not None:
            pot = {k: (_from_none(v) if (v is None or isinstance(v, (int, float))) else v) for k, v in pot.items()}
        return cls(
            A=params["A"],
            B=params["B"],
            C=params["C"],
            K=params["K"],
            solar_motion=(params["U"], params["V"], params["W"]),
            errors={k: _from_none(v) for k, v in data["errors"].items()},
            covariance=np.array([[_from_none(x) for x in row] for row in data["covariance"]]),
            constrained=dict(data["constrained"]),
            sigma_intrinsic=tuple(_from_none(x) for x in data["sigma_intrinsic_kms"]),
            sigma_intrinsic_error=tuple(_from_none(x) for x in data["sigma_intrinsic_error_kms"]),
            dispersion=data["dispersion"],
            chi2=_from_none(data["chi2"]),
            dof=data["dof"],
            n_used=data["n_used"],
            n_data=data["n_data"],
            n_dropped=dict(data["n_dropped"]),
            derived={k: tuple(_from_none(x) for x in v) for k, v in data["derived"].items()},
            frame=SolarFrame.from_dict(data["frame"]),
            distance_choice=dict(data["distance_choice"]),
            distance_description=data["distance_description"],
            use=data["use"],
            distance_range=tuple(data["distance_range_kpc"]),
            notes=list(data["notes"]),
            robust=data["robust"],
            clip=data["clip"],
            n_rejected=data["n_rejected"],
            distance_reasons=dict(data.get("distance_reasons", {})),
            bootstrap=boot,
            bins=bins,
            potential_oort=pot,
            potential_description=data.get("potential_description", ""),
            converged=data["converged"],
            n_iterations=data["n_iterations"],
            seed=data.get("seed"),
        )


def _fmt(value, error):
    if not np.isfinite(value):
        return "nan"
    if not np.isfinite(error):
        return f"{value:.2f} (error undefined)"
    return f"{value:.2f} +/- {error:.2f}"


# ---------------------------------------------------------------------- derived quantities
