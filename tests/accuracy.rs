//! The accuracy harness: random synthetic cases with known truth (`synth::random`) run through
//! the file round trip and `analyze`.
//!
//!     cargo test --test accuracy
//!     cargo test --release --test accuracy -- --ignored    # the accuracy targets
//!
//! `accuracy_targets_on_40_cases` holds the attribution engine to the targets in
//! `synth::random::targets`. It is ignored by default (CI runs ignored tests in release) and,
//! while `analyze` reports no families at all, it prints a note and asserts nothing but the
//! absence of crashes: it WILL fail once families appear and miss the targets.

use spurhound::analyze;
use spurhound::synth::random::{
    CaseOptions, Totals, line_tolerance, random_case, score_case, score_failed,
};
use spurhound::synth::render;
use std::panic::{AssertUnwindSafe, catch_unwind};

fn options(seed: u64, max_points: Option<usize>) -> CaseOptions {
    CaseOptions {
        conducted: seed % 3 != 2,
        zoom: None,
        max_points,
    }
}

/// Runs cases `seeds` and returns their totals; panics inside reading or analysis are
/// counted as crashes, not propagated.
fn run(seeds: std::ops::Range<u64>, max_points: Option<usize>) -> Totals {
    let mut totals = Totals::default();
    for seed in seeds {
        let case = random_case(seed, &options(seed, max_points)).unwrap();
        let ctx = case.context(case.ambient_scans().unwrap()).unwrap();
        let outcome = catch_unwind(AssertUnwindSafe(|| {
            let dut = case.dut_scan()?;
            analyze(&dut, &ctx)
        }));
        let score = match outcome {
            Ok(Ok(analysis)) => score_case(&case, &analysis),
            Ok(Err(e)) => {
                // a typed error is allowed here; it counts against the rates
                eprintln!("seed {seed}: analyze error: {e}");
                totals.errors += 1;
                score_failed(&case)
            }
            Err(_) => {
                totals.crashes += 1;
                score_failed(&case)
            }
        };
        totals.add(&score);
    }
    totals
}

#[test]
fn harness_runs_without_crash() {
    let totals = run(1..4, Some(1001));
    let s = totals.summary();
    assert_eq!(s.cases, 3);
    assert_eq!(s.crashes, 0, "{s:?}");
}

/// Highest reading of `scan` within `tol` of `freq_hz`.
fn max_near(scan: &spurhound::Scan, freq_hz: f64, tol: f64) -> f64 {
    scan.freq_hz
        .iter()
        .zip(scan.level_dbuv.iter())
        .filter(|(f, _)| (**f - freq_hz).abs() <= tol)
        .map(|(_, x)| *x)
        .fold(f64::NEG_INFINITY, f64::max)
}

/// The truth is what the trace shows: every line 20 dB over the floor of a resolved, undithered comb reads at
/// least its declared level less 1.5 dB within `line_tolerance` of it, wherever the scene
/// without that source reads at least 20 dB lower there (elsewhere other sources add with a
/// random phase and may cancel part of the line). Source of the levels: the scene's declared
/// sources (trapezoid spectrum, coupling, in-RBW comb sum).
#[test]
fn truth_lines_show_in_the_rendered_trace() {
    let mut checked = 0;
    for seed in seeds() {
        let case = random_case(seed, &options(seed, Some(2001))).unwrap();
        let scan = render(&case.dut).unwrap();
        let s = &case.dut.scan;
        for t in case.truth.iter().filter(|t| t.in_dut && t.resolved) {
            // carriers fade from sweep to sweep, and dithered power is rendered noise-like
            // (its reading scatters about the declared rms by many dB): coherent combs only
            if t.kind == spurhound::analysis::Kind::Broadcast || t.spread_pct > 0.0 {
                continue;
            }
            let mut without = case.dut.clone();
            let name = Some(t.label.clone());
            without.switching.retain(|p| p.name != name);
            without.clock.retain(|p| p.name != name);
            let rest = render(&without).unwrap();
            // 20 dB over the floor: noise adding at a random phase then moves a line < 1 dB
            for l in t
                .lines
                .iter()
                .filter(|l| l.level_dbuv >= l.floor_dbuv + 20.0)
            {
                let tol = line_tolerance(s, t, l);
                if max_near(&rest, l.freq_hz, tol) > l.level_dbuv - 20.0 {
                    continue;
                }
                checked += 1;
                let seen = max_near(&scan, l.freq_hz, tol);
                assert!(
                    seen >= l.level_dbuv - 1.5,
                    "seed {seed} {}: harmonic {} at {} Hz declared {:.1}, trace {:.1}",
                    t.label,
                    l.harmonic,
                    l.freq_hz,
                    l.level_dbuv,
                    seen
                );
            }
        }
    }
    assert!(checked > 50, "only {checked} lines checked");
}

/// Accuracy targets of the attribution engine on 40 cases (release; `--ignored`).
#[test]
#[ignore = "accuracy targets: run in release with --ignored"]
fn accuracy_targets_on_40_cases() {
    let totals = run(1..41, None);
    let s = totals.summary();
    println!("{}", serde_json::to_string(&s).unwrap());
    assert_eq!(s.crashes, 0, "{s:?}");
    if s.cases_with_families == 0 {
        println!(
            "note: analyze reported no families in any case (attribution not in yet); targets not asserted"
        );
        return;
    }
    let missed = s.missed_targets();
    assert!(missed.is_empty(), "targets missed: {missed:?}\n{s:?}");
}

/// Seeds of the truth check: 1-6, or `SPURHOUND_TRUTH_SEEDS=N` for seeds 1..=N.
fn seeds() -> std::ops::RangeInclusive<u64> {
    let n = std::env::var("SPURHOUND_TRUTH_SEEDS")
        .ok()
        .and_then(|v| v.parse().ok())
        .unwrap_or(6);
    1..=n
}
