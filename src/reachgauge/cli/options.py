"""Options shared by commands, generated once from :class:`RunConfig` so the
CLI, the TOML file and the API can never drift apart."""

from __future__ import annotations

import argparse
import dataclasses
import sys
import time
import typing
from pathlib import Path

from reachgauge.config import RunConfig, fields_by_group

GROUP_TITLES = {
    "inputs": "inputs and units",
    "network": "reaches",
    "transects": "transects and thalweg",
    "slope": "slope",
    "bankfull": "bankfull stage",
    "roughness": "Manning's n",
    "stages": "stages, rating curves and design flows",
    "drainage": "drainage area",
    "footprints": "design-flow footprints",
    "monte_carlo": "uncertainty (Monte Carlo)",
    "running": "running",
}


def _default_text(f):
    d = f.default
    if d is None or d == ():
        return ""
    if isinstance(d, bool):
        return " (default: on)" if d else " (default: off)"
    unit = " m" if f.metadata.get("length") else ""
    return f" (default: {d:g}{unit})" if isinstance(d, float) else f" (default: {d})"


def add_config_options(parser: argparse.ArgumentParser) -> None:
    """One option per RunConfig field, in groups; lengths are in metres, or in
    feet with ``--units us``."""
    hints = typing.get_type_hints(RunConfig)
    for group, fields in fields_by_group().items():
        g = parser.add_argument_group(GROUP_TITLES.get(group, group))
        for f in fields:
            flag = "--" + f.name.replace("_", "-")
            help_text = f.metadata["help"] + _default_text(f)
            if f.metadata.get("length"):
                help_text += "; ft with --units us"
            if f.metadata.get("area"):
                help_text += "; mi² with --units us"
            hint = hints[f.name]
            kw = dict(dest=f.name, default=None, help=help_text)
            if hint is bool:
                g.add_argument(flag, action=argparse.BooleanOptionalAction, **kw)
                continue
            if "choices" in f.metadata:
                kw["choices"] = f.metadata["choices"]
            args = typing.get_args(hint)
            base = next((a for a in args if a is not type(None)), hint) if args else hint
            if typing.get_origin(hint) is tuple or typing.get_origin(base) is tuple:
                inner = typing.get_args(base if typing.get_origin(base) is tuple else hint)[0]
                g.add_argument(flag, type=inner, nargs="+", metavar="V", **kw)
                continue
            typ = {int: int, float: float, str: str}.get(base, str)
            if base is Path or (args and Path in args):
                typ = str
                kw["metavar"] = "PATH"
            elif f.metadata.get("length"):
                kw["metavar"] = "M"
            elif f.metadata.get("area"):
                kw["metavar"] = "KM2"
            elif f.name.endswith("_field"):
                kw["metavar"] = "FIELD"
            elif f.name.endswith("_crs"):
                kw["metavar"] = "CRS"
            elif "choices" not in f.metadata:
                kw["metavar"] = "N" if typ in (int, float) else "TEXT"
            g.add_argument(flag, type=typ, **kw)


def setting_values(args) -> dict:
    """The RunConfig settings given on the command line (None: not given)."""
    return {f.name: getattr(args, f.name, None) for f in dataclasses.fields(RunConfig)}


def config_from_args(args) -> RunConfig:
    """Config file first, command-line values over it."""
    from reachgauge.api import configure

    return configure(getattr(args, "config", None), **setting_values(args))


class Progress:
    """Progress in transects from the start (estimated from the reaches' lengths
    and the spacing), with the rate and the time left: a bar on a terminal, a log
    line per reach otherwise, nothing with ``quiet``."""

    def __init__(self, quiet=False, verbose=False, stream=None):
        self.quiet, self.verbose = quiet, verbose
        self.stream = stream or sys.stderr
        self.tty = hasattr(self.stream, "isatty") and self.stream.isatty()
        self.bar = None
        self.t0 = time.perf_counter()
        self.transects = 0            # finished in this run
        self.kept = 0                 # finished by an earlier run (--resume)
        self.expected = 0             # estimate for the whole run
        self.calls = 0

    def start(self, reaches, transects, reaches_done=0, transects_done=0):
        """Called once before any reach runs, with the estimated size of the run."""
        self.t0 = time.perf_counter()
        self.expected, self.kept = transects, transects_done
        if self.quiet:
            return
        if self.tty:
            from tqdm import tqdm

            self.bar = tqdm(total=max(transects, transects_done), initial=transects_done,
                            unit="transect", file=self.stream, dynamic_ncols=True, smoothing=0.1)
            self.bar.set_postfix_str(f"{reaches_done}/{reaches} reaches")
        else:
            kept = (f"; {reaches_done} reaches ({transects_done} transects) kept from the "
                    "checkpoint" if reaches_done else "")
            print(f"about {transects} transects in {reaches} reaches{kept}", file=self.stream)

    def left(self) -> str:
        rate = self.transects / max(time.perf_counter() - self.t0, 1e-9)
        remaining = max(self.expected - self.kept - self.transects, 0)
        return f"{rate:.0f} transects/s, about {remaining / rate:.0f} s left" if rate > 0 else ""

    def __call__(self, out, done, total):
        self.calls += 1
        if self.calls == 1:
            from reachgauge.lifecycle import checkpoint

            checkpoint("computing")
        if self.quiet:
            return
        n = int(out.reach_row.get("transects", 0) or 0)
        self.transects += n
        if self.bar is not None:
            if self.bar.n + n > self.bar.total:      # the estimate was short
                self.bar.total = self.bar.n + n
            self.bar.update(n)
            self.bar.set_postfix_str(f"{done}/{total} reaches")
            if done == total:
                self.bar.close()
        else:
            status = out.reach_row.get("status", "")
            print(f"reach {out.reach_id}: {status}, {n} transects, {out.seconds:.1f} s "
                  f"[{done}/{total} reaches, {self.kept + self.transects} of ~{self.expected} "
                  f"transects, {self.left()}]", file=self.stream)
        if self.verbose and out.reach_row.get("message"):
            print(f"  {out.reach_row['message']}", file=self.stream)
        if out.error and self.verbose:
            print(out.error, file=self.stream)


from reachgauge.api import require_inputs as raise_if_missing  # noqa: E402,F401  (one place)
