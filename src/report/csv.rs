//! The peak table as CSV, for a spreadsheet.

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
        let mut out =
            String::from("freq_hz,level_dbuv,limit_dbuv,margin_db,bandwidth,origin,family\n");
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
            let _ = writeln!(
                out,
                "{:.1},{:.2},{},{},{bw},{origin},{family}",
                p.freq_hz,
                p.level_dbuv,
                opt(p.limit_dbuv, 2),
                opt(p.margin_db, 2)
            );
        }
        Ok(out)
    }
}
