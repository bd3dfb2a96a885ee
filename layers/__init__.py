"""layers: transient heat analysis of layered walls, roofs and insulated pipes.

The public entry points are :func:`layers.case.load_case` (case file to a
validated :class:`~layers.case.Case`) and :func:`layers.simulation.simulate`
(case to an :class:`xarray.Dataset`).
"""

from importlib.metadata import PackageNotFoundError, version

try:
    __version__ = version("layers")
except PackageNotFoundError:  # running from a source tree that is not installed
    __version__ = "0.0.0+unknown"

CAUTION = (
    "Engineering estimate only. Touch-safety limits, condensation control and "
    "insulation requirements are set by local building, energy and safety codes "
    "and licensed practice, which take precedence."
)
