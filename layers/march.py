"""The one time march: every scheme as stage coefficients of one formulation.

The finite-volume cells (and stagnant contents, if any) obey

    dE/dt = F(T, t),        E = C T for the cells, the enthalpy H for contents,

with F the net heat into each node: conduction between neighbours (the
symmetric tridiagonal conductance matrix K, which depends on T for k(T)
materials) and the boundary exchange of :mod:`layers.exchange` (which
depends on the surface temperature for automatic films).  A step of length
h from t is a sequence of stages; stage i, at t + c_i h, solves

    E_i - a_i h F(T_i, t + c_i h) = sum_j e_ij E_j + h sum_j f_ij F_j

where j runs over the start of the step (j = 0) and the earlier stages.
The schemes are rows of this table (:data:`SCHEMES`):

* backward Euler:  one stage, c = 1, a = 1, e = [1], f = [0]        (order 1, L-stable)
* Crank-Nicolson:  one stage, c = 1, a = 1/2, e = [1], f = [1/2]    (order 2, A-stable)
* TR-BDF2 (gamma = 2 - sqrt 2): a trapezoidal stage to t + gamma h
  (a = gamma/2, e = [1], f = [gamma/2]), then BDF2 to t + h
  (a = w = (1 - gamma)/(2 - gamma), e = [-(1-gamma)^2, 1] / (gamma (2 - gamma)),
  f = [0, 0])  (order 2, L-stable; Bank et al., IEEE Trans. Electron
  Devices 32, 1985; Hosea & Shampine, Appl. Numer. Math. 20, 1996).

Each stage is solved by a chord (modified Picard) iteration on the
residual: the coefficients are evaluated at the latest iterate, the
tridiagonal matrix C + a h K is refactorised (LAPACK ``dpttrf``) only
when a coefficient moved by more than :data:`REFACTOR_TOLERANCE` relative
to the factorised one, and each iteration costs one ``dpttrs`` solve.  When
no coefficient depends on temperature the first iteration is exact, and a
matrix that depends on neither temperature nor time is factorised once per
distinct stage weight for the whole run.  Stagnant contents are solved
exactly inside each iteration by superposition
(:meth:`layers.contents.WaterNode.solve`).

The heat through each boundary is tallied with the same stage weights
(Q_i = sum_j e_ij Q_j + h sum_j f_ij q_j + a_i h q_i), with the
coefficients of each stage's final solve, so the sum over all nodes of the
update telescopes and the energy balance closes at round-off.

Start smoothing (Rannacher, Numer. Math. 43, 1984): after a discontinuity
(a start from a temperature that the boundaries do not share, or a jump in
a boundary's drive between two steps) the next two steps are each taken as
two backward-Euler half steps.  This damps the stiff modes that
Crank-Nicolson and the trapezoidal stage of TR-BDF2 would otherwise carry
as overshoot and ringing, and keeps second order overall.

Boundary data are evaluated chunk by chunk (:data:`CHUNK` steps at a
time), never for the whole run at once.
"""

from __future__ import annotations

import math
import warnings
from collections.abc import Callable
from dataclasses import dataclass

import numpy as np
from scipy.linalg import lapack

from layers.contents import WaterNode
from layers.errors import ConvergenceWarning
from layers.exchange import Exchange
from layers.mesh import Mesh

GAMMA = 2.0 - math.sqrt(2.0)


@dataclass(frozen=True)
class Scheme:
    """One row of the scheme table (see the module docstring).

    Attributes
    ----------
    name : str
    order : int
        Order of accuracy in time.
    stage_time : tuple of float
        c_i, stage times as fractions of the step.
    implicit : tuple of float
        a_i, weight of the stage's own net heat (times h).
    energy : tuple of tuple of float
        e_ij, weights of the stored energy at the start (j = 0) and the earlier stages.
    heat : tuple of tuple of float
        f_ij, weights (times h) of the net heat at the start and the earlier stages.
    """

    name: str
    order: int
    stage_time: tuple[float, ...]
    implicit: tuple[float, ...]
    energy: tuple[tuple[float, ...], ...]
    heat: tuple[tuple[float, ...], ...]


_W = (1.0 - GAMMA) / (2.0 - GAMMA)
_D = GAMMA * (2.0 - GAMMA)
SCHEMES: dict[str, Scheme] = {
    "backward-euler": Scheme("backward-euler", 1, (1.0,), (1.0,), ((1.0,),), ((0.0,),)),
    "crank-nicolson": Scheme("crank-nicolson", 2, (1.0,), (0.5,), ((1.0,),), ((0.5,),)),
    "tr-bdf2": Scheme(
        "tr-bdf2", 2, (GAMMA, 1.0), (0.5 * GAMMA, _W),
        ((1.0,), (-((1.0 - GAMMA) ** 2) / _D, 1.0 / _D)),
        ((0.5 * GAMMA,), (0.0, 0.0)),
    ),
}
#: What ``scheme = "auto"`` (the default) means until the exact path exists.
DEFAULT_SCHEME = "tr-bdf2"
SCHEME_NAMES = ("auto", *SCHEMES)

#: A stage's iteration stops when no temperature changes by more than this [K].
TOLERANCE = 1e-6
MAX_ITERATIONS = 50
#: Refactorise when a matrix entry moved by more than this, relative [-].
REFACTOR_TOLERANCE = 1e-4
#: A step over which a boundary's drive changes by more than JUMP [K] and by
#: more than JUMP_RATIO times its change over either neighbouring step is a
#: jump; it and the next step are smoothed (our choice: a sampled smooth
#: cycle changes by about as much from one step to the next, a jump does not).
JUMP = 1.0
JUMP_RATIO = 4.0
#: Boundary data are evaluated this many steps at a time.
CHUNK = 1024


def resolve_scheme(name: str) -> Scheme:
    """The scheme a case's ``scheme`` key stands for (``auto``: :data:`DEFAULT_SCHEME`)."""
    return SCHEMES[DEFAULT_SCHEME if name == "auto" else name]


@dataclass
class System:
    """What the march integrates: the cells, both boundaries and optional contents.

    Parameters
    ----------
    mesh : Mesh
    inside, outside : Exchange
        The boundaries; ``inside.kind == "contents"`` couples the lumped
        ``water`` node through the film of ``inside``.
    water : WaterNode or None
    """

    mesh: Mesh
    inside: Exchange
    outside: Exchange
    water: WaterNode | None = None

    def __post_init__(self) -> None:
        mesh = self.mesh
        self.capacity = mesh.capacity()
        self.constant_k = mesh.is_linear
        self.depends_on_temperature = (not mesh.is_linear) or self.inside.depends_on_temperature or self.outside.depends_on_temperature
        self.area_in, self.area_out = mesh.area_inside, mesh.area_outside
        self.diameter_in = 2.0 * mesh.inner_radius
        self.diameter_out = 2.0 * (mesh.inner_radius + mesh.total_thickness) if mesh.geometry != "planar" else mesh.total_thickness
        if self.constant_k:
            k = mesh.conductivity()
            self._k, self._g, self._halves = k, mesh.conductances(k), mesh.half_resistances(k)

    def conduction(self, temperature: np.ndarray) -> tuple[np.ndarray, np.ndarray, tuple[float, float]]:
        """Cell conductivities [W m-1 K-1], conductances [W K-1 per ref. unit] and the two half-cell resistances."""
        if self.constant_k:
            return self._k, self._g, self._halves
        k = self.mesh.conductivity(temperature)
        return k, self.mesh.conductances(k), self.mesh.half_resistances(k)


@dataclass
class _Side:
    """One boundary's coefficients at an iterate: heat in = G (t_ext - T_cell) + q."""

    conductance: float
    t_ext: float
    q: float
    film: float       # surface coefficient [W m-2 K-1] (NaN where not a film)
    t_eq: float       # equivalent temperature [degC]


@dataclass
class _Coefficients:
    k: np.ndarray
    g: np.ndarray
    r_in: float
    r_out: float
    inside: _Side
    outside: _Side


class _Drive:
    """One boundary's forcing over a chunk of steps, at every stage fraction."""

    def __init__(self, exchange: Exchange, area: float, diameter: float) -> None:
        self.exchange, self.area, self.diameter = exchange, area, diameter
        self.dependent = exchange.depends_on_temperature
        self.is_film = exchange.kind == "film"

    def load(self, seconds: np.ndarray) -> None:
        self.use(self.exchange.forcing(seconds), seconds.shape)

    def use(self, forcing: dict[str, np.ndarray], shape: tuple[int, ...]) -> None:
        self.forcing = forcing
        self._index = -1
        seconds = np.zeros(shape)
        if not self.dependent:
            film = self.exchange.film(self.forcing, np.zeros(seconds.shape), self.diameter)
            self.h = np.broadcast_to(film.h, seconds.shape)
            self.t_eq = np.broadcast_to(film.t_eq, seconds.shape)
            self.q = np.broadcast_to(film.q_imposed, seconds.shape)

    def at(self, i: int, t_surface: float, r_half: float, contents: float = math.nan) -> _Side:
        if self.dependent:
            if i != self._index:  # the forcing of one stage, picked once for all its iterations
                self._index, self._values = i, {name: float(values[i]) for name, values in self.forcing.items()}
            film = self.exchange.film(self._values, t_surface, self.diameter)
            h, t_eq, q = float(film.h), float(film.t_eq), float(film.q_imposed)
        else:
            h, t_eq, q = float(self.h[i]), float(self.t_eq[i]), float(self.q[i])
        if self.exchange.kind == "contents":
            t_eq = contents
        film = h if self.is_film else math.nan
        if math.isinf(h):
            return _Side(1.0 / r_half, t_eq, 0.0, film, t_eq)
        if h > 0.0:
            return _Side(1.0 / (1.0 / (h * self.area) + r_half), t_eq + q / h, 0.0, film, t_eq)
        return _Side(0.0, 0.0, q * self.area, film, t_eq)


class _Factor:
    """L D L^T factors of C + a K (symmetric positive definite, tridiagonal)."""

    def __init__(self, diag: np.ndarray, off: np.ndarray) -> None:
        self.diag, self.off = diag, off
        self.d, self.e, info = lapack.dpttrf(diag, off)
        if info != 0:
            raise np.linalg.LinAlgError(f"stage matrix not positive definite (dpttrf info={info})")
        self.unit_response: np.ndarray | None = None  # contents: response to a unit source at cell 0

    def solve(self, rhs: np.ndarray) -> np.ndarray:
        x, info = lapack.dpttrs(self.d, self.e, rhs)
        if info != 0:
            raise np.linalg.LinAlgError(f"dpttrs failed (info={info})")
        return x

    def close_to(self, diag: np.ndarray, off: np.ndarray) -> bool:
        return bool(
            np.all(np.abs(diag - self.diag) <= REFACTOR_TOLERANCE * np.abs(self.diag))
            and np.all(np.abs(off - self.off) <= REFACTOR_TOLERANCE * np.abs(self.off) + 1e-300)
        )


@dataclass
class MarchResult:
    """Arrays at the output times, boundary heat totals and freezing events.

    ``q_in``/``q_out`` are heat into the construction through each surface
    [W per reference unit]; with contents, ``q_in`` is the heat from the
    contents into the bore.  ``heat_in``/``heat_out`` are their totals over
    the march from the scheme's own fluxes [J per reference unit].
    """

    time: np.ndarray
    temperature: np.ndarray
    interface_temperature: np.ndarray
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
    stored: np.ndarray
    stored_initial: float
    stored_final: float
    final: np.ndarray
    final_enthalpy: float
    initial_enthalpy: float
    unconverged_steps: int
    max_iterations_used: int
    smoothed_steps: int
    factorisations: int
    drive_range: tuple[float, float]          # [degC] initial state and every boundary temperature met
    time_to_freezing: float = math.nan        # [s] contents first at 0 degC
    time_to_ice_fraction: float = math.nan    # [s] ice fraction first at the target


class _Stepper:
    """The stage solver and the state it carries between stages."""

    def __init__(self, system: System, scheme: Scheme) -> None:
        self.s = system
        self.scheme = scheme
        self.drive_in = _Drive(system.inside, system.area_in, system.diameter_in)
        self.drive_out = _Drive(system.outside, system.area_out, system.diameter_out)
        self.factors: dict[float, _Factor] = {}
        self.factorisations = 0
        self.unconverged = 0
        self.max_iter = 0
        self.fixed_matrix = not system.depends_on_temperature
        if system.constant_k:
            # the interior of K never changes: only the two boundary conductances can
            g = system._g
            self.k_interior = np.zeros(system.capacity.size)
            self.k_interior[:-1] += g
            self.k_interior[1:] += g

    # -------------------------------------------------------------- coefficients
    def coefficients(self, temp: np.ndarray, tw: float, surfaces: tuple[float, float], i: int) -> _Coefficients:
        k, g, (r_in, r_out) = self.s.conduction(temp)
        inside = self.drive_in.at(i, surfaces[0], r_in, tw)
        outside = self.drive_out.at(i, surfaces[1], r_out)
        return _Coefficients(k, g, r_in, r_out, inside, outside)

    def net_heat(self, temp: np.ndarray, tw: float, c: _Coefficients) -> tuple[np.ndarray, float, float, float]:
        """F(T): net heat into each cell and into the contents; boundary heat in (inside, outside)."""
        q_in, q_out = self.boundary_heat(temp, c)
        flow = c.g * (temp[:-1] - temp[1:])
        f = np.empty_like(temp)
        f[:-1] = -flow
        f[-1] = 0.0
        f[1:] += flow
        f[0] += q_in
        f[-1] += q_out
        return f, (-q_in if self.s.water is not None else 0.0), q_in, q_out

    @staticmethod
    def boundary_heat(temp: np.ndarray, c: _Coefficients) -> tuple[float, float]:
        """Heat into the construction through the inside and the outside surface [W per reference unit]."""
        i, o = c.inside, c.outside
        return i.conductance * (i.t_ext - float(temp[0])) + i.q, o.conductance * (o.t_ext - float(temp[-1])) + o.q

    @staticmethod
    def surfaces(temp: np.ndarray, c: _Coefficients, q_in: float, q_out: float) -> tuple[float, float]:
        return float(temp[0] + q_in * c.r_in), float(temp[-1] + q_out * c.r_out)

    def _factor(self, a: float, c: _Coefficients) -> _Factor:
        cached = self.factors.get(a)
        if cached is not None and self.fixed_matrix:
            return cached
        g_in, g_out = c.inside.conductance, c.outside.conductance
        if cached is not None and self.s.constant_k:
            # only the boundary conductances move: compare them on the diagonal
            base_in = cached.diag[0] - a * cached.gw  # type: ignore[attr-defined]
            base_out = cached.diag[-1] - a * cached.g_out  # type: ignore[attr-defined]
            if (abs(a * (g_in - cached.gw)) <= REFACTOR_TOLERANCE * (base_in + a * cached.gw)  # type: ignore[attr-defined]
                    and abs(a * (g_out - cached.g_out)) <= REFACTOR_TOLERANCE * (base_out + a * cached.g_out)):  # type: ignore[attr-defined]
                return cached
        if self.s.constant_k:
            d = self.k_interior.copy()
        else:
            d = np.zeros(self.s.capacity.size)
            d[:-1] += c.g
            d[1:] += c.g
        d[0] += g_in
        d[-1] += g_out
        diag = self.s.capacity + a * d
        off = -a * c.g
        if cached is not None and not self.s.constant_k and cached.close_to(diag, off):
            return cached
        factor = _Factor(diag, off)
        factor.gw = c.inside.conductance  # type: ignore[attr-defined]
        factor.g_out = c.outside.conductance  # type: ignore[attr-defined]
        self.factors[a] = factor
        self.factorisations += 1
        return factor

    # -------------------------------------------------------------- one stage
    def stage(self, temp, h_w, rhs, rhs_w, a, i, surfaces):
        """Solve E(T) - a F(T) = R at forcing index ``i``; returns (T, H, coefficients, surfaces, q_in, q_out)."""
        water = self.s.water
        cap = self.s.capacity
        tw = float(water.state(h_w)[0]) if water is not None else math.nan
        for iteration in range(1, MAX_ITERATIONS + 1):
            c = self.coefficients(temp, tw, surfaces, i)
            f, _, _, _ = self.net_heat(temp, tw, c)
            residual = rhs + a * f - cap * temp
            factor = self._factor(a, c)
            delta = factor.solve(residual)
            if water is None:
                new_t, new_h, new_tw = temp + delta, h_w, tw
            else:
                gw, gw_f = c.inside.conductance, factor.gw  # type: ignore[attr-defined]
                if factor.unit_response is None:
                    unit = np.zeros(temp.size)
                    unit[0] = a * gw_f
                    factor.unit_response = factor.solve(unit)
                tb = factor.unit_response
                t0 = temp[0]
                rhs_water = rhs_w - a * (gw - gw_f) * (tw - t0) + a * gw_f * (t0 + delta[0] - tw * tb[0])
                new_h = water.solve(a * gw_f * (1.0 - tb[0]), rhs_water)
                new_tw = float(water.state(new_h)[0])
                new_t = temp + delta + (new_tw - tw) * tb
            change = float(np.max(np.abs(new_t - temp)))
            if water is not None:
                change = max(change, abs(new_tw - tw))
            # The chord step solved with the factorised boundary conductances:
            # the heat that crossed each boundary in this solve differs from
            # q(T_new) by (G - G_factorised) times the change, and the tally
            # takes that, so the energy balance closes at round-off.
            chord_in = (c.inside.conductance - factor.gw) * (new_t[0] - temp[0])  # type: ignore[attr-defined]
            chord_out = (c.outside.conductance - factor.g_out) * (new_t[-1] - temp[-1])  # type: ignore[attr-defined]
            temp, h_w, tw = new_t, new_h, new_tw
            if water is not None:
                c.inside.t_ext = tw
            q_in, q_out = self.boundary_heat(temp, c)
            surfaces = self.surfaces(temp, c, q_in, q_out)
            if (self.fixed_matrix and iteration >= 1) or change < TOLERANCE:
                break
        else:
            self.unconverged += 1
        self.max_iter = max(self.max_iter, iteration)
        return temp, h_w, c, surfaces, q_in + chord_in, q_out + chord_out


def _fractions(scheme: Scheme) -> tuple[float, ...]:
    """Every fraction of a step at which forcing is needed (start, stages, half steps)."""
    return tuple(sorted({0.0, 0.5, 1.0, *scheme.stage_time}))


def march(
    system: System,
    initial: np.ndarray,
    step: float,
    n_steps: int,
    *,
    output_every: int = 1,
    scheme: str | Scheme = DEFAULT_SCHEME,
    t0: float = 0.0,
    initial_water: float | None = None,
    smooth_start: bool = False,
    ice_target: float = 0.25,
    progress: Callable[[int], None] | None = None,
) -> MarchResult:
    """March ``system`` ``n_steps`` steps of ``step`` seconds.

    Parameters
    ----------
    system : System
    initial : (n,) initial cell temperatures [degC]
    step : float
        Time step [s].
    n_steps : int
    output_every : int
        Keep every ``output_every``-th state (the initial state is kept).
    scheme : str or Scheme
        A name of :data:`SCHEMES` (or ``"auto"``).
    t0 : float
        Time of the initial state, in seconds from the case start [s].
    initial_water : float, optional
        Contents temperature at the start [degC] (liquid above 0 degC, ice below).
    smooth_start : bool
        Smooth the first two steps (a start that the boundaries do not share).
    ice_target : float
        Ice fraction whose first crossing time is reported [-].
    progress : callable, optional
        Called with the number of steps done, now and then.
    """
    sch = scheme if isinstance(scheme, Scheme) else resolve_scheme(scheme)
    st = _Stepper(system, sch)
    water = system.water
    h = step
    fractions = _fractions(sch)
    n_frac = len(fractions)
    index = {c: p for p, c in enumerate(fractions)}
    temp = np.array(initial, dtype=float)
    h_w = water.enthalpy(initial_water) if water is not None else 0.0
    h_initial = h_w
    tw = float(water.state(h_w)[0]) if water is not None else math.nan
    mesh = system.mesh

    n_out = n_steps // output_every + 1
    temps = np.empty((n_out, temp.size))
    faces = np.empty((n_out, mesh.interfaces.size))
    names = ("q_in", "q_out", "film_in", "film_out", "teq_in", "teq_out", "ts_in", "ts_out", "tw", "ice", "stored")
    rec = {name: np.empty(n_out) for name in names}

    chunk_start = -1

    def load(k: int) -> None:
        """Forcing for steps k .. k + CHUNK - 1 at every fraction, and the jump flags."""
        nonlocal chunk_start, rough
        m = min(CHUNK, n_steps - k) if n_steps > k else 1
        seconds = t0 + h * (k + np.arange(m)[:, None] + np.array(fractions)[None, :])
        st.drive_in.load(seconds.ravel())
        st.drive_out.load(seconds.ravel())
        for drive in (st.drive_in, st.drive_out):
            for name in ("air", "radiant", "surface", "contents", "sky"):
                if name in drive.forcing:
                    drive_range[0] = min(drive_range[0], float(np.min(drive.forcing[name])))
                    drive_range[1] = max(drive_range[1], float(np.max(drive.forcing[name])))
        chunk_start = k
        # node values k-1 .. k+m+1 of what drives each side, for the jump test:
        # a step whose change exceeds JUMP and JUMP_RATIO times the change of
        # both neighbouring steps is a jump; it and the next step are smoothed
        node_t = t0 + h * np.clip(np.arange(k - 1, k + m + 2), 0, n_steps)
        rough = np.zeros(m, dtype=bool)
        for ex in (system.inside, system.outside):
            x = np.broadcast_to(ex.drive_temperature(ex.forcing(node_t)), node_t.shape)
            d1 = np.abs(np.diff(x))  # steps k-1 .. k+m
            neighbours = np.maximum(d1[:-2], d1[2:])
            jump = (d1[1:-1] > JUMP) & (d1[1:-1] > JUMP_RATIO * neighbours)
            # only between two real neighbouring steps (the start has its own rule)
            steps = np.arange(k, k + m)
            jump &= (steps > 0) & (steps < n_steps - 1)
            rough |= jump
            rough[1:] |= jump[:-1]
        if k > 0 and previous_jump:
            rough[0] = True
    rough = np.zeros(0, dtype=bool)
    previous_jump = False
    drive_range = [float(np.min(temp)), float(np.max(temp))]  # initial state and boundary temperatures

    def flat(k: int, c: float) -> int:
        return (k - chunk_start) * n_frac + index[c]

    load(0)
    # coefficients at the initial state: iterate the surface temperatures to consistency
    surfaces = (float(temp[0]), float(temp[-1]))
    for _ in range(MAX_ITERATIONS):
        c = st.coefficients(temp, tw, surfaces, flat(0, 0.0))
        _, _, qi, qo = st.net_heat(temp, tw, c)
        new = st.surfaces(temp, c, qi, qo)
        done = max(abs(new[0] - surfaces[0]), abs(new[1] - surfaces[1])) < TOLERANCE
        surfaces = new
        if done or not system.depends_on_temperature:
            break

    def record(j: int, temp: np.ndarray, h_w: float, c: _Coefficients, surfaces, q_in: float, q_out: float) -> None:
        temps[j] = temp
        faces[j] = mesh.interface_temperatures(temp, c.k, c.g, q_in, q_out)
        rec["q_in"][j], rec["q_out"][j] = q_in, q_out
        rec["film_in"][j], rec["film_out"][j] = c.inside.film, c.outside.film
        rec["teq_in"][j], rec["teq_out"][j] = c.inside.t_eq, c.outside.t_eq
        rec["ts_in"][j], rec["ts_out"][j] = surfaces
        if water is not None:
            t_w, ice = water.state(h_w)
            rec["tw"][j], rec["ice"][j] = float(t_w), float(ice)
        rec["stored"][j] = float(system.capacity @ temp) + (h_w if water is not None else 0.0)

    f0, fw0, qi0, qo0 = st.net_heat(temp, tw, c)
    record(0, temp, h_w, c, surfaces, qi0, qo0)
    stored0 = rec["stored"][0]
    heat_in = heat_out = heat_abs = 0.0
    freeze_t = ice_t = math.nan
    if water is not None and h_w <= 0.0:
        freeze_t = t0
    if water is not None and h_w <= -ice_target * water.latent:
        ice_t = t0
    report = max(1, n_steps // 200)
    smoothed = 0
    h_before = math.nan  # the contents' enthalpy one step before the current one
    j = 1
    for k in range(n_steps):
        if k - chunk_start >= rough.size:
            previous_jump = bool(rough.size and rough[-1])
            load(k)
        h_old = h_w
        previous_state = temp
        smooth = sch.name != "backward-euler" and (rough[k - chunk_start] or (smooth_start and k < 2))
        if smooth:
            smoothed += 1
            # two backward-Euler half steps
            q_step_in = q_step_out = 0.0
            for half in (0.5, 1.0):
                e0 = system.capacity * temp
                temp, h_w, c, surfaces, qi, qo = st.stage(temp, h_w, e0, h_w, 0.5 * h, flat(k, half), surfaces)
                q_step_in += 0.5 * h * qi
                q_step_out += 0.5 * h * qo
            tw = float(water.state(h_w)[0]) if water is not None else math.nan
            f0, fw0, qi0, qo0 = st.net_heat(temp, tw, c)
            e_in, e_out = q_step_in, q_step_out
        else:
            energies = [system.capacity * temp]
            energies_w = [h_w]
            heats, heats_w = [f0], [fw0]
            tally_in, tally_out = [0.0], [0.0]
            flux_in, flux_out = [qi0], [qo0]
            stage_h = h_w
            # first iterate: the state extrapolated from the last step (fewer iterations when
            # coefficients depend on temperature; the converged stage does not depend on it)
            stage_t = temp + sch.stage_time[0] * (temp - previous) if system.depends_on_temperature and k > 0 else temp
            for s, c_s in enumerate(sch.stage_time):
                e_row, f_row, a_s = sch.energy[s], sch.heat[s], sch.implicit[s]
                rhs = sum(w * e for w, e in zip(e_row, energies) if w) + h * sum(w * f for w, f in zip(f_row, heats) if w)
                rhs_w = sum(w * e for w, e in zip(e_row, energies_w)) + h * sum(w * f for w, f in zip(f_row, heats_w))
                stage_t, stage_h, c, surfaces, qi, qo = st.stage(stage_t, stage_h, rhs, rhs_w, a_s * h, flat(k, c_s), surfaces)
                q_prev_in = sum(w * q for w, q in zip(e_row, tally_in)) + h * sum(w * q for w, q in zip(f_row, flux_in))
                q_prev_out = sum(w * q for w, q in zip(e_row, tally_out)) + h * sum(w * q for w, q in zip(f_row, flux_out))
                tally_in.append(q_prev_in + a_s * h * qi)
                tally_out.append(q_prev_out + a_s * h * qo)
                if s + 1 < len(sch.stage_time):
                    tw_s = float(water.state(stage_h)[0]) if water is not None else math.nan
                    f_s, fw_s, _, _ = st.net_heat(stage_t, tw_s, c)
                    energies.append(system.capacity * stage_t)
                    energies_w.append(stage_h)
                    heats.append(f_s)
                    heats_w.append(fw_s)
                    flux_in.append(qi)
                    flux_out.append(qo)
            temp, h_w = stage_t, stage_h
            tw = float(water.state(h_w)[0]) if water is not None else math.nan
            f0, fw0, qi0, qo0 = st.net_heat(temp, tw, c)
            e_in, e_out = tally_in[-1], tally_out[-1]
        if water is None:
            heat_in += e_in
            heat_abs += abs(e_in)
        heat_out += e_out
        heat_abs += abs(e_out)
        if water is not None:
            t_k = t0 + k * h
            if math.isnan(freeze_t) and h_w <= 0.0 < h_old:
                # The enthalpy's rate changes at 0 degC (the pipe wall stops
                # cooling with the water), so interpolating across the step
                # is only first order; extrapolate with the liquid-side rate
                # of the step before.
                if h_before > h_old:
                    freeze_t = t_k + min(h, h_old * h / (h_before - h_old))
                else:
                    freeze_t = t_k + h * h_old / (h_old - h_w)
            target = -ice_target * water.latent
            if math.isnan(ice_t) and h_w <= target < h_old:
                ice_t = t_k + h * (h_old - target) / (h_old - h_w)
        h_before = h_old
        previous = previous_state
        if (k + 1) % output_every == 0:
            # the boundary flows the scheme took at the end of the step (they
            # differ from those of the state by at most the chord's iteration
            # tolerance times a conductance change below REFACTOR_TOLERANCE)
            record(j, temp, h_w, c, surfaces, qi, qo)
            j += 1
        if progress is not None and ((k + 1) % report == 0 or k == 0):
            progress(k + 1)
    if st.unconverged:
        warnings.warn(
            f"{st.unconverged} of {n_steps} steps stopped at {MAX_ITERATIONS} iterations "
            f"before the {TOLERANCE:g} K tolerance",
            ConvergenceWarning,
            stacklevel=2,
        )
    return MarchResult(
        time=t0 + h * output_every * np.arange(n_out),
        temperature=temps,
        interface_temperature=faces,
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
        stored=rec["stored"],
        stored_initial=stored0,
        stored_final=float(system.capacity @ temp) + (h_w if water is not None else 0.0),
        final=temp,
        final_enthalpy=h_w,
        initial_enthalpy=h_initial,
        unconverged_steps=st.unconverged,
        max_iterations_used=st.max_iter,
        smoothed_steps=smoothed,
        drive_range=(drive_range[0], drive_range[1]),
        factorisations=st.factorisations,
        time_to_freezing=freeze_t,
        time_to_ice_fraction=ice_t,
    )


def settle(system: System, guess: np.ndarray, t0: float = 0.0, t_water: float | None = None) -> np.ndarray:
    """The march's own steady state (F(T) = 0 on the mesh) at time ``t0`` [degC].

    :func:`layers.steady.cell_temperatures` gives the exact steady profile at
    the cell centres; for a constant conductivity that already is the mesh's
    steady state, and for k(T) the mesh's own state differs from it by the
    discretisation error.  A run that starts "steady" must not drift, so
    this polishes the exact profile into the discrete one by iterating
    K(T) T = b(T) (contents held at ``t_water``).
    """
    st = _Stepper(system, SCHEMES["backward-euler"])
    st.drive_in.load(np.array([t0]))
    st.drive_out.load(np.array([t0]))
    temp = np.array(guess, dtype=float)
    tw = math.nan if t_water is None else float(t_water)
    surfaces = (float(temp[0]), float(temp[-1]))
    zero = np.zeros(temp.size)
    for _ in range(MAX_ITERATIONS):
        c = st.coefficients(temp, tw, surfaces, 0)
        f, _, q_in, q_out = st.net_heat(temp, tw, c)
        surfaces = st.surfaces(temp, c, q_in, q_out)
        d = np.zeros(temp.size)
        d[:-1] += c.g
        d[1:] += c.g
        d[0] += c.inside.conductance
        d[-1] += c.outside.conductance
        delta = _Factor(zero + d, -c.g).solve(f)
        temp = temp + delta
        if float(np.max(np.abs(delta))) < TOLERANCE:
            break
    else:
        warnings.warn("steady start: iteration did not reach its tolerance", ConvergenceWarning, stacklevel=2)
    return temp


# ---------------------------------------------------------------------- periodic start

#: The periodic start repeats the first period until no cell changes by more than this [K].
PERIODIC_TOLERANCE = 1e-3
PERIODIC_MAX_CYCLES = 2000


def periodic_settled(change: float, previous: float | None) -> bool:
    """Whether repeating the period can stop.

    The change from one cycle to the next must be below
    :data:`PERIODIC_TOLERANCE` everywhere, and so must the change still to
    come: the slowest mode decays geometrically, by r = change / previous a
    cycle, so the distance left to the periodic state is change r / (1 - r).
    That exceeds the last change once r > 0.5, i.e. for a construction whose
    slowest mode decays by less than half a period (a 600 mm brick wall
    under a daily cycle: r = 0.41, measured).

    Parameters
    ----------
    change, previous : float
        Largest change over the last and the cycle before [K]; ``previous``
        None after the first cycle.
    """
    if change >= PERIODIC_TOLERANCE:
        return False
    if previous is None or previous <= change:
        return True  # already settled on the first cycle, or down to round-off
    r = change / previous
    return change * r / (1.0 - r) < PERIODIC_TOLERANCE


def periodic_start(system: System, state: np.ndarray, step: float, steps: int, scheme: str | Scheme) -> tuple[np.ndarray, int]:
    """Repeat the first period (``steps`` steps) from ``state`` until it repeats itself.

    Returns the cell temperatures at the start of the periodic state [degC]
    and the number of cycles used.
    """
    previous = None
    change = math.inf
    for cycle in range(1, PERIODIC_MAX_CYCLES + 1):
        out = march(system, state, step, steps, output_every=steps, scheme=scheme)
        change = float(np.max(np.abs(out.final - state)))
        state = out.final
        if periodic_settled(change, previous):
            return state, cycle
        previous = change
    warnings.warn(
        f"periodic initial state: change still {change:.2g} K after {PERIODIC_MAX_CYCLES} cycles",
        ConvergenceWarning,
        stacklevel=2,
    )
    return state, PERIODIC_MAX_CYCLES
