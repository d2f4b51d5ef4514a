//! Noise floor of a trace and the statistics of its fluctuation.
//!
//! A positive-peak detector shows, at each display point, the largest of the IF envelope
//! samples within the point's frequency bucket. For noise those samples are Rayleigh
//! distributed, so a displayed noise point is the maximum of `M` Rayleigh samples, and its
//! level in dB has the quantiles
//!
//! ```text
//! D_q = S + 10·log10(−2·ln(1 − q^(1/M)))
//! ```
//!
//! where `S = 20·log10(σ)` and σ is the Rayleigh parameter (the rms noise is σ·√2). The
//! shape of the distribution depends on `M` alone; its position on `S`. [`estimate_floor`]
//! tracks the receiver floor with a robust lower envelope in log-frequency, fits `M` and `S`
//! to the lower quantiles of the residuals (signals sit in the upper tail), and sets the
//! detection threshold where the chance that a noise point exceeds it is `false_alarms / N`.
//!
//! The Rayleigh law of the noise envelope and the CDF of the maximum of `M` independent
//! samples, `F(x)^M`, are textbook (any communications or order-statistics text); `M` is
//! fitted, so a trace taken with a sample, rms or video-filtered detector is handled too
//! (it just gets another effective `M`).

use crate::scan::Scan;
use serde::Serialize;
use std::borrow::Cow;

/// Settings of the floor estimate.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct FloorParams {
    /// Half-width of the envelope window in decades of frequency (at least). The default,
    /// 0.015 decade (±3.5 %), lets the floor follow a continuum's dips (the sinc lobes of an
    /// unresolved comb, a few per cent wide in a radiated scan), where a line stands out that a
    /// wider window's floor would bury; measured on the accuracy harness against 0.1 decade over
    /// three sets of 200 cases: top-1 +0.02 to +0.03, peak recall +0.01, family recall
    /// +0.003 to +0.006, precision −0.01 to +0.03.
    pub window_decades: f64,
    /// Half-width of the envelope window in RBWs (at least), when the RBW is known.
    pub window_rbw: f64,
    /// Expected number of noise points over the threshold in the whole trace.
    pub false_alarms: f64,
}

impl Default for FloorParams {
    fn default() -> Self {
        FloorParams {
            window_decades: 0.015,
            window_rbw: 20.0,
            false_alarms: 0.05,
        }
    }
}

/// The floor of one trace.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Floor {
    /// Median level of a noise-only point, per point (dBµV).
    pub floor_dbuv: Vec<f64>,
    /// Detection threshold per point (dBµV).
    pub threshold_dbuv: Vec<f64>,
    /// Effective number of independent envelope samples per display point.
    pub samples_per_point: f64,
    /// Interquartile range of a noise-only point's level (dB).
    pub spread_db: f64,
    /// Chance that a noise-only point exceeds the threshold.
    pub false_alarm_per_point: f64,
}

/// Width of the log-frequency bins of the envelope, in decades.
const BIN_DECADES: f64 = 0.005;
/// Quantile of the points of one bin (robust to lines that fill part of the bin).
const BIN_QUANTILE: f64 = 0.25;
/// Quantile of the bin values across the window (hugs the floor under humps and combs).
const WINDOW_QUANTILE: f64 = 0.3;
/// Residual quantiles the noise law is fitted to: the lower part, where noise dominates.
const FIT_QUANTILES: [f64; 6] = [0.03, 0.06, 0.1, 0.15, 0.2, 0.25];
/// Share of the envelope the smooth baseline is fitted to: the lowest quarter.
const BASELINE_QUANTILE: f64 = 0.25;
/// Fewest points outside held-down bins the noise law is fitted to (fewer: all points).
const MIN_NOISE_POINTS: usize = 50;
/// The local envelope may rise this far above the smooth baseline before it is taken for
/// signal (a scan whose every bucket holds a line has no visible floor there), dB.
const BASELINE_SLACK_DB: f64 = 3.0;
/// Steepest floor the baseline may take, dB per decade: a receiver floor is nearly flat, and an
/// antenna factor adds at most about 20 dB per decade across 30 MHz-1 GHz (common practice).
const MAX_FLOOR_SLOPE_DB_PER_DECADE: f64 = 20.0;
/// The fitted `M` is searched over [1, M_MAX]; a noise-free trace ends at the top.
const M_MAX: f64 = 1e5;
/// The threshold stays at least this far over the floor for traces without visible noise
/// (quantised or smoothed data); 1 dB is below any emission worth reporting.
const MIN_THRESHOLD_DB: f64 = 1.0;

/// Quantile `q` of the level in dB of the maximum of `m` Rayleigh samples, relative to
/// `S = 20·log10(σ)`.
///
/// # Formula
/// ```text
/// D_q − S = 10·log10(−2·ln(1 − q^(1/m)))
/// ```
/// # Source
/// Rayleigh CDF F(x) = 1 − exp(−x²/(2σ²)); the maximum of m independent samples has CDF F^m
/// (order statistics); solve F(x)^m = q for x.
pub fn max_rayleigh_quantile_db(q: f64, m: f64) -> f64 {
    // 1 − q^(1/m) through expm1 keeps precision for q close to 1 and large m.
    let inner = -(q.ln() / m).exp_m1();
    10.0 * (-2.0 * inner.ln()).log10()
}

/// Estimates the floor of `scan`.
pub fn estimate_floor(scan: &Scan, params: &FloorParams) -> Floor {
    // the trace's own memory when it is contiguous (it always is when read from a file)
    fn view(a: &ndarray::Array1<f64>) -> Cow<'_, [f64]> {
        a.as_slice()
            .map_or_else(|| Cow::Owned(a.to_vec()), Cow::Borrowed)
    }
    let (levels, freqs) = (view(&scan.level_dbuv), view(&scan.freq_hz));
    let (envelope, signal) = lower_envelope(&freqs, &levels, scan.meta.rbw_hz, params);
    // the noise law is fitted where the envelope shows a floor; where the baseline held it down
    // (signal fills every bucket there) the residuals are signal, not noise: they take part
    // only when too few points remain elsewhere
    let noise_like = signal.iter().filter(|&&s| !s).count();
    let use_all = noise_like < MIN_NOISE_POINTS.min(levels.len());
    let residuals: Vec<f64> = levels
        .iter()
        .zip(&envelope)
        .zip(&signal)
        .filter(|&(_, &s)| use_all || !s)
        .map(|((l, e), _)| l - e)
        .collect();
    let (shift, m) = fit_noise(&residuals);
    let n = levels.len().max(1) as f64;
    let p = (params.false_alarms / n).clamp(1e-12, 0.5);
    let median = max_rayleigh_quantile_db(0.5, m);
    let top = max_rayleigh_quantile_db(1.0 - p, m);
    let spread_db = max_rayleigh_quantile_db(0.75, m) - max_rayleigh_quantile_db(0.25, m);
    let over = (top - median).max(MIN_THRESHOLD_DB);
    let floor_dbuv: Vec<f64> = envelope.iter().map(|e| e + shift + median).collect();
    let threshold_dbuv = floor_dbuv.iter().map(|f| f + over).collect();
    Floor {
        floor_dbuv,
        threshold_dbuv,
        samples_per_point: m,
        spread_db,
        false_alarm_per_point: p,
    }
}

/// A robust lower envelope: the 25 % quantile of each 0.005-decade bin, then the 30 %
/// quantile of the bins within the window, held down to the smooth baseline plus
/// [`BASELINE_SLACK_DB`], interpolated back to the points linearly in log f. Also returns, per
/// point, whether its bin was held down (signal fills the buckets there).
fn lower_envelope(
    freqs: &[f64],
    levels: &[f64],
    rbw_hz: Option<f64>,
    params: &FloorParams,
) -> (Vec<f64>, Vec<bool>) {
    let Some(&f0) = freqs.first() else {
        return (Vec::new(), Vec::new());
    };
    let lf0 = f0.log10();
    let logf: Vec<f64> = freqs.iter().map(|f| f.log10()).collect();
    let bin_of = |lf: f64| ((lf - lf0) / BIN_DECADES) as usize;
    let nbins = logf.last().map_or(1, |&lf| bin_of(lf) + 1);
    // the levels grouped by bin in one flat buffer (a counting sort: one count, one scatter)
    let bin: Vec<usize> = logf.iter().map(|&lf| bin_of(lf).min(nbins - 1)).collect();
    let mut starts = vec![0usize; nbins + 1];
    for &b in &bin {
        starts[b + 1] += 1;
    }
    for k in 0..nbins {
        starts[k + 1] += starts[k];
    }
    let mut grouped = vec![0.0; levels.len()];
    let mut next = starts.clone();
    for (&b, &l) in bin.iter().zip(levels) {
        grouped[next[b]] = l;
        next[b] += 1;
    }
    let mut members: Vec<&mut [f64]> = Vec::with_capacity(nbins);
    let mut rest = &mut grouped[..];
    for k in 0..nbins {
        let (this, tail) = rest.split_at_mut(starts[k + 1] - starts[k]);
        members.push(this);
        rest = tail;
    }
    // (bin centre in log10 f, bin value)
    let bins: Vec<(f64, f64)> = members
        .iter_mut()
        .enumerate()
        .filter(|(_, m)| !m.is_empty())
        .map(|(i, m)| {
            (
                lf0 + (i as f64 + 0.5) * BIN_DECADES,
                quantile_in_place(m, BIN_QUANTILE),
            )
        })
        .collect();
    let smoothed: Vec<(f64, f64)> = bins
        .iter()
        .map(|&(lf, _)| {
            let f = 10f64.powf(lf);
            let by_rbw = rbw_hz.map_or(0.0, |r| (1.0 + params.window_rbw * r / f).log10());
            let half = params.window_decades.max(by_rbw);
            let lo = bins.partition_point(|b| b.0 < lf - half);
            let hi = bins.partition_point(|b| b.0 <= lf + half);
            let mut vals: Vec<f64> = bins[lo..hi].iter().map(|b| b.1).collect();
            (lf, quantile_in_place(&mut vals, WINDOW_QUANTILE))
        })
        .collect();
    let baseline = smooth_baseline(&smoothed);
    let bounded: Vec<(f64, f64)> = smoothed
        .iter()
        .map(|&(x, y)| (x, y.min(eval_quadratic(baseline, x) + BASELINE_SLACK_DB)))
        .collect();
    // held down, per bin index (empty bins are not held)
    let mut held = vec![false; nbins];
    for (&(x, y), &(_, b)) in smoothed.iter().zip(&bounded) {
        if b < y {
            let k = (((x - lf0) / BIN_DECADES) as usize).min(nbins - 1);
            held[k] = true;
        }
    }
    let mut at = InterpCursor::default();
    let envelope = logf.iter().map(|&lf| at.value(&bounded, lf)).collect();
    (envelope, bin.iter().map(|&b| held[b]).collect())
}

/// A straight line in log10(f) under the local envelope: least squares, refitted on the quarter
/// of the points lying lowest against the previous line, until that quarter settles. A
/// receiver's floor tilts smoothly across a span, so where the local envelope rises far above
/// this line it is made of signal (a comb filling every bucket of a coarse grid, a broad hump),
/// and the floor there is the line.
///
/// # Source
/// A trimmed least-squares line, kept to the lowest quarter of the residuals (the idea of a
/// least-trimmed-squares fit, with the trim set for a lower envelope); common practice for
/// baselines under peaks.
fn smooth_baseline(points: &[(f64, f64)]) -> [f64; 3] {
    let Some(&(x0, _)) = points.first() else {
        return [0.0; 3];
    };
    let mut w = vec![1.0; points.len()];
    let mut coef = [0.0; 3];
    for _ in 0..20 {
        let Some(c) = weighted_line(points, &w, x0) else {
            break;
        };
        coef = c;
        let mut r: Vec<f64> = points
            .iter()
            .map(|&(x, y)| y - eval_shifted(coef, x - x0))
            .collect();
        let cut = quantile_in_place(&mut r.clone(), BASELINE_QUANTILE);
        let mut changed = false;
        for (wi, &(x, y)) in w.iter_mut().zip(points) {
            let want = if y - eval_shifted(coef, x - x0) <= cut {
                1.0
            } else {
                0.0
            };
            changed |= *wi != want;
            *wi = want;
        }
        r.clear();
        if !changed {
            break;
        }
    }
    // back from powers of (x − x0) to powers of x
    [coef[0] - coef[1] * x0, coef[1], 0.0]
}

/// Weighted least-squares line y ≈ a + b·(x − x0), as `[a, b, 0]`; a weighted mean when the
/// frequencies are too few for a slope.
fn weighted_line(points: &[(f64, f64)], w: &[f64], x0: f64) -> Option<[f64; 3]> {
    let (mut sw, mut sx, mut sy) = (0.0, 0.0, 0.0);
    for (&(x, y), &wi) in points.iter().zip(w) {
        sw += wi;
        sx += wi * (x - x0);
        sy += wi * y;
    }
    if sw <= 0.0 {
        return None;
    }
    let (mx, my) = (sx / sw, sy / sw);
    let (mut sxx, mut sxy) = (0.0, 0.0);
    for (&(x, y), &wi) in points.iter().zip(w) {
        sxx += wi * (x - x0 - mx).powi(2);
        sxy += wi * (x - x0 - mx) * (y - my);
    }
    let b = if sxx > 1e-300 { sxy / sxx } else { 0.0 };
    let b = b.clamp(
        -MAX_FLOOR_SLOPE_DB_PER_DECADE,
        MAX_FLOOR_SLOPE_DB_PER_DECADE,
    );
    Some([my - b * mx, b, 0.0])
}

fn eval_shifted(c: [f64; 3], d: f64) -> f64 {
    c[0] + c[1] * d + c[2] * d * d
}

fn eval_quadratic(c: [f64; 3], x: f64) -> f64 {
    c[0] + c[1] * x + c[2] * x * x
}

/// Linear interpolation in a table sorted by abscissa (constant beyond its ends) at a run of
/// abscissas: the vertex is found by a pointer that moves forward while they ascend (a binary
/// search when one steps back).
struct InterpCursor {
    next: usize,
    last: f64,
}

impl Default for InterpCursor {
    fn default() -> Self {
        InterpCursor {
            next: 0,
            last: f64::NEG_INFINITY,
        }
    }
}

impl InterpCursor {
    fn value(&mut self, table: &[(f64, f64)], x: f64) -> f64 {
        if x < self.last {
            self.next = table.partition_point(|p| p.0 < x);
        } else {
            while table.get(self.next).is_some_and(|p| p.0 < x) {
                self.next += 1;
            }
        }
        self.last = x;
        interp_at(table, self.next, x)
    }
}

/// The value at `x` given `i`, the first vertex at or above it.
fn interp_at(table: &[(f64, f64)], i: usize, x: f64) -> f64 {
    match (i.checked_sub(1).and_then(|j| table.get(j)), table.get(i)) {
        (Some(a), Some(b)) if b.0 > a.0 => a.1 + (b.1 - a.1) * (x - a.0) / (b.0 - a.0),
        (Some(a), _) => a.1,
        (None, Some(b)) => b.1,
        (None, None) => 0.0,
    }
}

/// The `q` quantile (nearest rank, linear between ranks) of `v`; reorders `v`.
pub(crate) fn quantile_in_place(v: &mut [f64], q: f64) -> f64 {
    if v.is_empty() {
        return f64::NAN;
    }
    let pos = q.clamp(0.0, 1.0) * (v.len() - 1) as f64;
    let lo = pos.floor() as usize;
    let n = v.len();
    let (_, &mut a, rest) = v.select_nth_unstable_by(lo, f64::total_cmp);
    if lo + 1 >= n || pos == lo as f64 {
        return a;
    }
    let b = rest.iter().copied().fold(f64::INFINITY, f64::min);
    a + (b - a) * (pos - lo as f64)
}

/// The quantiles `qs` of `v` as [`quantile_in_place`] gives them, with the same values, found
/// from the largest down, each in the smallest values the one above left: a set of low
/// quantiles of a long trace costs about one pass over it. Reorders `v`.
pub(crate) fn lower_quantiles(v: &mut [f64], qs: &[f64]) -> Vec<f64> {
    let n = v.len();
    let mut order: Vec<usize> = (0..qs.len()).collect();
    order.sort_by(|&a, &b| qs[b].total_cmp(&qs[a]));
    let mut out = vec![f64::NAN; qs.len()];
    if n == 0 {
        return out;
    }
    // `v[..head]` holds the `head` smallest values
    let mut head = n;
    for k in order {
        let pos = qs[k].clamp(0.0, 1.0) * (n - 1) as f64;
        let lo = pos.floor() as usize;
        let part = &mut v[..head];
        part.select_nth_unstable_by(lo, f64::total_cmp);
        // the next rank up (the least of the rest) moves next to it: the head then keeps the
        // ranks 0 ..= lo + 1
        if let Some(j) = (lo + 1..head).min_by(|&i, &j| part[i].total_cmp(&part[j])) {
            part.swap(lo + 1, j);
        }
        let a = part[lo];
        out[k] = if lo + 1 >= head || pos == lo as f64 {
            a
        } else {
            a + (part[lo + 1] - a) * (pos - lo as f64)
        };
        head = head.min(lo + 2);
    }
    out
}

/// Fits `S` (shift) and `M` of the max-of-M Rayleigh law to the lower residual quantiles:
/// least squares over [`FIT_QUANTILES`], `M` on a log grid, `S` in closed form (mean offset).
fn fit_noise(residuals: &[f64]) -> (f64, f64) {
    let mut r = residuals.to_vec();
    let observed = lower_quantiles(&mut r, &FIT_QUANTILES);
    let mut best = (f64::INFINITY, 0.0, M_MAX);
    let steps = 400;
    for k in 0..=steps {
        let m = M_MAX.powf(k as f64 / steps as f64);
        let model: Vec<f64> = FIT_QUANTILES
            .iter()
            .map(|&q| max_rayleigh_quantile_db(q, m))
            .collect();
        let shift =
            observed.iter().zip(&model).map(|(o, d)| o - d).sum::<f64>() / model.len() as f64;
        let err: f64 = observed
            .iter()
            .zip(&model)
            .map(|(o, d)| (o - d - shift).powi(2))
            .sum();
        if err < best.0 {
            best = (err, shift, m);
        }
    }
    (best.1, best.2)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::scan::ScanMeta;
    use rand::{Rng, SeedableRng};
    use rand_chacha::ChaCha8Rng;

    #[test]
    fn lower_quantiles_match_one_at_a_time() {
        let mut rng = ChaCha8Rng::seed_from_u64(5);
        for n in [1usize, 2, 3, 7, 40, 1001] {
            let v: Vec<f64> = (0..n)
                .map(|_| rng.random::<f64>().round() * 3.0 + rng.random::<f64>())
                .collect();
            let qs = [0.03, 0.25, 0.1, 0.5, 0.0, 1.0, 0.2, 0.2];
            let mut w = v.clone();
            let got = lower_quantiles(&mut w, &qs);
            for (q, g) in qs.iter().zip(&got) {
                assert_eq!(*g, quantile_in_place(&mut v.clone(), *q), "n {n}, q {q}");
            }
        }
    }

    #[test]
    fn the_interpolation_cursor_agrees_with_a_search() {
        let table = [(0.0, 1.0), (1.0, 3.0), (1.0, 5.0), (2.5, 2.0), (4.0, 2.0)];
        let mut at = InterpCursor::default();
        // ascending, then a step back, then beyond both ends
        let xs: Vec<f64> = (0..=50)
            .map(|k| -0.5 + 0.1 * f64::from(k))
            .chain([0.7, 0.2, 9.0, -3.0])
            .collect();
        for x in xs {
            let direct = interp_at(&table, table.partition_point(|p| p.0 < x), x);
            assert_eq!(at.value(&table, x), direct, "at {x}");
        }
        // linear between vertices, constant beyond the ends (worked by hand)
        assert_eq!(interp_at(&table, 3, 1.75), 3.5);
        assert_eq!(interp_at(&table, 0, -1.0), 1.0);
        assert_eq!(interp_at(&table, 5, 7.0), 2.0);
    }

    /// Displayed noise: the maximum of m Rayleigh samples of parameter σ, in dBµV.
    fn noise_trace(n: usize, m: usize, sigma_dbuv: f64, seed: u64) -> Vec<f64> {
        let mut rng = ChaCha8Rng::seed_from_u64(seed);
        let sigma = 10f64.powf(sigma_dbuv / 20.0);
        (0..n)
            .map(|_| {
                let best = (0..m)
                    .map(|_| {
                        let u: f64 = rng.random::<f64>().max(1e-300);
                        sigma * (-2.0 * u.ln()).sqrt() // inverse CDF of the Rayleigh law
                    })
                    .fold(0.0, f64::max);
                20.0 * best.log10()
            })
            .collect()
    }

    fn scan(levels: Vec<f64>) -> Scan {
        let n = levels.len();
        let f: Vec<f64> = (0..n)
            .map(|i| 150e3 + i as f64 * (30e6 - 150e3) / (n - 1) as f64)
            .collect();
        Scan::new(
            f,
            levels,
            ScanMeta {
                rbw_hz: Some(9e3),
                ..ScanMeta::default()
            },
        )
        .unwrap()
    }

    #[test]
    fn rayleigh_quantiles_match_the_closed_form() {
        // source: Rayleigh median σ·√(2·ln 2) (textbook): 10·log10(2·ln 2) = 1.419 dB over S
        assert!(
            (max_rayleigh_quantile_db(0.5, 1.0) - 10.0 * (2.0 * 2f64.ln()).log10()).abs() < 1e-12
        );
        // the maximum of m samples: median x with (1 − e^(−x²/2))^m = 0.5
        let m = 7.0;
        let x2 = -2.0 * (1.0 - 0.5f64.powf(1.0 / m)).ln();
        assert!((max_rayleigh_quantile_db(0.5, m) - 10.0 * x2.log10()).abs() < 1e-12);
        // far tail stays finite and ascending
        assert!(max_rayleigh_quantile_db(1.0 - 1e-9, 1e4) > max_rayleigh_quantile_db(0.999, 1e4));
    }

    #[test]
    fn fits_the_number_of_samples_and_the_level() {
        for (m, sigma) in [(1usize, 0.0), (4, 10.0), (20, -5.0)] {
            let f = estimate_floor(
                &scan(noise_trace(20_000, m, sigma, 7)),
                &FloorParams::default(),
            );
            assert!(
                (f.samples_per_point / m as f64 - 1.0).abs() < 0.35,
                "m {m}: fitted {}",
                f.samples_per_point
            );
            // the level: unbiased over the trace, and 99 % of the points within the local
            // window's sampling error (measured: 1.3 dB for single-sample noise at 0.015
            // decade, 1.1 dB at 0.1 decade; a narrower window follows a continuum's dips)
            let want = sigma + max_rayleigh_quantile_db(0.5, m as f64);
            let mut all = f.floor_dbuv.clone();
            let median = quantile_in_place(&mut all, 0.5);
            assert!(
                (median - want).abs() < 0.3,
                "m {m}: floor {median}, want {want}"
            );
            let mut off: Vec<f64> = f.floor_dbuv.iter().map(|x| (x - want).abs()).collect();
            let q99 = quantile_in_place(&mut off, 0.99);
            assert!(q99 < 1.5, "m {m}: 1 % of the points over {q99:.2} dB off");
        }
    }

    #[test]
    fn false_alarms_follow_the_fitted_law() {
        // 200k noise points with threshold at 0.05 expected false alarms per trace: over 20
        // traces the count is Poisson with mean 1; more than 6 has chance < 1e-3.
        let mut over = 0;
        for seed in 0..20 {
            let t = noise_trace(10_000, 3, 0.0, 100 + seed);
            let f = estimate_floor(&scan(t.clone()), &FloorParams::default());
            over += t
                .iter()
                .zip(&f.threshold_dbuv)
                .filter(|(l, th)| l > th)
                .count();
        }
        assert!(over <= 6, "{over} noise points over the threshold");
    }

    #[test]
    fn lines_do_not_lift_the_floor() {
        let mut t = noise_trace(6_000, 2, 0.0, 3);
        for i in (0..6_000).step_by(20) {
            for k in 0..4 {
                if i + k < t.len() {
                    t[i + k] = 40.0; // lines covering 20 % of the points
                }
            }
        }
        let f = estimate_floor(&scan(t), &FloorParams::default());
        let want = max_rayleigh_quantile_db(0.5, 2.0);
        assert!(
            (f.floor_dbuv[3_000] - want).abs() < 1.0,
            "{} vs {want}",
            f.floor_dbuv[3_000]
        );
    }

    #[test]
    fn a_noise_free_trace_keeps_a_small_threshold() {
        let f = estimate_floor(&scan(vec![10.0; 500]), &FloorParams::default());
        assert!((f.floor_dbuv[0] - 10.0).abs() < 0.5, "{}", f.floor_dbuv[0]);
        let over = f.threshold_dbuv[0] - f.floor_dbuv[0];
        assert!((MIN_THRESHOLD_DB..3.0).contains(&over), "{over}");
    }

    #[test]
    fn a_comb_in_every_bucket_does_not_become_the_floor() {
        // log-spaced 150 kHz-30 MHz; the lowest 40 % of the span in log f: a line in every
        // point at 50 dB (a dense comb on a coarse grid); the rest: noise
        let n = 3_000;
        let mut t = noise_trace(n, 2, 0.0, 9);
        for v in t.iter_mut().take(n * 2 / 5) {
            *v = 50.0 + (*v - 2.0) * 0.1;
        }
        let f: Vec<f64> = (0..n)
            .map(|i| 150e3 * 200f64.powf(i as f64 / (n - 1) as f64))
            .collect();
        let s = Scan::new(
            f,
            t,
            ScanMeta {
                rbw_hz: Some(9e3),
                ..ScanMeta::default()
            },
        )
        .unwrap();
        let fl = estimate_floor(&s, &FloorParams::default());
        let want = max_rayleigh_quantile_db(0.5, 2.0);
        assert!(
            fl.floor_dbuv[600] < want + 10.0,
            "floor under the comb {}",
            fl.floor_dbuv[600]
        );
        // with 40 % of the points taken by the comb the noise law is fitted on fewer points
        assert!(
            (fl.floor_dbuv[2_800] - want).abs() < 2.5,
            "{}",
            fl.floor_dbuv[2_800]
        );
    }

    #[test]
    fn a_continuum_over_most_points_does_not_lift_the_noise_floor() {
        // linear 150 kHz-30 MHz, 6000 points: above 3 MHz (90 % of the points, a third of
        // the bins in log f) the overlapping plateaus of a dithered converter, noise-like at
        // 40 dB over the noise; below, noise alone. The noise law must come from the noise:
        // fitted on all residuals, the continuum's took the lower quantiles and lifted the
        // floor by about 20 dB
        let mut t = noise_trace(6_000, 2, 0.0, 21);
        let s = scan(t.clone());
        let continuum = noise_trace(6_000, 1, 40.0, 22);
        for (i, v) in t.iter_mut().enumerate() {
            if s.freq_hz[i] > 3e6 {
                *v = continuum[i];
            }
        }
        let f = estimate_floor(&scan(t), &FloorParams::default());
        let want = max_rayleigh_quantile_db(0.5, 2.0);
        let i = s.freq_hz.iter().position(|&x| x > 1e6).unwrap();
        assert!(
            (f.floor_dbuv[i] - want).abs() < 1.5,
            "floor at 1 MHz {} vs {want}",
            f.floor_dbuv[i]
        );
        assert!(
            (f.samples_per_point / 2.0 - 1.0).abs() < 0.35,
            "{}",
            f.samples_per_point
        );
    }

    #[test]
    fn asymmetric_baseline_fits_a_line_under_the_points() {
        // source: derived, points on y = 1 + 2x with a few far above: the fit stays on the line
        // because it is refitted to the lowest quarter
        let mut p: Vec<(f64, f64)> = (0..50)
            .map(|i| {
                let x = 5.0 + f64::from(i) * 0.04;
                (x, 1.0 + 2.0 * x)
            })
            .collect();
        for k in [3, 17, 30] {
            p[k].1 += 40.0;
        }
        let c = smooth_baseline(&p);
        for &(x, y) in p.iter().filter(|q| q.1 < 200.0) {
            let _ = y;
            let truth = 1.0 + 2.0 * x;
            assert!(
                (eval_quadratic(c, x) - truth).abs() < 0.5,
                "{x}: {} vs {truth}",
                eval_quadratic(c, x)
            );
        }
    }

    #[test]
    fn quantile_helper() {
        let mut v = vec![5.0, 1.0, 3.0, 2.0, 4.0];
        assert_eq!(quantile_in_place(&mut v, 0.5), 3.0);
        assert_eq!(quantile_in_place(&mut v, 0.25), 2.0);
        assert_eq!(quantile_in_place(&mut v, 0.125), 1.5);
    }
}
