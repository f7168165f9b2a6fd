"""The thalweg of each transect: the lowest ground near the digitised centreline.

Digitised centrelines are often several metres off the channel. On every
transect the search looks within ``snap_distance`` either side of the
centreline for the lowest ground, and the transect is then re-centred on it.

Method (ours, from common practice):

1. The terrain window is first cleared of single-pixel pits
   (:func:`reachgauge.inputs.sampler.fill_single_pits`), so a lone blunder pixel is
   never taken for the channel.
2. On the sampled profile, the *lowest run* is found: the contiguous stretch
   around the lowest sample whose elevations lie within :data:`TIE_TOLERANCE`
   of it. Its centre is the thalweg. A flat bottom (a trapezoid's bed, or the
   flat water of hydro-flattened terrain) so gives its middle, not its edge.
3. ``level`` is the median elevation of the run: for hydro-flattened terrain
   the water surface of the flight.

Everything is vectorised over transects: one ``(t, m)`` array in, arrays of
``t`` out.
"""

from __future__ import annotations

import warnings
from dataclasses import dataclass

import numpy as np

# Samples within this height of the lowest one belong to the same flat bottom (m).
# Hydro-flattened water is exactly flat; 1 cm keeps lidar noise from merging
# a sloping bank into the bottom.
TIE_TOLERANCE = 0.01

# The thalweg counts as "far" when it lies beyond this fraction of the snap distance.
FAR_FRACTION = 0.9


@dataclass(frozen=True)
class Thalweg:
    """Thalweg of ``t`` transects.

    ``shift`` (m): offset of the thalweg from the digitised centreline, positive
    toward the right bank (looking downstream), 0 where not found;
    ``found``: the search window held valid ground; ``level`` (m): median
    elevation of the lowest run (NaN where not found); ``run_width`` (m): width
    of the lowest run; ``far``: the thalweg lies near the snap limit.
    """

    shift: np.ndarray
    found: np.ndarray
    level: np.ndarray
    run_width: np.ndarray
    far: np.ndarray


def find_thalweg(u, z, snap_distance=None, tie=TIE_TOLERANCE) -> Thalweg:
    """Find the thalweg on each of ``t`` profiles.

    Parameters
    ----------
    u : (m,) array
        Offsets of the samples from the centreline (m), increasing, negative
        toward the left bank.
    z : (t, m) array
        Elevations (m), NaN where there is no ground.
    snap_distance : float, optional
        Only samples with ``|u| <= snap_distance`` are searched (default: all).
    tie : float
        Height (m) within which samples join the lowest run.
    """
    u = np.asarray(u, dtype=float)
    z = np.atleast_2d(np.asarray(z, dtype=float))
    t, m = z.shape
    search = np.ones(m, dtype=bool) if snap_distance is None else np.abs(u) <= snap_distance
    zs = np.where(search[None, :] & np.isfinite(z), z, np.inf)
    found = np.isfinite(zs).any(axis=1)
    rows = np.arange(t)
    imin = np.argmin(zs, axis=1)
    zmin = zs[rows, imin]
    low = zs <= (zmin + tie)[:, None]
    # Bounds of the run around imin: the nearest "not low" sample on each side.
    idx = np.broadcast_to(np.arange(m), (t, m))
    before = np.maximum.accumulate(np.where(low, -1, idx), axis=1)[rows, imin]
    after = np.minimum.accumulate(np.where(low, m, idx)[:, ::-1], axis=1)[:, ::-1][rows, imin]
    first, last = before + 1, after - 1
    centre = 0.5 * (u[first] + u[last])
    in_run = (idx >= first[:, None]) & (idx <= last[:, None]) & found[:, None]
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", RuntimeWarning)  # rows with no ground: NaN, masked below
        level = np.nanmedian(np.where(in_run, z, np.nan), axis=1)
    shift = np.where(found, centre, 0.0)
    limit = snap_distance if snap_distance is not None else max(abs(u[0]), abs(u[-1]))
    return Thalweg(
        shift=shift,
        found=found,
        level=np.where(found, level, np.nan),
        run_width=np.where(found, u[last] - u[first], 0.0),
        far=found & (np.abs(shift) >= FAR_FRACTION * limit),
    )
