"""The whole job in one Python call: :func:`run`, with the command line's parameters.

``reachgauge run`` on the command line is a thin layer over this; the README and the
walkthrough notebook use it too. Settings are the fields of
:class:`reachgauge.config.RunConfig` (the options of ``reachgauge run --help`` with
underscores), in the run's units: metres, or feet with ``units="us"``.
"""

from __future__ import annotations

from pathlib import Path

from reachgauge.config import RunConfig, read_toml
from reachgauge.settings import build
from reachgauge.errors import InputError


def configure(config=None, **values) -> RunConfig:
    """A :class:`RunConfig` from an optional TOML file and keyword settings (keyword
    values win; None means "not given"). The file's lengths are read in the unit
    system it states (its ``units`` key), the keywords' in the run's units (``units``,
    else the file's, else SI); every value is checked (:func:`reachgauge.settings.build`)."""
    file_values = read_toml(config) if config else {}
    given = {k: v for k, v in values.items() if v is not None}
    return build(file_values, Path(config).name if config else None, given)


def require_inputs(cfg: RunConfig) -> None:
    """The terrain raster and the streams must both be given and exist; the
    streams may be left out when the channels are derived from the terrain
    (``--drainage-area terrain --channel-area A``)."""
    from reachgauge.drainage.channels import derives
    from reachgauge.inputs.raster import check_exists

    if cfg.dem is None:
        raise InputError("the terrain raster is needed",
                         "give --dem RASTER (or set dem in --config)")
    if cfg.streams is None and not derives(cfg):
        raise InputError("the streams are needed (or channels derived from the terrain)",
                         "give --streams VECTOR, or --drainage-area terrain with --channel-area "
                         "AREA to derive the channels where at least AREA drains")
    check_exists(cfg.dem, "terrain raster", "--dem")
    if cfg.streams is not None:
        check_exists(cfg.streams, "streams file", "--streams")


def run(out, *, config=None, overwrite: bool = False, csv=None, report=None,
        colour_by: str = "discharge", progress=None, resume: bool = False, **values):
    """Run the whole batch and write the GeoPackage ``out`` (atomically), optionally
    CSV copies of its tables in the folder ``csv`` and the HTML ``report``.

    ``config``: a TOML file of settings; ``values``: settings as keywords (e.g.
    ``dem="terrain.tif", streams="streams.gpkg", spacing=10.0, jobs=2``), which win
    over the file. ``progress(output, done, total)`` is called as each reach
    finishes. Every finished reach is kept in ``<out>.checkpoint`` until the result
    is in place; ``resume=True`` continues an interrupted run from there (same
    settings and inputs, or it is refused). Returns the run's
    :class:`~reachgauge.batch.summary.RunSummary`
    (``.lines()`` prints like the command line). Raises
    :class:`~reachgauge.errors.InputError` for bad input, before any work.
    """
    from reachgauge.batch.pipeline import run_to_file

    cfg = configure(config, **values)
    require_inputs(cfg)
    return run_to_file(cfg, out, overwrite=overwrite, csv_dir=csv, report=report,
                       colour_by=colour_by, progress=progress, resume=resume)
