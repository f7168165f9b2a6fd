"""The report's maps: the reaches and transects coloured by a field, and the
design-flow footprints over a hillshade (matplotlib, base64 PNG), split from
:mod:`reachgauge.results.report_figures` so each reads in one sitting."""

from __future__ import annotations

import math

import numpy as np
import pandas as pd

from reachgauge.results.report_figures import (INK, NO_VALUE, WATER, WATER_EDGE, _new_figure,
                                               _png, colour_map)
from reachgauge.results.report_page import _e, _figure_html


def line_parts(geoms) -> tuple[list, np.ndarray]:
    """Vertex arrays of every LineString part of ``geoms`` (Multi parts split)
    and the index of the geometry each part came from."""
    import shapely

    arr = np.asarray(geoms, dtype=object)
    parts, src = shapely.get_parts(arr, return_index=True)
    keep = ~shapely.is_empty(parts)
    parts, src = parts[keep], src[keep]
    if not len(parts):
        return [], src
    coords, cidx = shapely.get_coordinates(parts, return_index=True)
    return np.split(coords, np.flatnonzero(np.diff(cidx)) + 1), src


def scale_length(span: float) -> float:
    """A round scale-bar length (1, 2 or 5 × 10^k) between a tenth and a
    quarter of the map span, or the nearest such below a quarter."""
    if not (span > 0 and math.isfinite(span)):
        return 0.0
    target = span / 4.0
    k = math.floor(math.log10(target))
    if 10.0 ** k > target:  # log10 rounded up at an exact power of ten
        k -= 1
    return max(m * 10.0 ** k for m in (1, 2, 5) if m * 10.0 ** k <= target)


def _crs_unit(crs_text: str) -> tuple[str, bool]:
    """(short label of the CRS's horizontal unit, is geographic)."""
    try:
        from pyproj import CRS

        crs = CRS.from_user_input(crs_text)
        name = crs.axis_info[0].unit_name if crs.axis_info else ""
        short = {"metre": "m", "meter": "m", "foot": "ft", "US survey foot": "US ft",
                 "degree": "°"}.get(name, name or "map units")
        return short, bool(crs.is_geographic)
    except Exception:  # unparseable or empty CRS: the map still draws
        return "map units", False


def _scale_bar(ax, unit: str) -> None:
    x0, x1 = ax.get_xlim()
    y0, y1 = ax.get_ylim()
    length = scale_length(x1 - x0)
    if length <= 0:
        return
    x, y = x0 + 0.04 * (x1 - x0), y0 + 0.05 * (y1 - y0)
    ax.plot([x, x + length], [y, y], color=INK, lw=3, solid_capstyle="butt", zorder=6)
    ax.text(x + length / 2, y + 0.015 * (y1 - y0), f"{length:g} {unit}", ha="center",
            va="bottom", fontsize=8, color=INK, zorder=6,
            bbox=dict(boxstyle="round,pad=0.1", fc="white", ec="none", alpha=0.8))


def _map(lay: dict, colour_by: str, info) -> str:
    from matplotlib.cm import ScalarMappable
    from matplotlib.collections import LineCollection
    from matplotlib.colors import Normalize

    reaches, tr, pts = lay["reaches"], lay["transects"], lay["thalweg_points"]
    r_geoms = reaches["geometry"].values if "geometry" in reaches else []
    r_lines, _ = line_parts(r_geoms)
    t_lines, t_src = line_parts(tr["geometry"].values if "geometry" in tr else [])
    if not r_lines and not t_lines:
        return '<section class="panel"><h2>Map</h2><p>No geometry to draw.</p></section>'
    unit, geographic = _crs_unit(info.crs)
    allxy = np.concatenate(r_lines + t_lines)
    span = np.ptp(allxy, axis=0)
    aspect = span[1] / span[0] if span[0] > 0 else 1.0
    fig = _new_figure(9.5, float(np.clip(8.0 * aspect, 4.0, 9.0)) + 0.6)
    ax = fig.add_subplot()
    cmap = colour_map()
    values = pd.to_numeric(tr[colour_by], errors="coerce").to_numpy(float)[t_src]
    finite = np.isfinite(values)
    lo, hi = (float(values[finite].min()), float(values[finite].max())) if finite.any() else (0, 1)
    norm = Normalize(lo, hi if hi > lo else lo + (abs(lo) or 1.0) * 1e-6)
    if (~finite).any():
        ax.add_collection(LineCollection([t_lines[j] for j in np.flatnonzero(~finite)],
                                         colors=NO_VALUE, linewidths=0.8, linestyles=(0, (2, 2)),
                                         zorder=1))
    if finite.any():
        ax.add_collection(LineCollection([t_lines[j] for j in np.flatnonzero(finite)],
                                         array=values[finite], cmap=cmap, norm=norm,
                                         linewidths=2.0, zorder=2))
    if r_lines:
        ax.add_collection(LineCollection(r_lines, colors=INK, linewidths=1.2, zorder=3))
    if "geometry" in pts and len(pts):
        import shapely

        xy = shapely.get_coordinates(np.asarray(pts["geometry"].values, dtype=object))
        ax.scatter(xy[:, 0], xy[:, 1], s=2.5, c=INK, linewidths=0, zorder=4)
    size = 8 if len(reaches) <= 20 else 6
    for r, geom in zip(reaches["reach_id"], r_geoms):
        if geom is not None and not geom.is_empty:
            p = geom.interpolate(0.5, normalized=True)
            ax.text(p.x, p.y, f" {r}", fontsize=size, color=INK, parse_math=False, zorder=5,
                    bbox=dict(boxstyle="round,pad=0.15", fc="white", ec="none", alpha=0.75))
    ax.set_aspect("equal", adjustable="box")
    ax.autoscale_view()
    ax.ticklabel_format(useOffset=False, style="plain")
    ax.tick_params(labelsize=8)
    ax.set_xlabel("longitude (°)" if geographic else f"easting ({unit})")
    ax.set_ylabel("latitude (°)" if geographic else f"northing ({unit})")
    if not geographic:
        _scale_bar(ax, unit)
    field_unit = info.unit("transects", colour_by)
    label = f"{colour_by} ({field_unit})" if field_unit else colour_by
    if finite.any():
        fig.colorbar(ScalarMappable(norm, cmap), ax=ax, shrink=0.85, label=label)
    uri = _png(fig)
    missing = int((~finite).sum())
    note = f"; {missing} transect(s) without a value drawn grey, dashed" if missing else ""
    cap = (f"Reaches (dark lines, labelled by id), transects coloured by <b>{_e(label)}</b>, "
           f"thalweg points as dots; axes in map units of the result's CRS{note}.")
    return f'<section class="panel"><h2>Map</h2>{_figure_html(uri, "map", cap)}</section>'


def hillshade(z, res: float, azimuth: float = 315.0, altitude: float = 45.0) -> np.ndarray:
    """Hillshade (0 dark … 1 lit) of elevations ``z`` (2-D, NaN no data) on square
    pixels of ``res`` (same unit as z): matplotlib's ``LightSource`` (Lambertian
    shading, light from ``azimuth``° clockwise from north at ``altitude``°)."""
    from matplotlib.colors import LightSource

    z = np.asarray(z, dtype=float)
    fill = np.nanmin(z) if np.isfinite(z).any() else 0.0
    shade = LightSource(azimuth, altitude).hillshade(np.where(np.isfinite(z), z, fill),
                                                     dx=res, dy=res)
    return np.where(np.isfinite(z), shade, np.nan)


def footprint_map_png(footprints, shade=None, extent=None, unit: str = "m") -> str:
    """Map of the footprints of each reach's largest design flow (``footprints``:
    a GeoDataFrame of the ``footprints`` layer) over a hillshade ``shade`` (2-D,
    0…1, or None) covering ``extent`` (left, right, bottom, top, map units).
    Out-of-bank water is not told apart here; the table beside says how much."""
    import shapely
    from matplotlib.collections import PatchCollection
    from matplotlib.patches import PathPatch
    from matplotlib.path import Path as MPath

    fig = _new_figure(9.5, 6.5)
    ax = fig.add_subplot()
    if shade is not None and extent is not None:
        ax.imshow(shade, cmap="Greys_r", extent=extent, origin="upper", vmin=0, vmax=1,
                  interpolation="bilinear", zorder=0)
    big = footprints.loc[footprints.groupby("reach_id")["discharge"].idxmax()] \
        if len(footprints) else footprints
    patches = []
    for g in big.geometry:
        for poly in shapely.get_parts(np.asarray([g], dtype=object)):
            if poly is None or poly.is_empty:
                continue
            rings = [np.asarray(poly.exterior.coords)] + [np.asarray(r.coords)
                                                          for r in poly.interiors]
            codes = np.concatenate([[MPath.MOVETO] + [MPath.LINETO] * (len(r) - 2)
                                    + [MPath.CLOSEPOLY] for r in rings])
            patches.append(PathPatch(MPath(np.concatenate(rings), codes)))
    ax.add_collection(PatchCollection(patches, facecolor=WATER, edgecolor=WATER_EDGE,
                                      linewidths=0.4, alpha=0.8, zorder=2))
    for rid, flow, g in zip(big["reach_id"], big["flow"], big.geometry):
        if g is not None and not g.is_empty:
            p = g.representative_point()
            ax.text(p.x, p.y, f"{rid}: {flow}", fontsize=8, color=INK, parse_math=False,
                    zorder=5, bbox=dict(boxstyle="round,pad=0.15", fc="white", ec="none",
                                        alpha=0.75))
    if extent is not None:
        ax.set_xlim(extent[0], extent[1])
        ax.set_ylim(extent[2], extent[3])
    else:
        ax.autoscale_view()
    ax.set_aspect("equal", adjustable="box")
    ax.ticklabel_format(useOffset=False, style="plain")
    ax.tick_params(labelsize=8)
    ax.set_xlabel(f"easting ({unit})")
    ax.set_ylabel(f"northing ({unit})")
    _scale_bar(ax, unit)
    return _png(fig)
