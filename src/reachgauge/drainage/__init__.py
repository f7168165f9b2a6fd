"""Drainage area of every transect and reach (issue 12).

Three sources (``--drainage-area``):

* ``terrain``: the whole terrain raster is routed once, in the run's process,
  before the reach tasks (:mod:`reachgauge.drainage.grid`): depressions filled
  and D8 flow accumulated by pyflwdir (:mod:`reachgauge.drainage.routing`). The
  contributing area (km²) is kept as a tiled GeoTIFF in the run's checkpoint
  folder, with a second band marking the cells whose watershed reaches the
  raster's edge or nodata (the area there is a lower bound).
* a flow-accumulation raster the user gives (cell counts, or km², see
  ``--accumulation-unit``), on the terrain's grid.
* a field of the streams (``--drainage-area-field``, as before): one value per reach.

Each reach task then reads only the window of that raster around its thalweg
points (:mod:`reachgauge.drainage.lookup`), as it reads the terrain.

Without streams, ``--channel-area A`` derives the reaches from the same routed
raster: channels where at least A km² drains, split at confluences
(:mod:`reachgauge.drainage.channels`).
"""

from reachgauge.drainage.grid import DrainageSource, attach, prepare
from reachgauge.drainage.lookup import AtTransects, at_transects

__all__ = ["AtTransects", "DrainageSource", "at_transects", "attach", "prepare"]
