"""The terrain raster at scale: a VRT mosaic of tiles, and a cloud-optimised
GeoTIFF served over HTTP, give the same result as the single local file.

References outside the project:
- GDAL's VRT format (https://gdal.org/drivers/raster/vrt.html): a mosaic of
  SimpleSources that is, pixel for pixel, the raster it was cut from (written by
  ``terrain_fixtures.tile_as_vrt``: osgeo/gdalbuildvrt are not installed and
  rasterio has no public VRT-mosaic writer).
- GDAL's COG driver (https://gdal.org/drivers/raster/cog.html): tiles, then
  overviews; GDAL /vsicurl/ reads it by HTTP range requests
  (https://gdal.org/user/virtual_file_systems.html#vsicurl).
- HTTP range requests, RFC 9110 §14 (``Range: bytes=a-b`` → 206 Partial
  Content with ``Content-Range: bytes a-b/size``): the small server below
  implements that much, because Python's http.server answers every GET whole.
The truth for equality is the run on the single local file: the same pixels
must give the same rows.
"""

import os
import re
import socket
import threading
from functools import partial
from http.server import SimpleHTTPRequestHandler, ThreadingHTTPServer

import pandas as pd
import pyogrio
import pytest
import rasterio
from rasterio.shutil import copy as rio_copy

import reachgauge
import terrain_fixtures as tf
from reachgauge.errors import InputError
from reachgauge.inputs.raster import fingerprint

pytestmark = pytest.mark.filterwarnings("ignore::RuntimeWarning")

LENGTH, MARGIN = 300.0, 200.0   # m: a 300 m channel in the middle of a 700 m × 400 m raster
# three reaches of about 100 m; the plains' n stated (else a warning says it was assumed)
RUN = dict(half_width=30.0, split_length=100.0, n_overbank=0.05)


@pytest.fixture(scope="module")
def terrain(tmp_path_factory):
    d = tmp_path_factory.mktemp("terrain")
    line = tf.straight_line(LENGTH)
    # noise (seeded for reproducibility only: equality holds for any noise) keeps the
    # COG from compressing to nothing, so reading windows is measurably less than the file
    v = tf.make_valley_raster(d, line, res=1.0, noise=0.02, seed=5, margin=MARGIN)
    streams = tf.write_lines(d / "streams.gpkg", [line])
    out = d / "single.gpkg"
    reachgauge.run(out, dem=str(v.path), streams=str(streams), **RUN)
    return v, streams, out


def layers(path) -> dict:
    """Every layer but run_info (it holds the input's fingerprint and the time)."""
    names = [n for n, _ in pyogrio.list_layers(path) if n != "run_info"]
    return {n: pyogrio.read_dataframe(path, layer=n) for n in names}


def assert_same_result(a, b):
    la, lb = layers(a), layers(b)
    assert list(la) == list(lb) and "transects" in la
    assert (la["reaches"].status == "ok").sum() == 3
    for name in la:
        pd.testing.assert_frame_equal(la[name], lb[name], check_exact=True, obj=name)


def test_vrt_mosaic_equals_the_single_file(terrain, tmp_path):
    v, streams, single = terrain
    vrt = tf.tile_as_vrt(v.path, tmp_path, nx=3, ny=3)
    with rasterio.open(vrt) as ds:
        assert len(ds.files) == 10          # the VRT and its 9 tiles (GDAL lists the sources)
    out = tmp_path / "mosaic.gpkg"
    reachgauge.run(out, dem=str(vrt), streams=str(streams), **RUN)
    assert_same_result(single, out)
    info = dict(pyogrio.read_dataframe(out, layer="run_info")[["key", "value"]].values)
    assert '"parts": 9' in info["input.dem"]     # the fingerprint covers the tiles
    before = fingerprint(str(vrt))
    st = os.stat(tmp_path / "tile_1_1.tif")
    os.utime(tmp_path / "tile_1_1.tif", ns=(st.st_atime_ns, st.st_mtime_ns + 10**9))
    assert fingerprint(str(vrt)) != before       # a retouched tile is a different input


# ----------------------------------------------------------------- HTTP server
class QuietHandler(SimpleHTTPRequestHandler):
    def log_message(self, *args):
        pass


class RangeHandler(QuietHandler):
    """Static files with single byte-range GETs (RFC 9110 §14.2), counting the
    body bytes sent in ``server.sent``."""

    def send_head(self):
        path = self.translate_path(self.path)
        if not os.path.isfile(path):
            self.send_error(404)
            return None
        size = os.path.getsize(path)
        rng = self.headers.get("Range")
        m = re.fullmatch(r"bytes=(\d+)-(\d*)", rng or "")
        if rng and not m:                       # multi-range: not implemented, fail loudly
            self.send_error(501, "only single byte ranges")
            return None
        start, end = (int(m[1]), min(int(m[2] or size - 1), size - 1)) if m else (0, size - 1)
        if start >= size:
            self.send_error(416)
            return None
        self.send_response(206 if m else 200)
        if m:
            self.send_header("Content-Range", f"bytes {start}-{end}/{size}")
        self.send_header("Content-Length", str(end - start + 1))
        self.send_header("Accept-Ranges", "bytes")
        self.send_header("Content-Type", self.guess_type(path))
        self.send_header("Last-Modified", self.date_time_string(int(os.path.getmtime(path))))
        self.end_headers()
        fh = open(path, "rb")
        fh.seek(start)
        self.todo = end - start + 1
        return fh

    def copyfile(self, source, outputfile):
        data = source.read(self.todo)
        outputfile.write(data)
        with self.server.lock:
            self.server.sent += len(data)
            self.server.requests.append(self.headers.get("Range") or "whole")


@pytest.fixture
def server(tmp_path, monkeypatch):
    """A range-capable HTTP server on 127.0.0.1 (a free port) serving ``tmp_path``.
    No proxy may stand between GDAL/urllib and loopback."""
    for var in ("NO_PROXY", "no_proxy"):
        monkeypatch.setenv(var, "127.0.0.1,localhost")
    httpd = ThreadingHTTPServer(("127.0.0.1", 0), partial(RangeHandler, directory=str(tmp_path)))
    httpd.sent, httpd.requests, httpd.lock = 0, [], threading.Lock()
    threading.Thread(target=httpd.serve_forever, daemon=True).start()
    try:
        yield httpd, f"http://127.0.0.1:{httpd.server_address[1]}"
    finally:
        httpd.shutdown()
        httpd.server_close()


def test_cog_over_http_equals_the_local_file_and_is_read_by_windows(terrain, server, tmp_path):
    v, streams, single = terrain
    httpd, base = server
    cog = tmp_path / "terrain.tif"
    # 64-pixel tiles: a real COG uses 256–512, but this raster is only 700 × 400 px;
    # the tiles must be small beside it for windowed reading to be visible
    rio_copy(v.path, cog, driver="COG", blocksize=64, compress="DEFLATE", predictor=3)
    size = cog.stat().st_size
    with rasterio.open(cog) as ds:
        assert ds.block_shapes[0] == (64, 64) and ds.overviews(1)   # tiled, with overviews
    out = tmp_path / "remote.gpkg"
    # jobs=2: the reaches run in worker processes, which reopen the raster from its URL
    reachgauge.run(out, dem=f"{base}/terrain.tif", streams=str(streams), jobs=2, **RUN)
    assert_same_result(single, out)
    # Windowed reading. Reading the file whole once per reach would send at least
    # 3 × size (three reaches); even one whole read sends size. The three 100 m reaches
    # and their 30 m half-width transects cover a 300 m × 60 m strip, about 7 % of
    # the raster's area, i.e. roughly 2 rows × 6 columns of the 7 × 11 tiles; with
    # the header read by each of three processes (the client and two workers) the
    # bytes sent must stay below half the file.
    print(f"COG {size} bytes; served {httpd.sent} bytes in {len(httpd.requests)} requests")
    assert 0 < httpd.sent < 0.5 * size, (httpd.sent, size, httpd.requests)
    info = dict(pyogrio.read_dataframe(out, layer="run_info")[["key", "value"]].values)
    assert f'"bytes": {size}' in info["input.dem"] and base in info["input.dem"]
    # the fingerprint is the server's size and Last-Modified: a newer file differs
    url = f"{base}/terrain.tif"
    before = fingerprint(url)
    assert f"size={size}" in before and "modified=" in before
    os.utime(cog, (cog.stat().st_atime, cog.stat().st_mtime + 10))
    assert fingerprint(url) != before


def test_url_that_does_not_answer_is_a_clear_input_error(terrain, tmp_path):
    _, streams, _ = terrain
    with socket.socket() as s:            # a port that was free a moment ago: nothing listens
        s.bind(("127.0.0.1", 0))
        port = s.getsockname()[1]
    url = f"http://127.0.0.1:{port}/terrain.tif"
    with pytest.raises(InputError) as e:
        reachgauge.run(tmp_path / "r.gpkg", dem=url, streams=str(streams), **RUN)
    assert "cannot be reached" in e.value.problem and url in e.value.problem
    assert "curl -I" in e.value.fix
    assert not (tmp_path / "r.gpkg").exists()


def test_url_that_serves_no_raster_is_a_clear_input_error(terrain, server, tmp_path):
    _, streams, _ = terrain
    (tmp_path / "notes.txt").write_text("these are field notes, not a terrain raster\n" * 50)
    url = f"{server[1]}/notes.txt"
    with pytest.raises(InputError) as e:
        reachgauge.run(tmp_path / "r.gpkg", dem=url, streams=str(streams), **RUN)
    assert "does not serve a raster" in e.value.problem and url in e.value.problem
    assert not (tmp_path / "r.gpkg").exists()


def test_server_without_range_requests_is_a_clear_input_error(terrain, tmp_path, monkeypatch):
    """Python's own SimpleHTTPRequestHandler answers every GET whole (no Range)."""
    v, streams, _ = terrain
    for var in ("NO_PROXY", "no_proxy"):
        monkeypatch.setenv(var, "127.0.0.1,localhost")
    httpd = ThreadingHTTPServer(("127.0.0.1", 0),
                                partial(QuietHandler, directory=str(v.path.parent)))
    threading.Thread(target=httpd.serve_forever, daemon=True).start()
    url = f"http://127.0.0.1:{httpd.server_address[1]}/{v.path.name}"
    try:
        with pytest.raises(InputError) as e:
            reachgauge.run(tmp_path / "r.gpkg", dem=url, streams=str(streams), **RUN)
    finally:
        httpd.shutdown()
        httpd.server_close()
    assert "range requests" in e.value.problem and url in e.value.problem


def test_url_keeps_its_form_through_the_settings(tmp_path):
    """A URL given on the command line, the API or in a TOML file stays the URL
    (pathlib would fold ``http://`` to ``http:/``; a config file's folder must not
    be put in front of it)."""
    url = "https://example.invalid/dem/terrain.tif"
    assert reachgauge.api.configure(dem=url).dem == url
    assert reachgauge.api.configure(dem="/vsicurl/" + url).dem == "/vsicurl/" + url
    toml = tmp_path / "run.toml"
    toml.write_text(f'[inputs]\ndem = "{url}"\nstreams = "streams.gpkg"\n')
    cfg = reachgauge.api.configure(toml)
    assert cfg.dem == url and cfg.streams == tmp_path / "streams.gpkg"
