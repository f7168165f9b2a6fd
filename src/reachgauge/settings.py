"""Checks of the run's settings before any work: every key known, every value
of its field's type, every value inside its allowed range, the settings
consistent with each other.

A value comes from a config file (TOML can hold text where a number belongs,
a number where a list belongs), from the command line, or from the Python API;
every message names the key as the user wrote it (``--spacing`` or ``spacing in
run.toml``), the value, what is allowed, and how to write it.

Ranges are in :class:`reachgauge.config.RunConfig`'s field metadata, in SI,
and are shown in the run's units. They are wide on purpose (common practice,
not a published table): the limits catch typos and unit slips — a 1e9 m
spacing, a negative depth, a rating step so fine that the rating tables would
not fit in memory — and never a real river.
"""

from __future__ import annotations

import math
import numbers
import re
import typing
import warnings
from pathlib import Path

import numpy as np

from reachgauge.config import FIELDS, MAX_RATING_STAGES, PATH_FIELDS, RunConfig, location
from reachgauge.errors import InputError, ReachgaugeWarning, shown
from reachgauge.manning import FOOT, SQ_MILE_KM2

# samples per transect at most (2 × half-width / sample step)
MAX_SAMPLES = 100_000
SCHEDULER = re.compile(r"^(?:(?:tcp|tls|ucx|ws|wss)://)?(\[[0-9a-fA-F:]+\]|[\w.-]+):(\d{1,5})$"
                       r"|^inproc://\S+$")


def _fields():
    return FIELDS


def _name(key, origin=None, value: str | None = None) -> str:
    """The key as the user wrote it, with its value: ``--spacing 20 m`` or
    ``spacing = 20 m in run.toml``."""
    src = (origin or {}).get(key)
    if src and src not in ("--", "config", "options"):
        return f"{key}{'' if value is None else ' = ' + value} in {src}"
    return "--" + key.replace("_", "-") + ("" if value is None else " " + value)


# ----------------------------------------------------------------------- types
def _kind(key) -> str:
    hint = typing.get_type_hints(RunConfig)[key]
    args = [a for a in typing.get_args(hint) if a is not type(None)]
    base = args[0] if args and typing.get_origin(hint) is not tuple else hint
    if typing.get_origin(base) is tuple:
        return "texts" if typing.get_args(base)[0] is str else "numbers"
    return {Path: "path", str: "text", float: "number", int: "whole", bool: "bool"}[base]


EXPECT = {"path": ("a file path in quotes", '"{k}.tif"'), "text": ("text in quotes", '"..."'),
          "number": ("a number", "20.0"), "whole": ("a whole number", "2"),
          "bool": ("true or false", "true"), "numbers": ("a list of numbers", "[0.5, 1.0]"),
          "texts": ("a list of texts", '["q2", "q100"]')}


def _number(v) -> bool:
    # numbers.Real takes numpy's scalars too (the Python API may pass them)
    return isinstance(v, numbers.Real) and not isinstance(v, (bool, np.bool_)) and math.isfinite(v)


def _fits(kind, v) -> bool:
    if v is None:
        return True
    if kind == "path":
        return (isinstance(v, str) and v.strip() != "") or isinstance(v, Path)
    if kind == "text":
        return isinstance(v, str)
    if kind == "number":
        return _number(v)
    if kind == "whole":
        return isinstance(v, numbers.Integral) and not isinstance(v, (bool, np.bool_))
    if kind == "bool":
        return isinstance(v, (bool, np.bool_))
    if not isinstance(v, (list, tuple)):
        return False
    return all(_number(x) if kind == "numbers" else isinstance(x, str) for x in v)


def _what(v) -> str:
    if isinstance(v, bool):
        return "true/false"
    if isinstance(v, str):
        return "empty text" if not v.strip() else "text"
    if isinstance(v, (int, float)):
        return "a number" if math.isfinite(v) else "not a finite number"
    if isinstance(v, (list, tuple)):
        return "a list" + (" with an item of another type" if v else "")
    if isinstance(v, dict):
        return "a table"
    return f"a {type(v).__name__}"


def _toml(v) -> str:
    if isinstance(v, bool):
        return "true" if v else "false"
    if isinstance(v, str):
        return '"' + v.replace('"', '\\"') + '"'
    if isinstance(v, (list, tuple)):
        return "[" + ", ".join(_toml(x) for x in v) + "]"
    return shown(v)


def check_keys(values: dict, source: str) -> None:
    known = _fields()
    unknown = sorted(set(values) - set(known))
    if unknown:
        raise InputError(f"{source}: unknown setting(s) {', '.join(unknown)}",
                         f"known settings are: {', '.join(known)}")


def check_types(values: dict, source: str) -> None:
    """Each value against its field's type; then its choices."""
    fields = _fields()
    for key, v in values.items():
        kind = _kind(key)
        if not _fits(kind, v):
            expect, example = EXPECT[kind]
            if kind == "bool" and str(v).strip().lower() in ("true", "false"):
                example = str(v).strip().lower()
            if kind in ("numbers", "texts") and _fits(kind[:-1] if kind == "texts" else "number",
                                                      v):
                example = f"[{_toml(v)}]"
            raise InputError(f"{source}: {key} = {_toml(v)} is {_what(v)}, but {key} takes "
                             f"{expect}", f"write {key} = {example.format(k=key)}")
        choices = fields[key].metadata.get("choices")
        if choices and v is not None and v not in choices:
            raise InputError(f"{source}: {key} must be one of {', '.join(choices)}, not "
                             f"{_toml(v)}", f"pick one of {', '.join(choices)}")


# ----------------------------------------------------------------------- ranges
def _show(key, v_si, units) -> str:
    f = _fields()[key]
    if f.metadata.get("length"):
        return f"{v_si / FOOT:.6g} ft" if units == "us" else f"{v_si:.6g} m"
    if f.metadata.get("area"):
        return f"{v_si / SQ_MILE_KM2:.6g} mi²" if units == "us" else f"{v_si:.6g} km²"
    return f"{v_si:.6g}"


def _in_range(cfg, key, origin) -> None:
    f = _fields()[key]
    lo, hi = f.metadata["range"]
    closed = f.metadata.get("closed", False)
    vals = getattr(cfg, key)
    for v in (vals if isinstance(vals, tuple) else (vals,)):
        if v is None:
            continue
        ok = (v >= lo if closed else v > lo) and v <= hi
        if not ok:
            low = f"at least {_show(key, lo, cfg.units)}" if closed else \
                f"more than {_show(key, lo, cfg.units)}"
            raise InputError(
                f"{_name(key, origin, _show(key, v, cfg.units))} is outside the allowed range: "
                f"{low} and at most {_show(key, hi, cfg.units)}",
                f"give a value in that range for {key.replace('_', '-')} ({f.metadata['help']})"
                + ("; lengths are in ft with --units us" if f.metadata.get("length") else "")
                + ("; areas are in mi² with --units us" if f.metadata.get("area") else ""))


def validate(cfg, origin: dict | None = None) -> None:
    """Every range and cross-check of a :class:`RunConfig` (values in SI)."""
    for key, f in _fields().items():
        if "range" in f.metadata:
            _in_range(cfg, key, origin)
    sh = lambda k, v: _show(k, v, cfg.units)  # noqa: E731
    n = lambda k: _name(k, origin, sh(k, getattr(cfg, k)))  # noqa: E731
    if cfg.snap_distance > cfg.half_width:
        raise InputError(
            f"{n('snap_distance')} is longer than {n('half_width')}",
            "search for the thalweg within the transect: lower --snap-distance or raise "
            "--half-width")
    if cfg.sample_step is not None and 2 * cfg.half_width / cfg.sample_step > MAX_SAMPLES:
        raise InputError(f"{n('sample_step')} would take "
                         f"more than {MAX_SAMPLES} samples per transect",
                         f"give a step of at least {sh('sample_step', 2 * cfg.half_width / MAX_SAMPLES)}"
                         " (the pixel size is the usual choice)")
    if cfg.split_length is not None and cfg.split_length < cfg.spacing:
        raise InputError(f"{n('split_length')} is shorter than {n('spacing')}: every piece would be "
                         "too short for one transect", "raise --split-length or lower --spacing")
    if cfg.rating_max_depth is not None:
        stages = cfg.rating_max_depth / cfg.rating_step
        if stages > MAX_RATING_STAGES:
            raise InputError(
                f"{n('rating_step')} up to {n('rating_max_depth')} makes "
                f"{stages:.0f} stages per transect, more than {MAX_RATING_STAGES}",
                f"give a rating step of at least "
                f"{sh('rating_step', cfg.rating_max_depth / MAX_RATING_STAGES)}")
    if cfg.bankfull_method == "fixed-depth" and cfg.bankfull_depth is None:
        raise InputError("bankfull method fixed-depth needs --bankfull-depth",
                         "give --bankfull-depth D")
    if cfg.bankfull_method == "regional" and (cfg.regional_coef is None or cfg.regional_exp is None
                                              or (cfg.drainage_area_field is None
                                                  and cfg.drainage_area is None)):
        raise InputError("bankfull method regional needs --regional-coef, --regional-exp and "
                         "--drainage-area-field or --drainage-area",
                         "give all three, or pick another method")
    if cfg.drainage_coarsen not in (None, 1) and cfg.drainage_area is None:
        raise InputError("--drainage-coarsen needs --drainage-area terrain",
                         "add --drainage-area terrain, or leave --drainage-coarsen out")
    _check_channels(cfg)
    if (cfg.landcover is None) != (cfg.landcover_table is None):
        raise InputError("--landcover and --landcover-table go together",
                         "give both the land-cover raster and its class-to-n CSV")
    if cfg.scheduler is not None and not SCHEDULER.match(cfg.scheduler.strip()):
        raise InputError(f"{_name('scheduler', origin, repr(cfg.scheduler))} is not a Dask "
                         "scheduler address",
                         "give host:port, e.g. tcp://10.0.0.5:8786 (the address the scheduler "
                         "prints when it starts)")
    if cfg.footprint_max_width is not None and cfg.footprint_max_width < 2 * cfg.half_width:
        raise InputError(f"{n('footprint_max_width')} is shorter than the transects "
                         f"(2 × {n('half_width')})",
                         "give a footprint width limit of at least the transect length")
    if cfg.depth_grids is not None:
        from reachgauge.flood.grids import check_depth_dir

        check_depth_dir(cfg.depth_grids)
    from reachgauge.hydraulics.roughness import check_n_range  # Chow (1959), Table 5-6

    if cfg.n_range and (len(cfg.n_range) != 2 or not cfg.n_range[0] < cfg.n_range[1]):
        raise InputError(f"{_name('n_range', origin, ' '.join(f'{v:g}' for v in cfg.n_range))} "
                         "needs two values, low below high",
                         "give --n-range LOW HIGH, e.g. --n-range 0.03 0.05")

    for name in ("n", "n_overbank", "n_range"):
        v = getattr(cfg, name)
        if v is not None:
            for note in check_n_range(v, force=cfg.force_n, where=_name(name, origin)):
                warnings.warn(note, ReachgaugeWarning, stacklevel=4)


STREAM_FIELDS = ("layer", "id_field", "name_field", "streams_crs", "half_width_field", "n_field",
                 "drainage_area_field", "design_flow_fields")


def _check_channels(cfg) -> None:
    """``--channel-area`` derives the channels from the routed terrain, and only
    when no streams are given; then no setting may name the streams' fields."""
    if cfg.channel_area is None:
        return
    from reachgauge.drainage.grid import is_terrain

    if not is_terrain(cfg.drainage_area):
        raise InputError("--channel-area needs --drainage-area terrain (the channels are "
                         "derived from the routed terrain)",
                         "add --drainage-area terrain, or leave --channel-area out")
    if cfg.streams is not None:
        raise InputError("--channel-area derives the channels when no --streams are given, "
                         "but --streams is given too",
                         "leave out --streams to derive the channels, or --channel-area to use "
                         "the streams")
    named = [k for k in STREAM_FIELDS if getattr(cfg, k) not in (None, ())]
    if named:
        raise InputError(f"--{named[0].replace('_', '-')} names a field or layer of the streams, "
                         "but the channels are derived from the terrain (--channel-area)",
                         f"leave out --{named[0].replace('_', '-')}, or give --streams")


# ------------------------------------------------ building a RunConfig from values
def from_mapping(values: dict, units: str | None = None, *, source: str = "config") -> RunConfig:
    """Build a :class:`RunConfig` from a flat mapping in the run's units.

    Lengths are converted from feet when ``units`` (or ``values['units']``) is
    ``"us"``. Unknown keys, values of the wrong type and values out of range
    are an :class:`InputError` naming the key, the value and what it takes.
    """
    values = dict(values)
    check_keys(values, source)
    check_types(values, source)
    u = units or values.get("units") or "si"
    if u not in ("si", "us"):
        raise InputError(f"{source}: units must be 'si' or 'us', not {u!r}", "use si or us")
    out = to_si(values, u)
    out.setdefault("units", u)
    return make(out, {k: source for k in values})


def build(file_values: dict | None, file_name: str | None, cli_values: dict) -> RunConfig:
    """The CLI's configuration: the config file first, command-line values over it.

    The file's lengths are in the unit system it states (its ``units`` key),
    whatever ``--units`` says; the command line's are in the run's units
    (``--units``, else the file's, else SI). A file that holds lengths but
    states no unit system is an error when the run is not in SI.
    """
    file_values = dict(file_values or {})
    name = file_name or "config"
    check_keys(file_values, name)
    check_types(file_values, name)
    check_types(cli_values, "options")
    file_units = file_values.pop("units", None)
    run_units = cli_values.get("units") or file_units or "si"
    lengths = [k for k, v in file_values.items()
               if (FIELDS[k].metadata["length"] or FIELDS[k].metadata.get("area"))
               and v not in (None, [], ())]
    if lengths and file_units is None and run_units != "si":
        raise InputError(
            f"{name} gives lengths ({', '.join(lengths[:4])}) but does not state their unit, "
            "and this run is in US units (--units us)",
            f'add the line units = "si" at the top of {name} if its lengths are in metres, or '
            'units = "us" if they are in feet')
    merged = {**to_si(file_values, file_units or "si"),
              **to_si({k: v for k, v in cli_values.items() if k != "units"}, run_units),
              "units": run_units}
    origin = {**{k: name for k in file_values}, **{k: "--" for k in cli_values}}
    return make(merged, origin)


def to_si(values: dict, units: str) -> dict:
    """Lengths converted from feet (areas from mi² to km²) when ``units`` is "us";
    lists as tuples; paths as Path, except a URL or GDAL virtual path, kept as
    text (:func:`~reachgauge.config.location`)."""
    out = {}
    for key, val in values.items():
        if FIELDS[key].metadata["length"] and val is not None and units == "us":
            val = tuple(v * FOOT for v in val) if isinstance(val, (list, tuple)) else val * FOOT
        if FIELDS[key].metadata.get("area") and val is not None and units == "us":
            val = val * SQ_MILE_KM2
        if isinstance(val, list):
            val = tuple(val)
        if key in PATH_FIELDS and val is not None:
            val = location(val)
        out[key] = val
    return out


def make(values: dict, origin: dict) -> RunConfig:
    """A checked :class:`RunConfig` from SI values; ``origin`` names where each
    key came from (a file name, or "--" for the command line) for the messages."""
    cfg = RunConfig(**values)
    validate(cfg, origin)
    return cfg
