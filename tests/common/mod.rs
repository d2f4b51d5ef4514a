//! Shared test code.
#![allow(dead_code)]

use std::path::PathBuf;
use std::process::{Command, Output};

pub mod tol {
    /// Level agreement for values written with 3 or 4 decimals.
    pub const LEVEL_DB: f64 = 2e-3;
    /// Relative frequency agreement.
    pub const FREQ_REL: f64 = 1e-9;
}

/// A path under `fixtures/`.
pub fn fixture(rel: &str) -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR"))
        .join("fixtures")
        .join(rel)
}

/// Runs the built binary with `args` from the repository root.
pub fn spurhound(args: &[&str]) -> Output {
    Command::new(env!("CARGO_BIN_EXE_spurhound"))
        .args(args)
        .current_dir(env!("CARGO_MANIFEST_DIR"))
        .output()
        .expect("the binary runs")
}

pub fn stdout(o: &Output) -> String {
    String::from_utf8_lossy(&o.stdout).into_owned()
}

pub fn stderr(o: &Output) -> String {
    String::from_utf8_lossy(&o.stderr).into_owned()
}
