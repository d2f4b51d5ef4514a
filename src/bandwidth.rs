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
    /// The family whose harmonic this is (a dithered line's plateau), when one claims it.
    pub family: Option<usize>,
    /// What probably made it, when no family claims it.
    pub likely_source: Option<String>,
    /// The scan that would resolve it into lines, when it may be a comb.
    pub rescan: Option<Rescan>,
    /// What shows it.
    pub seen_as: HumpBasis,
}

/// The evidence of a hump.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum HumpBasis {
    /// A region of the trace over its own detection threshold ([`find_humps`]).
    Trace,
    /// The trace never dips to the receiver floor the ambient scans show
    /// ([`crate::ambient::raised_floor`]).
    OverAmbientFloor,
    /// The whole trace fluctuates far less than noise: a steady emission fills it.
    SteadyTrace,
}

/// A scan setting to run again.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct Rescan {
    pub start_hz: f64,
    pub stop_hz: f64,
    pub rbw_hz: f64,
    pub points: usize,
}

/// Resolution bandwidths analyzers commonly offer (1-3-10 series, plus the CISPR 200 Hz, 9 kHz
/// and 120 kHz), Hz.
pub const RBW_STEPS_HZ: [f64; 14] = [
    10.0, 30.0, 100.0, 200.0, 300.0, 1e3, 3e3, 9e3, 10e3, 30e3, 100e3, 120e3, 300e3, 1e6,
];
/// Most display points a rescan proposes (common analyzers offer up to about 100,001).
pub const RESCAN_MAX_POINTS: usize = 100_001;

/// The rescan that shows a comb hidden in a hump as lines: an RBW a tenth of the present one
/// (the largest standard value at or below it), steps of half that RBW (METHODS §9: step at most
/// RBW/2), over the hump, narrowed around its top when that needs more than
/// [`RESCAN_MAX_POINTS`]. A comb whose spacing exceeds twice the new RBW then shows as lines.
pub fn rescan_for(h: &Hump, rbw_hz: f64) -> Rescan {
    let want = rbw_hz / 10.0;
    let rbw = RBW_STEPS_HZ
        .iter()
        .copied()
        .filter(|&r| r <= want)
        .fold(RBW_STEPS_HZ[0], f64::max);
    let step = rbw / 2.0;
    let (mut start, mut stop) = (h.start_hz, h.stop_hz);
    let max_span = step * (RESCAN_MAX_POINTS - 1) as f64;
    if stop - start > max_span {
        start = (h.freq_hz - max_span / 2.0).max(h.start_hz);
        stop = start + max_span;
    }
    let points = (((stop - start) / step).ceil() as usize + 1).clamp(2, RESCAN_MAX_POINTS) | 1;
    Rescan {
        start_hz: start,
        stop_hz: stop,
        rbw_hz: rbw,
        points: points.min(RESCAN_MAX_POINTS),
    }
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

/// Width, in line widths, under which a peak on a fine grid is a ripple on something broader:
/// a steady carrier shows with the RBW filter's own −6 dB width (common practice: the displayed
/// shape of a CW signal is the filter's), so a top much narrower than that is a fluctuation of
/// a noise-like emission (a dithered harmonic's plateau read with the peak detector), part of a
/// plateau (measured on seeds 1-600, recall / precision / top-1: 0.5 gives 0.713 / 0.873 /
/// 0.700, 0.6 0.713 / 0.877 / 0.700, 0.7 0.714 / 0.881 / 0.702, 0.85 0.705 / 0.886 / 0.693).
pub const RIPPLE_LINES: f64 = 0.7;
/// A grid is fine enough for a peak's width to be measured when its step is under this share
/// of a line width (three or more points per line).
pub const FINE_GRID_SHARE: f64 = 1.0 / 3.0;

/// Whether peak `p` is a ripple on something broader: narrower than [`RIPPLE_LINES`] line
/// widths on a grid fine enough ([`FINE_GRID_SHARE`]) for its width to be measured.
pub fn is_ripple(scan: &Scan, peaks: &[FoundPeak], p: &FoundPeak) -> bool {
    let line = line_width_hz(scan, peaks, p.index);
    local_step(scan, p.index) < FINE_GRID_SHARE * line && p.width_hz < RIPPLE_LINES * line
}

/// Share of the points within ±[`HUMP_WINDOW_WIDTHS`] line widths that must be over the
/// detection threshold for a point to be part of a hump: a lone line fills about a third of that
/// window, two lines a channel apart about 60 %, a broadband plateau all of it.
pub const HUMP_FILL: f64 = 0.8;
/// Half-width of the fill window in line widths.
pub const HUMP_WINDOW_WIDTHS: f64 = 1.5;

/// Broadband regions: runs of points around which at least [`HUMP_FILL`] of the trace is over
/// the detection threshold, at least [`HUMP_MIN_WIDTHS`] line widths wide.
pub fn find_humps(scan: &Scan, floor: &Floor, peaks: &[FoundPeak]) -> Vec<Hump> {
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
    // the lines' skirts, worked out once a region is wide enough to be a hump
    let mut skirts: Option<Vec<f64>> = None;
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
        if f[i] - f[s] >= HUMP_MIN_WIDTHS * line_width_hz(scan, peaks, s)
            && !lines_explain(
                &x,
                floor,
                skirts.get_or_insert_with(|| line_skirts(scan, &f, floor, peaks)),
                s,
                i,
            )
        {
            humps.push(hump_of(&f, &x, floor, s, i));
        }
        i += 1;
    }
    humps
}

/// Whether the steady lines' skirts ([`line_skirts`]) explain all but less than
/// [`HUMP_UNEXPLAINED`] of the over-threshold points of the region `s..=e`: strong lines a few
/// channels apart fill a window with their skirts alone, which is no broadband emission.
fn lines_explain(x: &[f64], floor: &Floor, skirts: &[f64], s: usize, e: usize) -> bool {
    let (mut over, mut unexplained) = (0usize, 0usize);
    for i in s..=e {
        if floor.threshold_dbuv.get(i).is_some_and(|t| x[i] > *t) {
            over += 1;
            unexplained += usize::from(x[i] > skirts[i] + SKIRT_SLACK_DB);
        }
    }
    (unexplained as f64) < HUMP_UNEXPLAINED * over as f64
}

/// Share of a hump's over-threshold points that the skirts of steady lines must leave
/// unexplained for it to be broadband.
pub const HUMP_UNEXPLAINED: f64 = 0.25;
/// A point this close (dB) over the skirt of a line is still that line's.
pub const SKIRT_SLACK_DB: f64 = 6.0;
/// Fewest dB a steady line stands over its bases to be taken as the source of its skirt (a top
/// on a plateau stands a few dB over its dips).
pub const SKIRT_PROMINENCE_DB: f64 = 20.0;

/// For every point, the highest level the skirts of the trace's steady lines reach there
/// (dBµV; −∞ where none reaches the threshold). A steady line is a peak of the RBW filter's own
/// width (neither a ripple nor a broad emission, see [`classify`]) that stands
/// [`SKIRT_PROMINENCE_DB`] over its bases; its skirt falls as the Gaussian IF response,
/// `L(f) = L_top − 20·log10(e)·4·ln2·((f − f_top)/B6)²` = `L_top − 24.08·(Δf/B6)²` dB
/// (METHODS §3), B6 the RBW (or the measured line width when the RBW is not known). A line
/// 80 dB over the threshold stays over it for ±1.8·B6.
///
/// Costs the points each line's skirt reaches over the threshold, never points × lines.
fn line_skirts(scan: &Scan, f: &[f64], floor: &Floor, peaks: &[FoundPeak]) -> Vec<f64> {
    const GAUSS_DB: f64 = 24.08;
    let mut reach = vec![f64::NEG_INFINITY; f.len()];
    let lowest = floor
        .threshold_dbuv
        .iter()
        .copied()
        .fold(f64::INFINITY, f64::min);
    for p in peaks {
        let line = line_width_hz(scan, peaks, p.index);
        let step = local_step(scan, p.index);
        if is_ripple(scan, peaks, p)
            || p.width_hz > BROADBAND_WIDTH_RATIO * line
            || p.prominence_db < SKIRT_PROMINENCE_DB
        {
            continue;
        }
        let b6 = scan.meta.rbw_hz.unwrap_or(line).max(step * 1e-3);
        let span = b6 * ((p.level_dbuv - lowest).max(0.0) / GAUSS_DB).sqrt();
        let lo = f.partition_point(|&v| v < p.freq_hz - span);
        let hi = f.partition_point(|&v| v <= p.freq_hz + span);
        for (i, r) in reach.iter_mut().enumerate().take(hi).skip(lo) {
            let d = (f[i] - p.freq_hz) / b6;
            *r = r.max(p.level_dbuv - GAUSS_DB * d * d);
        }
    }
    reach
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
        family: None,
        likely_source: None,
        rescan: None,
        seen_as: HumpBasis::Trace,
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn hump(start: f64, stop: f64) -> Hump {
        Hump {
            start_hz: start,
            stop_hz: stop,
            freq_hz: 0.5 * (start + stop),
            level_dbuv: 40.0,
            over_floor_db: 20.0,
            family: None,
            likely_source: None,
            rescan: None,
            seen_as: HumpBasis::Trace,
        }
    }

    #[test]
    fn rescan_takes_a_tenth_of_the_rbw_and_half_steps() {
        // band B 9 kHz: a tenth is 900 Hz, the standard value at or below is 300 Hz; steps of
        // RBW/2 (METHODS §9) over 2 MHz: 2e6/150 + 1 points, odd
        let r = rescan_for(&hump(2e6, 2.1e6), 9e3);
        assert_eq!(r.rbw_hz, 300.0);
        assert_eq!(r.points, ((100e3 / 150.0f64).ceil() as usize + 1) | 1);
        assert!((r.stop_hz - r.start_hz) <= 150.0 * (r.points - 1) as f64 + 1e-6);
    }

    #[test]
    fn a_wide_hump_is_narrowed_around_its_top() {
        // 120 kHz: 10 kHz RBW, 5 kHz steps, 100,001 points span 500 MHz, less than the hump
        let r = rescan_for(&hump(30e6, 1e9), 120e3);
        assert_eq!(r.rbw_hz, 10e3);
        assert!(r.points <= RESCAN_MAX_POINTS);
        assert!((r.stop_hz - r.start_hz - 5e3 * (RESCAN_MAX_POINTS - 1) as f64).abs() < 1.0);
    }

    #[test]
    fn the_rbw_never_falls_below_the_smallest_step() {
        assert_eq!(rescan_for(&hump(10e3, 20e3), 50.0).rbw_hz, 10.0);
    }
}

/// What a second scan of the same DUT, with another RBW or detector, says about an emission.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum Nature {
    /// Unchanged with the RBW: a line.
    Narrowband,
    /// Scales as 20·log10 of the RBW ratio: coherent, impulsive.
    Impulsive,
    /// Scales as 10·log10 of the RBW ratio: random noise.
    NoiseLike,
    /// Peak and average differ by 6 dB or more.
    Broadband,
}

/// The evidence of the second scan at one peak.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct Discrimination {
    /// Level in the second scan minus level in the first (dB).
    pub delta_db: f64,
    pub nature: Nature,
}

/// The classic discrimination of narrowband and broadband emissions from two scans of the same
/// DUT: `main` with RBW B1 and `also` with RBW B2, or the same RBW with the peak and average
/// detectors.
///
/// # Formula
/// ```text
/// Δ = L_also − L_main;  narrowband: Δ ≈ 0;  noise: Δ ≈ 10·log10(B2/B1);  impulsive: Δ ≈ 20·log10(B2/B1)
/// same RBW, peak and average: peak − average < 6 dB narrowband, otherwise broadband
/// ```
/// # Source
/// Impulse bandwidth (IEEE Std 376-1975): an impulsive reading scales with the bandwidth; random
/// noise reads 10·log10(B2/B1); a line does not change (METHODS.md §6). Peak minus average
/// under 6 dB means narrowband (CISPR 25 practice, METHODS.md §6).
///
/// `None` when the second scan has the same RBW and detector, or lacks what is needed.
pub fn discriminate(main: &Scan, peak: &FoundPeak, also: &Scan) -> Option<Discrimination> {
    let (b1, b2) = (main.meta.rbw_hz?, also.meta.rbw_hz?);
    let f = also.freq_hz.as_slice()?;
    let half = 0.5 * b1.max(b2) + local_step(also, f.partition_point(|&x| x < peak.freq_hz));
    let lo = f.partition_point(|&x| x < peak.freq_hz - half);
    let hi = f.partition_point(|&x| x <= peak.freq_hz + half);
    let level = (lo..hi).map(|i| also.level_dbuv[i]).reduce(f64::max)?;
    let delta_db = level - peak.level_dbuv;
    let ratio_db = 10.0 * (b2 / b1).log10();
    if ratio_db.abs() >= 1.5 {
        let expected = [
            (Nature::Narrowband, 0.0),
            (Nature::NoiseLike, ratio_db),
            (Nature::Impulsive, 2.0 * ratio_db),
        ];
        let nature = expected
            .iter()
            .min_by(|a, b| (delta_db - a.1).abs().total_cmp(&(delta_db - b.1).abs()))
            .map(|e| e.0)?;
        return Some(Discrimination { delta_db, nature });
    }
    use crate::scan::Detector::{Average, Peak};
    let peak_minus_average = match (main.meta.detector?, also.meta.detector?) {
        (Peak, Average) => -delta_db,
        (Average, Peak) => delta_db,
        _ => return None,
    };
    let nature = if peak_minus_average < 6.0 {
        Nature::Narrowband
    } else {
        Nature::Broadband
    };
    Some(Discrimination { delta_db, nature })
}

#[cfg(test)]
mod discrimination_tests {
    use super::*;
    use crate::scan::{Detector, ScanMeta};

    fn scan(rbw: f64, det: Detector, level: f64) -> Scan {
        let f: Vec<f64> = (0..201).map(|i| 1e6 + f64::from(i) * 500.0).collect();
        let l: Vec<f64> = f
            .iter()
            .map(|&x| if (x - 1.05e6).abs() < 1.0 { level } else { 0.0 })
            .collect();
        Scan::new(
            f,
            l,
            ScanMeta {
                rbw_hz: Some(rbw),
                detector: Some(det),
                ..ScanMeta::default()
            },
        )
        .unwrap()
    }

    fn peak_at(level: f64) -> FoundPeak {
        FoundPeak {
            index: 100,
            freq_hz: 1.05e6,
            level_dbuv: level,
            prominence_db: 30.0,
            left_base: 0,
            right_base: 200,
            left_hz: 1.045e6,
            right_hz: 1.055e6,
            width_hz: 9e3,
            significance_db: 20.0,
            over_floor_db: 30.0,
        }
    }

    #[test]
    fn rbw_ratio_tells_line_noise_and_impulse() {
        // source: METHODS §6, 9 kHz to 1 kHz: noise −9.54 dB (10·log10), impulsive −19.08 dB
        // (20·log10, impulse bandwidth), a line unchanged
        let main = scan(9e3, Detector::Peak, 50.0);
        for (also_level, want) in [
            (49.6, Nature::Narrowband),
            (40.4, Nature::NoiseLike),
            (30.9, Nature::Impulsive),
        ] {
            let also = scan(1e3, Detector::Peak, also_level);
            assert_eq!(
                discriminate(&main, &peak_at(50.0), &also).unwrap().nature,
                want,
                "{also_level}"
            );
        }
    }

    #[test]
    fn peak_minus_average_under_6_db_is_narrowband() {
        // source: CISPR 25 practice quoted in METHODS §6: peak − average < 6 dB narrowband
        let main = scan(9e3, Detector::Peak, 50.0);
        let close = scan(9e3, Detector::Average, 46.0);
        assert_eq!(
            discriminate(&main, &peak_at(50.0), &close).unwrap().nature,
            Nature::Narrowband
        );
        let far = scan(9e3, Detector::Average, 38.0);
        assert_eq!(
            discriminate(&main, &peak_at(50.0), &far).unwrap().nature,
            Nature::Broadband
        );
        let same = scan(9e3, Detector::Peak, 50.0);
        assert_eq!(discriminate(&main, &peak_at(50.0), &same), None);
    }

    /// A trace on a 1 kHz grid under a 9 kHz RBW: Gaussian responses (METHODS §3) of steady
    /// lines and of a flat band, power-summed over a 0 dBµV floor, with a 10 dBµV threshold.
    fn traced(lines: &[(f64, f64)], band: Option<(f64, f64, f64)>) -> (Scan, Floor) {
        let f: Vec<f64> = (0..=400).map(|k| 100e3 + 1e3 * f64::from(k)).collect();
        let response = |d: f64| (-4.0 * std::f64::consts::LN_2 * (d / 9e3).powi(2)).exp();
        let x: Vec<f64> = f
            .iter()
            .map(|&v| {
                let mut p = 1.0; // the floor, 0 dBµV
                for &(fl, l) in lines {
                    p += 10f64.powf(l / 10.0) * response(v - fl).powi(2);
                }
                if let Some((lo, hi, l)) = band {
                    // the band's power through the filter: its share of the response's area
                    let inside: f64 = (0..200)
                        .map(|k| lo + (hi - lo) * (f64::from(k) + 0.5) / 200.0)
                        .map(|u| response(v - u).powi(2))
                        .sum::<f64>()
                        * (hi - lo)
                        / 200.0;
                    let area = 9e3 * (std::f64::consts::PI / (8.0 * std::f64::consts::LN_2)).sqrt();
                    p += 10f64.powf(l / 10.0) * inside / area;
                }
                10.0 * p.log10()
            })
            .collect();
        let n = f.len();
        let scan = Scan::new(
            f,
            x,
            crate::scan::ScanMeta {
                rbw_hz: Some(9e3),
                ..Default::default()
            },
        )
        .unwrap();
        let floor = Floor {
            floor_dbuv: vec![0.0; n],
            threshold_dbuv: vec![10.0; n],
            samples_per_point: 1.0,
            spread_db: 2.0,
            false_alarm_per_point: 1e-4,
        };
        (scan, floor)
    }

    #[test]
    fn strong_lines_side_by_side_are_no_hump_and_a_band_is() {
        // three converter lines 20 kHz apart, 75, 71 and 50 dB over the threshold: their
        // skirts keep the trace over it from 215 to 284 kHz, more than five line widths, all of
        // it explained by the lines
        let lines = [(231e3, 85.0), (251e3, 81.5), (271e3, 60.0)];
        let (scan, floor) = traced(&lines, None);
        let peaks = crate::peaks::find_peaks(&scan, &floor, &Default::default());
        assert_eq!(peaks.len(), 3);
        assert!(find_humps(&scan, &floor, &peaks).is_empty());
        // a 60 kHz band 50 dB over the floor (a dithered harmonic's plateau) beside them is one
        let (scan, floor) = traced(&lines, Some((330e3, 390e3, 50.0)));
        let peaks = crate::peaks::find_peaks(&scan, &floor, &Default::default());
        let humps = find_humps(&scan, &floor, &peaks);
        assert_eq!(humps.len(), 1, "{humps:?}");
        assert!(
            humps[0].start_hz < 335e3 && humps[0].stop_hz > 385e3,
            "{humps:?}"
        );
    }
}
