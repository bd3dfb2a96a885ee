"""Physical and conventional constants, each defined once."""

#: 0 degC in kelvin [K] (the definition of the Celsius scale).
ZERO_CELSIUS = 273.15
#: Absolute zero in degrees Celsius [degC].
ABSOLUTE_ZERO_CELSIUS = -ZERO_CELSIUS

#: Stefan-Boltzmann constant [W m-2 K-4] (CODATA 2018; exact in the 2019 SI).
STEFAN_BOLTZMANN = 5.670374419e-8

#: Wind speed behind the conventional outside surface resistance Rse = 0.04 m2 K W-1
#: [m s-1] (ISO 6946:2017, annex on surface resistances; from memory).
ISO6946_REFERENCE_WIND_SPEED = 4.0
