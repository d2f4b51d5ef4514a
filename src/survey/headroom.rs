//! Headroom: where, and when, the ambient leaves room to judge a DUT.
//!
//! Per display point, the median and the 95th percentile of the ambient level over every sweep;
//! a point is usable when the 95th percentile is at least the headroom (6 dB, common practice)
//! under the limit. Per band (the limit's own segments and the whole span) the usable share of
//! the points; the runs of unusable points; per sweep its own usable share, whose best is the
//! quietest time.

use super::stats::quantile;
use crate::limits::Limit;
use crate::scan::Scan;
use serde::Serialize;

/// The ambient level statistics per point of the reference grid.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Profile {
    pub freq_hz: Vec<f64>,
    pub median_dbuv: Vec<f64>,
    pub p95_dbuv: Vec<f64>,
    /// The limit at each point (`None` outside its range).
    pub limit_dbuv: Vec<Option<f64>>,
}

/// One band of the headroom table.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct HeadroomBand {
    pub start_hz: f64,
    pub stop_hz: f64,
    /// Share of the band's points whose ambient 95th percentile is at least the headroom under
    /// the limit.
    pub usable_fraction: f64,
    pub points: usize,
    /// `usable_fraction` reaches the survey's minimum share.
    pub judged: bool,
    /// Smallest margin of the 95th percentile to the limit in the band, dB.
    pub worst_margin_db: f64,
    pub worst_freq_hz: f64,
    /// `segment` (one of the limit's) or `span` (the whole scan within the limit's range).
    pub band: &'static str,
    /// Ids of the emitters in the band's blocked ranges.
    pub blocking: Vec<usize>,
}

/// A run of points where the DUT cannot be judged.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct BlockedRange {
    pub start_hz: f64,
    pub stop_hz: f64,
    pub points: usize,
    /// Smallest margin of the 95th percentile to the limit, dB.
    pub worst_margin_db: f64,
    pub worst_freq_hz: f64,
    /// Ids of the emitters that lie in it.
    pub emitters: Vec<usize>,
}

/// Levels of `scan` on the reference grid `freq_hz`: the same points when the grids agree;
/// else, per reference point, the highest level of the scan within the point's bucket (halfway
/// to its neighbours, so no peak is lost), or the level interpolated linearly in f when the
/// bucket holds no point; NaN outside the scan's span.
pub fn resample(scan: &Scan, freq_hz: &[f64]) -> Vec<f64> {
    let f = scan
        .freq_hz
        .as_slice()
        .map_or_else(|| scan.freq_hz.to_vec(), <[f64]>::to_vec);
    let l = scan.level_dbuv.to_vec();
    let same = f.len() == freq_hz.len()
        && f.iter()
            .zip(freq_hz)
            .all(|(a, b)| (a - b).abs() <= 1e-9 * b.abs().max(1.0));
    if same {
        return l;
    }
    let n = freq_hz.len();
    (0..n)
        .map(|i| {
            let x = freq_hz[i];
            let (Some(&first), Some(&last)) = (f.first(), f.last()) else {
                return f64::NAN;
            };
            if x < first || x > last {
                return f64::NAN;
            }
            let lo = if i > 0 { 0.5 * (freq_hz[i - 1] + x) } else { x };
            let hi = if i + 1 < n {
                0.5 * (x + freq_hz[i + 1])
            } else {
                x
            };
            let a = f.partition_point(|&v| v < lo);
            let b = f.partition_point(|&v| v <= hi);
            if a < b {
                l[a..b].iter().copied().fold(f64::NEG_INFINITY, f64::max)
            } else {
                let j = f.partition_point(|&v| v <= x).clamp(1, f.len() - 1);
                let t = (x - f[j - 1]) / (f[j] - f[j - 1]);
                l[j - 1] + t * (l[j] - l[j - 1])
            }
        })
        .collect()
}

/// Median and `tau` quantile (0.95 by default) per point over the sweeps (`levels[sweep][point]`,
/// NaN for a point a sweep does not cover), and the limit per point.
pub fn profile(freq_hz: &[f64], levels: &[Vec<f64>], tau: f64, limit: Option<&Limit>) -> Profile {
    let mut median_dbuv = Vec::with_capacity(freq_hz.len());
    let mut p95_dbuv = Vec::with_capacity(freq_hz.len());
    let mut column = Vec::with_capacity(levels.len());
    for i in 0..freq_hz.len() {
        column.clear();
        column.extend(levels.iter().filter_map(|s| s.get(i).copied()));
        median_dbuv.push(quantile(&column, 0.5).unwrap_or(f64::NAN));
        p95_dbuv.push(quantile(&column, tau).unwrap_or(f64::NAN));
    }
    Profile {
        freq_hz: freq_hz.to_vec(),
        median_dbuv,
        p95_dbuv,
        limit_dbuv: limit.map_or_else(|| vec![None; freq_hz.len()], |l| l.at_all(freq_hz)),
    }
}

/// The limit's own segments: consecutive vertices at different frequencies (a step, two
/// vertices at one frequency, separates segments), as `(start_hz, stop_hz)`.
pub fn segments(limit: &Limit) -> Vec<(f64, f64)> {
    limit
        .vertices
        .windows(2)
        .filter(|w| w[1].0 > w[0].0)
        .map(|w| (w[0].0, w[1].0))
        .collect()
}

/// Margins of the `p95` profile to the limit per point (`None` outside the limit or without a
/// level).
fn margins(p: &Profile) -> Vec<Option<f64>> {
    p.limit_dbuv
        .iter()
        .zip(&p.p95_dbuv)
        .map(|(l, x)| l.filter(|_| x.is_finite()).map(|l| l - x))
        .collect()
}

/// The headroom table: each limit segment the scan reaches, then the whole span. A point at a
/// segment boundary belongs to the segment above (the last one keeps its stop).
pub fn bands(p: &Profile, limit: &Limit, headroom_db: f64, min_usable: f64) -> Vec<HeadroomBand> {
    let m = margins(p);
    let segs = segments(limit);
    let last = segs.len().saturating_sub(1);
    let mut out = Vec::new();
    for (k, &(a, b)) in segs.iter().enumerate() {
        let inside = |f: f64| f >= a && (f < b || (k == last && f <= b));
        out.extend(band(
            p,
            &m,
            inside,
            (a, b),
            headroom_db,
            min_usable,
            "segment",
        ));
    }
    let (a, b) = limit.range_hz();
    let (sa, sb) = (
        p.freq_hz.first().copied().unwrap_or(a),
        p.freq_hz.last().copied().unwrap_or(b),
    );
    let span = (a.max(sa), b.min(sb));
    out.extend(band(
        p,
        &m,
        |f| f >= span.0 && f <= span.1,
        span,
        headroom_db,
        min_usable,
        "span",
    ));
    out
}

fn band(
    p: &Profile,
    m: &[Option<f64>],
    inside: impl Fn(f64) -> bool,
    (a, b): (f64, f64),
    headroom_db: f64,
    min_usable: f64,
    kind: &'static str,
) -> Option<HeadroomBand> {
    let (mut points, mut usable) = (0usize, 0usize);
    let mut worst = (f64::INFINITY, a);
    for (i, &f) in p.freq_hz.iter().enumerate() {
        let Some(x) = m.get(i).copied().flatten() else {
            continue;
        };
        if !inside(f) {
            continue;
        }
        points += 1;
        usable += usize::from(x >= headroom_db);
        if x < worst.0 {
            worst = (x, f);
        }
    }
    (points > 0).then(|| {
        let usable_fraction = usable as f64 / points as f64;
        HeadroomBand {
            start_hz: a.max(p.freq_hz.first().copied().unwrap_or(a)),
            stop_hz: b.min(p.freq_hz.last().copied().unwrap_or(b)),
            usable_fraction,
            points,
            judged: usable_fraction >= min_usable,
            worst_margin_db: worst.0,
            worst_freq_hz: worst.1,
            band: kind,
            blocking: Vec::new(),
        }
    })
}

/// Runs of points whose 95th percentile is less than the headroom under the limit.
pub fn blocked(p: &Profile, headroom_db: f64) -> Vec<BlockedRange> {
    let m = margins(p);
    let mut out: Vec<BlockedRange> = Vec::new();
    let mut open = false;
    for (i, &f) in p.freq_hz.iter().enumerate() {
        match m.get(i).copied().flatten() {
            Some(x) if x < headroom_db => {
                match out.last_mut() {
                    Some(r) if open => {
                        r.stop_hz = f;
                        r.points += 1;
                        if x < r.worst_margin_db {
                            r.worst_margin_db = x;
                            r.worst_freq_hz = f;
                        }
                    }
                    _ => out.push(BlockedRange {
                        start_hz: f,
                        stop_hz: f,
                        points: 1,
                        worst_margin_db: x,
                        worst_freq_hz: f,
                        emitters: Vec::new(),
                    }),
                }
                open = true;
            }
            _ => open = false,
        }
    }
    out
}

/// Share of the points of one sweep's `levels` at least the headroom under the limit (`None`
/// when no point is inside the limit).
pub fn sweep_usable(levels: &[f64], limit_dbuv: &[Option<f64>], headroom_db: f64) -> Option<f64> {
    let (mut n, mut ok) = (0usize, 0usize);
    for (x, l) in levels.iter().zip(limit_dbuv) {
        if let (Some(l), true) = (l, x.is_finite()) {
            n += 1;
            ok += usize::from(l - x >= headroom_db);
        }
    }
    (n > 0).then(|| ok as f64 / n as f64)
}

/// The usable share of one sweep's `levels` in its worst band: the smallest, over the limit's
/// segments (the same bands and boundary rule as [`bands`]), of the share of the segment's points
/// at least the headroom under the limit. `None` when no segment holds a point.
pub fn sweep_worst_band(
    freq_hz: &[f64],
    levels: &[f64],
    limit: &Limit,
    headroom_db: f64,
) -> Option<f64> {
    let segs = segments(limit);
    let last = segs.len().saturating_sub(1);
    segs.iter()
        .enumerate()
        .filter_map(|(k, &(a, b))| {
            let (mut n, mut ok) = (0usize, 0usize);
            for (&f, &x) in freq_hz.iter().zip(levels) {
                let inside = f >= a && (f < b || (k == last && f <= b));
                if let (true, Some(l), true) = (inside, limit.at(f), x.is_finite()) {
                    n += 1;
                    ok += usize::from(l - x >= headroom_db);
                }
            }
            (n > 0).then(|| ok as f64 / n as f64)
        })
        .reduce(f64::min)
}

/// The ambient power of one sweep relative to the headroom line (limit − headroom), averaged
/// over the points inside the limit, dB: a single figure of how loud the sweep is where it
/// matters (`None` when no point is inside the limit).
///
/// # Formula
/// ```text
/// P = 10·log10( (1/N)·Σ 10^((L_i − (limit_i − headroom))/10) )
/// ```
/// # Source
/// Derived: the mean of linear powers, so a few strong carriers near the limit weigh more than
/// many points of floor far under it.
pub fn sweep_power_db(levels: &[f64], limit_dbuv: &[Option<f64>], headroom_db: f64) -> Option<f64> {
    let (mut n, mut sum) = (0usize, 0.0);
    for (x, l) in levels.iter().zip(limit_dbuv) {
        if let (Some(l), true) = (l, x.is_finite()) {
            n += 1;
            sum += 10f64.powf((x - (l - headroom_db)) / 10.0);
        }
    }
    (n > 0).then(|| 10.0 * (sum / n as f64).log10())
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::scan::ScanMeta;

    fn profile_of(p95: Vec<f64>) -> Profile {
        let n = p95.len();
        let freq_hz: Vec<f64> = (0..n)
            .map(|i| 150e3 * (200f64).powf(i as f64 / (n - 1) as f64))
            .collect();
        let limit = crate::limits::builtin("cispr32-b-av").unwrap();
        Profile {
            limit_dbuv: freq_hz.iter().map(|&f| limit.at(f)).collect(),
            median_dbuv: p95.clone(),
            freq_hz,
            p95_dbuv: p95,
        }
    }

    #[test]
    fn bands_are_the_limit_segments_and_the_span() {
        let limit = crate::limits::builtin("cispr32-b-av").unwrap();
        // source: CISPR 32 Class B AV, 0.15-0.5, 0.5-5, 5-30 MHz (METHODS §1)
        assert_eq!(
            segments(&limit),
            vec![(150e3, 500e3), (500e3, 5e6), (5e6, 30e6)]
        );
        // 20 dBµV everywhere except 45 dBµV at the lowest 200 points (150 to 433 kHz): 45 is at
        // least 6 dB under the 0.15-0.5 MHz AV limit only where 56 − 19.125·log10(f/150 kHz) ≥ 51,
        // i.e. below 150 kHz·10^(5/19.125) = 273 kHz (derived); above it those points are blocked
        let n = 1001;
        let p = profile_of((0..n).map(|i| if i < 200 { 45.0 } else { 20.0 }).collect());
        let b = bands(&p, &limit, 6.0, 0.9);
        assert_eq!(b.len(), 4);
        assert_eq!(b[3].band, "span");
        assert_eq!(b[3].points, n);
        let low = &b[0];
        let blocked_from = 150e3 * 10f64.powf(5.0 / 19.125);
        let blocked_points = p.freq_hz[..200]
            .iter()
            .filter(|&&f| f >= blocked_from)
            .count();
        let band_points = p.freq_hz.iter().filter(|&&f| f < 500e3).count();
        assert_eq!(low.points, band_points);
        let expect = 1.0 - blocked_points as f64 / band_points as f64;
        assert!((low.usable_fraction - expect).abs() < 1e-9);
        assert!(!low.judged && b[1].judged && b[2].judged);
        assert_eq!(blocked(&p, 6.0).len(), 1);
    }

    #[test]
    fn resampling_keeps_the_peak_of_a_bucket() {
        let f: Vec<f64> = (0..21).map(|i| 1e6 + i as f64 * 1e3).collect();
        let mut l = vec![10.0; 21];
        l[7] = 50.0;
        let s = Scan::new(f, l, ScanMeta::default()).unwrap();
        let grid = [1e6, 1.004e6, 1.008e6, 1.012e6, 1.03e6];
        let r = resample(&s, &grid);
        assert_eq!(r[2], 50.0, "1.007 MHz lies in the bucket of 1.008 MHz");
        assert!(r[4].is_nan());
    }

    #[test]
    fn sweep_power_is_a_mean_of_linear_powers() {
        // source: derived, two points at the headroom line and 10 dB under it:
        // 10·log10((1 + 0.1)/2) = −2.596 dB
        let p = sweep_power_db(&[40.0, 30.0], &[Some(46.0), Some(46.0)], 6.0).unwrap();
        assert!((p + 2.596).abs() < 1e-3);
        assert_eq!(sweep_power_db(&[40.0], &[None], 6.0), None);
    }

    #[test]
    fn a_sweep_is_as_usable_as_its_worst_band() {
        let limit = crate::limits::builtin("cispr32-b-av").unwrap();
        // one point per segment: 0.2 MHz usable (20 dBµV), 1 MHz blocked (45 dBµV is 1 dB
        // under the 46 dBµV AV limit, source: CISPR 32 Class B), 10 MHz usable
        let f = [200e3, 1e6, 10e6];
        let worst = sweep_worst_band(&f, &[20.0, 45.0, 20.0], &limit, 6.0);
        assert_eq!(worst, Some(0.0));
        assert_eq!(
            sweep_worst_band(&f, &[20.0, 20.0, 20.0], &limit, 6.0),
            Some(1.0)
        );
    }
}
