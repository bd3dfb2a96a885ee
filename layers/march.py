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

from layers.constants import ABSOLUTE_ZERO_CELSIUS, HIGHEST_PHYSICAL_TEMPERATURE
from layers.contents import WaterNode
from layers.errors import CaseError, ConvergenceWarning
from layers.exchange import Exchange, SurfaceFilm, thevenin
from layers.mesh import Mesh

from layers.schemes import DEFAULT_SCHEME, SCHEMES, Scheme, resolve_scheme

#: A stage's iteration stops when no temperature changes by more than this [K].
TOLERANCE = 1e-6
MAX_ITERATIONS = 50
#: Refactorise when a matrix entry moved by more than this, relative [-].
REFACTOR_TOLERANCE = 1e-4
#: A step over which a boundary's drive changes by more than the scheme's
#: ``jump`` [K] and by more than JUMP_RATIO times its change over either
#: neighbouring step is a jump; it and the next step are smoothed (our choice:
#: a sampled smooth cycle changes by about as much from one step to the next,
#: a jump does not).
JUMP_RATIO = 4.0
#: Boundary data are evaluated this many steps at a time.
CHUNK = 1024


class UnphysicalState(ArithmeticError):
    """The march left the physical range: not finite, at or below absolute zero,
    or above :data:`HIGHEST_PHYSICAL_TEMPERATURE`.

    Attributes
    ----------
    time : float
        When [s from the case start].
    low, high : float
        The coldest and hottest cell [degC] (NaN where not finite).
    q_in, q_out : float
        Heat into the construction through each surface at that state [W per reference unit].
    """

    def __init__(self, time: float, low: float, high: float, q_in: float, q_out: float) -> None:
        super().__init__(f"state outside the physical range at t = {time:g} s ({low:g} .. {high:g} degC)")
        self.time, self.low, self.high, self.q_in, self.q_out = time, low, high, q_in, q_out


class BadConductivity(ArithmeticError):
    """A cell's k(T) is zero, negative or not a number at its temperature."""

    def __init__(self, material: str, layer: int, temperature: float, conductivity: float) -> None:
        super().__init__(f"{material}: k = {conductivity:g} W/(m K) at {temperature:g} degC")
        self.material, self.layer, self.temperature, self.conductivity = material, layer, temperature, conductivity


def _check_physical(state_temperature: np.ndarray, contents: float, time: float, q_in: float, q_out: float) -> None:
    low, high = float(state_temperature.min()), float(state_temperature.max())
    if not math.isnan(contents):
        low, high = min(low, contents), max(high, contents)
    if not (low > ABSOLUTE_ZERO_CELSIUS and high < HIGHEST_PHYSICAL_TEMPERATURE):  # also catches NaN
        raise UnphysicalState(time, low, high, q_in, q_out)


def _check_batch(batch: _Batch, temp: np.ndarray, contents: float, time: float, q_in: np.ndarray, q_out: np.ndarray) -> None:
    """:func:`_check_physical` for every member; the exception's ``member`` says which."""
    if batch.size == 1:
        _check_physical(temp, contents, time, float(q_in), float(q_out))
        return
    low, high = float(temp.min()), float(temp.max())
    if low > ABSOLUTE_ZERO_CELSIUS and high < HIGHEST_PHYSICAL_TEMPERATURE:
        return
    for i, part in enumerate(batch.slices):
        try:
            _check_physical(temp[part], math.nan, time, float(q_in[i]), float(q_out[i]))
        except UnphysicalState as exc:
            exc.member = i
            raise


def _all(test) -> bool:
    """Whether a comparison of one member's numbers (a bool) or of every member's (an array) holds."""
    return bool(test) if isinstance(test, (bool, np.bool_)) else bool(test.all())


class _Batch:
    """Members marched together as one tridiagonal system: their cells laid end to
    end, with no conductance between one member's last cell and the next one's
    first, so that one LAPACK factorisation and solve serve them all and each
    member's numbers are those it would have alone.  Members share their
    boundaries' forcing (the exchange models of the first); each keeps its own
    mesh, areas and diameters.  Contents are marched one member at a time."""

    def __init__(self, systems: list[System]) -> None:
        if not systems:
            raise ValueError("an empty batch")
        if len(systems) > 1 and any(s.water is not None for s in systems):
            raise ValueError("contents are marched one member at a time")
        first = systems[0]
        self.systems, self.size = systems, len(systems)
        self.inside, self.outside, self.water = first.inside, first.outside, first.water
        cells = np.array([s.mesh.n for s in systems])
        ends = np.cumsum(cells)
        self.start, self.end = ends - cells, ends - 1           # each member's first and last cell
        self.slices = [slice(int(a), int(b) + 1) for a, b in zip(self.start, self.end)]
        self.capacity = np.concatenate([s.capacity for s in systems])
        self.constant_k = all(s.constant_k for s in systems)
        self.depends_on_temperature = any(s.depends_on_temperature for s in systems)
        # per-member numbers: plain floats and cell numbers for a batch of one
        # (the march's common case, whose cost is mostly per-operation), arrays otherwise
        one = self.size == 1
        self.area_in, self.area_out, self.diameter_in, self.diameter_out = (
            float(getattr(first, name)) if one else np.array([getattr(s, name) for s in systems], dtype=float)
            for name in ("area_in", "area_out", "diameter_in", "diameter_out"))
        self.first, self.last = (int(self.start[0]), int(self.end[0])) if one else (self.start, self.end)
        self.ends = np.concatenate([self.start, self.end])      # every surface cell
        self._junction = np.ones(int(ends[-1]) - 1, dtype=bool)
        self._junction[self.end[:-1]] = False                   # the faces between members
        if self.constant_k:
            self._fixed = (first._k, first._g, first._halves) if one else self._stack([(s._k, s._g, s._halves) for s in systems])

    def _stack(self, parts) -> tuple[np.ndarray, np.ndarray, tuple[np.ndarray, np.ndarray]]:
        k = np.concatenate([p[0] for p in parts])
        g = np.zeros(self._junction.size)
        g[self._junction] = np.concatenate([p[1] for p in parts])
        halves = (np.array([p[2][0] for p in parts], dtype=float), np.array([p[2][1] for p in parts], dtype=float))
        return k, g, halves

    def conduction(self, temperature: np.ndarray) -> tuple[np.ndarray, np.ndarray, tuple[np.ndarray, np.ndarray]]:
        """Cell conductivities, face conductances (0 between members) and each member's two half-cell resistances."""
        if self.constant_k:
            return self._fixed
        if self.size == 1:
            return self.systems[0].conduction(temperature)
        parts = []
        for member, (s, part) in enumerate(zip(self.systems, self.slices)):
            try:
                parts.append(s.conduction(temperature[part]))
            except BadConductivity as exc:
                exc.member = member
                raise
        return self._stack(parts)

    def contents_temperature(self, enthalpy: float) -> float:
        return self.systems[0].contents_temperature(enthalpy) if self.water is not None else math.nan

    def stored_energy(self, temperature: np.ndarray, enthalpy: float) -> np.ndarray:
        """Heat stored in each member (and any contents) [J per ref. unit] (members,)."""
        if self.size == 1:
            return float(self.capacity @ temperature) + (enthalpy if self.water is not None else 0.0)
        return np.add.reduceat(self.capacity * temperature, self.start)


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

    def contents_temperature(self, enthalpy: float) -> float:
        """Temperature of the contents [degC] (NaN without contents)."""
        return float(self.water.state(enthalpy)[0]) if self.water is not None else math.nan

    def stored_energy(self, temperature: np.ndarray, enthalpy: float) -> float:
        """Heat stored in the cells and any contents, relative to 0 degC (liquid) [J per ref. unit]."""
        return float(self.capacity @ temperature) + (enthalpy if self.water is not None else 0.0)

    def conduction(self, temperature: np.ndarray) -> tuple[np.ndarray, np.ndarray, tuple[float, float]]:
        """Cell conductivities [W m-1 K-1], conductances [W K-1 per ref. unit] and the two half-cell resistances."""
        if self.constant_k:
            return self._k, self._g, self._halves
        k = self.mesh.conductivity(temperature)
        if not np.all(k > 0.0):  # a k(T) law used beyond the temperatures it holds for
            i = int(np.argmin(np.where(np.isnan(k), -np.inf, k)))
            raise BadConductivity(self.mesh.materials[i].name, int(self.mesh.layer[i]), float(temperature[i]), float(k[i]))
        return k, self.mesh.conductances(k), self.mesh.half_resistances(k)


@dataclass
class _Side:
    """One boundary's coefficients at an iterate, per member: heat in = G (t_ext - T_cell) + q."""

    conductance: np.ndarray   # (members,)
    t_ext: np.ndarray
    q: np.ndarray
    film: np.ndarray | float  # surface coefficient [W m-2 K-1] (NaN where not a film)
    t_eq: np.ndarray | float  # equivalent temperature [degC]


@dataclass
class _Coefficients:
    k: np.ndarray
    g: np.ndarray
    r_in: np.ndarray
    r_out: np.ndarray
    inside: _Side
    outside: _Side


class _Drive:
    """One boundary's forcing over a chunk of steps, at every stage fraction,
    for every member (``area``, ``diameter``: a float for a batch of one, else
    one per member)."""

    def __init__(self, exchange: Exchange, area, diameter, members: list[Exchange] | None = None) -> None:
        self.exchange, self.area, self.diameter = exchange, area, diameter
        self.dependent = exchange.depends_on_temperature
        # a pipe's or a vessel's automatic film depends on each member's own diameter
        # through a table made for it: each member's exchange evaluated on its own
        self.each = members if (members and len(members) > 1 and self.dependent and exchange.geometry != "planar") else None
        self.is_film = exchange.kind == "film"
        self.members = np.size(area)
        self.one = isinstance(area, float)
        self._zero = 0.0 if self.one else np.zeros(self.members)

    def load(self, seconds: np.ndarray) -> None:
        self.use(self.exchange.forcing(seconds), seconds.shape)

    def use(self, forcing: dict[str, np.ndarray], shape: tuple[int, ...]) -> None:
        self.forcing = forcing
        self._index = -1
        if not self.dependent:
            # the exchange does not depend on the surface: reduce it for the whole chunk at once
            surface = np.zeros(shape)
            film = self.exchange.film(self.forcing, surface, self.diameter if self.one else self.diameter[0])
            self.h = np.broadcast_to(film.h, shape)
            self.t_eq = np.broadcast_to(film.t_eq, shape)
            self.q = np.broadcast_to(film.q_imposed, shape)
            area = np.atleast_1d(self.area)
            theta, resistance = thevenin(self.h[:, None], self.t_eq[:, None], self.q[:, None], area[None, :])
            theta = np.broadcast_to(theta, shape + (self.members,))
            resistance = np.broadcast_to(resistance, shape + (self.members,))
            none = np.isinf(resistance)
            self.open = bool(none.any())  # no film (a flux or adiabatic side): only the imposed flow
            if self.open and not none.all():
                raise ValueError("a boundary keeps its film, or its lack of one, throughout")
            flows = self.q[:, None] * area[None, :]
            if self.one:  # plain floats: picked one at a time
                self.theta, self.resistance, self.flows = theta[:, 0].tolist(), resistance[:, 0].tolist(), flows[:, 0].tolist()
            else:
                self.theta, self.resistance, self.flows = theta, resistance, flows
            self.t_eqs = self.t_eq.tolist()
            self.films = self.h.tolist() if self.is_film else None

    def at(self, i: int, t_surface, r_half, contents: float = math.nan) -> _Side:
        if not self.dependent and self.exchange.kind != "contents":
            film = self.films[i] if self.films is not None else math.nan
            if self.open:
                return _Side(self._zero, self._zero, self.flows[i], film, self.t_eqs[i])
            return _Side(1.0 / (self.resistance[i] + r_half), self.theta[i], self._zero, film, self.t_eqs[i])
        if self.dependent:
            if i != self._index:  # the forcing of one stage, picked once for all its iterations
                self._index, self._values = i, {name: float(values[i]) for name, values in self.forcing.items()}
            if self.each is not None:
                films = []
                for member, (ex, t, d) in enumerate(zip(self.each, t_surface, self.diameter)):
                    try:
                        films.append(ex.film(self._values, t, d))
                    except CaseError as exc:  # a member's surface beyond its film's correlations
                        exc.member = member
                        raise
                film = SurfaceFilm(*(np.array([float(getattr(f, name)) for f in films]) for name in ("h", "t_eq", "q_imposed")))
            else:
                film = self.exchange.film(self._values, t_surface, self.diameter)
            if self.one:
                h, t_eq, q = float(film.h), float(film.t_eq), float(film.q_imposed)
            else:
                h, t_eq, q = (np.broadcast_to(v, (self.members,)) for v in (film.h, film.t_eq, film.q_imposed))
        else:
            h, t_eq, q = float(self.h[i]), float(self.t_eq[i]), float(self.q[i])
        if self.exchange.kind == "contents":
            t_eq = contents
        shown = h if self.is_film else math.nan
        theta, resistance = thevenin(h, t_eq, q, self.area)
        if (math.isinf(resistance) if self.one else np.isinf(resistance).all()):  # no film: only the imposed flow
            return _Side(self._zero, self._zero, q * self.area, shown, t_eq)
        return _Side(1.0 / (resistance + r_half), theta, self._zero, shown, t_eq)


class _Factor:
    """L D L^T factors of C + a K (symmetric positive definite, tridiagonal)."""

    def __init__(self, diag: np.ndarray, off: np.ndarray) -> None:
        from scipy.linalg import lapack  # here, not at module level: `layers check` needs no scipy

        self.diag, self.off = diag, off
        self._solve = lapack.dpttrs
        self.d, self.e, info = lapack.dpttrf(diag, off)
        if info != 0:
            raise np.linalg.LinAlgError(f"stage matrix not positive definite (dpttrf info={info})")
        self.unit_response: np.ndarray | None = None  # contents: response to a unit source at cell 0

    def solve(self, rhs: np.ndarray) -> np.ndarray:
        x, info = self._solve(self.d, self.e, rhs)
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
    scheme: str = ""                          # the scheme that made the result


class _Stepper:
    """The stage solver and the state it carries between stages, for a batch of
    members (:class:`_Batch`; a single construction is a batch of one)."""

    def __init__(self, system: System | _Batch, scheme: Scheme) -> None:
        batch = system if isinstance(system, _Batch) else _Batch([system])
        self.s = batch
        self.scheme = scheme
        self.first, self.last = batch.first, batch.last
        self.drive_in = _Drive(batch.inside, batch.area_in, batch.diameter_in, [s.inside for s in batch.systems])
        self.drive_out = _Drive(batch.outside, batch.area_out, batch.diameter_out, [s.outside for s in batch.systems])
        self.factors: dict[float, _Factor] = {}
        self.factorisations = 0
        self.max_iter = 0
        # whether a stage of the current step stopped at MAX_ITERATIONS before the
        # tolerance: a bool for a batch of one, else one per member (the march counts the steps)
        self.stalled = False if batch.size == 1 else np.zeros(batch.size, dtype=bool)
        self.fixed_matrix = not batch.depends_on_temperature
        if batch.constant_k:
            # the interior of K never changes: only the two boundary conductances can
            g = batch.conduction(None)[1]
            self.k_interior = np.zeros(batch.capacity.size)
            self.k_interior[:-1] += g
            self.k_interior[1:] += g

    # -------------------------------------------------------------- coefficients
    def coefficients(self, temp: np.ndarray, tw: float, surfaces: tuple[np.ndarray, np.ndarray], i: int) -> _Coefficients:
        k, g, (r_in, r_out) = self.s.conduction(temp)
        inside = self.drive_in.at(i, surfaces[0], r_in, tw)
        outside = self.drive_out.at(i, surfaces[1], r_out)
        return _Coefficients(k, g, r_in, r_out, inside, outside)

    def net_heat(self, temp: np.ndarray, tw: float, c: _Coefficients) -> tuple[np.ndarray, float, np.ndarray, np.ndarray]:
        """F(T): net heat into each cell and into the contents; boundary heat in (inside, outside), per member."""
        q_in, q_out = self.boundary_heat(temp, c)
        flow = c.g * (temp[:-1] - temp[1:])
        f = np.empty_like(temp)
        f[:-1] = -flow
        f[-1] = 0.0
        f[1:] += flow
        f[self.first] += q_in
        f[self.last] += q_out
        return f, (-float(q_in) if self.s.water is not None else 0.0), q_in, q_out

    def boundary_heat(self, temp: np.ndarray, c: _Coefficients) -> tuple[np.ndarray, np.ndarray]:
        """Heat into each member through its inside and its outside surface [W per reference unit]."""
        i, o = c.inside, c.outside
        return i.conductance * (i.t_ext - temp[self.first]) + i.q, o.conductance * (o.t_ext - temp[self.last]) + o.q

    def surfaces(self, temp: np.ndarray, c: _Coefficients, q_in: np.ndarray, q_out: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        return temp[self.first] + q_in * c.r_in, temp[self.last] + q_out * c.r_out

    def _factor(self, a: float, c: _Coefficients) -> _Factor:
        cached = self.factors.get(a)
        if cached is not None and self.fixed_matrix:
            return cached
        g_in, g_out = c.inside.conductance, c.outside.conductance
        first, last = self.first, self.last
        if cached is not None and self.s.constant_k:
            # only the boundary conductances move: compare them on the diagonal
            base_in = cached.diag[first] - a * cached.gw  # type: ignore[attr-defined]
            base_out = cached.diag[last] - a * cached.g_out  # type: ignore[attr-defined]
            if (_all(abs(a * (g_in - cached.gw)) <= REFACTOR_TOLERANCE * (base_in + a * cached.gw))  # type: ignore[attr-defined]
                    and _all(abs(a * (g_out - cached.g_out)) <= REFACTOR_TOLERANCE * (base_out + a * cached.g_out))):  # type: ignore[attr-defined]
                return cached
        if self.s.constant_k:
            d = self.k_interior.copy()
        else:
            d = np.zeros(self.s.capacity.size)
            d[:-1] += c.g
            d[1:] += c.g
        d[first] += g_in
        d[last] += g_out
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

    def initial_coefficients(self, temp: np.ndarray, enthalpy: float, i: int) -> tuple[_Coefficients, tuple[np.ndarray, np.ndarray]]:
        """Coefficients at the initial state, with surface temperatures iterated to consistency."""
        tw = self.s.contents_temperature(enthalpy)
        surfaces = (temp[self.first], temp[self.last])
        for _ in range(MAX_ITERATIONS):
            c = self.coefficients(temp, tw, surfaces, i)
            new = self.surfaces(temp, c, *self.boundary_heat(temp, c))
            done = max(float(np.max(np.abs(new[0] - surfaces[0]))), float(np.max(np.abs(new[1] - surfaces[1])))) < TOLERANCE
            surfaces = new
            if done or not self.s.depends_on_temperature:
                break
        return c, surfaces

    def _linear_stage(self, rhs, a, i, surfaces, h_w):
        """A stage whose matrix depends on neither temperature nor time: (C + a K) T = R + a b,
        one solve with the factor made once for this stage weight."""
        temp = rhs  # only its size and the conduction matter for a fixed matrix
        c = self.coefficients(temp, math.nan, surfaces, i)
        b = rhs.copy()
        b[self.first] += a * (c.inside.conductance * c.inside.t_ext + c.inside.q)
        b[self.last] += a * (c.outside.conductance * c.outside.t_ext + c.outside.q)
        new_t = self._factor(a, c).solve(b)
        q_in, q_out = self.boundary_heat(new_t, c)
        self.max_iter = max(self.max_iter, 1)
        return new_t, h_w, c, self.surfaces(new_t, c, q_in, q_out), q_in, q_out

    # -------------------------------------------------------------- one stage
    def stage(self, temp, h_w, rhs, rhs_w, a, i, surfaces):
        """Solve E(T) - a F(T) = R at forcing index ``i``; returns (T, H, coefficients, surfaces, q_in, q_out)."""
        water = self.s.water
        if self.fixed_matrix and water is None:
            return self._linear_stage(rhs, a, i, surfaces, h_w)
        cap = self.s.capacity
        first, last = self.first, self.last
        tw = float(water.state(h_w)[0]) if water is not None else math.nan
        for iteration in range(1, MAX_ITERATIONS + 1):
            c = self.coefficients(temp, tw, surfaces, i)
            f, _, _, _ = self.net_heat(temp, tw, c)
            residual = rhs + a * f - cap * temp
            factor = self._factor(a, c)
            delta = factor.solve(residual)
            if water is None:
                new_t, new_h, new_tw = temp + delta, h_w, tw
            else:  # a batch of one
                gw, gw_f = float(c.inside.conductance), float(factor.gw)  # type: ignore[attr-defined]
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
            moved = np.abs(new_t - temp)
            change = float(np.max(moved))
            if water is not None:
                change = max(change, abs(new_tw - tw))
            # The chord step solved with the factorised boundary conductances:
            # the heat that crossed each boundary in this solve differs from
            # q(T_new) by (G - G_factorised) times the change, and the tally
            # takes that, so the energy balance closes at round-off.
            chord_in = (c.inside.conductance - factor.gw) * (new_t[first] - temp[first])  # type: ignore[attr-defined]
            chord_out = (c.outside.conductance - factor.g_out) * (new_t[last] - temp[last])  # type: ignore[attr-defined]
            temp, h_w, tw = new_t, new_h, new_tw
            if water is not None:
                c.inside.t_ext = tw
            q_in, q_out = self.boundary_heat(temp, c)
            surfaces = self.surfaces(temp, c, q_in, q_out)
            if (self.fixed_matrix and iteration >= 1) or change < TOLERANCE:
                break
        else:
            if self.s.size == 1:
                self.stalled = True
            else:  # the members whose own last change was still above the tolerance
                self.stalled |= np.maximum.reduceat(moved, self.s.start) >= TOLERANCE
        self.max_iter = max(self.max_iter, iteration)
        return temp, h_w, c, surfaces, q_in + chord_in, q_out + chord_out


class _Forcing:
    """Boundary data chunk by chunk: every stage fraction of :data:`CHUNK` steps
    at a time, the jump flags of those steps, and the range of every
    boundary temperature met so far."""

    def __init__(self, stepper: _Stepper, t0: float, step: float, n_steps: int, smooth_start: bool) -> None:
        self.stepper, self.t0, self.h, self.n_steps = stepper, t0, step, n_steps
        scheme = stepper.scheme
        # every fraction of a step at which forcing is needed (start, stages, half steps)
        self.fractions = tuple(sorted({0.0, 0.5, 1.0, *scheme.stage_time}))
        self.position = {c: p for p, c in enumerate(self.fractions)}
        self.start = -1
        self.rough = np.zeros(0, dtype=bool)
        self.smoothing = scheme.jump is not None
        self.smooth_start = smooth_start and self.smoothing
        self.carry = np.zeros(0, dtype=bool)  # smoothing owed to the next chunk by jumps near the end of this one
        self.low, self.high = math.inf, -math.inf

    def index(self, k: int, fraction: float) -> int:
        """Where step ``k``'s forcing at ``fraction`` of the step sits in the loaded chunk."""
        return (k - self.start) * len(self.fractions) + self.position[fraction]

    def smooth(self, k: int) -> bool:
        """Whether step ``k`` is taken as two backward-Euler half steps."""
        if k - self.start >= self.rough.size:
            self.load(k)
        return self.smoothing and (bool(self.rough[k - self.start]) or (self.smooth_start and k < self.stepper.scheme.smoothing_steps))

    def load(self, k: int) -> None:
        """Forcing for steps k .. k + CHUNK - 1 at every fraction, and the jump flags."""
        h, t0, n_steps = self.h, self.t0, self.n_steps
        m = min(CHUNK, n_steps - k) if n_steps > k else 1
        seconds = (t0 + h * (k + np.arange(m)[:, None] + np.array(self.fractions)[None, :])).ravel()
        st = self.stepper
        for drive in (st.drive_in, st.drive_out):
            drive.load(seconds)
            for name in ("air", "radiant", "surface", "contents", "sky"):
                if name in drive.forcing:
                    self.low = min(self.low, float(np.min(drive.forcing[name])))
                    self.high = max(self.high, float(np.max(drive.forcing[name])))
        self.start = k
        rough = np.zeros(m, dtype=bool)
        if self.smoothing:
            # A step over which a drive changes by more than the scheme's jump and
            # JUMP_RATIO times its change over each neighbouring step that exists
            # is a jump: it and the next step are smoothed.
            nodes = t0 + h * np.arange(k - 2, k + m + 3)
            steps = np.arange(k - 2, k + m + 2)  # the steps between consecutive nodes
            real = (steps >= 0) & (steps < n_steps)
            jumps = np.zeros(m, dtype=bool)
            for ex in (st.s.inside, st.s.outside):
                x = np.broadcast_to(ex.drive_temperature(ex.forcing(np.clip(nodes, t0, t0 + h * n_steps))), nodes.shape)
                change = np.where(real, np.abs(np.diff(x)), np.nan)
                here = change[2:-2]
                left, right = change[1:-3], change[3:-1]
                # at the first or last step the missing neighbour is replaced by the one
                # beyond the other (a sampled cycle's trough can make one change vanish)
                left = np.where(np.isnan(left), change[4:], left)
                right = np.where(np.isnan(right), change[:-4], right)
                neighbours = np.fmax(np.nan_to_num(left), np.nan_to_num(right))
                jumps |= (here > self.stepper.scheme.jump) & (here > JUMP_RATIO * neighbours)
            extra = self.stepper.scheme.smoothing_steps - 1  # steps after each jump
            rough |= jumps
            for lag in range(1, extra + 1):
                rough[lag:] |= jumps[:-lag]
            carried = self.carry[: m]
            rough[: carried.size] |= carried
            # the smoothing a jump near the chunk's end owes the next chunk
            tail = np.zeros(extra, dtype=bool)
            for lag in range(1, extra + 1):
                if jumps.size >= lag and jumps[-lag]:
                    tail[: extra - lag + 1] = True
            self.carry = tail
        self.rough = rough


@dataclass
class _State:
    """The march's state at the end of a step."""

    temperature: np.ndarray
    enthalpy: float                    # of the contents [J per ref. unit] (0 without)
    coefficients: _Coefficients        # of the last solve
    surfaces: tuple[float, float]      # [degC]
    net: np.ndarray | None             # F(T) of the cells [W per ref. unit] (None where no stage needs it)
    net_contents: float                # F of the contents
    q_in: float                        # heat into the construction at each surface [W per ref. unit]
    q_out: float


class _Records:
    """The arrays kept at the output times, (kept, members) or (kept, cells of all members)."""

    NAMES = ("q_in", "q_out", "film_in", "film_out", "teq_in", "teq_out", "ts_in", "ts_out", "tw", "ice", "stored")

    #: Rows of cell fields held before they go to a field sink.
    SINK_BLOCK = 256

    def __init__(self, batch: _Batch, n_out: int, sink=None) -> None:
        self.batch = batch
        # where kept cell fields go (``sink.write(rows)``) instead of memory: one sink for a
        # batch of one, else a list with one per member (each takes its own cells)
        self.sink = sink
        if sink is not None and batch.size != 1 and (not isinstance(sink, (list, tuple)) or len(sink) != batch.size):
            raise ValueError("the fields of a batch go to one sink per member")
        rows = n_out if sink is None else min(n_out, self.SINK_BLOCK)
        self.temperature = np.empty((rows, batch.capacity.size))
        self.faces = [np.empty((n_out, s.mesh.interfaces.size)) for s in batch.systems]
        shape = (n_out,) if batch.size == 1 else (n_out, batch.size)
        self.values = {name: np.empty(shape) for name in self.NAMES}
        self.count = 0
        self.flushed = 0  # rows already given to the sink

    def add(self, state: _State, q_in: np.ndarray, q_out: np.ndarray) -> None:
        """Keep a state, with the boundary flows [W per ref. unit] the scheme took."""
        j, v, c, batch = self.count, self.values, state.coefficients, self.batch
        if self.sink is not None and j - self.flushed == self.temperature.shape[0]:
            self._flush()
        self.temperature[j - self.flushed] = state.temperature
        if not batch.constant_k:  # else all at once in finish()
            for m, (system, part) in enumerate(zip(batch.systems, batch.slices)):
                self.faces[m][j] = system.mesh.interface_temperatures(state.temperature[part], c.k[part], c.g[batch.start[m]:batch.end[m]],
                                                                      float(np.atleast_1d(q_in)[m]), float(np.atleast_1d(q_out)[m]))
        v["q_in"][j], v["q_out"][j] = q_in, q_out
        v["film_in"][j], v["film_out"][j] = c.inside.film, c.outside.film
        v["teq_in"][j], v["teq_out"][j] = c.inside.t_eq, c.outside.t_eq
        v["ts_in"][j], v["ts_out"][j] = state.surfaces
        if batch.water is not None:
            t_w, ice = batch.water.state(state.enthalpy)
            v["tw"][j], v["ice"][j] = float(t_w), float(ice)
        v["stored"][j] = batch.stored_energy(state.temperature, state.enthalpy)
        self.count += 1

    def _flush(self) -> None:
        """Layer faces of the rows held (where k is constant), then the rows to the sink."""
        rows = self._faces(self.flushed, self.count)
        if self.sink is not None:
            if isinstance(self.sink, (list, tuple)):
                for sink, part in zip(self.sink, self.batch.slices):
                    sink.write(rows[:, part])
            else:
                self.sink.write(rows)
            self.flushed = self.count

    def _faces(self, start: int, stop: int) -> np.ndarray:
        rows = self.temperature[: stop - start]
        batch = self.batch
        if batch.constant_k and stop > start:
            span = slice(start, stop)
            for m, (system, part) in enumerate(zip(batch.systems, batch.slices)):
                k, g, _ = system.conduction(rows[0, part])
                self.faces[m][span] = system.mesh.interface_temperatures(rows[:, part], k, g, self.column("q_in", m)[span],
                                                                         self.column("q_out", m)[span])
        return rows

    def column(self, name: str, member: int) -> np.ndarray:
        """A kept value of one member at every kept state."""
        values = self.values[name]
        return values if values.ndim == 1 else values[:, member]

    def finish(self) -> None:
        """Layer-face temperatures of every kept state, in one pass where k is
        constant; the last rows to the sink."""
        if self.sink is None:
            self._faces(0, self.count)
        else:
            self._flush()


class _FreezeWatch:
    """When the contents first reach 0 degC, and when their ice fraction first reaches a target."""

    def __init__(self, water: WaterNode | None, enthalpy: float, t0: float, ice_target: float) -> None:
        self.water = water
        self.to_freezing = self.to_ice_fraction = math.nan
        self.before = math.nan  # the enthalpy one step before the current one
        if water is None:
            return
        self.target = -ice_target * water.latent
        if enthalpy <= 0.0:
            self.to_freezing = t0
        if enthalpy <= self.target:
            self.to_ice_fraction = t0

    def update(self, t_start: float, h: float, old: float, new: float) -> None:
        """After a step of ``h`` [s] from ``t_start`` that took the enthalpy from ``old`` to ``new``."""
        if self.water is None:
            return
        if math.isnan(self.to_freezing) and new <= 0.0 < old:
            # The enthalpy's rate changes at 0 degC (the pipe wall stops cooling
            # with the water), so interpolating across the step is only first
            # order; extrapolate with the liquid-side rate of the step before.
            if self.before > old:
                self.to_freezing = t_start + min(h, old * h / (self.before - old))
            else:
                self.to_freezing = t_start + h * old / (old - new)
        if math.isnan(self.to_ice_fraction) and new <= self.target < old:
            self.to_ice_fraction = t_start + h * (old - self.target) / (old - new)
        self.before = old


def _combine(terms: tuple[tuple[int, float], ...], values: list):
    """sum of w * values[j] over the (j, w) terms (0.0 for none)."""
    out = 0.0
    for j, w in terms:
        out = out + (values[j] if w == 1.0 else w * values[j])
    return out


def _scheme_step(st: _Stepper, forcing: _Forcing, state: _State, previous: np.ndarray | None, k: int, h: float):
    """One step of the scheme's stage table; returns the last stage's result and the heat
    through each boundary over the step [J per ref. unit]."""
    sch, cap, water = st.scheme, st.s.capacity, st.s.water
    energies, energies_w = [cap * state.temperature], [state.enthalpy]
    heats, heats_w = [state.net], [state.net_contents]
    tally_in, tally_out = [0.0], [0.0]
    flux_in, flux_out = [state.q_in], [state.q_out]
    temp, enthalpy, surfaces = state.temperature, state.enthalpy, state.surfaces
    if previous is not None and st.s.depends_on_temperature:
        # first iterate extrapolated from the last step: fewer iterations (the converged stage does not depend on it)
        temp = temp + sch.stage_time[0] * (temp - previous)
    last = len(sch.stage_time) - 1
    for s, fraction in enumerate(sch.stage_time):
        e, f = sch.terms[s]
        a = sch.implicit[s] * h
        rhs = _combine(e, energies)
        rhs_w = _combine(e, energies_w) if water is not None else 0.0
        if f:
            rhs = rhs + h * _combine(f, heats)
            rhs_w = rhs_w + h * _combine(f, heats_w) if water is not None else 0.0
        solved = st.stage(temp, enthalpy, rhs, rhs_w, a, forcing.index(k, fraction), surfaces)
        temp, enthalpy, c, surfaces, q_in, q_out = solved
        tally_in.append(_combine(e, tally_in) + h * _combine(f, flux_in) + a * q_in)
        tally_out.append(_combine(e, tally_out) + h * _combine(f, flux_out) + a * q_out)
        if s < last:
            net, net_w, _, _ = st.net_heat(temp, st.s.contents_temperature(enthalpy), c)
            energies.append(cap * temp)
            energies_w.append(enthalpy)
            heats.append(net)
            heats_w.append(net_w)
            flux_in.append(q_in)
            flux_out.append(q_out)
    return solved, tally_in[-1], tally_out[-1]


def _smoothed_step(st: _Stepper, forcing: _Forcing, state: _State, k: int, h: float):
    """Step ``k`` as two backward-Euler half steps (start smoothing)."""
    temp, enthalpy, surfaces = state.temperature, state.enthalpy, state.surfaces
    heat_in = heat_out = 0.0
    for fraction in (0.5, 1.0):
        solved = st.stage(temp, enthalpy, st.s.capacity * temp, enthalpy, 0.5 * h, forcing.index(k, fraction), surfaces)
        temp, enthalpy, c, surfaces, q_in, q_out = solved
        heat_in += 0.5 * h * q_in
        heat_out += 0.5 * h * q_out
    return solved, heat_in, heat_out


def _settled_state(st: _Stepper, temp: np.ndarray, enthalpy: float, c: _Coefficients, surfaces) -> _State:
    if st.scheme.uses_start_heat or st.s.water is not None:
        net, net_w, q_in, q_out = st.net_heat(temp, st.s.contents_temperature(enthalpy), c)
    else:  # backward Euler needs no net heat at the start of a step
        net, net_w = None, 0.0
        q_in, q_out = st.boundary_heat(temp, c)
    return _State(temp, enthalpy, c, surfaces, net, net_w, q_in, q_out)


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
    field_sink=None,
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
    field_sink : object, optional
        Takes the kept cell fields in blocks (``field_sink.write(rows)``) as
        the march makes them, so that memory does not grow with the run
        (:class:`layers.results.FieldSink`); the result's ``temperature`` is then None.
    """
    return march_batch([system], [initial], step, n_steps, output_every=output_every, scheme=scheme, t0=t0,
                       initial_water=initial_water, smooth_start=smooth_start, ice_target=ice_target, progress=progress,
                       field_sink=field_sink)[0]


def march_batch(
    systems: list[System],
    initials: list[np.ndarray],
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
    field_sink=None,
) -> list[MarchResult]:
    """March several constructions together (see :func:`march` for the arguments):
    members that share their boundaries' forcing (the exchange models of the
    first are evaluated, with each member's own areas, diameters and surface
    temperatures), cell counts free, contents only in a batch of one.  They
    are one tridiagonal system with no coupling between members, so every
    factorisation and solve is one LAPACK call for all of them; a stage
    iterates until every member has converged.

    ``field_sink``: for a batch of more than one, a list with one sink per
    member (each takes its own cells), so that the members' fields never fill
    memory together.  A batch of more than one gives no
    :class:`ConvergenceWarning` itself: each result's ``unconverged_steps``
    counts that member's steps, for the caller to warn member by member
    (:func:`warn_unconverged`).

    Raises
    ------
    UnphysicalState, BadConductivity
        With ``member``: the index of the member that left the physical range
        or its k(T) law.
    layers.errors.CaseError
        An automatic film of a pipe or vessel beyond its correlations, with
        ``member`` (for a batch of more than one).
    """
    batch = _Batch(list(systems))
    st = _Stepper(batch, scheme if isinstance(scheme, Scheme) else resolve_scheme(scheme))
    water, h = batch.water, step
    forcing = _Forcing(st, t0, h, n_steps, smooth_start)
    forcing.load(0)
    temp = np.concatenate([np.asarray(x, dtype=float) for x in initials])
    if temp.size != batch.capacity.size:
        raise ValueError("each member's initial state has its own number of cells")
    enthalpy = water.enthalpy(initial_water) if water is not None else 0.0
    c, surfaces = st.initial_coefficients(temp, enthalpy, forcing.index(0, 0.0))
    state = _settled_state(st, temp, enthalpy, c, surfaces)
    _check_batch(batch, temp, batch.contents_temperature(enthalpy), t0, state.q_in, state.q_out)
    # every output_every-th state, and the last one (where output_every does not divide the run)
    kept = n_steps // output_every + 1 + (1 if n_steps % output_every else 0)
    records = _Records(batch, kept, field_sink)
    records.add(state, state.q_in, state.q_out)
    freeze = _FreezeWatch(water, enthalpy, t0, ice_target)
    # heat through each surface over the run and its absolute sum (floats for a batch of one;
    # three separate arrays otherwise, added to in place)
    heat_in, heat_out, heat_abs = (0.0, 0.0, 0.0) if batch.size == 1 else (np.zeros(batch.size), np.zeros(batch.size), np.zeros(batch.size))
    smoothed = 0
    # steps in which a stage stopped at MAX_ITERATIONS: an int for a batch of one, else per member
    unconverged = 0 if batch.size == 1 else np.zeros(batch.size, dtype=int)
    previous = None
    report = max(1, n_steps // 200)
    if batch.size == 1:
        first, last = batch.first, batch.last

        def sound(t: np.ndarray) -> bool:
            return ABSOLUTE_ZERO_CELSIUS < t[first] < HIGHEST_PHYSICAL_TEMPERATURE and ABSOLUTE_ZERO_CELSIUS < t[last] < HIGHEST_PHYSICAL_TEMPERATURE
    else:
        def sound(t: np.ndarray) -> bool:
            ends = t[batch.ends]
            return ends.min() > ABSOLUTE_ZERO_CELSIUS and ends.max() < HIGHEST_PHYSICAL_TEMPERATURE
    for k in range(n_steps):
        st.stalled = False if batch.size == 1 else np.zeros(batch.size, dtype=bool)
        if forcing.smooth(k):
            smoothed += 1
            solved, e_in, e_out = _smoothed_step(st, forcing, state, k, h)
        else:
            solved, e_in, e_out = _scheme_step(st, forcing, state, previous, k, h)
        temp, enthalpy, c, surfaces, q_in, q_out = solved
        unconverged += st.stalled
        previous = state.temperature
        freeze.update(t0 + k * h, h, state.enthalpy, enthalpy)
        state = _settled_state(st, temp, enthalpy, c, surfaces)
        # Every step the surface cells, where a diffusion problem takes its
        # extremes beyond those of its start (maximum principle); every 64 steps
        # and at every kept state all cells and the contents.
        if not sound(temp) or k % 64 == 63 or (k + 1) % output_every == 0 or k == n_steps - 1:
            _check_batch(batch, temp, batch.contents_temperature(enthalpy), t0 + (k + 1) * h, q_in, q_out)
        if water is None:  # with contents, the water is part of the stored energy
            heat_in += e_in
            heat_abs += abs(e_in)
        heat_out += e_out
        heat_abs += abs(e_out)
        if (k + 1) % output_every == 0 or k == n_steps - 1:
            # the boundary flows the scheme took at the end of the step (they
            # differ from those of the state by at most the chord's iteration
            # tolerance times a conductance change below REFACTOR_TOLERANCE)
            records.add(state, q_in, q_out)
        if progress is not None and ((k + 1) % report == 0 or k == 0 or k == n_steps - 1):
            progress(k + 1)
    if batch.size == 1:  # a batch's caller warns member by member (each result's unconverged_steps)
        warn_unconverged(unconverged, n_steps, stacklevel=3)
    records.finish()
    v = records.values
    times = np.minimum(t0 + h * output_every * np.arange(records.count), t0 + h * n_steps)
    stored_final = batch.stored_energy(state.temperature, state.enthalpy)
    results = []
    for m, (system, part) in enumerate(zip(batch.systems, batch.slices)):
        start_cells = np.asarray(initials[m], dtype=float)
        results.append(MarchResult(
            time=times,
            temperature=records.temperature[:, part] if field_sink is None else None,
            interface_temperature=records.faces[m],
            q_in=records.column("q_in", m),
            q_out=records.column("q_out", m),
            film_in=records.column("film_in", m),
            film_out=records.column("film_out", m),
            t_eq_in=records.column("teq_in", m),
            t_eq_out=records.column("teq_out", m),
            surface_in=records.column("ts_in", m),
            surface_out=records.column("ts_out", m),
            contents_temperature=v["tw"] if water is not None else None,
            ice_fraction=v["ice"] if water is not None else None,
            heat_in=float(np.atleast_1d(heat_in)[m]),
            heat_out=float(np.atleast_1d(heat_out)[m]),
            heat_abs=float(np.atleast_1d(heat_abs)[m]),
            stored=records.column("stored", m),
            stored_initial=float(records.column("stored", m)[0]),
            stored_final=float(np.atleast_1d(stored_final)[m]),
            final=state.temperature[part],
            final_enthalpy=state.enthalpy,
            initial_enthalpy=water.enthalpy(initial_water) if water is not None else 0.0,
            unconverged_steps=int(np.atleast_1d(unconverged)[m]),
            max_iterations_used=st.max_iter,
            smoothed_steps=smoothed,
            drive_range=(min(forcing.low, float(np.min(start_cells))), max(forcing.high, float(np.max(start_cells)))),
            factorisations=st.factorisations,
            time_to_freezing=freeze.to_freezing,
            time_to_ice_fraction=freeze.to_ice_fraction,
            scheme=st.scheme.name,
        ))
    return results


def warn_unconverged(unconverged: int, n_steps: int, stacklevel: int = 2) -> None:
    """The :class:`ConvergenceWarning` of a march in which ``unconverged`` of its
    ``n_steps`` steps had a stage stop at :data:`MAX_ITERATIONS` iterations
    before :data:`TOLERANCE` [K] (nothing when there were none)."""
    if unconverged:
        warnings.warn(
            f"{unconverged} of {n_steps} steps stopped at {MAX_ITERATIONS} iterations before the {TOLERANCE:g} K tolerance",
            ConvergenceWarning,
            stacklevel=stacklevel + 1,
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
