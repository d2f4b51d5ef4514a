//! Detector-aware verdicts: the quasi-peak and average readings each peak of a fast peak scan
//! will give, from what the scan shows of the emission, and the short list of frequencies worth
//! re-measuring with the slow detectors.
//!
//! The evidence per peak:
//! - a narrow line: a CW, QP = AV = peak ([`crate::detectors::Evidence::StableLine`]);
//! - a member of a dithered family: a line swept over `n·f0·spread` peak to peak
//!   ([`crate::detectors::Evidence::Dithered`]) when that exceeds half the RBW;
//! - a broadband peak a family claims (a dithered plateau excepted), or a hump whose comb a
//!   family names: impulsive at a PRF of the family's fundamental (an unresolved comb's lines
//!   are `PRF` apart);
//! - a member of a declared source with a burst rate and duty (`--sources`): a gated line;
//! - a broadband peak nobody explains: its peak is kept as an upper bound for QP and AV.
//!
//! Measured scans win: a QP or AV scan given with `--also` replaces the prediction at each peak
//! and the report says how far the prediction was from it.

use crate::analysis::{Bandwidth, Family, LimitResult, Origin, Peak};
use crate::compare::reading_at;
use crate::detectors::{self, Band, Basis, Evidence};
use crate::scan::{Detector, Scan};
use crate::sources::Inventory;
use serde::Serialize;

/// Predicted (or measured) QP and AV of one peak.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct PeakPrediction {
    pub qp_dbuv: f64,
    pub av_dbuv: f64,
    /// Half-widths of the uncertainty bands (dB); 0 for a measured reading.
    pub qp_uncertainty_db: f64,
    pub av_uncertainty_db: f64,
    /// Where the numbers come from; `None` for an upper bound (broadband of unknown
    /// repetition: the peak itself).
    pub basis: Option<Basis>,
    /// Margins to the first QP and AV limits given (dB).
    pub qp_margin_db: Option<f64>,
    pub av_margin_db: Option<f64>,
    /// Readings of QP or AV scans given with `--also`, which the margins then use.
    pub measured_qp_dbuv: Option<f64>,
    pub measured_av_dbuv: Option<f64>,
    /// Predicted − measured (dB), where a measured scan was given.
    pub qp_prediction_error_db: Option<f64>,
    pub av_prediction_error_db: Option<f64>,
    /// The slowest repetition rate of the emission, when known (Hz): it sets the dwell.
    #[serde(skip)]
    pub slowest_rate_hz: Option<f64>,
}

/// One frequency to measure again with the slow detectors.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Remeasure {
    pub freq_hz: f64,
    /// Detectors to use: `quasi-peak`, `average` or both.
    pub detectors: Vec<Detector>,
    pub predicted_qp_dbuv: f64,
    pub predicted_av_dbuv: f64,
    pub qp_margin_db: Option<f64>,
    pub av_margin_db: Option<f64>,
    pub uncertainty_db: f64,
    /// Dwell per detector reading at this frequency (s).
    pub dwell_s: f64,
    /// Why it is on the list.
    pub reason: String,
    pub family: Option<usize>,
}

/// The re-measure list and the time it saves.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct RemeasurePlan {
    pub points: Vec<Remeasure>,
    /// Sum of the dwells (s).
    pub time_s: f64,
    /// A full QP/AV sweep of the scan's span at CISPR 16-1-1 settings (s), see
    /// [`detectors::plan_sweep`].
    pub full_sweep_s: Option<f64>,
    /// `full_sweep_s − time_s` (s).
    pub saved_s: Option<f64>,
}

/// How far predictions were from a measured QP or AV scan.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct DetectorCheck {
    pub detector: Detector,
    /// Peaks compared.
    pub compared: usize,
    /// Median and largest |predicted − measured| (dB).
    pub median_abs_error_db: f64,
    pub max_abs_error_db: f64,
}

/// Everything the prediction stage adds to an analysis.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Detectors {
    /// Verdict of the predicted (or measured) QP/AV levels against the QP/AV limits given;
    /// `None` without such a limit.
    pub predicted_pass: Option<bool>,
    pub remeasure: RemeasurePlan,
    pub checks: Vec<DetectorCheck>,
}

/// The first given limit with `detector`.
fn limit_with(limits: &[LimitResult], detector: Detector) -> Option<&LimitResult> {
    limits.iter().find(|l| l.limit.detector == detector)
}

/// The evidence a peak gives, and the slowest rate it repeats at (Hz) when known.
fn evidence_of(
    p: &Peak,
    families: &[Family],
    humps: &[crate::bandwidth::Hump],
    inventory: Option<&Inventory>,
    rbw_hz: f64,
) -> (Option<Evidence>, Option<f64>) {
    // a peak on a dithered plateau is part of it, unless it sits on a harmonic of another
    // family (a converter's line on the plateau): that line is read on its own
    let on_other_family = |own: Option<usize>| {
        families.iter().any(|f| {
            Some(f.id) != own && f.kind != crate::analysis::Kind::Broadcast && {
                let n = (p.freq_hz / f.fundamental_hz).round().max(1.0);
                (p.freq_hz - n * f.fundamental_hz).abs() <= 0.5 * rbw_hz
            }
        })
    };
    let hump = humps.iter().find(|h| {
        p.freq_hz >= h.start_hz
            && p.freq_hz <= h.stop_hz
            && (p.family.is_some_and(|id| Some(id) == h.family)
                || (p.family.is_none() && h.family.is_some() && !on_other_family(h.family)))
    });
    let family_id = p.family.or(hump.and_then(|h| h.family));
    let family = family_id.and_then(|id| families.iter().find(|f| f.id == id));
    let declared = family
        .and_then(|f| f.declared_source.as_ref())
        .and_then(|m| inventory.and_then(|inv| inv.sources.get(m.source_index)));
    if let Some((rate, duty)) = declared.and_then(|s| s.burst_rate_hz.zip(s.burst_duty)) {
        return (
            Some(Evidence::Burst {
                rate_hz: rate,
                duty,
            }),
            Some(rate),
        );
    }
    let dithered = |sweep_hz: f64| {
        (sweep_hz > 0.5 * rbw_hz).then_some(Evidence::Dithered {
            sweep_hz,
            rate_hz: None,
            profile: None,
        })
    };
    // a plateau a family claims is one dithered harmonic: it sweeps over the plateau's width
    // less the RBW's
    if let Some(h) = hump.filter(|h| h.family.is_some()) {
        if let Some(e) = dithered(h.stop_hz - h.start_hz - rbw_hz) {
            return (Some(e), None);
        }
    }
    if let Some(f) = family {
        let n = f64::from(p.harmonic.unwrap_or(1));
        if let Some(e) = f
            .envelope
            .as_ref()
            .and_then(|e| e.spread_pct)
            .and_then(|spread| dithered(n * f.fundamental_hz * spread / 100.0))
        {
            return (Some(e), None);
        }
        if p.bandwidth == Bandwidth::Broadband {
            return impulsive(f.fundamental_hz);
        }
        return (Some(Evidence::StableLine), None);
    }
    if p.bandwidth == Bandwidth::Narrowband {
        return (Some(Evidence::StableLine), None);
    }
    (None, None)
}

fn impulsive(prf_hz: f64) -> (Option<Evidence>, Option<f64>) {
    (Some(Evidence::Impulsive { prf_hz }), Some(prf_hz))
}

/// Predicts QP and AV for every peak (in place) and returns the plan; `also` are the extra
/// scans of the DUT (after correction), of which those taken with a QP or AV detector are used
/// as measurements.
pub fn predict_peaks(
    dut: &Scan,
    peaks: &mut [Peak],
    families: &mut [Family],
    humps: &[crate::bandwidth::Hump],
    limits: &[LimitResult],
    also: &[Scan],
    inventory: Option<&Inventory>,
) -> Detectors {
    let rbw_hz = dut.meta.rbw_hz.unwrap_or(9e3);
    let qp_limit = limit_with(limits, Detector::QuasiPeak);
    let av_limit = limit_with(limits, Detector::Average);
    let measured_qp = also
        .iter()
        .find(|s| s.meta.detector == Some(Detector::QuasiPeak));
    let measured_av = also
        .iter()
        .find(|s| s.meta.detector == Some(Detector::Average));
    for p in peaks.iter_mut() {
        let Ok(band) = Band::for_freq(p.freq_hz) else {
            continue;
        };
        let (evidence, rate) = evidence_of(p, families, humps, inventory, rbw_hz);
        let predicted = evidence
            .as_ref()
            .and_then(|e| detectors::predict(band, p.level_dbuv, e).ok());
        let mut pp = match predicted {
            Some(x) => PeakPrediction {
                qp_dbuv: x.quasi_peak_dbuv,
                av_dbuv: x.average_dbuv,
                qp_uncertainty_db: x.quasi_peak_uncertainty_db,
                av_uncertainty_db: x.average_uncertainty_db,
                basis: Some(x.basis),
                qp_margin_db: None,
                av_margin_db: None,
                measured_qp_dbuv: None,
                measured_av_dbuv: None,
                qp_prediction_error_db: None,
                av_prediction_error_db: None,
                slowest_rate_hz: rate,
            },
            None => PeakPrediction {
                qp_dbuv: p.level_dbuv,
                av_dbuv: p.level_dbuv,
                qp_uncertainty_db: 0.0,
                av_uncertainty_db: 0.0,
                basis: None,
                qp_margin_db: None,
                av_margin_db: None,
                measured_qp_dbuv: None,
                measured_av_dbuv: None,
                qp_prediction_error_db: None,
                av_prediction_error_db: None,
                slowest_rate_hz: None,
            },
        };
        let half = 0.5 * p.width_hz.max(rbw_hz);
        pp.measured_qp_dbuv = measured_qp.and_then(|s| reading_at(s, p.freq_hz, half));
        pp.measured_av_dbuv = measured_av.and_then(|s| reading_at(s, p.freq_hz, half));
        pp.qp_prediction_error_db = pp.measured_qp_dbuv.map(|m| pp.qp_dbuv - m);
        pp.av_prediction_error_db = pp.measured_av_dbuv.map(|m| pp.av_dbuv - m);
        let qp_used = pp.measured_qp_dbuv.unwrap_or(pp.qp_dbuv);
        let av_used = pp.measured_av_dbuv.unwrap_or(pp.av_dbuv);
        // the limit at the peak's display point, as the measured margins take it
        let limit_at = |l: &LimitResult| l.margins.limit_dbuv.get(p.point).copied().flatten();
        pp.qp_margin_db = qp_limit.and_then(limit_at).map(|x| x - qp_used);
        pp.av_margin_db = av_limit.and_then(limit_at).map(|x| x - av_used);
        p.prediction = Some(pp);
    }
    for f in families.iter_mut() {
        f.predicted_worst = worst_member(peaks, f.id);
    }
    let margins: Vec<f64> = peaks
        .iter()
        .filter_map(|p| p.prediction.as_ref())
        .flat_map(|pp| [pp.qp_margin_db, pp.av_margin_db])
        .flatten()
        .collect();
    let predicted_pass =
        (qp_limit.is_some() || av_limit.is_some()).then(|| margins.iter().all(|&m| m >= 0.0));
    let checks = [
        (Detector::QuasiPeak, measured_qp.is_some()),
        (Detector::Average, measured_av.is_some()),
    ]
    .into_iter()
    .filter(|c| c.1)
    .filter_map(|(d, _)| check(peaks, d))
    .collect();
    Detectors {
        predicted_pass,
        remeasure: remeasure(dut, peaks, families),
        checks,
    }
}

/// The member of family `id` with the smallest predicted margin (QP or AV).
fn worst_member(peaks: &[Peak], id: usize) -> Option<PeakPrediction> {
    let least = |pp: &PeakPrediction| {
        [pp.qp_margin_db, pp.av_margin_db]
            .into_iter()
            .flatten()
            .reduce(f64::min)
    };
    peaks
        .iter()
        .filter(|p| p.family == Some(id))
        .filter_map(|p| p.prediction)
        .min_by(|a, b| {
            least(a)
                .unwrap_or(f64::INFINITY)
                .total_cmp(&least(b).unwrap_or(f64::INFINITY))
        })
}

fn check(peaks: &[Peak], detector: Detector) -> Option<DetectorCheck> {
    let mut errors: Vec<f64> = peaks
        .iter()
        .filter_map(|p| p.prediction.as_ref())
        .filter_map(|pp| match detector {
            Detector::QuasiPeak => pp.qp_prediction_error_db,
            _ => pp.av_prediction_error_db,
        })
        .map(f64::abs)
        .collect();
    if errors.is_empty() {
        return None;
    }
    let max = errors.iter().copied().fold(0.0, f64::max);
    Some(DetectorCheck {
        detector,
        compared: errors.len(),
        median_abs_error_db: crate::floor::quantile_in_place(&mut errors, 0.5),
        max_abs_error_db: max,
    })
}

/// Peaks of the board whose predicted QP or AV margin is less than its uncertainty (they may
/// fail), plus each board family's worst member; ambient peaks are not the board's.
fn remeasure(dut: &Scan, peaks: &[Peak], families: &[Family]) -> RemeasurePlan {
    let mut points: Vec<Remeasure> = Vec::new();
    for p in peaks {
        let Some(pp) = p.prediction.as_ref() else {
            continue;
        };
        if p.origin == Origin::Ambient {
            continue;
        }
        let qp_u = if pp.measured_qp_dbuv.is_some() {
            0.0
        } else {
            pp.qp_uncertainty_db
        };
        let av_u = if pp.measured_av_dbuv.is_some() {
            0.0
        } else {
            pp.av_uncertainty_db
        };
        let qp_close = pp.measured_qp_dbuv.is_none() && pp.qp_margin_db.is_some_and(|m| m < qp_u);
        let av_close = pp.measured_av_dbuv.is_none() && pp.av_margin_db.is_some_and(|m| m < av_u);
        let worst_of = p.family.filter(|&id| {
            families.iter().any(|f| {
                f.id == id
                    && f.origin != Origin::Ambient
                    && f.predicted_worst.is_some_and(|w| w.qp_dbuv == pp.qp_dbuv)
            })
        });
        if !qp_close && !av_close && worst_of.is_none() {
            continue;
        }
        let mut dets = Vec::new();
        if qp_close || (worst_of.is_some() && pp.qp_margin_db.is_some()) {
            dets.push(Detector::QuasiPeak);
        }
        if av_close || (worst_of.is_some() && pp.av_margin_db.is_some()) {
            dets.push(Detector::Average);
        }
        if dets.is_empty() {
            continue;
        }
        let band = Band::for_freq(p.freq_hz).ok();
        let dwell = band
            .and_then(|b| detectors::dwell_s(b, pp.slowest_rate_hz).ok())
            .unwrap_or(detectors::UNKNOWN_SIGNAL_DWELL_S);
        let fails =
            pp.qp_margin_db.is_some_and(|m| m < 0.0) || pp.av_margin_db.is_some_and(|m| m < 0.0);
        let reason = if fails {
            "predicted to fail"
        } else if qp_close || av_close {
            "within the prediction's uncertainty of the limit"
        } else {
            "worst harmonic of its family"
        };
        points.push(Remeasure {
            freq_hz: p.freq_hz,
            detectors: dets,
            predicted_qp_dbuv: pp.qp_dbuv,
            predicted_av_dbuv: pp.av_dbuv,
            qp_margin_db: pp.qp_margin_db,
            av_margin_db: pp.av_margin_db,
            uncertainty_db: qp_u.max(av_u),
            dwell_s: dwell,
            reason: reason.to_string(),
            family: p.family,
        });
    }
    points.sort_by(|a, b| a.freq_hz.total_cmp(&b.freq_hz));
    let time_s = points.iter().map(|r| r.dwell_s).sum();
    let (lo, hi) = dut.span_hz();
    let full_sweep_s = detectors::plan_sweep(lo.max(9e3), hi.min(1e9), None)
        .ok()
        .map(|p| p.time_s);
    RemeasurePlan {
        points,
        time_s,
        full_sweep_s,
        saved_s: full_sweep_s.map(|f| f - time_s),
    }
}
