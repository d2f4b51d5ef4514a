//! Writes the survey fixtures: twelve ambient sweeps of the synthetic day, two hours apart.
//!
//!     cargo run --release --example make_survey_fixtures
//!
//! Look at: `fixtures/survey/ambient-HHMM.csv`, each with its `# time = ...`; then
//! `cargo run --release -- survey fixtures/survey/ --limit cispr32-b-av`. Rerun only on purpose
//! (`tests/survey.rs` scores these files against the day's truth, the CLI tests and the README
//! read them) and review the diff.

use spurhound::scan::write_scan_csv;
use spurhound::synth::day::{DayOptions, synthetic_day};

fn main() -> Result<(), Box<dyn std::error::Error>> {
    let dir = std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("fixtures/survey");
    std::fs::create_dir_all(&dir)?;
    let day = synthetic_day(&DayOptions::fixture())?;
    for (scan, time) in day.render()?.iter().zip(&day.times) {
        // 2031-05-14T06:00:00 -> ambient-0600.csv
        let hhmm: String = time[11..16].chars().filter(|c| *c != ':').collect();
        let path = dir.join(format!("ambient-{hhmm}.csv"));
        std::fs::write(&path, write_scan_csv(scan, &Default::default()))?;
        println!("{}", path.display());
    }
    Ok(())
}
