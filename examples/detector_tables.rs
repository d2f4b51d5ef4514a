//! Writes the detector tables of `src/detectors/table_data.rs` from the time-domain model.
//!
//!     cargo run --release --example detector_tables > /tmp/t.rs && mv /tmp/t.rs src/detectors/table_data.rs
//!
//! Rerun it only when the model or the grids change, then review the diff and run
//! `cargo test --release -- --ignored` (which checks every entry against the model again).
//! It takes a few seconds in release mode.

use spurhound::detectors::{
    Band, ModelSettings, Profile, dither_table_axes, impulse_table_prfs, model_dither_response,
    model_impulse_response,
};
use std::fmt::Write as _;

fn main() -> Result<(), Box<dyn std::error::Error>> {
    let settings = ModelSettings::default();
    let mut out = String::new();
    writeln!(
        out,
        "//! Detector responses relative to peak from the time-domain model (default settings).\n\
         //! Written by `cargo run --release --example detector_tables`; do not edit by hand.\n\
         //! Values in dB; see `table.rs` for the grids and the interpolation.\n\
         #![cfg_attr(rustfmt, rustfmt_skip)]\n\
         // values that happen to lie near a mathematical constant are still table values\n\
         #![allow(clippy::approx_constant)]\n\n\
         use super::table::{{DitherData, ImpulseData}};\n"
    )?;
    writeln!(out, "pub(crate) const IMPULSE: [ImpulseData; 3] = [")?;
    for band in Band::ALL {
        let prfs = impulse_table_prfs(band);
        let mut qp = Vec::new();
        let mut av = Vec::new();
        for &prf in &prfs {
            let r = model_impulse_response(band, Some(prf), &settings)?;
            qp.push(r.qp_minus_peak_db);
            av.push(r.av_minus_peak_db);
        }
        let iso = model_impulse_response(band, None, &settings)?;
        let lp: Vec<f64> = prfs.iter().map(|p| p.log10()).collect();
        writeln!(out, "    // {band}")?;
        writeln!(out, "    ImpulseData {{")?;
        writeln!(out, "        log10_prf: &{},", list(&lp, 4, 8))?;
        writeln!(out, "        qp: &{},", list(&qp, 3, 8))?;
        writeln!(out, "        av: &{},", list(&av, 3, 8))?;
        writeln!(
            out,
            "        isolated: [{:.3}, {:.3}],",
            iso.qp_minus_peak_db, iso.av_minus_peak_db
        )?;
        writeln!(out, "    }},")?;
    }
    writeln!(out, "];\n")?;
    writeln!(
        out,
        "/// [band][profile: triangular, sinusoidal]; `qp[i_rate·ratios.len() + i_ratio]`."
    )?;
    writeln!(out, "pub(crate) const DITHER: [[DitherData; 2]; 3] = [")?;
    for band in Band::ALL {
        let (ratios, rates) = dither_table_axes(band);
        writeln!(out, "    [")?;
        for profile in [Profile::Triangular, Profile::Sinusoidal] {
            let mut qp = Vec::new();
            let mut av = Vec::new();
            for &rate in &rates {
                for &ratio in &ratios {
                    let sweep = ratio * band.rbw_6db_hz();
                    let r = model_dither_response(band, sweep, rate, profile, &settings)?;
                    qp.push(r.qp_minus_peak_db);
                    av.push(r.av_minus_peak_db);
                }
            }
            writeln!(out, "        // {band}, {profile:?}")?;
            writeln!(out, "        DitherData {{")?;
            writeln!(out, "            ratios: &{},", list(&ratios, 4, 12))?;
            writeln!(out, "            rates_hz: &{},", list(&rates, 4, 12))?;
            writeln!(out, "            qp: &{},", list(&qp, 3, 12))?;
            writeln!(out, "            av: &{},", list(&av, 3, 12))?;
            writeln!(out, "        }},")?;
        }
        writeln!(out, "    ],")?;
    }
    writeln!(out, "];")?;
    print!("{out}");
    Ok(())
}

/// `[a, b, …]` with `digits` decimals, ten values a line, indented by `indent` spaces.
fn list(values: &[f64], digits: usize, indent: usize) -> String {
    let pad = " ".repeat(indent);
    let cells: Vec<String> = values
        .iter()
        .map(|&v| {
            // no "-0.000"
            let v = if v.abs() < 0.5 * 10f64.powi(-(digits as i32)) {
                0.0
            } else {
                v
            };
            format!("{v:.digits$}")
        })
        .collect();
    let lines: Vec<String> = cells.chunks(10).map(|c| c.join(", ")).collect();
    format!(
        "[\n{pad}    {},\n{pad}]",
        lines.join(&format!(",\n{pad}    "))
    )
}
