//! Whole-process speed and memory: a 1,000,000-point conducted scan and its ambient scan,
//! analysed by the release binary against two limits.
//!
//!     cargo build --release && cargo run --release --example bench
//!
//! Look at: the median wall time of five runs (target: under 1 s on 2 cores) and the peak
//! resident memory (target: under 300 MB). Peak memory is read with /usr/bin/time when present.

use spurhound::scan::write_scan_csv;
use spurhound::synth::{parse_scene, render};
use std::process::Command;
use std::time::Instant;

const DUT: &str = r#"
title = "bench board, 1 M points"
[scan]
start_hz = 150e3
stop_hz = 30e6
points = 1000000
rbw_hz = 9e3
seed = 11
[floor]
level_dbuv = 0.0
[[switching]]
f0_hz = 65e3
duty = 0.32
edge_time_s = 80e-9
fundamental_dbuv = 75.0
[[switching]]
f0_hz = 412e3
duty = 0.4
edge_time_s = 12e-9
fundamental_dbuv = 60.0
[[switching]]
f0_hz = 1.15e6
duty = 0.3
edge_time_s = 6e-9
fundamental_dbuv = 48.0
spread_pct = 4.0
[[clock]]
f0_hz = 4e6
edge_time_s = 3e-9
fundamental_dbuv = 38.0
[[carrier]]
freq_hz = 693e3
level_dbuv = 40.0
[[carrier]]
freq_hz = 909e3
level_dbuv = 45.0
"#;

fn main() -> Result<(), Box<dyn std::error::Error>> {
    let dir = std::env::temp_dir().join("spurhound-bench");
    std::fs::create_dir_all(&dir)?;
    let dut_path = dir.join("dut.csv");
    let amb_path = dir.join("ambient.csv");
    let t = Instant::now();
    let dut = render(&parse_scene(DUT, "bench-dut.toml")?)?;
    let ambient_scene = DUT
        .replace("seed = 11", "seed = 12")
        .replace("[[switching]]", "[[switching_off]]");
    let ambient_scene: String = keep_ambient(&ambient_scene);
    let amb = render(&parse_scene(&ambient_scene, "bench-ambient.toml")?)?;
    std::fs::write(&dut_path, write_scan_csv(&dut, &Default::default()))?;
    std::fs::write(&amb_path, write_scan_csv(&amb, &Default::default()))?;
    println!(
        "rendered and wrote 2 x {} points in {:.2} s",
        dut.len(),
        t.elapsed().as_secs_f64()
    );
    let exe = std::env::current_exe()?;
    let bin = exe
        .parent()
        .and_then(|p| p.parent())
        .map(|p| p.join("spurhound"))
        .ok_or("no binary path")?;
    let args = [
        "analyze",
        dut_path.to_str().unwrap_or_default(),
        "--ambient",
        amb_path.to_str().unwrap_or_default(),
        "--limit",
        "cispr32-b-qp",
        "--limit",
        "cispr32-b-av",
        "--format",
        "json",
        "--out",
        "/dev/null",
    ];
    let timer = std::path::Path::new("/usr/bin/time").exists();
    let mut walls = Vec::new();
    let mut rss_kb = 0u64;
    for _ in 0..5 {
        let t = Instant::now();
        let out = if timer {
            Command::new("/usr/bin/time")
                .arg("-f")
                .arg("%M")
                .arg(&bin)
                .args(args)
                .output()?
        } else {
            Command::new(&bin).args(args).output()?
        };
        walls.push(t.elapsed().as_secs_f64());
        if timer {
            let err = String::from_utf8_lossy(&out.stderr);
            if let Some(kb) = err
                .lines()
                .last()
                .and_then(|l| l.trim().parse::<u64>().ok())
            {
                rss_kb = rss_kb.max(kb);
            }
        }
    }
    walls.sort_by(f64::total_cmp);
    println!(
        "analyze, whole process: median {:.3} s (min {:.3}, max {:.3}) over 5 runs",
        walls[2], walls[0], walls[4]
    );
    if timer {
        println!("peak resident memory: {:.0} MB", rss_kb as f64 / 1024.0);
    }
    Ok(())
}

/// The ambient scene: the DUT scene with its switching and clock sources removed.
fn keep_ambient(scene: &str) -> String {
    let mut out = String::new();
    let mut skip = false;
    for line in scene.lines() {
        if line.starts_with("[[") {
            skip = line != "[[carrier]]";
        }
        if !skip {
            out.push_str(line);
            out.push('\n');
        }
    }
    out
}
