//! Detections of one sweep: the stages of `analyze` (floor, peaks, humps, families) run on an
//! ambient sweep, reduced to what the association needs.

use crate::bandwidth::{self, Bandwidth};
use crate::families::{FamilyFit, FamilyParams, find_families};
use crate::floor::{Floor, FloorParams, estimate_floor};
use crate::peaks::{PeakParams, find_peaks};
use crate::scan::Scan;

/// Half-width of the window of the local background of a peak, in line widths (RBW + step).
pub const LOCAL_WINDOW_WIDTHS: f64 = 5.0;

/// One narrowband or broadband peak of a sweep.
#[derive(Debug, Clone, PartialEq)]
pub struct LineDetection {
    pub freq_hz: f64,
    pub level_dbuv: f64,
    /// Level over the sweep's detection threshold, or over its local background where that is
    /// less (see [`clearance_db`]), dB.
    pub significance_db: f64,
    pub narrow: bool,
    /// Display point of the top.
    pub point: usize,
}

/// One broadband region of a sweep.
#[derive(Debug, Clone, PartialEq)]
pub struct HumpDetection {
    pub start_hz: f64,
    pub stop_hz: f64,
    pub freq_hz: f64,
    pub level_dbuv: f64,
}

/// A harmonic family of a sweep, its members given as indices into the sweep's lines.
#[derive(Debug, Clone, PartialEq)]
pub struct FamilyDetection {
    pub fit: FamilyFit,
    /// `(line index, harmonic number)`.
    pub members: Vec<(usize, u32)>,
}

/// What one sweep shows.
#[derive(Debug, Clone, PartialEq)]
pub struct SweepFindings {
    pub lines: Vec<LineDetection>,
    pub humps: Vec<HumpDetection>,
    pub families: Vec<FamilyDetection>,
    pub floor: Floor,
}

/// Settings of the per-sweep stages.
#[derive(Debug, Clone, Copy, PartialEq, Default)]
pub struct DetectParams {
    pub floor: FloorParams,
    pub peaks: PeakParams,
    pub families: FamilyParams,
}

/// Runs floor, peaks, humps and families on one sweep. A peak is a line of the sweep when it
/// clears its local background the way a line must clear the floor (see [`clearance_db`]): the
/// wiggles of a noise-like hump are not emitters, a carrier on top of it is. Broadcast sets are
/// left to the survey (it tests the rasters on the emitters, over all sweeps); a family keeps
/// the members that remain and needs three of them.
pub fn detect(scan: &Scan, p: &DetectParams) -> SweepFindings {
    let floor = estimate_floor(scan, &p.floor);
    let peaks = find_peaks(scan, &floor, &p.peaks);
    let humps = bandwidth::find_humps(scan, &floor, &peaks);
    let widths = bandwidth::classify(scan, &peaks);
    let fits = find_families(
        scan,
        &floor,
        &peaks,
        &humps,
        &vec![false; peaks.len()],
        &p.families,
    );
    let mut line_of = vec![None; peaks.len()];
    let mut lines = Vec::new();
    for (k, pk) in peaks.iter().enumerate() {
        let narrow = widths.get(k) == Some(&Bandwidth::Narrowband);
        let clearance = clearance_db(scan, &floor, pk.index);
        if clearance <= 0.0 {
            continue;
        }
        line_of[k] = Some(lines.len());
        lines.push(LineDetection {
            freq_hz: pk.freq_hz,
            level_dbuv: pk.level_dbuv,
            significance_db: pk.significance_db.min(clearance),
            narrow,
            point: pk.index,
        });
    }
    let families = fits
        .into_iter()
        .filter(|f| f.raster.is_none())
        .filter_map(|fit| {
            let members: Vec<(usize, u32)> = fit
                .members
                .iter()
                .filter_map(|&(i, n)| line_of.get(i).copied().flatten().map(|l| (l, n)))
                .collect();
            (members.len() >= p.families.min_harmonics).then_some(FamilyDetection { fit, members })
        })
        .collect();
    let humps = humps
        .iter()
        .map(|h| HumpDetection {
            start_hz: h.start_hz,
            stop_hz: h.stop_hz,
            freq_hz: h.freq_hz,
            level_dbuv: h.level_dbuv,
        })
        .collect();
    SweepFindings {
        lines,
        humps,
        families,
        floor,
    }
}

/// How far the level at point `i` clears its local background, dB: the median level within
/// ±[`LOCAL_WINDOW_WIDTHS`] line widths, plus the floor's own margin from median to threshold
/// at `i` (threshold − floor). A line must clear it (a positive result).
///
/// # Formula
/// ```text
/// clearance = L_i − median{L_j : |f_j − f_i| ≤ W·(B + s)} − (T_i − F_i)
/// ```
/// T the detection threshold and F the median floor of `floor.rs` (whose difference comes from
/// the max-of-M Rayleigh law fitted to the trace), B the RBW, s the step, W the window.
/// # Source
/// Derived: noise under a hump is noise of the same receiver and grid, so it follows the same
/// law with the hump's median in place of the floor's; on the plain floor the test is the
/// floor's own threshold.
pub fn clearance_db(scan: &Scan, floor: &Floor, i: usize) -> f64 {
    let f = &scan.freq_hz;
    let (Some(&fi), Some(&li)) = (f.get(i), scan.level_dbuv.get(i)) else {
        return f64::NEG_INFINITY;
    };
    let step = bandwidth::local_step(scan, i);
    let width = scan.meta.rbw_hz.unwrap_or(step) + step;
    let half = LOCAL_WINDOW_WIDTHS * width;
    let (Some(fs), Some(ls)) = (f.as_slice(), scan.level_dbuv.as_slice()) else {
        return f64::INFINITY;
    };
    let lo = fs.partition_point(|&x| x < fi - half);
    let hi = fs.partition_point(|&x| x <= fi + half);
    let mut window = ls[lo..hi].to_vec();
    let median = crate::floor::quantile_in_place(&mut window, 0.5);
    let over = match (floor.threshold_dbuv.get(i), floor.floor_dbuv.get(i)) {
        (Some(t), Some(m)) => t - m,
        _ => 0.0,
    };
    li - median - over
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::synth::{parse_scene, render};

    /// A noise-like hump with a carrier on top: the carrier is kept, the hump's wiggles are not.
    #[test]
    fn wiggles_of_a_hump_are_not_lines() {
        let scene = parse_scene(
            "[scan]\nstart_hz = 150e3\nstop_hz = 10e6\npoints = 2191\nrbw_hz = 9e3\nseed = 4\n\
             [floor]\nlevel_dbuv = 0.0\n\
             [[hump]]\nstart_hz = 2e6\nstop_hz = 6e6\nlevel_dbuv = 30.0\n\
             [[carrier]]\nfreq_hz = 4e6\nlevel_dbuv = 55.0\nam_depth = 0.0\n",
            "t.toml",
        )
        .unwrap();
        let scan = render(&scene).unwrap();
        let found = detect(&scan, &DetectParams::default());
        assert!(!found.humps.is_empty());
        let inside: Vec<&LineDetection> = found
            .lines
            .iter()
            .filter(|l| l.freq_hz > 2.3e6 && l.freq_hz < 5.5e6)
            .collect();
        assert_eq!(inside.len(), 1, "{inside:?}");
        assert!((inside[0].freq_hz - 4e6).abs() < 5e3);
        // without the rule, the hump's own tops would count as lines
        let floor = estimate_floor(&scan, &FloorParams::default());
        let all = find_peaks(&scan, &floor, &PeakParams::default());
        assert!(
            all.iter()
                .filter(|p| p.freq_hz > 2.3e6 && p.freq_hz < 5.5e6)
                .count()
                > 1
        );
    }
}
