//! The serde types of the `spurhound.analysis/1` JSON contract. Other programs rely on these
//! names and meanings; fields may be added, never renamed or given another meaning.

use super::{RenderError, Renderer};
use crate::analysis::{Analysis, Bandwidth, Family, Kind, Origin, Peak, Warning};
use crate::limits::Exceedance;
use crate::scan::Detector;
use serde::Serialize;

/// Schema name and version.
pub const SCHEMA: &str = "spurhound.analysis/1";

/// Said in every report.
pub const NOTICE: &str = "pre-compliance estimate, not a certified measurement";

#[derive(Debug, Serialize)]
pub struct Document<'a> {
    pub schema: &'static str,
    pub notice: &'static str,
    pub scan: ScanDoc,
    pub limit: Option<LimitRef>,
    pub limits: Vec<LimitDoc>,
    pub peaks: Vec<PeakDoc<'a>>,
    pub families: Vec<FamilyDoc<'a>>,
    pub humps: &'a [crate::bandwidth::Hump],
    pub floor: crate::analysis::FloorSummary,
    pub ambient: Vec<AmbientDoc>,
    pub verdict: VerdictDoc,
    pub warnings: &'a [Warning],
    /// How the families met the declared sources (`--sources`); absent without an inventory.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub inventory: Option<&'a crate::attribution::plan::InventoryUse>,
    /// Frequencies to measure again with the quasi-peak and average detectors, and the time
    /// that saves against a full slow sweep.
    pub remeasure: &'a crate::prediction::RemeasurePlan,
    /// How far the predictions were from QP/AV scans given with `--also`.
    pub detector_checks: &'a [crate::prediction::DetectorCheck],
}

#[derive(Debug, Serialize)]
pub struct ScanDoc {
    pub source: Option<String>,
    pub title: Option<String>,
    pub points: usize,
    pub start_hz: f64,
    pub stop_hz: f64,
    pub rbw_hz: Option<f64>,
    pub detector: Option<Detector>,
    /// Unit of every level after correction: dBuV, dBuV/m or dBuA.
    pub unit: &'static str,
}

#[derive(Debug, Serialize)]
pub struct LimitRef {
    pub name: String,
    pub detector: Detector,
}

#[derive(Debug, Serialize)]
pub struct LimitDoc {
    pub name: String,
    pub detector: Detector,
    pub title: String,
    pub unit: &'static str,
    pub pass: Option<bool>,
    pub worst_margin_db: Option<f64>,
    pub worst_freq_hz: Option<f64>,
    pub covered_points: usize,
    pub exceedances: Vec<Exceedance>,
}

#[derive(Debug, Serialize)]
pub struct PeakDoc<'a> {
    pub freq_hz: f64,
    pub level_dbuv: f64,
    pub limit_dbuv: Option<f64>,
    pub margin_db: Option<f64>,
    pub bandwidth: Bandwidth,
    pub origin: Origin,
    pub family: Option<usize>,
    pub harmonic: Option<u32>,
    pub prominence_db: f64,
    pub width_hz: f64,
    pub significance_db: f64,
    pub ambient_dbuv: Option<f64>,
    pub discrimination: Option<crate::bandwidth::Discrimination>,
    /// Predicted quasi-peak and average readings (a measured QP/AV scan's reading wins in the
    /// margins), and the margins to the first QP and AV limits given (null without one).
    pub predicted_qp_dbuv: Option<f64>,
    pub predicted_av_dbuv: Option<f64>,
    pub qp_margin_db: Option<f64>,
    pub av_margin_db: Option<f64>,
    pub prediction: Option<&'a crate::prediction::PeakPrediction>,
}

#[derive(Debug, Serialize)]
pub struct FamilyDoc<'a> {
    pub id: usize,
    pub fundamental_hz: f64,
    pub fundamental_sigma_hz: f64,
    pub harmonics: &'a [u32],
    pub kind: Kind,
    pub origin: Origin,
    pub worst_margin_db: Option<f64>,
    pub rank: usize,
    pub remedies: &'a [String],
    pub confidence: f64,
    pub points_over: usize,
    pub misses: usize,
    pub odd_only: bool,
    pub envelope: Option<&'a crate::families::envelope::Envelope>,
    pub kind_reasons: &'a [String],
    /// Name of the declared source it matches; null when none does or no inventory was given.
    pub declared_source: Option<&'a str>,
    /// The match itself (likelihood ratio, offset from nominal, within tolerance).
    pub declared_match: Option<&'a crate::sources::SourceMatch>,
    /// Its harmonics over a limit (frequency, dB over).
    pub exceedances: &'a [crate::attribution::sizing::Exceedance],
    /// Remedies sized for the exceedances, each with its model and assumptions.
    pub sized_remedies: Option<&'a crate::attribution::sizing::SizedRemedies>,
    /// The same four fields as a peak's, for the family's member with the smallest predicted
    /// margin.
    pub predicted_qp_dbuv: Option<f64>,
    pub predicted_av_dbuv: Option<f64>,
    pub qp_margin_db: Option<f64>,
    pub av_margin_db: Option<f64>,
    /// Duty, edge time (10-90 %), dither and a rule-of-thumb DM/CM score of a switching family
    /// from its harmonic envelope, each with a 95 % interval or a bound.
    pub fingerprint: Option<&'a crate::families::fingerprint::Fingerprint>,
}

#[derive(Debug, Serialize)]
pub struct AmbientDoc {
    pub source: Option<String>,
    pub worst_margin_db: Option<f64>,
    pub worst_freq_hz: Option<f64>,
    pub near_limit: Vec<NearLimitDoc>,
}

#[derive(Debug, Serialize)]
pub struct NearLimitDoc {
    pub start_hz: f64,
    pub stop_hz: f64,
    pub margin_db: f64,
}

#[derive(Debug, Serialize)]
pub struct VerdictDoc {
    pub pass: Option<bool>,
    pub worst_margin_db: Option<f64>,
    pub worst_freq_hz: Option<f64>,
    pub worst_limit: Option<String>,
    /// Verdict of the predicted QP/AV levels against the QP/AV limits given (null without one).
    pub predicted_pass: Option<bool>,
}

fn peak_doc(p: &Peak) -> PeakDoc<'_> {
    PeakDoc {
        freq_hz: p.freq_hz,
        level_dbuv: p.level_dbuv,
        limit_dbuv: p.limit_dbuv,
        margin_db: p.margin_db,
        bandwidth: p.bandwidth,
        origin: p.origin,
        family: p.family,
        harmonic: p.harmonic,
        prominence_db: p.prominence_db,
        width_hz: p.width_hz,
        significance_db: p.significance_db,
        ambient_dbuv: p.ambient_dbuv,
        discrimination: p.discrimination,
        predicted_qp_dbuv: p.prediction.map(|x| x.qp_dbuv),
        predicted_av_dbuv: p.prediction.map(|x| x.av_dbuv),
        qp_margin_db: p.prediction.and_then(|x| x.qp_margin_db),
        av_margin_db: p.prediction.and_then(|x| x.av_margin_db),
        prediction: p.prediction.as_ref(),
    }
}

fn family_doc(f: &Family) -> FamilyDoc<'_> {
    FamilyDoc {
        id: f.id,
        fundamental_hz: f.fundamental_hz,
        fundamental_sigma_hz: f.fundamental_sigma_hz,
        harmonics: &f.harmonics,
        kind: f.kind,
        origin: f.origin,
        worst_margin_db: f.worst_margin_db,
        rank: f.rank,
        remedies: &f.remedies,
        confidence: f.confidence,
        points_over: f.points_over,
        misses: f.misses,
        odd_only: f.odd_only,
        envelope: f.envelope.as_ref(),
        kind_reasons: &f.kind_reasons,
        declared_source: f.declared_source.as_ref().map(|m| m.source.as_str()),
        declared_match: f.declared_source.as_ref(),
        exceedances: &f.exceedances,
        sized_remedies: f.sized.as_ref(),
        predicted_qp_dbuv: f.predicted_worst.map(|x| x.qp_dbuv),
        predicted_av_dbuv: f.predicted_worst.map(|x| x.av_dbuv),
        qp_margin_db: f.predicted_worst.and_then(|x| x.qp_margin_db),
        av_margin_db: f.predicted_worst.and_then(|x| x.av_margin_db),
        fingerprint: f.fingerprint.as_ref(),
    }
}

/// The contract document of an analysis.
pub fn document(a: &Analysis) -> Document<'_> {
    let (start_hz, stop_hz) = a.scan.span_hz();
    let m = &a.scan.meta;
    Document {
        schema: SCHEMA,
        notice: NOTICE,
        scan: ScanDoc {
            source: m.source.clone(),
            title: m.title.clone(),
            points: a.scan.len(),
            start_hz,
            stop_hz,
            rbw_hz: m.rbw_hz,
            detector: m.detector,
            unit: m.quantity.unit(),
        },
        limit: a.limits.first().map(|r| LimitRef {
            name: r.limit.name.clone(),
            detector: r.limit.detector,
        }),
        limits: a
            .limits
            .iter()
            .map(|r| LimitDoc {
                name: r.limit.name.clone(),
                detector: r.limit.detector,
                title: r.limit.title.clone(),
                unit: r.limit.quantity.unit(),
                pass: r.margins.pass(),
                worst_margin_db: r.margins.worst.map(|w| w.margin_db),
                worst_freq_hz: r.margins.worst.map(|w| w.freq_hz),
                covered_points: r.margins.covered,
                exceedances: r.margins.exceedances.clone(),
            })
            .collect(),
        peaks: a.peaks.iter().map(peak_doc).collect(),
        families: a.families.iter().map(family_doc).collect(),
        humps: &a.humps,
        floor: a.floor,
        ambient: a
            .ambient
            .iter()
            .map(|x| AmbientDoc {
                source: x.scan.meta.source.clone(),
                worst_margin_db: x
                    .margins
                    .as_ref()
                    .and_then(|m| m.worst)
                    .map(|w| w.margin_db),
                worst_freq_hz: x.margins.as_ref().and_then(|m| m.worst).map(|w| w.freq_hz),
                near_limit: x
                    .near_limit
                    .iter()
                    .map(|&(start_hz, stop_hz, margin_db)| NearLimitDoc {
                        start_hz,
                        stop_hz,
                        margin_db,
                    })
                    .collect(),
            })
            .collect(),
        verdict: VerdictDoc {
            pass: a.verdict.pass,
            worst_margin_db: a.verdict.worst_margin_db,
            worst_freq_hz: a.verdict.worst_freq_hz,
            worst_limit: a.verdict.worst_limit.clone(),
            predicted_pass: a.detectors.predicted_pass,
        },
        warnings: &a.warnings,
        inventory: a.inventory.as_ref(),
        remeasure: &a.detectors.remeasure,
        detector_checks: &a.detectors.checks,
    }
}

/// The JSON renderer.
pub struct JsonReport;

impl Renderer for JsonReport {
    fn render(&self, analysis: &Analysis) -> Result<String, RenderError> {
        let mut s = serde_json::to_string_pretty(&document(analysis)).map_err(|e| {
            RenderError::Serialise {
                reason: e.to_string(),
            }
        })?;
        s.push('\n');
        Ok(s)
    }
}
