"""Parameters of a run: one dataclass that the CLI, the TOML file and the API all fill.

Every length here is in **metres** (the engine works in SI internally); the CLI
and the TOML reader convert from feet when the run's units are ``"us"``. Each
field's metadata holds its group (for ``--help`` and the TOML table it lives
in), its help text, and whether it is a length (converted with the units).

The defaults suit a 1 m lidar raster and small to mid-size streams (bankfull
widths of about 2–30 m): transects every 20 m, 40 m either side of the
centreline, the thalweg sought within 8 m of the digitised line.
"""

from __future__ import annotations

import dataclasses
import tomllib
from dataclasses import dataclass, field
from pathlib import Path

import warnings

from reachgauge.errors import InputError, ReachgaugeWarning
from reachgauge.manning import FOOT


def _f(default, group, help, length=False, **kw):
    return field(default=default, metadata={"group": group, "help": help, "length": length, **kw})


BANKFULL_METHODS = ("bank-top", "min-width-depth", "bench", "max-hydraulic-depth", "fixed-depth",
                    "regional")


@dataclass
class RunConfig:
    # ------------------------------------------------------------------ inputs
    dem: Path | None = _f(None, "inputs", "terrain raster (any format rasterio opens)")
    streams: Path | None = _f(None, "inputs", "stream centrelines (any format geopandas opens)")
    layer: str | None = _f(None, "inputs", "layer of the streams file (default: the first)")
    id_field: str | None = _f(None, "inputs", "field holding a reach id (default: assigned 1, 2, ...)")
    name_field: str | None = _f(None, "inputs", "field holding a reach name, for the report")
    dem_crs: str | None = _f(None, "inputs", "CRS of a raster that has none, e.g. EPSG:32633")
    streams_crs: str | None = _f(None, "inputs", "CRS of a streams file that has none")
    work_crs: str | None = _f(None, "inputs",
                              "projected CRS to work in when the raster is geographic "
                              "(default: its UTM zone)")
    vertical_units: str = _f("m", "inputs", "unit of the raster's elevations: m or ft",
                             choices=("m", "ft"))
    units: str = _f("si", "inputs", "unit system of options and results: si (m, m³/s) or us (ft, ft³/s)",
                    choices=("si", "us"))
    # ----------------------------------------------------------------- network
    orientation: str = _f("terrain", "network",
                          "terrain: orient each line downstream from the raster; digitised: trust "
                          "the lines' drawn direction", choices=("terrain", "digitised"))
    split_length: float | None = _f(None, "network", "split lines into reaches of about this length",
                                    length=True)
    # ---------------------------------------------------------------- transects
    spacing: float = _f(20.0, "transects", "distance between transects along the centreline",
                        length=True)
    half_width: float = _f(40.0, "transects", "transect length either side of the centreline",
                           length=True)
    half_width_field: str | None = _f(None, "transects", "field giving a half-width per reach")
    smoothing: float = _f(30.0, "transects",
                          "centreline length over which the transect direction is smoothed",
                          length=True)
    sample_step: float | None = _f(None, "transects",
                                   "sampling step along a transect (default: the pixel size)",
                                   length=True)
    snap_distance: float = _f(8.0, "transects",
                              "search this far either side of the centreline for the thalweg",
                              length=True)
    # ------------------------------------------------------------------- slope
    slope_source: str = _f("bed", "slope",
                           "bed: thalweg profile; water: water surface of hydro-flattened terrain",
                           choices=("bed", "water"))
    slope_window: float = _f(200.0, "slope", "length of the window for the slope at each station",
                             length=True)
    min_slope: float = _f(1e-4, "slope", "floor for slope on flat reaches (flagged), dimensionless")
    carve: bool = _f(True, "slope", "carve humps (embankments) out of the thalweg profile")
    # ---------------------------------------------------------------- bankfull
    bankfull_method: str = _f("bank-top", "bankfull", "how to pick the bankfull stage",
                              choices=BANKFULL_METHODS)
    bankfull_depth: float | None = _f(None, "bankfull", "depth above thalweg for fixed-depth",
                                      length=True)
    regional_coef: float | None = _f(None, "bankfull",
                                     "regional curve: depth = coef × area^exp (m, km²)")
    regional_exp: float | None = _f(None, "bankfull", "regional curve exponent")
    drainage_area_field: str | None = _f(None, "bankfull", "field holding drainage area in km²")
    baseflow_depth: float = _f(0.0, "bankfull",
                               "depth of water under the terrain's water surface to add back",
                               length=True)
    # -------------------------------------------------------------- roughness
    n: float = _f(0.035, "roughness", "Manning's n of the channel")
    n_overbank: float | None = _f(None, "roughness", "Manning's n of the overbanks (default: n)")
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
    depths: tuple[float, ...] = _f((), "stages", "depths above the thalweg to report", length=True)
    elevations: tuple[float, ...] = _f((), "stages", "water-surface elevations to report",
                                       length=True)
    rating_max_depth: float | None = _f(None, "stages",
                                        "rating curves up to this depth (default: 2 × bankfull)",
                                        length=True)
    rating_step: float = _f(0.1, "stages", "depth step of the rating curves", length=True)
    design_flows: Path | None = _f(None, "stages",
                                   "CSV of reach_id, flow, discharge: design flows to check")
    design_flow_fields: tuple[str, ...] = _f((), "stages", "fields of the streams holding design flows")
    # ----------------------------------------------------------------- running
    jobs: int = _f(1, "running", "worker processes (0: one per core)")
    scheduler: str | None = _f(None, "running", "address of a Dask scheduler, e.g. tcp://host:8786")

    # ----------------------------------------------------------------- helpers
    def replace(self, **changes) -> "RunConfig":
        return dataclasses.replace(self, **changes)


# the settings that name input files
PATH_FIELDS = tuple(f.name for f in dataclasses.fields(RunConfig) if "Path" in str(f.type))


def fields_by_group():
    groups: dict[str, list[dataclasses.Field]] = {}
    for f in dataclasses.fields(RunConfig):
        groups.setdefault(f.metadata["group"], []).append(f)
    return groups


def from_mapping(values: dict, units: str | None = None, *, source: str = "config") -> RunConfig:
    """Build a :class:`RunConfig` from a flat mapping in the run's units.

    Lengths are converted from feet when ``units`` (or ``values['units']``) is
    ``"us"``. Unknown keys are an :class:`InputError` naming the known ones.
    """
    known = {f.name: f for f in dataclasses.fields(RunConfig)}
    unknown = sorted(set(values) - set(known))
    if unknown:
        raise InputError(f"{source}: unknown setting(s) {', '.join(unknown)}",
                         f"known settings are: {', '.join(known)}")
    u = units or values.get("units", "si")
    if u not in ("si", "us"):
        raise InputError(f"{source}: units must be 'si' or 'us', not {u!r}", "use si or us")
    out = {}
    for key, val in values.items():
        f = known[key]
        choices = f.metadata.get("choices")
        if choices and val not in choices:
            raise InputError(f"{source}: {key} must be one of {', '.join(choices)}, not {val!r}",
                             f"pick one of {', '.join(choices)}")
        if f.metadata["length"] and val is not None and u == "us":
            val = tuple(v * FOOT for v in val) if isinstance(val, (list, tuple)) else val * FOOT
        if isinstance(val, list):
            val = tuple(val)
        if key in PATH_FIELDS and val is not None:
            val = Path(val)
        out[key] = val
    cfg = RunConfig(**out)
    validate(cfg)
    return cfg


def read_toml(path) -> dict:
    """Read a TOML config into a flat mapping; tables are groups and are flattened."""
    p = Path(path)
    if not p.is_file():
        raise InputError(f"config file {str(p)!r} does not exist", "check the --config path")
    try:
        data = tomllib.loads(p.read_text(encoding="utf-8"))
    except (tomllib.TOMLDecodeError, UnicodeDecodeError) as exc:
        raise InputError(f"{p.name} is not valid TOML ({exc})", "fix the line it names") from None
    flat = {}
    for key, val in data.items():
        if isinstance(val, dict):
            flat.update(val)
        else:
            flat[key] = val
    # relative paths in a config file are relative to the file
    for key in PATH_FIELDS:
        if isinstance(flat.get(key), str) and not Path(flat[key]).is_absolute():
            flat[key] = str(p.parent / flat[key])
    return flat


def validate(cfg: RunConfig) -> None:
    """Range checks that need no data."""
    def pos(name, allow_none=False):
        v = getattr(cfg, name)
        if v is None and allow_none:
            return
        if v is None or not (v > 0):
            raise InputError(f"{name.replace('_', '-')} must be greater than 0, got {v!r}",
                             "give a positive length")

    for name in ("spacing", "half_width", "smoothing", "snap_distance", "slope_window",
                 "rating_step", "min_slope", "n"):
        pos(name)
    for name in ("split_length", "sample_step", "rating_max_depth", "n_overbank", "bankfull_depth"):
        pos(name, allow_none=True)
    if cfg.snap_distance > cfg.half_width:
        raise InputError(
            f"snap-distance ({cfg.snap_distance:g} m) is longer than half-width ({cfg.half_width:g} m)",
            "search for the thalweg within the transect: lower snap-distance or raise half-width")
    if cfg.baseflow_depth < 0:
        raise InputError("baseflow-depth must be 0 or more", "give the depth of water to add back")
    if cfg.bankfull_method == "fixed-depth" and cfg.bankfull_depth is None:
        raise InputError("bankfull method fixed-depth needs bankfull-depth",
                         "give --bankfull-depth D")
    if cfg.bankfull_method == "regional" and (cfg.regional_coef is None or cfg.regional_exp is None
                                              or cfg.drainage_area_field is None):
        raise InputError("bankfull method regional needs regional-coef, regional-exp and "
                         "drainage-area-field", "give all three, or pick another method")
    if (cfg.landcover is None) != (cfg.landcover_table is None):
        raise InputError("landcover and landcover-table go together",
                         "give both the land-cover raster and its class-to-n CSV")
    from reachgauge.hydraulics.roughness import check_n_range  # published ranges of n (Chow 1959, Table 5-6)

    for name in ("n", "n_overbank"):
        v = getattr(cfg, name)
        if v is not None:
            for note in check_n_range(v, force=cfg.force_n, where=name.replace("_", "-")):
                warnings.warn(note, ReachgaugeWarning, stacklevel=3)
    if cfg.jobs < 0:
        raise InputError("jobs must be 0 (one per core) or more", "give --jobs N")


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
