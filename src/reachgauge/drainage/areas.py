"""A reach's drainage area and its transects' (km², SI) from what the run has:
the areas read at the transects (:mod:`reachgauge.drainage.lookup`) or the
reach's drainage-area field. ``params``: the reach's
:class:`~reachgauge.hydraulics.reach.ReachParams`."""

from __future__ import annotations

import numpy as np

from reachgauge.errors import InputError


def drainage_area(params, attributes) -> float:
    """The reach's drainage area (km²) from the drainage-area field, NaN where no
    field is given or its value is not a positive number."""
    if params.drainage_area_field is None:
        return float("nan")
    try:
        v = float(attributes.get(params.drainage_area_field))
    except (TypeError, ValueError):
        return float("nan")
    return v * params.drainage_area_km2_per_unit if np.isfinite(v) and v > 0 else float("nan")


def reach_fields(params, rid, attributes, at=None, t: int = 0):
    """(reach area km² or None, per-transect columns, reach columns). From the
    areas read at the transects (``at``, :class:`reachgauge.drainage.AtTransects`):
    the reach's is the largest of its transects' (its downstream end; the largest
    rather than the last transect's, which may lack a thalweg), a lower bound when
    that transect's is. Else from the field, for the reach only."""
    nan = np.full(t, np.nan)
    if at is not None:
        area = np.asarray(at.area_km2, float)
        has = np.isfinite(area)
        i = int(np.argmax(np.where(has, area, -np.inf))) if has.any() else -1
        lower = bool(at.lower_bound[i]) if i >= 0 else False
        reach = {"drainage_area": float(area[i]) if i >= 0 else np.nan,
                 "drainage_source": at.source,
                 "drainage_flags": "area-lower-bound" if lower else ""}
        cols = ({"drainage_area": area, "drainage_snap": np.asarray(at.snap_m, float)},
                np.asarray(at.lower_bound, bool))
        if params.bankfull.method == "regional" and i < 0:
            raise InputError(f"reach {rid}: no drainage area within the snapping distance of "
                             "its thalweg", "check the drainage raster covers the reach")
        return (reach["drainage_area"] if i >= 0 else None), cols, reach
    v = drainage_area(params, attributes)
    cols = ({"drainage_area": nan, "drainage_snap": nan}, np.zeros(t, bool))
    reach = {"drainage_area": v if np.isfinite(v) and v > 0 else np.nan,
             "drainage_source": "field" if params.drainage_area_field else "",
             "drainage_flags": ""}
    if params.bankfull.method != "regional":
        return None, cols, reach
    if not (np.isfinite(v) and v > 0):
        raise InputError(f"reach {rid}: drainage-area field {params.drainage_area_field!r} has "
                         "no positive value", "fill the field, or pick another bankfull method")
    return v, cols, reach
