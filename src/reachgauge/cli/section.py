"""`reachgauge section`: hydraulics of one surveyed or gauged cross-section."""

from __future__ import annotations

import argparse
import textwrap
import sys
from pathlib import Path

from reachgauge import __version__
from reachgauge.errors import InputError
from reachgauge.notices import CAUTION_LINE


def _fmt(v, digits=4):
    return f"{v:.{digits}g}"


SECTION_EXAMPLE = """\
examples:
  # discharge at a measured water surface, n from a table
  reachgauge section sample_data/gauged_section.csv --stage 100.9 --slope 0.0021 --n 0.035

  # back-calculate n from a measured discharge, and write a rating table
  reachgauge section sample_data/gauged_section.csv --stage 100.9 --slope 0.0021 \\
      --discharge 6.2 --rating rating.csv

The CSV has a header row: offset (or station, distance) and elevation (or z),
or offset and depth below the measured water surface given by --stage.
"""


def add(sub):
    p = sub.add_parser(
        "section", help="hydraulics of one surveyed or gauged cross-section",
        description=textwrap.fill(
            "Geometry, Manning discharge (or back-calculated n) and an optional rating "
            "table for one cross-section profile read from a CSV file. " + CAUTION_LINE, 78),
        epilog=SECTION_EXAMPLE, formatter_class=argparse.RawDescriptionHelpFormatter)
    p.add_argument("profile", help="CSV of offset and elevation (or depth) columns")
    where = p.add_mutually_exclusive_group()
    where.add_argument("--stage", type=float, metavar="ELEV",
                       help="water-surface elevation; for a depth profile, the surface the depths "
                            "were measured from (default 0)")
    where.add_argument("--depth", type=float, metavar="D",
                       help="water depth above the thalweg instead of --stage")
    p.add_argument("--slope", type=float, required=True,
                   help="energy or water-surface slope, dimensionless (e.g. 0.002)")
    flow = p.add_mutually_exclusive_group(required=True)
    flow.add_argument("--n", type=float, nargs="+", metavar="N",
                      help="Manning's n: one value, or three (left overbank, channel, right "
                           "overbank) with --banks")
    flow.add_argument("--discharge", type=float, metavar="Q",
                      help="measured discharge: back-calculate Manning's n")
    p.add_argument("--banks", type=float, nargs=2, metavar=("LEFT", "RIGHT"),
                   help="bank offsets: split into overbanks and channel (divided-channel method)")
    p.add_argument("--units", choices=("si", "us"), default="si",
                   help="si: m and m³/s (default); us: ft and ft³/s")
    p.add_argument("--rating", type=Path, metavar="OUT.csv",
                   help="also write a rating table (stage, depth, geometry, discharge)")
    p.add_argument("--rating-step", type=float, metavar="D",
                   help="depth step of the rating table (default: 1/50 of the profile's depth)")
    p.add_argument("--rating-max-depth", type=float, metavar="D",
                   help="deepest row of the rating table (default: the profile's lower end)")
    p.add_argument("--overwrite", action="store_true", help="replace an existing rating file")
    p.set_defaults(func=run)


def run(args) -> int:
    import numpy as np

    from reachgauge import manning
    from reachgauge.hydraulics import roughness, surveyed
    from reachgauge.inputs.profile_csv import read_profile
    from reachgauge.kernel.crosssection import CrossSection
    from reachgauge.results.geopackage import check_target, write_csv_atomic

    u = manning.unit_system(args.units)
    if args.rating is not None:   # a target that cannot be written fails before the work
        check_target(args.rating, args.overwrite)
    cs, kind = read_profile(args.profile, args.stage if args.stage is not None else None,
                            units=args.units)
    stage = _stage(args, cs, kind)
    if stage <= cs.thalweg:
        raise InputError(f"stage {stage:g} is not above the thalweg ({cs.thalweg:g} {u.length})",
                         "give a water surface above the lowest point of the profile")
    if args.banks:
        cs = CrossSection(cs.offset, cs.elevation, banks=args.banks)
    manning.check_slope(args.slope)

    n_given = None
    if args.n is not None:
        if len(args.n) not in (1, 3):
            raise InputError(f"--n takes one or three values, got {len(args.n)}",
                             "give --n 0.035, or --n 0.06 0.035 0.06 with --banks")
        for note in roughness.check_n_range(args.n, where="--n"):
            print(f"warning: {note}", file=sys.stderr)
        n_given = args.n[0] if len(args.n) == 1 else args.n
    res = surveyed.analyse_section(cs, stage, args.slope, n=n_given, discharge=args.discharge,
                                   units=args.units)

    lines = [f"reachgauge {__version__} — one cross-section, Manning's equation "
             f"({u.name.upper()}: {u.length}, {u.discharge})",
             f"profile            {Path(args.profile).name}: {cs.offset.size} points, offsets "
             f"{_fmt(cs.offset[0])}–{_fmt(cs.offset[-1])} {u.length}",
             f"thalweg            {cs.thalweg:.3f} {u.length} at offset {_fmt(cs.thalweg_offset)} "
             f"{u.length}",
             f"stage              {stage:.3f} {u.length} (depth {stage - cs.thalweg:.3f} {u.length})",
             f"slope              {args.slope:g}"]
    model = "divided channel" if cs.banks is not None else "whole section"
    if args.discharge is not None:
        lines.append(f"measured discharge {_fmt(args.discharge)} {u.discharge}")
        lines.append(f"Manning's n        {res.n_back:.4g} (back-calculated, {model}, one n "
                     "for every subsection)")
    else:
        nn = res.n if np.ndim(res.n) == 0 else "/".join(f"{v:g}" for v in res.n)
        lines.append(f"Manning's n        {nn}")
    for text in dict.fromkeys(t for _names, t in res.doubts):
        print(f"warning: {text}", file=sys.stderr)
    doubted = {name for names, _t in res.doubts for name in names}
    lines = [ln + (IMPLAUSIBLE if ln.startswith("Manning's n") and "Manning's n" in doubted
                   else "") for ln in lines]
    lines += _figure_lines(res, u, doubted)
    if args.discharge is not None:
        lines += _table_lines(res)
    if bool(res.figures.spills):
        lines.append("note: the water reaches an end of the profile (the section spills); the "
                     "figures cover only the water inside the profile")

    if args.rating is not None:
        table = surveyed.rating(cs, args.slope, res.n, units=args.units, step=args.rating_step,
                                max_depth=args.rating_max_depth)
        write_csv_atomic(table, args.rating, overwrite=args.overwrite)
        lines.append(f"rating table       {len(table)} stages written to {args.rating}")
        dips = np.nonzero(np.diff(table["discharge"].to_numpy()) < 0)[0]
        if dips.size and not args.banks:
            lines.append(
                f"note: the rating dips at stage {table['stage'].iloc[dips[0] + 1]:.3f} "
                f"{u.length}, where the water spreads onto a bench; Manning's equation on one "
                "lumped section does that. Give --banks LEFT RIGHT for the divided-channel method")
    lines.append(CAUTION_LINE)
    print("\n".join(lines))
    return 0


def _stage(args, cs, kind) -> float:
    """The water-surface elevation asked for: --stage, or thalweg + --depth; a depth
    profile's own surface (default 0)."""
    if kind == "depth":
        if args.depth is not None:
            raise InputError("--depth has no meaning for a depth profile",
                             "give --stage, the water surface the depths were measured from")
        return 0.0 if args.stage is None else args.stage
    if args.stage is not None:
        return args.stage
    if args.depth is not None:
        return cs.thalweg + args.depth
    raise InputError("the water level is missing", "give --stage ELEV or --depth D")


IMPLAUSIBLE = "   [implausible: see the warning]"


def _figure_lines(res, u, doubted=()) -> list[str]:
    fig = res.figures
    lines = []
    rows = [("area", fig.flow_area, u.area), ("wetted perimeter", fig.perimeter, u.length),
            ("top width", fig.top_width, u.length), ("hydraulic radius", fig.hyd_radius, u.length),
            ("hydraulic depth", fig.hyd_depth, u.length), ("velocity", fig.velocity, u.velocity),
            ("discharge", fig.discharge, u.discharge), ("Froude number", fig.froude, ""),
            ("shear stress", fig.shear, u.stress), ("stream power", fig.stream_power, u.power)]
    for name, val, unit in rows:
        lines.append(f"{name:<19}{val:.4g} {unit}".rstrip() + (IMPLAUSIBLE if name in doubted else ""))
    for label, area, perim, ni, qi in res.parts:
        lines.append(f"  {label:<17}area {area:.4g} {u.area}, wetted perimeter {perim:.4g} "
                     f"{u.length}, n {ni:g}, discharge {qi:.4g} {u.discharge}")
    return lines


def _table_lines(res) -> list[str]:
    from reachgauge.hydraulics import roughness

    if res.table_rows:
        return (["n lies within these channel rows of Chow (1959) Table 5-6 (min–max):"]
                + [f"  {lo:.3f}–{hi:.3f}  {text}" for _k, text, (lo, _nm, hi) in res.table_rows])
    return ["n lies within no row of Chow (1959) Table 5-6 for natural channels "
            f"({roughness.TABLE_RANGE[0]:g}–{roughness.TABLE_RANGE[1]:g}): check the "
            "stage, slope and discharge"]
