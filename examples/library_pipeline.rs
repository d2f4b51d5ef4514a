//! The library without the command line: read a scan, add a transducer, judge it against two
//! built-in limits and print the verdict.
//!
//!     cargo run --example library_pipeline
//!
//! Look at: the worst margin per limit, and the warnings the set-up checks raise.

use spurhound::correct::{Transducer, TransducerChain};
use spurhound::scan::{ReadOptions, read_scan_file};
use spurhound::{Context, analyze, limits};
use std::path::Path;

fn main() -> Result<(), Box<dyn std::error::Error>> {
    let root = Path::new(env!("CARGO_MANIFEST_DIR"));
    let scan = read_scan_file(
        &root.join("fixtures/scans/small-fail.csv"),
        &ReadOptions::default(),
    )?
    .scan;
    let limiter = Transducer::read_file(&root.join("fixtures/transducers/limiter-10db.csv"))?;
    let ctx = Context {
        limits: vec![
            limits::resolve("cispr32-b-qp")?,
            limits::resolve("cispr32-b-av")?,
        ],
        transducers: TransducerChain {
            items: vec![limiter],
        },
        ..Context::default()
    };
    let analysis = analyze(&scan, &ctx)?;
    for r in &analysis.limits {
        if let Some(w) = r.margins.worst {
            println!(
                "{:<14} worst margin {:+6.1} dB at {:>9.0} Hz",
                r.limit.name, w.margin_db, w.freq_hz
            );
        }
    }
    println!("pass: {:?}", analysis.verdict.pass);
    for w in &analysis.warnings {
        println!("check [{}]: {}", w.code, w.message);
    }
    Ok(())
}
