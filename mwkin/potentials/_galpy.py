"""The one place that talks to galpy.

Everything galpy-specific lives here: its natural units (lengths in units of ``ro``, velocities in
units of ``vo``), the choice of integrator, its phase-space ordering and its left-handed Galactocentric
frame. The rest of mwkin passes plain float64 arrays in kpc, km/s, Gyr and our cylindrical
conventions, and receives the same back.

Conventions at this boundary
----------------------------
Our cylindrical phase space is ``(R, phi, z, v_R, v_phi, v_z)`` in kpc, rad, kpc, km/s with
``phi = atan2(y, -x)`` in astropy's Galactocentric axes (the Sun near phi = 0, phi increasing in the
direction of Galactic rotation) and ``v_phi = R dphi/dt`` positive with rotation.

galpy orders a phase-space point as ``[R, vR, vT, z, vz, phi]`` in natural units. Its frame is
left-handed: ``x_galpy = R cos(phi)`` points from the centre toward the Sun, ``y_galpy`` along the
rotation, so ``x_galpy = -x_astropy`` while ``y`` and ``z`` agree. Its ``phi`` and ``vT = R dphi/dt``
therefore have the same sense and zero point as ours, and the conversion is a reordering plus the unit
scaling. (For axisymmetric potentials the orientation of the x axis does not matter at all; for a
non-axisymmetric galpy potential, galpy's ``phi = 0`` is the Sun--centre line as seen from the centre.)

Integrator
----------
``dop853_c``: galpy's C implementation of the adaptive 8th-order Dormand--Prince method with dense
output. Its cost is set by the dynamics, not by the number of output times (1,001 and 10,001 output
points cost the same), it needs no step size to be chosen, copes with eccentric orbits that plunge
toward the centre, and at galpy's default tolerances (rtol = atol = 1e-12) keeps the relative energy error near 1e-11 over
10 Gyr in MWPotential2014 in about 20 ms per orbit. The fixed-step ``symplec6_c`` was slower for the
same output grid (its step is tied to the output spacing).
"""

from __future__ import annotations

import contextlib
import ctypes
import functools
import glob
import math
import os
import threading
import time
import warnings
from dataclasses import dataclass

import numpy as np

__all__ = [
    "INTEGRATOR",
    "GalpyModel",
    "PRESET_BUILDERS",
    "preset_model",
    "three_component_model",
    "model_from_galpy",
    "integrate",
    "IntegrationTimeout",
    "time_guard_available",
    "staeckel_parameters",
    "estimate_delta",
]

#: The integrator used for every orbit (see the module notes for why).
INTEGRATOR = "dop853_c"

# Lazily imported galpy modules, so that importing mwkin does not pay galpy's start-up cost.
_lock = threading.Lock()


def _potential_module():
    with warnings.catch_warnings():
        # galpy announces optional C extensions it did not build (e.g. the torus mapper) at import.
        warnings.simplefilter("ignore")
        import galpy.actionAngle  # noqa: F401
        import galpy.orbit  # noqa: F401  (imported here so its notices are silenced too)
        import galpy.potential as gp

    return gp


def _conversion():
    from galpy.util import conversion

    return conversion


@contextlib.contextmanager
def _quiet():
    """Silence floating-point notices and galpy's numerical warnings (e.g. SCF expansions at r = inf)."""
    with np.errstate(all="ignore"), warnings.catch_warnings():
        warnings.simplefilter("ignore")
        yield


# --------------------------------------------------------------------------------------- the model
def _combine(components):
    gp = _potential_module()
    if len(components) == 1:
        return components[0]
    composite = getattr(gp, "CompositePotential", None)
    return composite(list(components)) if composite is not None else list(components)


@dataclass(frozen=True)
class GalpyModel:
    """galpy potential components with the unit system they are expressed in.

    Parameters
    ----------
    components : tuple
        galpy 3D potential instances (summed).
    ro : float
        Natural length unit, kpc.
    vo : float
        Natural velocity unit, km/s. Changing ``vo`` while keeping the components scales the whole
        potential (all masses) by ``(vo_new / vo)**2``: this is how :meth:`scaled` works.
    """

    components: tuple
    ro: float
    vo: float

    @functools.cached_property
    def pot(self):
        """The summed components as one galpy object (a plain list on galpy versions without sums)."""
        return _combine(self.components)

    @property
    def time_unit_gyr(self):
        return float(_conversion().time_in_Gyr(self.vo, self.ro))

    @property
    def frequency_unit(self):
        """km/s/kpc per natural frequency unit."""
        return self.vo / self.ro

    @property
    def mass_unit_msun(self):
        return float(_conversion().mass_in_msol(self.vo, self.ro))

    @property
    def has_c(self):
        return all(getattr(c, "hasC", False) for c in self.components)

    @property
    def is_axisymmetric(self):
        return not any(getattr(c, "isNonAxi", False) for c in self.components)

    def scaled(self, factor):
        """The same components with every mass multiplied by ``factor`` (> 0)."""
        return GalpyModel(self.components, self.ro, self.vo * math.sqrt(factor))

    # ------------------------------------------------------------------ potential-level quantities
    def _nat(self, R_kpc, z_kpc=0.0):
        R = np.asarray(R_kpc, dtype=float) / self.ro
        z = np.asarray(z_kpc, dtype=float) / self.ro
        return np.broadcast_arrays(R, z)

    def potential_kms2(self, R_kpc, z_kpc=0.0, phi=0.0, components=None):
        """Potential in km^2/s^2 in galpy's zero point (see :meth:`potential_at_infinity_kms2`)."""
        gp = _potential_module()
        R, z = self._nat(R_kpc, z_kpc)
        pot = self.pot if components is None else _combine(components)
        with _quiet():
            val = gp.evaluatePotentials(pot, R, z, phi=phi, use_physical=False)
        return np.asarray(val, dtype=float) * self.vo**2

    def potential_at_infinity_kms2(self):
        """See :attr:`_phi_infinity` (computed once per model)."""
        return self._phi_infinity

    @functools.cached_property
    def _phi_infinity(self):
        """galpy's potential value at infinite radius, km^2/s^2, and how it was obtained.

        Returns
        -------
        value : float
        how : str
            "r = inf" when galpy evaluates it there, else "r = 1e6 ro" (its value at 10^6 natural
            length units, for components whose formulas give NaN at infinity).
        """
        gp = _potential_module()
        with _quiet():
            at_inf = float(gp.evaluatePotentials(self.pot, np.inf, 0.0, phi=0.0, use_physical=False))
            if np.isfinite(at_inf):
                return at_inf * self.vo**2, "r = inf"
            far = float(gp.evaluatePotentials(self.pot, 1e6, 0.0, phi=0.0, use_physical=False))
        return far * self.vo**2, "r = 1e6 ro"

    def vc2_kms2(self, R_kpc, components=None):
        """-R dPhi/dR in the mid-plane (km^2/s^2), total or of a list of components."""
        gp = _potential_module()
        R, z = self._nat(R_kpc)
        pot = self.pot if components is None else _combine(components)
        with _quiet():
            force = gp.evaluateRforces(pot, R, z, phi=0.0, use_physical=False)
        return -R * np.asarray(force, dtype=float) * self.vo**2

    def forces(self, R_kpc, z_kpc, phi=0.0):
        """Radial and vertical force per unit mass (-dPhi/dR, -dPhi/dz), km^2/s^2/kpc, at (R, phi, z)."""
        gp = _potential_module()
        R, z = self._nat(R_kpc, z_kpc)
        phi = phi if not self.is_axisymmetric else 0.0
        with _quiet():
            f_R = gp.evaluateRforces(self.pot, R, z, phi=phi, use_physical=False)
            f_z = gp.evaluatezforces(self.pot, R, z, phi=phi, use_physical=False)
        scale = self.vo**2 / self.ro
        return np.asarray(f_R, dtype=float) * scale, np.asarray(f_z, dtype=float) * scale

    def dvcdR(self, R_kpc):
        """d vc / dR in the mid-plane, km/s/kpc."""
        gp = _potential_module()
        R, _ = self._nat(R_kpc)
        with _quiet():
            val = gp.dvcircdR(self.pot, R, phi=0.0, use_physical=False)
        return np.asarray(val, dtype=float) * self.frequency_unit

    def epicycle_frequency(self, R_kpc):
        """kappa in km/s/kpc."""
        gp = _potential_module()
        R, _ = self._nat(R_kpc)
        with _quiet():
            val = gp.epifreq(self.pot, R, use_physical=False)
        return np.asarray(val, dtype=float) * self.frequency_unit

    def vertical_frequency(self, R_kpc):
        """nu = sqrt(d^2 Phi / dz^2) at z = 0, km/s/kpc."""
        gp = _potential_module()
        R, _ = self._nat(R_kpc)
        with _quiet():
            val = gp.verticalfreq(self.pot, R, use_physical=False)
        return np.asarray(val, dtype=float) * self.frequency_unit


# --------------------------------------------------------------------------------------- presets
def _mwpotentials():
    _potential_module()
    from galpy.potential import mwpotentials

    return mwpotentials


#: Preset name -> (attribute in galpy.potential.mwpotentials, component labels in galpy's order).
PRESET_BUILDERS = {
    "MWPotential2014": ("MWPotential2014", ("bulge", "disc", "halo")),
    "McMillan17": ("McMillan17", ("discs", "halo", "bulge")),
    "Cautun20": ("Cautun20", ("halo", "discs", "bulge", "circumgalactic medium")),
    "Irrgang13I": ("Irrgang13I", ("bulge", "disc", "halo")),
    "DehnenBinney98I": ("DehnenBinney98I", ("bulge", "discs", "halo")),
}


@functools.cache
def _build_preset(name):
    attr, labels = PRESET_BUILDERS[name]
    with _lock, np.errstate(all="ignore"), warnings.catch_warnings():
        # The SCF-based models emit numerical warnings while their expansions are computed.
        warnings.simplefilter("ignore")
        pot = getattr(_mwpotentials(), attr)
    components = tuple(_potential_module().flatten(list(pot)))
    first = components[0]
    # galpy's unit system for the model: the ro, vo it was defined with (8 kpc, 220 km/s for
    # MWPotential2014, which was defined in natural units with those as its stated scales).
    ro = float(first._ro)
    vo = float(first._vo)
    return GalpyModel(components, ro, vo), labels


def preset_model(name):
    """The (cached) galpy model and component labels of a named preset.

    Raises
    ------
    KeyError
        If ``name`` is not one of :data:`PRESET_BUILDERS`.
    """
    if name not in PRESET_BUILDERS:
        raise KeyError(name)
    return _build_preset(name)


# --------------------------------------------------------------------------------------- building
#: Unit system used for models built from physical parameters (any choice works; this one is galpy's default).
_RO_BUILD, _VO_BUILD = 8.0, 220.0


def three_component_model(bulge, disc, halo):
    """Build bulge + Miyamoto--Nagai disc + NFW halo from physical parameters (already validated).

    Parameters
    ----------
    bulge : dict
        ``model="power_law_cutoff"`` with ``mass`` (total, Msun), ``alpha``, ``cutoff`` (kpc); or
        ``model="hernquist"`` with ``mass`` (total, Msun) and ``scale`` (kpc).
    disc : dict
        ``mass`` (Msun), ``a``, ``b`` (kpc).
    halo : dict
        ``mass`` (the NFW mass scale 4 pi rho0 a^3, Msun) and ``scale`` (kpc).

    Returns
    -------
    GalpyModel
    """
    gp = _potential_module()
    ro, vo = _RO_BUILD, _VO_BUILD
    munit = float(_conversion().mass_in_msol(vo, ro))
    kw = dict(ro=ro, vo=vo)
    if bulge["model"] == "hernquist":
        # galpy's Hernquist amplitude is twice the total mass (rho = amp / (4 pi a^3) / (x (1 + x)^3)).
        bulge_pot = gp.HernquistPotential(amp=2.0 * bulge["mass"] / munit, a=bulge["scale"] / ro, **kw)
    else:
        alpha, rc = bulge["alpha"], bulge["cutoff"] / ro
        # Total mass of rho = amp r^-alpha exp(-(r/rc)^2) (r1 = 1 natural unit):
        # M = 2 pi amp rc^(3 - alpha) Gamma(3/2 - alpha/2).
        total = 2.0 * math.pi * rc ** (3.0 - alpha) * math.gamma(1.5 - alpha / 2.0)
        bulge_pot = gp.PowerSphericalPotentialwCutoff(amp=bulge["mass"] / munit / total, alpha=alpha, rc=rc, **kw)
    disc_pot = gp.MiyamotoNagaiPotential(amp=disc["mass"] / munit, a=disc["a"] / ro, b=disc["b"] / ro, **kw)
    halo_pot = gp.NFWPotential(amp=halo["mass"] / munit, a=halo["scale"] / ro, **kw)
    return GalpyModel((bulge_pot, disc_pot, halo_pot), ro, vo)


def model_from_galpy(pot, ro=None, vo=None):
    """Wrap a galpy potential (instance, list or sum) with its unit system.

    Parameters
    ----------
    pot : galpy Potential, list of them, or a sum
    ro, vo : float or None
        Natural units in kpc and km/s; None takes the potential's own (galpy's configured default,
        8 kpc and 220 km/s, unless it was built with others).

    Raises
    ------
    TypeError
        If ``pot`` is not a 3D galpy potential.
    ValueError
        If ``ro``/``vo`` contradict the units the potential was built with.
    """
    gp = _potential_module()
    items = pot if isinstance(pot, (list, tuple)) else [pot]
    try:
        components = tuple(gp.flatten(list(items)))
    except Exception:  # noqa: BLE001 - galpy raises assorted errors for non-potentials
        components = ()
    if not components or not all(isinstance(c, gp.Potential) and getattr(c, "dim", 0) == 3 for c in components):
        raise TypeError(f"expected a 3D galpy potential (or a list/sum of them), got {type(pot).__name__}")
    first = components[0]
    own_ro, own_vo = float(first._ro), float(first._vo)
    for given, own, flag, label, unit in (
        (ro, own_ro, first._roSet, "ro", "kpc"),
        (vo, own_vo, first._voSet, "vo", "km/s"),
    ):
        if given is not None and flag and not math.isclose(float(given), own, rel_tol=1e-12):
            raise ValueError(
                f"{label}={given} {unit} contradicts the {label}={own} {unit} this galpy potential was built "
                f"with; its parameters are stored in those units, so pass {label}={own} or leave it out"
            )
    ro = own_ro if ro is None else float(ro)
    vo = own_vo if vo is None else float(vo)
    if not (ro > 0 and vo > 0 and math.isfinite(ro) and math.isfinite(vo)):
        raise ValueError(f"ro and vo must be positive and finite, got ro={ro} kpc, vo={vo} km/s")
    return GalpyModel(components, ro, vo)


# --------------------------------------------------------------------------------------- phase space
def to_galpy_natural(model, w):
    """Our (N, 6) cylindrical phase space (R, phi, z, v_R, v_phi, v_z) -> galpy's natural [R, vR, vT, z, vz, phi]."""
    R, phi, z, vR, vphi, vz = (w[:, i] for i in range(6))
    return np.column_stack([R / model.ro, vR / model.vo, vphi / model.vo, z / model.ro, vz / model.vo, phi])


def from_galpy_natural(model, orbit):
    """galpy natural [..., 6] orbit array -> ours (R, phi, z, v_R, v_phi, v_z), phi wrapped to [-pi, pi)."""
    out = np.empty_like(orbit)
    out[..., 0] = orbit[..., 0] * model.ro
    out[..., 1] = np.mod(orbit[..., 5] + np.pi, 2.0 * np.pi) - np.pi
    out[..., 2] = orbit[..., 3] * model.ro
    out[..., 3] = orbit[..., 1] * model.vo
    out[..., 4] = orbit[..., 2] * model.vo
    out[..., 5] = orbit[..., 4] * model.vo
    return out


def energy_kms2(model, w):
    """Energy per unit mass, km^2/s^2, in galpy's zero point, of (N, 6) cylindrical phase-space points."""
    R, phi, z, vR, vphi, vz = (w[:, i] for i in range(6))
    phi_val = model.potential_kms2(R, z, phi=phi if not model.is_axisymmetric else 0.0)
    with np.errstate(over="ignore"):  # |v| beyond 1e154 gives E = inf, which callers flag as unbound
        return phi_val + 0.5 * (vR**2 + vphi**2 + vz**2)


# --------------------------------------------------------------------------------------- threads
@functools.lru_cache(maxsize=1)
def _omp_library():
    """The OpenMP runtime galpy's C library uses, or None when it cannot be found."""
    import galpy

    site = os.path.dirname(os.path.dirname(galpy.__file__))
    for path in glob.glob(os.path.join(site, "galpy.libs", "libgomp*.so*")) + ["libgomp.so.1"]:
        try:
            lib = ctypes.CDLL(path)
            lib.omp_get_max_threads.restype = ctypes.c_int
            return lib
        except OSError:
            continue
    return None


@contextlib.contextmanager
def omp_threads(numcores):
    """Limit galpy's OpenMP threads (batch C integration) to ``numcores`` in this thread, then restore.

    galpy's ``numcores`` argument only applies to its Python multiprocessing path; its C integrators
    take the OpenMP thread count instead, so we set that directly. ``None`` leaves OpenMP's default.
    """
    lib = _omp_library() if numcores is not None else None
    if lib is None:
        yield
        return
    before = lib.omp_get_max_threads()
    lib.omp_set_num_threads(int(max(1, numcores)))
    try:
        yield
    finally:
        lib.omp_set_num_threads(before)


# --------------------------------------------------------------------------------------- time guard
class IntegrationTimeout(RuntimeError):
    """galpy's integrator did not return within the allowed wall time (raised by :func:`_guarded`)."""


@functools.lru_cache(maxsize=1)
def _interrupt_flag():
    """galpy's C ``interrupted`` flag, or None when its C library (or the symbol) is not available.

    galpy's C integrators poll this ``volatile sig_atomic_t`` once per step (its SIGINT handler sets
    it, so that Ctrl-C can stop an integration) and return with error code -10 when it is set, after
    which galpy raises ``KeyboardInterrupt``. Setting it from a watchdog thread stops, in process,
    a C integration that never finishes (e.g. one whose step size collapsed to galpy's floor): the C
    call holds no Python state a thread could interrupt, and ctypes releases the GIL meanwhile.
    """
    try:
        from galpy.util._load_extension_libs import load_libgalpy

        lib, loaded = load_libgalpy()
        if not loaded or lib is None:
            return None
        return ctypes.c_int.in_dll(lib, "interrupted")  # sig_atomic_t is an int on every galpy platform
    except (ImportError, ValueError, AttributeError, OSError):
        return None


# Incremented whenever any watchdog starts interrupting: galpy's flag is process-wide, so an
# integration in another thread that sees it without having timed out itself retries (see _guarded).
_interrupt_epoch = 0
_epoch_lock = threading.Lock()


class _Watchdog:
    """Set galpy's interrupt flag repeatedly after ``seconds`` until :meth:`stop` is called.

    Repeatedly, because with several OpenMP threads each thread resets the flag when it sees it,
    so one write stops only one orbit.
    """

    def __init__(self, seconds, flag):
        self._seconds = seconds
        self._flag = flag
        self._done = threading.Event()
        self.fired = False
        self._thread = threading.Thread(target=self._run, name="mwkin-orbit-watchdog", daemon=True)
        self._thread.start()

    def _run(self):
        global _interrupt_epoch
        if self._done.wait(self._seconds):
            return
        with _epoch_lock:
            _interrupt_epoch += 1
            self.fired = True
        while not self._done.is_set():
            self._flag.value = 1
            self._done.wait(0.002)

    def stop(self):
        self._done.set()
        self._thread.join()
        if self.fired:
            self._flag.value = 0  # a last write may have landed after the integration returned


def _guarded(call, seconds):
    """``call()`` (a galpy C integration) stopped after ``seconds`` of wall time.

    Raises
    ------
    IntegrationTimeout
        When the time ran out. A ``KeyboardInterrupt`` not caused by a watchdog (a real Ctrl-C)
        propagates; one caused by another thread's watchdog makes the call run again.
    """
    flag = _interrupt_flag()
    if seconds is None or not math.isfinite(seconds) or flag is None:
        return call()
    deadline = time.monotonic() + seconds
    while True:
        remaining = deadline - time.monotonic()
        if remaining <= 0:
            raise IntegrationTimeout(f"no result within {seconds:g} s")
        epoch = _interrupt_epoch
        watchdog = _Watchdog(remaining, flag)
        try:
            return call()
        except KeyboardInterrupt:
            if watchdog.fired:
                raise IntegrationTimeout(f"no result within {seconds:g} s") from None
            if _interrupt_epoch == epoch:
                raise
            # interrupted by another thread's watchdog: run again within what is left of our time
        finally:
            watchdog.stop()


def time_guard_available(model):
    """Whether :func:`integrate` can stop a runaway integration in ``model`` (galpy's C path)."""
    return model.has_c and _interrupt_flag() is not None


# --------------------------------------------------------------------------------------- integration
def integrate(model, w, t_gyr, numcores=None, timeout=None, star_timeout=None):
    """Integrate orbits with galpy's C integrator, each call bounded in wall time.

    Parameters
    ----------
    model : GalpyModel
    w : numpy.ndarray, shape (N, 6)
        Finite initial conditions (R, phi, z, v_R, v_phi, v_z), kpc, rad, km/s.
    t_gyr : numpy.ndarray, shape (nt,)
        Output times, Gyr (evenly spaced, t[0] = 0; validated by the caller).
    numcores : int or None
        OpenMP threads for the batch.
    timeout : float or None
        Wall-clock seconds allowed for the whole batch (None or inf: no limit). When exceeded, the
        stars are integrated again one at a time with ``star_timeout`` each.
    star_timeout : float or None
        Seconds allowed for one star alone (default: ``timeout``).

    Returns
    -------
    numpy.ndarray, shape (N, nt, 6)
        Our cylindrical phase space along each orbit (NaN for stars that timed out).
    str
        The integration method galpy used.
    numpy.ndarray of bool, shape (N,)
        True for stars whose integration alone exceeded ``star_timeout`` and was stopped.

    Notes
    -----
    The limit is enforced through galpy's own interrupt flag (see :func:`_interrupt_flag`), which
    only its C integrators poll: with a potential that has no C implementation galpy integrates in
    Python and no limit applies.
    """
    _potential_module()
    from galpy.orbit import Orbit

    t_nat = np.asarray(t_gyr, dtype=float) / model.time_unit_gyr
    method = INTEGRATOR if model.has_c else "dop853"
    n, nt = len(w), len(t_nat)

    def run(sub):
        orbits = Orbit(to_galpy_natural(model, sub))
        with omp_threads(numcores), _quiet():  # also galpy's verbose "using C" notices
            orbits.integrate(t_nat, model.pot, method=method, progressbar=False)
        return from_galpy_natural(model, np.asarray(orbits.orbit).reshape(len(sub), nt, 6))

    timed_out = np.zeros(n, dtype=bool)
    if not model.has_c:
        return run(w), method, timed_out
    try:
        return _guarded(lambda: run(w), timeout), method, timed_out
    except IntegrationTimeout:
        if n == 1:
            return np.full((1, nt, 6), np.nan), method, np.ones(1, dtype=bool)
    # Find the runaway star(s): the others take their usual milliseconds each.
    track = np.full((n, nt, 6), np.nan)
    per_star = timeout if star_timeout is None else star_timeout
    for i in range(n):
        try:
            track[i] = _guarded(lambda: run(w[i : i + 1]), per_star)[0]  # noqa: B023 (called at once, inside the iteration)
        except IntegrationTimeout:
            timed_out[i] = True
    return track, method, timed_out


# --------------------------------------------------------------------------------------- Staeckel
def estimate_delta(model, R_kpc, z_kpc, delta0=1e-6):
    """Staeckel focal distance per point, kpc: Sanders (2012) eq. (9), vectorised.

    The same expression and fix-ups as ``galpy.actionAngle.estimateDeltaStaeckel(no_median=True)``
    (including its sign correction to eq. 9, its z = 0 -> 1e-4 ro replacement and its floor at
    ``delta0``), evaluated on whole arrays instead of galpy's per-point Python loop.

    References
    ----------
    Sanders, J. 2012, MNRAS 426, 128.
    """
    gp = _potential_module()
    R = np.asarray(R_kpc, dtype=float) / model.ro
    z = np.array(z_kpc, dtype=float) / model.ro
    z[z == 0.0] = 1e-4
    pot = model.pot
    includes_scf = any(isinstance(c, (gp.SCFPotential, gp.DiskSCFPotential)) for c in model.components)
    kw = dict(use_physical=False)
    with _quiet():
        delta2 = (
            z**2
            - R**2
            + (
                3.0 * R * gp.evaluatezforces(pot, R, z, **kw)
                - 3.0 * z * gp.evaluateRforces(pot, R, z, **kw)
                + R * z * (gp.evaluateR2derivs(pot, R, z, **kw) - gp.evaluatez2derivs(pot, R, z, **kw))
            )
            / gp.evaluateRzderivs(pot, R, z, **kw)
        )
        small = (delta2 < delta0**2) & ((delta2 > -1e-10) | includes_scf)
        delta2 = np.where(small, delta0**2, delta2)
        return np.sqrt(delta2) * model.ro


def staeckel_parameters(model, w, delta_kpc):
    """Eccentricity, zmax, rperi, rapo in the Staeckel approximation (galpy's ``actionAngleStaeckel``).

    Parameters
    ----------
    model : GalpyModel
        Axisymmetric.
    w : numpy.ndarray, shape (N, 6)
        Finite phase-space points (R, phi, z, v_R, v_phi, v_z).
    delta_kpc : numpy.ndarray, shape (N,)
        Focal distance per point (finite, positive).

    Returns
    -------
    dict of numpy.ndarray
        ``eccentricity``, ``zmax`` (kpc), ``rperi`` (kpc, the mid-plane radius at u_min),
        ``rapo`` (kpc, spherical radius at (u_max, v_min)); NaN where galpy fails.
    """
    _potential_module()
    from galpy.actionAngle import actionAngleStaeckel

    vxvv = to_galpy_natural(model, w)
    delta = np.asarray(delta_kpc, dtype=float) / model.ro
    aa = actionAngleStaeckel(pot=model.pot, delta=delta, c=True)
    with np.errstate(all="ignore"), warnings.catch_warnings():
        warnings.simplefilter("ignore")
        e, zmax, rperi, rap = aa.EccZmaxRperiRap(*(vxvv[:, i] for i in range(6)), delta=delta, c=True)
    return {
        "eccentricity": np.asarray(e, dtype=float),
        "zmax": np.asarray(zmax, dtype=float) * model.ro,
        "rperi": np.asarray(rperi, dtype=float) * model.ro,
        "rapo": np.asarray(rap, dtype=float) * model.ro,
    }
