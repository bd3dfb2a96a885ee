"""Layers to finite-volume cells: positions, volumes, capacities and conductances.

The construction is cut into cells (control volumes).  Temperatures live at
cell centres; heat flows through cell faces.  Each cell keeps the geometric
*shape factor* of its two half-cells, so that the thermal resistance from its
centre to a face is ``shape / k``:

============  ================================  ===================================
geometry      half-cell resistance (r1 to r2)   area at radius r (per reference unit)
============  ================================  ===================================
planar        (r2 - r1) / k                     1 (per m2 of wall)
cylinder      ln(r2 / r1) / (2 pi k)            2 pi r (per metre of pipe)
sphere        (1/r1 - 1/r2) / (4 pi k)          4 pi r^2 (whole sphere)
============  ================================  ===================================

These are the exact steady conduction resistances of a plane, cylindrical and
spherical shell (Incropera et al., *Fundamentals of Heat and Mass Transfer*,
6th ed., Table 3.3), so a steady state is reproduced exactly on any mesh for
constant conductivity.  Contact resistances and air gaps add a resistance
(per area of the interface) in series between two cells; an air gap has no
heat capacity.
"""

from __future__ import annotations

import functools
import math
from dataclasses import dataclass, field

import numpy as np

from layers.materials import Material

GEOMETRIES = ("planar", "cylinder", "sphere")


@dataclass(frozen=True)
class LayerSpec:
    """One layer, in SI, as the mesh builder needs it.

    Parameters
    ----------
    thickness : float
        [m]; may be 0 for an air gap given only as a resistance.
    material : Material or None
        None for an air gap (a resistance with no heat capacity).
    resistance : float
        Air-gap thermal resistance [m2 K W-1] (per area at the gap).
    contact_resistance : float
        Contact resistance to the next layer [m2 K W-1].
    cells : int or None
        Cell count that overrides the mesh rule.
    """

    thickness: float
    material: Material | None
    resistance: float = 0.0
    contact_resistance: float = 0.0
    cells: int | None = None
    name: str = ""

    @property
    def is_gap(self) -> bool:
        return self.material is None


@dataclass(frozen=True)
class MeshRule:
    """How layers are cut into cells.

    Parameters
    ----------
    max_cell : float
        Largest cell [m].
    growth : float
        Ratio of neighbouring cell sizes in the graded zones [-], >= 1.
    min_cells : int
        Fewest cells per layer [-].
    first_cell : float or None
        Cell size at each face and interface [m]; default ``max_cell / 4``.
    """

    max_cell: float = 0.005
    growth: float = 1.25
    min_cells: int = 3
    first_cell: float | None = None

    def estimated_cells(self, thickness: float) -> int:
        """About how many cells :meth:`cell_sizes` makes for a layer, without making
        them (so that an absurd rule is refused before any work) [-].

        Each face is graded geometrically from ``first_cell`` to ``max_cell``;
        the rest is cut at ``max_cell``.
        """
        h_max = self.max_cell
        h_first = h_max if self.growth == 1.0 else min(self.first_cell or h_max / 4.0, h_max)
        if self.growth == 1.0 or h_first >= h_max:
            return max(self.min_cells, math.ceil(thickness / h_max))
        g = self.growth
        k_cap = math.ceil(math.log(h_max / h_first) / math.log(g))
        graded = h_first * (g**k_cap - 1.0) / (g - 1.0)  # length of one graded zone
        if 2.0 * graded >= thickness:
            n = 2.0 * math.log1p(0.5 * thickness * (g - 1.0) / h_first) / math.log(g)
        else:
            n = 2.0 * k_cap + (thickness - 2.0 * graded) / h_max
        return max(self.min_cells, math.ceil(n))

    def cell_sizes(self, thickness: float, cells: int | None = None) -> np.ndarray:
        """Cell sizes of one layer [m], graded geometrically toward both faces.

        Sizes grow by ``growth`` from ``first_cell`` at each face until they
        reach ``max_cell``.  The fewest cells whose capped profile covers the
        layer are taken (at least ``min_cells``, or exactly ``cells``), and the
        profile is then scaled down to the thickness, so no cell exceeds
        ``max_cell``.
        """
        h_max = self.max_cell
        h_first = min(self.first_cell if self.first_cell else h_max / 4.0, h_max)
        if self.growth == 1.0:
            h_first = h_max

        # grading steps until the cap is reached (no need to raise growth further)
        k_cap = math.ceil(math.log(h_max / h_first) / math.log(self.growth)) if self.growth > 1.0 else 0

        def profile(n: int) -> np.ndarray:
            i = np.arange(n)
            k = np.minimum(np.minimum(i, n - 1 - i), k_cap)
            return np.minimum(h_first * self.growth**k, h_max)

        if cells is not None:
            n = cells
        else:
            n = max(self.min_cells, 1)
            # grow n until the capped profile spans the layer
            while profile(n).sum() < thickness * (1.0 - 1e-12):
                n += max(1, int((thickness - profile(n).sum()) / h_max))
        sizes = profile(n)
        return sizes * (thickness / sizes.sum())


def surface_area(geometry: str, r: np.ndarray | float) -> np.ndarray:
    """Area per reference unit at radius ``r`` [m2 per m2 | m | sphere]."""
    if geometry == "planar":
        return np.ones_like(np.asarray(r, dtype=float))
    if geometry == "cylinder":
        return 2.0 * math.pi * np.asarray(r, dtype=float)
    return 4.0 * math.pi * np.asarray(r, dtype=float) ** 2


def shape_factor(geometry: str, r1: np.ndarray, r2: np.ndarray) -> np.ndarray:
    """Shape factor S with R = S / k for a shell from r1 to r2 (Incropera Table 3.3)."""
    r1 = np.asarray(r1, dtype=float)
    r2 = np.asarray(r2, dtype=float)
    if geometry == "planar":
        return r2 - r1
    if geometry == "cylinder":
        return np.log(r2 / r1) / (2.0 * math.pi)
    return (1.0 / r1 - 1.0 / r2) / (4.0 * math.pi)


def _volume(geometry: str, r1: np.ndarray, r2: np.ndarray) -> np.ndarray:
    """Volume per reference unit of a shell from r1 to r2 [m3 per m2 | m | sphere]."""
    if geometry == "planar":
        return r2 - r1
    if geometry == "cylinder":
        return math.pi * (r2**2 - r1**2)
    return 4.0 / 3.0 * math.pi * (r2**3 - r1**3)


@dataclass(frozen=True)
class Mesh:
    """Cells of a layered construction.

    Positions ``x`` run from the inside surface (0) to the outside surface;
    ``r = inner_radius + x`` for cylinders and spheres (``r = x`` on a wall).
    Per-reference-unit quantities are per m2 of wall, per metre of pipe, or for
    the whole sphere.
    """

    geometry: str
    inner_radius: float
    x: np.ndarray                 # cell centres [m]
    x_lo: np.ndarray              # inner face of each cell [m]
    x_hi: np.ndarray              # outer face of each cell [m]
    layer: np.ndarray             # 1-based layer index of each cell
    materials: tuple[Material, ...]  # material of each cell
    volume: np.ndarray            # [m3 per reference unit]
    shape_lo: np.ndarray          # half-cell shape factor, centre to inner face
    shape_hi: np.ndarray          # half-cell shape factor, centre to outer face
    extra_resistance: np.ndarray  # [K W-1 per ref. unit] between cell i and i+1 (contact, gaps)
    extra_inside: float           # [K W-1 per ref. unit] gaps between the inside surface and cell 0
    extra_outside: float          # [K W-1 per ref. unit] gaps between the last cell and the outside surface
    total_thickness: float        # [m]
    layer_specs: tuple[LayerSpec, ...] = field(repr=False)
    interfaces: np.ndarray = field(repr=False)  # positions of layer faces [m], len = n_layers + 1
    interface_cell: np.ndarray = field(repr=False)      # the cell whose face each layer face is read from
    interface_outward: np.ndarray = field(repr=False)   # True: that cell's outer face; False: its inner face
    interface_offset: np.ndarray = field(repr=False)    # [K W-1 per ref. unit] gaps/contacts between that cell face and the layer face

    @property
    def n(self) -> int:
        return self.x.size

    @property
    def radius(self) -> np.ndarray:
        """Radius of each cell centre [m] (cylinder, sphere)."""
        return self.inner_radius + self.x

    @property
    def area_inside(self) -> float:
        return float(surface_area(self.geometry, self.inner_radius))

    @property
    def area_outside(self) -> float:
        return float(surface_area(self.geometry, self.inner_radius + self.total_thickness))

    def capacity(self, temperature: np.ndarray | None = None) -> np.ndarray:
        """Heat capacity of each cell [J K-1 per reference unit]."""
        rho_c = np.array([m.density * m.specific_heat for m in self.materials])
        return rho_c * self.volume

    def conductivity(self, temperature: np.ndarray | None = None) -> np.ndarray:
        """Conductivity of each cell [W m-1 K-1], at ``temperature`` for k(T) materials."""
        if temperature is None or self.is_linear:
            return np.array([m.conductivity for m in self.materials])
        out = np.empty(self.n)
        for mat, idx in self._groups:
            out[idx] = mat.conductivity_at(temperature[idx])
        return out

    @functools.cached_property
    def is_linear(self) -> bool:
        """True when every material has a constant conductivity."""
        return all(m.is_constant for m in self.materials)

    @functools.cached_property
    def _groups(self) -> list[tuple[Material, np.ndarray]]:
        groups: dict[int, tuple[Material, list[int]]] = {}
        for i, m in enumerate(self.materials):
            groups.setdefault(id(m), (m, []))[1].append(i)
        return [(m, np.array(idx)) for m, idx in groups.values()]

    def conductances(self, k: np.ndarray) -> np.ndarray:
        """Conductance between neighbouring cell centres [W K-1 per reference unit]."""
        r_series = self.shape_hi[:-1] / k[:-1] + self.extra_resistance + self.shape_lo[1:] / k[1:]
        return 1.0 / r_series

    def half_resistances(self, k: np.ndarray) -> tuple[float, float]:
        """Resistance from each surface to its nearest cell centre [K W-1 per reference unit]."""
        return (
            float(self.shape_lo[0] / k[0] + self.extra_inside),
            float(self.shape_hi[-1] / k[-1] + self.extra_outside),
        )

    def interface_temperatures(
        self, temperature: np.ndarray, k: np.ndarray, conductances: np.ndarray, q_in: float, q_out: float
    ) -> np.ndarray:
        """Temperatures of the layer faces (0 = inside surface ... outside surface) [degC].

        Read from the nearest cell along the heat path with the face fluxes of
        the march: the flux through a cell's face times the half-cell
        resistance (and any gap or contact resistance in between).  A face
        with a contact resistance is reported on its inner side (the
        contact lies just outside it).

        Parameters
        ----------
        temperature : (..., n) cell temperatures [degC]
        k : (n,) or (..., n) cell conductivities [W m-1 K-1]
        conductances : (n-1,) or (..., n-1) between cell centres [W K-1 per reference unit]
        q_in, q_out : float or (...) array
            Heat into the construction through the inside and the outside
            surface [W per reference unit].
        """
        c = self.interface_cell
        temperature = np.asarray(temperature, dtype=float)
        lead = temperature.shape[:-1]
        outward_flux = np.empty((*lead, self.n + 1))  # at each cell face, inside to outside
        outward_flux[..., 0] = q_in
        outward_flux[..., 1:-1] = conductances * (temperature[..., :-1] - temperature[..., 1:])
        outward_flux[..., -1] = -np.asarray(q_out)
        hi = self.interface_outward
        flux = np.where(hi, outward_flux[..., c + 1], outward_flux[..., c])
        half = np.where(hi, self.shape_hi[c], self.shape_lo[c]) / np.asarray(k)[..., c]
        return temperature[..., c] - np.where(hi, 1.0, -1.0) * flux * (half + self.interface_offset)

    def steady_resistance(self) -> float:
        """Surface-to-surface resistance for constant conductivity [K W-1 per reference unit]."""
        k = self.conductivity()
        r_in, r_out = self.half_resistances(k)
        return r_in + float(np.sum(1.0 / self.conductances(k))) + r_out


def build_mesh(
    layers: list[LayerSpec] | tuple[LayerSpec, ...],
    rule: MeshRule = MeshRule(),
    geometry: str = "planar",
    inner_radius: float = 0.0,
) -> Mesh:
    """Cut layers into finite-volume cells.

    Parameters
    ----------
    layers : sequence of LayerSpec
        From the inside surface to the outside.
    rule : MeshRule
        Cell-size rule.
    geometry : {"planar", "cylinder", "sphere"}
    inner_radius : float
        Radius of the inside surface [m]; must be > 0 for cylinder and sphere.

    Returns
    -------
    Mesh
    """
    if geometry not in GEOMETRIES:
        raise ValueError(f"geometry must be one of {GEOMETRIES}, got {geometry!r}")
    if geometry != "planar" and not inner_radius > 0:
        raise ValueError("inner_radius must be > 0 for a cylinder or a sphere")
    if not any(not spec.is_gap for spec in layers):
        raise ValueError("a construction needs at least one solid layer")
    r0 = inner_radius if geometry != "planar" else 0.0

    x_lo, x_hi, layer_idx, mats = [], [], [], []
    extra_between: list[float] = []   # resistance after each cell (to the next one)
    extra_inside = 0.0
    pending = 0.0                     # gap/contact resistance waiting for the next cell
    position = 0.0
    interfaces = [0.0]
    # each layer face: (cell, True if on the cell's outer side, extra resistance from that cell face)
    faces: list[tuple[int | None, bool, float]] = [(None, False, 0.0)]
    for number, spec in enumerate(layers, start=1):
        if spec.is_gap:
            # resistance given per area at the gap; use the mid-gap area
            area_mid = float(surface_area(geometry, r0 + position + spec.thickness / 2.0))
            pending += spec.resistance / area_mid
            position += spec.thickness
        else:
            sizes = rule.cell_sizes(spec.thickness, spec.cells)
            edges = position + np.concatenate(([0.0], np.cumsum(sizes)))
            edges[-1] = position + spec.thickness
            for i in range(sizes.size):
                if not x_lo:
                    extra_inside = pending
                else:
                    extra_between.append(pending)
                pending = 0.0
                x_lo.append(edges[i])
                x_hi.append(edges[i + 1])
                layer_idx.append(number)
                mats.append(spec.material)
            position += spec.thickness
        # the face at the end of this layer lies before its contact resistance
        faces.append((len(x_lo) - 1, True, pending) if x_lo else (None, False, pending))
        if spec.contact_resistance:
            pending += spec.contact_resistance / float(surface_area(geometry, r0 + position))
        interfaces.append(position)
    extra_outside = pending
    # faces before the first cell: measured inward from the first cell's inner face
    faces = [(0, False, extra_inside - off) if cell is None else (cell, out, off) for cell, out, off in faces]

    lo = np.array(x_lo)
    hi = np.array(x_hi)
    centre = 0.5 * (lo + hi)
    return Mesh(
        geometry=geometry,
        inner_radius=r0,
        x=centre,
        x_lo=lo,
        x_hi=hi,
        layer=np.array(layer_idx, dtype=np.int32),
        materials=tuple(mats),
        volume=_volume(geometry, r0 + lo, r0 + hi),
        shape_lo=shape_factor(geometry, r0 + lo, r0 + centre),
        shape_hi=shape_factor(geometry, r0 + centre, r0 + hi),
        extra_resistance=np.array(extra_between),
        extra_inside=extra_inside,
        extra_outside=extra_outside,
        total_thickness=position,
        layer_specs=tuple(layers),
        interfaces=np.array(interfaces),
        interface_cell=np.array([f[0] for f in faces], dtype=np.int64),
        interface_outward=np.array([f[1] for f in faces], dtype=bool),
        interface_offset=np.array([f[2] for f in faces]),
    )
