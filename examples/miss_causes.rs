//! Why families are missed: for every eligible truth family the analysis did not report, the
//! share of its visible lines that stand over the detection threshold, that became peaks and
//! that some reported family claimed.
//!
//!     cargo run --release --example miss_causes -- [N=200]
//!
//! Look at: the counts per cause at the end; a cause with many families is the next thing to
//! fix (lines under the threshold: the floor; peaks not grouped: the sieve).

use spurhound::synth::random::{CaseOptions, MATCH_REL, random_case};

fn main() -> Result<(), Box<dyn std::error::Error>> {
    let n: u64 = std::env::args()
        .nth(1)
        .and_then(|s| s.parse().ok())
        .unwrap_or(200);
    let mut causes: std::collections::BTreeMap<&str, usize> = Default::default();
    for seed in 1..=n {
        let case = random_case(seed, &CaseOptions::harness(seed))?;
        let scan = case.dut_scan()?;
        let ctx = case.context(case.ambient_scans()?)?;
        let a = spurhound::analyze(&scan, &ctx)?;
        let floor = spurhound::floor::estimate_floor(&a.scan, &Default::default());
        let tol = |f: f64| {
            6e3f64
                .max(scan.meta.rbw_hz.unwrap_or(9e3) / 2.0)
                .max(f * 1e-3)
        };
        for t in case.truth.iter().filter(|t| t.eligible()) {
            if a.families
                .iter()
                .any(|f| t.rel_error(f.fundamental_hz) < MATCH_REL)
            {
                continue;
            }
            let (mut over, mut peaked, mut claimed) = (0, 0, 0);
            for l in &t.lines {
                let i = a
                    .scan
                    .freq_hz
                    .iter()
                    .position(|&f| f >= l.freq_hz)
                    .unwrap_or(0);
                let lo = i.saturating_sub(1);
                let hi = (i + 1).min(a.scan.len() - 1);
                if (lo..=hi).any(|j| a.scan.level_dbuv[j] > floor.threshold_dbuv[j]) {
                    over += 1;
                }
                if let Some(p) = a
                    .peaks
                    .iter()
                    .find(|p| (p.freq_hz - l.freq_hz).abs() < tol(l.freq_hz))
                {
                    peaked += 1;
                    claimed += usize::from(p.family.is_some());
                }
            }
            let k = t.lines.len();
            let cause = if over < 3 {
                "under threshold"
            } else if peaked < 3 {
                "over threshold, not peaks"
            } else if claimed * 2 > peaked {
                "peaks claimed by another family"
            } else {
                "peaks not grouped"
            };
            *causes.entry(cause).or_default() += 1;
            println!(
                "seed {seed} {:?} {:<34} lines {k} over {over} peaks {peaked} claimed {claimed} -> {cause}{}",
                case.scenario,
                t.label,
                if t.spread_pct > 0.0 {
                    format!(" (dithered {:.1} %)", t.spread_pct)
                } else {
                    String::new()
                }
            );
        }
    }
    println!("{causes:#?}");
    Ok(())
}
