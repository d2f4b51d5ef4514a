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

/// Broadband regions: runs of points over the detection threshold, outside the narrowband
/// peaks' extents, at least [`HUMP_MIN_WIDTHS`] line widths wide; runs closer than two line
/// widths merge.
pub fn find_humps(
    scan: &Scan,
    floor: &Floor,
    peaks: &[FoundPeak],
    bandwidth: &[Bandwidth],
) -> Vec<Hump> {
    let f = scan
        .freq_hz
        .as_slice()
        .map(<[f64]>::to_vec)
        .unwrap_or_else(|| scan.freq_hz.to_vec());
    let x = scan.level_dbuv.to_vec();
    let mut lines: Vec<(f64, f64)> = peaks
        .iter()
        .zip(bandwidth)
        .filter(|(_, b)| **b == Bandwidth::Narrowband)
        .map(|(p, _)| (p.left_hz, p.right_hz))
        .collect();
    lines.sort_by(|a, b| a.0.total_cmp(&b.0));
    let in_line = |freq: f64| {
        let k = lines.partition_point(|l| l.0 <= freq);
        k > 0 && freq <= lines[k - 1].1
    };
    let mut runs: Vec<(usize, usize)> = Vec::new();
    let mut start: Option<usize> = None;
    for i in 0..f.len() {
        let over = x[i] > floor.threshold_dbuv[i] && !in_line(f[i]);
        match (over, start) {
            (true, None) => start = Some(i),
            (false, Some(s)) => {
                runs.push((s, i - 1));
                start = None;
            }
            _ => {}
        }
    }
    if let Some(s) = start {
        runs.push((s, f.len() - 1));
    }
    let merged = merge_runs(scan, peaks, &f, runs);
    merged
        .into_iter()
        .filter(|&(s, e)| f[e] - f[s] >= HUMP_MIN_WIDTHS * line_width_hz(scan, peaks, s))
        .map(|(s, e)| hump_of(&f, &x, floor, s, e))
        .collect()
}

fn merge_runs(
    scan: &Scan,
    peaks: &[FoundPeak],
    f: &[f64],
    runs: Vec<(usize, usize)>,
) -> Vec<(usize, usize)> {
    let mut merged: Vec<(usize, usize)> = Vec::new();
    for r in runs {
        match merged.last_mut() {
            Some(last) if f[r.0] - f[last.1] <= 2.0 * line_width_hz(scan, peaks, r.0) => {
                last.1 = r.1
            }
            _ => merged.push(r),
        }
    }
    merged
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
