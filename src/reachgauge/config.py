"""Parameters of a run: one dataclass that the CLI, the TOML file and the API all fill.

Every length here is in **metres** (the engine works in SI internally); the CLI
and the TOML reader convert from feet when the run's units are ``"us"``. Each
field's metadata holds its group (for ``--help`` and the TOML table it lives
in), its help text, and whether it is a length (converted with the units) or an area
(``area``: km², given in mi² with ``--units us``).

The defaults suit a 1 m lidar raster and small to mid-size streams (bankfull
widths of about 2–30 m): transects every 20 m, 40 m either side of the
centreline, the thalweg sought within 8 m of the digitised line.

Every value is checked before any work (:mod:`reachgauge.settings`): its type
against the field's (a TOML file can hold text where a number belongs), and its
allowed range (``range`` in the metadata, SI; open below unless ``closed``).
The ranges are wide: they catch typos and unit slips, not unusual rivers.
"""

from __future__ import annotations

import dataclasses
import re
import tomllib
from dataclasses import dataclass, field
from pathlib import Path

from reachgauge.errors import InputError


def _f(default, group, help, length=False, **kw):
    return field(default=default, metadata={"group": group, "help": help, "length": length, **kw})


# rating stages per transect at most: rows of the rating table and the kernel's
# (transects × stages) arrays stay in memory on a laptop
MAX_RATING_STAGES = 2000

BANKFULL_METHODS = ("bank-top", "min-width-depth", "bench", "max-hydraulic-depth", "fixed-depth",
                    "regional")


@dataclass
class RunConfig:
    # ------------------------------------------------------------------ inputs
    # a local path, or a URL / GDAL virtual path kept as text (remote_location)
    dem: Path | str | None = _f(None, "inputs", "terrain raster (any format rasterio opens)")
    streams: Path | None = _f(None, "inputs", "stream centrelines (any format geopandas opens)")
    layer: str | None = _f(None, "inputs", "layer of the streams file (default: the first)")
    id_field: str | None = _f(None, "inputs", "field holding a reach id (default: assigned 1, 2, ...)")
    name_field: str | None = _f(None, "inputs", "field holding a reach name, for the report")
    dem_crs: str | None = _f(None, "inputs", "CRS of a raster that has none, e.g. EPSG:32633")
    streams_crs: str | None = _f(None, "inputs", "CRS of a streams file that has none")
    work_crs: str | None = _f(None, "inputs",
                              "projected CRS to work in when the raster is geographic "
                              "(default: its UTM zone)")
    vertical_units: str | None = _f(None, "inputs",
                                    "unit of the raster's elevations (default: the raster's band "
                                    "unit, else m)", choices=("m", "ft"))
    units: str = _f("si", "inputs", "unit system of options and results: si (m, m³/s) or us "
                    "(ft, ft³/s); in a config file, also the unit of its own lengths",
                    choices=("si", "us"))
    # ----------------------------------------------------------------- network
    orientation: str = _f("terrain", "network",
                          "terrain: orient each line downstream from the raster; digitised: trust "
                          "the lines' drawn direction", choices=("terrain", "digitised"))
    split_length: float | None = _f(None, "network", "split lines into reaches of about this length",
                                    length=True, range=(0, 1e6))
    # ---------------------------------------------------------------- transects
    spacing: float = _f(20.0, "transects", "distance between transects along the centreline",
                        length=True, range=(0, 10_000))
    half_width: float = _f(40.0, "transects", "transect length either side of the centreline",
                           length=True, range=(0, 10_000))
    half_width_field: str | None = _f(None, "transects", "field giving a half-width per reach")
    smoothing: float = _f(30.0, "transects",
                          "centreline length over which the transect direction is smoothed",
                          length=True, range=(0, 100_000))
    sample_step: float | None = _f(None, "transects",
                                   "sampling step along a transect (default: the pixel size)",
                                   length=True, range=(0, 1000))
    snap_distance: float = _f(8.0, "transects",
                              "search this far either side of the centreline for the thalweg",
                              length=True, range=(0, 10_000))
    # ------------------------------------------------------------------- slope
    slope_source: str = _f("bed", "slope",
                           "bed: thalweg profile; water: water surface of hydro-flattened terrain",
                           choices=("bed", "water"))
    slope_window: float = _f(200.0, "slope", "length of the window for the slope at each station",
                             length=True, range=(0, 1e6))
    min_slope: float = _f(1e-4, "slope", "floor for slope on flat reaches (flagged), dimensionless",
                          range=(0, 0.1))
    carve: bool = _f(True, "slope", "condition the thalweg profile: breach humps (embankments) "
                     "and fill pits, least change")
    # ---------------------------------------------------------------- bankfull
    bankfull_method: str = _f("bank-top", "bankfull", "how to pick the bankfull stage",
                              choices=BANKFULL_METHODS)
    bankfull_depth: float | None = _f(None, "bankfull", "depth above thalweg for fixed-depth",
                                      length=True, range=(0, 100))
    regional_coef: float | None = _f(None, "bankfull",
                                     "regional curve: depth = coef × area^exp (m and km²; ft "
                                     "and mi² with --units us)",
                                     range=(0, 100))
    regional_exp: float | None = _f(None, "bankfull", "regional curve exponent", range=(0, 2))
    drainage_area_field: str | None = _f(None, "bankfull", "field holding drainage area in km² "
                                         "(mi² with --units us)")
    # ---------------------------------------------------------------- drainage
    drainage_area: Path | str | None = _f(None, "drainage",
                                          "drainage area of every transect and reach: 'terrain' "
                                          "(routed from the terrain raster) or a flow-accumulation "
                                          "raster on the terrain's grid (default: "
                                          "--drainage-area-field, per reach)")
    accumulation_unit: str = _f("cells", "drainage",
                                "unit of a flow-accumulation raster: cells (contributing cells, "
                                "the cell itself included) or km2", choices=("cells", "km2"))
    drainage_coarsen: int | None = _f(None, "drainage",
                                      "with --drainage-area terrain, route a copy of the terrain "
                                      "averaged F × F cells into one (less memory, coarser areas)",
                                      range=(1, 1000), closed=True)
    channel_area: float | None = _f(None, "drainage",
                                    "without --streams: derive the channels from the terrain "
                                    "where at least this drainage area (km²) flows, split into "
                                    "reaches at confluences (needs --drainage-area terrain)",
                                    area=True, range=(0, 1e7))
    regional_curves: Path | None = _f(None, "bankfull",
                                      "CSV of published regional curves to compare the reaches "
                                      "with (name, variable, coefficient, exponent, units, "
                                      "area_min, area_max)")
    baseflow_depth: float = _f(0.0, "bankfull",
                               "depth of water under a flat water surface in the terrain to add "
                               "back (flat sections only)",
                               length=True, range=(0, 100), closed=True)
    # -------------------------------------------------------------- roughness
    n: float = _f(0.035, "roughness", "Manning's n of the channel", range=(0, 1))
    n_overbank: float | None = _f(None, "roughness", "Manning's n of the overbanks (default: "
                                 "0.05, or land cover where given; never the channel's)",
                                 range=(0, 1))
    n_field: str | None = _f(None, "roughness", "field giving the channel n per reach")
    landcover: Path | None = _f(None, "roughness", "land-cover raster of integer classes")
    landcover_table: Path | None = _f(None, "roughness", "CSV of class, n for the land-cover raster")
    cowan: Path | None = _f(None, "roughness",
                            "CSV of Cowan's method terms per reach (reach_id, base, irregularity, "
                            "variation, obstruction, vegetation, meander)")
    force_n: bool = _f(False, "roughness", "accept n outside the published range")
    observations: Path | None = _f(None, "roughness",
                                   "CSV of measured flows (reach_id, chainage or x and y, stage or "
                                   "depth, discharge) to back-calculate n")
    calibrate: bool = _f(False, "roughness", "apply the back-calculated n to the observed reaches")
    # ------------------------------------------------------------------ stages
    depths: tuple[float, ...] = _f((), "stages", "depths above the thalweg to report", length=True,
                                   range=(0, 100))
    elevations: tuple[float, ...] = _f((), "stages", "water-surface elevations to report",
                                       length=True, range=(-500, 9000), closed=True)
    rating_max_depth: float | None = _f(None, "stages",
                                        "rating curves up to this depth (default: 2 × bankfull)",
                                        length=True, range=(0, 100))
    rating_step: float = _f(0.1, "stages", "depth step of the rating curves", length=True,
                            range=(0.01, 100), closed=True)
    design_flows: Path | None = _f(None, "stages",
                                   "CSV of reach_id, flow, discharge: design flows to check")
    design_flow_fields: tuple[str, ...] = _f((), "stages", "fields of the streams holding design flows")
    # -------------------------------------------------------------- footprints
    footprints: bool = _f(False, "footprints",
                          "map where each design flow goes: a footprints layer of polygons per "
                          "reach and flow (costs time: one more terrain window per reach)")
    footprint_max_width: float | None = _f(None, "footprints",
                                           "widest a transect is widened to where a flow runs "
                                           "over its ends, and the width mapped (default: 4 × "
                                           "the transect length)", length=True,
                                           range=(0, 100_000))
    depth_grids: Path | None = _f(None, "footprints",
                                  "folder for a depth GeoTIFF per reach and flow (turns "
                                  "--footprints on)")
    # ------------------------------------------------------------- uncertainty
    uncertainty: int = _f(0, "monte_carlo", "Monte Carlo draws for the uncertainty of discharge "
                          "and design checks (0: off; a few hundred for stable 10th-90th "
                          "percentiles)",
                          range=(0, 100_000), closed=True)
    n_range: tuple[float, ...] = _f((), "monte_carlo", "LOW HIGH: bounds of the channel n for "
                                    "the uncertainty draws (default: its source's range, else "
                                    "±20 percent)",
                                    range=(0, 1))
    vertical_accuracy: float | None = _f(None, "monte_carlo", "vertical accuracy (RMSE) of the "
                                         "terrain for the uncertainty draws (default: exact)",
                                         length=True, range=(0, 100))
    seed: int = _f(0, "monte_carlo", "seed of the uncertainty draws", range=(0, 2 ** 32 - 1),
                   closed=True)
    # ----------------------------------------------------------------- running
    jobs: int = _f(1, "running", "worker processes (0: one per core)", range=(0, 256),
                   closed=True)
    scheduler: str | None = _f(None, "running", "address of a Dask scheduler, e.g. tcp://host:8786")

    # ----------------------------------------------------------------- helpers
    def replace(self, **changes) -> "RunConfig":
        return dataclasses.replace(self, **changes)


def remote_location(value) -> bool:
    """True for a raster address that is not a local path: a URL
    (``https://host/dem.tif``, ``s3://...``) or a GDAL virtual file system path
    (``/vsicurl/...``, ``/vsis3/...``). Such an address stays text: ``Path`` would
    fold ``http://`` into ``http:/``, and a config file's folder must not be
    prefixed to it."""
    text = value if isinstance(value, str) else ""
    return bool(re.match(r"[A-Za-z][A-Za-z0-9+.-]*://", text)) or text.startswith("/vsi")


def location(value):
    """An input setting as it is kept: a remote address as text, else a Path."""
    return value if remote_location(value) else Path(value)


# the settings that name input files
PATH_FIELDS = tuple(f.name for f in dataclasses.fields(RunConfig) if "Path" in str(f.type))
FIELDS = {f.name: f for f in dataclasses.fields(RunConfig)}
# words a path setting takes instead of a file (--drainage-area terrain)
KEYWORDS = ("terrain",)


def fields_by_group():
    groups: dict[str, list[dataclasses.Field]] = {}
    for f in dataclasses.fields(RunConfig):
        groups.setdefault(f.metadata["group"], []).append(f)
    return groups


def read_toml(path) -> dict:
    """Read a TOML config into a flat mapping; tables are groups and are flattened."""
    p = Path(path)
    if p.is_dir():
        raise InputError(f"--config {str(p)!r} is a folder, not a file",
                         "give the TOML file itself, e.g. --config run.toml")
    if not p.is_file():
        raise InputError(f"config file {str(p)!r} does not exist", "check the --config path")
    try:
        data = tomllib.loads(p.read_text(encoding="utf-8"))
    except (tomllib.TOMLDecodeError, UnicodeDecodeError) as exc:
        raise InputError(f"{p.name} is not valid TOML ({exc})", "fix the line it names") from None
    except OSError as exc:
        raise InputError(f"cannot read {p.name} ({exc.strerror})", "check the file") from None
    flat: dict = {}
    for key, val in data.items():
        items = val.items() if isinstance(val, dict) and key not in FIELDS else [(key, val)]
        for k, v in items:
            if k in flat:
                raise InputError(f"{p.name}: {k} is set twice", f"keep one {k} = ... line")
            flat[k] = v
    # relative paths in a config file are relative to the file
    for key in PATH_FIELDS:
        if (isinstance(flat.get(key), str) and not remote_location(flat[key])
                and not Path(flat[key]).is_absolute() and flat[key] not in KEYWORDS):
            flat[key] = str(p.parent / flat[key])
    return flat


def markdown() -> str:
    """Option tables of ``reachgauge run`` by group, for the README (kept in sync by a test)."""
    out = []
    for group, fields in fields_by_group().items():
        out.append(f"**{group}** (TOML table `[{group}]`)\n")
        out.append("| option | TOML key | default | meaning |\n|---|---|---|---|")
        for f in fields:
            d = f.default
            if d is None or d == ():
                dt = "—"
            elif isinstance(d, bool):
                dt = "on" if d else "off"
            else:
                dt = f"{d:g} m" if f.metadata.get("length") and isinstance(d, float) else f"{d}"
            sep = " \\| "
            extra = f" ({sep.join(f.metadata['choices'])})" if "choices" in f.metadata else ""
            flag = "--" + f.name.replace("_", "-")
            if isinstance(d, bool):
                flag += f" / --no-{f.name.replace('_', '-')}"
            out.append(f"| `{flag}` | `{f.name}` | {dt} | {f.metadata['help']}{extra} |")
        out.append("")
    return "\n".join(out)
