//! Peaks: local maxima with their topographic prominence, −6 dB width in Hz and significance
//! over the floor's detection threshold; one peak per emission.
//!
//! Prominence follows the definition common signal libraries use: from a peak, extend an
//! interval to each side up to the nearest sample strictly higher than the peak (or the end of
//! the trace); the lowest sample of each side is a base; the prominence is the peak's height
//! over the higher of the two bases. Here both sides are found for every sample at once with a
//! monotone stack, so the whole trace costs O(N).

use crate::floor::Floor;
use crate::scan::Scan;
use serde::Serialize;

/// Settings of the peak stage.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct PeakParams {
    /// A peak's prominence must reach this many noise interquartile ranges.
    pub prominence_spreads: f64,
    /// And at least this many dB: the usual −3 dB criterion for two resolved lines.
    pub min_prominence_db: f64,
    /// Level drop that defines a peak's width (6 dB, as CISPR states bandwidths).
    pub width_drop_db: f64,
}

impl Default for PeakParams {
    fn default() -> Self {
        PeakParams {
            prominence_spreads: 1.5,
            min_prominence_db: 3.0,
            width_drop_db: 6.0,
        }
    }
}

/// One emission in a trace.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct FoundPeak {
    /// Index of the display point at the top.
    pub index: usize,
    /// Frequency of the top, refined between display points (Hz).
    pub freq_hz: f64,
    /// Level of the top display point (dBµV).
    pub level_dbuv: f64,
    pub prominence_db: f64,
    pub left_base: usize,
    pub right_base: usize,
    /// Frequencies where the level has fallen by `width_drop_db` on each side (Hz).
    pub left_hz: f64,
    pub right_hz: f64,
    /// `right_hz − left_hz`.
    pub width_hz: f64,
    /// Level over the floor's detection threshold (dB, positive).
    pub significance_db: f64,
    /// Level over the median noise floor (dB).
    pub over_floor_db: f64,
}

/// Local maxima of `x`: a sample higher than its left neighbour and not lower than its right
/// one, a flat top counted once at its middle (rounded down); the first and last samples are
/// never peaks.
pub fn local_maxima(x: &[f64]) -> Vec<usize> {
    let mut out = Vec::new();
    let n = x.len();
    let mut i = 1;
    while i + 1 < n {
        if x[i - 1] < x[i] {
            let mut ahead = i + 1;
            while ahead + 1 < n && x[ahead] == x[i] {
                ahead += 1;
            }
            if x[ahead] < x[i] {
                out.push((i + ahead - 1) / 2);
                i = ahead;
            }
        }
        i += 1;
    }
    out
}

/// For every sample j: the minimum of `x` over the samples between j and the nearest sample
/// to its left that is strictly higher than `x[j]` (j included), and where it lies (the one
/// nearest j on ties).
fn left_minima(x: &[f64]) -> Vec<(f64, usize)> {
    let mut out = Vec::with_capacity(x.len());
    // (index, min over (previous entry, index], argmin)
    let mut stack: Vec<(usize, f64, usize)> = Vec::new();
    for (j, &xj) in x.iter().enumerate() {
        let (mut m, mut am) = (xj, j);
        while let Some(&(t, tm, tam)) = stack.last() {
            if x[t] > xj {
                break;
            }
            stack.pop();
            if tm < m {
                (m, am) = (tm, tam);
            }
        }
        out.push((m, am));
        stack.push((j, m, am));
    }
    out
}

/// Prominence, left base and right base of each of `peaks` in `x`.
pub fn prominences(x: &[f64], peaks: &[usize]) -> Vec<(f64, usize, usize)> {
    let left = left_minima(x);
    let reversed: Vec<f64> = x.iter().rev().copied().collect();
    let right = left_minima(&reversed);
    let n = x.len();
    peaks
        .iter()
        .map(|&p| {
            let (lm, lb) = left[p];
            let (rm, rb_rev) = right[n - 1 - p];
            (x[p] - lm.max(rm), lb, n - 1 - rb_rev)
        })
        .collect()
}

/// Finds the emissions of `scan` over `floor`'s threshold.
pub fn find_peaks(scan: &Scan, floor: &Floor, params: &PeakParams) -> Vec<FoundPeak> {
    let x = scan.level_dbuv.to_vec();
    let f = scan.freq_hz.to_vec();
    let maxima: Vec<usize> = local_maxima(&x)
        .into_iter()
        .filter(|&i| floor.threshold_dbuv.get(i).is_some_and(|t| x[i] > *t))
        .collect();
    let min_prom = (params.prominence_spreads * floor.spread_db).max(params.min_prominence_db);
    let mut found: Vec<FoundPeak> = maxima
        .iter()
        .zip(prominences(&x, &maxima))
        .filter(|(_, (prom, _, _))| *prom >= min_prom)
        .map(|(&i, (prom, lb, rb))| {
            let (left_hz, right_hz) = crossings(&x, &f, i, lb, rb, x[i] - params.width_drop_db);
            FoundPeak {
                index: i,
                freq_hz: refine(&x, &f, i),
                level_dbuv: x[i],
                prominence_db: prom,
                left_base: lb,
                right_base: rb,
                left_hz,
                right_hz,
                width_hz: right_hz - left_hz,
                significance_db: x[i] - floor.threshold_dbuv[i],
                over_floor_db: x[i] - floor.floor_dbuv[i],
            }
        })
        .collect();
    found = one_per_emission(found);
    found.sort_by_key(|p| p.index);
    found
}

/// Keeps the highest peak of each emission: a lower peak inside a higher one's −6 dB extent
/// is a ripple on the same emission.
fn one_per_emission(mut peaks: Vec<FoundPeak>) -> Vec<FoundPeak> {
    peaks.sort_by(|a, b| b.level_dbuv.total_cmp(&a.level_dbuv));
    let mut kept: Vec<FoundPeak> = Vec::with_capacity(peaks.len());
    for p in peaks {
        if !kept
            .iter()
            .any(|k| p.freq_hz > k.left_hz && p.freq_hz < k.right_hz)
        {
            kept.push(p);
        }
    }
    kept
}

/// Where the trace falls to `level` on each side of `i`, interpolated linearly between display
/// points and bounded by the bases.
fn crossings(x: &[f64], f: &[f64], i: usize, lb: usize, rb: usize, level: f64) -> (f64, f64) {
    let mut l = i;
    while l > lb && x[l] > level {
        l -= 1;
    }
    let left = if x[l] <= level && l < i {
        lerp_at(f[l], x[l], f[l + 1], x[l + 1], level)
    } else {
        f[l]
    };
    let mut r = i;
    while r < rb && x[r] > level {
        r += 1;
    }
    let right = if x[r] <= level && r > i {
        lerp_at(f[r - 1], x[r - 1], f[r], x[r], level)
    } else {
        f[r]
    };
    (left, right)
}

fn lerp_at(f0: f64, x0: f64, f1: f64, x1: f64, level: f64) -> f64 {
    if x1 == x0 {
        f0
    } else {
        f0 + (f1 - f0) * (level - x0) / (x1 - x0)
    }
}

/// The top of a peak between display points: the vertex of the parabola through the top point
/// and its neighbours, in dB against frequency.
///
/// # Formula
/// ```text
/// f* = f1 − ½·[(f1−f0)²·(y1−y2) − (f1−f2)²·(y1−y0)] / [(f1−f0)·(y1−y2) − (f1−f2)·(y1−y0)]
/// ```
/// # Source
/// Three-point parabolic interpolation (vertex of the interpolating quadratic; numerical
/// analysis texts). A Gaussian RBW filter is exactly a parabola in dB,
/// 20·log10|H(Δf)| = −8.686·a·Δf², so a line's frequency comes out between the points.
fn refine(x: &[f64], f: &[f64], i: usize) -> f64 {
    if i == 0 || i + 1 >= x.len() {
        return f[i];
    }
    let (f0, f1, f2) = (f[i - 1], f[i], f[i + 1]);
    let (y0, y1, y2) = (x[i - 1], x[i], x[i + 1]);
    let den = (f1 - f0) * (y1 - y2) - (f1 - f2) * (y1 - y0);
    if den.abs() < 1e-300 {
        return f1;
    }
    let num = (f1 - f0).powi(2) * (y1 - y2) - (f1 - f2).powi(2) * (y1 - y0);
    (f1 - 0.5 * num / den).clamp(f0, f2)
}

#[cfg(test)]
mod tests {
    use super::*;

    /// The definition written out: walk each side to the nearest strictly higher sample.
    fn brute_prominence(x: &[f64], p: usize) -> (f64, usize, usize) {
        let (mut lm, mut lb) = (x[p], p);
        let mut i = p;
        while i > 0 && x[i - 1] <= x[p] {
            i -= 1;
            if x[i] < lm {
                (lm, lb) = (x[i], i);
            }
        }
        let (mut rm, mut rb) = (x[p], p);
        let mut i = p;
        while i + 1 < x.len() && x[i + 1] <= x[p] {
            i += 1;
            if x[i] < rm {
                (rm, rb) = (x[i], i);
            }
        }
        (x[p] - lm.max(rm), lb, rb)
    }

    #[test]
    fn stack_prominence_matches_the_definition() {
        use rand::{Rng, SeedableRng};
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(11);
        for n in [3, 10, 100, 2000] {
            // quantised values make ties and plateaus common
            let x: Vec<f64> = (0..n)
                .map(|_| (rng.random::<f64>() * 12.0).round())
                .collect();
            let peaks = local_maxima(&x);
            let fast = prominences(&x, &peaks);
            for (k, &p) in peaks.iter().enumerate() {
                assert_eq!(fast[k], brute_prominence(&x, p), "n {n}, peak {p}");
            }
        }
    }

    #[test]
    fn local_maxima_with_plateaus_and_edges() {
        assert_eq!(local_maxima(&[0.0, 1.0, 0.0]), vec![1]);
        assert_eq!(local_maxima(&[0.0, 1.0, 1.0, 1.0, 0.0]), vec![2]);
        assert_eq!(local_maxima(&[0.0, 1.0, 1.0, 0.0]), vec![1]);
        assert_eq!(local_maxima(&[2.0, 1.0, 2.0]), Vec::<usize>::new());
        assert_eq!(local_maxima(&[0.0, 1.0, 1.0]), Vec::<usize>::new());
    }

    #[test]
    fn parabola_finds_a_gaussian_line_between_points() {
        // source: derived, a Gaussian filter is a parabola in dB: y = −8.686·a·(f − fc)²
        let a = 4.0 * 2f64.ln() / 9e3f64.powi(2);
        let fc = 1_001_234.0;
        let f: Vec<f64> = (0..11).map(|k| 1e6 - 10e3 + k as f64 * 2e3).collect();
        let y: Vec<f64> = f
            .iter()
            .map(|&v| 60.0 - 8.685_889_638 * a * (v - fc).powi(2))
            .collect();
        let i = local_maxima(&y)[0];
        assert!((refine(&y, &f, i) - fc).abs() < 1e-6);
        // the −6 dB width of a Gaussian filter is its B6 (source: definition of B6)
        let (l, r) = crossings(&y, &f, i, 0, 10, y[i] - 6.0);
        assert!((r - l - 9e3).abs() < 150.0, "{}", r - l);
    }
}
