"""Direct tests of the mesh builder (layers.mesh).

References named beside each check:

* Incropera, DeWitt, Bergman & Lavine, *Fundamentals of Heat and Mass
  Transfer*, 6th ed., Table 3.3: the steady conduction resistance of a plane
  wall L/(kA), a cylindrical shell ln(r2/r1)/(2 pi L k) and a spherical shell
  (1/r1 - 1/r2)/(4 pi k) (from memory, the same three forms as
  ``ht.conduction.R_cylinder`` states for the cylinder).
* ``ht.conduction.R_cylinder`` (ht package, an independent implementation) for
  the cylindrical shells.
* The volume of a shell: plane d, cylinder pi (r2^2 - r1^2) per metre, sphere
  4/3 pi (r2^3 - r1^3) (elementary geometry).

Every expected value below is written out by hand from these formulas and the
inputs; none comes from the code under test.  Tolerances are round-off: the
mesh is exact for these quantities, and the sums run over at most a few
hundred terms of like sign, so 1e-12 relative leaves a margin of about 100x
over the accumulated rounding (a few hundred times 1.1e-16).
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from ht.conduction import R_cylinder

from layers.materials import Material, resolve
from layers.mesh import LayerSpec, Mesh, MeshRule, build_mesh

ROUND_OFF = 1e-12


def material(name: str) -> Material:
    return resolve(name, file="test_mesh.py", key="layers")


CONCRETE = material("concrete-2400")   # ISO 10456 Table 3: 2.0 W/(m K)
EPS = material("eps")                  # ASHRAE Handbook: 0.0355 W/(m K)
PLASTERBOARD = material("plasterboard")  # ISO 10456 Table 3: 0.25 W/(m K)
STEEL = material("steel")              # ISO 10456 Table 3: 50 W/(m K)


# ---------------------------------------------------------------------- MeshRule.cell_sizes

RULES = [
    MeshRule(),
    MeshRule(max_cell=0.01, growth=1.5, min_cells=2),
    MeshRule(max_cell=0.002, growth=1.1, min_cells=5, first_cell=1e-4),
    MeshRule(max_cell=0.02, growth=2.0, min_cells=1, first_cell=0.05),  # first_cell above max_cell
    MeshRule(max_cell=0.004, growth=1.0, min_cells=3),
]
THICKNESSES = [1e-4, 0.0012, 0.0125, 0.05, 0.1, 0.2, 0.3333]


@pytest.mark.parametrize("rule", RULES, ids=lambda r: f"max{r.max_cell}-g{r.growth}-n{r.min_cells}-f{r.first_cell}")
@pytest.mark.parametrize("thickness", THICKNESSES)
def test_cell_sizes_obey_the_rule(rule, thickness):
    sizes = rule.cell_sizes(thickness)
    # the cells fill the layer exactly (up to the rounding of a sum of <= ~200 terms)
    assert sizes.sum() == pytest.approx(thickness, rel=ROUND_OFF)
    assert np.all(sizes > 0)
    # never larger than max_cell (the profile is only ever scaled down, by at most 1e-12)
    assert sizes.max() <= rule.max_cell * (1 + ROUND_OFF)
    # neighbours differ by at most the growth ratio (both ways)
    ratio = sizes[1:] / sizes[:-1]
    assert np.all(ratio <= rule.growth * (1 + ROUND_OFF))
    assert np.all(1 / ratio <= rule.growth * (1 + ROUND_OFF))
    assert sizes.size >= rule.min_cells
    # the face cells are at most first_cell (default max_cell / 4, itself capped at max_cell)
    first = min(rule.first_cell if rule.first_cell else rule.max_cell / 4, rule.max_cell)
    if rule.growth > 1.0:
        assert max(sizes[0], sizes[-1]) <= first * (1 + ROUND_OFF)
    # graded toward both faces: symmetric about the middle
    np.testing.assert_allclose(sizes, sizes[::-1], rtol=ROUND_OFF)


def test_growth_one_gives_uniform_cells():
    sizes = MeshRule(max_cell=0.004, growth=1.0, min_cells=3).cell_sizes(0.1)
    # 0.1 / 0.004 = 25 cells of exactly max_cell
    assert sizes.size == 25
    np.testing.assert_allclose(sizes, 0.004, rtol=ROUND_OFF)


def test_thin_layer_gets_min_cells_graded_from_its_faces():
    # 1 mm with max_cell 5 mm (first_cell 1.25 mm, growth 1.25): the graded
    # profile of min_cells = 3 cells, 1.25, 1.5625, 1.25 mm, already spans it,
    # so it is scaled down to 1 mm: sizes in the ratio 1 : 1.25 : 1, by hand.
    sizes = MeshRule(max_cell=0.005, growth=1.25, min_cells=3).cell_sizes(0.001)
    np.testing.assert_allclose(sizes, np.array([1.0, 1.25, 1.0]) * 0.001 / 3.25, rtol=ROUND_OFF)


@pytest.mark.parametrize("cells", [1, 2, 7, 40])
def test_cells_override_is_honoured(cells):
    rule = MeshRule(max_cell=0.005, growth=1.3, min_cells=10)
    sizes = rule.cell_sizes(0.08, cells)
    assert sizes.size == cells
    assert sizes.sum() == pytest.approx(0.08, rel=ROUND_OFF)
    ratio = sizes[1:] / sizes[:-1]
    assert np.all((ratio <= 1.3 * (1 + ROUND_OFF)) & (1 / ratio <= 1.3 * (1 + ROUND_OFF)))


def test_layer_cells_override_reaches_the_mesh():
    layers = [LayerSpec(0.2, CONCRETE, cells=4), LayerSpec(0.1, EPS)]
    mesh = build_mesh(layers, MeshRule(max_cell=0.01, min_cells=3))
    assert np.count_nonzero(mesh.layer == 1) == 4
    assert np.count_nonzero(mesh.layer == 2) >= 10  # 0.1 m at max_cell 0.01 m


# ---------------------------------------------------------------------- cells, faces and interfaces

# a wall with everything: a contact resistance, an air gap of finite thickness,
# and layers of different materials; resistances in m2 K/W.
R_CONTACT = 0.02
R_GAP = 0.17
GAP = 0.025


def stack() -> list[LayerSpec]:
    return [
        LayerSpec(0.0125, PLASTERBOARD, name="board"),
        LayerSpec(0.10, EPS, contact_resistance=R_CONTACT, name="eps"),
        LayerSpec(GAP, None, resistance=R_GAP, name="air gap"),
        LayerSpec(0.20, CONCRETE, name="concrete"),
    ]


def test_cells_tile_the_construction_and_skip_the_gap():
    mesh = build_mesh(stack(), MeshRule(max_cell=0.01))
    # interfaces: cumulative thicknesses, the gap included
    np.testing.assert_allclose(mesh.interfaces, [0.0, 0.0125, 0.1125, 0.1375, 0.3375], rtol=0, atol=1e-15)
    assert mesh.total_thickness == pytest.approx(0.3375, rel=ROUND_OFF)
    assert mesh.x_lo[0] == 0.0
    assert mesh.x_hi[-1] == pytest.approx(0.3375, rel=ROUND_OFF)
    # centres halfway between faces
    np.testing.assert_allclose(mesh.x, 0.5 * (mesh.x_lo + mesh.x_hi), rtol=0, atol=1e-15)
    # layer numbers 1, 2, 4 (the gap, 3, has no cells), in order
    assert set(np.unique(mesh.layer)) == {1, 2, 4}
    assert np.all(np.diff(mesh.layer) >= 0)
    # faces meet except across the gap, where they jump by its thickness
    jumps = mesh.x_lo[1:] - mesh.x_hi[:-1]
    crossing = np.flatnonzero(np.diff(mesh.layer) == 2)
    assert crossing.size == 1
    assert jumps[crossing[0]] == pytest.approx(GAP, rel=ROUND_OFF)
    np.testing.assert_allclose(np.delete(jumps, crossing), 0.0, atol=1e-15)
    # each cell carries its layer's material
    expected = {1: PLASTERBOARD, 2: EPS, 4: CONCRETE}
    assert all(m is expected[n] for m, n in zip(mesh.materials, mesh.layer))
    # every layer's cells span it exactly
    for number, (lo, hi) in enumerate(zip(mesh.interfaces[:-1], mesh.interfaces[1:]), start=1):
        if number == 3:
            continue
        cells = mesh.layer == number
        assert mesh.x_lo[cells][0] == pytest.approx(lo, abs=1e-15)
        assert mesh.x_hi[cells][-1] == pytest.approx(hi, rel=ROUND_OFF)


# ---------------------------------------------------------------------- volumes and shape factors

R_IN = 0.011  # inner radius of a 22 mm bore [m]
PIPE = [(0.001, STEEL), (0.02, EPS), (0.0005, STEEL)]  # thickness [m], material


def shells(layers, r_in):
    """Inner and outer radius of each layer [m], by hand."""
    out, r = [], r_in
    for thickness, _ in layers:
        out.append((r, r + thickness))
        r += thickness
    return out


def shell_volume(geometry, r1, r2):
    """Volume of a shell per reference unit (elementary geometry)."""
    if geometry == "planar":
        return r2 - r1
    if geometry == "cylinder":
        return math.pi * (r2**2 - r1**2)
    return 4.0 / 3.0 * math.pi * (r2**3 - r1**3)


def shell_resistance(geometry, r1, r2, k):
    """Incropera Table 3.3: plane (per m2), cylinder (per metre, via ht), sphere (whole) [K W-1]."""
    if geometry == "planar":
        return (r2 - r1) / k
    if geometry == "cylinder":
        return R_cylinder(2 * r1, 2 * r2, k, 1.0)
    return (1.0 / r1 - 1.0 / r2) / (4.0 * math.pi * k)


@pytest.mark.parametrize("geometry", ["planar", "cylinder", "sphere"])
def test_volumes_and_half_cells_add_up_to_each_shell(geometry):
    r_in = 0.0 if geometry == "planar" else R_IN
    layers = [LayerSpec(t, m) for t, m in PIPE]
    mesh = build_mesh(layers, MeshRule(max_cell=0.002, growth=1.2), geometry, R_IN)
    k = mesh.conductivity()
    for number, ((r1, r2), (_, mat)) in enumerate(zip(shells(PIPE, r_in), PIPE), start=1):
        cells = mesh.layer == number
        assert mesh.volume[cells].sum() == pytest.approx(shell_volume(geometry, r1, r2), rel=ROUND_OFF)
        half_cells = (mesh.shape_lo[cells] + mesh.shape_hi[cells]) / k[cells]
        assert half_cells.sum() == pytest.approx(shell_resistance(geometry, r1, r2, mat.conductivity), rel=ROUND_OFF)
    r_out = r_in + sum(t for t, _ in PIPE)
    assert mesh.volume.sum() == pytest.approx(shell_volume(geometry, r_in, r_out), rel=ROUND_OFF)
    assert np.all(mesh.volume > 0) and np.all(mesh.shape_lo > 0) and np.all(mesh.shape_hi > 0)


@pytest.mark.parametrize("geometry", ["planar", "cylinder", "sphere"])
def test_areas_at_the_surfaces(geometry):
    mesh = build_mesh([LayerSpec(t, m) for t, m in PIPE], MeshRule(), geometry, R_IN)
    r_out = R_IN + 0.0215
    expected = {
        "planar": (1.0, 1.0),
        "cylinder": (2 * math.pi * R_IN, 2 * math.pi * r_out),
        "sphere": (4 * math.pi * R_IN**2, 4 * math.pi * r_out**2),
    }[geometry]
    assert (mesh.area_inside, mesh.area_outside) == pytest.approx(expected, rel=ROUND_OFF)
    if geometry != "planar":
        np.testing.assert_allclose(mesh.radius, R_IN + mesh.x, rtol=ROUND_OFF)


@pytest.mark.parametrize("geometry", ["planar", "cylinder", "sphere"])
def test_steady_resistance_is_the_hand_sum_of_layers_contacts_and_gap(geometry):
    # Series resistances (Incropera Table 3.3 for each shell); the contact
    # resistance acts on the area at its interface and the air gap on the area
    # at mid-gap (LayerSpec: resistances per area of the interface / gap).
    # Layers: a gap first (inside extra), a contact inside the stack, a gap in
    # the stack, and a contact on the last layer (outside extra).
    r_in = 0.0 if geometry == "planar" else 0.05
    r_gap_first, r_contact_mid, r_contact_last = 0.05, 0.01, 0.004

    def area(r):
        return {"planar": 1.0, "cylinder": 2 * math.pi * r, "sphere": 4 * math.pi * r**2}[geometry]

    layers = [LayerSpec(0.004, None, resistance=r_gap_first)] + stack()
    layers[2] = LayerSpec(0.10, EPS, contact_resistance=r_contact_mid)
    layers[-1] = LayerSpec(0.20, CONCRETE, contact_resistance=r_contact_last)
    mesh = build_mesh(layers, MeshRule(max_cell=0.01), geometry, r_in)

    # positions by hand: 0, 0.004, 0.0165, 0.1165, 0.1415, 0.3415
    r = r_in
    expected = r_gap_first / area(r + 0.002)
    r += 0.004
    expected += shell_resistance(geometry, r, r + 0.0125, PLASTERBOARD.conductivity)
    r += 0.0125
    expected += shell_resistance(geometry, r, r + 0.10, EPS.conductivity)
    r += 0.10
    expected += r_contact_mid / area(r)
    expected += R_GAP / area(r + GAP / 2)
    r += GAP
    expected += shell_resistance(geometry, r, r + 0.20, CONCRETE.conductivity)
    r += 0.20
    expected += r_contact_last / area(r)

    assert mesh.steady_resistance() == pytest.approx(expected, rel=ROUND_OFF)
    # the extras sit where they belong
    assert mesh.extra_inside == pytest.approx(r_gap_first / area(r_in + 0.002), rel=ROUND_OFF)
    assert mesh.extra_outside == pytest.approx(r_contact_last / area(r), rel=ROUND_OFF)
    assert mesh.extra_resistance.size == mesh.n - 1
    assert np.count_nonzero(mesh.extra_resistance) == 1  # board/eps has none; eps|gap|concrete is one
    expected_between = r_contact_mid / area(r_in + 0.1165) + R_GAP / area(r_in + 0.1415 - GAP / 2)
    assert mesh.extra_resistance.sum() == pytest.approx(expected_between, rel=ROUND_OFF)


def test_planar_wall_resistance_in_m2K_per_W():
    # Incropera Table 3.3, plane wall: R'' = sum d/k + R''_contact + R''_gap, by hand:
    # 0.0125/0.25 + 0.10/0.0355 + 0.02 + 0.17 + 0.20/2.0 = 0.05 + 2.816901408... + 0.02 + 0.17 + 0.1
    expected = 0.05 + 0.10 / 0.0355 + 0.02 + 0.17 + 0.1
    mesh = build_mesh(stack(), MeshRule(max_cell=0.003))
    assert mesh.steady_resistance() == pytest.approx(expected, rel=ROUND_OFF)


@pytest.mark.parametrize("geometry", ["planar", "cylinder", "sphere"])
def test_conductances_are_positive_and_in_series_give_the_total(geometry):
    mesh = build_mesh(stack(), MeshRule(max_cell=0.01), geometry, 0.1)
    k = mesh.conductivity()
    g = mesh.conductances(k)
    assert g.shape == (mesh.n - 1,)
    assert np.all(np.isfinite(g)) and np.all(g > 0)
    r_in, r_out = mesh.half_resistances(k)
    assert r_in > 0 and r_out > 0
    assert r_in + np.sum(1 / g) + r_out == pytest.approx(mesh.steady_resistance(), rel=ROUND_OFF)


def test_capacity_is_rho_c_times_volume():
    # plane: per m2, C = rho c d for each layer (ISO 10456 Table 3 values, by hand)
    mesh = build_mesh(stack(), MeshRule(max_cell=0.01))
    capacity = mesh.capacity()
    by_layer = {n: capacity[mesh.layer == n].sum() for n in (1, 2, 4)}
    assert by_layer[1] == pytest.approx(900 * 1000 * 0.0125, rel=ROUND_OFF)
    assert by_layer[2] == pytest.approx(EPS.density * EPS.specific_heat * 0.10, rel=ROUND_OFF)
    assert by_layer[4] == pytest.approx(2400 * 1000 * 0.20, rel=ROUND_OFF)


def test_linear_flag_and_conductivity_at_temperature():
    mesh = build_mesh(stack(), MeshRule(max_cell=0.01))
    assert mesh.is_linear
    pipe_wool = material("mineral-wool-pipe")
    kt = build_mesh([LayerSpec(0.05, pipe_wool), LayerSpec(0.001, STEEL)], MeshRule(), "cylinder", 0.02)
    assert not kt.is_linear
    t = np.linspace(200.0, 20.0, kt.n)
    k = kt.conductivity(t)
    wool = kt.layer == 1
    np.testing.assert_array_equal(k[wool], pipe_wool.conductivity_at(t[wool]))
    np.testing.assert_array_equal(k[~wool], 50.0)


# ---------------------------------------------------------------------- bad inputs


def test_unknown_geometry_is_refused():
    with pytest.raises(ValueError, match="geometry"):
        build_mesh(stack(), MeshRule(), "slab")


@pytest.mark.parametrize("geometry", ["cylinder", "sphere"])
@pytest.mark.parametrize("radius", [0.0, -0.01, float("nan")])
def test_curved_geometry_needs_a_positive_inner_radius(geometry, radius):
    with pytest.raises(ValueError, match="inner_radius"):
        build_mesh(stack(), MeshRule(), geometry, radius)


def test_a_construction_of_gaps_only_is_refused():
    with pytest.raises(ValueError, match="solid layer"):
        build_mesh([LayerSpec(0.02, None, resistance=0.17)], MeshRule())
    with pytest.raises(ValueError, match="solid layer"):
        build_mesh([], MeshRule())


def test_planar_ignores_the_inner_radius():
    a = build_mesh(stack(), MeshRule(), "planar", 0.0)
    b = build_mesh(stack(), MeshRule(), "planar", 0.3)
    assert isinstance(b, Mesh) and b.inner_radius == 0.0
    np.testing.assert_array_equal(a.x, b.x)
    assert a.steady_resistance() == b.steady_resistance()


@pytest.mark.parametrize("growth", [1.0, 1.1, 1.25, 2.0])
@pytest.mark.parametrize("first", [None, 1e-4, 1e-3])
@pytest.mark.parametrize("thickness", [0.002, 0.02, 0.3, 1.5])
def test_estimated_cells_is_close_to_the_cells_made(growth, first, thickness):
    """The estimate that refuses an absurd mesh before any work is within two
    cells per graded face (rounding of the graded zones) of what the builder
    makes."""
    rule = MeshRule(max_cell=0.01, growth=growth, min_cells=3, first_cell=first)
    made = rule.cell_sizes(thickness).size
    assert abs(rule.estimated_cells(thickness) - made) <= 4


def test_a_tiny_first_cell_or_layer_is_refused_before_any_work(tmp_path):
    """A first cell of 1e-300 m and a layer of 1e-300 mm are refused with exit 2
    at once (each used to hang the mesh builder or archive NaN)."""
    import time

    from layers.cli import main

    base = '[[layers]]\nmaterial = "brick"\nthickness = "{t}"\n[mesh]\nfirst_cell = "{f}"\n' \
        '[inside]\ntype = "temperature"\nsurface_temperature = "20 degC"\n' \
        '[outside]\ntype = "temperature"\nsurface_temperature = "0 degC"\n[time]\nduration = "1 h"\nstep = "1 h"\n'
    for t, f in (("200 mm", "1e-300 m"), ("1e-300 mm", "1 mm")):
        case = tmp_path / "c.toml"
        case.write_text(base.format(t=t, f=f))
        start = time.monotonic()
        assert main(["check", str(case)]) == 2
        assert time.monotonic() - start < 5.0
