"""Every file a run writes, checked before the work and put in place together.

:class:`RunOutputs` holds the targets of one run: the GeoPackage, optionally a
folder of CSV tables and the HTML report. Before any work it checks all of
them (names, existing files, folders that exist and can be written, the map
field of the report). After the work it writes each one to a temporary file
beside its target (:mod:`reachgauge.lifecycle`) and, when every one is
complete, renames them into place in one step with signals held (a CSV folder
that does not exist yet is built under a hidden name and renamed whole). If a
rename fails, the targets already replaced are restored from hard links to
their earlier files: the set is all old or all new. Any failure leaves no
temporary file or folder.
"""

from __future__ import annotations

import os
from contextlib import contextmanager
from pathlib import Path

from reachgauge import lifecycle
from reachgauge.errors import InputError
from reachgauge.results import geopackage as gp

REPORT_SUFFIXES = (".html", ".htm")
CSV_TABLES = ("transects", "reaches", "thalweg_points", "rating_curves", "stage_figures",
              "design_checks", "profile", "calibration", "sample_sections", "regional_fits",
              "curve_ratios", "footprints", "run_info")


def check_gpkg_name(out) -> Path:
    """``--out`` must name a GeoPackage: a result is several layers and tables,
    which no single-layer format (a shapefile, GeoJSON) can hold. Refused, not
    converted, so the file is always where and what the user named."""
    p = Path(out)
    if p.suffix.lower() != ".gpkg":
        raise InputError(f"--out {str(p)!r} does not end in .gpkg: reachgauge writes one "
                         "GeoPackage of several layers and tables, which "
                         f"{'a ' + p.suffix + ' file' if p.suffix else 'that name'} cannot hold",
                         f"give a path ending in .gpkg (e.g. {p.with_suffix('.gpkg').name}); "
                         "--csv DIR also writes every table as CSV")
    return p


def report_fields() -> list[str]:
    """Transect fields that can colour the report's map (numeric, not text or flags)."""
    from reachgauge.results import schema

    return [k for k, (kind, _m) in schema.TRANSECT_FIELDS.items()
            if kind not in ("text", "flag")]


class RunOutputs:
    """The files of one run (see the module docstring)."""

    def __init__(self, out, *, csv_dir=None, report=None, overwrite=False,
                 colour_by="discharge"):
        self.out = gp.check_target(check_gpkg_name(out), overwrite)
        self.report = None if report is None else Path(report)
        self.colour_by = colour_by
        if self.report is not None:
            if self.report.suffix.lower() not in REPORT_SUFFIXES:
                raise InputError(f"--report {str(self.report)!r} does not end in .html",
                                 "give a path ending in .html: the report is one HTML page")
            if self.report.resolve() == self.out.resolve():
                raise InputError("--report and --out name the same file",
                                 "give the report its own path ending in .html")
            gp.check_target(self.report, overwrite)
            if colour_by not in report_fields():
                raise InputError(f"cannot colour the map by {colour_by!r}: not a numeric "
                                 "transect field", f"choose one of: {', '.join(report_fields())}")
        self.csv_dir = None if csv_dir is None else Path(csv_dir)
        self._new_dir = None   # staging folder of a CSV folder that does not exist yet
        if self.csv_dir is not None:
            self._check_csv_dir(overwrite)
        self.targets = [self.out] + self.csv_targets() + ([self.report] if self.report else [])
        lifecycle.STATE.kept = [t for t in (self.out, self.report) if t is not None and t.exists()]
        if any(t.exists() for t in self.csv_targets()):
            lifecycle.STATE.kept.append(Path(f"CSV tables in {self.csv_dir}"))
        self._staged: dict[Path, Path] = {}

    def csv_targets(self) -> list[Path]:
        return [] if self.csv_dir is None else [self.csv_dir / f"{n}.csv" for n in CSV_TABLES]

    def _check_csv_dir(self, overwrite):
        d = self.csv_dir
        if d.exists() and not d.is_dir():
            raise InputError(f"--csv {str(d)!r} is a file, not a folder",
                             "give a folder for the CSV tables")
        if not d.exists():
            if not d.parent.is_dir():
                raise InputError(f"folder {str(d.parent)!r} does not exist", "create it first")
            gp.check_writable(d.parent)
            return
        for t in self.csv_targets():
            gp.check_target(t, overwrite)

    # ------------------------------------------------------------- the writes
    def __enter__(self):
        folders = {t.parent for t in self.targets if t.parent.exists()}
        if self.csv_dir is not None and not self.csv_dir.exists():
            folders.add(self.csv_dir.parent)
        self._hold = lifecycle.holding(*folders)
        self._hold.__enter__()
        return self

    def __exit__(self, exc_type, exc, tb):
        try:
            for tmp in self._staged.values():
                lifecycle.remove_temp(tmp)
            self._staged.clear()
            if self._new_dir is not None:
                lifecycle.remove_temp(self._new_dir)
        finally:
            self._hold.__exit__(None, None, None)   # our lock files go too
        return False

    def _stage(self, target) -> Path:
        if self.csv_dir is not None and target.parent == self.csv_dir and not self.csv_dir.exists():
            # a new CSV folder is built under a hidden name and renamed whole
            if self._new_dir is None:
                self._new_dir = lifecycle.temp_path(self.csv_dir)
                self._new_dir.mkdir()
            return self._new_dir / target.name
        tmp = lifecycle.temp_path(target)
        self._staged[target] = tmp
        return tmp

    def write(self, run, cfg, parts) -> None:
        """Assemble every output of ``run`` in temporary files, the reaches' rows
        from ``parts`` (``parts.layers(header)``) in reach order, then put them
        all in place."""
        from reachgauge.results.run_info import created_utc, run_info

        current = self.out
        created = created_utc()
        csv = {n: self._stage(self.csv_dir / f"{n}.csv") for n in CSV_TABLES} if self.csv_dir else {}
        try:
            with _gpkg_date(created):
                writer = gp.LayerWriter(self._stage(self.out), run.network.source_crs, cfg.units,
                                        csv=csv)
                regional = getattr(run, "regional", None)   # regional curves (issue 12)
                for header in run.headers:      # in reach order
                    writer.add(_with_regional(parts.layers(header), regional, header))
                writer.close({**(regional.tables(cfg.units) if regional is not None else {}),
                              "run_info": run_info(run, cfg, created)})
            if self.report is not None:
                from reachgauge.results.report import read_result, render_report

                lifecycle.checkpoint("report")
                current = self.report
                text = render_report(read_result(self._staged[self.out]), self.colour_by)
                self._stage(self.report).write_text(text, encoding="utf-8")
        except Exception as exc:
            if gp.is_write_error(exc):
                raise gp.write_failed(current, exc) from None
            raise
        self.commit()

    def commit(self) -> None:
        """Rename every staged file onto its target, all or none."""
        backups: dict[Path, Path] = {}
        done: list[Path] = []
        staged = dict(self._staged)
        if self._new_dir is not None:
            staged[self.csv_dir] = self._new_dir
        with lifecycle.deferred():
            try:
                for target, tmp in staged.items():
                    if target.exists():
                        backups[target] = _backup(target)
                    os.replace(tmp, target)
                    done.append(target)
            except OSError as exc:
                for t in reversed(done):
                    if backups.get(t) is not None:
                        os.replace(backups.pop(t), t)
                    elif t == self.csv_dir:
                        os.rename(t, self._new_dir)   # back under its hidden name, removed later
                    else:
                        os.unlink(t)
                raise gp.write_failed(target, exc) from None
            finally:
                for b in backups.values():
                    if b is not None:
                        lifecycle.remove_temp(b)
            self._staged.clear()
            self._new_dir = None
            lifecycle.STATE.written = list(done)


def _with_regional(layers: dict, regional, header) -> dict:
    """A reach's layers with the regional fields of its ``reaches`` row filled
    (regional curves, issue 12): text fields the part already holds empty, so the
    layer's fields stay those of the schema."""
    fields = None if regional is None else regional.reach_fields.get(header["reach_id"])
    if fields and "reaches" in layers:
        layers = {**layers, "reaches": layers["reaches"].assign(**fields)}
    return layers


@contextmanager
def _gpkg_date(created: str):
    """GDAL stamps each GeoPackage table with the time it was written
    (``gpkg_contents.last_change``); stamp the run's creation time instead, so
    the file depends only on the results."""
    import pyogrio

    old = pyogrio.get_gdal_config_option("OGR_CURRENT_DATE")
    pyogrio.set_gdal_config_options({"OGR_CURRENT_DATE": created.replace("Z", ".000Z")})
    try:
        yield
    finally:
        pyogrio.set_gdal_config_options({"OGR_CURRENT_DATE": old})


def _backup(target: Path) -> Path | None:
    """A hard link to the earlier file, to restore it if the commit fails
    (None where the file system has no hard links)."""
    b = lifecycle.temp_path(target)
    try:
        os.link(target, b)
    except OSError:
        return None
    return b
