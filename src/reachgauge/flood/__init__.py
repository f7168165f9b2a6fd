"""Where design flows go: footprints and depth grids per reach and flow.

:mod:`~reachgauge.flood.corridor` (the cells of a reach and who owns them),
:mod:`~reachgauge.flood.extend` (stages on widened transects),
:mod:`~reachgauge.flood.footprint` (surface, depth, footprint, polygons),
:mod:`~reachgauge.flood.grids` (depth GeoTIFFs) and
:mod:`~reachgauge.flood.reach` (one reach, every flow).
"""
