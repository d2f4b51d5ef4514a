//! Before and after: did a change help? Two analyses of the same board (same or different
//! grids) are aligned, their peaks and families matched, and each change in dB judged against
//! the repeatability of a reading.
//!
//! `change_db = after − before`, so a fix shows negative. A family's change is the median over
//! its strongest harmonics (up to [`STRONGEST`]) read in both scans; a harmonic the after scan no
//! longer shows as a peak is read off the after trace at its frequency (the trace there is the
//! floor, so the change is at least that large).
//!
//! # Significance
//! One reading scatters by `σ_r = √(σ_set² + σ_noise²)`: `σ_set` the set-up repeatability
//! (cable and LISN placement, [`SETUP_REPEAT_DB`], common practice), `σ_noise` the floor's
//! fluctuation carried onto a line `x` dB above it, `(IQR/1.349)·10^(−x/20)` (a Gaussian's
//! interquartile range is 1.349·σ; the noise adds to the line's amplitude). A difference of two
//! readings has `√2·σ_r`; the median of `k` differences about `1.2533·√2·σ_r/√k` (the median's
//! asymptotic efficiency for a Gaussian, √(π/2), any statistics text). A change is
//! "improved" or "worse" when it is at least [`SIGNIFICANT_Z`] of those away from zero.

use crate::analysis::{Analysis, Family, Kind, Origin, Peak};
use crate::scan::Scan;
use serde::Serialize;

/// Set-up repeatability of one reading, dB (common practice for a bench set-up re-made between
/// two scans: about 1 dB; a fixed set-up repeats better).
pub const SETUP_REPEAT_DB: f64 = 1.0;

/// A change this many standard deviations from zero is significant (about 95 % two-sided).
pub const SIGNIFICANT_Z: f64 = 2.0;

/// A family's change is the median over at most this many of its strongest harmonics.
pub const STRONGEST: usize = 5;

/// Two fundamentals match within this share (or three combined uncertainties, whichever is
/// larger): a fix does not move an oscillator by more than its tolerance.
const FAMILY_MATCH_SHARE: f64 = 0.01;

/// Settings of a comparison.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct CompareParams {
    /// Set-up repeatability of one reading (dB).
    pub setup_repeat_db: f64,
}

impl Default for CompareParams {
    fn default() -> Self {
        CompareParams {
            setup_repeat_db: SETUP_REPEAT_DB,
        }
    }
}

/// What happened to a family or a peak.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum Status {
    Improved,
    Unchanged,
    Worse,
    /// Only in the after scan.
    New,
    /// Only in the before scan.
    Gone,
}

impl Status {
    /// The contract's word for it.
    pub fn name(self) -> &'static str {
        match self {
            Status::Improved => "improved",
            Status::Unchanged => "unchanged",
            Status::Worse => "worse",
            Status::New => "new",
            Status::Gone => "gone",
        }
    }
}

/// One family before and after.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct FamilyChange {
    pub fundamental_hz: f64,
    pub kind: Kind,
    pub origin: Origin,
    /// After − before (dB), the median over its strongest harmonics read in both scans.
    pub change_db: Option<f64>,
    /// Standard uncertainty of `change_db` (dB).
    pub sigma_db: Option<f64>,
    pub status: Status,
    /// Harmonics the change was read on.
    pub harmonics_compared: Vec<u32>,
    /// Its worst margin before and after (dB).
    pub worst_margin_before_db: Option<f64>,
    pub worst_margin_after_db: Option<f64>,
    /// Family ids in the two analyses.
    pub before_id: Option<usize>,
    pub after_id: Option<usize>,
}

/// One peak of interest (over a limit in either scan) before and after.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct PeakChange {
    pub freq_hz: f64,
    pub before_dbuv: Option<f64>,
    pub after_dbuv: Option<f64>,
    pub change_db: Option<f64>,
    pub sigma_db: Option<f64>,
    pub status: Status,
    /// Margin to the limits before and after (dB).
    pub margin_before_db: Option<f64>,
    pub margin_after_db: Option<f64>,
}

/// The result of [`compare`].
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Comparison {
    pub families: Vec<FamilyChange>,
    pub peaks: Vec<PeakChange>,
    /// The after scan's verdict against every given limit.
    pub pass: Option<bool>,
    pub worst_margin_db: Option<f64>,
    /// The before scan's worst margin, for the headline.
    pub worst_margin_before_db: Option<f64>,
    /// The set-up repeatability the changes were judged with (dB).
    pub setup_repeat_db: f64,
}

/// Level of `scan` at `freq_hz`: the highest point within `half_hz`, or the nearest point when
/// none lies that close; `None` outside the scan's span.
pub fn reading_at(scan: &Scan, freq_hz: f64, half_hz: f64) -> Option<f64> {
    let (lo, hi) = scan.span_hz();
    if !(freq_hz >= lo - half_hz && freq_hz <= hi + half_hz) {
        return None;
    }
    let f = scan.freq_hz.as_slice()?;
    let l = scan.level_dbuv.as_slice()?;
    let a = f.partition_point(|&x| x < freq_hz - half_hz);
    let b = f.partition_point(|&x| x <= freq_hz + half_hz);
    if b > a {
        return l[a..b].iter().copied().reduce(f64::max);
    }
    let i = f.partition_point(|&x| x < freq_hz);
    let near = [i.checked_sub(1), (i < f.len()).then_some(i)]
        .into_iter()
        .flatten()
        .min_by(|&x, &y| (f[x] - freq_hz).abs().total_cmp(&(f[y] - freq_hz).abs()))?;
    Some(l[near])
}

/// Display step of `scan` near `freq_hz` (Hz).
fn step_near(scan: &Scan, freq_hz: f64) -> f64 {
    let Some(f) = scan.freq_hz.as_slice() else {
        return 0.0;
    };
    if f.len() < 2 {
        return 0.0;
    }
    let i = f.partition_point(|&x| x < freq_hz).clamp(1, f.len() - 1);
    f[i] - f[i - 1]
}

/// How far apart two readings of one emission may lie on two grids: half its width, and a
/// display step of either scan.
fn match_half_hz(before: &Analysis, after: &Analysis, freq_hz: f64, width_hz: f64) -> f64 {
    (0.5 * width_hz)
        .max(step_near(&before.scan, freq_hz))
        .max(step_near(&after.scan, freq_hz))
        .max(before.scan.meta.rbw_hz.unwrap_or(0.0) / 2.0)
}

/// Standard uncertainty of one reading `over_floor_db` above its floor (see the module docs).
fn reading_sigma(a: &Analysis, over_floor_db: f64, params: &CompareParams) -> f64 {
    let noise = a.floor.spread_db / 1.349 * 10f64.powf(-over_floor_db.max(0.0) / 20.0);
    params.setup_repeat_db.hypot(noise)
}

fn status_of(change: f64, sigma: f64) -> Status {
    if change <= -SIGNIFICANT_Z * sigma {
        Status::Improved
    } else if change >= SIGNIFICANT_Z * sigma {
        Status::Worse
    } else {
        Status::Unchanged
    }
}

fn median(v: &mut [f64]) -> Option<f64> {
    if v.is_empty() {
        return None;
    }
    Some(crate::floor::quantile_in_place(v, 0.5))
}

/// The peaks of family `id`, by harmonic number.
fn members(a: &Analysis, id: usize) -> Vec<(u32, &Peak)> {
    let mut m: Vec<(u32, &Peak)> = a
        .peaks
        .iter()
        .filter(|p| p.family == Some(id))
        .filter_map(|p| p.harmonic.map(|n| (n, p)))
        .collect();
    m.sort_by_key(|x| x.0);
    m
}

/// Pairs of (before index, after index) of matching families, one-to-one, closest first.
fn match_families(before: &[Family], after: &[Family]) -> Vec<(usize, usize)> {
    let mut pairs: Vec<(f64, usize, usize)> = Vec::new();
    for (i, b) in before.iter().enumerate() {
        for (j, a) in after.iter().enumerate() {
            if (b.kind == Kind::Broadcast) != (a.kind == Kind::Broadcast) {
                continue;
            }
            let d = (a.fundamental_hz - b.fundamental_hz).abs();
            let tol = (FAMILY_MATCH_SHARE * b.fundamental_hz)
                .max(3.0 * b.fundamental_sigma_hz.hypot(a.fundamental_sigma_hz));
            if d <= tol {
                pairs.push((d / b.fundamental_hz, i, j));
            }
        }
    }
    pairs.sort_by(|x, y| x.0.total_cmp(&y.0));
    let (mut used_b, mut used_a) = (vec![false; before.len()], vec![false; after.len()]);
    let mut out = Vec::new();
    for (_, i, j) in pairs {
        if !used_b[i] && !used_a[j] {
            used_b[i] = true;
            used_a[j] = true;
            out.push((i, j));
        }
    }
    out
}

/// The change of a family from `from` to `to` (`to` may not show the family): its strongest
/// harmonics in `from`, each read in `to` as its matching peak or else off the trace.
/// Returns (change, sigma, harmonics) with the sign of `to − from`.
fn family_change(
    from: &Analysis,
    from_id: usize,
    to: &Analysis,
    to_id: Option<usize>,
    params: &CompareParams,
) -> Option<(f64, f64, Vec<u32>)> {
    let mut strongest = members(from, from_id);
    strongest.sort_by(|x, y| y.1.level_dbuv.total_cmp(&x.1.level_dbuv));
    let to_members = to_id.map(|id| members(to, id)).unwrap_or_default();
    let mut diffs = Vec::new();
    let mut used = Vec::new();
    let mut sigma2 = 0.0;
    for (n, p) in strongest {
        if diffs.len() >= STRONGEST {
            break;
        }
        let half = match_half_hz(from, to, p.freq_hz, p.width_hz);
        let other = to_members
            .iter()
            .find(|(m, q)| *m == n && (q.freq_hz - p.freq_hz).abs() <= 2.0 * half)
            .map(|(_, q)| (q.level_dbuv, q.over_floor_db))
            .or_else(|| reading_at(&to.scan, p.freq_hz, half).map(|l| (l, 0.0)));
        let Some((level, over)) = other else {
            continue;
        };
        diffs.push(level - p.level_dbuv);
        used.push(n);
        let s = reading_sigma(from, p.over_floor_db, params).hypot(reading_sigma(to, over, params));
        sigma2 += s * s;
    }
    let k = diffs.len();
    let change = median(&mut diffs)?;
    // the median of k differences: √(π/2)·σ/√k (see the module docs)
    let sigma =
        (sigma2 / k as f64).sqrt() * (std::f64::consts::PI / 2.0).sqrt() / (k as f64).sqrt();
    used.sort_unstable();
    Some((change, sigma, used))
}

/// Compares two analyses of the same board.
pub fn compare(before: &Analysis, after: &Analysis, params: &CompareParams) -> Comparison {
    let pairs = match_families(&before.families, &after.families);
    let mut families = Vec::new();
    for (i, b) in before.families.iter().enumerate() {
        let j = pairs.iter().find(|p| p.0 == i).map(|p| p.1);
        let a = j.map(|j| &after.families[j]);
        let measured = family_change(before, b.id, after, a.map(|a| a.id), params);
        let status = match (a, &measured) {
            (None, _) => Status::Gone,
            (Some(_), Some((c, s, _))) => status_of(*c, *s),
            (Some(_), None) => Status::Unchanged,
        };
        families.push(FamilyChange {
            fundamental_hz: a.map_or(b.fundamental_hz, |a| a.fundamental_hz),
            kind: b.kind,
            origin: b.origin,
            change_db: measured.as_ref().map(|m| m.0),
            sigma_db: measured.as_ref().map(|m| m.1),
            status,
            harmonics_compared: measured.map(|m| m.2).unwrap_or_default(),
            worst_margin_before_db: b.worst_margin_db,
            worst_margin_after_db: a.and_then(|a| a.worst_margin_db),
            before_id: Some(b.id),
            after_id: a.map(|a| a.id),
        });
    }
    for (j, a) in after.families.iter().enumerate() {
        if pairs.iter().any(|p| p.1 == j) {
            continue;
        }
        // read backwards: how much it rose from the before trace
        let measured = family_change(after, a.id, before, None, params);
        families.push(FamilyChange {
            fundamental_hz: a.fundamental_hz,
            kind: a.kind,
            origin: a.origin,
            change_db: measured.as_ref().map(|m| -m.0),
            sigma_db: measured.as_ref().map(|m| m.1),
            status: Status::New,
            harmonics_compared: measured.map(|m| m.2).unwrap_or_default(),
            worst_margin_before_db: None,
            worst_margin_after_db: a.worst_margin_db,
            before_id: None,
            after_id: Some(a.id),
        });
    }
    Comparison {
        families,
        peaks: peak_changes(before, after, params),
        pass: after.verdict.pass,
        worst_margin_db: after.verdict.worst_margin_db,
        worst_margin_before_db: before.verdict.worst_margin_db,
        setup_repeat_db: params.setup_repeat_db,
    }
}

/// Every peak over a limit in either scan, matched to the other scan's peak at its frequency
/// (or read off the other trace), in order of frequency.
fn peak_changes(before: &Analysis, after: &Analysis, params: &CompareParams) -> Vec<PeakChange> {
    let failing = |p: &&Peak| p.margin_db.is_some_and(|m| m < 0.0);
    let mut out: Vec<PeakChange> = Vec::new();
    let mut claimed_after = vec![false; after.peaks.len()];
    for p in before.peaks.iter() {
        let half = match_half_hz(before, after, p.freq_hz, p.width_hz);
        let q = after
            .peaks
            .iter()
            .enumerate()
            .filter(|(_, q)| (q.freq_hz - p.freq_hz).abs() <= half)
            .min_by(|x, y| {
                (x.1.freq_hz - p.freq_hz)
                    .abs()
                    .total_cmp(&(y.1.freq_hz - p.freq_hz).abs())
            });
        let p_fails = failing(&p);
        let q_fails = q.is_some_and(|(_, q)| failing(&q));
        if let Some((k, _)) = q {
            claimed_after[k] = true;
        }
        if !p_fails && !q_fails {
            continue;
        }
        let sb = reading_sigma(before, p.over_floor_db, params);
        let (after_dbuv, sa, status_if_missing) = match q {
            Some((_, q)) => (
                Some(q.level_dbuv),
                reading_sigma(after, q.over_floor_db, params),
                None,
            ),
            None => (
                reading_at(&after.scan, p.freq_hz, half),
                reading_sigma(after, 0.0, params),
                Some(Status::Gone),
            ),
        };
        let change = after_dbuv.map(|a| a - p.level_dbuv);
        let sigma = sb.hypot(sa);
        let status = match (status_if_missing, change) {
            (Some(s), _) => s,
            (None, Some(c)) => status_of(c, sigma),
            (None, None) => Status::Gone,
        };
        out.push(PeakChange {
            freq_hz: p.freq_hz,
            before_dbuv: Some(p.level_dbuv),
            after_dbuv,
            change_db: change,
            sigma_db: change.map(|_| sigma),
            status,
            margin_before_db: p.margin_db,
            margin_after_db: q.and_then(|(_, q)| q.margin_db),
        });
    }
    for (k, q) in after.peaks.iter().enumerate() {
        if claimed_after[k] || !failing(&q) {
            continue;
        }
        let half = match_half_hz(before, after, q.freq_hz, q.width_hz);
        let before_dbuv = reading_at(&before.scan, q.freq_hz, half);
        let sigma =
            reading_sigma(after, q.over_floor_db, params).hypot(reading_sigma(before, 0.0, params));
        out.push(PeakChange {
            freq_hz: q.freq_hz,
            before_dbuv,
            after_dbuv: Some(q.level_dbuv),
            change_db: before_dbuv.map(|b| q.level_dbuv - b),
            sigma_db: before_dbuv.map(|_| sigma),
            status: Status::New,
            margin_before_db: None,
            margin_after_db: q.margin_db,
        });
    }
    out.sort_by(|x, y| x.freq_hz.total_cmp(&y.freq_hz));
    out
}

#[cfg(test)]
mod tests {
    use super::*;
    use ndarray::Array1;

    fn scan(levels: &[(f64, f64)]) -> Scan {
        Scan {
            freq_hz: Array1::from(levels.iter().map(|x| x.0).collect::<Vec<_>>()),
            level_dbuv: Array1::from(levels.iter().map(|x| x.1).collect::<Vec<_>>()),
            meta: Default::default(),
        }
    }

    #[test]
    fn reading_takes_the_highest_point_near_the_frequency() {
        let s = scan(&[(100e3, 10.0), (105e3, 30.0), (110e3, 12.0), (200e3, 5.0)]);
        assert_eq!(reading_at(&s, 104e3, 3e3), Some(30.0));
        // no point within 1 kHz of 150 kHz: the nearest point
        assert_eq!(reading_at(&s, 150e3, 1e3), Some(12.0));
        assert_eq!(reading_at(&s, 1e6, 1e3), None);
    }

    /// The significance rule: two standard deviations (a two-sided 95 % test of a Gaussian
    /// difference, any statistics text).
    #[test]
    fn status_needs_two_standard_deviations() {
        assert_eq!(status_of(-2.1, 1.0), Status::Improved);
        assert_eq!(status_of(-1.9, 1.0), Status::Unchanged);
        assert_eq!(status_of(2.0, 1.0), Status::Worse);
    }

    #[test]
    fn close_fundamentals_match_one_to_one() {
        let fam = |id, f0| Family {
            id,
            fundamental_hz: f0,
            fundamental_sigma_hz: 2.0,
            kind: Kind::Switching,
            ..Family::default()
        };
        let before = [fam(1, 100e3), fam(2, 400e3)];
        let after = [fam(1, 400.2e3), fam(2, 100.05e3), fam(3, 250e3)];
        let mut p = match_families(&before, &after);
        p.sort_unstable();
        assert_eq!(p, vec![(0, 1), (1, 0)]);
    }
}
