"""Time marching with temperature-dependent coefficients.

Used when the linear march of :mod:`layers.solver` does not apply: k(T)
materials, ``film_coefficient = "auto"`` (convection and radiation that
depend on the surface temperature), and stagnant contents that freeze.

Each step of each scheme is written as a stage equation on the stored energy
E (``C T`` for the cells, the enthalpy H for the contents)::

    E(T) - a F(T) = R

with F the net heat into each node (conduction plus boundary exchange) and
R known from earlier states:

* backward Euler:  a = h,          R = E(T0)
* Crank-Nicolson:  a = h/2,        R = E(T0) + h/2 F(T0)
* TR-BDF2:         a = gamma h/2,  R = E(T0) + gamma h/2 F(T0)   to t0 + gamma h, then
                   a = w h,        R = E(T*)/(gamma(2-gamma)) - (1-gamma)^2/(gamma(2-gamma)) E(T0)

(references in :mod:`layers.solver`).  A stage is solved by Picard
iteration: the coefficients (cell conductivities, film coefficients,
sol-air temperatures) are evaluated at the latest iterate, the tridiagonal
system is solved, and this repeats until no temperature changes by more
than :data:`TOLERANCE`.  The contents node is solved exactly within each
iteration by superposition (the cells are linear in the contents
temperature for frozen coefficients; :meth:`layers.contents.WaterNode.solve`).
The heat through each boundary is tallied with the very coefficients of the
final solve, so the energy balance closes at round-off whatever the
iteration count.
"""

from __future__ import annotations

import abc

import math
import warnings
from collections.abc import Callable
from dataclasses import dataclass, field

import numpy as np
from scipy.linalg import lapack

from layers.contents import WaterNode
from layers.errors import ConvergenceWarning
from layers.mesh import Mesh
from layers.solver import GAMMA, SCHEMES

#: Picard iteration stops when no temperature changes by more than this [K].
TOLERANCE = 1e-6
MAX_ITERATIONS = 50


@dataclass
class SideCoefficients:
    """One side's exchange at one iterate: heat in = G (t_ext - T_cell) + q."""

    conductance: float
    t_ext: float
    q: float
    film: float = math.nan      # surface film coefficient [W m-2 K-1]
    t_eq: float = math.nan      # equivalent (sol-air) temperature [degC]


class SideModel(abc.ABC):
    """A boundary as the nonlinear march sees it.

    Subclasses set :attr:`depends_on_temperature` and implement
    :meth:`prepare` (vectorised forcing at all times) and :meth:`coefficients`.
    """

    depends_on_temperature = False

    @abc.abstractmethod
    def prepare(self, seconds: np.ndarray) -> dict[str, np.ndarray]:
        """Forcing arrays at every time of ``seconds`` [s], keyed by name."""

    @abc.abstractmethod
    def coefficients(self, forcing: dict[str, np.ndarray], k: int, t_surface: float, r_half: float) -> SideCoefficients:
        """The side's exchange at step ``k`` for the surface temperature
        ``t_surface`` [degC]; ``r_half`` is the resistance from the surface to
        the first cell centre [K W-1 per reference unit]."""


@dataclass
class NonlinearSystem:
    """Cells, their boundaries and optional contents."""

    mesh: Mesh
    outside: SideModel
    inside: SideModel | None = None          # None when the bore holds contents
    water: WaterNode | None = None
    water_resistance: float = 0.0            # film between contents and bore [K W-1 per ref. unit]
    capacity: np.ndarray = field(init=False)

    def __post_init__(self) -> None:
        self.capacity = self.mesh.capacity()
        if (self.inside is None) == (self.water is None):
            raise ValueError("give exactly one of an inside boundary or contents")

    @property
    def depends_on_temperature(self) -> bool:
        sides = [self.outside] + ([self.inside] if self.inside is not None else [])
        return (not self.mesh.is_linear) or any(s.depends_on_temperature for s in sides)


@dataclass
class _Coefficients:
    g: np.ndarray
    inside: SideCoefficients
    outside: SideCoefficients
    r_in: float
    r_out: float


@dataclass
class NonlinearResult:
    """Arrays at the output times, boundary heat totals and freezing events.

    ``q_in``/``q_out`` are heat into the construction through each surface
    [W per reference unit]; with contents, ``q_in`` is the heat from the
    contents into the bore.
    """

    time: np.ndarray
    temperature: np.ndarray
    q_in: np.ndarray
    q_out: np.ndarray
    film_in: np.ndarray
    film_out: np.ndarray
    t_eq_in: np.ndarray
    t_eq_out: np.ndarray
    surface_in: np.ndarray
    surface_out: np.ndarray
    contents_temperature: np.ndarray | None
    ice_fraction: np.ndarray | None
    heat_in: float
    heat_out: float
    heat_abs: float
    stored_initial: float
    stored_final: float
    stored: np.ndarray
    final: np.ndarray
    final_enthalpy: float
    initial_enthalpy: float
    unconverged_steps: int
    max_iterations_used: int
    time_to_freezing: float = math.nan        # [s] contents first at 0 degC
    time_to_ice_fraction: float = math.nan    # [s] ice fraction first at the target


class _Stepper:
    def __init__(self, system: NonlinearSystem, seconds: np.ndarray, mid_seconds: np.ndarray | None) -> None:
        self.s = system
        self.mesh = system.mesh
        self.cap = system.capacity
        self.f_out = system.outside.prepare(seconds)
        self.f_in = system.inside.prepare(seconds) if system.inside is not None else None
        self.m_out = system.outside.prepare(mid_seconds) if mid_seconds is not None else None
        self.m_in = (
            system.inside.prepare(mid_seconds) if (mid_seconds is not None and system.inside is not None) else None
        )
        self.unconverged = 0
        self.max_iter = 0
        self.k_const = self.mesh.conductivity() if self.mesh.is_linear else None
        self.pinned_water: float | None = None  # steady state: contents held at a temperature

    # ------------------------------------------------------------------ #
    def coefficients(self, temp: np.ndarray, tw: float, ts_in: float, ts_out: float, k: int, mid: bool) -> _Coefficients:
        kc = self.k_const if self.k_const is not None else self.mesh.conductivity(temp)
        g = self.mesh.conductances(kc)
        r_in, r_out = self.mesh.half_resistances(kc)
        fo = self.m_out if mid else self.f_out
        c_out = self.s.outside.coefficients(fo, k, ts_out, r_out)
        if self.s.inside is not None:
            fi = self.m_in if mid else self.f_in
            c_in = self.s.inside.coefficients(fi, k, ts_in, r_in)
        else:
            c_in = SideCoefficients(1.0 / (self.s.water_resistance + r_in), tw, 0.0)
        return _Coefficients(g, c_in, c_out, r_in, r_out)

    def energy(self, temp: np.ndarray, h_w: float) -> tuple[np.ndarray, float]:
        return self.cap * temp, h_w

    def net_heat(self, temp: np.ndarray, tw: float, c: _Coefficients) -> tuple[np.ndarray, float, float, float]:
        """F(T): net heat into each cell and into the contents; boundary heat in (in, out)."""
        f = np.zeros_like(temp)
        flow = c.g * (temp[:-1] - temp[1:])
        f[:-1] -= flow
        f[1:] += flow
        q_in = c.inside.conductance * (c.inside.t_ext if self.s.water is None else tw) - c.inside.conductance * temp[0] + c.inside.q
        q_out = c.outside.conductance * (c.outside.t_ext - temp[-1]) + c.outside.q
        f[0] += q_in
        f[-1] += q_out
        f_w = -q_in if self.s.water is not None else 0.0
        return f, f_w, q_in, q_out

    def stage(
        self,
        temp: np.ndarray,
        h_w: float,
        rhs: np.ndarray,
        rhs_w: float,
        a: float,
        k: int,
        mid: bool,
        surfaces: tuple[float, float],
        capacity: np.ndarray | None = None,
    ) -> tuple[np.ndarray, float, _Coefficients, tuple[float, float]]:
        """Solve E(T) - a F(T) = R by Picard iteration on the coefficients."""
        cap = self.cap if capacity is None else capacity
        water = self.s.water
        tw = float(water.state(h_w)[0]) if water is not None else math.nan
        if self.pinned_water is not None:
            tw = self.pinned_water
        ts_in, ts_out = surfaces
        new_t = temp
        for iteration in range(1, MAX_ITERATIONS + 1):
            c = self.coefficients(temp, tw, ts_in, ts_out, k, mid)
            d = np.zeros(temp.size)
            d[:-1] += c.g
            d[1:] += c.g
            d[0] += c.inside.conductance
            d[-1] += c.outside.conductance
            diag, off, info = lapack.dpttrf(cap + a * d, -a * c.g)
            if info != 0:
                raise np.linalg.LinAlgError(f"stage matrix not positive definite (info={info})")
            b = rhs.copy()
            b[-1] += a * (c.outside.conductance * c.outside.t_ext + c.outside.q)
            if water is None:
                b[0] += a * (c.inside.conductance * c.inside.t_ext + c.inside.q)
                new_t, _ = lapack.dpttrs(diag, off, b)
                new_h, new_tw = h_w, tw
            elif self.pinned_water is not None:
                b[0] += a * c.inside.conductance * tw
                new_t, _ = lapack.dpttrs(diag, off, b)
                new_h, new_tw = h_w, tw
            else:
                gw = c.inside.conductance
                t_a, _ = lapack.dpttrs(diag, off, b)
                unit = np.zeros(temp.size)
                unit[0] = a * gw
                t_b, _ = lapack.dpttrs(diag, off, unit)
                new_h = water.solve(a * gw * (1.0 - t_b[0]), rhs_w + a * gw * t_a[0])
                new_tw = float(water.state(new_h)[0])
                new_t = t_a + new_tw * t_b
            # surface temperatures from the heat into each face, with these coefficients
            q_in = c.inside.conductance * ((c.inside.t_ext if water is None else new_tw) - new_t[0]) + c.inside.q
            q_out = c.outside.conductance * (c.outside.t_ext - new_t[-1]) + c.outside.q
            ts_in = float(new_t[0] + q_in * c.r_in)
            ts_out = float(new_t[-1] + q_out * c.r_out)
            change = float(np.max(np.abs(new_t - temp)))
            if water is not None:
                change = max(change, abs(new_tw - tw))
            temp, tw, h_w = new_t, new_tw, new_h
            if not self.s.depends_on_temperature or change < TOLERANCE:
                break
        else:
            self.unconverged += 1
        self.max_iter = max(self.max_iter, iteration)
        return new_t, h_w, c, (ts_in, ts_out)


def steady_nonlinear(
    system: NonlinearSystem, t_water: float | None = None, surfaces_guess: float | None = None
) -> tuple[np.ndarray, _Coefficients]:
    """Steady state at time 0 (contents held at ``t_water``) [degC]."""
    stepper = _Stepper(system, np.array([0.0]), None)
    if system.water is not None:
        stepper.pinned_water = float(t_water)
    n = system.mesh.n
    guess = np.full(n, 20.0 if surfaces_guess is None else surfaces_guess)
    temp, _, c, _ = stepper.stage(guess, 0.0, np.zeros(n), 0.0, 1.0, 0, False, (guess[0], guess[-1]), capacity=np.zeros(n))
    if stepper.unconverged:
        warnings.warn("steady state: Picard iteration did not reach its tolerance", ConvergenceWarning, stacklevel=2)
    return temp, c


def march_nonlinear(
    system: NonlinearSystem,
    initial: np.ndarray,
    initial_water: float | None,
    step: float,
    n_steps: int,
    output_every: int = 1,
    scheme: str = "backward-euler",
    t0: float = 0.0,
    progress: Callable[[int], None] | None = None,
    ice_target: float = 0.25,
) -> NonlinearResult:
    """March a nonlinear system; see the module docstring for the stage equations.

    Parameters
    ----------
    initial : (n,) cell temperatures [degC]
    initial_water : float or None
        Contents temperature [degC] (liquid if above 0, ice if below).
    step : float
        [s]
    ice_target : float
        Ice fraction whose first crossing time is reported [-].
    """
    if scheme not in SCHEMES:
        raise ValueError(f"scheme must be one of {SCHEMES}")
    h = step
    seconds = t0 + h * np.arange(n_steps + 1)
    mids = seconds[:-1] + GAMMA * h if scheme == "tr-bdf2" else None
    st = _Stepper(system, seconds, mids)
    water = system.water
    temp = np.array(initial, dtype=float)
    h_w = water.enthalpy(initial_water) if water is not None else 0.0
    tw = float(water.state(h_w)[0]) if water is not None else math.nan

    n_out = n_steps // output_every + 1
    rec = {name: np.empty(n_out) for name in ("q_in", "q_out", "film_in", "film_out", "teq_in", "teq_out", "ts_in", "ts_out", "tw", "ice", "stored")}
    temps = np.empty((n_out, temp.size))

    # coefficients of the initial state (iterate the surface temperatures a few times)
    surfaces = (float(temp[0]), float(temp[-1]))
    for _ in range(MAX_ITERATIONS):
        c = st.coefficients(temp, tw, surfaces[0], surfaces[1], 0, False)
        _, _, qi, qo = st.net_heat(temp, tw, c)
        new = (float(temp[0] + qi * c.r_in), float(temp[-1] + qo * c.r_out))
        done = max(abs(new[0] - surfaces[0]), abs(new[1] - surfaces[1])) < TOLERANCE
        surfaces = new
        if done or not system.depends_on_temperature:
            break

    def record(j: int, temp: np.ndarray, h_w: float, c: _Coefficients, surfaces) -> None:
        _, _, qi, qo = st.net_heat(temp, float(water.state(h_w)[0]) if water is not None else math.nan, c)
        temps[j] = temp
        rec["q_in"][j], rec["q_out"][j] = qi, qo
        rec["film_in"][j], rec["film_out"][j] = c.inside.film, c.outside.film
        rec["teq_in"][j], rec["teq_out"][j] = c.inside.t_eq, c.outside.t_eq
        rec["ts_in"][j], rec["ts_out"][j] = surfaces
        if water is not None:
            t_w, ice = water.state(h_w)
            rec["tw"][j], rec["ice"][j] = float(t_w), float(ice)
        rec["stored"][j] = float(st.cap @ temp) + (h_w if water is not None else 0.0)

    record(0, temp, h_w, c, surfaces)
    stored0 = rec["stored"][0]
    heat_in = heat_out = heat_abs = 0.0
    freeze_t = ice_t = math.nan
    if water is not None and h_w <= 0.0:
        freeze_t = t0
    if water is not None and h_w <= -ice_target * water.latent:
        ice_t = t0
    report = max(1, n_steps // 200)
    j = 1
    g = GAMMA
    w2 = (1.0 - g) / (2.0 - g)
    a2 = 1.0 / (g * (2.0 - g))
    c2 = (1.0 - g) ** 2 / (g * (2.0 - g))
    h_before = math.nan  # the contents' enthalpy one step before the current one
    for k in range(n_steps):
        f0, fw0, qi0, qo0 = st.net_heat(temp, tw, c)
        e0 = st.cap * temp
        h_old = h_w
        if scheme == "backward-euler":
            new, h_new, c1, surfaces = st.stage(temp, h_w, e0, h_w, h, k + 1, False, surfaces)
            _, _, qi1, qo1 = st.net_heat(new, float(water.state(h_new)[0]) if water is not None else math.nan, c1)
            e_in, e_out = h * qi1, h * qo1
        elif scheme == "crank-nicolson":
            new, h_new, c1, surfaces = st.stage(temp, h_w, e0 + 0.5 * h * f0, h_w + 0.5 * h * fw0, 0.5 * h, k + 1, False, surfaces)
            _, _, qi1, qo1 = st.net_heat(new, float(water.state(h_new)[0]) if water is not None else math.nan, c1)
            e_in, e_out = 0.5 * h * (qi0 + qi1), 0.5 * h * (qo0 + qo1)
        else:
            mid, h_mid, cm, surf_m = st.stage(temp, h_w, e0 + 0.5 * g * h * f0, h_w + 0.5 * g * h * fw0, 0.5 * g * h, k, True, surfaces)
            _, _, qim, qom = st.net_heat(mid, float(water.state(h_mid)[0]) if water is not None else math.nan, cm)
            new, h_new, c1, surfaces = st.stage(
                mid, h_mid, a2 * st.cap * mid - c2 * e0, a2 * h_mid - c2 * h_w, w2 * h, k + 1, False, surf_m
            )
            _, _, qi1, qo1 = st.net_heat(new, float(water.state(h_new)[0]) if water is not None else math.nan, c1)
            e_in = a2 * 0.5 * g * h * (qi0 + qim) + w2 * h * qi1
            e_out = a2 * 0.5 * g * h * (qo0 + qom) + w2 * h * qo1
        if water is None:
            heat_in += e_in
            heat_abs += abs(e_in)
        heat_out += e_out
        heat_abs += abs(e_out)
        if water is not None:
            t_k = seconds[k]
            if math.isnan(freeze_t) and h_new <= 0.0 < h_old:
                # The enthalpy's rate changes at 0 degC (the pipe wall stops
                # cooling with the water), so interpolating across the step
                # is only first order; extrapolate with the liquid-side rate
                # of the step before (with TR-BDF2 at 15 min steps the error
                # against a 5 s-step run falls from about 1 min to about 5 s).
                if h_before > h_old:
                    freeze_t = t_k + min(h, h_old * h / (h_before - h_old))
                else:
                    freeze_t = t_k + h * h_old / (h_old - h_new)
            target = -ice_target * water.latent
            if math.isnan(ice_t) and h_new <= target < h_old:
                ice_t = t_k + h * (h_old - target) / (h_old - h_new)
        h_before = h_old
        temp, h_w, c = new, h_new, c1
        tw = float(water.state(h_w)[0]) if water is not None else math.nan
        if (k + 1) % output_every == 0:
            record(j, temp, h_w, c, surfaces)
            j += 1
        if progress is not None and (k + 1) % report == 0:
            progress(k + 1)
    if st.unconverged:
        warnings.warn(
            f"{st.unconverged} of {n_steps} steps stopped at {MAX_ITERATIONS} Picard iterations "
            f"before the {TOLERANCE:g} K tolerance",
            ConvergenceWarning,
            stacklevel=2,
        )
    return NonlinearResult(
        time=t0 + h * output_every * np.arange(n_out),
        temperature=temps,
        q_in=rec["q_in"],
        q_out=rec["q_out"],
        film_in=rec["film_in"],
        film_out=rec["film_out"],
        t_eq_in=rec["teq_in"],
        t_eq_out=rec["teq_out"],
        surface_in=rec["ts_in"],
        surface_out=rec["ts_out"],
        contents_temperature=rec["tw"] if water is not None else None,
        ice_fraction=rec["ice"] if water is not None else None,
        heat_in=heat_in,
        heat_out=heat_out,
        heat_abs=heat_abs,
        stored_initial=stored0,
        stored_final=float(st.cap @ temp) + (h_w if water is not None else 0.0),
        stored=rec["stored"],
        final=temp,
        final_enthalpy=h_w,
        initial_enthalpy=water.enthalpy(initial_water) if water is not None else 0.0,
        unconverged_steps=st.unconverged,
        max_iterations_used=st.max_iter,
        time_to_freezing=freeze_t,
        time_to_ice_fraction=ice_t,
    )
