"""The scheme table: backward Euler, Crank-Nicolson and TR-BDF2 as rows of stage
coefficients for the one stage solver of :mod:`layers.march` (see its docstring
for the stage equation; Bank et al., IEEE Trans. Electron Devices 32, 1985, and
Hosea & Shampine, Appl. Numer. Math. 20, 1996, for TR-BDF2).

Pure data, importing nothing from the package: the case reader validates a
``scheme`` key against it without reaching into the march.
"""

from __future__ import annotations

import functools
import math
from dataclasses import dataclass

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
    #: Smallest jump in a boundary's drive that is smoothed [K]; None: never (an
    #: L-stable one-stage scheme needs no smoothing).
    jump: float | None = None
    #: How many steps after a discontinuity are taken as backward-Euler half steps.
    smoothing_steps: int = 2

    @functools.cached_property
    def terms(self) -> tuple[tuple[tuple[tuple[int, float], ...], tuple[tuple[int, float], ...]], ...]:
        """Per stage, the nonzero (j, e_ij) and (j, f_ij): the table without its zeros."""
        return tuple(
            (tuple((j, w) for j, w in enumerate(e) if w), tuple((j, w) for j, w in enumerate(f) if w))
            for e, f in zip(self.energy, self.heat)
        )

    @functools.cached_property
    def uses_start_heat(self) -> bool:
        """Whether a stage needs the net heat F at the start of the step."""
        return any(row and row[0] for row in self.heat)


_W = (1.0 - GAMMA) / (2.0 - GAMMA)
_D = GAMMA * (2.0 - GAMMA)
SCHEMES: dict[str, Scheme] = {
    "backward-euler": Scheme("backward-euler", 1, (1.0,), (1.0,), ((1.0,),), ((0.0,),), jump=None),
    # Crank-Nicolson rings at about 60 % of an unsmoothed jump (281 degC after a
    # 170 K step in the step case): every jump above 1 K is smoothed
    # four smoothed steps, not Rannacher's two: with two, modes with lambda h near 3
    # (neither stiff nor resolved) keep about 1/81 of a start step, and
    # Crank-Nicolson's factor of -1/3 on them rang 0.1 K below a 31 K start on a
    # thin brick wall at 3-hour steps (found by the property test); four leave 1/6561
    "crank-nicolson": Scheme("crank-nicolson", 2, (1.0,), (0.5,), ((1.0,),), ((0.5,),), jump=1.0, smoothing_steps=4),
    # TR-BDF2 is L-stable; its trapezoidal stage overshoots by about 0.3 % of a
    # jump (180.5 degC after the 170 K step): smoothing from 30 K keeps that
    # below the 0.1 K overshoot warning, and leaves ordinary weather unsmoothed
    "tr-bdf2": Scheme(
        "tr-bdf2", 2, (GAMMA, 1.0), (0.5 * GAMMA, _W),
        ((1.0,), (-((1.0 - GAMMA) ** 2) / _D, 1.0 / _D)),
        ((0.5 * GAMMA,), (0.0, 0.0)),
        jump=30.0,
    ),
}
#: What ``scheme = "auto"`` (the default) steps with where the exact path
#: (:mod:`layers.exact`) does not apply.
DEFAULT_SCHEME = "tr-bdf2"
SCHEME_NAMES = ("auto", "exact", *SCHEMES)



def resolve_scheme(name: str) -> Scheme:
    """The scheme a case's ``scheme`` key stands for (``auto``: :data:`DEFAULT_SCHEME`)."""
    return SCHEMES[DEFAULT_SCHEME if name == "auto" else name]
