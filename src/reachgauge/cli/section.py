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

    from reachgauge.hydraulics import reach as hydraulics, roughness
    from reachgauge import manning
    from reachgauge.results.geopackage import check_target, write_csv_atomic
    from reachgauge.plausibility import section_doubts
    from reachgauge.settings import MAX_RATING_STAGES
    from reachgauge.inputs.profile_csv import read_profile
    from reachgauge.kernel.crosssection import CrossSection

    u = manning.unit_system(args.units)
    if args.rating is not None:   # a target that cannot be written fails before the work
        check_target(args.rating, args.overwrite)
    cs, kind = read_profile(args.profile, args.stage if args.stage is not None else None,
                            units=args.units)
    if kind == "depth":
        stage = 0.0 if args.stage is None else args.stage
        if args.depth is not None:
            raise InputError("--depth has no meaning for a depth profile",
                             "give --stage, the water surface the depths were measured from")
    elif args.stage is not None:
        stage = args.stage
    elif args.depth is not None:
        stage = cs.thalweg + args.depth
    else:
        raise InputError("the water level is missing", "give --stage ELEV or --depth D")
    if stage <= cs.thalweg:
        raise InputError(f"stage {stage:g} is not above the thalweg ({cs.thalweg:g} {u.length})",
                         "give a water surface above the lowest point of the profile")
    if args.banks:
        cs = CrossSection(cs.offset, cs.elevation, banks=args.banks)
    manning.check_slope(args.slope)

    n_used = None
    if args.n is not None:
        if len(args.n) not in (1, 3):
            raise InputError(f"--n takes one or three values, got {len(args.n)}",
                             "give --n 0.035, or --n 0.06 0.035 0.06 with --banks")
        for note in roughness.check_n_range(args.n, where="--n"):
            print(f"warning: {note}", file=sys.stderr)
        n_used = args.n[0] if len(args.n) == 1 else args.n

    lines = [f"reachgauge {__version__} — one cross-section, Manning's equation "
             f"({u.name.upper()}: {u.length}, {u.discharge})",
             f"profile            {Path(args.profile).name}: {cs.offset.size} points, offsets "
             f"{_fmt(cs.offset[0])}–{_fmt(cs.offset[-1])} {u.length}",
             f"thalweg            {cs.thalweg:.3f} {u.length} at offset {_fmt(cs.thalweg_offset)} "
             f"{u.length}",
             f"stage              {stage:.3f} {u.length} (depth {stage - cs.thalweg:.3f} {u.length})",
             f"slope              {args.slope:g}"]
    if args.discharge is not None:
        geo = cs.geometry(stage)
        n_back = float(manning.roughness(args.discharge, geo.area, geo.hydraulic_radius,
                                         args.slope, args.units))
        n_used = n_back
        lines.append(f"measured discharge {_fmt(args.discharge)} {u.discharge}")
        lines.append(f"Manning's n        {n_back:.4g} (back-calculated, whole section)")
    else:
        nn = n_used if np.ndim(n_used) == 0 else "/".join(f"{v:g}" for v in n_used)
        lines.append(f"Manning's n        {nn}")
    fig = hydraulics.figures(cs, stage, args.slope, n_used, args.units).iloc[0]
    doubts = section_doubts(args.slope, n_used, fig.velocity, fig.froude, args.units,
                            back_calculated=args.discharge is not None)
    for text in dict.fromkeys(t for _names, t in doubts):
        print(f"warning: {text}", file=sys.stderr)
    doubted = {name for names, _t in doubts for name in names}
    lines = [ln + ("   [implausible: see the warning]" if ln.startswith("Manning's n")
                   and "Manning's n" in doubted else "") for ln in lines]
    rows = [("area", fig.flow_area, u.area), ("wetted perimeter", fig.perimeter, u.length),
            ("top width", fig.top_width, u.length), ("hydraulic radius", fig.hyd_radius, u.length),
            ("hydraulic depth", fig.hyd_depth, u.length), ("velocity", fig.velocity, u.velocity),
            ("discharge", fig.discharge, u.discharge), ("Froude number", fig.froude, ""),
            ("shear stress", fig.shear, u.stress), ("stream power", fig.stream_power, u.power)]
    for name, val, unit in rows:
        lines.append(f"{name:<19}{val:.4g} {unit}".rstrip()
                     + ("   [implausible: see the warning]" if name in doubted else ""))
    if args.banks:
        sub = cs.subsections(stage)
        n3 = np.broadcast_to(np.asarray(n_used, dtype=float), (3,))
        for label, part, ni in zip(("left overbank", "channel", "right overbank"), sub.parts, n3):
            qi = float(manning.conveyance(part.area, part.hydraulic_radius, ni, args.units)
                       * np.sqrt(args.slope))
            lines.append(f"  {label:<17}area {float(part.area):.4g} {u.area}, "
                         f"wetted perimeter {float(part.wetted_perimeter):.4g} {u.length}, "
                         f"n {ni:g}, discharge {qi:.4g} {u.discharge}")
    if args.discharge is not None:
        matches = roughness.table_matches(n_back, kind="channel")
        if matches:
            lines.append("n lies within these channel rows of Chow (1959) Table 5-6 (min–max):")
            lines += [f"  {lo:.3f}–{hi:.3f}  {text}" for _k, text, (lo, _nm, hi) in matches]
        else:
            lines.append("n lies within no row of Chow (1959) Table 5-6 for natural channels "
                         f"({roughness.TABLE_RANGE[0]:g}–{roughness.TABLE_RANGE[1]:g}): check the "
                         "stage, slope and discharge")
    if bool(fig.spills):
        lines.append("note: the water reaches an end of the profile (the section spills); the "
                     "figures cover only the water inside the profile")

    if args.rating is not None:
        top_depth = cs.top - cs.thalweg
        max_depth = args.rating_max_depth if args.rating_max_depth is not None else top_depth
        step = args.rating_step if args.rating_step is not None else top_depth / 50
        if not (step > 0 and max_depth > 0):
            raise InputError("--rating-step and --rating-max-depth must be greater than 0",
                             "give positive depths")
        if max_depth / step > MAX_RATING_STAGES:
            raise InputError(f"--rating-step {step:g} up to depth {max_depth:g} {u.length} makes "
                             f"{max_depth / step:.0f} rows, more than {MAX_RATING_STAGES}",
                             f"give --rating-step {max_depth / MAX_RATING_STAGES:.3g} or more")
        depths = np.arange(0.0, max_depth + step * 1e-9, step)
        table = hydraulics.figures(cs, cs.thalweg + depths, args.slope, n_used, args.units)
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
