//! Reports of a before/after comparison: JSON of the `spurhound.compare/1` contract and text
//! for people (80 columns).
//!
//! With more than two scans (a fix story: before, one change, the next change) the top-level
//! fields compare the first scan with the last and `steps` holds each scan against the one
//! before it.

use super::RenderError;
use super::model::NOTICE;
use super::text::wrap_into;
use crate::analysis::fmt_hz;
use crate::compare::{Comparison, FamilyChange, PeakChange, Status};
use serde::Serialize;
use std::fmt::Write as _;

/// Version of the comparison JSON; fields may be added, never renamed or given another meaning.
pub const SCHEMA: &str = "spurhound.compare/1";

/// One comparison with the files it compares.
#[derive(Debug, Clone, PartialEq)]
pub struct Step {
    pub before: String,
    pub after: String,
    pub comparison: Comparison,
}

#[derive(Serialize)]
struct VerdictDoc {
    pass: Option<bool>,
    worst_margin_db: Option<f64>,
    worst_margin_before_db: Option<f64>,
}

#[derive(Serialize)]
struct StepDoc<'a> {
    before: &'a str,
    after: &'a str,
    families: &'a [FamilyChange],
    peaks: &'a [PeakChange],
    verdict: VerdictDoc,
}

#[derive(Serialize)]
struct Document<'a> {
    schema: &'static str,
    notice: &'static str,
    #[serde(flatten)]
    overall: StepDoc<'a>,
    #[serde(skip_serializing_if = "Vec::is_empty")]
    steps: Vec<StepDoc<'a>>,
}

fn step_doc(s: &Step) -> StepDoc<'_> {
    StepDoc {
        before: &s.before,
        after: &s.after,
        families: &s.comparison.families,
        peaks: &s.comparison.peaks,
        verdict: VerdictDoc {
            pass: s.comparison.pass,
            worst_margin_db: s.comparison.worst_margin_db,
            worst_margin_before_db: s.comparison.worst_margin_before_db,
        },
    }
}

/// The JSON report: `overall` (first scan against the last) at the top level, and each step
/// when there are more than two scans.
///
/// # Errors
/// [`RenderError::Serialise`] if serialisation fails.
pub fn render_json(overall: &Step, steps: &[Step]) -> Result<String, RenderError> {
    let doc = Document {
        schema: SCHEMA,
        notice: NOTICE,
        overall: step_doc(overall),
        steps: if steps.len() > 1 {
            steps.iter().map(step_doc).collect()
        } else {
            Vec::new()
        },
    };
    serde_json::to_string_pretty(&doc)
        .map(|mut s| {
            s.push('\n');
            s
        })
        .map_err(|e| RenderError::Serialise {
            reason: e.to_string(),
        })
}

fn db(v: Option<f64>) -> String {
    // rounded first, so that a change of −0.04 dB reads +0.0, not −0.0
    v.map_or("-".to_string(), |x| {
        let r = (x * 10.0).round() / 10.0 + 0.0;
        format!("{r:+.1}")
    })
}

fn level(v: Option<f64>) -> String {
    v.map_or("-".to_string(), |x| format!("{x:.1}"))
}

fn kind_word(k: crate::analysis::Kind) -> &'static str {
    match k {
        crate::analysis::Kind::Switching => "switching",
        crate::analysis::Kind::Clock => "clock",
        crate::analysis::Kind::Lighting => "lighting",
        crate::analysis::Kind::Broadcast => "broadcast",
        crate::analysis::Kind::Other => "other",
    }
}

fn verdict_word(pass: Option<bool>) -> &'static str {
    match pass {
        Some(true) => "PASS",
        Some(false) => "FAIL",
        None => "NO VERDICT",
    }
}

/// Most failing frequencies listed per step; the JSON has them all.
const MAX_PEAKS: usize = 12;

fn step_text(s: &Step, out: &mut String) {
    let c = &s.comparison;
    let _ = writeln!(out, "{}  ->  {}", s.before, s.after);
    let _ = writeln!(
        out,
        "  verdict after: {} (worst margin {} dB, was {} dB)",
        verdict_word(c.pass),
        db(c.worst_margin_db),
        db(c.worst_margin_before_db)
    );
    out.push('\n');
    out.push_str("  Families (change = after - before; negative helps)\n");
    let _ = writeln!(
        out,
        "  {:<16} {:<10} {:>8} {:>7} {:>10} {:>8} {:>8}",
        "fundamental", "kind", "change", "+-", "status", "margin", "was"
    );
    let mut fams: Vec<&FamilyChange> = c.families.iter().collect();
    fams.sort_by(|x, y| {
        let m = |f: &FamilyChange| f.worst_margin_before_db.or(f.worst_margin_after_db);
        m(x).unwrap_or(f64::INFINITY)
            .total_cmp(&m(y).unwrap_or(f64::INFINITY))
    });
    for f in fams {
        let _ = writeln!(
            out,
            "  {:<16} {:<10} {:>8} {:>7} {:>10} {:>8} {:>8}",
            fmt_hz(f.fundamental_hz),
            kind_word(f.kind),
            db(f.change_db),
            f.sigma_db.map_or("-".to_string(), |s| format!("{s:.1}")),
            f.status.name(),
            db(f.worst_margin_after_db),
            db(f.worst_margin_before_db)
        );
    }
    if c.families.is_empty() {
        out.push_str("  no harmonic family in either scan\n");
    }
    out.push('\n');
    let failing: Vec<&PeakChange> = c.peaks.iter().collect();
    if !failing.is_empty() {
        let _ = writeln!(
            out,
            "  Frequencies over a limit in either scan ({} of {})",
            failing.len().min(MAX_PEAKS),
            failing.len()
        );
        let _ = writeln!(
            out,
            "  {:>14} {:>8} {:>8} {:>8} {:>10} {:>9}",
            "frequency", "before", "after", "change", "status", "margin"
        );
        let mut by_worst = failing.clone();
        by_worst.sort_by(|x, y| {
            let m = |p: &PeakChange| p.margin_before_db.or(p.margin_after_db).unwrap_or(0.0);
            m(x).total_cmp(&m(y))
        });
        for p in by_worst.iter().take(MAX_PEAKS) {
            let _ = writeln!(
                out,
                "  {:>14} {:>8} {:>8} {:>8} {:>10} {:>9}",
                fmt_hz(p.freq_hz),
                level(p.before_dbuv),
                level(p.after_dbuv),
                db(p.change_db),
                p.status.name(),
                db(p.margin_after_db)
            );
        }
        out.push('\n');
    }
}

/// The text report.
pub fn render_text(overall: &Step, steps: &[Step]) -> String {
    let mut out = String::new();
    let _ = writeln!(out, "spurhound comparison: {NOTICE}");
    out.push('\n');
    if steps.len() > 1 {
        for (k, s) in steps.iter().enumerate() {
            let _ = writeln!(out, "Step {}", k + 1);
            step_text(s, &mut out);
        }
        out.push_str("Overall\n");
    }
    step_text(overall, &mut out);
    let improved = overall
        .comparison
        .families
        .iter()
        .filter(|f| f.status == Status::Improved)
        .count();
    wrap_into(
        &mut out,
        &format!(
            "A change counts as improved or worse when it is at least {} standard deviations from zero; a reading's deviation combines a set-up repeatability of {} dB (common practice) with the floor's fluctuation. {} famil{} improved.",
            crate::compare::SIGNIFICANT_Z,
            overall.comparison.setup_repeat_db,
            improved,
            if improved == 1 { "y" } else { "ies" }
        ),
        "",
        "",
    );
    out
}
