"""The potentials' errors, the published presets with their citations, and the adjustable model's parameters and defaults."""

from __future__ import annotations

import math
import types
from collections.abc import Mapping
from dataclasses import dataclass

import astropy.units as u

from .._validate import (
    real_number,
    require_mapping,
)
from ..units import KMS
from . import _galpy

_FREQ = KMS / u.kpc
_KMS2 = KMS**2


class PotentialError(ValueError):
    """Invalid potential parameters or a request a potential cannot answer."""


class UnknownPotentialError(PotentialError, KeyError):
    """A preset name that is not known."""

    def __str__(self):  # KeyError would otherwise quote the message
        return str(self.args[0])


class NotSerialisableError(PotentialError):
    """The potential was built from a galpy object and cannot be written as JSON."""


@dataclass(frozen=True)
class PresetInfo:
    """A published Milky Way model available by name."""

    name: str
    description: str
    citation: str


_PRESETS = {
    p.name: p
    for p in [
        PresetInfo(
            "MWPotential2014",
            "power-law bulge with cut-off, Miyamoto-Nagai disc, NFW halo; vc(8 kpc) = 220 km/s",
            "Bovy 2015, ApJS 216, 29",
        ),
        PresetInfo(
            "McMillan17",
            "thin and thick stellar discs, HI and H2 gas discs, axisymmetric bulge, NFW halo",
            "McMillan 2017, MNRAS 465, 76",
        ),
        PresetInfo(
            "Cautun20",
            "discs, bulge and circumgalactic medium with an adiabatically contracted NFW halo",
            "Cautun et al. 2020, MNRAS 494, 4291",
        ),
        PresetInfo(
            "Irrgang13I",
            "Plummer bulge, Miyamoto-Nagai disc, Allen & Santillan halo (model I)",
            "Irrgang et al. 2013, A&A 549, A137",
        ),
        PresetInfo(
            "DehnenBinney98I",
            "bulge, ISM and stellar discs, flattened two-power halo (model 1)",
            "Dehnen & Binney 1998, MNRAS 294, 429",
        ),
    ]
}
assert set(_PRESETS) == set(_galpy.PRESET_BUILDERS)

#: Defaults of :meth:`Potential.three_component`: MWPotential2014's components (Bovy 2015) written in
#: physical units (galpy's definition with ro = 8 kpc, vo = 220 km/s), so the defaults give vc(8 kpc) = 220 km/s.
#: Read-only, so no caller can change the defaults for the rest of the process (``dict(...)`` copies).
DEFAULT_BULGE = types.MappingProxyType(
    {"model": "power_law_cutoff", "mass": 4.501365375e9, "alpha": 1.8, "cutoff": 1.9}
)
DEFAULT_DISC = types.MappingProxyType({"mass": 6.819390278e10, "a": 3.0, "b": 0.28})
DEFAULT_HALO = types.MappingProxyType({"mass": 4.368332485e11, "scale": 16.0})
_DEFAULTS = {"bulge": DEFAULT_BULGE, "disc": DEFAULT_DISC, "halo": DEFAULT_HALO}
_BULGE_MODELS = ("power_law_cutoff", "hernquist")

#: common practice (no source): no Galactic circular speed comes near 1000 km/s; a larger plain number
#: is most likely in m/s, and gets an ImplausibleValueWarning.
MAX_PLAUSIBLE_VC_KMS = 1000.0

# Parameter name -> (unit, lower bound, whether the bound is inclusive) for each component type.
_PARAMETERS = {
    "power_law_cutoff": {"mass": ("Msun", 0.0, False), "alpha": ("", 0.0, True), "cutoff": ("kpc", 0.0, False)},
    "hernquist": {"mass": ("Msun", 0.0, False), "scale": ("kpc", 0.0, False)},
    "disc": {"mass": ("Msun", 0.0, False), "a": ("kpc", 0.0, True), "b": ("kpc", 0.0, False)},
    "halo": {"mass": ("Msun", 0.0, False), "scale": ("kpc", 0.0, False)},
}


def _component_params(kind, given, defaults, label):
    """Validate one component's parameters.

    ``defaults`` is the component's default mapping (missing parameters of the same model take its
    values, as :meth:`Potential.three_component` documents), or None when every parameter is
    required (:meth:`Potential.from_dict`: no silent defaults).
    """
    if given is None and defaults is not None:
        given = {}
    given = require_mapping(given, label, PotentialError)
    if label == "bulge":
        if "model" not in given and defaults is None:
            raise PotentialError(
                f"bulge: missing required key(s) 'model' (one of {', '.join(repr(m) for m in _BULGE_MODELS)})"
            )
        model = given.pop("model", None if defaults is None else defaults.get("model"))
        if not isinstance(model, str) or model not in _BULGE_MODELS:
            raise PotentialError(f"bulge model must be 'power_law_cutoff' or 'hernquist', got {model!r}")
    else:
        model = None
    spec = _PARAMETERS[model if label == "bulge" else kind]
    unknown = set(given) - set(spec)
    if unknown:
        raise PotentialError(f"unknown {label} parameter(s) {sorted(unknown)}; expected {sorted(spec)}")
    base: Mapping
    if defaults is None:
        base = {}
    else:
        base = defaults if (label != "bulge" or model == defaults.get("model")) else {}
    out = {"model": model} if label == "bulge" else {}
    for name, (unit, low, inclusive) in spec.items():
        if name not in given and name not in base:
            raise PotentialError(f"{label} parameter {name!r} ({unit or 'dimensionless'}) is required")
        value = given.get(name, base.get(name))
        value = real_number(value, f"{label}.{name}", unit, PotentialError, finite=False)
        if not math.isfinite(value) or not (value >= low if inclusive else value > low):
            bound = f">= {low}" if inclusive else f"> {low}"
            raise PotentialError(f"{label}.{name} must be a finite number {bound} {unit}, got {value!r}")
        out[name] = float(value)
    if label == "bulge" and model == "power_law_cutoff" and not out["alpha"] < 3.0:
        raise PotentialError(f"bulge.alpha must be < 3 for a finite mass, got {out['alpha']}")
    return out


def _column_name(label):
    return "vc_" + "".join(ch if ch.isalnum() else "_" for ch in label)
