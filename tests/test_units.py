"""Quantities at the edge: degrees in a quantity that is not a temperature are intervals."""

from __future__ import annotations

import numpy as np
import pytest

from layers.case import load_case
from layers.errors import CaseError
from layers.units import parse_quantity, parse_temperature, unit_factor

# Conversion factors of NIST Special Publication 811 (2008), Appendix B.8
# (from memory, to the 7 digits printed there):
#   1 Btu_IT/(h ft2 degF)     = 5.678263 W/(m2 K)
#   1 h ft2 degF/Btu_IT       = 0.1761102 m2 K/W
#   1 Btu_IT in/(h ft2 degF)  = 0.1442279 W/(m K)
# Tolerance 1e-6 relative: the factors are printed to 7 significant digits.
NIST = 1e-6


@pytest.mark.parametrize(
    "text, kind, si",
    [
        ("1 degC", "temperature_difference", 1.0),
        ("1 K", "temperature_difference", 1.0),
        ("9 degF", "temperature_difference", 5.0),
        ("0.035 W/(m*degC)", "conductivity", 0.035),
        ("0.035 W/(m*°C)", "conductivity", 0.035),
        ("10 W/(m2*degC)", "film_coefficient", 10.0),
        ("0.13 m2*degC/W", "areal_resistance", 0.13),
        ("1000 J/(kg*degC)", "specific_heat", 1000.0),
        ("1 Btu/(h*ft2*degF)", "film_coefficient", 5.678263),
        ("1 h*ft2*degF/Btu", "areal_resistance", 0.1761102),
        ("1 Btu*in/(h*ft2*degF)", "conductivity", 0.1442279),
    ],
)
def test_degrees_inside_other_quantities_are_intervals(text, kind, si):
    """A degree Celsius or Fahrenheit inside a conductivity, a film
    coefficient or a difference is a step of one degree (1 degC = 1 K,
    1 degF = 5/9 K), never the temperature 1 degC = 274.15 K."""
    assert parse_quantity(text, kind) == pytest.approx(si, rel=NIST)


def test_series_column_units_follow_the_same_rule():
    assert unit_factor("W/(m*degC)", "conductivity", file="f", key="k") == pytest.approx((1.0, 0.0))
    assert unit_factor("degF", "temperature_difference", file="f", key="k") == pytest.approx((5 / 9, 0.0))
    # a temperature column keeps its offset: 32 degF is 0 degC
    scale, offset = unit_factor("degF", "temperature", file="f", key="k")
    assert scale * 32.0 + offset == pytest.approx(0.0, abs=1e-12)


def test_temperatures_keep_their_offset():
    assert parse_temperature("68 degF") == pytest.approx(20.0, abs=1e-12)
    assert parse_temperature("293.15 K") == pytest.approx(20.0, abs=1e-12)
    assert parse_temperature(20) == 20.0


def test_a_length_in_degrees_is_refused():
    with pytest.raises(CaseError, match="is not a length"):
        parse_quantity("3 degC", "length", file="case.toml", key="layers[1].thickness")


def test_cycle_amplitude_and_dew_margin_in_degC_equal_kelvin(write_case):
    text = """
    [geometry]
    kind = "cylinder"
    inner_radius = "20 mm"
    [[layers]]
    material = "elastomeric-foam"
    thickness = "19 mm"
    [series.cycles.air]
    mean = "25 degC"
    amplitude = "AMP"
    [inside]
    type = "temperature"
    surface_temperature = "6 degC"
    [outside]
    type = "film"
    air_temperature = "series:air"
    film_coefficient = "9 W/(m2*K)"
    relative_humidity = "70 %"
    [time]
    start = "2026-07-01T00:00"
    duration = "1 d"
    step = "1 h"
    initial = "steady"
    [sizing]
    layer = 1
    thicknesses = ["9 mm", "19 mm"]
    dew_point_margin = "MARGIN"
    """
    kelvin = load_case(write_case(text.replace("AMP", "7 K").replace("MARGIN", "1 K"), "k.toml"))
    celsius = load_case(write_case(text.replace("AMP", "7 degC").replace("MARGIN", "1 degC"), "c.toml"))
    assert celsius.sizing.dew_point_margin == kelvin.sizing.dew_point_margin == 1.0
    times = kelvin.time.start + np.arange(24) * np.timedelta64(1, "h")
    np.testing.assert_array_equal(celsius.outside.air_temperature(times), kelvin.outside.air_temperature(times))
    assert kelvin.outside.air_temperature(times).max() == pytest.approx(32.0)


# --------------------------------------------------------------------------- #
# the registry's definitions cache: faster when it works, never an error when it does not


def _fresh_registry():
    """Build the registry as a new process would (the module keeps one per process)."""
    from layers import units

    return units.registry.__wrapped__()


def _check(registry) -> None:
    # NIST SP 811 (2008) Appendix B.8, from memory: 1 Btu_IT in/(h ft2 degF) = 0.1442279 W/(m K)
    q = registry.Quantity("1 Btu*in/(h*ft**2*delta_degF)").to("W/(m*K)").magnitude
    assert q == pytest.approx(0.1442279, rel=NIST)
    assert registry.Quantity(5, "pct").to("dimensionless").magnitude == pytest.approx(0.05)


def test_registry_fills_its_cache_once_and_then_reads_it(tmp_path, monkeypatch):
    monkeypatch.setenv("LAYERS_CACHE_DIR", str(tmp_path / "cache"))
    from layers import units

    _check(_fresh_registry())
    folder = units._units_cache_folder()
    assert folder.parent == tmp_path / "cache"
    cached = sorted(p.name for p in folder.iterdir())
    assert any(name.endswith(".pickle") for name in cached)
    # no half-filled temporary folder is left beside it
    assert [p.name for p in folder.parent.iterdir()] == [folder.name]
    _check(_fresh_registry())
    assert sorted(p.name for p in folder.iterdir()) == cached


def test_registry_without_a_writable_cache_folder_still_works(tmp_path, monkeypatch):
    blocker = tmp_path / "not-a-folder"
    blocker.write_text("a file where the cache folder would go")
    monkeypatch.setenv("LAYERS_CACHE_DIR", str(blocker / "cache"))
    _check(_fresh_registry())
    assert blocker.is_file()


def test_registry_with_a_damaged_cache_rebuilds_it(tmp_path, monkeypatch):
    monkeypatch.setenv("LAYERS_CACHE_DIR", str(tmp_path / "cache"))
    from layers import units

    _fresh_registry()
    folder = units._units_cache_folder()
    for pickled in folder.glob("*.pickle"):
        pickled.write_bytes(pickled.read_bytes()[:100])  # as if a writer had been killed
    _check(_fresh_registry())  # works from the definitions, and drops the damaged cache
    assert not folder.exists()
    _check(_fresh_registry())  # the next start fills it again
    assert any(folder.glob("*.pickle"))


def test_units_ureg_is_the_one_registry():
    from layers import units

    assert units.ureg is units.registry()
    with pytest.raises(AttributeError):
        units.no_such_name  # noqa: B018


@pytest.mark.parametrize(
    "text",
    ["9**9**9 mm", "2*3 mm", "1e3**2 mm", "(1+1) m", "10 mm; import os", "1 m**99", "x" * 400, "nan mm"],
)
def test_quantities_are_parsed_without_evaluating_expressions(text):
    """Only a number, an optional exponent and a unit are read; operators
    between numbers, large powers and long text are refused at once (each
    within a second: "9**9**9 mm" used to hang the parser), and the message
    echoes at most about 80 characters."""
    import time

    from layers.errors import CaseError
    from layers.units import parse_quantity

    start = time.monotonic()
    with pytest.raises(CaseError) as info:
        parse_quantity(text, "length", file="c.toml", key="layers[1].thickness")
    assert time.monotonic() - start < 1.0
    assert len(str(info.value)) < 300 and "\n" not in str(info.value)


@pytest.mark.parametrize(
    "text,kind,si",
    [
        ("1e3 mm", "length", 1.0),  # was read as 1 e**3 mm (the m2-style power rule caught "e3")
        ("2.5E-2 m", "length", 0.025),
        ("0.035 W/(m*K)", "conductivity", 0.035),
        ("5 W/(m^2*K)", "film_coefficient", 5.0),
        ("1 m**2*K/W", "areal_resistance", 1.0),
        ("1400 J/(kg*K)", "specific_heat", 1400.0),
        ("0.25", "length", 0.25),
    ],
)
def test_plain_quantities_still_read(text, kind, si):
    """Ordinary quantities read as before; exponents in the number are numbers."""
    from layers.units import parse_quantity

    assert parse_quantity(text, kind) == pytest.approx(si, rel=1e-12)
