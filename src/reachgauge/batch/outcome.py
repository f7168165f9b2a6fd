"""When no reach can give figures for a reason the user can fix, the run is bad
input (exit 2, one line saying what to check), not a success with an empty
result.

Two moments: after the network is loaded (every reach outside the raster,
shorter than the spacing, or with damaged terrain under it: known before any
work) and after every reach has run (no transect of any reach found terrain
data with a channel: the nodata value, streams over a hole, a half-width too
narrow). A reach that failed on a bug keeps the run's exit code 1 instead.
"""

from __future__ import annotations

from collections import Counter

from reachgauge.errors import InputError


def _bounds(b) -> str:
    return "(" + ", ".join(f"{v:.1f}" for v in b) + ")" if b else "(none)"


def _fix(cause: str, net, cfg, messages) -> str:
    if cause == "outside-raster":
        return ("check that the raster and the streams are in the CRS their files state (or "
                "state it with --dem-crs / --streams-crs) and that they overlap: raster bounds "
                f"{_bounds(net.raster.bounds)}, streams bounds {_bounds(net.streams_bounds)} "
                f"(left, bottom, right, top in {net.work_crs.name})")
    if cause == "too-short":
        return (f"lower --spacing (now {cfg.spacing:g} m; every line is shorter)"
                + (f" or raise --split-length (now {cfg.split_length:g} m)"
                   if cfg.split_length else ""))
    if cause == "no-sections":
        return (f"check the raster's nodata value (now {net.raster.nodata}), that the streams "
                f"lie on terrain with data, and --half-width (now {cfg.half_width:g} m: each "
                "transect must reach ground above the channel on both sides)")
    first = next((m for m in messages if m), "")
    return f"see the message of each reach, e.g.: {first}" if first else "check the inputs"


WHAT = {"outside-raster": "lies outside the terrain raster",
        "too-short": "is shorter than the transect spacing",
        "no-sections": "has no transect with terrain data and a channel",
        "bad-input": "has unusable data of its own"}


NO_LINE = ("empty-geometry", "not-a-line", "zero-length")


def _verdict(statuses: Counter, net, cfg, messages) -> InputError:
    lines = {c: k for c, k in statuses.items() if c not in NO_LINE}
    causes = sorted((c for c in lines if c in WHAT), key=lambda c: -lines[c])
    rest = sum(statuses[c] for c in NO_LINE)
    aside = f" ({rest} other feature(s) hold no usable line)" if rest else ""
    if len(lines) == 1 and causes:
        problem = f"no reach can be computed: every line {WHAT[causes[0]]}{aside}"
    else:
        problem = ("no reach can be computed ("
                   + ", ".join(f"{k} {c}" for c, k in statuses.most_common()) + ")")
    fixes = [_fix(c, net, cfg, messages) for c in causes] or ["check the inputs"]
    return InputError(problem, "; ".join(fixes) + "; nothing was written")


def check_network(net, cfg) -> None:
    """Raise :class:`InputError` when no reach of the loaded network can run."""
    statuses = Counter(r.status for r in net.reaches)
    if not net.reaches or statuses.get("ok"):
        return
    raise _verdict(statuses, net, cfg, [r.message for r in net.reaches])


def check_outputs(rows, net, cfg) -> None:
    """Raise :class:`InputError` when no reach gave figures and none failed on a bug
    (``rows``: every reach's reach row)."""
    statuses = Counter(r.get("status", "") for r in rows)
    # a reach whose terrain supports no bankfull figure was still computed: its
    # rating curves and the reason are results, not an input failure
    if (not rows or statuses.get("ok") or statuses.get("bankfull-unsupported")
            or statuses.get("failed")):
        return
    raise _verdict(statuses, net, cfg, [r.get("message", "") for r in rows])
