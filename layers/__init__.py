"""layers: transient heat analysis of layered walls, roofs and insulated pipes.

The public entry points are :func:`layers.case.load_case` (case file to a
validated :class:`~layers.case.Case`) and :func:`layers.simulation.simulate`
(case to an :class:`xarray.Dataset`).
"""

from layers.about import CAUTION, __version__

__all__ = ["CAUTION", "__version__"]
