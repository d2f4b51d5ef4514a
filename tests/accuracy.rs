//! The accuracy harness: random synthetic cases with known truth (`synth::random`) run through
//! the file round trip and `analyze`.
//!
//!     cargo test --test accuracy
//!     cargo test --release --test accuracy -- --ignored    # the accuracy targets
//!
//! `accuracy_targets_on_40_cases` is ignored by default (CI runs ignored tests in release). It
//! asserts no crash, prints the targets of `synth::random::targets` still missed, and guards the
//! levels the engine has reached against regressions; with `SPURHOUND_TARGETS=1` it asserts the
//! targets themselves.

use spurhound::analyze;
use spurhound::synth::random::{
    CaseOptions, Levels, Totals, line_tolerance, random_case, score_case, score_failed,
};
use spurhound::synth::render;
use std::panic::{AssertUnwindSafe, catch_unwind};

/// The harness's mix ([`CaseOptions::harness`]), with an optional cap on the points.
fn options(seed: u64, max_points: Option<usize>) -> CaseOptions {
    CaseOptions {
        max_points,
        ..CaseOptions::harness(seed)
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
/// Levels the engine reached on these 40 cases when this guard was set (release build): a
/// change that falls below them is a regression. They are not the targets. Set on 2026-12-02
/// at recall 0.67, precision 0.79, top-1 0.71 (40 cases); the precision of these 40 fell from
/// 0.88 with the narrower floor window while that of the 200-case sets rose or held (0.85 to
/// 0.84, 0.80 to 0.82, 0.80 to 0.82), so a 40-case precision moves by several hundredths.
const TODAY: Levels = Levels {
    recall: 0.62,
    precision: 0.75,
    median_f0_rel_error: spurhound::synth::random::targets::MEDIAN_F0_REL_ERROR,
    origin: 0.9,
    kind: 0.9,
    top1: 0.65,
};

#[test]
#[ignore = "accuracy on 40 cases: run in release with --ignored"]
fn accuracy_targets_on_40_cases() {
    let totals = run(1..41, None);
    let s = totals.summary();
    println!("{}", serde_json::to_string(&s).unwrap());
    assert_eq!(s.crashes, 0, "{s:?}");
    let missed = s.missed_targets();
    println!("targets still missed: {missed:?}");
    if std::env::var_os("SPURHOUND_TARGETS").is_some() {
        assert!(missed.is_empty(), "targets missed: {missed:?}\n{s:?}");
        return;
    }
    // until the engine meets the targets, CI guards against regressions below today's levels
    let regressions = s.shortfalls(&TODAY);
    assert!(
        regressions.is_empty(),
        "fell below today's levels: {regressions:?}\n{s:?}"
    );
}

/// Seeds of the truth check: 1-6, or `SPURHOUND_TRUTH_SEEDS=N` for seeds 1..=N.
fn seeds() -> std::ops::RangeInclusive<u64> {
    let n = std::env::var("SPURHOUND_TRUTH_SEEDS")
        .ok()
        .and_then(|v| v.parse().ok())
        .unwrap_or(6);
    1..=n
}

/// The scoring itself: an oracle analysis that reports every eligible truth family exactly
/// (f0, kind, origin, ranked by worst margin) scores 1 on every family rate; the same report
/// at half the fundamental (a sub-multiple error) matches nothing.
#[test]
fn oracle_report_scores_perfectly_and_submultiples_do_not_match() {
    use spurhound::analysis::Family;
    let mut exact = Totals::default();
    let mut halved = Totals::default();
    for seed in 1..13u64 {
        let case = random_case(seed, &options(seed, Some(1001))).unwrap();
        let dut = case.dut_scan().unwrap();
        let ctx = case.context(case.ambient_scans().unwrap()).unwrap();
        let mut analysis = analyze(&dut, &ctx).unwrap();
        let mut truth: Vec<_> = case.truth.iter().filter(|t| t.eligible()).collect();
        // rank 1 = the DUT family that fails worst
        let key = |t: &&spurhound::synth::random::TruthFamily| match t.origin {
            spurhound::analysis::Origin::Dut => t.worst_margin_db.unwrap_or(f64::INFINITY),
            _ => f64::INFINITY,
        };
        truth.sort_by(|a, b| key(a).total_cmp(&key(b)));
        let families = |scale: f64| -> Vec<Family> {
            truth
                .iter()
                .enumerate()
                .map(|(i, t)| Family {
                    id: i,
                    fundamental_hz: t.f0_hz * scale,
                    fundamental_sigma_hz: 0.0,
                    harmonics: t.harmonics_visible.clone(),
                    kind: t.kind,
                    origin: t.origin,
                    worst_margin_db: t.worst_margin_db,
                    rank: i + 1,
                    remedies: Vec::new(),
                    ..Family::default()
                })
                .collect()
        };
        analysis.families = families(1.0);
        exact.add(&score_case(&case, &analysis));
        analysis.families = families(0.5);
        halved.add(&score_case(&case, &analysis));
    }
    let s = exact.summary();
    assert!(s.eligible_families > 10 && s.top1_cases > 3, "{s:?}");
    assert_eq!(s.family_recall, Some(1.0), "{s:?}");
    assert_eq!(s.family_precision, Some(1.0), "{s:?}");
    assert_eq!(s.median_f0_rel_error, Some(0.0), "{s:?}");
    assert_eq!((s.origin_accuracy, s.kind_accuracy), (Some(1.0), Some(1.0)));
    assert_eq!(s.top1_rate, Some(1.0), "{s:?}");
    assert!(s.missed_targets().is_empty(), "{:?}", s.missed_targets());
    let h = halved.summary();
    assert_eq!(h.family_recall, Some(0.0), "{h:?}");
    assert_eq!(h.family_precision, Some(0.0), "{h:?}");
    assert_eq!(h.top1_rate, Some(0.0), "{h:?}");
}
