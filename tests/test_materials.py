"""Tests of the material library and the k(T) models (layers.materials).

Expected values come from three places, named beside each check:
ISO 10456:2007 Table 3 and the ASHRAE Handbook-Fundamentals (2013) as tabulated
in the ``ht`` package (an independent library, read here, not copied); the
ISO 12241 / ASTM C680 mean-conductivity rule (from memory: the integral mean,
which for a linear λ is λ at the mean temperature); numerical quadrature
(scipy) as an independent oracle for the exact integrals; and the trapezoid
rule (by hand and numpy's), exact for a piecewise-linear table.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import integrate

from layers.errors import CaseError
from layers.materials import (
    CATEGORIES,
    ConductivityPolynomial,
    ConductivityTable,
    Material,
    load_library,
    material_from_table,
    resolve,
    search,
)

import ht.insulation as ht_insulation  # noqa: E402  (test extra: fails loudly if missing)

FILE = "case.toml"


@pytest.fixture(scope="module")
def library() -> dict[str, Material]:
    return load_library()


# ---------------------------------------------------------------------- the library itself


def test_library_loads_with_sources_and_positive_values(library):
    assert 25 <= len(library) <= 50  # 35 entries, 46 after the 11 of tests/test_materials_added.py
    for name, material in library.items():
        assert material.name == name
        assert material.source.strip(), name
        assert material.description.strip(), name
        assert material.category in CATEGORIES, name
        for value in (material.conductivity, material.density, material.specific_heat):
            assert value > 0 and math.isfinite(value), name
        probe = np.linspace(-50.0, material.max_temperature or 100.0, 200)
        assert np.all(material.conductivity_at(probe) > 0), name


def test_short_names_people_guess_exist(library):
    for name in ("concrete", "mineral-wool", "eps", "xps", "steel", "brick", "plasterboard", "water", "ice"):
        assert name in library


def test_temperature_dependent_pipe_insulants(library):
    for name in ("mineral-wool-pipe", "calcium-silicate", "cellular-glass", "elastomeric-foam", "pur-pipe"):
        material = library[name]
        assert not material.is_constant, name
        assert material.max_temperature is not None, name
        # the scalar conductivity is the ISO 10456 reference value at 10 degC
        assert material.conductivity == pytest.approx(float(material.conductivity_at(10.0)), rel=1e-12)
        # insulants conduct more when hot (gas conduction and radiation both grow with T)
        k = material.conductivity_at(np.linspace(0.0, material.max_temperature, 50))
        assert np.all(np.diff(k) >= 0), name
        assert "from memory" in material.source, name


def test_library_returns_a_copy(library):
    first = load_library()
    first.pop("steel")
    assert "steel" in load_library()


# ISO 10456:2007 Table 3 (identical to EN 12524:2000) as tabulated in
# ht.insulation.building_materials, format (density, conductivity, specific heat).
# The library must carry these numbers unchanged: compared exactly.
ISO_10456 = {
    "concrete": "Concrete, high density",
    "concrete-2400": "Concrete, high density",
    "concrete-2200": "Concrete, medium density 2200 kg/m^3",
    "concrete-2000": "Concrete, medium density 2000 kg/m^3",
    "concrete-1800": "Concrete, medium density 1800 kg/m^3",
    "concrete-reinforced": "Concrete, reinforced with 2% steel",
    "gypsum-plaster": "Plasters and renders, gypsum plastering, 1000 kg/m^3",
    "lime-sand-plaster": "Plasters and renders, lime sand",
    "cement-sand-render": "Plasters and renders, cement sand",
    "plasterboard": "Gypsum, plasterboard",
    "osb": "Wood, oriented strand board",
    "plywood": "Wood, plywood 500 kg/m^3",
    "wood-fibre-board": "Wood, fibreboard, 250 kg/m^3",
    "timber": "Timber, 500 kg/m^3",
    "softwood": "Timber, 500 kg/m^3",
    "hardwood": "Timber, 700 kg/m^3",
    "steel": "Metals, steel",
    "stainless-steel": "Metals, stainless steel",
    "copper": "Metals, copper",
    "aluminium": "Metals, aluminium alloys",
    "cast-iron": "Metals, iron, cast",
    "glass": "Glass, soda lime",
    "water": "Water at 10°C",
    "ice": "Water, ice at 0 °C",
}


@pytest.mark.parametrize("name, ht_name", sorted(ISO_10456.items()))
def test_iso_10456_values_match_ht(library, name, ht_name):
    density, conductivity, specific_heat = ht_insulation.building_materials[ht_name]
    material = library[name]
    assert (material.density, material.conductivity, material.specific_heat) == (
        density,
        conductivity,
        specific_heat,
    )
    assert "ISO 10456" in material.source


def test_iso_10456_headline_values(library):
    # The three named in the project's references (ISO 10456 Table 3), spelled out.
    assert (library["concrete-2400"].conductivity, library["concrete-2400"].density) == (2.0, 2400.0)
    assert library["concrete-2400"].specific_heat == 1000.0
    assert (library["plasterboard"].conductivity, library["plasterboard"].density) == (0.25, 900.0)
    assert library["plasterboard"].specific_heat == 1000.0
    assert (library["steel"].conductivity, library["steel"].density, library["steel"].specific_heat) == (
        50.0,
        7800.0,
        450.0,
    )


# ASHRAE Handbook-Fundamentals (2013) as tabulated in ht.insulation.ASHRAE,
# format [density, specific heat, conductivity, R, thickness]; compared exactly.
ASHRAE = {
    "brick": "Brick, fired clay, 1920 kg/m^3",
    "aerated-concrete": "Concrete, Aerated concrete (oven-dried)",
    "mineral-wool": "Mineral fiber",
    "eps": "Expanded polystyrene, molded beads",
    "xps": "Expanded polystyrene, extruded",
    "pir": "Polyisocyanurate, aged, with facers",
}


@pytest.mark.parametrize("name, ht_name", sorted(ASHRAE.items()))
def test_ashrae_values_match_ht(library, name, ht_name):
    density, specific_heat, conductivity = ht_insulation.ASHRAE[ht_name][:3]
    material = library[name]
    assert (material.density, material.specific_heat, material.conductivity) == (
        density,
        specific_heat,
        conductivity,
    )
    assert "ASHRAE" in material.source


def test_cellular_glass_density_and_heat_from_ashrae(library):
    density, specific_heat = ht_insulation.ASHRAE["Cellular glass"][:2]
    material = library["cellular-glass"]
    assert (material.density, material.specific_heat) == (density, specific_heat)


def test_calcium_silicate_within_astm_c533_type_i(library):
    # ASTM C533 Type I: at most 0.41 Btu*in/(h*ft2*degF) = 0.0591 W/(m*K) at 38 degC
    # mean (read in a manufacturer's reproduction of the table). The library's
    # typical curve must not exceed this product-standard limit.
    assert float(library["calcium-silicate"].conductivity_at(38.0)) <= 0.41 * 0.1442279


# ---------------------------------------------------------------------- conductivity models


def linear(a: float, b: float) -> Material:
    return material_from_table(
        "linear",
        {"conductivity": {"polynomial": [a, b]}, "density": 100, "specific_heat": 1000},
        file=FILE,
        key="materials.linear",
    )


def test_mean_conductivity_of_linear_law_is_value_at_mean_temperature():
    # ISO 12241 / ASTM C680 (from memory): for λ = a + bθ the mean conductivity of a
    # layer between θ1 and θ2 is a + b(θ1 + θ2)/2. Round-off tolerance: the closed
    # form and the library's sum differ only in the order of a few operations.
    a, b = 0.032, 2.1e-4
    material = linear(a, b)
    t1 = np.array([-40.0, 0.0, 10.0, 100.0, 250.0, 300.0])
    t2 = np.array([20.0, 0.0, 10.0 + 1e-9, 40.0, 25.0, 300.0])
    expected = a + b * (t1 + t2) / 2
    np.testing.assert_allclose(material.mean_conductivity(t1, t2), expected, rtol=1e-14)


def test_constant_conductivity_everywhere(library):
    concrete = library["concrete"]
    assert concrete.is_constant
    np.testing.assert_array_equal(concrete.conductivity_at([-20.0, 10.0, 80.0]), 2.0)
    np.testing.assert_array_equal(concrete.mean_conductivity([-20.0, 5.0], [30.0, 5.0]), 2.0)
    np.testing.assert_allclose(concrete.conductivity_integral([-5.0, 0.0, 7.0]), [-10.0, 0.0, 14.0])


def test_table_interpolates_linearly_and_holds_its_ends():
    material = Material.from_table("t", [0.0, 100.0, 200.0], [0.04, 0.05, 0.07], 100.0, 1000.0)
    assert material.conductivity == pytest.approx(0.041)  # value at 10 degC
    np.testing.assert_allclose(
        material.conductivity_at([-50.0, 0.0, 50.0, 150.0, 200.0, 500.0]),
        [0.04, 0.04, 0.045, 0.06, 0.07, 0.07],
        rtol=1e-14,
    )


def test_mean_of_a_table_is_its_trapezoid_integral_by_hand():
    # A table is piecewise linear (constant beyond its ends), so the trapezoid
    # rule over its own points is its exact integral. Hand values for
    # 0/100/200 degC -> 0.04/0.05/0.07 W/(m K):
    #   0..200:   (100 x 0.045 + 100 x 0.060) / 200               = 0.0525
    #   50..150:  (50 x 0.0475 + 50 x 0.055) / 100                = 0.05125
    #   -50..250: (50 x 0.04 + 4.5 + 6.0 + 50 x 0.07) / 300       = 16/300
    #   120..160: one piece, the value at 140 degC                = 0.058
    # Tolerance: round-off in a handful of operations (1e-14 relative).
    material = Material.from_table("t", [0.0, 100.0, 200.0], [0.04, 0.05, 0.07], 100.0, 1000.0)
    t1 = np.array([0.0, 50.0, -50.0, 120.0, 200.0])
    t2 = np.array([200.0, 150.0, 250.0, 160.0, 0.0])
    expected = [0.0525, 0.05125, 16.0 / 300.0, 0.058, 0.0525]
    np.testing.assert_allclose(material.mean_conductivity(t1, t2), expected, rtol=1e-14)


def test_mean_of_library_tables_is_the_trapezoid_integral(library):
    # The same rule on every library table, with numpy's trapezoid over the
    # interval's ends and the table points inside it, the values read by
    # linear interpolation (np.interp, an independent implementation).
    # Tolerance: round-off in sums of at most ~10 terms, 1e-13 relative.
    for material in library.values():
        if material.conductivity_temperature is None:
            continue
        x, k = material.conductivity_temperature, material.conductivity_table
        for t1, t2 in [(-80.0, 20.0), (5.0, 95.0), (x[0], x[-1]), (x[1] - 3.0, x[-1] + 40.0), (-200.0, -100.0)]:
            points = np.concatenate(([t1], x[(x > t1) & (x < t2)], [t2]))
            values = np.interp(points, x, k)
            expected = np.trapezoid(values, points) / (t2 - t1)
            got = float(material.mean_conductivity(t1, t2))
            assert got == pytest.approx(expected, rel=1e-13), (material.name, t1, t2)


def largest_slope(material: Material) -> float:
    """max |dλ/dθ| over -50..600 degC [W m-1 K-2]: the steepest table piece, or
    numpy's derivative of the polynomial on a 1 K grid (with 1 % margin for the grid)."""
    if material.conductivity_temperature is not None:
        return float(np.max(np.abs(np.diff(material.conductivity_table) / np.diff(material.conductivity_temperature))))
    derivative = np.polynomial.polynomial.polyder(material.conductivity_polynomial)
    return 1.01 * float(np.max(np.abs(np.polynomial.polynomial.polyval(np.arange(-50.0, 601.0), derivative))))


def test_mean_tends_to_the_local_value_as_the_interval_closes(library):
    # lim t2 -> t1 of the mean is λ(t1): for an interval δ the mean differs from
    # λ(t1) by at most max|λ'| δ/2 (mean-value theorem), plus round-off of
    # 1e-14 relative.
    for material in k_t_materials(library):
        bound = largest_slope(material)
        for t in (-20.0, 0.0, 10.0, 55.5, 150.0, 333.0):
            k = float(material.conductivity_at(t))
            for delta in (1e-2, 1e-5, 1e-8, 1e-11):
                got = float(material.mean_conductivity(t, t + delta))
                assert abs(got - k) <= bound * delta / 2 + 1e-14 * k, (material.name, t, delta)


def test_laws_are_values_checked_and_immutable():
    table = ConductivityTable([0.0, 50.0], [0.03, 0.035])
    assert table == ConductivityTable((0.0, 50.0), np.array([0.03, 0.035])) and hash(table) is not None
    assert ConductivityPolynomial([0.03, 1e-4]) == ConductivityPolynomial((0.03, 0.0001))
    with pytest.raises(AttributeError):
        table.value = (1.0, 1.0)  # type: ignore[misc]
    with pytest.raises(ValueError):
        table.points[1][0] = 1.0
    for bad in ([[0.0], [0.03]], [[0.0, 50.0], [0.03]], [[0.0, 0.0], [0.03, 0.04]], [[0.0, 1.0], [0.03, 0.0]]):
        with pytest.raises(ValueError, match="conductivity table"):
            ConductivityTable(*bad)
    for bad in ([], [0.03, float("inf")]):
        with pytest.raises(ValueError, match="finite"):
            ConductivityPolynomial(bad)


def k_t_materials(library) -> list[Material]:
    own = [
        Material.from_table("table", [-20.0, 0.0, 50.0, 120.0], [0.030, 0.031, 0.036, 0.050], 40.0, 1400.0),
        Material.from_polynomial("cubic", [0.03, 5e-5, 2e-7, 1e-10], 100.0, 840.0),
    ]
    return own + [m for m in library.values() if not m.is_constant]


PAIRS = [(10.0, 10.0 + 1e-7), (-80.0, 20.0), (0.0, 50.0), (50.0, 0.0), (20.0, 380.0), (-150.0, 600.0), (300.0, 301.0)]


def test_mean_conductivity_equals_quadrature(library):
    # The exact integral mean against scipy.integrate.quad of conductivity_at
    # divided by ΔT; tolerance: quad's own error estimate (over |ΔT|) plus
    # round-off of the order of 1e-13 relative.
    for material in k_t_materials(library):
        breaks = None if material.conductivity_temperature is None else list(material.conductivity_temperature)
        for t1, t2 in PAIRS:
            low, high = min(t1, t2), max(t1, t2)
            points = None if breaks is None else [p for p in breaks if low < p < high] or None
            value, error = integrate.quad(
                lambda t: float(material.conductivity_at(t)), t1, t2, points=points, epsabs=0, epsrel=1e-13, limit=200
            )
            expected = value / (t2 - t1)
            tolerance = abs(error / (t2 - t1)) + 1e-13 * abs(expected)
            got = float(material.mean_conductivity(t1, t2))
            assert abs(got - expected) <= tolerance, (material.name, t1, t2, got, expected)


def test_mean_conductivity_at_equal_temperatures_is_the_local_value(library):
    for material in k_t_materials(library):
        t = np.array([-100.0, 0.0, 10.0, 37.5, 100.0, 400.0, 900.0])
        if material.conductivity_temperature is not None:
            t = np.concatenate([t, material.conductivity_temperature])  # also exactly on table points
        np.testing.assert_allclose(material.mean_conductivity(t, t), material.conductivity_at(t), rtol=1e-14)


def test_mean_conductivity_is_continuous_as_the_interval_closes(library):
    # No cancellation as in (K(θ2) − K(θ1))/(θ2 − θ1): an interval of 2e-9 K
    # straddling a table point gives the local value. The true mean differs from
    # it by |Δslope|·δ/4 ≈ 1e-13 relative at the kinks; the subtraction of two
    # antiderivatives would lose ~1e-5 here. Tolerance 1e-9: well between the two.
    material = library["cellular-glass"]
    for node in material.conductivity_temperature:
        got = material.mean_conductivity(node - 1e-9, node + 1e-9)
        assert float(got) == pytest.approx(float(material.conductivity_at(node)), rel=1e-9)


def test_conductivity_integral_is_the_kirchhoff_transform(library):
    # K(0) = 0, K' = λ (central differences, step 1e-3 K: error of order h² λ'' and
    # round-off ~ eps K / h), and the mean is the difference quotient of K.
    for material in k_t_materials(library):
        assert float(material.conductivity_integral(0.0)) == 0.0
        t = np.array([-60.0, -5.0, 15.0, 75.0, 260.0])
        h = 1e-3
        derivative = (material.conductivity_integral(t + h) - material.conductivity_integral(t - h)) / (2 * h)
        np.testing.assert_allclose(derivative, material.conductivity_at(t), rtol=1e-6)
        t1, t2 = -30.0, 250.0
        quotient = (material.conductivity_integral(t2) - material.conductivity_integral(t1)) / (t2 - t1)
        assert float(material.mean_conductivity(t1, t2)) == pytest.approx(float(quotient), rel=1e-12)


def test_models_are_vectorised(library):
    material = library["mineral-wool-pipe"]
    t1 = np.linspace(0.0, 300.0, 12).reshape(3, 4)
    assert material.conductivity_at(t1).shape == (3, 4)
    assert material.mean_conductivity(t1, 20.0).shape == (3, 4)
    assert material.conductivity_integral(t1).shape == (3, 4)
    assert np.asarray(material.conductivity_at(10.0)).shape == ()


def test_diffusivity(library):
    assert library["concrete"].diffusivity == pytest.approx(2.0 / (2400.0 * 1000.0), rel=1e-15)


def test_material_is_immutable_and_compares_by_value(library):
    material = library["cellular-glass"]
    with pytest.raises(AttributeError):
        material.density = 1.0  # type: ignore[misc]
    with pytest.raises(ValueError):
        material.conductivity_table[0] = 1.0
    twin = Material.from_table(
        material.name,
        material.conductivity_temperature,
        material.conductivity_table,
        material.density,
        material.specific_heat,
        description=material.description,
        category=material.category,
        source=material.source,
        max_temperature=material.max_temperature,
        vapour_resistance_factor=material.vapour_resistance_factor,
        vapour_resistance_factor_wet_cup=material.vapour_resistance_factor_wet_cup,
    )
    assert twin == material and hash(twin) == hash(material)
    assert material != library["pur-pipe"]


def test_material_constructor_checks():
    with pytest.raises(ValueError, match="density"):
        Material("x", 1.0, -1.0, 1000.0)
    with pytest.raises(ValueError, match="increasing"):
        Material.from_table("x", [10.0, 0.0], [0.1, 0.2], 1.0, 1.0)
    with pytest.raises(ValueError, match="10 degC"):
        Material("x", 0.5, 1.0, 1.0, law=ConductivityPolynomial((0.03, 1e-4)))


# ---------------------------------------------------------------------- case-file tables


GOOD = {"conductivity": "0.024 W/(m*K)", "density": "35 kg/m3", "specific_heat": "1400 J/(kg*K)"}


def test_case_material_with_units_and_table():
    material = material_from_table("site-foam", GOOD, file=FILE, key="materials.site-foam")
    assert (material.conductivity, material.density, material.specific_heat) == (0.024, 35.0, 1400.0)
    conductivity = {"temperature": ["32 degF", "50 degC", "373.15 K"], "value": ["0.030 W/(m*K)", 0.034, 0.040]}
    table = dict(GOOD, conductivity=conductivity)
    material = material_from_table("site-foam", table, file=FILE, key="materials.site-foam")
    np.testing.assert_allclose(material.conductivity_temperature, [0.0, 50.0, 100.0], atol=1e-12)
    np.testing.assert_allclose(material.conductivity_table, [0.030, 0.034, 0.040])
    assert material.conductivity == pytest.approx(0.0308)


def _bad(table: dict, name: str = "site-foam") -> CaseError:
    with pytest.raises(CaseError) as info:
        material_from_table(name, table, file=FILE, key=f"materials.{name}")
    return info.value


@pytest.mark.parametrize(
    "change, key",
    [
        ({"density": "-35 kg/m3"}, "materials.site-foam.density"),
        ({"density": 0}, "materials.site-foam.density"),
        ({"specific_heat": "-1 J/(kg*K)"}, "materials.site-foam.specific_heat"),
        ({"conductivity": "0 W/(m*K)"}, "materials.site-foam.conductivity"),
        ({"density": "2 kg"}, "materials.site-foam.density"),
        ({"conductivity": "0.03 W/m2"}, "materials.site-foam.conductivity"),
        ({"specific_heat": "1400 J/kg"}, "materials.site-foam.specific_heat"),
        ({"density": float("nan")}, "materials.site-foam.density"),
        ({"conductivity": True}, "materials.site-foam.conductivity"),
        ({"conductivity": [0.03]}, "materials.site-foam.conductivity"),
        ({"conductivty": "0.03 W/(m*K)"}, "materials.site-foam.conductivty"),
        ({"colour": "pink"}, "materials.site-foam.colour"),
        ({"category": "foam"}, "materials.site-foam.category"),
        ({"max_temperature": "hot"}, "materials.site-foam.max_temperature"),
        ({"conductivity": {"temperature": [50, 10, 100], "value": [0.03, 0.031, 0.04]}}, "materials.site-foam.conductivity.temperature"),
        ({"conductivity": {"temperature": [10, 10], "value": [0.03, 0.031]}}, "materials.site-foam.conductivity.temperature"),
        ({"conductivity": {"temperature": [10, 50], "value": [0.03, -0.031]}}, "materials.site-foam.conductivity.value"),
        ({"conductivity": {"temperature": [10, 50], "value": [0.03]}}, "materials.site-foam.conductivity"),
        ({"conductivity": {"temperature": [10], "value": [0.03]}}, "materials.site-foam.conductivity.temperature"),
        ({"conductivity": {"temperature": [10, 50]}}, "materials.site-foam.conductivity.value"),
        ({"conductivity": {"temperature": [10, 50], "value": [0.03, "0.04 kg"]}}, "materials.site-foam.conductivity.value[1]"),
        ({"conductivity": {"temperature": [10, "50 m"], "value": [0.03, 0.04]}}, "materials.site-foam.conductivity.temperature[1]"),
        ({"conductivity": {"temperature": [10, 50], "value": [0.03, 0.04], "unit": "W"}}, "materials.site-foam.conductivity.unit"),
        ({"conductivity": {"polynomial": [0.03, -1e-3]}}, "materials.site-foam.conductivity"),
        ({"conductivity": {"polynomial": []}}, "materials.site-foam.conductivity.polynomial"),
        ({"conductivity": {"polynomial": ["0.03 W/(m*K)"]}}, "materials.site-foam.conductivity.polynomial"),
        ({"conductivity": {"polynomial": [0.03], "reference": "K"}}, "materials.site-foam.conductivity.reference"),
    ],
)
def test_bad_inputs_name_their_key(change, key):
    error = _bad(dict(GOOD, **change))
    assert error.key == key
    assert key in str(error) and FILE in str(error)


def test_missing_property_names_its_key():
    table = dict(GOOD)
    del table["specific_heat"]
    error = _bad(table)
    assert error.key == "materials.site-foam.specific_heat"
    assert "missing" in error.reason


def test_unknown_key_suggests_the_right_one():
    error = _bad(dict(GOOD, densty="35 kg/m3"))
    assert "density" in error.reason


def test_polynomial_checked_up_to_max_temperature():
    # 0.03 - 1e-4 θ is positive below 300 degC: accepted when the material says so.
    table = dict(GOOD, conductivity={"polynomial": [0.03, -1e-4], "reference": "degC"}, max_temperature="200 degC")
    material = material_from_table("cooling", table, file=FILE, key="materials.cooling")
    assert material.conductivity == pytest.approx(0.029)
    error = _bad(dict(table, max_temperature="400 degC"))
    assert error.key == "materials.site-foam.conductivity"


# ---------------------------------------------------------------------- base = "..."


def test_base_takes_library_values_and_replaces_the_given_ones(library):
    table = {"base": "mineral-wool", "density": "45 kg/m3"}
    material = material_from_table("dense-wool", table, file=FILE, key="materials.dense-wool")
    base = library["mineral-wool"]
    assert material.name == "dense-wool"
    assert material.density == 45.0
    assert (material.conductivity, material.specific_heat, material.category) == (
        base.conductivity,
        base.specific_heat,
        base.category,
    )
    assert base.source in material.source and "density" in material.source


def test_base_conductivity_model_is_replaced_whole(library):
    table = {"base": "cellular-glass", "conductivity": "0.041 W/(m*K)"}
    material = material_from_table("glass-slab", table, file=FILE, key="materials.glass-slab")
    assert material.is_constant and material.conductivity == 0.041
    assert material.density == library["cellular-glass"].density
    kept = material_from_table("glass-pipe", {"base": "cellular-glass"}, file=FILE, key="materials.glass-pipe")
    np.testing.assert_array_equal(kept.conductivity_table, library["cellular-glass"].conductivity_table)


def test_base_from_a_given_library():
    own = {"foam": material_from_table("foam", GOOD, file=FILE, key="materials.foam")}
    table = {"base": "foam", "specific_heat": 1500}
    material = material_from_table("foam2", table, file=FILE, key="materials.foam2", library=own)
    assert (material.conductivity, material.specific_heat) == (0.024, 1500.0)


def test_base_library_flag():
    # True (or None) means the packaged library; False forbids a base.
    material = material_from_table("w", {"base": "eps"}, file=FILE, key="materials.w", library=True)
    assert material.conductivity == load_library()["eps"].conductivity
    with pytest.raises(CaseError) as info:
        material_from_table("w", {"base": "eps"}, file=FILE, key="materials.w", library=False)
    assert info.value.key == "materials.w.base"


def test_unknown_base_suggests_names():
    error = _bad({"base": "minerl-wool"})
    assert error.key == "materials.site-foam.base"
    assert "mineral-wool" in error.reason


# ---------------------------------------------------------------------- resolve and search


def test_resolve_library_and_overrides(library):
    assert resolve("steel", file=FILE, key="layers[1].material") is library["steel"]
    assert resolve("EPS", file=FILE, key="layers[1].material").name == "eps"
    mine = material_from_table("steel", dict(GOOD), file=FILE, key="materials.steel")
    assert resolve("steel", {"steel": mine}, file=FILE, key="layers[1].material") is mine


@pytest.mark.parametrize(
    "typo, expected",
    [
        ("concrte", "concrete"),
        ("minral-wool", "mineral-wool"),
        ("stell", "steel"),
        ("plaster-board", "plasterboard"),
        ("wool", "mineral-wool"),
    ],
)
def test_resolve_suggests_close_names(typo, expected):
    with pytest.raises(CaseError) as info:
        resolve(typo, file=FILE, key="layers[2].material")
    assert info.value.key == "layers[2].material"
    assert expected in info.value.reason
    suggestions = info.value.reason.split("did you mean ")[1].split("?")[0].split(", ")
    assert 1 <= len(suggestions) <= 5


def test_resolve_suggests_case_materials_too():
    mine = {"site-foam": material_from_table("site-foam", GOOD, file=FILE, key="materials.site-foam")}
    with pytest.raises(CaseError) as info:
        resolve("site-fom", mine, file=FILE, key="layers[1].material")
    assert "site-foam" in info.value.reason


def test_search(library):
    assert [m.name for m in search(None)] == sorted(library)
    assert {m.name for m in search("WOOL")} >= {"mineral-wool", "mineral-wool-pipe"}
    assert {m.name for m in search("mineral wool")} == {"mineral-wool", "mineral-wool-pipe"}
    assert {m.name for m in search("metal")} == {"steel", "stainless-steel", "copper", "aluminium", "cast-iron"}
    assert "plasterboard" in {m.name for m in search("drywall")}  # description
    assert search("unobtainium") == []
