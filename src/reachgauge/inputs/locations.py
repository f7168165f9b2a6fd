"""Where the terrain raster lives: a local file, a VRT mosaic of tiles, or a
remote file (a URL or a GDAL virtual path) — opening it with the right GDAL
settings, naming it in messages, and fingerprinting it so a result (or a
checkpoint) can be traced to the file it read.

Remote rasters. ``cfg.dem`` may be a URL (``https://host/dem.tif``) or a GDAL
virtual path (``/vsicurl/...``, ``/vsis3/...``); it is kept as text and
reopened from ``RasterInfo.path`` by every worker, wherever it runs. GDAL reads
a cloud-optimised GeoTIFF over HTTP by range requests: a reach's window costs
the bytes of the tiles it covers, not the file (GDAL /vsicurl/,
https://gdal.org/user/virtual_file_systems.html#vsicurl-http-https-ftp-files-random-access;
COG layout, https://gdal.org/drivers/raster/cog.html). Its fingerprint is the
server's size, ETag and Last-Modified (one HEAD request). A VRT mosaic
(https://gdal.org/drivers/raster/vrt.html) is read like any file; its
fingerprint also covers the size and time of every tile it names.
"""

from __future__ import annotations

import hashlib
import os
import time
import urllib.error
import urllib.request
from contextlib import contextmanager
from pathlib import Path

import rasterio

from reachgauge.config import remote_location
from reachgauge.errors import InputError


@contextmanager
def opened(path, error, problem, fix):
    """The raster at ``path``, opened with :func:`gdal_options` in force while it
    is open; a local file that cannot be opened raises ``error(problem (GDAL's
    words), fix)``, a remote one :func:`_remote_error`."""
    with rasterio.Env(**gdal_options(path)):
        try:
            src = rasterio.open(path)
        except rasterio.errors.RasterioIOError as exc:
            if remote_location(path):
                raise _remote_error(error, path, exc) from None
            raise error(f"{problem} ({exc})", fix) from None
        with src:
            yield src


def display_name(path) -> str:
    """A raster as messages name it: a local file by its name, a remote one by
    its whole address (its last part alone would not say where it is)."""
    return str(path) if remote_location(path) else Path(path).name


def gdal_options(path) -> dict:
    """GDAL settings for a remote raster, unless set in the environment.

    GDAL_DISABLE_READDIR_ON_OPEN=EMPTY_DIR: GDAL otherwise lists the remote
    folder and probes for side-car files (.aux.xml, .ovr, .msk) on every open —
    extra requests, and a listing that a large bucket answers slowly; a COG
    carries all it needs inside itself. GDAL_HTTP_MAX_RETRY / _RETRY_DELAY
    (s): a regional run reads for hours, and a transient 429/5xx answer is
    retried rather than failing a reach (GDAL's configuration options,
    https://gdal.org/user/configoptions.html)."""
    if not remote_location(path):
        return {}
    wanted = {"GDAL_DISABLE_READDIR_ON_OPEN": "EMPTY_DIR", "GDAL_HTTP_MAX_RETRY": "3",
              "GDAL_HTTP_RETRY_DELAY": "1"}
    return {k: v for k, v in wanted.items() if k not in os.environ}


def _remote_error(error, path, exc):
    gdal = " ".join(str(exc).split())[:200]
    if "not recognized" in gdal or "not a supported" in gdal:
        return error(f"the address {path} answers but does not serve a raster GDAL reads "
                     f"({gdal})", "point --dem at the raster file itself (a cloud-optimised "
                     "GeoTIFF reads best), not a web page, folder or archive")
    if "Range downloading not supported" in gdal:
        return error(f"the server of {path} sends files only whole (it does not answer HTTP "
                     "range requests), so the raster cannot be read by windows",
                     "serve it from a server that answers range requests (most web servers "
                     "and object stores do), or download the file and give its local path")
    return error(f"the terrain raster at {path} cannot be reached ({gdal})",
                 "check the address and the network ('curl -I ADDRESS' should answer 200 with "
                 "'Accept-Ranges: bytes'), or download the file and give its local path")


def check_exists(path, what, option):
    if path is None:
        raise InputError(f"no {what} given", f"give {option}")
    text = str(path)
    if not remote_location(text):
        if Path(text).is_dir():
            raise InputError(f"{what} {text!r} is a folder", f"give a file to {option}")
        if not Path(text).exists():
            raise InputError(f"{what} {text!r} does not exist", f"check the {option} path")
    return text


def describe_file(path) -> dict:
    """Size, modification time and SHA-256 of the first MiB of a local file, so a
    result can be traced to its inputs without hashing a huge raster whole (a
    VRT adds ``parts``/``parts_sha256``: its tiles' names, sizes and times); for
    an http(s) address the server's ``bytes``, ``modified`` and ``etag``
    (:func:`http_stat`); just the path for another remote one."""
    if remote_location(path):
        url = _http_url(path)
        return {"path": path, **(http_stat(url) if url else {})}
    try:
        st = os.stat(path)
        with open(path, "rb") as fh:
            digest = hashlib.sha256(fh.read(1 << 20)).hexdigest()
    except OSError:
        return {"path": str(path)}
    out = {"path": str(Path(path).resolve()), "bytes": st.st_size,
           "modified": time.strftime("%Y-%m-%dT%H:%M:%SZ", time.gmtime(st.st_mtime)),
           "sha256_first_mib": digest}
    if str(path).lower().endswith(".vrt"):
        out.update(_vrt_parts(path))
    return out


def _vrt_parts(path) -> dict:
    """How many files a VRT reads and a SHA-256 of their names, sizes and mtimes
    (a stat each: cheap for thousands of tiles; a retouched tile changes it)."""
    try:
        with rasterio.open(path) as ds:
            files = sorted(set(ds.files) - {ds.name})
    except rasterio.errors.RasterioError:
        return {}
    h = hashlib.sha256()
    for f in files:
        try:
            st = os.stat(f)
            h.update(f"{f}|{st.st_size}|{st.st_mtime_ns}\n".encode())
        except OSError:
            h.update(f"{f}|?\n".encode())
    return {"parts": len(files), "parts_sha256": h.hexdigest()}


def _http_url(path: str) -> str | None:
    """The http(s) URL behind a raster address, if it has one."""
    if path.startswith("/vsicurl/"):
        path = path[len("/vsicurl/"):]
    return path if path.lower().startswith(("http://", "https://")) else None


def http_stat(url: str, timeout: float = 15.0) -> dict:
    """``bytes``, ``modified`` (Last-Modified) and ``etag`` of a file on an HTTP
    server: a HEAD request, or, where HEAD is refused (signed URLs often allow
    GET only), a GET of its first byte (``Content-Range: bytes 0-0/SIZE``,
    RFC 9110 §14.4). Empty if the server does not answer (the open reports that)."""
    for method, headers in (("HEAD", {}), ("GET", {"Range": "bytes=0-0"})):
        req = urllib.request.Request(url, method=method, headers=headers)
        try:
            with urllib.request.urlopen(req, timeout=timeout) as r:
                h = r.headers
                size = (h.get("Content-Range") or "").rpartition("/")[2] if method == "GET" \
                    else h.get("Content-Length")
                out = {"bytes": int(size) if size and size.isdigit() else None,
                       "modified": h.get("Last-Modified"), "etag": h.get("ETag")}
                return {k: v for k, v in out.items() if v is not None}
        except urllib.error.HTTPError:
            continue
        except (urllib.error.URLError, OSError, ValueError):
            return {}
    return {}


def fingerprint(path) -> str:
    """:func:`describe_file` as one line: size, mtime and SHA-256 of the first MB
    of a local file (and of a VRT's parts); size, ETag and Last-Modified of an
    http(s) file — what the server says changes when the file does."""
    d = describe_file(path)
    if "sha256_first_mib" in d:
        mtime = int(os.stat(path).st_mtime)
        fp = f"size={d['bytes']};mtime={mtime};sha256-first-MB={d['sha256_first_mib']}"
        if "parts_sha256" in d:
            fp += f";parts={d['parts']};parts-sha256={d['parts_sha256']}"
        return fp
    if len(d) > 1:
        return (f"url={path};size={d.get('bytes', '?')};etag={d.get('etag', '')};"
                f"modified={d.get('modified', '')}")
    return f"remote:{path}"
