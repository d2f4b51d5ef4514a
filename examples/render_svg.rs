//! Draw a scan, an ambient scan and a limit as an SVG plot.
//!
//!     cargo run --example render_svg -- /tmp/plot.svg
//!
//! Look at: the log-frequency axis, the limit's step at 5 MHz and the circled worst point.

use spurhound::scan::{ReadOptions, Role, read_scan_file};
use spurhound::{Context, analyze, limits, report};
use std::path::Path;

fn main() -> Result<(), Box<dyn std::error::Error>> {
    let out = std::env::args()
        .nth(1)
        .unwrap_or_else(|| "plot.svg".to_string());
    let root = Path::new(env!("CARGO_MANIFEST_DIR"));
    let dut = read_scan_file(
        &root.join("fixtures/scans/small-fail.csv"),
        &ReadOptions::default(),
    )?
    .scan;
    let ambient_opts = ReadOptions {
        role: Some(Role::Ambient),
        ..ReadOptions::default()
    };
    let ambient = read_scan_file(&root.join("fixtures/scans/small-pass.csv"), &ambient_opts)?.scan;
    let ctx = Context {
        limits: vec![limits::resolve("cispr32-b-qp")?],
        ambient: vec![ambient],
        ..Context::default()
    };
    let analysis = analyze(&dut, &ctx)?;
    std::fs::write(&out, report::svg::render_svg(&analysis)?)?;
    println!("wrote {out}");
    Ok(())
}
