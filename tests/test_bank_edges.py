"""Bank tops (hydraulics/bankfull/banks.py) and the bankfull channel they bound.

Sources:
- trapezoid geometry: top width b + 2zh, wetted perimeter b + 2h√(1 + z²), area
  (b + zh)h (standard plane geometry; REFERENCES.md "Closed forms");
- a straight line fitted by least squares to points on a straight line is that line
  (exact algebra), so a face fit on an exact (surveyed) profile reads the face's own
  line;
- linear interpolation a fraction u of the way between two values Δ apart is a
  two-point kernel of variance u(1 − u)Δ², whose mean over u uniform on [0, 1] is
  Δ²/6 (a one-line integral); for a quadratic ground z = s², interpolation reads
  s² + that variance, which is how the blur of the sampler is checked below;
- the normal quantile function, scipy.stats.norm.ppf (reference library), for the
  apparent width of a blurred step.

Tolerances are set from the pixel size and the noise, with the reason beside each.
"""

import numpy as np
import pyogrio
import pytest
from affine import Affine
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy.stats import norm

import reachgauge
from reachgauge import CrossSection
from reachgauge.hydraulics.bankfull import banks, pick_bankfull
from reachgauge.inputs.sampler import bilinear
from reachgauge.kernel import sections as K

from terrain_fixtures import make_valley_raster, meander_line, straight_line, write_lines

pytestmark = pytest.mark.filterwarnings("ignore::RuntimeWarning")


# ---------------------------------------------------------------- exact profiles
def _trapezoid(b=6.0, h=2.0, z=1.5, plain=25.0, step=0.5, start=0.3):
    """A trapezoid cut into a flat plain at 100 + h, sampled every ``step`` from
    ``start`` (corners between samples); returns the section and its corners' offsets."""
    left_top = plain
    xs = [0.0, left_top, left_top + z * h, left_top + z * h + b, left_top + 2 * z * h + b,
          2 * left_top + 2 * z * h + b]
    zs = [100 + h, 100 + h, 100.0, 100.0, 100 + h, 100 + h]
    x = np.arange(start, xs[-1], step)
    return CrossSection(x, np.interp(x, xs, zs)), (xs[1], xs[4])


def test_an_exact_profile_reads_each_face_line_at_the_stage():
    # a straight face fitted by least squares is its own line (exact algebra): the bank
    # tops are where the face lines reach the picked stage, to float precision
    z = 1.5
    cs, (lt, rt) = _trapezoid(z=z)
    pick = pick_bankfull(cs)
    below = 102.0 - pick.stage            # how far the pick sits below the plain
    assert pick.left_bank == pytest.approx(lt + z * below, abs=1e-9)
    assert pick.right_bank == pytest.approx(rt - z * below, abs=1e-9)


def test_bank_tops_at_the_plain_are_the_corners_of_the_section():
    # the closed-form corners, b/2 + zh either side of the centre (standard geometry),
    # for several profiles at once: one row per side slope
    rows = [_trapezoid(z=z) for z in (0.5, 1.0, 2.0, 3.0)]
    m = max(cs.offset.size for cs, _ in rows)
    x = np.full((len(rows), m), np.nan)
    zz = np.full((len(rows), m), np.nan)
    for i, (cs, _) in enumerate(rows):
        x[i, :cs.offset.size], zz[i, :cs.offset.size] = cs.offset, cs.elevation
    p = K.profiles(x, zz)
    stage = np.full(len(rows), 102.0)
    w = K.wet(p, stage)
    outer = np.column_stack([w.left_edge[:, 0], w.right_edge[:, 0]])
    got = banks.bank_tops(p, stage, outer)
    want = np.array([c for _, c in rows])
    np.testing.assert_allclose(got, want, rtol=0, atol=1e-9)


# ---------------------------------------------------------------- the blur model
def test_interpolation_blur_has_the_variance_of_two_linear_kernels():
    # ground z = s² along a transect at 30° to the grid: bilinear reads of a raster of
    # pixel px at samples every step, then straight lines between the samples, read
    # s² + (px² + step²)/6 on average over positions (mean of u(1 − u) is 1/6)
    px, step, theta = 2.0, 2.0, np.radians(30.0)
    n = np.array([np.cos(theta), np.sin(theta)])
    size = 200
    cx, cy = np.meshgrid(np.arange(size) + 0.5, np.arange(size) + 0.5)
    centres = np.stack([cx * px, (size - cy) * px], axis=-1)
    s0 = 0.5 * size * px
    grid = ((centres - s0) @ n) ** 2
    rng = np.random.default_rng(1)
    origin = s0 + rng.uniform(-20, 20, (400, 1, 2))          # many positions, random phases
    s = np.arange(-20.0, 20.0 + 1e-9, step)
    pts = origin + s[None, :, None] * n
    z = bilinear(grid, Affine(px, 0, 0, 0, -px, size * px), pts)
    u = rng.uniform(0, 1, (400, s.size - 1))                 # points between samples
    zq = (1 - u) * z[:, :-1] + u * z[:, 1:]
    sq = ((origin - s0) @ n)[:, :1] + s[None, :-1] + u * step
    excess = float(np.mean(zq - sq ** 2))
    want = float(banks.sampling_blur(step, px)) ** 2
    # Monte Carlo: each draw's excess is a sum of u(1 − u)Δ²-type terms of SD under
    # 0.4 m² (u(1 − u) has SD 0.075; Δ² = 4 m²), so the mean of 8000 draws has a standard
    # error under 0.005 m², 0.4 % of 1.33 m²; 3 % leaves room for the draws along one
    # line sharing their phases (any seed passes; none was chosen)
    assert excess == pytest.approx(want, rel=0.03)


def test_apparent_width_of_a_step_and_of_a_wide_face():
    q, w = banks.apparent_width()
    f = np.linspace(banks.FIT_FROM, banks.FIT_TO, banks.FIT_STAGES)
    # a step blurred by a unit normal kernel is the normal distribution function: the
    # fit reads the least-squares slope of its quantile function (scipy.stats.norm)
    assert w[0] == pytest.approx(np.polyfit(f, norm.ppf(f), 1)[0], rel=1e-9)
    # a face many kernels wide is not changed where it is fitted (its nearest fitted
    # point is 0.3 q kernel SDs from a corner: the normal tail beyond 6 SDs is 1e-9)
    wide = q >= 20
    np.testing.assert_allclose(w[wide], q[wide], rtol=0, atol=1e-6)
    assert np.all(np.diff(w) > 0)
    # the correction inverts the table (and leaves an unblurred width alone)
    got = banks.deblurred(w * 0.7, 0.7)
    np.testing.assert_allclose(got, q * 0.7, rtol=0, atol=1e-6)
    assert banks.deblurred(3.2, 0.0) == 3.2


@st.composite
def _ground(draw):
    n = draw(st.integers(8, 60))
    step = draw(st.sampled_from([0.5, 1.0, 2.0]))
    rng = np.random.default_rng(draw(st.integers(0, 2 ** 31)))
    x = np.arange(n) * step
    c = x[rng.integers(2, n - 2)]
    z = draw(st.floats(0.05, 1.0)) * np.abs(x - c) + rng.normal(0, draw(st.floats(0.0, 0.3)), n)
    return x, z


@settings(max_examples=40, deadline=None)
@given(_ground(), st.floats(0.1, 3.0), st.floats(0.0, 2.0))
def test_a_bank_top_stays_between_the_half_depth_edge_and_the_outer_edge(g, depth, blur):
    # the bounds the module promises, whatever the ground: any bank that rises outward
    # is wider at the top than at half depth, and never beyond where the water stands
    x, z = g
    p = K.profiles(x, z)
    stage = p.thalweg + depth
    w = K.wet(p, np.column_stack([stage, p.thalweg + 0.5 * depth]))
    outer = np.column_stack([w.left_edge[:, 0], w.right_edge[:, 0]])
    half = np.column_stack([w.left_edge[:, 1], w.right_edge[:, 1]])
    got = banks.bank_tops(p, stage, outer, blur)
    assert got[0, 0] >= outer[0, 0] - 1e-9 and got[0, 1] <= outer[0, 1] + 1e-9
    assert got[0, 0] <= max(half[0, 0], outer[0, 0]) + 1e-9
    assert got[0, 1] >= min(half[0, 1], outer[0, 1]) - 1e-9


# ---------------------------------------------------------------- the whole tool
B, H, Z, N = 6.0, 1.5, 2.0, 0.035


@pytest.mark.parametrize("shape, res, noise", [
    ("meander", 1.0, 0.02),      # the case of issue 9 (read 13 % wide)
    ("straight", 2.0, 0.05),     # a 6-pixel channel whose faces span 1.5 pixels
    ("meander", 0.5, 0.05),
])
def test_the_run_reads_the_built_channel_between_its_banks(tmp_path, shape, res, noise):
    line = (meander_line(400.0, 25.0, 300.0, angle_deg=-20.0) if shape == "meander"
            else straight_line(400.0, angle_deg=20.0))
    v = make_valley_raster(tmp_path, line, res=res, bottom_width=B, bank_height=H, side_slope=Z,
                           noise=noise, seed=11, margin=45.0)
    streams = write_lines(tmp_path / "s.gpkg", [line], fields={"rid": ["A"]})
    out = tmp_path / "r.gpkg"
    reachgauge.run(out, dem=str(v.path), streams=str(streams), id_field="rid", spacing=10.0,
                   half_width=30.0, n=N)
    tr = pyogrio.read_dataframe(out, layer="transects", read_geometry=False)
    tr = tr[tr.status == "ok"]
    assert len(tr) >= 30
    top, perim = B + 2 * Z * H, B + 2 * H * np.sqrt(1 + Z * Z)    # closed forms
    blur = float(banks.sampling_blur(res))
    # Width: each bank top may sit a quarter of the sampling blur σ_b off (the correction
    # stands a normal kernel in for the two interpolation kernels of equal variance)
    # plus one noise SD carried out along a face of slope z (zσ), on each side.
    tol_w = 2 * (blur / 4 + Z * noise)
    assert np.median(tr.top_width) == pytest.approx(top, abs=tol_w)
    assert np.median(tr.bank_right - tr.bank_left) == pytest.approx(top, abs=tol_w)
    # Perimeter: a bank misplaced along the flat plain moves it one for one (tol_w), and
    # the blur cuts each of the four corners (turn θ = atan(1/z)) by at most
    # 2r(1 − cos θ/2) over a rounding r of two blur SDs.
    corners = 4 * 2 * (2 * blur) * (1 - np.cos(0.5 * np.arctan(1 / Z)))
    assert np.median(tr.perimeter) == pytest.approx(perim, abs=tol_w + corners)
