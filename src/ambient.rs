//! Ambient: is a peak of the DUT scan the lab's, the DUT's, or both? Each DUT peak is compared
//! with what the ambient scans (DUT off) show at its frequency, against their sweep-to-sweep
//! spread.

use crate::analysis::Origin;
use crate::floor::{Floor, FloorParams, estimate_floor};
use crate::peaks::FoundPeak;
use crate::scan::Scan;

/// Sweep-to-sweep spread assumed for a single ambient scan (dB): a stable carrier repeats
/// within 1-2 dB, amplitude modulation and fading add more (common practice; with two or more
/// ambient scans the measured spread is used instead).
pub const SINGLE_SCAN_SPREAD_DB: f64 = 3.0;
/// Smallest spread used even when the ambient scans agree closely (dB).
pub const MIN_SPREAD_DB: f64 = 1.0;
/// A DUT peak within this many dB plus two spreads of the ambient's level is the ambient
/// (measurement repeatability of a peak reading, common practice).
pub const SAME_LEVEL_DB: f64 = 3.0;

/// An ambient scan with its floor.
#[derive(Debug, Clone)]
pub struct AmbientScan<'a> {
    pub scan: &'a Scan,
    pub floor: Floor,
}

impl<'a> AmbientScan<'a> {
    /// Estimates the floor of `scan`.
    pub fn new(scan: &'a Scan) -> Self {
        AmbientScan {
            scan,
            floor: estimate_floor(scan, &FloorParams::default()),
        }
    }

    /// The highest ambient level within `half_hz` of `freq_hz`, and whether it is over the
    /// ambient's detection threshold there. `None` outside the ambient scan.
    pub fn level_near(&self, freq_hz: f64, half_hz: f64) -> Option<(f64, bool)> {
        let f = self.scan.freq_hz.as_slice()?;
        let lo = f.partition_point(|&x| x < freq_hz - half_hz);
        let hi = f.partition_point(|&x| x <= freq_hz + half_hz);
        let (lo, hi) = if lo < hi {
            (lo, hi)
        } else {
            nearest(f, freq_hz)?
        };
        let top = (lo..hi)
            .max_by(|&a, &b| self.scan.level_dbuv[a].total_cmp(&self.scan.level_dbuv[b]))?;
        let level = self.scan.level_dbuv[top];
        Some((level, level > self.floor.threshold_dbuv[top]))
    }
}

/// The single nearest point as a range, when the window holds none; `None` outside the span.
fn nearest(f: &[f64], freq_hz: f64) -> Option<(usize, usize)> {
    let (first, last) = (*f.first()?, *f.last()?);
    if freq_hz < first || freq_hz > last {
        return None;
    }
    let i = f.partition_point(|&x| x < freq_hz).min(f.len() - 1);
    Some((i, i + 1))
}

/// What the ambient says about one DUT peak.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct PeakAmbient {
    pub origin: Origin,
    /// Highest ambient level at the peak over all ambient scans (dBµV), when the ambient
    /// shows an emission there.
    pub ambient_dbuv: Option<f64>,
    /// Spread used for the decision (dB).
    pub spread_db: f64,
}

/// Origin of a DUT peak: `half_hz` is the half-width of the window searched in each ambient
/// scan (half a line width plus a display step covers a line on another grid).
pub fn peak_origin(peak: &FoundPeak, ambient: &[AmbientScan], half_hz: f64) -> PeakAmbient {
    if ambient.is_empty() {
        return PeakAmbient {
            origin: Origin::Unknown,
            ambient_dbuv: None,
            spread_db: 0.0,
        };
    }
    let seen: Vec<(f64, bool)> = ambient
        .iter()
        .filter_map(|a| a.level_near(peak.freq_hz, half_hz))
        .collect();
    let present: Vec<f64> = seen.iter().filter(|s| s.1).map(|s| s.0).collect();
    let spread_db = spread(&seen.iter().map(|s| s.0).collect::<Vec<_>>());
    let Some(top) = present.iter().copied().reduce(f64::max) else {
        return PeakAmbient {
            origin: Origin::Dut,
            ambient_dbuv: None,
            spread_db,
        };
    };
    let origin = if peak.level_dbuv - top <= SAME_LEVEL_DB + 2.0 * spread_db {
        Origin::Ambient
    } else {
        Origin::Mixed
    };
    PeakAmbient {
        origin,
        ambient_dbuv: Some(top),
        spread_db,
    }
}

/// Sample standard deviation of the ambient levels, at least [`MIN_SPREAD_DB`];
/// [`SINGLE_SCAN_SPREAD_DB`] for one scan.
fn spread(levels: &[f64]) -> f64 {
    if levels.len() < 2 {
        return SINGLE_SCAN_SPREAD_DB;
    }
    let k = levels.len() as f64;
    let mean = levels.iter().sum::<f64>() / k;
    let var = levels.iter().map(|l| (l - mean).powi(2)).sum::<f64>() / (k - 1.0);
    var.sqrt().max(MIN_SPREAD_DB)
}

/// Origin of a family from its members': ambient when at least 70 % of them are ambient, dut
/// when at most 30 % are (a mixed member is the DUT's emission on top of the ambient, so it
/// counts for the DUT), mixed between.
pub fn family_origin(members: &[Origin]) -> Origin {
    let k = members.len().max(1) as f64;
    let ambient = members.iter().filter(|m| **m == Origin::Ambient).count() as f64 / k;
    if ambient >= 0.7 {
        Origin::Ambient
    } else if ambient <= 0.3 {
        Origin::Dut
    } else {
        Origin::Mixed
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::scan::ScanMeta;

    fn flat_with_line(at: f64, level: f64) -> Scan {
        let f: Vec<f64> = (0..2000).map(|i| 150e3 + f64::from(i) * 4.5e3).collect();
        let l: Vec<f64> = f
            .iter()
            .enumerate()
            .map(|(i, &x)| {
                if (x - at).abs() < 5e3 {
                    level
                } else {
                    5.0 + ((i * 7919) % 13) as f64 * 0.3
                }
            })
            .collect();
        Scan::new(
            f,
            l,
            ScanMeta {
                rbw_hz: Some(9e3),
                ..ScanMeta::default()
            },
        )
        .unwrap()
    }

    fn peak(freq_hz: f64, level_dbuv: f64) -> FoundPeak {
        FoundPeak {
            index: 0,
            freq_hz,
            level_dbuv,
            prominence_db: 30.0,
            left_base: 0,
            right_base: 0,
            left_hz: freq_hz - 5e3,
            right_hz: freq_hz + 5e3,
            width_hz: 10e3,
            significance_db: 20.0,
            over_floor_db: 30.0,
        }
    }

    #[test]
    fn same_level_is_ambient_higher_is_mixed_absent_is_dut() {
        let amb = flat_with_line(909e3, 45.0);
        let a = [AmbientScan::new(&amb)];
        assert_eq!(
            peak_origin(&peak(909e3, 46.0), &a, 9e3).origin,
            Origin::Ambient
        );
        // 20 dB over the ambient carrier: the DUT adds its own emission there
        assert_eq!(
            peak_origin(&peak(909e3, 65.0), &a, 9e3).origin,
            Origin::Mixed
        );
        assert_eq!(peak_origin(&peak(2e6, 50.0), &a, 9e3).origin, Origin::Dut);
        assert_eq!(
            peak_origin(&peak(2e6, 50.0), &[], 9e3).origin,
            Origin::Unknown
        );
    }

    #[test]
    fn two_scans_give_their_spread() {
        let (a1, a2) = (flat_with_line(909e3, 45.0), flat_with_line(909e3, 39.0));
        let a = [AmbientScan::new(&a1), AmbientScan::new(&a2)];
        let r = peak_origin(&peak(909e3, 52.0), &a, 9e3);
        // source: derived, sample std of (45, 39) = 4.24 dB; 52 − 45 = 7 ≤ 3 + 2·4.24
        assert!((r.spread_db - 18f64.sqrt()).abs() < 1e-9);
        assert_eq!(r.origin, Origin::Ambient);
    }

    #[test]
    fn family_origin_by_majority() {
        use Origin::*;
        assert_eq!(family_origin(&[Ambient, Ambient, Ambient, Dut]), Ambient);
        assert_eq!(family_origin(&[Dut, Dut, Dut, Mixed]), Dut);
        // a DUT comb whose lines sit on the lab's carriers stays the DUT's
        assert_eq!(family_origin(&[Mixed, Mixed, Mixed, Dut]), Dut);
        assert_eq!(family_origin(&[Dut, Ambient, Ambient, Dut]), Mixed);
    }
}
