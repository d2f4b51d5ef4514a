//! Render a scan with a known fundamental and check where its harmonics land.
//!
//!     cargo run --release --example synth_scan
//!
//! Look at: the 3rd to 6th harmonics of a 200 kHz converter read at the trapezoid levels
//! (Paul's trapezoid spectrum), a few tenths of a dB apart from the rendered trace.

use spurhound::synth::{parse_scene, render, trapezoid_harmonic_peak};

const SCENE: &str = r#"
title = "one converter, known fundamental"
[scan]
start_hz = 150e3
stop_hz = 2e6
points = 4001
rbw_hz = 9e3
seed = 5
[floor]
level_dbuv = 0.0
[[switching]]
name = "buck 200 kHz"
f0_hz = 200e3
duty = 0.3
edge_time_s = 20e-9
fundamental_dbuv = 70.0
"#;

fn main() -> Result<(), Box<dyn std::error::Error>> {
    let scene = parse_scene(SCENE, "inline.toml")?;
    let scan = render(&scene)?;
    let (period, ramp) = (1.0 / 200e3, 20e-9 / 0.8);
    let c1 = trapezoid_harmonic_peak(1, 1.0, period, 0.3, ramp);
    println!("harmonic  freq (kHz)  expected (dBuV)  trace max within 5 kHz (dBuV)");
    for n in 3..=6u32 {
        let f = 200e3 * f64::from(n);
        let expected =
            70.0 + 20.0 * (trapezoid_harmonic_peak(n, 1.0, period, 0.3, ramp) / c1).log10();
        let seen = scan
            .freq_hz
            .iter()
            .zip(scan.level_dbuv.iter())
            .filter(|(x, _)| (**x - f).abs() < 5e3)
            .map(|(_, l)| *l)
            .fold(f64::NEG_INFINITY, f64::max);
        println!("{n:>8}  {:>10.0}  {expected:>15.2}  {seen:>29.2}", f / 1e3);
    }
    Ok(())
}
