//! How long a QP or AV re-measurement takes: dwell per frequency and slow-sweep time.

use super::{Band, DetectorError};
use serde::Serialize;

/// Settling of a critically damped meter to 1 % of a step, in units of its time constant:
/// the root of `(1 + x)·e^(−x) = 0.01`, x = 6.638 (1 % is 0.09 dB).
///
/// # Source
/// Derived: the step response of `T²y'' + 2Ty' + y = x` is `1 − (1 + t/T)·e^(−t/T)`.
const METER_SETTLING_PER_T: f64 = 6.638_352_067_993_815;

/// Shortest dwell for a signal of unknown repetition, s (METHODS.md §9: QP dwell ≥ 1 s per
/// frequency for unknown signals, source S7).
pub const UNKNOWN_SIGNAL_DWELL_S: f64 = 1.0;

/// Periods of the slowest repetition a dwell must hold (common practice: one period to catch
/// the event, one more for the meter to show its maximum).
const PERIODS_PER_DWELL: f64 = 2.0;

/// Worst-case time for the QP and AV readings to come within 0.1 dB of their settled values,
/// measuring from rest, s, bands A, B, C/D: the time-domain model's longest settling over
/// impulse trains of 1 Hz to 4·B_imp (16 PRFs a decade), tuned CW, and tuned bursts of 1 to
/// 50 Hz at duties of 0.1 % to 50 %, rounded up to 0.1 s. The model (carrier diode law) found
/// 2.37 s in band A, 1.54 s in band B and 2.50 s in band C/D, at pulse rates of a few hertz
/// and slow bursts; a release-mode test repeats the search.
///
/// # Source
/// Derived with [`super::simulate_dwell`] from the CISPR 16-1-1 time constants (METHODS.md §2).
/// The charge stage, not the meter, sets it at low PRF: between pulses it loses charge with
/// τd (0.5 s in band A, 0.55 s in C/D), so it takes several τd to build up, beyond the meter's
/// 6.6·T_L. METHODS.md §9 reports a worst-case settling about 70 % above 1 s (source S41),
/// in line with band B's 1.54 s.
const QP_SETTLING_S: [f64; 3] = [2.4, 1.6, 2.6];

/// Time for the band's slower meter (QP or AV) to settle within 1 % (0.09 dB) of a step, s:
/// `6.638·T_L` (band A and B: 1.06 s; C/D: 0.66 s). A lower bound of [`qp_settling_s`].
///
/// # Source
/// Derived from the meter equation (METHODS.md §2) and its step response.
pub fn meter_settling_s(band: Band) -> f64 {
    METER_SETTLING_PER_T * band.qp_meter_s().max(band.average_meter_s())
}

/// Worst-case settling of the QP and AV readings to 0.1 dB, s (see `QP_SETTLING_S`):
/// 2.4 s in band A, 1.6 s in band B, 2.6 s in band C/D.
pub fn qp_settling_s(band: Band) -> f64 {
    match band {
        Band::A => QP_SETTLING_S[0],
        Band::B => QP_SETTLING_S[1],
        Band::CD => QP_SETTLING_S[2],
    }
}

/// Dwell per frequency for a QP or AV re-measurement in `band`, s.
///
/// # Formula
/// ```text
/// dwell = max(1 s, t_settle, 2/f_slow)      f_slow: slowest repetition, when known
/// ```
/// t_settle from [`qp_settling_s`] (2.4, 1.6, 2.6 s in bands A, B, C/D); two periods of a
/// repetition slower than that are added for signals known to repeat slowly.
/// # Source
/// 1 s for unknown signals: METHODS.md §9 (source S7); t_settle derived from the time
/// constants through the model; two periods: common practice.
/// # Errors
/// [`DetectorError::NotPositive`] for a repetition rate ≤ 0.
pub fn dwell_s(band: Band, slowest_rate_hz: Option<f64>) -> Result<f64, DetectorError> {
    let settle = qp_settling_s(band).max(UNKNOWN_SIGNAL_DWELL_S);
    match slowest_rate_hz {
        None => Ok(settle),
        Some(r) if r.is_finite() && r > 0.0 => Ok(settle.max(PERIODS_PER_DWELL / r)),
        Some(r) => Err(DetectorError::NotPositive {
            what: "slowest repetition rate (Hz)",
            value: r,
        }),
    }
}

/// Points of a stepped scan from `start_hz` to `stop_hz` with steps of at most `rbw_hz/2`,
/// rounded up to an odd count.
///
/// # Formula
/// ```text
/// n = ⌈(stop − start)/(RBW/2)⌉ + 1, plus one if even
/// ```
/// Band B, 0.15-30 MHz at 9 kHz: 6634 + 1 = 6635 points.
/// # Source
/// Step ≤ RBW/2, METHODS.md §9 (source S40); the odd count is common practice (the centre
/// frequency is a point).
/// # Errors
/// [`DetectorError::NotPositive`] for an RBW ≤ 0 or a span that is not positive.
pub fn sweep_points(start_hz: f64, stop_hz: f64, rbw_hz: f64) -> Result<usize, DetectorError> {
    let span = stop_hz - start_hz;
    for (what, value) in [("RBW (Hz)", rbw_hz), ("sweep span (Hz)", span)] {
        if !(value.is_finite() && value > 0.0) {
            return Err(DetectorError::NotPositive { what, value });
        }
    }
    let steps = (span / (0.5 * rbw_hz) - 1e-9).ceil().max(1.0) as usize;
    let n = steps + 1;
    Ok(if n % 2 == 0 { n + 1 } else { n })
}

/// One band's share of a slow sweep.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct SweepSegment {
    pub band: Band,
    pub start_hz: f64,
    pub stop_hz: f64,
    pub rbw_hz: f64,
    pub points: usize,
    pub dwell_s: f64,
    pub time_s: f64,
}

/// A slow QP/AV sweep split at the band edges.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct SweepPlan {
    pub segments: Vec<SweepSegment>,
    /// Sum of the segments' points × dwell, s.
    pub time_s: f64,
}

/// Plans a slow QP/AV sweep from `start_hz` to `stop_hz`: each band's part gets its own RBW,
/// points ([`sweep_points`]) and dwell ([`dwell_s`]); the time is points × dwell summed over
/// the bands (receiver retuning and settling overheads not included; a band edge inside the
/// span is a point of both bands' segments). Band B alone,
/// 0.15-30 MHz with an unknown signal: 6635 × 1.6 s = 10 616 s, almost three hours.
///
/// # Errors
/// [`DetectorError::FrequencyOutsideBands`] for ends outside 9 kHz-1 GHz;
/// [`DetectorError::NotPositive`] for an empty span or a bad rate.
pub fn plan_sweep(
    start_hz: f64,
    stop_hz: f64,
    slowest_rate_hz: Option<f64>,
) -> Result<SweepPlan, DetectorError> {
    Band::for_freq(start_hz)?;
    Band::for_freq(stop_hz)?;
    if stop_hz <= start_hz {
        return Err(DetectorError::NotPositive {
            what: "sweep span (Hz)",
            value: stop_hz - start_hz,
        });
    }
    let mut segments = Vec::new();
    for band in Band::ALL {
        let (lo, hi) = band.range_hz();
        let (a, b) = (start_hz.max(lo), stop_hz.min(hi));
        if b <= a {
            continue;
        }
        let rbw_hz = band.rbw_6db_hz();
        let points = sweep_points(a, b, rbw_hz)?;
        let dwell = dwell_s(band, slowest_rate_hz)?;
        segments.push(SweepSegment {
            band,
            start_hz: a,
            stop_hz: b,
            rbw_hz,
            points,
            dwell_s: dwell,
            time_s: points as f64 * dwell,
        });
    }
    let time_s = segments.iter().map(|s| s.time_s).sum();
    Ok(SweepPlan { segments, time_s })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn band_b_sweep_has_6635_points() {
        // source: METHODS.md §9 [DER; CP]: (30 − 0.15) MHz / 4.5 kHz = 6633.3 → 6635 points
        assert_eq!(sweep_points(150e3, 30e6, 9e3).unwrap(), 6635);
        let plan = plan_sweep(150e3, 30e6, None).unwrap();
        assert_eq!(plan.segments.len(), 1);
        // source: derived, 6635 points × 1.6 s = 10 616 s
        assert!((plan.time_s - 10_616.0).abs() < 1e-6);
    }

    #[test]
    fn dwell_is_at_least_a_second_and_two_slow_periods() {
        // source: METHODS.md §9, ≥ 1 s for unknown signals; settling constants above
        for band in Band::ALL {
            let d = dwell_s(band, None).unwrap();
            assert!(d >= 1.0 && d >= meter_settling_s(band), "{band}");
        }
        assert!((dwell_s(Band::B, None).unwrap() - 1.6).abs() < 1e-12);
        assert!((dwell_s(Band::B, Some(0.5)).unwrap() - 4.0).abs() < 1e-12);
        assert!((dwell_s(Band::CD, Some(100.0)).unwrap() - 2.6).abs() < 1e-12);
        assert!(dwell_s(Band::B, Some(0.0)).is_err());
        // source: derived, 6.638·T_L: 1.062 s for T_L = 160 ms
        assert!((meter_settling_s(Band::B) - 1.0621).abs() < 1e-3);
    }

    #[test]
    fn a_sweep_across_bands_is_split() {
        let plan = plan_sweep(100e3, 50e6, None).unwrap();
        let bands: Vec<Band> = plan.segments.iter().map(|s| s.band).collect();
        assert_eq!(bands, vec![Band::A, Band::B, Band::CD]);
        assert!(plan.segments[0].stop_hz == 150e3 && plan.segments[1].start_hz == 150e3);
    }
}
