//! Reports of an ambient [`Survey`]: text for people (80 columns) and JSON of the
//! `spurhound.survey/1` contract. Field names of the contract are fixed: `sweeps` (a count),
//! `emitters[]` with `freq_hz`, `fundamental_hz`, `presence`, `class`, `kind`, `median_dbuv`,
//! `p95_dbuv`, `margin_db`, and `headroom[]` with `start_hz`, `stop_hz`, `usable_fraction`;
//! fields may be added, never renamed or given another meaning.

use super::RenderError;
use super::model::{LimitRef, NOTICE};
use super::text::wrap_into;
use crate::analysis::fmt_hz;
use crate::scan::Detector;
use crate::setup::Warning;
use crate::survey::{
    BlockedRange, Emitter, EmitterKind, HeadroomBand, Quietest, Survey, SweepSummary,
};
use serde::Serialize;
use std::fmt::Write as _;

/// Schema name and version.
pub const SCHEMA: &str = "spurhound.survey/1";

/// A survey format.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum SurveyFormat {
    Text,
    Json,
}

/// Renders `s` in `format`.
///
/// # Errors
/// [`RenderError::Serialise`] when the JSON cannot be written.
pub fn render_survey(s: &Survey, format: SurveyFormat) -> Result<String, RenderError> {
    match format {
        SurveyFormat::Text => Ok(text(s)),
        SurveyFormat::Json => json(s),
    }
}

/// The thresholds of the presence classes, reported with the classes.
#[derive(Debug, Serialize)]
pub struct ClassesDoc {
    pub persistent_share: f64,
    pub one_off_max_sweeps: usize,
    pub basis: &'static str,
}

/// The headroom rule, reported with the headroom.
#[derive(Debug, Serialize)]
pub struct RuleDoc {
    pub level_quantile: f64,
    pub headroom_db: f64,
    pub min_usable_fraction: f64,
    pub basis: &'static str,
}

#[derive(Debug, Serialize)]
pub struct SpanDoc {
    pub start_hz: f64,
    pub stop_hz: f64,
    pub points: usize,
    pub rbw_hz: Option<f64>,
    pub detector: Option<Detector>,
    pub unit: &'static str,
}

/// The `spurhound.survey/1` document.
#[derive(Debug, Serialize)]
pub struct SurveyDoc<'a> {
    pub schema: &'static str,
    pub notice: &'static str,
    /// Number of sweeps.
    pub sweeps: usize,
    /// `time` or `file order`.
    pub ordered_by: &'static str,
    pub scan: SpanDoc,
    pub limit: Option<LimitRef>,
    pub classes: ClassesDoc,
    pub headroom_rule: RuleDoc,
    /// Every band judged; `null` without a limit covering the scan.
    pub usable: Option<bool>,
    pub emitters: &'a [Emitter],
    pub headroom: &'a [HeadroomBand],
    pub blocked: &'a [BlockedRange],
    pub quietest: Option<&'a Quietest>,
    pub series: &'a [SweepSummary],
    pub warnings: &'a [Warning],
}

const CLASS_BASIS: &str = "common practice";
const RULE_BASIS: &str = "ambient at least 6 dB under the limit: common practice (ANSI C63.4 treats the ambient); the usable share a band needs is spurhound's choice";

/// The document of `s`.
pub fn document(s: &Survey) -> SurveyDoc<'_> {
    let f = &s.profile.freq_hz;
    SurveyDoc {
        schema: SCHEMA,
        notice: NOTICE,
        sweeps: s.sweeps.len(),
        ordered_by: if s.ordered_by_time {
            "time"
        } else {
            "file order"
        },
        scan: SpanDoc {
            start_hz: f.first().copied().unwrap_or(0.0),
            stop_hz: f.last().copied().unwrap_or(0.0),
            points: f.len(),
            rbw_hz: s.rbw_hz,
            detector: s.detector,
            unit: s.quantity.unit(),
        },
        limit: s.limit.as_ref().map(|l| LimitRef {
            name: l.name.clone(),
            detector: l.detector,
        }),
        classes: ClassesDoc {
            persistent_share: s.params.persistent_share,
            one_off_max_sweeps: s.params.one_off_sweeps,
            basis: CLASS_BASIS,
        },
        headroom_rule: RuleDoc {
            level_quantile: s.params.level_quantile,
            headroom_db: s.params.headroom_db,
            min_usable_fraction: s.params.min_usable_fraction,
            basis: RULE_BASIS,
        },
        usable: s.usable,
        emitters: &s.emitters,
        headroom: &s.headroom,
        blocked: &s.blocked,
        quietest: s.quietest.as_ref(),
        series: &s.sweeps,
        warnings: &s.warnings,
    }
}

fn json(s: &Survey) -> Result<String, RenderError> {
    let mut out =
        serde_json::to_string_pretty(&document(s)).map_err(|e| RenderError::Serialise {
            reason: e.to_string(),
        })?;
    out.push('\n');
    Ok(out)
}

/// Most blocked ranges listed; the JSON has them all.
const MAX_BLOCKED: usize = 12;
/// Most emitter ids per blocked range; the JSON has them all.
const MAX_IDS: usize = 3;
/// Most emitters listed; the JSON has them all.
const MAX_EMITTERS: usize = 40;

fn text(s: &Survey) -> String {
    let mut out = String::new();
    let _ = writeln!(out, "spurhound survey: {NOTICE}");
    out.push('\n');
    sweeps_section(s, &mut out);
    verdict_section(s, &mut out);
    headroom_section(s, &mut out);
    blocked_section(s, &mut out);
    quietest_section(s, &mut out);
    emitters_section(s, &mut out);
    warnings_section(&s.warnings, &mut out);
    out
}

fn pct(x: f64) -> String {
    format!("{:.1} %", 100.0 * x)
}

fn sweeps_section(s: &Survey, out: &mut String) {
    let n = s.sweeps.len();
    let order = if s.ordered_by_time {
        let first = s
            .sweeps
            .first()
            .and_then(|x| x.time.clone())
            .unwrap_or_default();
        let last = s
            .sweeps
            .last()
            .and_then(|x| x.time.clone())
            .unwrap_or_default();
        format!(", {first} to {last}, in time order")
    } else {
        ", in file order (no time stamps)".to_string()
    };
    wrap_into(
        out,
        &format!("{n} ambient sweeps{order}"),
        "Sweeps    ",
        "          ",
    );
    let f = &s.profile.freq_hz;
    let rbw = s
        .rbw_hz
        .map_or("RBW not stated".into(), |r| format!("RBW {}", fmt_hz(r)));
    let det = s
        .detector
        .map_or("detector not stated".into(), |d| format!("{d} detector"));
    let line = format!(
        "{} points, {} to {}, {rbw}, {det}, {}",
        f.len(),
        fmt_hz(f.first().copied().unwrap_or(0.0)),
        fmt_hz(f.last().copied().unwrap_or(0.0)),
        s.quantity.unit()
    );
    wrap_into(out, &line, "          ", "          ");
    match &s.limit {
        Some(l) => wrap_into(
            out,
            &format!(
                "{} ({}): the ambient's {:.0}th percentile should be at least {} dB under it (common practice)",
                l.name,
                l.detector,
                100.0 * s.params.level_quantile,
                s.params.headroom_db
            ),
            "Limit     ",
            "          ",
        ),
        None => out.push_str("Limit     none given: no headroom (pass --limit NAME|FILE)\n"),
    }
    out.push('\n');
}

fn verdict_section(s: &Survey, out: &mut String) {
    let failing: Vec<&HeadroomBand> = s.headroom.iter().filter(|b| !b.judged).collect();
    let want = pct(s.params.min_usable_fraction);
    let text = match s.usable {
        None => "NO VERDICT: no limit covers the sweeps".to_string(),
        Some(true) => {
            format!("USABLE: every band has at least {want} of its points with the headroom")
        }
        Some(false) => {
            let list: Vec<String> = failing
                .iter()
                .filter(|b| b.band == "segment")
                .map(|b| {
                    format!(
                        "{} to {} ({} usable)",
                        fmt_hz(b.start_hz),
                        fmt_hz(b.stop_hz),
                        pct(b.usable_fraction)
                    )
                })
                .collect();
            let which = if list.is_empty() {
                "the whole span".to_string()
            } else {
                list.join(", ")
            };
            format!(
                "NOT USABLE: a DUT cannot be judged in {which}; {want} wanted{}",
                blocking_note(s, &failing)
            )
        }
    };
    wrap_into(out, &text, "Verdict   ", "          ");
    out.push('\n');
}

/// Who blocks the bands that cannot be judged, and what to do when they come and go.
fn blocking_note(s: &Survey, failing: &[&HeadroomBand]) -> String {
    let mut ids: Vec<usize> = failing
        .iter()
        .flat_map(|b| b.blocking.iter().copied())
        .collect();
    ids.sort_unstable();
    ids.dedup();
    let blockers: Vec<&Emitter> = s.emitters.iter().filter(|e| ids.contains(&e.id)).collect();
    if blockers.is_empty() {
        return String::new();
    }
    let names: Vec<String> = blockers
        .iter()
        .map(|e| format!("#{} {} {}", e.id, e.class.name(), e.kind.name()))
        .collect();
    let all_come_and_go = blockers
        .iter()
        .all(|e| e.class != crate::survey::Presence::Persistent);
    let (they, are) = if blockers.len() == 1 {
        ("it comes and goes", "it is")
    } else {
        ("they come and go", "they are")
    };
    let advice = match &s.quietest {
        Some(q) if all_come_and_go && blockers.iter().all(|e| !e.seen_in.contains(&q.sweep)) => {
            format!(
                "; {they}: measure while {are} off, as in sweep {}{}",
                q.sweep + 1,
                q.time
                    .as_ref()
                    .map_or(String::new(), |t| format!(" at {t}"))
            )
        }
        _ if all_come_and_go => format!("; {they}: measure while {are} off"),
        _ => String::new(),
    };
    format!("; blocked by {}{advice}", names.join(", "))
}

fn headroom_section(s: &Survey, out: &mut String) {
    if s.headroom.is_empty() {
        return;
    }
    wrap_into(
        out,
        &format!(
            "share of the points whose {:.0}th percentile is {} dB or more under the limit; the limit's segments, then the whole span",
            100.0 * s.params.level_quantile,
            s.params.headroom_db
        ),
        "Headroom  ",
        "          ",
    );
    let _ = writeln!(
        out,
        "  {:>13} {:>13} {:>7} {:>8} {:>13} {:>11}  judged",
        "from", "to", "points", "usable", "worst margin", "at"
    );
    for b in &s.headroom {
        let judged = if b.judged { "yes" } else { "NO" };
        let _ = writeln!(
            out,
            "  {:>13} {:>13} {:>7} {:>8} {:>10.1} dB {:>11}  {judged}",
            fmt_hz(b.start_hz),
            fmt_hz(b.stop_hz),
            b.points,
            pct(b.usable_fraction),
            b.worst_margin_db,
            fmt_hz(b.worst_freq_hz)
        );
    }
    out.push('\n');
}

fn blocked_section(s: &Survey, out: &mut String) {
    if s.blocked.is_empty() {
        return;
    }
    let _ = writeln!(
        out,
        "Cannot be judged ({} range(s), worst first)",
        s.blocked.len()
    );
    let _ = writeln!(
        out,
        "  {:>13} {:>13} {:>7} {:>13} {:>12}  emitters",
        "from", "to", "points", "worst margin", "at"
    );
    let mut sorted: Vec<&BlockedRange> = s.blocked.iter().collect();
    sorted.sort_by(|a, b| a.worst_margin_db.total_cmp(&b.worst_margin_db));
    for b in sorted.iter().take(MAX_BLOCKED) {
        let mut ids: Vec<String> = b
            .emitters
            .iter()
            .take(MAX_IDS)
            .map(|i| format!("#{i}"))
            .collect();
        if b.emitters.len() > MAX_IDS {
            ids.push(format!("+{}", b.emitters.len() - MAX_IDS));
        }
        let _ = writeln!(
            out,
            "  {:>13} {:>13} {:>7} {:>10.1} dB {:>12}  {}",
            fmt_hz(b.start_hz),
            fmt_hz(b.stop_hz),
            b.points,
            b.worst_margin_db,
            fmt_hz(b.worst_freq_hz),
            if ids.is_empty() {
                "-".to_string()
            } else {
                ids.join(" ")
            }
        );
    }
    if s.blocked.len() > MAX_BLOCKED {
        let _ = writeln!(
            out,
            "  ... and {} more (see --format json)",
            s.blocked.len() - MAX_BLOCKED
        );
    }
    out.push('\n');
}

fn quietest_section(s: &Survey, out: &mut String) {
    let Some(q) = &s.quietest else { return };
    let when = q
        .time
        .as_ref()
        .map_or(String::new(), |t| format!(" at {t}"));
    let worst = q.worst_band_usable.map_or(String::new(), |w| {
        format!(" ({} in its worst band)", pct(w))
    });
    let transient = match q.transient_present {
        0 => "none of them coming and going".to_string(),
        n => format!("{n} of them coming and going"),
    };
    let text = format!(
        "sweep {}{when} ({}): {} of the points usable{worst}, {} emitter(s) present, {transient}{}",
        q.sweep + 1,
        q.label,
        pct(q.usable_fraction),
        q.emitters_present,
        if s.ordered_by_time {
            ""
        } else {
            "; the sweeps state no time, so this is a position in the file order"
        }
    );
    wrap_into(out, &text, "Quietest  ", "          ");
    out.push('\n');
}

fn emitters_section(s: &Survey, out: &mut String) {
    let n = s.sweeps.len();
    wrap_into(
        out,
        &format!(
            "Emitters ({}): persistent when seen in {:.0} % of the sweeps or more, one-off in {} or fewer, intermittent between (common practice); levels over the sweeps each is seen in",
            s.emitters.len(),
            100.0 * s.params.persistent_share,
            s.params.one_off_sweeps
        ),
        "",
        "",
    );
    if s.emitters.is_empty() {
        out.push_str("  none found.\n\n");
        return;
    }
    let _ = writeln!(
        out,
        "  {:>3} {:>12} {:<13} {:<12} {:>4} {:>6} {:>5} {:>6} {:>7}",
        "#", "frequency", "kind", "class", "seen", "median", "p95", "spread", "margin"
    );
    for e in s.emitters.iter().take(MAX_EMITTERS) {
        let margin = e.margin_db.map_or("-".to_string(), |m| format!("{m:+.1}"));
        let _ = writeln!(
            out,
            "  {:>3} {:>12} {:<13} {:<12} {:>3}% {:>6.1} {:>5.1} {:>6.1} {:>7}",
            e.id,
            fmt_hz(e.freq_hz),
            e.kind.name(),
            e.class.name(),
            (100.0 * e.presence).round(),
            e.median_dbuv,
            e.p95_dbuv,
            e.spread_db,
            margin
        );
        let detail = format!(
            "{}; seen in {} of {n} sweeps ({:.0} to {:.0} % at {:.0} % confidence)",
            short_detail(e),
            e.sweeps_present,
            100.0 * e.presence_low,
            100.0 * e.presence_high,
            100.0 * s.params.confidence
        );
        wrap_into(out, &detail, "        ", "        ");
    }
    if s.emitters.len() > MAX_EMITTERS {
        let _ = writeln!(
            out,
            "  ... and {} more (see --format json)",
            s.emitters.len() - MAX_EMITTERS
        );
    }
    out.push('\n');
}

/// One line about an emitter: a comb's fundamental and lines, a hump's extent, else the reason
/// for its kind.
fn short_detail(e: &Emitter) -> String {
    match (e.kind, e.fundamental_hz) {
        (EmitterKind::Comb, Some(f0)) => {
            let (a, b) = (
                e.lines.first().map_or(f0, |l| l.freq_hz),
                e.lines.last().map_or(f0, |l| l.freq_hz),
            );
            let what = e.comb_kind.map_or("", |k| super::text::kind_name(k));
            format!(
                "comb of {}, {} lines {} to {}, a {what} pattern",
                fmt_hz(f0),
                e.lines.len(),
                fmt_hz(a),
                fmt_hz(b)
            )
        }
        _ => e.kind_detail.clone(),
    }
}

fn warnings_section(warnings: &[Warning], out: &mut String) {
    if warnings.is_empty() {
        return;
    }
    out.push_str("Check\n");
    for w in warnings {
        wrap_into(out, &w.message, "  - ", "    ");
    }
}
