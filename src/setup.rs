//! Set-up checks shared by `analyze` and `survey`: is the scan fit to be judged? Each check is a
//! [`Warning`] with a stable code, the number that tripped it and the fix.
//!
//! | code | what |
//! |---|---|
//! | `no-limit` | no limit given |
//! | `limit-out-of-range` | no scan point lies in a limit's range |
//! | `quantity-mismatch` | dBµV scan against a dBµV/m limit (or the reverse) |
//! | `detector-unknown`, `peak-vs-weighted`, `detector-below-limit` | detector against the limit's |
//! | `rbw-unknown`, `rbw-not-cispr` | RBW against CISPR 16-1-1 (200 Hz / 9 kHz / 120 kHz) |
//! | `step-coarse` | display step over half the RBW, with the level a line may lose |
//! | `floor-near-limit` | noise floor less than 6 dB under a limit |
//! | `possible-overload` | a reading near the top of the range |
//! | `no-ambient`, `ambient-near-limit`, `ambient-rbw-differs`, `ambient-span` | ambient scans |
//!
//! ```
//! use spurhound::{limits, scan::{Scan, ScanMeta}, setup::{check_scan, ScanChecks}};
//! let f: Vec<f64> = (0..11).map(|i| 150e3 + i as f64 * 20e3).collect();
//! let meta = ScanMeta { rbw_hz: Some(9e3), ..ScanMeta::default() };
//! let scan = Scan::new(f, vec![20.0; 11], meta)?;
//! let limit = limits::builtin("cispr32-b-av").unwrap();
//! let mut warnings = Vec::new();
//! check_scan(&ScanChecks { scan: &scan, raw: &scan, limits: &[limit], floor: None }, &mut warnings);
//! // 20 kHz steps with a 9 kHz RBW: more than RBW/2
//! assert!(warnings.iter().any(|w| w.code == "step-coarse"));
//! # Ok::<(), Box<dyn std::error::Error>>(())
//! ```

use crate::analysis::{AmbientResult, fmt_hz};
use crate::floor::Floor;
use crate::limits::Limit;
use crate::scan::{Detector, Scan};
use crate::units::DBM_TO_DBUV_50_OHM;
use serde::Serialize;

/// Ambient closer than this to the limit may mask the DUT (ANSI C63.4 §5.1.2 treats the
/// ambient; the 6 dB figure is common practice). The same headroom is asked of the noise floor.
pub const AMBIENT_HEADROOM_DB: f64 = 6.0;

/// CISPR 16-1-1 measuring-receiver bands: (start Hz, stop Hz, 6 dB RBW Hz, band name).
pub const CISPR_BANDS: [(f64, f64, f64, &str); 3] = [
    (9e3, 150e3, 200.0, "A"),
    (150e3, 30e6, 9e3, "B"),
    (30e6, 1e9, 120e3, "C/D"),
];

/// A reading this close to a stated reference level (the top of the display range) may be an
/// overload, dB (common practice: keep signals below the top graticule).
pub const REF_LEVEL_MARGIN_DB: f64 = 3.0;
/// A reading at the analyzer input at or above 0 dBm (106.99 dBµV) puts −10 dBm on the first
/// mixer with 10 dB input attenuation, about where common analyzer inputs begin to compress
/// (from memory; the instrument's data sheet states its own figure).
pub const INPUT_OVERLOAD_DBUV: f64 = DBM_TO_DBUV_50_OHM;
/// The highest reading repeated exactly at this many points or more is a clipped display.
pub const CLIPPED_POINTS: usize = 3;

/// A check the user should read: a stable code and a sentence with the number and the fix.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Warning {
    pub code: &'static str,
    pub message: String,
}

/// What the checks of one scan look at.
#[derive(Debug, Clone, Copy)]
pub struct ScanChecks<'a> {
    /// The scan after the transducer chain (what is judged).
    pub scan: &'a Scan,
    /// The scan as read, before corrections (what reached the analyzer input).
    pub raw: &'a Scan,
    /// The limits it is judged against.
    pub limits: &'a [Limit],
    /// Its noise floor, when estimated.
    pub floor: Option<&'a Floor>,
}

/// Every check of one scan: limits given and covering it, quantity, detector, RBW, display step,
/// noise floor under each limit, overload.
pub fn check_scan(c: &ScanChecks, warnings: &mut Vec<Warning>) {
    if c.limits.is_empty() {
        warnings.push(Warning { code: "no-limit", message: "no limit given: margins and verdict need --limit NAME|FILE (see `spurhound limits`)".into() });
    }
    for l in c.limits {
        check_limit(c.scan, l, warnings);
        check_detector(c.scan.meta.detector, l, warnings);
    }
    check_rbw(c.scan, warnings);
    check_step(c.scan, warnings);
    if let Some(floor) = c.floor {
        for l in c.limits {
            check_floor(c.scan, floor, l, warnings);
        }
    }
    check_overload(c.raw, warnings);
}

fn check_limit(scan: &Scan, l: &Limit, warnings: &mut Vec<Warning>) {
    if !scan.freq_hz.iter().any(|&f| l.at(f).is_some()) {
        let (a, b) = l.range_hz();
        warnings.push(Warning {
            code: "limit-out-of-range",
            message: format!(
                "no scan point lies in the range of {} ({} to {}); check the frequency unit",
                l.name,
                fmt_hz(a),
                fmt_hz(b)
            ),
        });
    }
    if l.quantity != scan.meta.quantity {
        warnings.push(Warning {
            code: "quantity-mismatch",
            message: format!(
                "the scan is in {} but {} bounds {}; add the LISN factor or antenna factor with --transducer",
                scan.meta.quantity.unit(),
                l.name,
                l.quantity.unit()
            ),
        });
    }
}

fn check_detector(scan_det: Option<Detector>, l: &Limit, warnings: &mut Vec<Warning>) {
    match scan_det {
        None => warnings.push(Warning {
            code: "detector-unknown",
            message: format!("the scan does not state its detector; {} is a {} limit (pass --detector)", l.name, l.detector),
        }),
        Some(Detector::Peak) if l.detector != Detector::Peak => warnings.push(Warning {
            code: "peak-vs-weighted",
            message: format!(
                "peak readings judged against the {} limit {}: a pass holds, a failure may still pass when re-measured with the {} detector",
                l.detector, l.name, l.detector
            ),
        }),
        Some(d) if d != l.detector && weight(d) < weight(l.detector) => warnings.push(Warning {
            code: "detector-below-limit",
            message: format!(
                "{} readings judged against the {} limit {}: {} reads at or below {}, so a pass here does not prove a pass",
                d, l.detector, l.name, d, l.detector
            ),
        }),
        _ => {}
    }
}

/// Detector order for any signal: peak ≥ quasi-peak ≥ average (fact of the trade); rms lies
/// between quasi-peak and average for impulsive signals (CISPR 16-1-1, from memory).
fn weight(d: Detector) -> u8 {
    match d {
        Detector::Peak => 4,
        Detector::QuasiPeak => 3,
        Detector::Rms => 2,
        Detector::Average => 1,
        Detector::Sample => 0,
    }
}

fn check_rbw(scan: &Scan, warnings: &mut Vec<Warning>) {
    let (start, stop) = scan.span_hz();
    let Some(rbw) = scan.meta.rbw_hz else {
        warnings.push(Warning {
            code: "rbw-unknown",
            message: "the scan does not state its RBW (pass --rbw HZ)".into(),
        });
        return;
    };
    for (a, b, want, band) in CISPR_BANDS {
        let overlap = start.max(a) < stop.min(b);
        if overlap && (rbw / want > 1.5 || rbw / want < 1.0 / 1.5) {
            warnings.push(Warning {
                code: "rbw-not-cispr",
                message: format!(
                    "RBW {} in CISPR 16-1-1 band {band} ({} to {}), which uses {} (6 dB): levels of broadband emissions will differ",
                    fmt_hz(rbw),
                    fmt_hz(a),
                    fmt_hz(b),
                    fmt_hz(want)
                ),
            });
        }
    }
}

/// Level lost by a narrowband line midway between two display points `step_hz` apart, seen
/// through a Gaussian RBW of 6 dB bandwidth `rbw_hz`, dB (positive).
///
/// # Formula
/// ```text
/// |H(Δf)| = 2^(−(2·Δf/B6)²)  ⇒  loss(Δf = step/2) = 20·log10(2)·(step/B6)² = 6.02·(step/B6)² dB
/// ```
/// # Source
/// Derived from the Gaussian filter |H(f)| = exp(−a·f²), a = 4·ln2/B6² (METHODS §6): at step =
/// B6/2 (the "step at most RBW/2" rule of METHODS §9) the loss is 1.5 dB, at step = B6 it is 6 dB.
pub fn scalloping_loss_db(step_hz: f64, rbw_hz: f64) -> f64 {
    20.0 * 2f64.log10() * (step_hz / rbw_hz).powi(2)
}

/// Display points for steps of at most RBW/2 over `span_hz`, odd (METHODS §9:
/// (30 − 0.15) MHz / 4.5 kHz = 6633.3 → 6635).
pub fn points_for(span_hz: f64, rbw_hz: f64) -> usize {
    let n = (span_hz / (rbw_hz / 2.0)).ceil() as usize + 1;
    n | 1
}

/// Beyond this loss a line midway between points is as good as missed; the message says so
/// instead of a number, dB.
const MAX_STATED_LOSS_DB: f64 = 40.0;

/// Display step at most half the RBW (METHODS §9); beyond it, the level a line may lose.
fn check_step(scan: &Scan, warnings: &mut Vec<Warning>) {
    let Some(rbw) = scan.meta.rbw_hz.filter(|r| *r > 0.0) else {
        return;
    };
    let f = &scan.freq_hz;
    let coarse = (1..f.len()).find(|&i| f[i] - f[i - 1] > 0.5 * rbw * (1.0 + 1e-6));
    let Some(first) = coarse else { return };
    let largest = (1..f.len()).map(|i| f[i] - f[i - 1]).fold(0.0, f64::max);
    let (start, stop) = scan.span_hz();
    let above = if first > 1 {
        format!(" above {}", fmt_hz(f[first - 1]))
    } else {
        String::new()
    };
    let loss = scalloping_loss_db(largest, rbw);
    let low = if loss > MAX_STATED_LOSS_DB {
        format!("more than {MAX_STATED_LOSS_DB:.0} dB low (missed)")
    } else {
        format!("up to {loss:.1} dB low")
    };
    warnings.push(Warning {
        code: "step-coarse",
        message: format!(
            "display steps up to {} are more than half the RBW {}{above}: a narrowband line midway between two points reads {low} on a stepped receiver or with the sample detector (Gaussian RBW, 6.02·(step/RBW)² dB), and a swept peak display places it only within ±step/2; use steps of at most RBW/2 ({} points for {} to {})",
            fmt_hz(largest),
            fmt_hz(rbw),
            points_for(stop - start, rbw),
            fmt_hz(start),
            fmt_hz(stop)
        ),
    });
}

/// Fewest points whose floor estimate is trusted for the floor check (the noise law needs points
/// to be fitted, as for the steady-background rule of `analyze`).
pub const FLOOR_MIN_POINTS: usize = 200;

/// The noise floor at least [`AMBIENT_HEADROOM_DB`] under the limit (common practice, as for
/// the ambient): where it is not, an emission at the limit cannot be told from noise. Scans of
/// fewer than [`FLOOR_MIN_POINTS`] points are not checked.
fn check_floor(scan: &Scan, floor: &Floor, l: &Limit, warnings: &mut Vec<Warning>) {
    if scan.len() < FLOOR_MIN_POINTS {
        return;
    }
    let mut covered = 0usize;
    let mut near = 0usize;
    let mut worst: Option<(f64, f64)> = None;
    let limit_dbuv = l.at_all(&scan.freq_hz);
    for (i, &f) in scan.freq_hz.iter().enumerate() {
        let (Some(lim), Some(&fl)) = (limit_dbuv[i], floor.floor_dbuv.get(i)) else {
            continue;
        };
        covered += 1;
        let margin = lim - fl;
        if margin < AMBIENT_HEADROOM_DB {
            near += 1;
            if worst.is_none_or(|w| margin < w.1) {
                worst = Some((f, margin));
            }
        }
    }
    let Some((f, m)) = worst else { return };
    warnings.push(Warning {
        code: "floor-near-limit",
        message: format!(
            "the noise floor is less than {AMBIENT_HEADROOM_DB} dB under {} at {:.0} % of the points in its range (least {m:.1} dB, at {}): an emission at the limit cannot be told from noise there; lower the input attenuation (keep the limiter), add a low-noise preamplifier, or shorten the cable",
            l.name,
            100.0 * near as f64 / covered.max(1) as f64,
            fmt_hz(f)
        ),
    });
}

/// A reference level stated in the metadata, dBµV: `ref_level_dbuv`, `ref_level_dbm`, or
/// `ref_level` / `reference_level` with an optional unit (`-20 dBm`, `87 dBuV`; dBµV when none).
pub fn stated_ref_level_dbuv(scan: &Scan) -> Option<f64> {
    scan.meta.extra.iter().find_map(|(k, v)| {
        let key: String = k
            .chars()
            .filter(|c| c.is_ascii_alphanumeric())
            .collect::<String>()
            .to_ascii_lowercase();
        let value = v.trim();
        let lower = value.to_ascii_lowercase();
        let number = |t: &str| t.trim().parse::<f64>().ok().filter(|x| x.is_finite());
        let dbm = |x: f64| x + DBM_TO_DBUV_50_OHM;
        match key.as_str() {
            "refleveldbuv" => number(value),
            "refleveldbm" => number(value).map(dbm),
            "reflevel" | "referencelevel" => {
                if let Some(x) = lower.strip_suffix("dbm") {
                    number(x).map(dbm)
                } else {
                    let x = lower
                        .strip_suffix("dbuv")
                        .or_else(|| lower.strip_suffix("dbµv"))
                        .unwrap_or(&lower);
                    number(x)
                }
            }
            _ => None,
        }
    })
}

/// A reading near the top of the range: within [`REF_LEVEL_MARGIN_DB`] of a stated reference
/// level; else the highest reading repeated exactly at [`CLIPPED_POINTS`] points or more (a
/// clipped display); else a reading at the input of [`INPUT_OVERLOAD_DBUV`] or more.
fn check_overload(raw: &Scan, warnings: &mut Vec<Warning>) {
    let Some(top) = raw.level_dbuv.iter().copied().reduce(f64::max) else {
        return;
    };
    let at = raw
        .level_dbuv
        .iter()
        .position(|&l| l == top)
        .map_or(0.0, |i| raw.freq_hz[i]);
    let fix = "add 10 dB of input attenuation and check that the reading falls by 10 dB; a smaller fall means the input was overloaded";
    let message = if let Some(r) = stated_ref_level_dbuv(raw) {
        (top > r - REF_LEVEL_MARGIN_DB).then(|| {
            format!(
                "the highest reading, {top:.1} dBµV at {}, is {:.1} dB from the reference level {r:.1} dBµV (the top of the range): possible overload; {fix}",
                fmt_hz(at),
                r - top
            )
        })
    } else {
        let repeats = raw.level_dbuv.iter().filter(|&&l| l == top).count();
        if repeats >= CLIPPED_POINTS && repeats < raw.len() {
            Some(format!(
                "the highest reading, {top:.1} dBµV, repeats exactly at {repeats} points (first at {}): a clipped display, the top of the range; raise the reference level, or {fix}",
                fmt_hz(at)
            ))
        } else {
            (top >= INPUT_OVERLOAD_DBUV).then(|| {
                format!(
                    "the highest reading, {top:.1} dBµV at {} (before corrections), is at or above 0 dBm at the analyzer input, where common inputs begin to compress: possible overload; {fix}",
                    fmt_hz(at)
                )
            })
        }
    };
    if let Some(message) = message {
        warnings.push(Warning {
            code: "possible-overload",
            message,
        });
    }
}

/// Checks of the ambient scans of an analysis: none given, within the headroom of the limit,
/// another RBW, not covering the DUT scan.
pub fn check_ambient(dut: &Scan, ambient: &[AmbientResult], warnings: &mut Vec<Warning>) {
    if ambient.is_empty() {
        warnings.push(Warning {
            code: "no-ambient",
            message: "no ambient scan given: peaks cannot be told from the lab's ambient (take a scan with the DUT off and pass --ambient)".into(),
        });
        return;
    }
    for a in ambient {
        if let Some(&(s, e, m)) = a.near_limit.iter().min_by(|x, y| x.2.total_cmp(&y.2)) {
            warnings.push(Warning {
                code: "ambient-near-limit",
                message: format!(
                    "ambient {} comes within {AMBIENT_HEADROOM_DB} dB of the limit in {} range(s), worst {:.1} dB at {} to {}: the DUT cannot be judged there",
                    a.scan.label(),
                    a.near_limit.len(),
                    m,
                    fmt_hz(s),
                    fmt_hz(e)
                ),
            });
        }
        if a.scan.meta.rbw_hz.is_some()
            && dut.meta.rbw_hz.is_some()
            && a.scan.meta.rbw_hz != dut.meta.rbw_hz
        {
            warnings.push(Warning {
                code: "ambient-rbw-differs",
                message: format!("ambient {} was taken with another RBW than the DUT scan; compare like with like", a.scan.label()),
            });
        }
        let (ds, de) = dut.span_hz();
        let (as_, ae) = a.scan.span_hz();
        if as_ > ds * (1.0 + 1e-9) || ae < de * (1.0 - 1e-9) {
            warnings.push(Warning {
                code: "ambient-span",
                message: format!(
                    "ambient {} ({} to {}) does not cover the DUT scan ({} to {})",
                    a.scan.label(),
                    fmt_hz(as_),
                    fmt_hz(ae),
                    fmt_hz(ds),
                    fmt_hz(de)
                ),
            });
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::scan::ScanMeta;

    fn grid(points: usize, step_hz: f64, level: f64) -> Scan {
        let f: Vec<f64> = (0..points).map(|i| 150e3 + i as f64 * step_hz).collect();
        let l: Vec<f64> = (0..points)
            .map(|i| level + 0.1 * (i as f64 * 0.7).sin())
            .collect();
        let meta = ScanMeta {
            rbw_hz: Some(9e3),
            detector: Some(Detector::QuasiPeak),
            ..ScanMeta::default()
        };
        Scan::new(f, l, meta).unwrap()
    }

    fn codes(scan: &Scan, floor: Option<&Floor>) -> Vec<&'static str> {
        let qp = crate::limits::builtin("cispr32-b-qp").unwrap();
        let mut w = Vec::new();
        check_scan(
            &ScanChecks {
                scan,
                raw: scan,
                limits: &[qp],
                floor,
            },
            &mut w,
        );
        w.iter().map(|w| w.code).collect()
    }

    #[test]
    fn scalloping_loss_of_a_gaussian_rbw() {
        // source: derived, |H| = 2^(−(2Δf/B6)²): Δf = B6/4 gives 2^(−1/4) = −1.505 dB,
        // Δf = B6/2 gives −6.02 dB (the 6 dB bandwidth by definition)
        assert!((scalloping_loss_db(4.5e3, 9e3) - 1.505).abs() < 1e-3);
        assert!((scalloping_loss_db(9e3, 9e3) - 6.0206).abs() < 1e-4);
        // source: METHODS §9, (30 − 0.15) MHz / 4.5 kHz → 6635 points (odd)
        assert_eq!(points_for(30e6 - 150e3, 9e3), 6635);
    }

    #[test]
    fn steps_over_half_the_rbw_are_flagged_with_the_loss() {
        // 4.5 kHz steps with 9 kHz RBW: exactly RBW/2, fine (METHODS §9)
        assert!(!codes(&grid(200, 4.5e3, 20.0), None).contains(&"step-coarse"));
        let coarse = grid(200, 9e3, 20.0);
        assert!(codes(&coarse, None).contains(&"step-coarse"));
        let qp = crate::limits::builtin("cispr32-b-qp").unwrap();
        let mut w = Vec::new();
        check_scan(
            &ScanChecks {
                scan: &coarse,
                raw: &coarse,
                limits: &[qp],
                floor: None,
            },
            &mut w,
        );
        let msg = &w.iter().find(|w| w.code == "step-coarse").unwrap().message;
        // source: derived above, a step of one RBW loses 6.0 dB midway
        assert!(msg.contains("up to 6.0 dB low"), "{msg}");
        // ten RBWs: 602 dB by the formula, stated as missed
        assert!(codes(&grid(20, 90e3, 20.0), None).contains(&"step-coarse"));
    }

    #[test]
    fn a_floor_near_the_limit_is_flagged() {
        let s = grid(300, 4.5e3, 20.0);
        let mut floor = crate::floor::estimate_floor(&s, &crate::floor::FloorParams::default());
        assert!(!codes(&s, Some(&floor)).contains(&"floor-near-limit"));
        // source: CISPR 32 Class B QP is 56 dBµV from 0.5 MHz; a floor of 52 dBµV is 4 dB under it
        floor.floor_dbuv = vec![52.0; s.len()];
        assert!(codes(&s, Some(&floor)).contains(&"floor-near-limit"));
    }

    #[test]
    fn overload_signs_are_flagged() {
        let quiet = grid(100, 4.5e3, 20.0);
        assert!(!codes(&quiet, None).contains(&"possible-overload"));
        // a stated reference level of 22 dBµV: the 20.1 dBµV top is within 3 dB of it
        // (source: derived, −85 dBm + 106.99 = 21.99 dBµV)
        let mut near_ref = quiet.clone();
        near_ref
            .meta
            .extra
            .push(("ref_level".into(), "-85 dBm".into()));
        assert!((stated_ref_level_dbuv(&near_ref).unwrap() - 21.99).abs() < 0.01);
        assert!(codes(&near_ref, None).contains(&"possible-overload"));
        // a clipped top: the same highest value at five points
        let mut clipped = quiet.clone();
        for i in [10, 11, 12, 40, 41] {
            clipped.level_dbuv[i] = 90.0;
        }
        assert!(codes(&clipped, None).contains(&"possible-overload"));
        // source: derived, 0 dBm = 106.99 dBµV at the input
        let mut hot = quiet.clone();
        hot.level_dbuv[50] = 108.0;
        assert!(codes(&hot, None).contains(&"possible-overload"));
    }
}
