//! Scene files: a TOML description of a receiver setting and the sources that a rendered trace
//! should show.
//!
//! Every table refuses unknown keys, and [`parse_scene`] checks every value, so a typo or an
//! impossible source is an error that names the file and the field.
//!
//! ```
//! use spurhound::synth::parse_scene;
//! let text = r#"
//! [scan]
//! start_hz = 150e3
//! stop_hz = 30e6
//! points = 6635
//! rbw_hz = 9e3
//! [floor]
//! level_dbuv = 5.0
//! [[switching]]
//! f0_hz = 400e3
//! duty = 0.3
//! edge_time_s = 20e-9
//! fundamental_dbuv = 80.0
//! "#;
//! let scene = parse_scene(text, "demo.toml")?;
//! assert_eq!(scene.scan.points, 6635);
//! assert_eq!(scene.switching[0].duty, Some(0.3));
//! # Ok::<(), spurhound::synth::SceneError>(())
//! ```

use super::SceneError;
use crate::scan::csv::WriteOptions;
use crate::scan::table::Delimiter;
use crate::scan::{Detector, Quantity, Role};
use crate::units::{FreqUnit, LevelUnit};
use serde::Deserialize;
use std::path::Path;

/// A whole scene: receiver setting, noise floor and sources.
#[derive(Debug, Clone, PartialEq, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct Scene {
    /// Title written into the rendered scan's metadata.
    #[serde(default)]
    pub title: Option<String>,
    /// Short name of the scene for the `scene` metadata entry (else the file name is used).
    #[serde(default)]
    pub name: Option<String>,
    /// Receiver setting and display grid.
    pub scan: ScanSetting,
    /// Receiver noise floor; without it the trace is noise-free apart from noise-like sources.
    #[serde(default)]
    pub floor: Option<Floor>,
    /// Switching converters (trapezoid pulse trains).
    #[serde(default)]
    pub switching: Vec<Periodic>,
    /// Clocks (trapezoid pulse trains whose duty defaults to 0.5).
    #[serde(default)]
    pub clock: Vec<Periodic>,
    /// Broadcast carriers.
    #[serde(default)]
    pub carrier: Vec<Carrier>,
    /// Broadband noise-like regions.
    #[serde(default)]
    pub hump: Vec<Hump>,
    /// How the rendered scan is written as CSV.
    #[serde(default)]
    pub output: Option<Output>,
    /// The file the scene was read from (for messages and metadata); not a TOML key.
    #[serde(skip)]
    pub file: String,
}

/// Spacing of the display points.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Deserialize, Default)]
#[serde(rename_all = "lowercase")]
pub enum Spacing {
    /// Equal steps in Hz.
    #[default]
    Linear,
    /// Equal ratios between neighbours.
    Log,
}

/// The `[scan]` table.
#[derive(Debug, Clone, PartialEq, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct ScanSetting {
    /// First display frequency, Hz.
    pub start_hz: f64,
    /// Last display frequency, Hz.
    pub stop_hz: f64,
    /// Number of display points (at least 2), start and stop included.
    pub points: usize,
    /// Display point spacing, linear unless `log`.
    #[serde(default)]
    pub spacing: Spacing,
    /// 6 dB bandwidth of the Gaussian resolution filter, Hz.
    pub rbw_hz: f64,
    /// Video bandwidth, Hz; metadata only.
    #[serde(default)]
    pub vbw_hz: Option<f64>,
    /// Detector: peak (default), average (the envelope's mean over each display bucket), rms,
    /// sample, or quasi-peak (the CISPR 16-1-1 receiver model, see [`super::render_detector`]).
    #[serde(default = "default_detector")]
    pub detector: Detector,
    /// Sweeps combined by max-hold (default 1).
    #[serde(default = "one")]
    pub sweeps: usize,
    /// Seed of the random numbers (default 0); a seed reproduces a trace exactly.
    #[serde(default)]
    pub seed: u64,
    /// What the trace shows (default dut).
    #[serde(default = "default_role")]
    pub role: Role,
    /// Quantity of the levels: voltage (default) or field-strength.
    #[serde(default = "default_quantity")]
    pub quantity: Quantity,
    /// k in T_sweep = k·span/RBW² (default 2.5); sets how fast the noise decorrelates along the
    /// sweep.
    #[serde(default = "default_sweep_time_factor")]
    pub sweep_time_factor: f64,
}

/// The `[floor]` table: receiver noise.
#[derive(Debug, Clone, PartialEq, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct Floor {
    /// Rms noise in the RBW at `start_hz`, dBµV (what an rms detector reads).
    pub level_dbuv: f64,
    /// Tilt vs frequency, dB per decade, reference at `start_hz`.
    #[serde(default)]
    pub slope_db_per_decade: f64,
}

/// A `[[switching]]` or `[[clock]]` entry: a periodic trapezoid pulse train.
#[derive(Debug, Clone, PartialEq, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct Periodic {
    /// Label for messages.
    #[serde(default)]
    pub name: Option<String>,
    /// Repetition frequency, Hz.
    pub f0_hz: f64,
    /// High time at the 50 % points over the period, 0 < duty < 1. Required for switching,
    /// 0.5 when a clock leaves it out.
    #[serde(default)]
    pub duty: Option<f64>,
    /// 10-90 % rise time (= fall time), s.
    pub edge_time_s: f64,
    /// Receiver reading (rms) of harmonic 1, dBµV, even when harmonic 1 is below the scan.
    pub fundamental_dbuv: f64,
    /// Tilt of harmonic n relative to harmonic 1: coupling_db_per_decade·log10(n) dB.
    #[serde(default)]
    pub coupling_db_per_decade: f64,
    /// Total peak-to-peak frequency spread in % of f0 (centre spread, triangular); 0 = none.
    #[serde(default)]
    pub spread_pct: f64,
    /// Spread modulation rate, Hz; 0 (default) renders the spread as a continuous density.
    #[serde(default)]
    pub spread_rate_hz: f64,
    /// Highest harmonic rendered; 0 (default) = up to the scan stop.
    #[serde(default)]
    pub max_harmonic: u32,
}

/// A `[[carrier]]` entry: an AM broadcast carrier.
#[derive(Debug, Clone, PartialEq, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct Carrier {
    /// Label for messages.
    #[serde(default)]
    pub name: Option<String>,
    /// Carrier frequency, Hz.
    pub freq_hz: f64,
    /// Rms reading of the unmodulated carrier, dBµV.
    pub level_dbuv: f64,
    /// AM depth, 0..=1 (default 0.3).
    #[serde(default = "default_am_depth")]
    pub am_depth: f64,
    /// Standard deviation of the sweep-to-sweep level, dB (default 0).
    #[serde(default)]
    pub fade_db: f64,
}

/// A `[[hump]]` entry: broadband noise-like emission.
#[derive(Debug, Clone, PartialEq, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct Hump {
    /// Label for messages.
    #[serde(default)]
    pub name: Option<String>,
    /// Lower end, Hz.
    pub start_hz: f64,
    /// Upper end, Hz.
    pub stop_hz: f64,
    /// Rms reading in the RBW at the top of the hump (its log-centre), dBµV.
    pub level_dbuv: f64,
}

/// The `[output]` table; see [`WriteOptions`].
#[derive(Debug, Clone, PartialEq, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct Output {
    /// Hz, kHz, MHz or GHz (default Hz).
    #[serde(default = "default_freq_unit")]
    pub freq_unit: String,
    /// dBuV, dBm, dBmV or dBuV/m (default dBuV).
    #[serde(default = "default_level_unit")]
    pub level_unit: String,
    /// "," (default), ";" or a tab.
    #[serde(default = "default_delimiter")]
    pub delimiter: String,
    /// Write decimal commas (needs ";" or tab).
    #[serde(default)]
    pub decimal_comma: bool,
    /// Write metadata as instrument `key,value` lines.
    #[serde(default)]
    pub instrument_preamble: bool,
    /// Write a header line (default true).
    #[serde(default = "yes")]
    pub header: bool,
}

fn default_detector() -> Detector {
    Detector::Peak
}
fn default_role() -> Role {
    Role::Dut
}
fn default_quantity() -> Quantity {
    Quantity::Voltage
}
fn default_sweep_time_factor() -> f64 {
    2.5
}
fn default_am_depth() -> f64 {
    0.3
}
fn default_freq_unit() -> String {
    "Hz".to_string()
}
fn default_level_unit() -> String {
    "dBuV".to_string()
}
fn default_delimiter() -> String {
    ",".to_string()
}
fn one() -> usize {
    1
}
fn yes() -> bool {
    true
}

/// Reads and checks a scene file.
///
/// # Errors
/// [`SceneError::Io`] when the file cannot be read, else as [`parse_scene`].
pub fn read_scene_file(path: &Path) -> Result<Scene, SceneError> {
    let file = path.display().to_string();
    let text = std::fs::read_to_string(path).map_err(|e| SceneError::Io {
        file: file.clone(),
        reason: e.to_string(),
    })?;
    parse_scene(&text, &file)
}

/// Parses scene TOML and checks every field; `file` names the scene in messages.
///
/// # Errors
/// [`SceneError::Toml`] for syntax errors, unknown keys (the message names the key), missing
/// keys and wrong types; [`SceneError::BadField`] for values out of range (see
/// [`Scene::validate`]).
pub fn parse_scene(text: &str, file: &str) -> Result<Scene, SceneError> {
    let mut scene: Scene = toml::from_str(text).map_err(|e| SceneError::Toml {
        file: file.to_string(),
        message: e.to_string().trim_end().to_string(),
    })?;
    scene.file = file.to_string();
    scene.validate()?;
    Ok(scene)
}

/// A bad-field error of `file`.
fn bad(file: &str, field: &str, value: impl std::fmt::Display, expected: &str) -> SceneError {
    SceneError::BadField {
        file: file.to_string(),
        field: field.to_string(),
        value: value.to_string(),
        expected: expected.to_string(),
    }
}

/// Checks `value` with `ok`, else a [`SceneError::BadField`].
fn check(file: &str, field: &str, value: f64, ok: bool, expected: &str) -> Result<(), SceneError> {
    if ok && value.is_finite() {
        Ok(())
    } else {
        Err(bad(file, field, value, expected))
    }
}

/// Largest number of display points of a scene.
pub const MAX_POINTS: usize = 30_000_000;
/// Largest number of max-hold sweeps of a scene.
pub const MAX_SWEEPS: usize = 100_000;

/// Checks that a level lies in -200..=300 dBµV (beyond it linear µV lose meaning in f64 sums).
fn check_level(file: &str, field: &str, value: f64) -> Result<(), SceneError> {
    check(
        file,
        field,
        value,
        (-200.0..=300.0).contains(&value),
        "a level from -200 to 300 dBµV",
    )
}

impl Scene {
    /// The name written as the `scene` metadata entry: `name`, else the file, else "scene".
    pub fn label(&self) -> String {
        match (&self.name, self.file.is_empty()) {
            (Some(n), _) => n.clone(),
            (None, false) => self.file.clone(),
            (None, true) => "scene".to_string(),
        }
    }

    /// Duty of a switching or clock entry after defaults (clock: 0.5).
    pub(crate) fn duty_of(p: &Periodic, is_clock: bool) -> Option<f64> {
        p.duty.or(if is_clock { Some(0.5) } else { None })
    }

    /// Checks every value of the scene. [`parse_scene`] calls it; call it yourself for a scene
    /// built in code ([`render`](super::render::render) does).
    ///
    /// # Errors
    /// [`SceneError::BadField`] naming the first bad field (`scan.stop_hz`,
    /// `switching[0].duty`, ...), its value and what was expected.
    pub fn validate(&self) -> Result<(), SceneError> {
        let f = self.file.as_str();
        let s = &self.scan;
        check(
            f,
            "scan.start_hz",
            s.start_hz,
            s.start_hz > 0.0,
            "a positive frequency in Hz",
        )?;
        check(
            f,
            "scan.stop_hz",
            s.stop_hz,
            s.stop_hz > s.start_hz,
            &format!("a frequency above scan.start_hz = {} Hz", s.start_hz),
        )?;
        if !(2..=MAX_POINTS).contains(&s.points) {
            return Err(bad(
                f,
                "scan.points",
                s.points,
                &format!("from 2 to {MAX_POINTS} display points"),
            ));
        }
        check(
            f,
            "scan.rbw_hz",
            s.rbw_hz,
            s.rbw_hz > 0.0,
            "a positive bandwidth in Hz",
        )?;
        if let Some(v) = s.vbw_hz {
            check(f, "scan.vbw_hz", v, v > 0.0, "a positive bandwidth in Hz")?;
        }
        if !(1..=MAX_SWEEPS).contains(&s.sweeps) {
            return Err(bad(
                f,
                "scan.sweeps",
                s.sweeps,
                &format!("from 1 to {MAX_SWEEPS} sweeps"),
            ));
        }
        if s.quantity == Quantity::Current {
            return Err(bad(
                f,
                "scan.quantity",
                "current",
                "voltage or field-strength",
            ));
        }
        check(
            f,
            "scan.sweep_time_factor",
            s.sweep_time_factor,
            s.sweep_time_factor > 0.0,
            "a positive factor (2 to 3 is common)",
        )?;
        if let Some(fl) = &self.floor {
            check_level(f, "floor.level_dbuv", fl.level_dbuv)?;
            check(
                f,
                "floor.slope_db_per_decade",
                fl.slope_db_per_decade,
                true,
                "a finite slope in dB per decade",
            )?;
        }
        for (kind, list, is_clock) in [
            ("switching", &self.switching, false),
            ("clock", &self.clock, true),
        ] {
            for (i, p) in list.iter().enumerate() {
                self.validate_periodic(&format!("{kind}[{i}]"), p, is_clock)?;
            }
        }
        for (i, c) in self.carrier.iter().enumerate() {
            let k = format!("carrier[{i}]");
            check(
                f,
                &format!("{k}.freq_hz"),
                c.freq_hz,
                c.freq_hz > 0.0,
                "a positive frequency in Hz",
            )?;
            check_level(f, &format!("{k}.level_dbuv"), c.level_dbuv)?;
            let m = c.am_depth;
            check(
                f,
                &format!("{k}.am_depth"),
                m,
                (0.0..=1.0).contains(&m),
                "a depth from 0 to 1",
            )?;
            let d = c.fade_db;
            check(
                f,
                &format!("{k}.fade_db"),
                d,
                d >= 0.0,
                "a standard deviation of 0 dB or more",
            )?;
        }
        for (i, h) in self.hump.iter().enumerate() {
            let k = format!("hump[{i}]");
            check(
                f,
                &format!("{k}.start_hz"),
                h.start_hz,
                h.start_hz > 0.0,
                "a positive frequency in Hz",
            )?;
            check(
                f,
                &format!("{k}.stop_hz"),
                h.stop_hz,
                h.stop_hz > h.start_hz,
                &format!("a frequency above {k}.start_hz = {} Hz", h.start_hz),
            )?;
            check_level(f, &format!("{k}.level_dbuv"), h.level_dbuv)?;
        }
        if let Some(o) = &self.output {
            output_options(o, f)?;
        }
        Ok(())
    }

    fn validate_periodic(&self, k: &str, p: &Periodic, is_clock: bool) -> Result<(), SceneError> {
        let f = self.file.as_str();
        check(
            f,
            &format!("{k}.f0_hz"),
            p.f0_hz,
            p.f0_hz > 0.0,
            "a positive frequency in Hz",
        )?;
        let Some(duty) = Scene::duty_of(p, is_clock) else {
            return Err(bad(
                f,
                &format!("{k}.duty"),
                "missing",
                "a duty cycle between 0 and 1, e.g. 0.3",
            ));
        };
        check(
            f,
            &format!("{k}.duty"),
            duty,
            duty > 0.0 && duty < 1.0,
            "a duty cycle between 0 and 1 (exclusive)",
        )?;
        // The full ramp τr = t_10-90 / 0.8 must fit in both the high and the low part of the
        // period for the waveform to be a trapezoid: τr ≤ min(duty, 1 - duty)·T.
        let limit = 0.8 * duty.min(1.0 - duty) / p.f0_hz;
        check(
            f,
            &format!("{k}.edge_time_s"),
            p.edge_time_s,
            p.edge_time_s >= 0.0 && p.edge_time_s <= limit,
            &format!("a 10-90 % edge time from 0 to 0.8·min(duty, 1-duty)/f0 = {limit:e} s"),
        )?;
        check_level(f, &format!("{k}.fundamental_dbuv"), p.fundamental_dbuv)?;
        check(
            f,
            &format!("{k}.coupling_db_per_decade"),
            p.coupling_db_per_decade,
            true,
            "a finite tilt in dB per decade",
        )?;
        let sp = p.spread_pct;
        check(
            f,
            &format!("{k}.spread_pct"),
            sp,
            (0.0..=50.0).contains(&sp),
            "a spread from 0 to 50 %",
        )?;
        let r = p.spread_rate_hz;
        check(
            f,
            &format!("{k}.spread_rate_hz"),
            r,
            r >= 0.0,
            "a rate of 0 Hz or more",
        )?;
        Ok(())
    }

    /// CSV layout from the `[output]` table (defaults when the table is absent or, for a scene
    /// that failed [`Scene::validate`], when a value is not understood).
    pub fn write_options(&self) -> WriteOptions {
        match &self.output {
            Some(o) => output_options(o, &self.file).unwrap_or_default(),
            None => WriteOptions::default(),
        }
    }
}

/// Converts the `[output]` table into [`WriteOptions`].
fn output_options(o: &Output, file: &str) -> Result<WriteOptions, SceneError> {
    let freq_unit = FreqUnit::parse(&o.freq_unit).ok_or_else(|| {
        bad(
            file,
            "output.freq_unit",
            &o.freq_unit,
            "Hz, kHz, MHz or GHz",
        )
    })?;
    let level_unit = LevelUnit::parse(&o.level_unit)
        .filter(|u| *u != LevelUnit::DbUa)
        .ok_or_else(|| {
            bad(
                file,
                "output.level_unit",
                &o.level_unit,
                "dBuV, dBm, dBmV or dBuV/m",
            )
        })?;
    let delimiter = match o.delimiter.as_str() {
        "," | "comma" => Delimiter::Comma,
        ";" | "semicolon" => Delimiter::Semicolon,
        "\t" | "tab" => Delimiter::Tab,
        other => {
            return Err(bad(
                file,
                "output.delimiter",
                format!("{other:?}"),
                "\",\", \";\" or \"\\t\"",
            ));
        }
    };
    if o.decimal_comma && delimiter == Delimiter::Comma {
        return Err(bad(
            file,
            "output.decimal_comma",
            true,
            "false with a \",\" delimiter (decimal commas need \";\" or \"\\t\")",
        ));
    }
    Ok(WriteOptions {
        freq_unit,
        level_unit,
        delimiter,
        decimal_comma: o.decimal_comma,
        instrument_preamble: o.instrument_preamble,
        header: o.header,
    })
}

#[cfg(test)]
pub(crate) mod tests {
    use super::*;

    /// A conducted scan of a 12 V buck converter with a spread-spectrum boost stage, a clock,
    /// two broadcast carriers and a broadband hump.
    pub(crate) const EXAMPLE_BUCK: &str = r#"
title = "Buck converter, L1, peak"
name = "buck demo"

[scan]
start_hz = 150e3
stop_hz = 30e6
points = 6635
rbw_hz = 9e3
vbw_hz = 30e3
detector = "peak"
sweeps = 1
seed = 1
role = "dut"
sweep_time_factor = 2.5

[floor]
level_dbuv = 5.0
slope_db_per_decade = -2.0

[[switching]]
name = "buck 12V"
f0_hz = 400e3
duty = 0.3
edge_time_s = 20e-9
fundamental_dbuv = 80.0
coupling_db_per_decade = 6.0

[[switching]]
name = "boost, dithered"
f0_hz = 2.1e6
duty = 0.45
edge_time_s = 8e-9
fundamental_dbuv = 62.0
spread_pct = 6.0
spread_rate_hz = 3e3

[[clock]]
name = "mcu crystal"
f0_hz = 8e6
edge_time_s = 3e-9
fundamental_dbuv = 40.0

[[carrier]]
freq_hz = 999e3
level_dbuv = 45.0

[[carrier]]
freq_hz = 6.07e6
level_dbuv = 38.0
am_depth = 0.5
fade_db = 2.0

[[hump]]
start_hz = 2e6
stop_hz = 8e6
level_dbuv = 30.0

[output]
freq_unit = "MHz"
level_unit = "dBuV"
delimiter = ";"
decimal_comma = true
instrument_preamble = false
header = true
"#;

    /// A radiated scan in field strength with log spacing and an average detector.
    pub(crate) const EXAMPLE_RADIATED: &str = r#"
[scan]
start_hz = 30e6
stop_hz = 1e9
points = 4001
spacing = "log"
rbw_hz = 120e3
detector = "average"
seed = 9
role = "ambient"
quantity = "field-strength"

[floor]
level_dbuv = 8.0

[[clock]]
f0_hz = 25e6
duty = 0.5
edge_time_s = 1e-9
fundamental_dbuv = 35.0
coupling_db_per_decade = 20.0

[[carrier]]
freq_hz = 98.1e6
level_dbuv = 55.0
"#;

    fn parse(text: &str) -> Result<Scene, SceneError> {
        parse_scene(text, "t.toml")
    }

    const MINIMAL: &str = "[scan]\nstart_hz = 150e3\nstop_hz = 30e6\npoints = 11\nrbw_hz = 9e3\n";

    fn field_of(err: &SceneError) -> String {
        match err {
            SceneError::BadField { field, .. } => field.clone(),
            other => panic!("expected a bad-field error, got {other}"),
        }
    }

    #[test]
    fn example_scenes_parse_with_defaults() {
        let s = parse(EXAMPLE_BUCK).unwrap();
        assert_eq!(s.switching.len(), 2);
        assert_eq!(s.clock[0].duty, None);
        assert_eq!(Scene::duty_of(&s.clock[0], true), Some(0.5));
        assert_eq!(s.carrier[0].am_depth, 0.3);
        assert_eq!(s.label(), "buck demo");
        let r = parse(EXAMPLE_RADIATED).unwrap();
        assert_eq!(r.scan.spacing, Spacing::Log);
        assert_eq!(r.scan.quantity, Quantity::FieldStrength);
        assert_eq!(r.scan.role, Role::Ambient);
        assert_eq!(r.label(), "t.toml");
        let m = parse(MINIMAL).unwrap();
        assert_eq!(
            (m.scan.detector, m.scan.sweeps, m.scan.seed),
            (Detector::Peak, 1, 0)
        );
        assert_eq!(m.scan.sweep_time_factor, 2.5);
    }

    #[test]
    fn output_table_maps_to_write_options() {
        let o = parse(EXAMPLE_BUCK).unwrap().write_options();
        assert_eq!(o.freq_unit, FreqUnit::MHz);
        assert_eq!(o.level_unit, LevelUnit::DbUv);
        assert_eq!(o.delimiter, Delimiter::Semicolon);
        assert!(o.decimal_comma && o.header && !o.instrument_preamble);
        assert_eq!(
            parse(MINIMAL).unwrap().write_options(),
            WriteOptions::default()
        );
        let tab = format!("{MINIMAL}[output]\ndelimiter = \"\\t\"\nlevel_unit = \"dBm\"\n");
        let o = parse(&tab).unwrap().write_options();
        assert_eq!(
            (o.delimiter, o.level_unit),
            (Delimiter::Tab, LevelUnit::DbM)
        );
    }

    #[test]
    fn unknown_keys_are_named() {
        for (text, key) in [
            (format!("{MINIMAL}colour = 3\n"), "colour"),
            (
                MINIMAL.replace("points = 11", "points = 11\nrbw = 9e3"),
                "rbw",
            ),
            (
                format!("{MINIMAL}[[carrier]]\nfreq_hz = 1e6\nlevel_dbuv = 3.0\ndepth = 0.2\n"),
                "depth",
            ),
        ] {
            let err = parse(&text).unwrap_err();
            assert!(matches!(err, SceneError::Toml { .. }), "{err}");
            let msg = err.to_string();
            assert!(msg.contains(key) && msg.contains("t.toml"), "{msg}");
        }
    }

    #[test]
    fn bad_fields_are_named() {
        let switching = "[[switching]]\nf0_hz = 100e3\nduty = 1.5\nedge_time_s = 1e-8\nfundamental_dbuv = 60.0\n";
        let cases = [
            (
                MINIMAL.replace("stop_hz = 30e6", "stop_hz = 100e3"),
                "scan.stop_hz",
            ),
            (
                MINIMAL.replace("start_hz = 150e3", "start_hz = -1.0"),
                "scan.start_hz",
            ),
            (MINIMAL.replace("points = 11", "points = 1"), "scan.points"),
            (
                MINIMAL.replace("rbw_hz = 9e3", "rbw_hz = 0.0"),
                "scan.rbw_hz",
            ),
            (format!("{MINIMAL}{switching}"), "switching[0].duty"),
            (
                format!("{MINIMAL}{}", switching.replace("duty = 1.5\n", "")),
                "switching[0].duty",
            ),
            (
                format!(
                    "{MINIMAL}{}",
                    switching
                        .replace("duty = 1.5", "duty = 0.5")
                        .replace("1e-8", "5e-6")
                ),
                "switching[0].edge_time_s",
            ),
            (
                format!("{MINIMAL}[[hump]]\nstart_hz = 5e6\nstop_hz = 1e6\nlevel_dbuv = 3.0\n"),
                "hump[0].stop_hz",
            ),
            (
                format!("{MINIMAL}[[carrier]]\nfreq_hz = 1e6\nlevel_dbuv = 3.0\nam_depth = 2.0\n"),
                "carrier[0].am_depth",
            ),
            (
                format!("{MINIMAL}[output]\nfreq_unit = \"furlong\"\n"),
                "output.freq_unit",
            ),
            (
                format!("{MINIMAL}[output]\ndecimal_comma = true\n"),
                "output.decimal_comma",
            ),
        ];
        for (text, field) in cases {
            let err = parse(&text).unwrap_err();
            assert_eq!(field_of(&err), field, "{err}");
            let msg = err.to_string();
            assert!(
                msg.contains(field) && msg.contains("t.toml") && msg.contains("expected"),
                "{msg}"
            );
        }
    }

    #[test]
    fn missing_file_is_an_io_error_naming_it() {
        let err = read_scene_file(Path::new("/nonexistent/scene.toml")).unwrap_err();
        assert!(matches!(err, SceneError::Io { .. }));
        assert!(err.to_string().contains("/nonexistent/scene.toml"));
    }
}
