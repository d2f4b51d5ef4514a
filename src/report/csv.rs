//! The peak table as CSV, for a spreadsheet, and the re-measure list as CSV, for a measurement
//! script.

use super::{RenderError, Renderer};
use crate::analysis::{Analysis, Bandwidth, Origin};
use std::fmt::Write as _;

/// The CSV renderer: one row per peak.
pub struct PeakTable;

fn opt(x: Option<f64>, digits: usize) -> String {
    x.map_or(String::new(), |v| format!("{v:.digits$}"))
}

impl Renderer for PeakTable {
    fn render(&self, a: &Analysis) -> Result<String, RenderError> {
        let mut out = String::from(
            "freq_hz,level_dbuv,limit_dbuv,margin_db,bandwidth,origin,family,predicted_qp_dbuv,predicted_av_dbuv,qp_margin_db,av_margin_db,remeasure\n",
        );
        for p in &a.peaks {
            let bw = match p.bandwidth {
                Bandwidth::Narrowband => "narrowband",
                Bandwidth::Broadband => "broadband",
            };
            let origin = match p.origin {
                Origin::Dut => "dut",
                Origin::Ambient => "ambient",
                Origin::Mixed => "mixed",
                Origin::Unknown => "unknown",
            };
            let family = p.family.map_or(String::new(), |f| f.to_string());
            let pp = p.prediction.as_ref();
            let again = a
                .detectors
                .remeasure
                .points
                .iter()
                .any(|r| r.freq_hz == p.freq_hz);
            let _ = writeln!(
                out,
                "{:.1},{:.2},{},{},{bw},{origin},{family},{},{},{},{},{}",
                p.freq_hz,
                p.level_dbuv,
                opt(p.limit_dbuv, 2),
                opt(p.margin_db, 2),
                opt(pp.map(|x| x.qp_dbuv), 2),
                opt(pp.map(|x| x.av_dbuv), 2),
                opt(pp.and_then(|x| x.qp_margin_db), 2),
                opt(pp.and_then(|x| x.av_margin_db), 2),
                u8::from(again)
            );
        }
        Ok(out)
    }
}

/// The CSV renderer of the re-measure list: one row per frequency, in ascending order.
pub struct RemeasureTable;

impl Renderer for RemeasureTable {
    fn render(&self, a: &Analysis) -> Result<String, RenderError> {
        let mut out = String::from(
            "freq_hz,detectors,dwell_s,predicted_qp_dbuv,predicted_av_dbuv,qp_margin_db,av_margin_db,uncertainty_db,family,reason\n",
        );
        for r in &a.detectors.remeasure.points {
            let dets: Vec<&str> = r
                .detectors
                .iter()
                .map(|d| match d {
                    crate::scan::Detector::QuasiPeak => "quasi-peak",
                    _ => "average",
                })
                .collect();
            let _ = writeln!(
                out,
                "{:.1},{},{:.2},{:.2},{:.2},{},{},{:.2},{},{}",
                r.freq_hz,
                dets.join(" "),
                r.dwell_s,
                r.predicted_qp_dbuv,
                r.predicted_av_dbuv,
                opt(r.qp_margin_db, 2),
                opt(r.av_margin_db, 2),
                r.uncertainty_db,
                r.family.map_or(String::new(), |f| f.to_string()),
                r.reason
            );
        }
        Ok(out)
    }
}
