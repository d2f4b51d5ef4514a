//! Harmonic families: which lines one oscillator made.
//!
//! The [`sieve`] proposes fundamentals and scores them; the best one is refined by weighted
//! least squares ([`refine`]), its lines are claimed, and the search repeats on the lines left.
//! [`envelope`] describes each family (slope, odd/even pattern, dither); [`raster`] claims the
//! medium-wave broadcast carriers that a sieve must not mistake for a converter.

pub mod envelope;
pub mod raster;
pub mod refine;
pub mod sieve;

use crate::bandwidth::{line_width_hz, local_step};
use crate::floor::Floor;
use crate::peaks::FoundPeak;
use crate::scan::Scan;
use envelope::{Envelope, Harmonic};
use sieve::{Line, Pattern, Sieve, SieveParams};

/// Settings of the family search.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct FamilyParams {
    pub sieve: SieveParams,
    /// A family has at least this many harmonics.
    pub min_harmonics: usize,
    /// Its score (hits weighted 1-2, minus the miss penalty) reaches this.
    pub min_value: f64,
    /// And this share of its expected harmonics is seen.
    pub min_hit_ratio: f64,
    /// Most families searched.
    pub max_families: usize,
}

impl Default for FamilyParams {
    fn default() -> Self {
        FamilyParams { sieve: SieveParams::default(), min_harmonics: 3, min_value: 2.5, min_hit_ratio: 0.6, max_families: 40 }
    }
}

/// A family found in a trace.
#[derive(Debug, Clone, PartialEq)]
pub struct FamilyFit {
    pub fundamental_hz: f64,
    pub sigma_hz: f64,
    pub pattern: Pattern,
    /// `(index into the peaks, harmonic number)`, ascending in harmonic number.
    pub members: Vec<(usize, u32)>,
    pub misses: usize,
    pub envelope: Envelope,
    /// Set for a broadcast channel raster: its name.
    pub raster: Option<&'static str>,
}

/// The standard uncertainty of a peak's frequency: a share of the display step and of the line
/// width, plus a quarter of any width beyond a single line (the top of a dithered line can sit
/// anywhere on its plateau).
fn peak_sigma_hz(scan: &Scan, peaks: &[FoundPeak], p: &FoundPeak) -> f64 {
    let line = line_width_hz(scan, peaks, p.index);
    let step = local_step(scan, p.index);
    let base = (0.15 * step).max(0.02 * line);
    base + (p.width_hz - line).max(0.0) / 4.0
}

/// Frequency intervals where the trace is over its detection threshold.
fn occupied(scan: &Scan, floor: &Floor) -> Vec<(f64, f64)> {
    let mut out: Vec<(f64, f64)> = Vec::new();
    let mut open = false;
    for (i, (&f, &l)) in scan.freq_hz.iter().zip(scan.level_dbuv.iter()).enumerate() {
        let over = floor.threshold_dbuv.get(i).is_some_and(|t| l > *t);
        match (over, open, out.last_mut()) {
            (true, true, Some(last)) => last.1 = f,
            (true, _, _) => out.push((f, f)),
            _ => {}
        }
        open = over;
    }
    out
}

/// Finds the families among `peaks`.
pub fn find_families(scan: &Scan, floor: &Floor, peaks: &[FoundPeak], params: &FamilyParams) -> Vec<FamilyFit> {
    let lines: Vec<Line> = peaks
        .iter()
        .map(|p| Line {
            freq_hz: p.freq_hz,
            sigma_hz: peak_sigma_hz(scan, peaks, p),
            weight: 1.0 + p.significance_db.clamp(0.0, 20.0) / 20.0,
        })
        .collect();
    let occupied = occupied(scan, floor);
    let median_line = peaks.get(peaks.len() / 2).map_or(0.0, |p| line_width_hz(scan, peaks, p.index));
    let mut sieve = Sieve {
        lines: &lines,
        free: vec![true; lines.len()],
        min_fundamental_hz: (1.5 * median_line).max(1.0),
        occupied: &occupied,
        params: params.sieve,
    };
    let mut out = Vec::new();
    while out.len() < params.max_families {
        let Some(c) = sieve.best() else { break };
        let seen = c.hits.len();
        let ratio = seen as f64 / (seen + c.misses) as f64;
        if seen < params.min_harmonics || c.value < params.min_value || ratio < params.min_hit_ratio {
            break;
        }
        for &(i, _) in &c.hits {
            sieve.free[i] = false;
        }
        out.push(fit_of(scan, peaks, c.fundamental_hz, c.sigma_hz, c.pattern, c.hits, c.misses, None));
    }
    if let Some(r) = broadcast_raster(peaks, &lines, &sieve.free) {
        let (f0, members) = r;
        out.push(fit_of(scan, peaks, f0.step_hz, 0.0, Pattern::All, members, 0, Some(f0.name)));
    }
    out
}

fn broadcast_raster(peaks: &[FoundPeak], lines: &[Line], free: &[bool]) -> Option<(raster::Raster, Vec<(usize, u32)>)> {
    let offered: Vec<usize> = (0..peaks.len()).filter(|&i| free[i]).collect();
    let pairs: Vec<(f64, f64)> = offered.iter().map(|&i| (lines[i].freq_hz, lines[i].sigma_hz)).collect();
    let m = raster::match_raster(&pairs)?;
    let members = m.members.iter().map(|&(k, n)| (offered[k], n)).collect();
    Some((m.raster, members))
}

#[allow(clippy::too_many_arguments)]
fn fit_of(
    scan: &Scan,
    peaks: &[FoundPeak],
    f0: f64,
    sigma: f64,
    pattern: Pattern,
    members: Vec<(usize, u32)>,
    misses: usize,
    raster: Option<&'static str>,
) -> FamilyFit {
    let harmonics: Vec<Harmonic> = members
        .iter()
        .map(|&(i, n)| Harmonic { n, level_dbuv: peaks[i].level_dbuv, width_hz: peaks[i].width_hz })
        .collect();
    let line = members.first().map_or(0.0, |&(i, _)| line_width_hz(scan, peaks, peaks[i].index));
    let envelope = envelope::describe(&harmonics, f0, line);
    FamilyFit { fundamental_hz: f0, sigma_hz: sigma, pattern, members, misses, envelope, raster }
}
