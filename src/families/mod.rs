//! Harmonic families: which lines one oscillator made.
//!
//! The [`sieve`] proposes fundamentals and scores them; the best one is refined by weighted
//! least squares ([`refine`]), its lines are claimed, and the search repeats on the lines left;
//! the combs at standard crystal values it leaves are then searched with the smaller evidence a
//! named hypothesis needs.
//! [`envelope`] describes each family (slope, odd/even pattern, dither); [`raster`] claims the
//! medium-wave broadcast carriers that a sieve must not mistake for a converter.

pub mod envelope;
pub mod fingerprint;
pub mod raster;
pub mod refine;
pub mod sieve;

use crate::attribution::kind::{CRYSTAL_MATCH, CRYSTALS_HZ, crystal_match};
use crate::bandwidth::{
    BROADBAND_WIDTH_RATIO, Hump, RIPPLE_LINES, is_ripple, line_width_hz, local_step,
};
use crate::floor::Floor;
use crate::peaks::FoundPeak;
use crate::scan::Scan;
use envelope::{Envelope, Harmonic};
use sieve::{Candidate, Line, MAX_SUB_MULTIPLE, Pattern, SUB_MULTIPLE_KEEPS, Sieve, SieveParams};

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
        FamilyParams {
            sieve: SieveParams::default(),
            min_harmonics: 3,
            min_value: 2.5,
            min_hit_ratio: 0.6,
            max_families: 40,
        }
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
/// width, plus a tenth of any width beyond a single line (such an emission is placed at the
/// middle of its −6 dB extent, see [`centre_hz`]).
///
/// On a grid coarser than the RBW the bucket maximum catches a line anywhere in its bucket, so
/// the line lies uniformly within ± step/2 of the point: σ = step/√12. On a fine grid the
/// parabolic top does better (a tenth of a step or so); between the two the share is
/// interpolated.
fn peak_sigma_hz(scan: &Scan, peaks: &[FoundPeak], p: &FoundPeak) -> f64 {
    let line = line_width_hz(scan, peaks, p.index);
    let step = local_step(scan, p.index);
    let rbw = (line - step).max(step * 1e-3);
    let coarse = ((step / rbw - 0.5) / 1.5).clamp(0.0, 1.0);
    let share = 0.15 + coarse * (1.0 / 12f64.sqrt() - 0.15);
    let base = (share * step).max(0.02 * line);
    // the middle of a plateau's extent is found within about a tenth of its excess width
    base + (p.width_hz - line).max(0.0) / 10.0
}

/// Where a peak's source sits: the top for a line; for an emission wider than a line (a dithered
/// harmonic's plateau, whose top falls anywhere on it) the middle of its −6 dB extent.
fn centre_hz(scan: &Scan, peaks: &[FoundPeak], p: &FoundPeak) -> f64 {
    let line = line_width_hz(scan, peaks, p.index);
    if p.width_hz > 1.3 * line {
        0.5 * (p.left_hz + p.right_hz)
    } else {
        p.freq_hz
    }
}

/// The fundamental of a dithered family, with each member's frequency uncertainty taken from
/// the family's measured spread: `None` when fewer than two members are plateaus (wider than
/// 1.3 line widths), so no spread is measured, or when the spread is under three line widths at
/// the highest harmonic (the lines' own σ then dominates).
///
/// # Method
/// The fractional spread is the median over the plateau members of
/// `s = (W − line)/(n·f0)` (a dithered harmonic's plateau grows as n·s·f0). A member whose
/// extent covers at least half of its expected plateau keeps its σ (its centre is placed from
/// both edges). A narrower member of such a family is a fluctuation on its harmonic's plateau,
/// whose top falls anywhere on it: its position is uniform over the plateau,
/// `σ = n·s·f0/√12`, unless its own σ is larger. Then the weighted least-squares fit
/// ([`refine::fit`]) runs again on the same members.
///
/// # Source
/// The plateau growth with n follows from frequency modulation of every harmonic by the same
/// relative deviation (METHODS.md §9, spread spectrum); the standard deviation of a uniform
/// distribution of width W is W/√12 (any statistics text).
fn dithered_refit(
    hits: &[(usize, u32)],
    lines: &[Line],
    line_of: impl Fn(usize) -> f64,
) -> Option<(f64, f64)> {
    let f0 = {
        let members: Vec<refine::Member> = hits
            .iter()
            .map(|&(i, n)| refine::Member {
                n,
                freq_hz: lines[i].freq_hz,
                sigma_hz: lines[i].sigma_hz,
            })
            .collect();
        refine::fit(&members)?.fundamental_hz
    };
    let mut spreads: Vec<f64> = hits
        .iter()
        .filter(|&&(i, _)| lines[i].width_hz > 1.3 * line_of(i))
        .map(|&(i, n)| (lines[i].width_hz - line_of(i)) / (f64::from(n) * f0))
        .collect();
    if spreads.len() < 2 {
        return None;
    }
    let s = crate::floor::quantile_in_place(&mut spreads, 0.5);
    let top = hits.iter().map(|&(_, n)| n).max()?;
    let top_line = hits.iter().map(|&(i, _)| line_of(i)).fold(0.0, f64::max);
    if f64::from(top) * s * f0 < 3.0 * top_line {
        return None;
    }
    let members: Vec<refine::Member> = hits
        .iter()
        .map(|&(i, n)| {
            let plateau = f64::from(n) * s * f0;
            let whole = lines[i].width_hz - line_of(i) >= 0.5 * plateau;
            refine::Member {
                n,
                freq_hz: lines[i].freq_hz,
                sigma_hz: if whole {
                    lines[i].sigma_hz
                } else {
                    lines[i].sigma_hz.max(plateau / 12f64.sqrt())
                },
            }
        })
        .collect();
    refine::fit(&members).map(|f| (f.fundamental_hz, f.sigma_hz))
}

/// Frequency intervals where the trace is over its detection threshold, each point standing
/// for its display bucket (half-way to its neighbours): on a grid coarser than the RBW a line
/// anywhere in the bucket shows at the point, so a harmonic predicted there is not absent.
fn occupied(scan: &Scan, floor: &Floor) -> Vec<(f64, f64)> {
    let f = &scan.freq_hz;
    let n = f.len();
    let mut out: Vec<(f64, f64)> = Vec::new();
    for (i, &l) in scan.level_dbuv.iter().enumerate() {
        if !floor.threshold_dbuv.get(i).is_some_and(|t| l > *t) {
            continue;
        }
        // the point stands for its display bucket: half-way to each neighbour
        let lo = if i > 0 { 0.5 * (f[i - 1] + f[i]) } else { f[i] };
        let hi = if i + 1 < n {
            0.5 * (f[i] + f[i + 1])
        } else {
            f[i]
        };
        match out.last_mut() {
            Some(last) if lo <= last.1 => last.1 = hi,
            _ => out.push((lo, hi)),
        }
    }
    out
}

/// How the sieve sees the peaks. A hump (a dithered harmonic shows as one) offers a single line,
/// the plateau's ([`hump_parts`]), placed at the hump's centre with an uncertainty of a twentieth
/// of its width plus a quarter of a line width (the edges of a plateau are found within about a
/// line width); the steady lines standing out of it are offered as themselves, its other peaks
/// are not offered. Returns the lines, which are free, and the width each line stands for.
fn offered_lines(
    scan: &Scan,
    peaks: &[FoundPeak],
    humps: &[Hump],
) -> (Vec<Line>, Vec<bool>, Vec<f64>) {
    let mut lines: Vec<Line> = peaks
        .iter()
        .map(|p| Line {
            freq_hz: centre_hz(scan, peaks, p),
            sigma_hz: peak_sigma_hz(scan, peaks, p),
            weight: 1.0 + p.significance_db.clamp(0.0, 20.0) / 20.0,
            strength_db: p.significance_db,
            width_hz: p.width_hz,
        })
        .collect();
    let mut free = vec![true; peaks.len()];
    let mut widths: Vec<f64> = peaks.iter().map(|p| p.width_hz).collect();
    join_notched_plateaus(scan, peaks, &mut lines, &mut free, &mut widths);
    for h in humps {
        let parts = hump_parts(scan, peaks, h);
        let Some(top) = parts.plateau else {
            continue;
        };
        for &i in &parts.hidden {
            free[i] = false;
        }
        let width = h.stop_hz - h.start_hz;
        let line = line_width_hz(scan, peaks, peaks[top].index);
        free[top] = true;
        lines[top].freq_hz = plateau_centre(scan, peaks, h, &parts.standing);
        lines[top].sigma_hz = 0.05 * width + 0.25 * line;
        lines[top].width_hz = width;
        widths[top] = width;
    }
    (lines, free, widths)
}

/// The peaks inside a hump, as the families see them.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct HumpParts {
    /// The peak that stands for the plateau itself.
    pub plateau: Option<usize>,
    /// Steady lines standing out of the plateau: other oscillators' harmonics on it.
    pub standing: Vec<usize>,
    /// The plateau's other peaks, which are part of it.
    pub hidden: Vec<usize>,
}

/// Splits the peaks inside hump `h` (indices into `peaks`). A peak of a line's width (not a
/// ripple) at least [`STANDOUT_DB`] over the median of the hump's trace is a steady line
/// standing out of the plateau (a carrier shows with the RBW filter's width, common practice;
/// a plateau's fluctuations are narrower or no higher than the plateau). The plateau is shown
/// by its highest remaining peak not shaped like a line (broader than a line, or narrower than
/// [`RIPPLE_LINES`] of one), else by its highest remaining peak: a line-shaped peak there is
/// more likely another source's weaker harmonic, and the family that claims the plateau claims
/// that peak in the report.
pub fn hump_parts(scan: &Scan, peaks: &[FoundPeak], h: &Hump) -> HumpParts {
    let plateau_level = median_level(scan, h.start_hz, h.stop_hz);
    let line_shaped = |p: &FoundPeak| {
        let line = line_width_hz(scan, peaks, p.index);
        p.width_hz <= BROADBAND_WIDTH_RATIO * line && p.width_hz >= RIPPLE_LINES * line
    };
    let (standing, rest): (Vec<usize>, Vec<usize>) = (0..peaks.len())
        .filter(|&i| peaks[i].freq_hz >= h.start_hz && peaks[i].freq_hz <= h.stop_hz)
        .partition(|&i| {
            let p = &peaks[i];
            p.width_hz <= BROADBAND_WIDTH_RATIO * line_width_hz(scan, peaks, p.index)
                && !is_ripple(scan, peaks, p)
                && p.level_dbuv - plateau_level >= STANDOUT_DB
        });
    let highest = |only_plateau_shaped: bool| {
        rest.iter()
            .copied()
            .filter(|&i| !(only_plateau_shaped && line_shaped(&peaks[i])))
            .max_by(|&a, &b| peaks[a].level_dbuv.total_cmp(&peaks[b].level_dbuv))
    };
    let plateau = highest(true).or_else(|| highest(false));
    let hidden = rest.into_iter().filter(|&i| Some(i) != plateau).collect();
    HumpParts {
        plateau,
        standing,
        hidden,
    }
}

/// Centre of a hump's plateau: the power-weighted mean frequency of its points, where a point
/// within a line width of a steady line standing on it takes the level of the nearest point
/// before it that is not (another source's line, and the sidebands that may come with it,
/// would pull the centre their way; the plateau goes on under it). A flat plateau's centre is
/// its middle.
fn plateau_centre(scan: &Scan, peaks: &[FoundPeak], h: &Hump, standing: &[usize]) -> f64 {
    let middle = 0.5 * (h.start_hz + h.stop_hz);
    if standing.is_empty() {
        return middle;
    }
    let range = points_within(scan, h.start_hz, h.stop_hz);
    let own: Vec<Option<f64>> = range
        .clone()
        .map(|k| {
            let f = scan.freq_hz[k];
            let near_line = standing.iter().any(|&i| {
                (f - peaks[i].freq_hz).abs() <= line_width_hz(scan, peaks, peaks[i].index)
            });
            (!near_line).then_some(scan.level_dbuv[k])
        })
        .collect();
    // a hole at the start takes the first level after it
    let Some(mut held) = own.iter().flatten().next().copied() else {
        return middle;
    };
    // powers relative to the highest level: no overflow whatever the unit's offset
    let top = own
        .iter()
        .flatten()
        .copied()
        .fold(f64::NEG_INFINITY, f64::max);
    let (mut sum_w, mut sum_wf) = (0.0, 0.0);
    for (k, level) in range.zip(own) {
        held = level.unwrap_or(held);
        let w = 10f64.powf((held - top) / 10.0);
        sum_w += w;
        sum_wf += w * scan.freq_hz[k];
    }
    if sum_w > 0.0 { sum_wf / sum_w } else { middle }
}

/// Median trace level over the points from `lo` to `hi` (Hz); −∞ when none lies there.
fn median_level(scan: &Scan, lo: f64, hi: f64) -> f64 {
    let range = points_within(scan, lo, hi);
    if range.is_empty() {
        return f64::NEG_INFINITY;
    }
    let mut levels: Vec<f64> = range.map(|k| scan.level_dbuv[k]).collect();
    crate::floor::quantile_in_place(&mut levels, 0.5)
}

/// Indices of the points from `lo` to `hi` (Hz), both included (by bisection: the points lie
/// in ascending frequency).
fn points_within(scan: &Scan, lo: f64, hi: f64) -> std::ops::Range<usize> {
    let Some(f) = scan.freq_hz.as_slice() else {
        return 0..0;
    };
    let a = f.partition_point(|&x| x < lo);
    a..f.partition_point(|&x| x <= hi).max(a)
}

/// Level, dB over the median of a hump's trace, from which a steady line inside the hump is
/// offered as a line of its own (measured on seeds 1-600, recall / precision / top-1: without
/// the rule 0.715 / 0.879 / 0.707; 6 dB 0.729 / 0.867 / 0.724, 8 dB 0.727 / 0.874 / 0.721,
/// 10 dB 0.727 / 0.880 / 0.719, 12 dB 0.723 / 0.874 / 0.719, 15 dB 0.718 / 0.873 / 0.710).
const STANDOUT_DB: f64 = 10.0;

/// Broad emissions (wider than [`BROAD_LINES`] line widths) whose −6 dB extents lie less than
/// [`NOTCH_LINES`] line widths apart are one plateau split by a notch (a dithered harmonic's
/// spectrum has deep, narrow notches): the sieve sees one line for them, the highest peak,
/// placed at the middle of their joint extent with the uncertainty of a plateau of that width
/// ([`peak_sigma_hz`] of the joint extent); the others are not offered. Narrow lines are never
/// joined, so two close sources stay two lines.
fn join_notched_plateaus(
    scan: &Scan,
    peaks: &[FoundPeak],
    lines: &mut [Line],
    free: &mut [bool],
    widths: &mut [f64],
) {
    let line_of = |p: &FoundPeak| line_width_hz(scan, peaks, p.index);
    let part = |p: &FoundPeak| p.width_hz > BROAD_LINES * line_of(p) || is_ripple(scan, peaks, p);
    let mut i = 0;
    while i < peaks.len() {
        if !part(&peaks[i]) {
            i += 1;
            continue;
        }
        // the run of plateau parts, each within a notch of the previous extent
        let (mut j, mut right) = (i, peaks[i].right_hz);
        while let Some(q) = peaks.get(j + 1) {
            if !part(q) || q.left_hz - right > NOTCH_LINES * line_of(q) {
                break;
            }
            right = right.max(q.right_hz);
            j += 1;
        }
        if j > i {
            let top = (i..=j)
                .max_by(|&a, &b| peaks[a].level_dbuv.total_cmp(&peaks[b].level_dbuv))
                .unwrap_or(i);
            let joint = FoundPeak {
                left_hz: peaks[i].left_hz,
                right_hz: right,
                width_hz: right - peaks[i].left_hz,
                ..peaks[top].clone()
            };
            free[i..=j].fill(false);
            free[top] = true;
            lines[top].freq_hz = 0.5 * (joint.left_hz + joint.right_hz);
            lines[top].sigma_hz = peak_sigma_hz(scan, peaks, &joint);
            lines[top].width_hz = joint.width_hz;
            widths[top] = joint.width_hz;
        }
        i = j + 1;
    }
}

/// Width, in line widths, over which an emission is broad enough to be part of a plateau.
const BROAD_LINES: f64 = 2.0;

/// Widest notch, in line widths, that a plateau is joined across (measured on seeds 1-600
/// against 1.5: precision 0.864 -> 0.870, recall 0.706 -> 0.706, top-1 unchanged).
const NOTCH_LINES: f64 = 3.0;

/// Lowest fundamental, in line widths (the RBW's −6 dB width plus a display step), that shows
/// as lines (measured on seeds 1-600, recall / precision / top-1: 1.5 gives 0.727 / 0.882 /
/// 0.719, 1.2 and 1.0 0.731 / 0.887 / 0.719; a comb 1.2 to 1.5 line widths apart was found at
/// twice its fundamental).
const MIN_FUNDAMENTAL_LINES: f64 = 1.0;

/// Finds the families among `peaks` and `humps`.
pub fn find_families(
    scan: &Scan,
    floor: &Floor,
    peaks: &[FoundPeak],
    humps: &[Hump],
    in_ambient: &[bool],
    params: &FamilyParams,
) -> Vec<FamilyFit> {
    let (lines, free, widths) = offered_lines(scan, peaks, humps);
    let occupied = occupied(scan, floor);
    let median_line = peaks
        .get(peaks.len() / 2)
        .map_or(0.0, |p| line_width_hz(scan, peaks, p.index));
    let mut sieve = Sieve {
        lines: &lines,
        free,
        // lines a −6 dB width apart still show as two peaks with a dip between them (common
        // practice); a comb any finer is a hump
        min_fundamental_hz: (MIN_FUNDAMENTAL_LINES * median_line).max(1.0),
        occupied: &occupied,
        params: params.sieve,
    };
    let claims = Claims {
        widths: &widths,
        peaks,
        lines: &lines,
        occupied: &occupied,
        bridge_hz: 1.5 * median_line,
    };
    let mut found: Vec<Candidate> = Vec::new();
    let mut rounds = 0;
    while found.len() < params.max_families && rounds < 4 * params.max_families {
        rounds += 1;
        let Some(c) = sieve.best() else { break };
        let c = sieve.best_sub_multiple(c, params.min_hit_ratio);
        let c = sieve
            .split_common_divisor(&c, params.min_hit_ratio, params.min_value)
            .unwrap_or(c);
        if !is_family(&c, &sieve, params) {
            break;
        }
        claims.take(&mut found, &mut sieve, c);
    }
    let narrow_lines: Vec<bool> = (0..peaks.len())
        .map(|i| widths[i] <= BROADBAND_WIDTH_RATIO * line_width_hz(scan, peaks, peaks[i].index))
        .collect();
    crystal_families(
        &mut found,
        &mut sieve,
        &claims,
        params,
        &narrow_lines,
        median_line,
        (scan.freq_hz[0], scan.freq_hz[scan.freq_hz.len() - 1]),
    );
    merge_multiples(&mut found, &sieve, peaks, params.min_hit_ratio);
    let mut out: Vec<FamilyFit> = found
        .into_iter()
        .map(|c| {
            let line_of = |i: usize| line_width_hz(scan, peaks, peaks[i].index);
            let (f0, sigma) = dithered_refit(&c.hits, &lines, line_of)
                .unwrap_or((c.fundamental_hz, c.reported_sigma_hz));
            fit_of(
                scan, peaks, &widths, f0, sigma, c.pattern, c.hits, c.misses, None,
            )
        })
        .collect();
    let narrow: Vec<bool> = peaks
        .iter()
        .map(|p| p.width_hz <= 1.6 * line_width_hz(scan, peaks, p.index))
        .collect();
    for (service, members) in broadcast(peaks, &lines, &sieve.free, &narrow, in_ambient) {
        out.push(fit_of(
            scan,
            peaks,
            &widths,
            service.step_hz,
            0.0,
            Pattern::All,
            members,
            0,
            Some(service.name),
        ));
    }
    out
}

/// What a search round needs to take a family's lines: the lines' extents (a hump's for its
/// plateau line), the peaks, the lines offered, where the trace shows anything, and the gap
/// that still joins two stretches of it ([`near_duplicate`]).
struct Claims<'a> {
    widths: &'a [f64],
    peaks: &'a [FoundPeak],
    lines: &'a [Line],
    occupied: &'a [(f64, f64)],
    bridge_hz: f64,
}

impl Claims<'_> {
    /// Takes family `c`: its intruders leave it, its lines are claimed, and it joins the
    /// families found unless it is an earlier family's far harmonics ([`absorb`]) or a fragment
    /// of one ([`near_duplicate`]).
    fn take(&self, found: &mut Vec<Candidate>, sieve: &mut Sieve, mut c: Candidate) {
        drop_intruders(&mut c.hits, self.widths);
        drop_bright_intruders(&mut c.hits, self.peaks);
        for &(i, _) in &c.hits {
            sieve.free[i] = false;
        }
        if !absorb(found, &c, self.lines, self.peaks)
            && !near_duplicate(found, &c, self.lines, self.occupied, self.bridge_hz)
        {
            found.push(c);
        }
    }
}

/// The chance under which a comb at a standard crystal value is a family (its chance times the
/// stretches of its length the scan holds), against the search's [`SieveParams::max_chance`]
/// for a fundamental found anywhere (measured on seeds 1-600, recall / precision / top-1:
/// without the search 0.729 / 0.911 / 0.726 and with it 0.746 / 0.909 / 0.738, the search's
/// own limit at 2e-5 both times; the bare chance, without the stretches, under 1e-3 gives
/// 0.746 / 0.909 / 0.738 as well but makes four combs at crystal values from forty scenes of
/// a hundred unrelated lines, against two now).
const CRYSTAL_CHANCE: f64 = 3e-3;

/// A crystal's comb is searched for only this many line widths apart and more: a finer comb
/// catches a line in every few line widths, so each hit says little and noise maxima, which
/// come about a line width apart, pass for harmonics (measured on seeds 1-600: without the
/// condition two 32.768 kHz combs of noise maxima and others' lines, 0.746 / 0.907 / 0.738;
/// with it none, 0.746 / 0.909 / 0.738).
const CRYSTAL_MIN_LINES: f64 = 4.0;

/// The clocks the general search leaves: a comb at a standard crystal value
/// ([`CRYSTALS_HZ`], METHODS §10) that chance explains less often than [`CRYSTAL_CHANCE`].
///
/// The general search tries thousands of fundamentals, so it asks for a chance under
/// [`SieveParams::max_chance`]; the crystal values are a few dozen hypotheses named before
/// the trace is seen, and a comb at one of them needs that much less evidence (the same
/// family-wise error spread over fewer trials: a Bonferroni bound). A radiated clock often
/// shows only three or four harmonics over the floor among many other lines, too few for the
/// general search. Each value is scored at the value itself (uncertainty half of
/// [`CRYSTAL_MATCH`]) for every harmonic and for odd harmonics only, on narrow lines only (a
/// crystal's harmonics are as narrow as the RBW; a dithered converter's plateaus are not,
/// common practice); the fundamental is then refined by least squares when the refined comb
/// still passes and stays within [`CRYSTAL_MATCH`] of the value. The most significant comb is
/// taken first, and the search repeats until none passes.
///
/// # Source
/// Crystal values: METHODS §10. The bound: Bonferroni's inequality (the chance that any of m
/// tests passes by chance is at most m times the level of each).
fn crystal_families(
    found: &mut Vec<Candidate>,
    sieve: &mut Sieve,
    claims: &Claims,
    params: &FamilyParams,
    narrow: &[bool],
    median_line: f64,
    span: (f64, f64),
) {
    // only narrow lines are offered; the others are given back at the end
    let wide: Vec<usize> = (0..narrow.len())
        .filter(|&i| !narrow[i] && sieve.free[i])
        .collect();
    for &i in &wide {
        sieve.free[i] = false;
    }
    let lowest = sieve
        .min_fundamental_hz
        .max(CRYSTAL_MIN_LINES * median_line);
    while found.len() < params.max_families {
        let mut best: Option<(f64, Candidate)> = None;
        for &x in CRYSTALS_HZ.iter().filter(|&&x| x >= lowest) {
            for pattern in [Pattern::All, Pattern::OddOnly] {
                let Some((chance, c)) = crystal_comb(sieve, params, x, pattern, span) else {
                    continue;
                };
                if best.as_ref().is_none_or(|b| chance < b.0) {
                    best = Some((chance, c));
                }
            }
        }
        let Some((_, c)) = best else { break };
        claims.take(found, sieve, c);
    }
    for &i in &wide {
        sieve.free[i] = true;
    }
}

/// The comb at crystal value `x` under `pattern` with its chance, when it is a family that
/// chance explains less often than [`CRYSTAL_CHANCE`] (see [`crystal_families`]).
fn crystal_comb(
    sieve: &Sieve,
    params: &FamilyParams,
    x: f64,
    pattern: Pattern,
    span: (f64, f64),
) -> Option<(f64, Candidate)> {
    // the run is the best stretch of the harmonics the scan holds: the chance of one stretch
    // times the stretches of its length there
    let in_scan = ((span.1 / x).floor() - (span.0 / x).ceil() + 1.0).max(1.0);
    let passes = |c: &Candidate| {
        let (Some(first), Some(last)) = (c.hits.first(), c.hits.last()) else {
            return None;
        };
        let stretches = (in_scan / f64::from(last.1 - first.1 + 1)).max(1.0);
        let chance = sieve.chance(c) * stretches;
        (is_family(c, sieve, params) && chance < CRYSTAL_CHANCE).then_some(chance)
    };
    let sigma = 0.5 * CRYSTAL_MATCH * x;
    let at = sieve.score(x, sigma, pattern);
    let chance = passes(&at)?;
    let refined = sieve.refined(x, sigma, pattern);
    match passes(&refined) {
        Some(c) if (refined.fundamental_hz - x).abs() <= CRYSTAL_MATCH * x => Some((c, refined)),
        _ => Some((chance, at)),
    }
}

/// Whether the family at `high` is the family at `low` seen again: its fundamental is k·f0 of
/// `low` (k = 2 … [`MAX_SUB_MULTIPLE`]) within three of their joint uncertainties, and either
/// `low` holds its harmonics (members of `low` sit at k·n for at least [`HELD_SHARE`] of the
/// share of `low`'s own run it fills, over the slots n from `high`'s first hit to its last:
/// `high` is made of lines `low` left over, a second emission on top of its harmonics), or its
/// lines do not stand out over the harmonics of `low` around them (the median of their excess
/// over the median level of `low`'s nearest members, three on each side, is at most
/// [`BRIGHT_INTRUDER_DB`]).
///
/// The search claims the strongest family first; a converter whose every third harmonic stands
/// out of a floor that hides the rest is found at 3·f0, and its other harmonics come back later
/// as a family at f0 (an odd-only one when 2·f0 took the even harmonics). Two oscillators
/// locked at k:1 within a few ppm are one source for the report; a second oscillator at k·f0
/// whose lines rise above the first one's envelope (a 50 MHz clock over a 25 MHz one's even
/// harmonics) stays apart.
fn multiple_of(low: &Candidate, high: &Candidate, lines: &[Line], peaks: &[FoundPeak]) -> bool {
    let ratio = high.fundamental_hz / low.fundamental_hz;
    let k = ratio.round();
    if !(2.0..=f64::from(MAX_SUB_MULTIPLE)).contains(&k) {
        return false;
    }
    let sigma = |c: &Candidate| c.reported_sigma_hz.max(c.sigma_hz * 1e-3);
    let tol = 3.0 * (k * sigma(low)).hypot(sigma(high));
    if (high.fundamental_hz - k * low.fundamental_hz).abs() > tol {
        return false;
    }
    // most of its harmonics are members of `low` already: its own few lines are what `low`
    // left over, however bright
    if let (Some(first), Some(last)) = (high.hits.first(), high.hits.last()) {
        let step = if high.pattern == Pattern::OddOnly {
            2
        } else {
            1
        };
        let k = k as u32;
        let slots: Vec<u32> = (first.1..=last.1).step_by(step).collect();
        let held = slots
            .iter()
            .filter(|&&n| low.hits.binary_search_by_key(&(k * n), |h| h.1).is_ok())
            .count();
        let fill = match (low.hits.first(), low.hits.last()) {
            (Some(a), Some(b)) => low.hits.len() as f64 / f64::from(b.1 - a.1 + 1),
            _ => 0.0,
        };
        if held as f64 >= HELD_SHARE * fill * slots.len() as f64 {
            return true;
        }
    }
    let mut excess: Vec<f64> = high
        .hits
        .iter()
        .filter_map(|&(i, _)| {
            let n = (lines[i].freq_hz / low.fundamental_hz).round() as u32;
            let at = low.hits.partition_point(|h| h.1 < n);
            let lo = at.saturating_sub(3);
            let hi = (at + 3).min(low.hits.len());
            let mut around: Vec<f64> = low.hits[lo..hi]
                .iter()
                .filter(|h| h.1 != n)
                .map(|h| peaks[h.0].level_dbuv)
                .collect();
            (!around.is_empty())
                .then(|| peaks[i].level_dbuv - crate::floor::quantile_in_place(&mut around, 0.5))
        })
        .collect();
    if !excess.is_empty() && crate::floor::quantile_in_place(&mut excess, 0.5) > BRIGHT_INTRUDER_DB
    {
        return false;
    }
    true
}

/// Share (relative to the sub-multiple family's own fill) of a family's harmonic slots held by
/// members of a family at its sub-multiple over which it is that family seen again, whatever
/// its brightness ([`multiple_of`]; measured on seeds 1-600, recall / precision / top-1: without
/// the rule 0.727 / 0.879 / 0.719, 0.3 and 0.5 0.727 / 0.882 / 0.717, 0.7 0.727 / 0.882 /
/// 0.719, 0.85 0.727 / 0.881 / 0.719).
const HELD_SHARE: f64 = 0.7;

/// The lines `union` as one comb of every harmonic near `f0`: each takes its harmonic number
/// at `f0` (the closest line per number), the fundamental is refitted by weighted least squares
/// and the comb is scored over the whole span of the lines ([`Sieve::candidate_of`]: the
/// families it joins each passed the search's tests, so it is not cut into runs again).
fn joint_family(sieve: &Sieve, union: &[usize], f0: f64) -> Option<Candidate> {
    let mut by_n: Vec<(u32, usize, f64)> = union
        .iter()
        .map(|&i| {
            let f = sieve.lines[i].freq_hz;
            let n = (f / f0).round().max(1.0);
            (n as u32, i, (f - n * f0).abs())
        })
        .collect();
    by_n.sort_by(|a, b| a.0.cmp(&b.0).then(a.2.total_cmp(&b.2)));
    by_n.dedup_by_key(|h| h.0);
    let members: Vec<refine::Member> = by_n
        .iter()
        .map(|&(n, i, _)| refine::Member {
            n,
            freq_hz: sieve.lines[i].freq_hz,
            sigma_hz: sieve.lines[i].sigma_hz,
        })
        .collect();
    let fit = refine::fit(&members)?;
    let hits = by_n.iter().map(|&(n, i, _)| (i, n)).collect();
    Some(sieve.candidate_of(
        hits,
        fit.fundamental_hz,
        fit.stated_sigma_hz,
        fit.sigma_hz,
        Pattern::All,
    ))
}

/// Joins the families that are one oscillator found more than once ([`multiple_of`]): the
/// lines of a family and of every family at a multiple of its fundamental are scored again as
/// one comb of every harmonic of the lower fundamental ([`joint_family`]), and the joint family
/// replaces them when it keeps [`SUB_MULTIPLE_KEEPS`] of their lines and sees at least
/// `min_hit_ratio` of the harmonics it predicts (so an odd-only comb does not become an
/// every-harmonic one with half of them missing), not counting stretches of more than the
/// search's gap of absent harmonics in a row ([`misses_where_alive`]: a converter seen from its
/// first harmonics and again, far up, at its even harmonics where the duty's nulls took the odd
/// ones, with the floor hiding the harmonics between; measured on seeds 1-600, recall /
/// precision / top-1 0.746 / 0.909 / 0.738 counting them, 0.746 / 0.911 / 0.740 not). For
/// two crystal values k:1 apart they count.
fn merge_multiples(
    found: &mut Vec<Candidate>,
    sieve: &Sieve,
    peaks: &[FoundPeak],
    min_hit_ratio: f64,
) {
    let mut a = 0;
    while a < found.len() {
        let multiples: Vec<usize> = (0..found.len())
            .filter(|&b| {
                b != a
                    && found[b].fundamental_hz > found[a].fundamental_hz
                    && multiple_of(&found[a], &found[b], sieve.lines, peaks)
            })
            .collect();
        if multiples.is_empty() {
            a += 1;
            continue;
        }
        let union: Vec<usize> = std::iter::once(a)
            .chain(multiples.iter().copied())
            .flat_map(|k| found[k].hits.iter().map(|h| h.0))
            .collect();
        let joint = joint_family(sieve, &union, found[a].fundamental_hz).filter(|j| {
            let kept = union
                .iter()
                .filter(|&&i| j.hits.iter().any(|h| h.0 == i))
                .count();
            let seen = j.hits.len() as f64;
            // a comb of every harmonic made of two parts, each a family the search took, is
            // judged as the search judges a run: a stretch of absent harmonics longer than its
            // gap between the parts is where the comb sank into the floor. Two crystal values
            // k:1 apart keep the strict count: two crystals on one board (4 and 12 MHz) are
            // common, and their lines coincide
            let misses = if crystal_match(j.fundamental_hz).is_some() {
                j.misses
            } else {
                misses_where_alive(sieve, j)
            };
            kept as f64 >= SUB_MULTIPLE_KEEPS * union.len() as f64
                && seen >= min_hit_ratio * (seen + misses as f64)
        });
        let Some(joint) = joint else {
            a += 1;
            continue;
        };
        found[a] = joint;
        let mut gone = multiples;
        gone.sort_unstable_by(|x, y| y.cmp(x));
        for b in gone {
            found.remove(b);
            if b < a {
                a -= 1;
            }
        }
    }
}

/// The clearly absent harmonics of a candidate outside the stretches of more than the search's
/// gap of them in a row (slots where the trace shows something else neither end nor lengthen
/// a stretch, as in the search's runs).
fn misses_where_alive(sieve: &Sieve, c: &Candidate) -> usize {
    let (mut stretch, mut counted) = (0usize, 0usize);
    for (_, state) in sieve.slot_states(c) {
        match state {
            Some(true) => {
                if stretch <= sieve.params.max_gap {
                    counted += stretch;
                }
                stretch = 0;
            }
            Some(false) => stretch += 1,
            None => {}
        }
    }
    counted
}

/// Whether a candidate is a family: at least `min_harmonics` members, a value of at least
/// `min_value`, and `min_hit_ratio` of the harmonics it predicts seen, or, for an
/// every-harmonic candidate, of its odd harmonics (a pulse train near 50 % duty has even
/// harmonics 10 dB and more under their odd neighbours, |sin(π·n·d)| with d ≈ 0.5 (METHODS §5),
/// so many of them are expected to sink under the threshold; its sub-multiple f0/2 sees none of
/// its odd slots and stays out).
fn is_family(c: &Candidate, sieve: &Sieve, params: &FamilyParams) -> bool {
    let seen = c.hits.len();
    if seen < params.min_harmonics || c.value < params.min_value {
        return false;
    }
    let ratio = seen as f64 / (seen + c.misses) as f64;
    if ratio >= params.min_hit_ratio {
        return true;
    }
    let (odd_hits, odd_misses) = sieve.odd_slots(c);
    if c.pattern == Pattern::All
        && odd_hits >= params.min_harmonics
        && odd_hits as f64 >= params.min_hit_ratio * (odd_hits + odd_misses) as f64
    {
        return true;
    }
    c.pattern == Pattern::All
        && duty_nulls(&sieve.slot_states(c)).is_some_and(|(_, excused)| {
            seen as f64 >= params.min_hit_ratio * (seen + c.misses.saturating_sub(excused)) as f64
        })
}

/// A harmonic where |sin(π·n·D)| is under this lies in a null of the pulse train's spectrum.
const NULL_SIN: f64 = 0.3;
/// The nulls must explain the absent harmonics with a chance under this (over all duties tried;
/// measured on seeds 1-600, recall / precision / top-1: 0.01 gives 0.715 / 0.877 / 0.707,
/// 0.001 gives 0.715 / 0.879 / 0.707, without the rule 0.714 / 0.880 / 0.705).
const NULL_CHANCE: f64 = 0.001;

/// The duty D whose spectral nulls explain a candidate's absent harmonics, and how many of them
/// it explains: a pulse train of duty D has harmonics ∝ |sin(π·n·D)|/n (METHODS §5), so the
/// harmonics near n = k/D sink under the threshold first (a flyback at D ≈ 0.3 loses about
/// every third). For each D from 0.05 to 0.5 (in steps of 0.1/n_max, between 1e-4 and 0.005,
/// so that the nulls move by at most a tenth of a harmonic at the highest slot n_max) the slots
/// (hit or clearly absent) with |sin(π·n·D)| < [`NULL_SIN`] are the nulls; if the absent
/// harmonics fell at random among the slots, the number of them in the nulls would follow the
/// hypergeometric law. The D whose count is least likely so wins (the middle of a run of
/// neighbouring duties with the same nulls), when that chance, times the number of duties
/// tried, is under [`NULL_CHANCE`]; the absent harmonics in its nulls are then expected, not
/// evidence against the family.
///
/// # Formula
/// ```text
/// P(X ≥ m_null),  X ~ Hypergeometric(slots, absent, null slots)
/// ```
/// # Source
/// The trapezoid spectrum of METHODS §5; the hypergeometric tail is the exact test of an
/// over-representation of absent slots among null slots (Fisher's exact test, one-sided).
fn duty_nulls(slots: &[(u32, Option<bool>)]) -> Option<(f64, usize)> {
    use statrs::distribution::{DiscreteCDF, Hypergeometric};
    let judged: Vec<(u32, bool)> = slots
        .iter()
        .filter_map(|&(n, s)| s.map(|hit| (n, hit)))
        .collect();
    let absent = judged.iter().filter(|j| !j.1).count() as u64;
    if absent == 0 {
        return None;
    }
    let top = judged.iter().map(|j| j.0).max().unwrap_or(1);
    // fine enough that the nulls move by a tenth of a harmonic at the highest slot
    let step = (0.1 / f64::from(top)).clamp(1e-4, 0.005);
    let count = (0.45 / step).round() as usize + 1;
    let tried = count as f64;
    let duties = (0..count).map(|k| 0.05 + k as f64 * step);
    // |sin(π·n·D)| < NULL_SIN ⇔ n·D within w of an integer
    let w = NULL_SIN.asin() / std::f64::consts::PI;
    // (chance, first and last duty of the run of duties with that chance, absent in nulls)
    let mut best: Option<(f64, f64, f64, usize)> = None;
    for d in duties {
        let null = |n: u32| {
            let x = f64::from(n) * d;
            (x - x.round()).abs() < w
        };
        let nulls = judged.iter().filter(|j| null(j.0)).count() as u64;
        let in_nulls = judged.iter().filter(|j| !j.1 && null(j.0)).count();
        // only an over-representation of absent slots in the nulls can explain them
        if in_nulls == 0 || (in_nulls as u64) * (judged.len() as u64) <= absent * nulls {
            continue;
        }
        let law = Hypergeometric::new(judged.len() as u64, absent, nulls).ok()?;
        let chance = law.sf(in_nulls as u64 - 1);
        match &mut best {
            // neighbouring duties with the same nulls: the duty is the middle of their run
            Some(b) if chance == b.0 && in_nulls == b.3 && d - b.2 < 1.5 * step => b.2 = d,
            Some(b) if chance >= b.0 => {}
            _ => best = Some((chance, d, d, in_nulls)),
        }
    }
    best.filter(|b| b.0 * tried < NULL_CHANCE)
        .map(|b| (0.5 * (b.1 + b.2), b.3))
}

/// A fundamental within this share of an earlier family's may be a fragment of that family:
/// the lines of a dithered source, each plateau split into several tops, give several
/// near-equal fundamentals.
const DUPLICATE_SHARE: f64 = 0.03;

/// Whether `c` is a fragment of an earlier family: its fundamental lies within
/// [`DUPLICATE_SHARE`] of that family's and most of its lines lie inside that family's emissions
/// (within half of their −6 dB extent, which for a dithered harmonic grows with its number, plus
/// three uncertainties, or in one stretch over the threshold with them, see [`one_emission`]),
/// or its harmonic numbers overlap less than half of their own range with the family's (the
/// fragments of one comb are short runs side by side). Two converters a few per cent apart,
/// each with narrow lines over the same harmonic numbers, are two families. A fragment's lines
/// stay claimed, so they do not come back as another fragment.
fn near_duplicate(
    found: &[Candidate],
    c: &Candidate,
    lines: &[Line],
    occupied: &[(f64, f64)],
    bridge_hz: f64,
) -> bool {
    found.iter().any(|f| {
        let ratio = c.fundamental_hz / f.fundamental_hz;
        if (ratio - 1.0).abs() >= DUPLICATE_SHARE {
            return false;
        }
        // the family's emissions: relative width per harmonic number (median over its members)
        let mut rel: Vec<f64> = f
            .hits
            .iter()
            .map(|&(i, n)| lines[i].width_hz / f64::from(n))
            .collect();
        let per_n = crate::floor::quantile_in_place(&mut rel, 0.5);
        let inside = c
            .hits
            .iter()
            .filter(|&&(i, _)| {
                let l = &lines[i];
                let m = (l.freq_hz / f.fundamental_hz).round().max(1.0);
                let half = 0.5 * (m * per_n).max(l.width_hz);
                let tol = 3.0 * l.sigma_hz.hypot(m * f.sigma_hz);
                (l.freq_hz - m * f.fundamental_hz).abs() <= half + tol
                    || one_emission(occupied, l.freq_hz, m * f.fundamental_hz, bridge_hz)
            })
            .count();
        // two oscillators a few per cent apart both show over the same harmonic numbers; the
        // fragments of one comb lie side by side, each a short run of its own
        let span = |h: &[(usize, u32)]| (h.first().map_or(0, |x| x.1), h.last().map_or(0, |x| x.1));
        let (a, b) = (span(&c.hits), span(&f.hits));
        let overlap = a.1.min(b.1).saturating_sub(a.0.max(b.0));
        let side_by_side = 2 * overlap < a.1 - a.0;
        2 * inside >= c.hits.len() || side_by_side
    })
}

/// Whether frequencies `a` and `b` lie in one stretch over the threshold, across dips narrower
/// than `bridge_hz`: one emission. A dithered harmonic's plateau shows over the threshold from
/// edge to edge but for notches a line width or so wide; two narrow lines apart show the floor
/// between them.
fn one_emission(occupied: &[(f64, f64)], a: f64, b: f64, bridge_hz: f64) -> bool {
    let (lo, hi) = if a <= b { (a, b) } else { (b, a) };
    let k = occupied.partition_point(|iv| iv.1 < lo);
    let Some(first) = occupied.get(k).filter(|iv| iv.0 <= lo) else {
        return false;
    };
    let mut end = first.1;
    for iv in &occupied[k + 1..] {
        if end >= hi || iv.0 - end > bridge_hz {
            break;
        }
        end = iv.1;
    }
    end >= hi
}

/// Share of a new candidate's lines that must sit on an earlier family's harmonics for them to
/// be that family's (its far harmonics, seen again past a stretch where they sank into the floor).
const ABSORB_SHARE: f64 = 0.8;

/// Gives the lines of `c` to an earlier family when at least [`ABSORB_SHARE`] of them lie on its
/// harmonics (within three uncertainties); returns whether it did. A comb's far harmonics
/// otherwise come back as a family at a multiple of its fundamental.
fn absorb(found: &mut [Candidate], c: &Candidate, lines: &[Line], peaks: &[FoundPeak]) -> bool {
    for fam in found.iter_mut() {
        let f0 = fam.fundamental_hz;
        let on: Vec<(usize, u32)> = c
            .hits
            .iter()
            .filter_map(|&(i, _)| {
                let l = &lines[i];
                let n = (l.freq_hz / f0).round();
                let odd_ok = fam.pattern == Pattern::All || n % 2.0 == 1.0;
                let tol = 3.0 * l.sigma_hz.hypot(n * fam.sigma_hz);
                (n >= 1.0 && odd_ok && (l.freq_hz - n * f0).abs() <= tol).then_some((i, n as u32))
            })
            .collect();
        if (on.len() as f64) < ABSORB_SHARE * c.hits.len() as f64 {
            continue;
        }
        let mut merged = fam.hits.clone();
        merged.extend(on.iter().copied());
        merged.sort_by_key(|h| h.1);
        merged.dedup_by_key(|h| h.1);
        drop_bright_intruders(&mut merged, peaks);
        // lines far brighter than the family's own harmonics around them are another
        // oscillator's (a clock on a converter's harmonics), not its far harmonics
        let kept = on.iter().filter(|h| merged.contains(h)).count();
        if kept as f64 >= ABSORB_SHARE * c.hits.len() as f64 {
            fam.hits = merged;
            return true;
        }
    }
    false
}

/// A member much wider than the family's typical member is another source's emission that
/// happens to sit on a harmonic (a dithered converter's plateau on a narrow comb): more than
/// four times the median width of the members. A dithered family's widths grow smoothly with n,
/// so its widest member is about twice its median.
fn drop_intruders(hits: &mut Vec<(usize, u32)>, widths: &[f64]) {
    let mut w: Vec<f64> = hits.iter().map(|&(i, _)| widths[i]).collect();
    if w.len() < 3 {
        return;
    }
    let median = crate::floor::quantile_in_place(&mut w, 0.5);
    hits.retain(|&(i, _)| widths[i] <= 4.0 * median);
}

/// A member this far above its neighbours is another source's line on that harmonic, dB.
const BRIGHT_INTRUDER_DB: f64 = 10.0;

/// A member standing more than [`BRIGHT_INTRUDER_DB`] above the median level of its six nearest
/// fellow members (three on each side) is another oscillator's line that happens to sit on this
/// family's harmonic (a clock at 4 MHz on a 100 kHz converter's 40th harmonic): a trapezoid's
/// harmonics change by a dB or two from one to the next, and a sinc null only lowers one. Its
/// line is left free for the family that made it. Only for families of at least eight members,
/// from the fourth member on (the first harmonics of a trapezoid fall fastest).
fn drop_bright_intruders(hits: &mut Vec<(usize, u32)>, peaks: &[FoundPeak]) {
    const NEAREST: usize = 3;
    if hits.len() < 8 {
        return;
    }
    let levels: Vec<f64> = hits.iter().map(|&(i, _)| peaks[i].level_dbuv).collect();
    let keep: Vec<bool> = (0..hits.len())
        .map(|k| {
            if k < 3 {
                return true;
            }
            let lo = k.saturating_sub(NEAREST);
            let hi = (k + NEAREST + 1).min(hits.len());
            let mut around: Vec<f64> = (lo..hi).filter(|&j| j != k).map(|j| levels[j]).collect();
            let reference = crate::floor::quantile_in_place(&mut around, 0.5);
            levels[k] - reference <= BRIGHT_INTRUDER_DB
        })
        .collect();
    let mut k = 0;
    hits.retain(|_| {
        k += 1;
        keep[k - 1]
    });
}

/// Where a broadcast carrier sits, and how well that is known (Hz, Hz). A modulated carrier's
/// level changes while the receiver sweeps across it, so its top wanders over the flat part of
/// the filter response: a ±1 dB fluctuation moves the top of a Gaussian filter by ±0.2·B6, but
/// each −6 dB edge, where the response falls 12 dB per half-bandwidth, by only ±B6/24 (derived
/// from the Gaussian IF |H(f)| = exp(−4·ln2·f²/B6²), METHODS §3). The middle of the −6 dB
/// extent is pulled instead by a neighbour's skirt on one side (a converter harmonic beside the
/// station). Neither estimate is safe alone, so the carrier is placed at their mean, with a σ of
/// at least half their difference, a thirtieth of the width (the edges' own wander) and the
/// line's σ.
fn carrier_position(p: &FoundPeak, line: &Line) -> (f64, f64) {
    let middle = 0.5 * (p.left_hz + p.right_hz);
    let sigma = line
        .sigma_hz
        .max(p.width_hz / 30.0)
        .max(0.5 * (line.freq_hz - middle).abs());
    (0.5 * (line.freq_hz + middle), sigma)
}

fn broadcast(
    peaks: &[FoundPeak],
    lines: &[Line],
    free: &[bool],
    narrow: &[bool],
    in_ambient: &[bool],
) -> Vec<(raster::Service, Vec<(usize, u32)>)> {
    let offered: Vec<usize> = (0..peaks.len()).filter(|&i| free[i]).collect();
    let o: Vec<raster::Offered> = offered
        .iter()
        .map(|&i| {
            let (freq_hz, sigma_hz) = carrier_position(&peaks[i], &lines[i]);
            raster::Offered {
                freq_hz,
                sigma_hz,
                narrow: narrow.get(i).copied().unwrap_or(true),
                in_ambient: in_ambient.get(i).copied().unwrap_or(false),
            }
        })
        .collect();
    raster::broadcast_sets(&o)
        .into_iter()
        .map(|m| {
            (
                m.service,
                m.members.iter().map(|&(k, n)| (offered[k], n)).collect(),
            )
        })
        .collect()
}

#[allow(clippy::too_many_arguments)]
fn fit_of(
    scan: &Scan,
    peaks: &[FoundPeak],
    widths: &[f64],
    f0: f64,
    sigma: f64,
    pattern: Pattern,
    members: Vec<(usize, u32)>,
    misses: usize,
    raster: Option<&'static str>,
) -> FamilyFit {
    let harmonics: Vec<Harmonic> = members
        .iter()
        .map(|&(i, n)| Harmonic {
            n,
            level_dbuv: peaks[i].level_dbuv,
            width_hz: widths[i],
        })
        .collect();
    let line = members
        .first()
        .map_or(0.0, |&(i, _)| line_width_hz(scan, peaks, peaks[i].index));
    let mut envelope = envelope::describe(&harmonics, f0, line);
    if raster.is_some() {
        // carriers on a raster are separate stations: their widths say nothing about dither
        envelope.width_growth_hz = None;
        envelope.spread_pct = None;
    }
    FamilyFit {
        fundamental_hz: f0,
        sigma_hz: sigma,
        pattern,
        members,
        misses,
        envelope,
        raster,
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn a_dithered_familys_narrow_member_counts_as_anywhere_on_its_plateau() {
        // source: derived; a 1.15 MHz converter dithered over 4 % (every harmonic spread over
        // n·46 kHz, METHODS.md §9), plateaus at n = 1-3 centred on n·f0 with the σ of a
        // plateau centre, and a fluctuation on the 8th harmonic's 368 kHz plateau, 147 kHz
        // from its centre, measured like a line (σ 1.3 kHz). Plain weighted least squares
        // believes that one member; with its position uniform over its plateau
        // (σ = W/√12, the uniform distribution's standard deviation) the fit lies within its σ
        let (f0, spread, line) = (1.15e6, 0.04, 13.5e3);
        let plateau = |n: u32| {
            let w = f64::from(n) * f0 * spread + line;
            Line {
                freq_hz: f64::from(n) * f0,
                sigma_hz: 0.05 * w + 0.25 * line,
                weight: 1.5,
                strength_db: 10.0,
                width_hz: w,
            }
        };
        let mut lines: Vec<Line> = (1..=3).map(plateau).collect();
        lines.push(Line {
            freq_hz: 8.0 * f0 + 0.4 * 8.0 * f0 * spread,
            sigma_hz: 1.3e3,
            weight: 1.5,
            strength_db: 10.0,
            width_hz: 1.2 * line,
        });
        let hits = [(0, 1), (1, 2), (2, 3), (3, 8)];
        let plain: Vec<refine::Member> = hits
            .iter()
            .map(|&(i, n)| refine::Member {
                n,
                freq_hz: lines[i].freq_hz,
                sigma_hz: lines[i].sigma_hz,
            })
            .collect();
        let p = refine::fit(&plain).unwrap();
        assert!((p.fundamental_hz - f0).abs() > 3.0 * p.sigma_hz, "{p:?}");
        let (est, sigma) = dithered_refit(&hits, &lines, |_| line).unwrap();
        assert!((est - f0).abs() < sigma, "{est} ± {sigma}");
        // with one plateau only the spread is not measured: no change
        assert_eq!(dithered_refit(&hits[2..], &lines, |_| line), None);
    }

    fn comb(f0: f64, ns: std::ops::RangeInclusive<u32>, width_hz: f64) -> Vec<Line> {
        ns.map(|n| Line {
            freq_hz: f0 * f64::from(n),
            sigma_hz: 300.0,
            weight: 1.5,
            strength_db: 20.0,
            width_hz,
        })
        .collect()
    }

    fn candidate(f0: f64, first: usize, ns: std::ops::RangeInclusive<u32>) -> Candidate {
        let hits: Vec<(usize, u32)> = ns.enumerate().map(|(k, n)| (first + k, n)).collect();
        Candidate {
            fundamental_hz: f0,
            sigma_hz: 2.0,
            pattern: Pattern::All,
            hits,
            misses: 0,
            value: 0.0,
            excess: 0.0,
            reported_sigma_hz: 2.0,
        }
    }

    /// The sieve's view of `peaks`: each a line at its frequency with the given σ.
    fn lines_at(peaks: &[FoundPeak], sigma_hz: f64) -> Vec<Line> {
        peaks
            .iter()
            .map(|p| Line {
                freq_hz: p.freq_hz,
                sigma_hz,
                weight: 1.5,
                strength_db: 20.0,
                width_hz: p.width_hz,
            })
            .collect()
    }

    fn peak(freq_hz: f64, level_dbuv: f64) -> FoundPeak {
        FoundPeak {
            index: 0,
            freq_hz,
            level_dbuv,
            prominence_db: 10.0,
            left_base: 0,
            right_base: 0,
            left_hz: freq_hz - 5e3,
            right_hz: freq_hz + 5e3,
            width_hz: 10e3,
            significance_db: 10.0,
            over_floor_db: 20.0,
        }
    }

    /// Three MF stations on the 9 kHz raster (ITU RR Article 5, Region 1; METHODS.md §7) seen
    /// in the ambient scans too, whose tops wandered 0.8-1.3 kHz while the receiver swept across
    /// their modulation, while their −6 dB edges stay centred on the channel (9 kHz RBW); and a
    /// fourth whose extent a neighbour's skirt widened on one side (its top is right, its middle
    /// 3 kHz off)
    /// A plateau split by a 12 kHz notch (9 kHz RBW, 1 kHz steps: a line is 10 kHz wide) is
    /// one line for the sieve, at the middle of the joint extent; two narrow lines 15 kHz apart
    /// stay two, and so does a plateau piece beyond a 40 kHz gap.
    #[test]
    fn a_notched_plateau_is_one_line_and_close_narrow_lines_are_two() {
        let f: Vec<f64> = (0..=400).map(|k| 0.9e6 + 1e3 * f64::from(k)).collect();
        let scan = Scan::new(
            f,
            vec![0.0; 401],
            crate::scan::ScanMeta {
                rbw_hz: Some(9e3),
                ..Default::default()
            },
        )
        .unwrap();
        let piece = |left: f64, right: f64, top: f64, level: f64| FoundPeak {
            index: ((top - 0.9e6) / 1e3).round() as usize,
            left_hz: left,
            right_hz: right,
            width_hz: right - left,
            ..peak(top, level)
        };
        let peaks = [
            piece(1.000e6, 1.030e6, 1.010e6, 60.0),
            piece(1.042e6, 1.080e6, 1.070e6, 62.0),
            piece(1.120e6, 1.150e6, 1.130e6, 61.0), // 40 kHz beyond: another emission
            piece(1.195e6, 1.205e6, 1.200e6, 50.0),
            piece(1.210e6, 1.220e6, 1.215e6, 50.0),
        ];
        let (lines, free, widths) = offered_lines(&scan, &peaks, &[]);
        assert_eq!(free, vec![false, true, true, true, true]);
        assert!(
            (lines[1].freq_hz - 1.040e6).abs() < 1.0,
            "{}",
            lines[1].freq_hz
        );
        assert!((widths[1] - 80e3).abs() < 1.0);
        // the uncertainty of an 80 kHz plateau: about a tenth of its excess width
        assert!(
            lines[1].sigma_hz > 6e3 && lines[1].sigma_hz < 9e3,
            "{}",
            lines[1].sigma_hz
        );
        assert_eq!(lines[2].freq_hz, 1.135e6);
        assert_eq!((lines[3].freq_hz, lines[4].freq_hz), (1.2e6, 1.215e6));
    }

    /// On a 1 kHz grid under a 9 kHz RBW (a line is 10 kHz wide) three tops 3 kHz wide, 6 kHz
    /// apart, are ripples on one plateau (a steady carrier shows the filter's own width, common
    /// practice): the sieve sees one line at the middle of their joint extent. A top of a
    /// line's width beside them is a line of its own, and on a grid as coarse as the line the
    /// widths say nothing, so nothing is joined.
    #[test]
    fn ripples_on_a_plateau_are_one_line() {
        let scan_of = |step: f64| {
            let n = (400e3 / step) as usize;
            let f: Vec<f64> = (0..=n).map(|k| 0.9e6 + step * k as f64).collect();
            Scan::new(
                f,
                vec![0.0; n + 1],
                crate::scan::ScanMeta {
                    rbw_hz: Some(9e3),
                    ..Default::default()
                },
            )
            .unwrap()
        };
        let piece = |step: f64, top: f64, width: f64, level: f64| FoundPeak {
            index: ((top - 0.9e6) / step).round() as usize,
            left_hz: top - width / 2.0,
            right_hz: top + width / 2.0,
            width_hz: width,
            ..peak(top, level)
        };
        let peaks_of = |step: f64| {
            [
                piece(step, 1.000e6, 3e3, 70.0),
                piece(step, 1.006e6, 3e3, 75.0),
                piece(step, 1.012e6, 3e3, 72.0),
                piece(step, 1.030e6, 10e3, 60.0), // a line beside the plateau
            ]
        };
        let peaks = peaks_of(1e3);
        let (lines, free, widths) = offered_lines(&scan_of(1e3), &peaks, &[]);
        assert_eq!(free, vec![false, true, false, true]);
        assert!(
            (lines[1].freq_hz - 1.006e6).abs() < 1.0,
            "{}",
            lines[1].freq_hz
        );
        assert!((widths[1] - 15e3).abs() < 1.0, "{}", widths[1]);
        assert_eq!(lines[3].freq_hz, 1.030e6);
        // a 5 kHz grid: three points per 15 kHz, no width is measured finer than a line
        let peaks = peaks_of(5e3);
        let (_, free, _) = offered_lines(&scan_of(5e3), &peaks, &[]);
        assert_eq!(free, vec![true; 4]);
    }

    /// A trace from 0.9 to 1.3 MHz at 1 kHz steps with `level_of` each frequency, RBW 9 kHz.
    fn hump_scan(level_of: impl Fn(f64) -> f64) -> Scan {
        let f: Vec<f64> = (0..=400).map(|k| 0.9e6 + 1e3 * k as f64).collect();
        let level: Vec<f64> = f.iter().map(|&f| level_of(f)).collect();
        let meta = crate::scan::ScanMeta {
            rbw_hz: Some(9e3),
            ..Default::default()
        };
        Scan::new(f, level, meta).unwrap()
    }

    /// A peak of [`hump_scan`]'s trace at `top` with a −6 dB `width`.
    fn piece_at_1khz(top: f64, width: f64, level: f64) -> FoundPeak {
        FoundPeak {
            index: ((top - 0.9e6) / 1e3).round() as usize,
            left_hz: top - width / 2.0,
            right_hz: top + width / 2.0,
            width_hz: width,
            ..peak(top, level)
        }
    }

    /// A hump of the trace from `start_hz` to `stop_hz`.
    fn hump_over(start_hz: f64, stop_hz: f64) -> Hump {
        Hump {
            start_hz,
            stop_hz,
            freq_hz: 0.5 * (start_hz + stop_hz),
            level_dbuv: 50.0,
            over_floor_db: 20.0,
            family: None,
            likely_source: None,
            rescan: None,
            seen_as: crate::bandwidth::HumpBasis::Trace,
        }
    }

    /// A hump offers one line for its plateau, but a steady line standing well out of it (a
    /// converter's harmonic on another converter's dithered plateau) is a line of its own, at
    /// its own frequency and with its own uncertainty: a carrier shows with the RBW filter's
    /// width (common practice), a plateau's fluctuations are narrower or no higher than the
    /// plateau. Without this the standing line is lost in the plateau's one broad line.
    #[test]
    fn a_steady_line_standing_on_a_hump_is_its_own_line() {
        // 0.9-1.3 MHz at 1 kHz steps, RBW 9 kHz: a line is 10 kHz wide
        let scan = hump_scan(|f| {
            if (0.96e6..=1.06e6).contains(&f) {
                30.0
            } else {
                10.0
            }
        });
        let piece = piece_at_1khz;
        let hump = hump_over(0.96e6, 1.06e6);
        let offered = |standing: f64| {
            let peaks = [
                piece(1.0e6, 10e3, standing), // a steady line on the plateau
                piece(1.03e6, 3e3, 33.0),     // a ripple of the plateau
                piece(1.2e6, 10e3, 40.0),     // a line beside it
            ];
            offered_lines(&scan, &peaks, std::slice::from_ref(&hump))
        };
        let (lines, free, widths) = offered(50.0);
        assert_eq!(free, vec![true; 3]);
        assert_eq!(lines[0].freq_hz, 1.0e6);
        assert_eq!(widths[0], 10e3);
        // the plateau's line, at the hump's centre and as wide as the hump
        assert!(
            (lines[1].freq_hz - 1.01e6).abs() < 1.0,
            "{}",
            lines[1].freq_hz
        );
        assert!((widths[1] - 100e3).abs() < 1.0, "{}", widths[1]);
        // a line only 5 dB over the plateau is not offered; the plateau's line stands on its
        // ripple, not on a peak shaped like a line (another source's harmonic, whose place the
        // report would give to the plateau's family)
        let (lines, free, _) = offered(35.0);
        assert_eq!(free, vec![false, true, true]);
        assert!(
            (lines[1].freq_hz - 1.01e6).abs() < 1.0,
            "{}",
            lines[1].freq_hz
        );
        // a plateau shown only by a line-shaped top still offers its line
        let peaks = [piece(1.0e6, 10e3, 35.0)];
        let (lines, free, _) = offered_lines(&scan, &peaks, std::slice::from_ref(&hump));
        assert_eq!(free, vec![true]);
        assert!(
            (lines[0].freq_hz - 1.01e6).abs() < 1.0,
            "{}",
            lines[0].freq_hz
        );
    }

    /// The plateau's line sits at the plateau's centre of power, not at the middle of a hump
    /// that a steady line and its sidebands stretch: a dithered harmonic spreads its power
    /// evenly over its sweep (the spread-spectrum rule of METHODS §9, peak reduction
    /// 10·log10(Δf_n/RBW), assumes it), so its plateau's centroid is its centre frequency.
    #[test]
    fn a_line_standing_at_a_humps_edge_does_not_move_the_plateau() {
        // 0.9-1.3 MHz at 1 kHz steps, RBW 9 kHz: a plateau at 40 dBuV over 0.96-1.02 MHz, a
        // line at 1.05 MHz with sidebands at 25 dBuV from 1.02 to 1.06 MHz, one hump over both
        let scan = hump_scan(|f| match f {
            f if (0.96e6..=1.02e6).contains(&f) => 40.0,
            f if (1.02e6..=1.06e6).contains(&f) => 25.0,
            _ => 10.0,
        });
        let peaks = [
            piece_at_1khz(0.99e6, 3e3, 41.0),
            piece_at_1khz(1.05e6, 10e3, 60.0),
        ];
        let hump = hump_over(0.96e6, 1.06e6);
        let (lines, free, _) = offered_lines(&scan, &peaks, std::slice::from_ref(&hump));
        assert_eq!(free, vec![true, true]);
        // power-weighted: 61 points at 10^4 around 0.99 MHz, 40 at 10^2.5 around 1.04 MHz
        // (those under the line hold the sidebands' level): 0.9910 MHz; the hump's middle
        // would be 1.01 MHz
        assert!(
            (lines[0].freq_hz - 0.9910e6).abs() < 500.0,
            "{}",
            lines[0].freq_hz
        );
        assert_eq!(lines[1].freq_hz, 1.05e6);
    }

    #[test]
    fn an_over_threshold_point_occupies_its_display_bucket() {
        // a coarse grid (1 MHz steps): points 2 and 5 are over the threshold; each stands for
        // the bucket half-way to its neighbours, adjacent buckets join
        let freqs = [1e6, 2e6, 3e6, 4e6, 5e6, 6e6, 7e6];
        let levels = [10.0, 10.0, 30.0, 10.0, 30.0, 30.0, 10.0];
        let scan = Scan::new(freqs.to_vec(), levels.to_vec(), Default::default()).unwrap();
        let floor = Floor {
            floor_dbuv: vec![5.0; freqs.len()],
            threshold_dbuv: vec![20.0; freqs.len()],
            samples_per_point: 1.0,
            spread_db: 5.6,
            false_alarm_per_point: 1e-4,
        };
        let occ = occupied(&scan, &floor);
        assert_eq!(occ, vec![(2.5e6, 3.5e6), (4.5e6, 6.5e6)]);
        // so a harmonic predicted up to half a step off an over-threshold point is not clearly
        // absent: lines at harmonics 66 and 69 of 50 kHz (3.30 and 3.45 MHz), the 67th and 68th
        // fall in point 3's bucket; with a line at the 90th (4.5 MHz) the 71st to 89th are absent
        let l: Vec<Line> = [3.3e6, 3.45e6, 4.5e6]
            .iter()
            .map(|&f| Line {
                freq_hz: f,
                sigma_hz: 300.0,
                weight: 1.0,
                strength_db: 10.0,
                width_hz: 10e3,
            })
            .collect();
        let sieve = Sieve {
            lines: &l,
            free: vec![true; l.len()],
            min_fundamental_hz: 1e3,
            occupied: &occ,
            params: SieveParams::default(),
        };
        let c = sieve.candidate_of(vec![(0, 66), (1, 69)], 50e3, 1.0, 1.0, Pattern::All);
        assert_eq!(c.misses, 0);
        let c = sieve.candidate_of(vec![(0, 66), (2, 90)], 50e3, 1.0, 1.0, Pattern::All);
        assert_eq!(c.misses, 19);
    }

    #[test]
    fn modulated_carriers_are_placed_by_top_and_edges() {
        let channels = [954e3, 1350e3, 1404e3];
        let wander = [1296.0, -1152.0, 750.0];
        let mut peaks: Vec<FoundPeak> = channels
            .iter()
            .zip(wander)
            .map(|(&c, w)| FoundPeak {
                left_hz: c - 4.6e3,
                right_hz: c + 4.6e3,
                width_hz: 9.2e3,
                ..peak(c + w, 50.0)
            })
            .collect();
        peaks.push(FoundPeak {
            left_hz: 1413.3e3,
            right_hz: 1436.4e3,
            width_hz: 23.1e3,
            ..peak(1421.3e3, 40.0)
        });
        let lines = lines_at(&peaks, 190.0);
        let sets = broadcast(&peaks, &lines, &[true; 4], &[true; 4], &[true; 4]);
        assert_eq!(sets.len(), 1, "{sets:?}");
        assert_eq!(sets[0].0.step_hz, 9e3);
        let channel_numbers: Vec<u32> = sets[0].1.iter().map(|m| m.1).collect();
        assert_eq!(channel_numbers, vec![106, 150, 156, 158]);
    }

    /// A 100 kHz converter falling at 20 dB/decade (the trapezoid envelope between its break
    /// points, METHODS.md §5) with a 4 MHz clock line 20 dB over its 40th harmonic: the clock's
    /// line leaves the family; a sinc null (one member 15 dB low) and the steep first harmonics
    /// do not make intruders.
    #[test]
    fn a_bright_line_on_a_harmonic_is_another_source() {
        let mut peaks: Vec<FoundPeak> = (2..=60u32)
            .map(|n| peak(1e5 * f64::from(n), 80.0 - 20.0 * f64::from(n).log10()))
            .collect();
        let at = |n: u32| (n - 2) as usize;
        peaks[at(40)].level_dbuv += 20.0;
        peaks[at(25)].level_dbuv -= 15.0;
        peaks[at(2)].level_dbuv += 9.0;
        let mut hits: Vec<(usize, u32)> = (2..=60u32).map(|n| (at(n), n)).collect();
        drop_bright_intruders(&mut hits, &peaks);
        assert_eq!(hits.len(), 58);
        assert!(!hits.iter().any(|h| h.1 == 40));
        assert!(hits.iter().any(|h| h.1 == 25) && hits.iter().any(|h| h.1 == 2));
    }

    /// Two converters 2.9 % apart (404.6 and 416.5 kHz), each with narrow lines over the same
    /// harmonic numbers, are two families; a near-equal fundamental whose lines lie inside a
    /// dithered family's wide emissions (by their widths or by the trace over the threshold),
    /// or a short run beside the family's own, is a fragment.
    #[test]
    fn close_converters_are_not_fragments() {
        let mut lines = comb(404_643.5, 2..=40, 10e3);
        lines.extend(comb(416_492.9, 2..=40, 10e3));
        let found = [candidate(404_643.5, 0, 2..=40)];
        let other = candidate(416_492.9, 39, 2..=40);
        assert!(!near_duplicate(&found, &other, &lines, &[], 0.0));
        // each line over the threshold on its own: the floor shows between them
        let mut apart: Vec<(f64, f64)> = lines
            .iter()
            .map(|l| (l.freq_hz - 5e3, l.freq_hz + 5e3))
            .collect();
        apart.sort_by(|a, b| a.0.total_cmp(&b.0));
        assert!(!near_duplicate(&found, &other, &lines, &apart, 15e3));

        // a dithered 200 kHz family, 2 % spread, whose plateaus showed as narrow tops: harmonic
        // n is over the threshold over ±2·n kHz but for a 2 kHz notch; a comb through other
        // tops, 0.75 % high, lies on the plateaus (not within the tops' own widths)
        let mut lines = comb(200e3, 2..=20, 10e3);
        lines.extend(comb(201.5e3, 2..=20, 10e3));
        let plateaus: Vec<(f64, f64)> = (2..=20)
            .flat_map(|n| {
                let (c, h) = (200e3 * f64::from(n), 2e3 * f64::from(n));
                [(c - h, c + 0.3 * h), (c + 0.3 * h + 2e3, c + h)]
            })
            .collect();
        let found = [candidate(200e3, 0, 2..=20)];
        let tops = candidate(201.5e3, 19, 2..=20);
        assert!(!near_duplicate(&found, &tops, &lines, &[], 15e3));
        assert!(near_duplicate(&found, &tops, &lines, &plateaus, 15e3));
        assert!(
            !near_duplicate(&found, &tops, &lines, &plateaus, 1e3),
            "notch not bridged"
        );

        // a dithered 200 kHz family, 4 % spread: harmonic n is 8·n kHz wide
        let mut lines: Vec<Line> = (2..=20)
            .map(|n| Line {
                width_hz: 8e3 * f64::from(n),
                ..comb(200e3, n..=n, 0.0)[0]
            })
            .collect();
        // the tops of its plateaus, 1 % high, taken for a fundamental of 202 kHz
        lines.extend(comb(202e3, 2..=20, 10e3));
        let found = [candidate(200e3, 0, 2..=20)];
        let fragment = candidate(202e3, 19, 2..=20);
        assert!(near_duplicate(&found, &fragment, &lines, &[], 0.0));

        // a short run of near-equal spacing far above the family's own harmonics
        let mut lines = comb(404_643.5, 2..=40, 10e3);
        lines.extend(comb(410e3, 60..=66, 10e3));
        let run = candidate(410e3, 39, 60..=66);
        assert!(near_duplicate(
            &[candidate(404_643.5, 0, 2..=40)],
            &run,
            &lines,
            &[],
            0.0
        ));
    }

    /// A comb of every harmonic of 100 kHz, n = 1 … 30, levels falling 1 dB per harmonic (the
    /// `bright` ones raised), split as the search may find it: every third harmonic first (a
    /// family at 300 kHz), the rest later (a family at 100 kHz).
    fn split_comb(bright_db: f64) -> (Vec<FoundPeak>, Vec<Line>, Vec<Candidate>) {
        let f0 = 100e3;
        let peaks: Vec<FoundPeak> = (1..=30)
            .map(|n| {
                let raised = if n % 3 == 0 { bright_db } else { 0.0 };
                peak(f64::from(n) * f0, 80.0 - f64::from(n) + raised)
            })
            .collect();
        let lines = lines_at(&peaks, 100.0);
        let family = |step: f64, idx: Vec<usize>| {
            let hits: Vec<(usize, u32)> = idx
                .iter()
                .map(|&i| (i, ((i as f64 + 1.0) * f0 / step).round() as u32))
                .collect();
            found_family(step, hits)
        };
        let thirds = family(3.0 * f0, (0..30).filter(|i| (i + 1) % 3 == 0).collect());
        let rest = family(f0, (0..30).filter(|i| (i + 1) % 3 != 0).collect());
        (peaks, lines, vec![thirds, rest])
    }

    /// A family found at `f0` (±5 Hz) with the given hits, every harmonic predicted.
    fn found_family(f0: f64, hits: Vec<(usize, u32)>) -> Candidate {
        Candidate {
            fundamental_hz: f0,
            sigma_hz: 5.0,
            pattern: Pattern::All,
            value: 1.5 * hits.len() as f64,
            excess: 1.5 * hits.len() as f64,
            hits,
            misses: 0,
            reported_sigma_hz: 5.0,
        }
    }

    /// A sieve over `lines`, all of them claimed, with no occupied interval.
    fn claimed(lines: &[Line]) -> Sieve<'_> {
        Sieve {
            lines,
            free: vec![false; lines.len()],
            min_fundamental_hz: 15e3,
            occupied: &[],
            params: SieveParams::default(),
        }
    }

    #[test]
    fn a_comb_found_as_itself_and_its_multiple_is_one_family() {
        // fact of the trade (common practice): every harmonic of 3·f0 is a harmonic of f0, so
        // one oscillator at f0 explains both; the report must not name it twice
        let (peaks, lines, mut found) = split_comb(0.0);
        merge_multiples(&mut found, &claimed(&lines), &peaks, 0.6);
        assert_eq!(found.len(), 1);
        assert!((found[0].fundamental_hz - 100e3).abs() < 1.0);
        assert_eq!(found[0].hits.len(), 30);
        assert_eq!(found[0].misses, 0);
    }

    #[test]
    fn a_brighter_oscillator_at_a_multiple_stays_apart() {
        // lines at 3·f0 that stand 15 dB over the comb's envelope are a second oscillator
        // (a clock locked to three times another's frequency), not the first one's harmonics
        let (peaks, lines, mut found) = split_comb(15.0);
        merge_multiples(&mut found, &claimed(&lines), &peaks, 0.6);
        assert_eq!(found.len(), 2);
    }

    #[test]
    fn leftovers_at_harmonics_the_comb_holds_are_the_comb() {
        // a comb of every harmonic of 100 kHz, n = 1 … 30, all found; three more lines 15 dB
        // brighter sit at its harmonics 10, 18 and 24 (another emission on top of them) and were
        // left over as a family at 200 kHz. Every harmonic of that family from its first hit to
        // its last is a member of the comb already (fact of the trade, common practice: the
        // harmonics of 2·f0 are harmonics of f0): it is the comb seen again, however bright
        let f0 = 100e3;
        let mut peaks: Vec<FoundPeak> = (1..=30)
            .map(|n| peak(f64::from(n) * f0, 80.0 - f64::from(n)))
            .collect();
        for n in [10u32, 18, 24] {
            peaks.push(peak(f64::from(n) * f0 + 50.0, 95.0 - f64::from(n)));
        }
        let lines = lines_at(&peaks, 100.0);
        let comb = found_family(f0, (0..30).map(|i| (i, i as u32 + 1)).collect());
        let leftovers = found_family(2.0 * f0, vec![(30, 5), (31, 9), (32, 12)]);
        assert!(multiple_of(&comb, &leftovers, &lines, &peaks));
        let mut found = vec![comb, leftovers];
        merge_multiples(&mut found, &claimed(&lines), &peaks, 0.6);
        assert_eq!(found.len(), 1);
        assert!((found[0].fundamental_hz - f0).abs() < 1.0);
    }

    /// Every harmonic of `f0` from 1 to 20, then none up to 41 (sunk into the floor), then the
    /// even ones from 42 to 70, found as two families, at `f0` and at 2·`f0`; merged.
    fn seen_low_and_far_up(f0: f64) -> Vec<Candidate> {
        let numbers: Vec<u32> = (1..=20).chain((42..=70).step_by(2)).collect();
        let peaks: Vec<FoundPeak> = numbers
            .iter()
            .map(|&n| peak(f64::from(n) * f0, 60.0))
            .collect();
        let lines = lines_at(&peaks, 100.0);
        let low = found_family(f0, (0..20).map(|i| (i, i as u32 + 1)).collect());
        let high = found_family(2.0 * f0, (20..35).map(|i| (i, numbers[i] / 2)).collect());
        let mut found = vec![low, high];
        merge_multiples(&mut found, &claimed(&lines), &peaks, 0.6);
        found
    }

    #[test]
    fn a_comb_seen_low_and_again_far_up_across_the_floor_is_one_family() {
        // a duty near 50 % puts the odd harmonics in nulls far up (|sin(π·n·D)|, METHODS §5),
        // so the comb comes back at its even ones. All the lines are harmonics of 100 kHz
        // (common practice); the 21 absent in a row are where the comb sank, not 21 misses
        // (with them the joint comb sees 35 of 70 and the parts stay apart)
        let found = seen_low_and_far_up(100e3);
        assert_eq!(found.len(), 1);
        assert!((found[0].fundamental_hz - 100e3).abs() < 1.0);
        assert_eq!(found[0].hits.len(), 35);
    }

    #[test]
    fn two_crystal_values_an_octave_apart_stay_two_across_the_floor() {
        // 4 and 8 MHz are both standard crystal values (METHODS §10); two crystals on one board
        // whose lines coincide are not joined on the strength of a stretch of absent harmonics
        let found = seen_low_and_far_up(4e6);
        assert_eq!(found.len(), 2);
    }

    /// A candidate at 1 MHz with the given harmonic numbers as hits, over lines at exactly
    /// those harmonics, scored by the sieve (nothing else occupied).
    fn near_square(numbers: &[u32]) -> (Vec<Line>, Candidate) {
        let lines: Vec<Line> = numbers
            .iter()
            .map(|&n| Line {
                freq_hz: f64::from(n) * 1e6,
                sigma_hz: 300.0,
                weight: 1.5,
                strength_db: 20.0,
                width_hz: 10e3,
            })
            .collect();
        let c = claimed(&lines).candidate_of(
            numbers.iter().enumerate().map(|(i, &n)| (i, n)).collect(),
            1e6,
            10.0,
            10.0,
            Pattern::All,
        );
        (lines, c)
    }

    #[test]
    fn a_near_square_wave_is_a_family_without_its_even_harmonics() {
        // odd harmonics 1-19 with only the 2nd of the even ones: 11 of 19 slots (0.58), but
        // every odd slot; a 50 % duty pulse train has no even harmonics at all (METHODS §5)
        let (lines, c) = near_square(&[1, 2, 3, 5, 7, 9, 11, 13, 15, 17, 19]);
        assert_eq!(c.misses, 8);
        assert!(is_family(&c, &claimed(&lines), &FamilyParams::default()));
        // the same count of slots seen, but odd ones missing too: no family
        let (lines, c) = near_square(&[1, 2, 3, 4, 6, 8, 10, 12, 14, 16, 19]);
        assert!(!is_family(&c, &claimed(&lines), &FamilyParams::default()));
    }

    /// A flyback at D = 0.25: harmonics 2-100 of a 1 MHz comb, the ones in its spectrum's
    /// nulls (every 4th: |sin(π·n·D)| < 0.3, over 10 dB under the envelope, METHODS §5) gone,
    /// and others gone too (n = 1 mod 3, and odd multiples of 7: weak ones under the
    /// threshold): under 0.6 of all slots and of the odd ones seen, but the nulls explain 24 of
    /// the gaps, so it is a family. The same gaps shifted off the nulls (n = 1 mod 4) are no
    /// family.
    #[test]
    fn a_pulse_trains_nulls_do_not_count_against_it() {
        let comb = |gap: &dyn Fn(u32) -> bool| -> Vec<u32> {
            (2..=100)
                .filter(|&n| !gap(n) && n % 3 != 1 && !(n % 2 == 1 && n % 7 == 0))
                .collect()
        };
        let seen = comb(&|n| n % 4 == 0);
        let (lines, c) = near_square(&seen);
        let slots = seen.len() + c.misses;
        assert!(
            (seen.len() as f64) < 0.6 * slots as f64,
            "{} of {slots}",
            seen.len()
        );
        let sieve = claimed(&lines);
        let (odd_seen, odd_absent) = sieve.odd_slots(&c);
        assert!((odd_seen as f64) < 0.6 * (odd_seen + odd_absent) as f64);
        let (duty, excused) = duty_nulls(&sieve.slot_states(&c)).expect("nulls");
        assert_eq!((excused, (duty * 1e3).round()), (24, 250.0));
        assert!(is_family(&c, &sieve, &FamilyParams::default()));
        let shifted = comb(&|n| n % 4 == 1);
        let (lines, c) = near_square(&shifted);
        assert!((shifted.len() as f64) < 0.6 * (shifted.len() + c.misses) as f64);
        assert!(!is_family(&c, &claimed(&lines), &FamilyParams::default()));
    }

    #[test]
    fn a_pulse_trains_nulls_far_up_are_found() {
        // harmonics 150 to 300 of a pulse train of duty 0.4737: the slots with
        // |sin(π·n·D)| < 0.3 are absent (METHODS §5). Far up, a step of 0.005 in D moves the
        // nulls by up to 1.5 harmonics; the duty and every absent slot must still be found
        let d = 0.4737;
        let slots: Vec<(u32, Option<bool>)> = (150..=300)
            .map(|n| {
                let s = (std::f64::consts::PI * f64::from(n) * d).sin().abs();
                (n, Some(s >= NULL_SIN))
            })
            .collect();
        let absent = slots.iter().filter(|s| s.1 == Some(false)).count();
        let (duty, excused) = duty_nulls(&slots).expect("nulls");
        assert!((duty - d).abs() < 5e-4, "duty {duty}");
        assert_eq!(excused, absent);
    }
}
