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

#: ISO 6946:2017 conventional surface resistances for horizontal heat flow
#: [m2 K W-1] (Table 7; from memory): inside and outside.
ISO6946_RSI_HORIZONTAL = 0.13
ISO6946_RSE = 0.04

#: No construction material survives this temperature (above the melting point
#: of steel and of refractory ceramics) [degC]: an input or a state beyond it is
#: a mistake.
HIGHEST_PHYSICAL_TEMPERATURE = 3000.0
