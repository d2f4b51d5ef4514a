//! Narrowband or broadband: each peak's −6 dB width against what a single line shows through the
//! RBW filter, and the broadband regions ("humps") of a trace.
//!
//! A line seen through a Gaussian RBW filter of 6 dB bandwidth B6 shows a −6 dB width of B6 by
//! definition; a positive-peak display with buckets of width `step` widens it by up to one step
//! (the bucket maximum catches the line from half a bucket on either side). Wider emissions are
//! broadband: noise-like or impulsive sources, dithered lines, or combs finer than the RBW.

use crate::floor::Floor;
use crate::peaks::FoundPeak;
use crate::scan::Scan;
use serde::Serialize;

pub use crate::analysis::Bandwidth;

/// A peak wider than this many line widths is broadband.
pub const BROADBAND_WIDTH_RATIO: f64 = 1.6;
/// A hump spans at least this many line widths.
pub const HUMP_MIN_WIDTHS: f64 = 5.0;

/// A broadband region.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Hump {
    pub start_hz: f64,
    pub stop_hz: f64,
    /// Frequency of the highest point (Hz).
    pub freq_hz: f64,
    pub level_dbuv: f64,
    /// Median level over the floor across the region (dB).
    pub over_floor_db: f64,
}

/// The −6 dB width of a single line on this display: B6 plus one display step.
///
/// `rbw_hz` is the scan's stated RBW; without it, the median width of the narrowest third of
/// the significant peaks stands in (lines are the commonest emissions).
pub fn line_width_hz(scan: &Scan, peaks: &[FoundPeak], index: usize) -> f64 {
    let step = local_step(scan, index);
    match scan.meta.rbw_hz {
        Some(rbw) => rbw + step,
        None => {
            let mut w: Vec<f64> = peaks
                .iter()
                .map(|p| p.width_hz)
                .filter(|w| *w > 0.0)
                .collect();
            w.sort_by(f64::total_cmp);
            let third = &w[..w.len().div_ceil(3)];
            third
                .get(third.len() / 2)
                .copied()
                .unwrap_or(step)
                .max(step)
        }
    }
}

/// Display step around point `index` (Hz).
pub fn local_step(scan: &Scan, index: usize) -> f64 {
    let n = scan.len();
    if n < 2 {
        return 0.0;
    }
    let i = index.min(n - 2);
    scan.freq_hz[i + 1] - scan.freq_hz[i]
}

/// Narrowband or broadband for each peak.
pub fn classify(scan: &Scan, peaks: &[FoundPeak]) -> Vec<Bandwidth> {
    peaks
        .iter()
        .map(|p| {
            if p.width_hz > BROADBAND_WIDTH_RATIO * line_width_hz(scan, peaks, p.index) {
                Bandwidth::Broadband
            } else {
                Bandwidth::Narrowband
            }
        })
        .collect()
}

/// Share of the points within ±[`HUMP_WINDOW_WIDTHS`] line widths that must be over the
/// detection threshold for a point to be part of a hump: a lone line fills about a third of that
/// window, two lines a channel apart about 60 %, a broadband plateau all of it.
pub const HUMP_FILL: f64 = 0.8;
/// Half-width of the fill window in line widths.
pub const HUMP_WINDOW_WIDTHS: f64 = 1.5;

/// Broadband regions: runs of points around which at least [`HUMP_FILL`] of the trace is over
/// the detection threshold, at least [`HUMP_MIN_WIDTHS`] line widths wide.
pub fn find_humps(
    scan: &Scan,
    floor: &Floor,
    peaks: &[FoundPeak],
    _bandwidth: &[Bandwidth],
) -> Vec<Hump> {
    let f = scan.freq_hz.to_vec();
    let x = scan.level_dbuv.to_vec();
    // prefix counts of points over the threshold
    let mut over = Vec::with_capacity(f.len() + 1);
    over.push(0usize);
    for i in 0..f.len() {
        let up = floor.threshold_dbuv.get(i).is_some_and(|t| x[i] > *t);
        over.push(over[i] + usize::from(up));
    }
    let line = line_width_hz(scan, peaks, f.len() / 2);
    let filled: Vec<bool> = (0..f.len())
        .map(|i| {
            let half = HUMP_WINDOW_WIDTHS * line_width_hz(scan, peaks, i).max(line.min(f64::MAX));
            let lo = f.partition_point(|&v| v < f[i] - half);
            let hi = f.partition_point(|&v| v <= f[i] + half);
            hi > lo + 2 && (over[hi] - over[lo]) as f64 >= HUMP_FILL * (hi - lo) as f64
        })
        .collect();
    let mut humps = Vec::new();
    let mut i = 0;
    while i < f.len() {
        if !filled[i] {
            i += 1;
            continue;
        }
        let s = i;
        while i + 1 < f.len() && filled[i + 1] {
            i += 1;
        }
        if f[i] - f[s] >= HUMP_MIN_WIDTHS * line_width_hz(scan, peaks, s) {
            humps.push(hump_of(&f, &x, floor, s, i));
        }
        i += 1;
    }
    humps
}

fn hump_of(f: &[f64], x: &[f64], floor: &Floor, s: usize, e: usize) -> Hump {
    let top = (s..=e).max_by(|&a, &b| x[a].total_cmp(&x[b])).unwrap_or(s);
    let mut over: Vec<f64> = (s..=e).map(|i| x[i] - floor.floor_dbuv[i]).collect();
    let over_floor_db = crate::floor::quantile_in_place(&mut over, 0.5);
    Hump {
        start_hz: f[s],
        stop_hz: f[e],
        freq_hz: f[top],
        level_dbuv: x[top],
        over_floor_db,
    }
}
