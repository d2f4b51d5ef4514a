//! A fix story through the library: render the three scenes of our bench-supply board (before,
//! ferrite on the mains cable, input filter added), analyse each against CISPR 32 Class B QP,
//! size remedies for the first scan's failing families, and compare each scan with the one
//! before it.
//!
//!     cargo run --release --example fix_story
//!
//! Look at: the sized remedies of scan 1 (the filter that scan 3 then adds), and each step's
//! family changes: the ferrite takes about 10 dB off the 4 MHz clock, the filter about 22 dB
//! off the 100 kHz flyback.

use spurhound::compare::{CompareParams, compare};
use spurhound::synth::{read_scene_file, render};
use spurhound::{Context, analyze, limits};
use std::path::Path;

fn main() -> Result<(), Box<dyn std::error::Error>> {
    let ctx = Context {
        limits: vec![limits::resolve("cispr32-b-qp")?],
        ..Context::default()
    };
    let mut analyses = Vec::new();
    for name in ["story-1-before", "story-2-ferrite", "story-3-filter"] {
        let scene = read_scene_file(Path::new(&format!("fixtures/scenes/{name}.toml")))?;
        let a = analyze(&render(&scene)?, &ctx)?;
        println!(
            "{name}: {} (worst margin {:+.1} dB)",
            match a.verdict.pass {
                Some(true) => "pass",
                Some(false) => "fail",
                None => "no verdict",
            },
            a.verdict.worst_margin_db.unwrap_or(f64::NAN)
        );
        analyses.push(a);
    }
    println!("\nsized remedies for scan 1:");
    for f in analyses[0].families.iter().filter(|f| f.sized.is_some()) {
        println!("  {:.1} Hz family:", f.fundamental_hz);
        for s in spurhound::attribution::plan::sized_sentences(f.sized.as_ref()) {
            println!("    - {s}");
        }
    }
    for w in analyses.windows(2) {
        let c = compare(&w[0], &w[1], &CompareParams::default());
        println!("\nstep: verdict after {:?}", c.pass);
        for f in &c.families {
            println!(
                "  {:>12.1} Hz {:?}: change {:+.1} dB ({})",
                f.fundamental_hz,
                f.kind,
                f.change_db.unwrap_or(f64::NAN),
                f.status.name()
            );
        }
    }
    Ok(())
}
