"""Uncertainty of the bankfull discharge, the rating curves and the design-flow checks
by Monte Carlo propagation (JCGM 101:2008, *Evaluation of measurement data —
Supplement 1 to the "Guide to the expression of uncertainty in measurement" —
Propagation of distributions using a Monte Carlo method*).

Each draw takes one value of every uncertain input from its distribution and runs
the same section kernel (:mod:`reachgauge.kernel.sections`) as the plain figures, for
all transects of the reach and a block of draws in one call ((transects × draws)
profiles). The outputs' percentiles over the draws are reported: p10–p90 is the
probabilistically symmetric 80 % coverage interval of JCGM 101 (7.7).

The inputs and their distributions (JCGM 101, 6.4: a rectangular distribution where
only bounds are known):

- **Manning's n**, uniform within the range of its source: Cowan's method draws each
  term uniformly within the range of its class in Arcement & Schneider (1989), Table 1
  (the envelope of the classes whose range holds the value) and sums them, times the
  meander multiplier; a single value (default, streams field, land-cover table,
  calibration) is taken ±20 % (``REL_N``: common practice, not a published bound),
  unless ``--n-range LOW HIGH`` gives the channel's bounds (over any source's own). One
  draw of n serves every transect of the reach (n is the reach's, or its land cover's:
  an error in it is shared), one quantile for each of left overbank, channel, right
  overbank.
- **Slope**, lognormal with its median at the fitted slope and a log-standard
  deviation of the window fit's standard error over the slope
  (:func:`~reachgauge.hydraulics.spreads.slope_log_sd`). Neighbouring stations share
  most of their window's points, so their errors are drawn as a moving average of
  independent normals over the window's stations (correlation falling linearly to 0
  one window apart).
- **Bankfull stage**, normal about the pick with a standard deviation combining the
  spread of the automatic methods (their range over the expected range of that many
  normal draws, :func:`~reachgauge.hydraulics.spreads.expected_range`) and the
  terrain's noise σ (one sample's error): σ² = (range / d₂(k))² + σ_noise².
  Independent between transects.
- **Terrain elevation**, from ``--vertical-accuracy`` (RMSE, m). A lidar's vertical
  error has a part shared over a flight strip (kilometres: a reach) and a random part
  per point. The random part shows in the data as the scatter the terrain's noise σ
  measures; the rest, √(RMSE² − σ²), cannot be seen in the data. The random part,
  min(σ, RMSE), is drawn as independent noise on every sample (on :data:`GROUNDS`
  realisations of the ground, see :func:`propagate`). The shared part would move the
  ground and the stage picked on it together: it changes neither the bankfull
  discharge, nor the rating curves (by depth above the thalweg), nor the design-flow
  checks (stage and bankfull stage move alike), only where the water stands in
  absolute elevation, which no banded figure reports; so it is not drawn. Without
  ``--vertical-accuracy`` the ground is taken as exact.

Reproducible: each reach's draws come from a generator seeded by the run's seed and a
stable hash of the reach id (:func:`generator`), so the figures do not depend on the
executor or the order the reaches run in.
"""

from __future__ import annotations

import hashlib
from dataclasses import dataclass

import numpy as np

from reachgauge.hydraulics.spreads import REL_N, cowan_ranges, slope_log_sd, stage_sd
from reachgauge.kernel import sections as K

QUANTILES = (0.10, 0.50, 0.90)
CELLS = 1 << 20       # (profiles × stages) cells of one kernel call (bounds memory)
GROUNDS = 25          # realisations of the ground's noise (shared in turn by the draws)


@dataclass(frozen=True)
class UncertaintyParams:
    """``draws`` (0: off); ``n_range`` () or (low, high) channel n; ``vertical_accuracy``
    RMSE m or None; ``seed``; ``slope_window`` m (the slope fit's window)."""

    draws: int = 0
    n_range: tuple = ()
    vertical_accuracy: float | None = None
    seed: int = 0
    slope_window: float = 200.0

    @classmethod
    def from_config(cls, cfg) -> "UncertaintyParams":
        return cls(int(cfg.uncertainty), tuple(cfg.n_range), cfg.vertical_accuracy,
                   int(cfg.seed), float(cfg.slope_window))


def generator(seed: int, reach_id) -> np.random.Generator:
    """The reach's generator: SeedSequence of the run seed and the first 128 bits of
    the SHA-256 of the reach id (stable across processes, unlike ``hash``)."""
    words = np.frombuffer(hashlib.sha256(str(reach_id).encode()).digest()[:16], dtype="<u4")
    return np.random.default_rng(np.random.SeedSequence([int(seed), *map(int, words)]))


@dataclass(frozen=True)
class Spread:
    """The uncertain inputs of one reach's t transects (SI).

    n_lo, n_hi (t, 3): bounds of a uniform n per part; cowan: None, or (lo (5,),
    hi (5,), meander) to draw the channel n by Cowan's sum instead; slope (t,) the
    lognormal's median, slope_sd (t,) its log-sd, slope_span stations one window
    spans; stage (t,) the picks, stage_sd (t,) m; point_sd m: the ground's random
    error per sample."""

    n_lo: np.ndarray
    n_hi: np.ndarray
    cowan: tuple | None
    slope: np.ndarray
    slope_sd: np.ndarray
    slope_span: int
    stage: np.ndarray
    stage_sd: np.ndarray
    point_sd: float = 0.0


@dataclass(frozen=True)
class Draws:
    """n (D, t, 3), slope (D, t), stage (D, t) m."""

    n: np.ndarray
    slope: np.ndarray
    stage: np.ndarray


def draw_inputs(s: Spread, draws: int, rng: np.random.Generator) -> Draws:
    """One value of every input per draw, in a fixed order of the generator's calls."""
    t = s.stage.size
    u = rng.random((draws, 1, 3))          # one quantile per part, shared by the transects
    n = s.n_lo[None] + u * (s.n_hi - s.n_lo)[None]
    if s.cowan is not None:
        lo, hi, m = s.cowan
        terms = lo[None] + rng.random((draws, lo.size)) * (hi - lo)[None]
        n[:, :, 1] = (terms.sum(axis=1) * m)[:, None]
    w = max(1, min(int(s.slope_span), max(t, 1)))
    e = rng.standard_normal((draws, t + w - 1))
    cs = np.concatenate([np.zeros((draws, 1)), np.cumsum(e, axis=1)], axis=1)
    zeta = (cs[:, w:] - cs[:, :-w]) / np.sqrt(w)   # moving sum of w unit normals, unit variance
    slope = s.slope[None] * np.exp(s.slope_sd[None] * zeta)
    stage = s.stage[None] + s.stage_sd[None] * rng.standard_normal((draws, t))
    return Draws(n, slope, stage)


def _perturbed(p: K.Profiles, rows, copies: int, point_sd, rng) -> K.Profiles:
    """``copies`` copies of the profiles ``rows`` (copy-major), each with independent
    noise of ``point_sd`` (m) on every sample; thalweg column and bed level kept."""
    r, m = rows.size, p.z.shape[1]
    inside = np.arange(m)[None, :] < p.size[rows, None]
    z = np.where(inside, p.z[rows], np.nan)[None] + point_sd * rng.standard_normal((copies, r, m))
    return K.profiles(np.tile(p.x[rows], (copies, 1)), z.reshape(copies * r, m),
                      thalweg=np.tile(p.i0[rows], copies), bed=np.tile(p.thalweg[rows], copies))


def _conveyance(pp: K.Profiles, stages, banks, units) -> np.ndarray:
    """Conveyance (3, rows, k) of left overbank, channel and right overbank at
    ``stages`` (rows, k): the divided-channel discharge at n = 1 and S = 1, so that
    Q = √S Σ K_i / n_i (Chow 1959, §6-9)."""
    return K.flow(pp, stages, 1.0, 1.0, banks, units).part_discharge


@dataclass(frozen=True)
class Samples:
    """Per draw: channel and whole-section discharge at the drawn bankfull stage
    (D, t; NaN off ``rows``) and the whole-section discharge at each rating depth
    (D, len(rows), k)."""

    channel: np.ndarray
    total: np.ndarray
    rating: np.ndarray


def propagate(p: K.Profiles, banks, s: Spread, dr: Draws, rows, depths, rng,
              units: str = "si") -> Samples:
    """Discharge of every draw on the transects ``rows`` by the divided-channel method:
    at the drawn bankfull stage (channel part and whole section) and at ``depths``
    above the thalweg (rating curves).

    n and slope enter Manning's equation as factors (Q = √S Σ K_i / n_i), so the kernel
    runs once per ground and stage for the conveyances K_i and each draw combines
    them with its own n and slope. With exact ground that is one ground; with noise on
    the samples, :data:`GROUNDS` realisations of it, draw d taking ground d mod
    GROUNDS (its effect on conveyance at a stage is small and smooth; the other inputs
    vary in every draw). Blocks of grounds keep each call under :data:`CELLS` cells."""
    rows = np.asarray(rows, dtype=int)
    D, t = dr.stage.shape
    depths = np.asarray(depths, dtype=float)
    k, r = depths.size, rows.size
    channel, total = np.full((D, t), np.nan), np.full((D, t), np.nan)
    rating = np.full((D, r, k), np.nan)
    if r == 0 or D == 0:
        return Samples(channel, total, rating)
    G = min(D, GROUNDS) if s.point_sd > 0 else 1
    per = -(-D // G)                                    # draws per ground
    inv_n = 1.0 / dr.n[:, rows, :]                      # (D, r, 3)
    sq = np.sqrt(dr.slope[:, rows])                     # (D, r)
    bk = np.asarray(banks, dtype=float)[rows]
    block = max(1, CELLS // (r * max(k, per)))
    for g0 in range(0, G, block):
        gs = np.arange(g0, min(G, g0 + block))
        pp = (_perturbed(p, rows, gs.size, s.point_sd, rng) if s.point_sd > 0
              else p.take(rows))
        bkg = np.tile(bk, (gs.size, 1))
        d = gs[:, None] + G * np.arange(per)[None, :]   # (g, per) the draws on each ground
        live = d < D
        st = dr.stage[np.minimum(d, D - 1)][:, :, rows]  # (g, per, r)
        grid = np.where(live[:, :, None], st, pp.thalweg.reshape(gs.size, 1, r))
        kb = _conveyance(pp, grid.transpose(0, 2, 1).reshape(gs.size * r, per), bkg, units)
        kb = kb.reshape(3, gs.size, r, per).transpose(0, 1, 3, 2)[:, live]   # (3, draws, r)
        dd = d[live]
        parts = kb.transpose(1, 2, 0) * inv_n[dd]       # (draws, r, 3)
        channel[dd[:, None], rows[None, :]] = sq[dd] * parts[:, :, 1]
        total[dd[:, None], rows[None, :]] = sq[dd] * parts.sum(axis=2)
        if k:
            kr = _conveyance(pp, pp.thalweg[:, None] + depths[None, :], bkg, units)
            kr = kr.reshape(3, gs.size, r, k)
            for j, g in enumerate(gs):
                on = np.arange(g, D, G)
                rating[on] = sq[on][:, :, None] * np.einsum("irk,dri->drk", kr[:, j], inv_n[on])
    return Samples(channel, total, rating)


def _quantiles(a, axis=0) -> np.ndarray:
    """p10, p50, p90 along ``axis`` ignoring NaN (linear interpolation between order
    statistics, numpy's default ``linear`` method); NaN where a slice has none.
    Vectorised: NaN sorts last, so each slice's finite values come first."""
    a = np.moveaxis(np.asarray(a, dtype=float), axis, 0)
    if a.size == 0:
        return np.full((len(QUANTILES),) + a.shape[1:], np.nan)
    srt = np.sort(a, axis=0)
    cnt = np.isfinite(a).sum(axis=0)
    out = np.full((len(QUANTILES),) + a.shape[1:], np.nan)
    for i, q in enumerate(QUANTILES):
        pos = q * np.maximum(cnt - 1, 0)
        lo = np.floor(pos).astype(int)
        hi = np.minimum(lo + 1, np.maximum(cnt - 1, 0))
        f = pos - lo
        vlo = np.take_along_axis(srt, lo[None], axis=0)[0]
        vhi = np.take_along_axis(srt, hi[None], axis=0)[0]
        out[i] = np.where(cnt > 0, vlo + f * (vhi - vlo), np.nan)
    return out


def _median_rows(a, mask) -> np.ndarray:
    """Median over the columns ``mask`` of each row of ``a`` (D, t); NaN without any."""
    sel = np.where(np.asarray(mask, bool)[None, :], a, np.nan)
    return _quantiles(sel, axis=1)[1]


@dataclass(frozen=True)
class Outcome:
    """transect: discharge_p10/p50/p90 (t,); reach: the same of the reach median;
    rating (3, r, k) and reach_rating (3, k): p10/p50/p90 of the rating discharge;
    p_out (t, f), p_out_reach (f,): share of draws a design flow leaves the channel;
    flows: the flows' names in that order."""

    transect: dict
    reach: dict
    rating: np.ndarray
    reach_rating: np.ndarray
    p_out: np.ndarray
    p_out_reach: np.ndarray
    flows: list


def summarise(sm: Samples, flows: dict, published, use) -> Outcome:
    """Percentiles over the draws. A transect's band is that of its channel discharge
    at the bankfull stage (NaN where no stage is published); the reach's is that of
    the median over the trusted picks (``use``) of each draw, the same median that
    gives the reach's ``discharge``. A design flow leaves the channel in a draw where it
    exceeds what fills the section to the drawn bankfull stage (the whole-section
    discharge, as ``q_ratio``; below the bankfull stage discharge rises with stage, so
    this is the normal stage lying above it); at the reach, where it exceeds the
    median of that over the trusted picks (as the reach's ``out_of_bank``)."""
    pub = np.asarray(published, bool)
    ch = np.where(pub[None], sm.channel, np.nan)
    tot = np.where(pub[None], sm.total, np.nan)
    tq = _quantiles(ch)
    rq = _quantiles(_median_rows(ch, use))
    names = list(flows)
    qd = np.array([float(flows[f]) for f in names])
    with np.errstate(invalid="ignore"):
        out = (qd[None, None, :] > tot[:, :, None]).mean(axis=0)
        p_out = np.where(np.isfinite(tot).all(axis=0)[:, None], out, np.nan)
        med = _median_rows(tot, use)
        p_reach = np.where(np.isfinite(med).all(), (qd[None, :] > med[:, None]).mean(axis=0),
                           np.nan)
    d, r, k = sm.rating.shape
    with np.errstate(all="ignore"):
        reach_curve = _quantiles(sm.rating, axis=1)[1] if r else np.full((d, k), np.nan)
    keys = [f"discharge_p{round(q * 100)}" for q in QUANTILES]
    return Outcome(dict(zip(keys, tq)), {k: float(v) for k, v in zip(keys, rq)},
                   _quantiles(sm.rating), _quantiles(reach_curve), p_out, p_reach, names)


def assess(u: UncertaintyParams, rid, p: K.Profiles, picks, banks, slope, n, n_src, ok,
           published, use, depths, flows, profile, cowan=None) -> Outcome:
    """The uncertainty of one reach's results: the inputs' spreads from the reach's
    own data (module docstring), ``u.draws`` draws from the reach's generator,
    the kernel over them and the percentiles (:func:`summarise`)."""
    rng = generator(u.seed, rid)
    lo, hi = n * (1 - REL_N), n * (1 + REL_N)
    src = str(n_src[0]) if len(n_src) else ""
    terms = cowan.get(rid) if cowan and src.startswith("cowan") else None
    if u.n_range:
        lo[:, 1], hi[:, 1] = u.n_range
        terms = None
    prof = profile.sort_values("chainage")
    sl_sd, span = slope_log_sd(prof["chainage"], prof["z_used"], slope, u.slope_window)
    noise = np.nan_to_num(np.asarray(picks.noise, dtype=float))
    sigma = float(np.median(noise[ok])) if ok.any() else 0.0
    # the random part of the RMSE; the rest, shared by the reach, moves ground and stage
    # alike and changes none of the banded figures (module docstring)
    point = min(sigma, u.vertical_accuracy) if u.vertical_accuracy else 0.0
    stage = np.where(published, picks.stage, p.thalweg)
    spread = Spread(lo, hi, cowan_ranges(terms) if terms else None, np.asarray(slope, float),
                    sl_sd, span, stage, np.where(published, stage_sd(picks.candidates, noise), 0.0),
                    point)
    dr = draw_inputs(spread, u.draws, rng)
    sm = propagate(p, banks, spread, dr, np.nonzero(ok)[0], depths, rng)
    out = summarise(sm, flows, published, use)
    # the drawn bankfull stages' band, for the long profile
    lo, _mid, hi = _quantiles(np.where(np.asarray(published, bool)[None], dr.stage, np.nan))
    out.transect.update(bankfull_stage_p10=lo, bankfull_stage_p90=hi)
    return out


def merge(out: Outcome, tr, reach_row: dict, curves, design) -> None:
    """Write an :func:`assess` outcome into the reach's tables (in place): transect
    and reach percentiles, the rating curves' p10/p90 (their rows: each valid transect
    at every depth, then the reach curve) and each design check's ``p_out_of_bank``."""
    for key, v in out.transect.items():
        tr[key] = v
    reach_row.update(out.reach)
    st = curves["station"].to_numpy(int)
    own = st >= 0
    r, k = out.rating.shape[1:]
    if own.sum() == r * k:
        for j, key in ((0, "discharge_p10"), (2, "discharge_p90")):
            col = np.full(len(curves), np.nan)
            col[own] = out.rating[j].ravel()
            if k and (~own).any():   # the reach curve's rows by their depth
                d = curves["depth"].to_numpy(float)[~own]
                grid = curves["depth"].to_numpy(float)[own][:k]
                col[~own] = out.reach_rating[j][np.abs(d[:, None] - grid[None]).argmin(axis=1)]
            curves[key] = col
    if len(design):
        fi = {f: i for i, f in enumerate(out.flows)}
        f = np.array([fi[x] for x in design["flow"]])
        s = design["station"].to_numpy(int)
        design["p_out_of_bank"] = np.where(s >= 0, out.p_out[np.maximum(s, 0), f],
                                           out.p_out_reach[f])
