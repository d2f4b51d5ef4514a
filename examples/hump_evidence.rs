//! How often the board's trace is found standing over the ambient's receiver floor
//! (`HumpBasis::OverAmbientFloor` humps), by what the case's truth holds.
//!
//!     cargo run --release --example hump_evidence -- [N=200]
//!
//! Look at the three counts at the end: cases with an unresolved comb of the board (where
//! such a hump belongs), cases whose only broadband source is a dithered converter (its
//! harmonics may merge into a continuum, also a true broadband emission), and the rest (where
//! a hump is a false alarm). Each false alarm is listed with its regions.

use spurhound::analysis::Origin;
use spurhound::bandwidth::HumpBasis;
use spurhound::synth::random::{CaseOptions, random_case};

fn main() -> Result<(), Box<dyn std::error::Error>> {
    let n: u64 = std::env::args()
        .nth(1)
        .and_then(|s| s.parse().ok())
        .unwrap_or(200);
    // (cases, cases with such a hump) for: unresolved comb, dithered only, neither
    let mut counts = [(0usize, 0usize); 3];
    for seed in 1..=n {
        let case = random_case(seed, &CaseOptions::harness(seed))?;
        let scan = case.dut_scan()?;
        let ctx = case.context(case.ambient_scans()?)?;
        let a = spurhound::analyze(&scan, &ctx)?;
        let raised: Vec<(f64, f64, f64)> = a
            .humps
            .iter()
            .filter(|h| h.seen_as == HumpBasis::OverAmbientFloor)
            .map(|h| (h.start_hz, h.stop_hz, h.over_floor_db))
            .collect();
        let board =
            |t: &&spurhound::synth::random::TruthFamily| t.in_dut && t.origin == Origin::Dut;
        let class = if case.truth.iter().filter(board).any(|t| !t.resolved) {
            0
        } else if case.truth.iter().filter(board).any(|t| t.spread_pct > 0.0) {
            1
        } else {
            2
        };
        counts[class].0 += 1;
        counts[class].1 += usize::from(!raised.is_empty());
        if class == 2 && !raised.is_empty() {
            println!("seed {seed}: over the ambient floor (start, stop, dB): {raised:.0?}");
        }
    }
    let [comb, dither, other] = counts;
    println!(
        "unresolved comb of the board: {} of {} cases",
        comb.1, comb.0
    );
    println!(
        "dithered converter only:      {} of {} cases",
        dither.1, dither.0
    );
    println!(
        "neither (false alarms):       {} of {} cases",
        other.1, other.0
    );
    Ok(())
}
