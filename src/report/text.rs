//! The report for people: fits 80 columns.

use super::model::NOTICE;
use super::{RenderError, Renderer};
use crate::analysis::{AMBIENT_HEADROOM_DB, Analysis, fmt_hz};
use std::fmt::Write as _;

/// Report width in columns.
pub const WIDTH: usize = 80;

/// The text renderer.
pub struct TextReport;

impl Renderer for TextReport {
    fn render(&self, a: &Analysis) -> Result<String, RenderError> {
        let mut out = String::new();
        let _ = writeln!(out, "spurhound analysis: {NOTICE}");
        out.push('\n');
        scan_section(a, &mut out);
        verdict_section(a, &mut out);
        limits_section(a, &mut out);
        over_section(a, &mut out);
        ambient_section(a, &mut out);
        culprits_section(a, &mut out);
        peaks_section(a, &mut out);
        humps_section(a, &mut out);
        remeasure_section(a, &mut out);
        warnings_section(a, &mut out);
        Ok(out)
    }
}

fn scan_section(a: &Analysis, out: &mut String) {
    let m = &a.scan.meta;
    let (s, e) = a.scan.span_hz();
    let name = m.source.clone().unwrap_or_else(|| "scan".into());
    let _ = writeln!(out, "Scan      {}", clip(&name, WIDTH - 10));
    if let Some(t) = &m.title {
        let _ = writeln!(out, "          {}", clip(t, WIDTH - 10));
    }
    let rbw = m
        .rbw_hz
        .map_or("RBW not stated".into(), |r| format!("RBW {}", fmt_hz(r)));
    let det = m
        .detector
        .map_or("detector not stated".into(), |d| format!("{d} detector"));
    let _ = writeln!(
        out,
        "          {} points, {} to {}, {rbw}, {det}, {}",
        a.scan.len(),
        fmt_hz(s),
        fmt_hz(e),
        m.quantity.unit()
    );
    out.push('\n');
}

fn verdict_section(a: &Analysis, out: &mut String) {
    let v = &a.verdict;
    let word = match v.pass {
        Some(true) => "PASS",
        Some(false) => "FAIL",
        None => "NO VERDICT",
    };
    match (v.worst_margin_db, v.worst_freq_hz, &v.worst_limit) {
        (Some(m), Some(f), Some(l)) => {
            let _ = writeln!(
                out,
                "Verdict   {word}: worst margin {m:+.1} dB at {} ({l})",
                fmt_hz(f)
            );
        }
        _ => {
            let _ = writeln!(out, "Verdict   {word}: no limit covers the scan");
        }
    }
    if let Some(p) = a.detectors.predicted_pass {
        let word = if p { "PASS" } else { "FAIL" };
        wrap_into(
            out,
            &format!(
                "{word} predicted with the quasi-peak and average detectors (from this peak scan; see Re-measure)"
            ),
            "          ",
            "          ",
        );
    }
    out.push('\n');
}

fn limits_section(a: &Analysis, out: &mut String) {
    if a.limits.is_empty() {
        return;
    }
    out.push_str("Limits\n");
    let _ = writeln!(
        out,
        "  {:<18} {:<11} {:<6} {:>12} {:>14}",
        "name", "detector", "result", "worst margin", "at"
    );
    for r in &a.limits {
        let result = match r.margins.pass() {
            Some(true) => "pass",
            Some(false) => "FAIL",
            None => "-",
        };
        let (m, f) = r
            .margins
            .worst
            .map_or(("-".to_string(), "-".to_string()), |w| {
                (format!("{:+.1} dB", w.margin_db), fmt_hz(w.freq_hz))
            });
        let _ = writeln!(
            out,
            "  {:<18} {:<11} {:<6} {:>12} {:>14}",
            clip(&r.limit.name, 18),
            r.limit.detector.name(),
            result,
            m,
            f
        );
    }
    out.push('\n');
}

/// Most ranges listed per limit; the JSON has them all.
const MAX_RANGES: usize = 12;

fn over_section(a: &Analysis, out: &mut String) {
    for r in a
        .limits
        .iter()
        .filter(|r| !r.margins.exceedances.is_empty())
    {
        let ex = &r.margins.exceedances;
        let _ = writeln!(
            out,
            "Over the limit {}: {} range(s)",
            r.limit.name,
            ex.len()
        );
        let _ = writeln!(
            out,
            "  {:>13} {:>13} {:>7} {:>14} {:>9} {:>8}",
            "from", "to", "points", "worst at", "level", "margin"
        );
        let mut sorted: Vec<_> = ex.iter().collect();
        sorted.sort_by(|x, y| x.worst_margin_db.total_cmp(&y.worst_margin_db));
        for e in sorted.iter().take(MAX_RANGES) {
            let _ = writeln!(
                out,
                "  {:>13} {:>13} {:>7} {:>14} {:>9.1} {:>+8.1}",
                fmt_hz(e.start_hz),
                fmt_hz(e.stop_hz),
                e.points,
                fmt_hz(e.worst_freq_hz),
                e.worst_level_dbuv,
                e.worst_margin_db
            );
        }
        if ex.len() > MAX_RANGES {
            let _ = writeln!(
                out,
                "  ... and {} more (see --format json)",
                ex.len() - MAX_RANGES
            );
        }
        out.push('\n');
    }
}

fn ambient_section(a: &Analysis, out: &mut String) {
    if a.ambient.is_empty() {
        return;
    }
    out.push_str("Ambient\n");
    for x in &a.ambient {
        let name = x.scan.meta.source.clone().unwrap_or_else(|| x.scan.label());
        let worst = x.margins.as_ref().and_then(|m| m.worst);
        let line = match worst {
            Some(w) => format!(
                "{}: worst margin {:+.1} dB at {}; within {AMBIENT_HEADROOM_DB} dB of the limit in {} range(s)",
                name,
                w.margin_db,
                fmt_hz(w.freq_hz),
                x.near_limit.len()
            ),
            None => format!("{name}: no limit to compare with"),
        };
        wrap_into(out, &line, "  ", "    ");
    }
    out.push('\n');
}

fn culprits_section(a: &Analysis, out: &mut String) {
    if a.families.is_empty() {
        out.push_str("Culprits\n  no harmonic family found.\n\n");
        return;
    }
    out.push_str("Culprits (rank 1 = fix first)\n");
    let _ = writeln!(
        out,
        "  {:>2} {:<9} {:<27} {:>11} {:>8} {:<7}",
        "#", "kind", "fundamental", "harmonics", "worst", "origin"
    );
    let mut fams: Vec<_> = a.families.iter().collect();
    fams.sort_by_key(|f| f.rank);
    for f in fams {
        let fundamental = format!(
            "{} ± {}",
            fmt_hz(f.fundamental_hz),
            fmt_sigma(f.fundamental_sigma_hz)
        );
        let (lo, hi) = (
            f.harmonics.first().copied().unwrap_or(0),
            f.harmonics.last().copied().unwrap_or(0),
        );
        let harmonics = format!("{} ({lo}-{hi})", f.harmonics.len());
        let worst = f
            .worst_margin_db
            .map_or("-".to_string(), |m| format!("{m:+.1} dB"));
        let _ = writeln!(
            out,
            "  {:>2} {:<9} {:<27} {:>11} {:>8} {:<7}",
            f.rank,
            kind_name(f.kind),
            clip(&fundamental, 27),
            harmonics,
            worst,
            origin_name(f.origin)
        );
        let mut notes = Vec::new();
        if let Some(spread) = f.envelope.as_ref().and_then(|e| e.spread_pct) {
            notes.push(format!("dithered, about {spread:.1} % peak to peak"));
        }
        if f.odd_only {
            notes.push("odd harmonics only".to_string());
        }
        if f.points_over > 0 {
            notes.push(format!("{} harmonic(s) over a limit", f.points_over));
        }
        if let Some(m) = &f.declared_source {
            let off = if m.offset_pct.abs() >= 0.1 {
                format!("{:+.2} %", m.offset_pct)
            } else {
                format!("{:+.0} ppm", m.offset_ppm)
            };
            let within = if m.within_tolerance {
                "within its tolerance"
            } else {
                "outside its declared tolerance"
            };
            notes.push(format!(
                "declared source: {} ({off} from nominal, {within})",
                m.source
            ));
        } else if a.inventory.is_some()
            && f.origin != crate::analysis::Origin::Ambient
            && f.kind != crate::analysis::Kind::Broadcast
        {
            notes.push("not on the inventory: a missing or misbehaving oscillator".to_string());
        }
        if !notes.is_empty() {
            wrap_into(out, &notes.join("; "), "     ", "     ");
        }
        if let Some(fp) = &f.fingerprint {
            wrap_into(out, &fingerprint_line(fp), "     ", "       ");
        }
        if let Some(r) = f.remedies.first() {
            wrap_into(out, r, "     fix: ", "          ");
        }
        if f.rank <= MAX_SIZED_FAMILIES {
            let sized = crate::attribution::plan::sized_sentences(f.sized.as_ref());
            for s in sized.iter().take(MAX_SIZED_SENTENCES) {
                wrap_into(out, s, "     size: ", "           ");
            }
        }
    }
    if let Some(inv) = &a.inventory {
        if !inv.unused_sources.is_empty() {
            wrap_into(
                out,
                &format!(
                    "declared but not seen: {} (off, quiet under the floor, or off its declared frequency)",
                    inv.unused_sources.join(", ")
                ),
                "  ",
                "  ",
            );
        }
    }
    out.push('\n');
}

/// One line on a family's fingerprint: duty and edge time with their 95 % intervals (or a
/// bound), and the DM/CM rule of thumb; the long form when it fits [`WIDTH`] after the indent,
/// else the modes abbreviated.
fn fingerprint_line(fp: &crate::families::fingerprint::Fingerprint) -> String {
    use crate::families::fingerprint::{Quality, Status};
    if fp.fit_quality == Quality::Poor {
        return "fingerprint: the harmonics do not follow a trapezoid (another source shares them?)"
            .into();
    }
    let duty = match (fp.duty_status, fp.duty, fp.duty_ci) {
        (Status::Estimated, Some(d), (Some(lo), Some(hi))) => {
            format!("duty {d:.2} ({lo:.2}-{hi:.2})")
        }
        (Status::UpperBound, _, (_, Some(hi))) => format!("duty ≤ {hi:.2}"),
        _ => "duty unknown".into(),
    };
    let edges = match (fp.edge_time_status, fp.edge_time_s, fp.edge_time_ci_s) {
        (Status::Estimated, Some(t), (Some(lo), Some(hi))) => {
            format!("edges {} ({})", fmt_time(t), fmt_time_range(lo, hi))
        }
        (Status::UpperBound, _, (_, Some(hi))) => format!("edges ≤ {}", fmt_time(hi)),
        (Status::LowerBound, _, (Some(lo), _)) => format!("edges ≥ {}", fmt_time(lo)),
        _ => "edges unknown".into(),
    };
    let short_edges = match (fp.edge_time_status, fp.edge_time_s, fp.edge_time_ci_s) {
        (Status::Estimated, Some(t), (Some(lo), Some(hi))) => {
            let (scale, _) = time_unit(t);
            format!(
                "edges {} ({}-{})",
                fmt_time(t),
                two_digits(lo / scale),
                two_digits(hi / scale)
            )
        }
        _ => edges.clone(),
    };
    let verdict = fp.mode.as_ref().map(|m| m.verdict);
    let mode = |form: usize| match verdict {
        None => String::new(),
        Some(v) => {
            let v = match form {
                0 => v.to_string(),
                1 => v
                    .replace("differential mode", "DM")
                    .replace("common mode", "CM"),
                _ => v
                    .replace("mostly ", "")
                    .replace("mixed differential and common mode", "DM+CM")
                    .replace("differential mode", "DM")
                    .replace("common mode", "CM"),
            };
            format!(", {v} (rule of thumb)")
        }
    };
    // the most explicit form that fits the 5-column indent
    let forms = [
        format!("fingerprint: {duty}, {edges}{}", mode(0)),
        format!("fingerprint: {duty}, {short_edges}{}", mode(1)),
        format!("fingerprint: {duty}, {short_edges}{}", mode(2)),
    ];
    let fits = |l: &String| l.chars().count() + 5 <= WIDTH;
    forms.iter().find(|l| fits(l)).unwrap_or(&forms[2]).clone()
}

/// A time with two significant digits and an SI prefix: `80 ns`, `1.2 µs`.
fn fmt_time(seconds: f64) -> String {
    let (scale, unit) = time_unit(seconds);
    format!("{} {unit}", two_digits(seconds / scale))
}

/// `55-120 ns`: both ends in the unit of the upper one.
fn fmt_time_range(lo: f64, hi: f64) -> String {
    let (scale, unit) = time_unit(hi);
    format!(
        "{}-{} {unit}",
        two_digits(lo / scale),
        two_digits(hi / scale)
    )
}

fn time_unit(seconds: f64) -> (f64, &'static str) {
    [(1.0, "s"), (1e-3, "ms"), (1e-6, "µs"), (1e-9, "ns")]
        .into_iter()
        .find(|(s, _)| seconds.abs() >= *s * 0.9995)
        .unwrap_or((1e-12, "ps"))
}

/// Two significant digits, no trailing zeros: 80, 12, 1.2, 0.55.
fn two_digits(v: f64) -> String {
    let d = if v.abs() >= 9.95 {
        0
    } else if v.abs() >= 0.995 {
        1
    } else {
        2
    };
    let t = format!("{v:.d$}");
    if t.contains('.') {
        t.trim_end_matches('0').trim_end_matches('.').to_string()
    } else {
        t
    }
}

/// Families whose sized remedies the text report shows (by rank); the JSON has them all.
const MAX_SIZED_FAMILIES: usize = 3;
/// Sized remedies shown per family, most direct first.
const MAX_SIZED_SENTENCES: usize = 3;

/// Most peaks listed; the JSON and CSV have them all.
const MAX_PEAKS: usize = 15;

fn peaks_section(a: &Analysis, out: &mut String) {
    if a.peaks.is_empty() {
        return;
    }
    let mut peaks: Vec<_> = a.peaks.iter().collect();
    peaks.sort_by(|x, y| {
        let m = |p: &crate::analysis::Peak| p.margin_db.unwrap_or(f64::INFINITY);
        m(x).total_cmp(&m(y))
            .then(y.level_dbuv.total_cmp(&x.level_dbuv))
    });
    let shown = peaks.len().min(MAX_PEAKS);
    let _ = writeln!(
        out,
        "Peaks ({shown} of {}, smallest margin first)",
        peaks.len()
    );
    let _ = writeln!(
        out,
        "  {:>14} {:>7} {:>8} {:>9} {:<10} {:<7} {:>8}",
        "frequency", "level", "margin", "width", "bandwidth", "origin", "family"
    );
    for p in peaks.iter().take(shown) {
        let margin = p.margin_db.map_or("-".to_string(), |m| format!("{m:+.1}"));
        let family = match (p.family, p.harmonic) {
            (Some(f), Some(n)) => format!("{f} n={n}"),
            _ => "-".to_string(),
        };
        let bw = match p.bandwidth {
            crate::analysis::Bandwidth::Narrowband => "narrow",
            crate::analysis::Bandwidth::Broadband => "broad",
        };
        let _ = writeln!(
            out,
            "  {:>14} {:>7.1} {:>8} {:>9} {:<10} {:<7} {:>8}",
            fmt_hz(p.freq_hz),
            p.level_dbuv,
            margin,
            fmt_hz(p.width_hz),
            bw,
            origin_name(p.origin),
            family
        );
    }
    out.push('\n');
}

/// Most re-measure points listed; the JSON and `--format remeasure` have them all.
const MAX_REMEASURE: usize = 15;

fn remeasure_section(a: &Analysis, out: &mut String) {
    let plan = &a.detectors.remeasure;
    if plan.points.is_empty() {
        return;
    }
    let _ = writeln!(
        out,
        "Re-measure with QP/AV ({} point(s), smallest predicted margin first)",
        plan.points.len()
    );
    let _ = writeln!(
        out,
        "  {:>12} {:>6} {:>6} {:>7} {:>7} {:>5} {:>6} detectors",
        "frequency", "QP", "AV", "QP mrg", "AV mrg", "+-", "dwell"
    );
    let mut pts: Vec<_> = plan.points.iter().collect();
    let least = |r: &crate::prediction::Remeasure| {
        [r.qp_margin_db, r.av_margin_db]
            .into_iter()
            .flatten()
            .fold(f64::INFINITY, f64::min)
    };
    pts.sort_by(|x, y| least(x).total_cmp(&least(y)));
    let m = |x: Option<f64>| x.map_or("-".to_string(), |v| format!("{v:+.1}"));
    for r in pts.iter().take(MAX_REMEASURE) {
        let dets: Vec<&str> = r
            .detectors
            .iter()
            .map(|d| match d {
                crate::scan::Detector::QuasiPeak => "QP",
                _ => "AV",
            })
            .collect();
        let _ = writeln!(
            out,
            "  {:>12} {:>6.1} {:>6.1} {:>7} {:>7} {:>5.1} {:>5.1}s {}",
            fmt_hz(r.freq_hz),
            r.predicted_qp_dbuv,
            r.predicted_av_dbuv,
            m(r.qp_margin_db),
            m(r.av_margin_db),
            r.uncertainty_db,
            r.dwell_s,
            dets.join("+")
        );
    }
    if plan.points.len() > MAX_REMEASURE {
        let _ = writeln!(
            out,
            "  ... and {} more (see --format json or --format remeasure)",
            plan.points.len() - MAX_REMEASURE
        );
    }
    let saving = match (plan.full_sweep_s, plan.saved_s) {
        (Some(full), Some(saved)) => format!(
            "; a full quasi-peak/average sweep of the span at CISPR 16-1-1 settings takes about {}, so the list saves about {}",
            fmt_duration(full),
            fmt_duration(saved)
        ),
        _ => String::new(),
    };
    wrap_into(
        out,
        &format!(
            "dwell {} in all (settling of the slowest detector and repetition at each point){saving}.",
            fmt_duration(plan.time_s)
        ),
        "  ",
        "  ",
    );
    for c in &a.detectors.checks {
        wrap_into(
            out,
            &format!(
                "measured {} scan given: the prediction was off by {:.1} dB (median), {:.1} dB at most, over {} peak(s); margins use the measured readings",
                if c.detector == crate::scan::Detector::QuasiPeak {
                    "quasi-peak"
                } else {
                    "average"
                },
                c.median_abs_error_db,
                c.max_abs_error_db,
                c.compared
            ),
            "  ",
            "  ",
        );
    }
    out.push('\n');
}

fn fmt_duration(s: f64) -> String {
    if s >= 3600.0 {
        format!("{:.1} h", s / 3600.0)
    } else if s >= 120.0 {
        format!("{:.0} min", s / 60.0)
    } else {
        format!("{s:.0} s")
    }
}

fn humps_section(a: &Analysis, out: &mut String) {
    if a.humps.is_empty() {
        return;
    }
    let _ = writeln!(out, "Broadband regions ({})", a.humps.len());
    let _ = writeln!(
        out,
        "  {:>14} {:>14} {:>14} {:>7} {:>10}  source",
        "from", "to", "top at", "level", "over floor"
    );
    for h in a.humps.iter().take(MAX_PEAKS) {
        let source = h
            .family
            .map_or("unknown".to_string(), |f| format!("family {f}"));
        let _ = writeln!(
            out,
            "  {:>14} {:>14} {:>14} {:>7.1} {:>7.1} dB  {}",
            fmt_hz(h.start_hz),
            fmt_hz(h.stop_hz),
            fmt_hz(h.freq_hz),
            h.level_dbuv,
            h.over_floor_db,
            source
        );
        if let Some(r) = h.rescan {
            let text = format!(
                "not claimed by a family: perhaps a comb finer than the RBW or the step; rescan {} to {} with RBW {}, {} points",
                fmt_hz(r.start_hz),
                fmt_hz(r.stop_hz),
                fmt_hz(r.rbw_hz),
                r.points
            );
            wrap_into(out, &text, "     ", "     ");
        }
    }
    out.push('\n');
}

fn fmt_sigma(sigma_hz: f64) -> String {
    if sigma_hz >= 1e3 {
        format!("{:.2} kHz", sigma_hz / 1e3)
    } else {
        format!("{sigma_hz:.1} Hz")
    }
}

pub(crate) fn kind_name(k: crate::analysis::Kind) -> &'static str {
    use crate::analysis::Kind::*;
    match k {
        Switching => "switching",
        Clock => "clock",
        Lighting => "lighting",
        Broadcast => "broadcast",
        Other => "other",
    }
}

fn origin_name(o: crate::analysis::Origin) -> &'static str {
    use crate::analysis::Origin::*;
    match o {
        Dut => "dut",
        Ambient => "ambient",
        Mixed => "mixed",
        Unknown => "unknown",
    }
}

fn warnings_section(a: &Analysis, out: &mut String) {
    if a.warnings.is_empty() {
        return;
    }
    out.push_str("Check\n");
    for w in &a.warnings {
        wrap_into(out, &w.message, "  - ", "    ");
    }
}

/// Appends `text` wrapped to [`WIDTH`] columns, the first line after `first`, the rest after
/// `rest`.
pub fn wrap_into(out: &mut String, text: &str, first: &str, rest: &str) {
    let mut line = String::from(first);
    let mut empty = true;
    for word in text.split_whitespace() {
        if !empty && line.chars().count() + 1 + word.chars().count() > WIDTH {
            out.push_str(&line);
            out.push('\n');
            line = String::from(rest);
            empty = true;
        }
        if !empty {
            line.push(' ');
        }
        line.push_str(word);
        empty = false;
    }
    out.push_str(&line);
    out.push('\n');
}

fn clip(s: &str, n: usize) -> String {
    if s.chars().count() <= n {
        s.to_string()
    } else {
        let keep: String = s
            .chars()
            .rev()
            .take(n.saturating_sub(3))
            .collect::<Vec<_>>()
            .into_iter()
            .rev()
            .collect();
        format!("...{keep}")
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn wrapping_keeps_to_80_columns() {
        let mut out = String::new();
        let text = "word ".repeat(60);
        wrap_into(&mut out, &text, "  - ", "    ");
        assert!(out.lines().all(|l| l.chars().count() <= WIDTH));
        assert!(out.lines().count() > 3);
    }

    #[test]
    fn clipping_keeps_the_end() {
        assert_eq!(clip("abcdef", 5), "...ef");
        assert_eq!(clip("abc", 5), "abc");
    }
}
