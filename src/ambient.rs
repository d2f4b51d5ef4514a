//! Ambient: is a peak of the DUT scan the lab's, the DUT's, or both? Each DUT peak is compared
//! with what the ambient scans (DUT off) show at its frequency, against their sweep-to-sweep
//! spread.

use crate::analysis::Origin;
use crate::bandwidth::Hump;
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

/// How far the deepest points of the DUT's trace must stand over those of the ambient's, both
/// against the ambient's receiver floor, to count as a broadband emission, dB. Resolved lines
/// lift a low quantile of a trace by taking the points between them: with a share u of the
/// points on lines, the noise points' 5/(1 − u) % quantile shows instead of their 5 % one. For
/// the widest noise law (M = 1, `D_q = 10·log10(−2·ln(1 − q))`, [`crate::floor`]) that is
/// 10 dB at u = 87.5 %, so 10 dB keeps out combs that leave an eighth of the points to noise.
pub const RAISED_FLOOR_DB: f64 = 10.0;

/// A continuum's lower half (median to 5 % quantile) spreads like noise, within this allowance,
/// dB: the beat of an unresolved comb's lines and the scalloping of a comb near the step spread
/// a few dB wider than receiver noise; between resolved lines the filter skirts fall tens of dB
/// from line to gap.
const CONTINUUM_SPREAD_DB: f64 = 6.0;

/// The quantile of a trace's points that shows whether it dips to the receiver floor.
const DIP_QUANTILE: f64 = 0.05;

/// Width of the windows the DUT trace is judged in: 0.05 decade, and at least 10 display
/// steps (enough points for a quantile) and 20 RBWs (one strong line's filter skirts stay over
/// the noise for a few RBWs: a Gaussian filter is 70 dB down at 1.7 RBW, so they hold under a
/// fifth of a window and leave its 5 % quantile to the noise; the floor's window is as wide).
const DIP_WINDOW_DECADES: f64 = 0.05;
const DIP_WINDOW_STEPS: f64 = 10.0;
const DIP_WINDOW_RBW: f64 = 20.0;

/// Regions where the DUT trace never dips to the receiver floor that the ambient scans show.
///
/// With the DUT off, an ambient scan shows the receiver's noise (and the lab's broadband
/// ambient). Where the DUT's trace, taken with the same RBW and detector, never comes down to
/// it, the DUT fills every bucket there: a comb finer than the RBW or the display step, the
/// merged plateaus of dithered harmonics, or broadband noise. Lines under it cannot be seen, so
/// the region is reported as a hump with the rescan that would resolve a comb.
///
/// # Method
/// The reference floor at each DUT point is the lowest of the matching ambient scans' floors
/// (linear between their points, [`floor_at`]); scans with another RBW or detector give none. The
/// DUT trace is cut into windows ([`DIP_WINDOW_DECADES`], at least [`DIP_WINDOW_STEPS`] steps
/// and [`DIP_WINDOW_RBW`] RBWs). A window is raised when the 5 % quantile of its levels over
/// the reference floor stands [`RAISED_FLOOR_DB`] over the 5 % quantile of the ambient scans'
/// own levels over their floors (where noise shows, both lie a few dB under the floor's
/// median). Runs of raised windows are the regions; a region spans at least five points, and
/// its lower half (median to 5 % quantile) spreads no more than the noise's plus
/// [`CONTINUUM_SPREAD_DB`] (the gaps between strong resolved lines never dip either, but their
/// filter skirts spread over tens of dB).
///
/// # Source
/// Derived: the receiver floor is common to two scans taken with the same settings; the floor
/// is the median of a noise-only point ([`crate::floor`]); quantiles by nearest rank.
pub fn raised_floor(dut: &Scan, ambient: &[AmbientScan]) -> Vec<Hump> {
    let same = |a: &&AmbientScan| {
        let (m, n) = (&dut.meta, &a.scan.meta);
        let rbw = match (m.rbw_hz, n.rbw_hz) {
            (Some(x), Some(y)) => (x - y).abs() <= 0.01 * x,
            (None, None) => true,
            _ => false,
        };
        rbw && m.detector == n.detector
    };
    let matching: Vec<&AmbientScan> = ambient.iter().filter(same).collect();
    // the reference floor per DUT point (NaN outside the ambient scans)
    let mut reference = vec![f64::NAN; dut.len()];
    for a in &matching {
        floor_at(&dut.freq_hz, a, &mut reference);
    }
    let mut noise_low: Vec<f64> = matching
        .iter()
        .flat_map(|a| {
            a.scan
                .level_dbuv
                .iter()
                .zip(&a.floor.floor_dbuv)
                .map(|(l, f)| l - f)
        })
        .collect();
    if noise_low.is_empty() || dut.len() < 5 {
        return Vec::new();
    }
    let noise_mid = crate::floor::quantile_in_place(&mut noise_low, 0.5);
    let noise_low = crate::floor::quantile_in_place(&mut noise_low, DIP_QUANTILE);
    // level over the reference floor, per DUT point (NaN outside the ambient scans)
    let over: Vec<f64> = reference
        .iter()
        .zip(dut.level_dbuv.iter())
        .map(|(r, l)| l - r)
        .collect();
    drop(reference);
    let rbw = dut.meta.rbw_hz.unwrap_or(0.0);
    // windows: [start, end) point ranges
    let mut raised: Vec<(usize, usize, bool)> = Vec::new();
    let mut i = 0;
    while i < dut.len() {
        let f = dut.freq_hz[i];
        let width = (f * (10f64.powf(DIP_WINDOW_DECADES) - 1.0))
            .max(DIP_WINDOW_STEPS * crate::bandwidth::local_step(dut, i))
            .max(DIP_WINDOW_RBW * rbw);
        let end = dut.freq_hz.as_slice().map_or(i + 1, |fs| {
            fs.partition_point(|&x| x < f + width).max(i + 1)
        });
        let mut v: Vec<f64> = over[i..end]
            .iter()
            .copied()
            .filter(|x| !x.is_nan())
            .collect();
        let up = !v.is_empty()
            && crate::floor::quantile_in_place(&mut v, DIP_QUANTILE) - noise_low >= RAISED_FLOOR_DB;
        raised.push((i, end, up));
        i = end;
    }
    let mut out = Vec::new();
    let mut k = 0;
    while k < raised.len() {
        if !raised[k].2 {
            k += 1;
            continue;
        }
        let first = raised[k].0;
        while k < raised.len() && raised[k].2 {
            k += 1;
        }
        let last = raised[k - 1].1 - 1;
        if last < first + 4 {
            continue;
        }
        let mut levels: Vec<f64> = over[first..=last]
            .iter()
            .copied()
            .filter(|x| !x.is_nan())
            .collect();
        let median = crate::floor::quantile_in_place(&mut levels, 0.5);
        let low = crate::floor::quantile_in_place(&mut levels, DIP_QUANTILE);
        if median - low > noise_mid - noise_low + CONTINUUM_SPREAD_DB {
            // the lower half spreads far wider than noise: the filter skirts of resolved
            // lines between them, not a continuum
            continue;
        }
        let top = (first..=last)
            .max_by(|&a, &b| dut.level_dbuv[a].total_cmp(&dut.level_dbuv[b]))
            .unwrap_or(first);
        let mut h = Hump {
            start_hz: dut.freq_hz[first],
            stop_hz: dut.freq_hz[last],
            freq_hz: dut.freq_hz[top],
            level_dbuv: dut.level_dbuv[top],
            over_floor_db: median,
            family: None,
            likely_source: Some(format!(
                "the board's trace stands {median:.0} dB over the ambient's receiver floor here \
                 and never dips to it: a comb finer than the RBW or the display step (a \
                 converter at a low switching frequency or in burst mode, a PWM), merged \
                 dithered harmonics or broadband noise fills every bucket, and lines under it \
                 cannot be seen; a rescan with a narrower RBW shows a comb as lines"
            )),
            rescan: None,
            seen_as: crate::bandwidth::HumpBasis::OverAmbientFloor,
        };
        h.rescan = dut.meta.rbw_hz.map(|r| crate::bandwidth::rescan_for(&h, r));
        out.push(h);
    }
    out
}

/// Lowers `out[i]` to the ambient scan's floor at `at[i]` (ascending frequencies), linear
/// between its neighbouring points in one pass (both sequences ascend); points outside its span
/// are left alone (NaN stays NaN elsewhere). The floor is a smooth envelope sampled at every
/// ambient point, so between neighbours linear and log-frequency interpolation agree to far
/// under 0.01 dB.
fn floor_at(at: &ndarray::Array1<f64>, a: &AmbientScan, out: &mut [f64]) {
    let f = &a.scan.freq_hz;
    let fl = &a.floor.floor_dbuv;
    let n = f.len().min(fl.len());
    if n == 0 {
        return;
    }
    let mut j = 0;
    for (x, o) in at.iter().zip(out.iter_mut()) {
        if *x < f[0] || *x > f[n - 1] {
            continue;
        }
        while j + 1 < n && f[j + 1] < *x {
            j += 1;
        }
        let v = if j + 1 >= n || f[j + 1] <= f[j] {
            fl[j]
        } else {
            let t = ((x - f[j]) / (f[j + 1] - f[j])).clamp(0.0, 1.0);
            fl[j] + t * (fl[j + 1] - fl[j])
        };
        if o.is_nan() || v < *o {
            *o = v;
        }
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

    /// A log-spaced 150 kHz-30 MHz trace (4001 points, RBW 9 kHz) of receiver noise read by a
    /// peak detector (the largest of 4 Rayleigh samples per point, 0 dBµV scale), with `extra`
    /// giving, per frequency, a steady level in dBµV added in power (`None`: nothing).
    fn noise_scan(seed: u64, extra: impl Fn(f64, usize) -> Option<f64>) -> Scan {
        use rand::{Rng, SeedableRng};
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(seed);
        let n = 4001;
        let f: Vec<f64> = (0..n)
            .map(|i| 150e3 * 200f64.powf(i as f64 / (n - 1) as f64))
            .collect();
        let l: Vec<f64> = f
            .iter()
            .enumerate()
            .map(|(i, &x)| {
                let noise = (0..4)
                    .map(|_| {
                        let u: f64 = rng.random_range(1e-12..1.0);
                        (-2.0 * u.ln()).sqrt()
                    })
                    .fold(0.0, f64::max);
                let p = noise * noise + extra(x, i).map_or(0.0, |d| 10f64.powf(d / 10.0));
                10.0 * p.log10()
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

    #[test]
    fn a_continuum_over_the_ambient_floor_is_a_hump_and_resolved_lines_are_not() {
        // source: derived; a steady emission 30 dB over the receiver noise from 1 to 3 MHz
        // fills every bucket, so the board's trace there stands about 30 dB over the ambient's
        // floor and never dips to it (the noise law of crate::floor); lines on 70 % of the
        // points leave noise between them, and the 5 % quantile rises by
        // 10·log10(ln(1 − 0.05/0.3)/ln(0.95)) ≈ 5.5 dB (M = 1 bound), under RAISED_FLOOR_DB
        let ambient = noise_scan(1, |_, _| None);
        let amb = [AmbientScan::new(&ambient)];
        let hump = noise_scan(2, |f, _| (1e6..=3e6).contains(&f).then_some(30.0));
        let found = raised_floor(&hump, &amb);
        assert_eq!(found.len(), 1, "{found:?}");
        let h = &found[0];
        // edges within a judging window (0.05 decade here)
        assert!((h.start_hz / 1e6).log10().abs() < 0.051, "{h:?}");
        assert!((h.stop_hz / 3e6).log10().abs() < 0.051, "{h:?}");
        // the floor is the median of a noise point, max of 4 Rayleigh samples:
        // 10·log10(−2·ln(1 − 0.5^(1/4))) = 5.66 dB over the unit scale
        let expected = 30.0 - crate::floor::max_rayleigh_quantile_db(0.5, 4.0);
        assert!(
            (h.over_floor_db - expected).abs() < 1.0,
            "{h:?} vs {expected}"
        );
        assert!(h.rescan.is_some() && h.likely_source.is_some());
        assert_eq!(h.seen_as, crate::bandwidth::HumpBasis::OverAmbientFloor);
        let dense = noise_scan(3, |f, i| {
            ((1e6..=3e6).contains(&f) && i % 10 < 7).then_some(40.0)
        });
        assert!(raised_floor(&dense, &amb).is_empty());
        // a strong resolved comb: lines 60 dB up every 3 RBW from 1 to 3 MHz, whose Gaussian
        // filter skirts (−24.1·(Δf/B6)² dB, the power response of the filter of
        // crate::detectors) stay 6 dB over the noise halfway between them; the trace never
        // dips, but its lower half spreads over the skirts' tens of dB: no continuum
        let skirts = noise_scan(4, |f, _| {
            let spacing = 27e3;
            let d = (f - 1e6)
                .rem_euclid(spacing)
                .min(spacing - (f - 1e6).rem_euclid(spacing));
            (1e6..=3e6)
                .contains(&f)
                .then_some(60.0 - 24.1 * (d / 9e3).powi(2))
        });
        assert!(raised_floor(&skirts, &amb).is_empty());
        // the same board, measured with another RBW than the ambient: nothing to compare
        let mut other = hump.clone();
        other.meta.rbw_hz = Some(120e3);
        assert!(raised_floor(&other, &amb).is_empty());
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
