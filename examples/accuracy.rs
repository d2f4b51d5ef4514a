//! Accuracy of the attribution engine on random synthetic cases with known truth.
//!
//!     cargo run --release --example accuracy -- [N=200] [--seed S=1] [--verbose] [--max-points P]
//!
//! Each case (see `spurhound::synth::random`) is rendered, the DUT scan goes through a CSV file
//! of the case's form and back, and `analyze` runs with the case's limit and ambient sweeps
//! (panics caught and counted apart from errors). Look at: the table of rates per scenario,
//! the misses listed with their seeds (rerun one with `-- 1 --seed S --verbose`) and the JSON
//! line at the end, which is what a CI job or a plot reads.

use spurhound::analyze;
use spurhound::synth::random::{
    CaseOptions, CaseScore, Scenario, Summary, Totals, random_case, score_case, score_failed,
};
use std::panic::{AssertUnwindSafe, catch_unwind};
use std::time::Instant;

struct Args {
    n: u64,
    seed: u64,
    verbose: bool,
    max_points: Option<usize>,
}

fn args() -> Args {
    let mut a = Args {
        n: 200,
        seed: 1,
        verbose: false,
        max_points: None,
    };
    let mut it = std::env::args().skip(1);
    while let Some(x) = it.next() {
        let ok = match x.as_str() {
            "--seed" => it.next().and_then(|v| v.parse().ok()).map(|v| a.seed = v),
            "--verbose" | "-v" => {
                a.verbose = true;
                Some(())
            }
            "--max-points" => it
                .next()
                .and_then(|v| v.parse().ok())
                .map(|v| a.max_points = Some(v)),
            other => other.parse().ok().map(|v| a.n = v),
        };
        if ok.is_none() {
            eprintln!("unexpected argument {x:?}\n{USAGE}");
            std::process::exit(2);
        }
    }
    a
}

const USAGE: &str = "usage: cargo run --release --example accuracy -- [N=200] [--seed S=1] [--verbose] [--max-points P]";

/// The harness's mix ([`CaseOptions::harness`]), with an optional cap on the points.
fn options(seed: u64, max_points: Option<usize>) -> CaseOptions {
    CaseOptions {
        max_points,
        ..CaseOptions::harness(seed)
    }
}

enum Outcome {
    Scored(CaseScore),
    Error(String),
    Crash,
}

fn main() {
    let a = args();
    let mut all = Totals::default();
    let mut by: Vec<(Scenario, Totals)> = Scenario::ALL
        .iter()
        .map(|s| (*s, Totals::default()))
        .collect();
    let mut notes: Vec<String> = Vec::new();
    // (kind/origin key, eligible, matched)
    let mut mix: Vec<(String, usize, usize)> = Vec::new();
    let started = Instant::now();
    for seed in a.seed..a.seed + a.n {
        let t0 = Instant::now();
        let case = match random_case(seed, &options(seed, a.max_points)) {
            Ok(c) => c,
            Err(e) => {
                all.harness_errors += 1;
                notes.push(format!("seed {seed}: harness: {e}"));
                continue;
            }
        };
        let keys: Vec<String> = case
            .truth
            .iter()
            .map(|t| {
                format!(
                    "{:?}/{:?}{}{}",
                    t.kind,
                    t.origin,
                    if t.intermittent { " intermittent" } else { "" },
                    if t.spread_pct > 0.0 { " dithered" } else { "" }
                )
            })
            .collect();
        let ambient = match case.ambient_scans() {
            Ok(x) => x,
            Err(e) => {
                all.harness_errors += 1;
                notes.push(format!("seed {seed}: ambient render: {e}"));
                continue;
            }
        };
        let ctx = case.context(ambient).expect("built-in limit");
        let mut analyze_s = 0.0;
        let run = catch_unwind(AssertUnwindSafe(|| {
            let dut = case.dut_scan()?;
            let t = Instant::now();
            let r = analyze(&dut, &ctx);
            analyze_s = t.elapsed().as_secs_f64();
            r
        }));
        let outcome = match run {
            Ok(Ok(analysis)) => Outcome::Scored(score_case(&case, &analysis)),
            Ok(Err(e)) => Outcome::Error(e.to_string()),
            Err(_) => Outcome::Crash,
        };
        let secs = t0.elapsed().as_secs_f64();
        let score = match &outcome {
            Outcome::Scored(s) => s.clone(),
            _ => score_failed(&case),
        };
        for &(ti, hit) in &score.eligible_hits {
            let key = &keys[ti];
            match mix.iter_mut().find(|(k, _, _)| k == key) {
                Some((_, n, h)) => {
                    *n += 1;
                    *h += usize::from(hit);
                }
                None => mix.push((key.clone(), 1, usize::from(hit))),
            }
        }
        let slot = by
            .iter_mut()
            .find(|(s, _)| *s == case.scenario)
            .map(|(_, t)| t);
        for t in std::iter::once(&mut all).chain(slot) {
            match &outcome {
                Outcome::Error(_) => t.errors += 1,
                Outcome::Crash => t.crashes += 1,
                Outcome::Scored(_) => {}
            }
            t.add(&score);
            t.seconds += secs;
            t.analyze_seconds += analyze_s;
        }
        match &outcome {
            Outcome::Error(e) => notes.push(format!("seed {seed}: error: {e}")),
            Outcome::Crash => notes.push(format!("seed {seed}: CRASH")),
            Outcome::Scored(_) => {}
        }
        if a.verbose {
            print_case(&case, &score, secs);
        }
        if !score.missed.is_empty() && score.any_family {
            notes.push(format!("seed {seed}: missed {}", score.missed.join(", ")));
        }
        if !score.spurious_hz.is_empty() {
            let f: Vec<String> = score
                .spurious_hz
                .iter()
                .map(|f| format!("{f:.1} Hz"))
                .collect();
            notes.push(format!("seed {seed}: spurious {}", f.join(", ")));
        }
    }
    let wall = started.elapsed().as_secs_f64();
    let summaries: Vec<(&str, Summary)> = std::iter::once(("all", all.summary()))
        .chain(by.iter().map(|(s, t)| (s.name(), t.summary())))
        .collect();
    print_table(&summaries);
    mix.sort();
    println!("\nrecall by kind/origin (matched/eligible):");
    for (k, n, h) in &mix {
        println!(
            "  {k:<36} {h:>4}/{n:<4} {:.2}",
            *h as f64 / (*n).max(1) as f64
        );
    }
    if all.cases_with_families == 0 {
        println!(
            "\nnote: no case reported any family; the attribution stages are not in analyze yet, so the family rates are 0 by construction."
        );
    }
    let shown = std::env::var("SPURHOUND_NOTES")
        .ok()
        .and_then(|v| v.parse().ok())
        .unwrap_or(30);
    if !notes.is_empty() {
        println!("\n{} notes (first {shown}):", notes.len());
        for n in notes.iter().take(shown) {
            println!("  {n}");
        }
    }
    println!("\nwall time {wall:.2} s for {} cases", a.n);
    let json: serde_json::Map<String, serde_json::Value> = summaries
        .iter()
        .map(|(k, s)| (k.to_string(), serde_json::to_value(s).expect("summary")))
        .collect();
    println!("{}", serde_json::Value::Object(json));
}

fn print_case(case: &spurhound::synth::random::Case, score: &CaseScore, secs: f64) {
    let s = &case.dut.scan;
    println!(
        "seed {} {} {:.0}-{:.0} kHz {} pts {:?} {:?} limit {} form {:?}/{:?} {:.3} s",
        case.seed,
        case.scenario.name(),
        s.start_hz / 1e3,
        s.stop_hz / 1e3,
        s.points,
        s.spacing,
        s.detector,
        case.limit_name,
        case.form.freq_unit,
        case.form.level_unit,
        secs
    );
    for t in &case.truth {
        println!(
            "  {:<34} f0 {:>14.3} Hz {:?}/{:?} visible {:>5} resolved {:<5} eligible {:<5} worst {:>7} spread {:.1} % {}{}",
            t.label,
            t.f0_hz,
            t.kind,
            t.origin,
            t.harmonics_visible.len(),
            t.resolved,
            t.eligible(),
            t.worst_margin_db
                .map_or("-".to_string(), |m| format!("{m:.1}")),
            t.spread_pct,
            if t.intermittent { "intermittent " } else { "" },
            if t.in_dut { "" } else { "(ambient only)" },
        );
    }
    println!(
        "  recalled {}/{}  precision {}/{}  lines {}/{}",
        score.recalled,
        score.eligible,
        score.reported_matched,
        score.reported,
        score.lines_found,
        score.lines
    );
}

fn rate(v: Option<f64>) -> String {
    v.map_or("n/a".to_string(), |x| format!("{x:.3}"))
}

fn print_table(rows: &[(&str, Summary)]) {
    print!("{:<34}", "metric");
    for (k, _) in rows {
        print!("{k:>16}");
    }
    println!();
    type Cell = fn(&Summary) -> String;
    let lines: [(&str, Cell); 20] = [
        ("cases", |s| s.cases.to_string()),
        ("crashes", |s| s.crashes.to_string()),
        ("errors", |s| s.errors.to_string()),
        ("harness errors", |s| s.harness_errors.to_string()),
        ("cases with families", |s| s.cases_with_families.to_string()),
        ("family recall", |s| rate(s.family_recall)),
        ("  eligible truth families", |s| {
            s.eligible_families.to_string()
        }),
        ("family recall (10 dB lines)", |s| {
            rate(s.family_recall_strong)
        }),
        ("family precision", |s| rate(s.family_precision)),
        ("  reported families (>=3 harm.)", |s| {
            s.reported_families.to_string()
        }),
        ("median f0 error (%)", |s| {
            s.median_f0_rel_error
                .map_or("n/a".to_string(), |e| format!("{:.4}", e * 100.0))
        }),
        ("origin accuracy", |s| rate(s.origin_accuracy)),
        ("kind accuracy", |s| rate(s.kind_accuracy)),
        ("  matched pairs", |s| s.matched_families.to_string()),
        ("top-1 culprit rate", |s| rate(s.top1_rate)),
        ("  cases with a failing DUT family", |s| {
            s.top1_cases.to_string()
        }),
        ("peak recall", |s| rate(s.peak_recall)),
        ("  truth lines (>=10 dB)", |s| s.truth_lines.to_string()),
        ("hump detection", |s| {
            format!("{} ({} combs)", rate(s.hump_detection), s.unresolved_combs)
        }),
        ("time per case (ms) / analyze", |s| {
            format!(
                "{:.1}/{:.1}",
                s.seconds_per_case * 1e3,
                s.analyze_seconds_per_case * 1e3
            )
        }),
    ];
    for (name, f) in lines {
        print!("{name:<34}");
        for (_, s) in rows {
            print!("{:>16}", f(s));
        }
        println!();
    }
}
