"""layers: transient heat analysis of layered walls, roofs and insulated pipes.

The public Python API (``docs/api.md``)::

    import layers
    case = layers.load_case("wall.toml")   # or layers.parse_case(toml_text_or_dict)
    ds = layers.simulate(case)             # an xarray.Dataset; progress=callable
    sz = layers.size(case)                 # insulation sizing ([sizing] table)
    pe = layers.periodic(case, period="24 h")   # ISO 13786 characteristics
    co = layers.condensation(case)         # ISO 13788 monthly interstitial condensation
    sw = layers.sweep(case, client=None)   # every point of [[sweep]]; a dask Client, or None
    ds = layers.open_run("runs/wall-....nc")    # an archived run, loaded

Importing the package is cheap: each function imports the part of the
library it needs when it is called (:mod:`layers.api`).
"""

from layers.about import CAUTION, __version__
from layers.api import condensation, load_case, open_run, parse_case, periodic, simulate, size, sweep

__all__ = ["CAUTION", "__version__", "condensation", "load_case", "open_run", "parse_case", "periodic", "simulate", "size", "sweep"]
