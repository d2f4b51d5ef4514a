//! The ambient survey on a synthetic day of 100 sweeps, through files, scored against the truth.
//!
//!     cargo run --release --example survey_day [SWEEPS] [SEED]
//!
//! Writes the day's sweeps (6635 points, 150 kHz to 30 MHz, 9 kHz RBW, one every 14.4 minutes)
//! as CSV into a temporary folder, reads them back as the CLI does, runs the survey against
//! CISPR 32 Class B average and prints the report and the score: emitters found with the right
//! class and kind, the headroom error against the truth in dB, the quietest time, the run time.
//! Look at: "score" at the end; every figure should be right and the headroom error under 1 dB.

use spurhound::report::survey::{SurveyFormat, render_survey};
use spurhound::scan::{ReadOptions, read_scan_file, write_scan_csv};
use spurhound::survey::{SurveyParams, survey};
use spurhound::synth::day::{DayOptions, synthetic_day};
use std::time::Instant;

fn main() -> Result<(), Box<dyn std::error::Error>> {
    let mut args = std::env::args().skip(1);
    let sweeps = args.next().map_or(Ok(100), |a| a.parse())?;
    let seed = args.next().map_or(Ok(1), |a| a.parse())?;
    let day = synthetic_day(&DayOptions {
        sweeps,
        seed,
        ..DayOptions::default()
    })?;
    let dir = std::env::temp_dir().join(format!("spurhound-day-{}", std::process::id()));
    std::fs::create_dir_all(&dir)?;
    let t = Instant::now();
    let rendered = day.render()?;
    for (k, scan) in rendered.iter().enumerate() {
        let path = dir.join(format!("sweep-{k:03}.csv"));
        std::fs::write(&path, write_scan_csv(scan, &Default::default()))?;
    }
    let render_s = t.elapsed().as_secs_f64();
    let t = Instant::now();
    let mut files: Vec<_> = std::fs::read_dir(&dir)?
        .filter_map(Result::ok)
        .map(|e| e.path())
        .collect();
    files.sort();
    let scans = files
        .iter()
        .map(|p| read_scan_file(p, &ReadOptions::default()).map(|r| r.scan))
        .collect::<Result<Vec<_>, _>>()?;
    let read_s = t.elapsed().as_secs_f64();
    let limit = day.limit()?;
    let t = Instant::now();
    let s = survey(&scans, &SurveyParams::default(), Some(&limit))?;
    let survey_s = t.elapsed().as_secs_f64();
    print!("{}", render_survey(&s, SurveyFormat::Text)?);
    let score = day.score(&s);
    println!(
        "\nscore ({} sweeps, seed {seed}, {} in {})",
        sweeps,
        limit.name,
        dir.display()
    );
    println!(
        "  emitters found {}/{}, class right {}, kind right {}, extra {}",
        score.found,
        score.truth,
        score.class_right,
        score.kind_right,
        score.extra.len()
    );
    for line in score.missed.iter().chain(&score.wrong).chain(&score.extra) {
        println!("    {line}");
    }
    for b in &score.headroom {
        println!(
            "  headroom {:>9.0} to {:>9.0} Hz: measured {:.4}, truth {:.4}, error {:.2} dB",
            b.start_hz, b.stop_hz, b.measured, b.truth, b.error_db
        );
    }
    println!(
        "  95th percentile near the headroom line: median error {:.2} dB",
        score.p95_error_db
    );
    println!(
        "  quietest sweep truly quietest: {:?}",
        score.quietest_right
    );
    println!(
        "  time: render and write {render_s:.2} s, read {read_s:.2} s, survey {survey_s:.2} s"
    );
    println!("  all right: {}", score.all_right(1.0));
    std::fs::remove_dir_all(&dir).ok();
    Ok(())
}
