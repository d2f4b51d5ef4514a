//! Inspect one random accuracy case: its truth, what the analysis reported, and why lines were
//! missed.
//!
//!     cargo run --release --example inspect_case -- SEED
//!
//! Look at: missed truth lines with the trace level and detection threshold at their frequency.

use spurhound::synth::random::{CaseOptions, random_case};

fn main() -> Result<(), Box<dyn std::error::Error>> {
    let seed: u64 = std::env::args()
        .nth(1)
        .and_then(|s| s.parse().ok())
        .unwrap_or(1);
    let case = random_case(seed, &CaseOptions::harness(seed))?;
    let scan = case.dut_scan()?;
    let ctx = case.context(case.ambient_scans()?)?;
    let a = spurhound::analyze(&scan, &ctx)?;
    let floor = spurhound::floor::estimate_floor(&a.scan, &Default::default());
    println!(
        "case {seed} {:?} points {} rbw {:?} floor M {:.2} spread {:.1}",
        case.scenario,
        scan.len(),
        scan.meta.rbw_hz,
        floor.samples_per_point,
        floor.spread_db
    );
    for t in &case.truth {
        println!(
            "TRUTH {:<40} f0 {:>12.1} {:?}/{:?} eligible {} vis {} worst {:?} spread {:.2} %",
            t.label,
            t.f0_hz,
            t.kind,
            t.origin,
            t.eligible(),
            t.harmonics_visible.len(),
            t.worst_margin_db.map(|m| (m * 10.0).round() / 10.0),
            t.spread_pct
        );
        if !t.eligible() {
            continue;
        }
        let mut shown = 0;
        for l in &t.lines {
            if l.level_dbuv < l.floor_dbuv + 10.0 {
                continue;
            }
            let found = a.peaks.iter().any(|p| {
                (p.freq_hz - l.freq_hz).abs() < 6e3f64.max(scan.meta.rbw_hz.unwrap_or(9e3) / 2.0)
            });
            if !found && shown < 6 {
                shown += 1;
                let i = a
                    .scan
                    .freq_hz
                    .iter()
                    .position(|&f| f >= l.freq_hz)
                    .unwrap_or(0);
                let near = a.peaks.iter().min_by(|x, y| {
                    (x.freq_hz - l.freq_hz)
                        .abs()
                        .total_cmp(&(y.freq_hz - l.freq_hz).abs())
                });
                println!(
                    "   missed n={} {:.0} decl {:.1} floor {:.1} | trace {:.1} thr {:.1} | nearest peak {:?}",
                    l.harmonic,
                    l.freq_hz,
                    l.level_dbuv,
                    l.floor_dbuv,
                    a.scan.level_dbuv[i],
                    floor.threshold_dbuv[i],
                    near.map(|p| (
                        p.freq_hz.round(),
                        (p.level_dbuv * 10.0).round() / 10.0,
                        p.family
                    ))
                );
            }
        }
    }
    for f in &a.families {
        println!(
            "REPORT #{} rank {} {:?} {:?} f0 {:.1} ± {:.1} n {} [{}..{}] miss {} worst {:?}",
            f.id,
            f.rank,
            f.kind,
            f.origin,
            f.fundamental_hz,
            f.fundamental_sigma_hz,
            f.harmonics.len(),
            f.harmonics.first().unwrap_or(&0),
            f.harmonics.last().unwrap_or(&0),
            f.misses,
            f.worst_margin_db.map(|m| (m * 10.0).round() / 10.0)
        );
    }
    println!("peaks {} humps {}", a.peaks.len(), a.humps.len());
    // PEAKS=lo:hi (Hz) lists the peaks in that range with their family and harmonic number
    if let Some((lo, hi)) = range_var("PEAKS") {
        for p in a.peaks.iter().filter(|p| (lo..=hi).contains(&p.freq_hz)) {
            println!(
                "   peak {:>14.0} {:>7.1} dBuV width {:>9.0} sig {:>5.1} margin {:>6} family {:?} n {:?}",
                p.freq_hz,
                p.level_dbuv,
                p.width_hz,
                p.significance_db,
                p.limit_dbuv
                    .map_or("-".to_string(), |l| format!("{:.1}", l - p.level_dbuv)),
                p.family,
                p.harmonic
            );
        }
    }
    if std::env::var("HUMPS").is_ok() {
        for h in &a.humps {
            println!(
                "   hump {:>12.0}..{:<12.0} top {:>12.0} {:>6.1} dBuV over floor {:>5.1} family {:?} {:?}",
                h.start_hz,
                h.stop_hz,
                h.freq_hz,
                h.level_dbuv,
                h.over_floor_db,
                h.family,
                h.seen_as
            );
        }
    }
    // DUMP=lo:hi (Hz) prints the trace, floor and threshold of the points in that range
    if let Some((lo, hi)) = range_var("DUMP") {
        for (i, &f) in a.scan.freq_hz.iter().enumerate() {
            if (lo..=hi).contains(&f) {
                println!(
                    "   {f:>14.0} {:>7.1} floor {:>6.1} thr {:>6.1}",
                    a.scan.level_dbuv[i], floor.floor_dbuv[i], floor.threshold_dbuv[i]
                );
            }
        }
    }
    let worst = case
        .truth
        .iter()
        .filter(|t| {
            t.eligible()
                && t.origin == spurhound::analysis::Origin::Dut
                && t.worst_margin_db.is_some_and(|m| m < 0.0)
        })
        .min_by(|x, y| {
            x.worst_margin_db
                .unwrap_or(0.0)
                .total_cmp(&y.worst_margin_db.unwrap_or(0.0))
        });
    if let Some(w) = worst {
        let found = a
            .families
            .iter()
            .find(|f| w.rel_error(f.fundamental_hz) < 0.005);
        let first = a.families.iter().find(|f| f.rank == 1);
        println!(
            "TOP1 truth {} ({:?}) found {:?} rank-1 {:?}",
            w.label,
            w.worst_margin_db,
            found.map(|f| (f.rank, f.worst_margin_db)),
            first.map(|f| (f.fundamental_hz.round(), f.worst_margin_db, f.origin))
        );
    }
    Ok(())
}

/// A frequency range `lo:hi` (Hz) from the environment variable `name`.
fn range_var(name: &str) -> Option<(f64, f64)> {
    let v = std::env::var(name).ok()?;
    let (lo, hi) = v.split_once(':')?;
    Some((lo.parse().ok()?, hi.parse().ok()?))
}
