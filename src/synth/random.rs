//! Random synthetic cases with known truth, and the scores of an analysis against that truth.
//!
//! [`random_case`] draws one pre-compliance measurement: a DUT scene (switching converters,
//! clocks, sometimes a comb too fine for the RBW), the lab's ambient (broadcast carriers on
//! their channel rasters, lighting combs, some of them intermittent), one to three ambient
//! sweeps, a limit and a file form. Every range is a realistic one from the reference notes
//! (METHODS.md section named beside it); none is chosen to suit the analysis. Each source that
//! a correct analysis should report is listed as a [`TruthFamily`] with its visible harmonics
//! and its margin, computed from the declared levels.
//!
//! [`score_case`] compares an [`Analysis`] with the truth of its case; [`Totals`] sums the
//! scores of many cases and [`Totals::summary`] turns them into rates.
//!
//! ```
//! use spurhound::synth::random::{CaseOptions, random_case};
//! let case = random_case(7, &CaseOptions::default())?;
//! assert!((1..=3).contains(&case.ambient.len()));
//! assert!(case.dut.validate().is_ok());
//! # Ok::<(), spurhound::synth::SceneError>(())
//! ```

use super::SceneError;
use super::render::{render, trapezoid_harmonic_peak};
use super::scene::{Carrier, Floor, Periodic, ScanSetting, Scene, Spacing};
use crate::analysis::{Analysis, Context, Family, Kind, Origin, Peak};
use crate::limits::{Limit, builtin};
use crate::scan::csv::{ReadOptions, WriteOptions, read_scan_bytes, write_scan_csv};
use crate::scan::table::Delimiter;
use crate::scan::{Detector, Quantity, Role, Scan};
use crate::units::{FreqUnit, LevelUnit};
use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;
use serde::Serialize;
use statrs::function::erf::erf;
use std::f64::consts::{LN_2, PI};

/// A line is visible when its rms reading is at least this far above the floor's rms, dB.
pub const VISIBLE_DB: f64 = 6.0;
/// A line counts for peak recall (and a family for the strong recall) at this height, dB.
pub const STRONG_DB: f64 = 10.0;
/// A reported fundamental matches a true one within this relative error (0.5 %).
pub const MATCH_REL: f64 = 0.005;
/// Fewest visible harmonics (or carriers) that make a family worth reporting.
pub const MIN_HARMONICS: usize = 3;

/// Targets the engine is held to (see `tests/accuracy.rs`).
pub mod targets {
    /// Family recall, at least.
    pub const RECALL: f64 = 0.95;
    /// Family precision, at least.
    pub const PRECISION: f64 = 0.95;
    /// Median relative error of matched fundamentals, at most (0.2 %).
    pub const MEDIAN_F0_REL_ERROR: f64 = 0.002;
    /// Origin accuracy of matched families, at least.
    pub const ORIGIN: f64 = 0.95;
    /// Kind accuracy of matched families, at least.
    pub const KIND: f64 = 0.9;
    /// Top-1 culprit rate, at least.
    pub const TOP1: f64 = 0.9;
    /// All of them as one set of levels.
    pub const LEVELS: super::Levels = super::Levels {
        recall: RECALL,
        precision: PRECISION,
        median_f0_rel_error: MEDIAN_F0_REL_ERROR,
        origin: ORIGIN,
        kind: KIND,
        top1: TOP1,
    };
}

/// Levels a [`Summary`] is held to: the rates at least, the median f0 error at most.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Levels {
    pub recall: f64,
    pub precision: f64,
    pub median_f0_rel_error: f64,
    pub origin: f64,
    pub kind: f64,
    pub top1: f64,
}

/// The three kinds of measurement the cases are drawn from.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum Scenario {
    /// Conducted, 150 kHz-30 MHz.
    ConductedFull,
    /// Conducted, a sub-span of 150 kHz-30 MHz.
    ConductedZoom,
    /// Radiated, 30 MHz-1 GHz.
    Radiated,
}

impl Scenario {
    /// All scenarios, in report order.
    pub const ALL: [Scenario; 3] = [
        Scenario::ConductedFull,
        Scenario::ConductedZoom,
        Scenario::Radiated,
    ];

    /// Short name for tables and JSON.
    pub fn name(self) -> &'static str {
        match self {
            Scenario::ConductedFull => "conducted-full",
            Scenario::ConductedZoom => "conducted-zoom",
            Scenario::Radiated => "radiated",
        }
    }
}

/// What kind of case [`random_case`] draws.
#[derive(Debug, Clone, PartialEq)]
pub struct CaseOptions {
    /// Conducted (150 kHz-30 MHz, 9 kHz RBW); else radiated (30 MHz-1 GHz, 120 kHz RBW).
    pub conducted: bool,
    /// Conducted only: `Some(true)` a zoomed sub-span, `Some(false)` the full band, `None`
    /// drawn (zoomed in 40 % of cases).
    pub zoom: Option<bool>,
    /// Upper bound on the display points (for quick debug runs); `None` draws 601-10001.
    pub max_points: Option<usize>,
}

impl Default for CaseOptions {
    fn default() -> Self {
        CaseOptions {
            conducted: true,
            zoom: None,
            max_points: None,
        }
    }
}

impl CaseOptions {
    /// The accuracy harness's mix: every third seed (2, 5, 8, ...) radiated, the rest
    /// conducted (full or zoomed, drawn). Every harness and diagnostic uses this, so a seed
    /// names the same case everywhere.
    pub fn harness(seed: u64) -> Self {
        CaseOptions {
            conducted: seed % 3 != 2,
            ..CaseOptions::default()
        }
    }
}

/// One visible line of a true family in the DUT scene.
#[derive(Debug, Clone, PartialEq)]
pub struct TruthLine {
    /// Harmonic number (for a carrier: its frequency over the channel raster).
    pub harmonic: u32,
    /// Frequency, Hz.
    pub freq_hz: f64,
    /// Declared rms reading, dBµV (dBµV/m radiated), after spread and in-RBW summing.
    pub level_dbuv: f64,
    /// Rms background at the line, same unit: the floor, power-summed with any comb too fine to
    /// resolve there (a line under such a comb's level does not show).
    pub floor_dbuv: f64,
}

/// What a correct analysis should report about one source (or one set of broadcast carriers).
#[derive(Debug, Clone, PartialEq)]
pub struct TruthFamily {
    /// What the source is, e.g. `buck 412.3 kHz` or `MW carriers, 9 kHz raster`.
    pub label: String,
    /// Fundamental (a carrier set: its channel raster), Hz.
    pub f0_hz: f64,
    /// Other fundamentals a report may give and still be right (a carrier set: the greatest
    /// common divisor of its visible carriers, when that is a multiple of the raster).
    pub accept_f0_hz: Vec<f64>,
    /// Kind of oscillator.
    pub kind: Kind,
    /// Dut for the board's sources, Ambient for the lab's.
    pub origin: Origin,
    /// Harmonic numbers inside the span whose rms reading is at least [`VISIBLE_DB`] above
    /// the floor's rms, in the DUT scene (empty when the source is absent from it).
    pub harmonics_visible: Vec<u32>,
    /// The visible lines themselves, in harmonic order.
    pub lines: Vec<TruthLine>,
    /// Comb: f0 > 2·max(RBW, display step at the median visible line). Carrier set: at least
    /// [`MIN_HARMONICS`] visible carriers with no other visible carrier within that distance.
    /// An unresolved comb shows as a hump.
    pub resolved: bool,
    /// Margin (limit − declared reading) of the worst visible line, dB; `None` when no visible
    /// line lies in the limit's range.
    pub worst_margin_db: Option<f64>,
    /// Total peak-to-peak dither, % of f0 (0 = none).
    pub spread_pct: f64,
    /// A lab source present in the DUT scene but in no ambient sweep, or the reverse.
    pub intermittent: bool,
    /// Present in the DUT scene.
    pub in_dut: bool,
    /// Present in the ambient scenes.
    pub in_ambient: bool,
}

impl TruthFamily {
    /// Whether recall counts this family: in the DUT scene, resolved, at least
    /// [`MIN_HARMONICS`] visible harmonics.
    pub fn eligible(&self) -> bool {
        self.in_dut && self.resolved && self.harmonics_visible.len() >= MIN_HARMONICS
    }

    /// Whether at least [`MIN_HARMONICS`] lines stand [`STRONG_DB`] above the floor.
    pub fn strong(&self) -> bool {
        self.eligible()
            && self
                .lines
                .iter()
                .filter(|l| l.level_dbuv >= l.floor_dbuv + STRONG_DB)
                .count()
                >= MIN_HARMONICS
    }

    /// Smallest relative error of `f0_hz` to this family's accepted fundamentals.
    pub fn rel_error(&self, f0_hz: f64) -> f64 {
        std::iter::once(self.f0_hz)
            .chain(self.accept_f0_hz.iter().copied())
            .map(|t| ((f0_hz - t) / t).abs())
            .fold(f64::INFINITY, f64::min)
    }
}

/// One random case: the scenes to render, the truth, the limit and the file form.
#[derive(Debug, Clone, PartialEq)]
pub struct Case {
    /// The seed that reproduces the case.
    pub seed: u64,
    /// Kind of measurement.
    pub scenario: Scenario,
    /// The DUT measurement (board and lab sources).
    pub dut: Scene,
    /// One to three ambient sweeps (lab sources only), each with its own seed.
    pub ambient: Vec<Scene>,
    /// What a correct analysis reports.
    pub truth: Vec<TruthFamily>,
    /// How the DUT scan is written to a file and read back.
    pub form: WriteOptions,
    /// Built-in limit the case is judged against.
    pub limit_name: &'static str,
}

impl Case {
    /// The case's limit.
    ///
    /// # Errors
    /// [`SceneError::BadField`] if the name is not built in (a harness bug).
    pub fn limit(&self) -> Result<Limit, SceneError> {
        limit_of(self.limit_name)
    }

    /// Reader options a user would give for this form: the units when the file has no
    /// header naming them, else nothing.
    pub fn read_options(&self) -> ReadOptions {
        if self.form.header {
            ReadOptions::default()
        } else {
            ReadOptions {
                freq_unit: Some(self.form.freq_unit),
                level_unit: Some(self.form.level_unit),
                ..ReadOptions::default()
            }
        }
    }

    /// Renders the DUT scene and passes it through a file of the case's form.
    ///
    /// # Errors
    /// [`crate::Error::Scene`] when the scene does not render, [`crate::Error::Scan`] when the
    /// written file does not read back.
    pub fn dut_scan(&self) -> Result<Scan, crate::Error> {
        let scan = render(&self.dut)?;
        let text = write_scan_csv(&scan, &self.form);
        let file = format!("case-{}.csv", self.seed);
        Ok(read_scan_bytes(text.as_bytes(), &file, &self.read_options())?.scan)
    }

    /// Renders the ambient sweeps.
    ///
    /// # Errors
    /// [`SceneError`] when a scene does not render.
    pub fn ambient_scans(&self) -> Result<Vec<Scan>, SceneError> {
        self.ambient.iter().map(render).collect()
    }

    /// The analysis context: the case's limit and the given ambient scans.
    ///
    /// # Errors
    /// As [`Case::limit`].
    pub fn context(&self, ambient: Vec<Scan>) -> Result<Context, SceneError> {
        Ok(Context {
            limits: vec![self.limit()?],
            ambient,
            ..Context::default()
        })
    }
}

fn limit_of(name: &str) -> Result<Limit, SceneError> {
    builtin(name).ok_or_else(|| SceneError::BadField {
        file: "random case".to_string(),
        field: "limit".to_string(),
        value: name.to_string(),
        expected: "a built-in limit name".to_string(),
    })
}

// ---------------------------------------------------------------------------------------------
// Random draws

type Draw = ChaCha8Rng;

fn uniform(rng: &mut Draw, lo: f64, hi: f64) -> f64 {
    lo + (hi - lo) * rng.random::<f64>()
}

fn log_uniform(rng: &mut Draw, lo: f64, hi: f64) -> f64 {
    uniform(rng, lo.ln(), hi.ln()).exp()
}

fn chance(rng: &mut Draw, p: f64) -> bool {
    rng.random::<f64>() < p
}

/// An integer from `lo` to `hi` inclusive.
fn int(rng: &mut Draw, lo: usize, hi: usize) -> usize {
    if hi <= lo {
        lo
    } else {
        rng.random_range(lo..=hi)
    }
}

fn pick<T: Copy>(rng: &mut Draw, items: &[T], fallback: T) -> T {
    if items.is_empty() {
        return fallback;
    }
    items
        .get(rng.random_range(0..items.len()))
        .copied()
        .unwrap_or(fallback)
}

// ---------------------------------------------------------------------------------------------
// Ranges

/// Switching converters: (name, lowest f0, highest f0, common values). METHODS §10: offline
/// flyback 50-150 kHz (65, 100, 132 kHz common); PFC boost 50-150 kHz fixed; LLC 80-500 kHz;
/// non-isolated buck 300 kHz-3 MHz; automotive about 400 kHz or at least 2 MHz; LED drivers
/// DC-DC 200 kHz-2.2 MHz.
const CONVERTERS: [(&str, f64, f64, &[f64]); 7] = [
    ("flyback", 50e3, 150e3, &[65e3, 100e3, 132e3]),
    ("pfc boost", 50e3, 150e3, &[]),
    ("llc", 80e3, 500e3, &[]),
    ("buck", 300e3, 3e6, &[]),
    ("automotive buck", 380e3, 420e3, &[]),
    ("automotive buck", 2e6, 2.2e6, &[]),
    ("led driver", 200e3, 2.2e6, &[]),
];

/// Crystal and oscillator values, METHODS §10: 32.768 kHz RTC; 1.8432, 3.579545, 11.0592,
/// 19.6608 MHz divisor crystals; 4-50 MHz round values; 14.31818 MHz; 19.2/26/38.4 MHz TCXOs.
const CRYSTALS: [f64; 24] = [
    32.768e3, 1.8432e6, 3.579545e6, 4e6, 8e6, 11.0592e6, 12e6, 14.31818e6, 16e6, 19.2e6, 19.6608e6,
    20e6, 24e6, 25e6, 26e6, 27e6, 32e6, 38.4e6, 40e6, 48e6, 50e6, 12e6, 25e6, 48e6,
];

/// HF broadcasting bands in kHz, METHODS §7 (5 kHz channel steps there too).
const HF_BANDS_KHZ: [(u32, u32); 14] = [
    (2300, 2495),
    (3200, 3400),
    (3900, 4000),
    (4750, 5060),
    (5900, 6200),
    (7200, 7450),
    (9400, 9900),
    (11600, 12100),
    (13570, 13870),
    (15100, 15800),
    (17480, 17900),
    (18900, 19020),
    (21450, 21850),
    (25670, 26100),
];

/// A broadcast channel raster: (label, raster Hz, first channel Hz, last channel Hz).
type Raster = (&'static str, f64, f64, f64);
/// LF broadcasting, Region 1: 9 kHz raster 153-279 kHz (METHODS §7).
const LF_R1: Raster = ("LF+MW carriers, 9 kHz raster", 9e3, 153e3, 279e3);
/// MF broadcasting, Regions 1 and 3: 9 kHz raster 531-1602 kHz (METHODS §7).
const MW_9K: Raster = ("LF+MW carriers, 9 kHz raster", 9e3, 531e3, 1602e3);
/// MF broadcasting, Region 2: 10 kHz raster 530-1700 kHz (METHODS §7).
const MW_10K: Raster = ("MW carriers, 10 kHz raster", 10e3, 530e3, 1700e3);
/// FM broadcasting 87.5-108 MHz on a 100 kHz raster (common practice; the notes' §7 stops at
/// HF, so this range is the trade's figure, not a confirmed one).
const FM_100K: Raster = ("FM carriers, 100 kHz raster", 100e3, 87.6e6, 107.9e6);
/// Label of the shortwave carrier set (5 kHz raster, METHODS §7).
const SW_LABEL: &str = "SW carriers, 5 kHz raster";

/// CISPR 16-1-1 band B and C/D RBWs (METHODS §2).
const RBW_CONDUCTED_HZ: f64 = 9e3;
const RBW_RADIATED_HZ: f64 = 120e3;

// ---------------------------------------------------------------------------------------------
// Level model (declared readings; the renderer's model, see render.rs)

/// The Gaussian RBW's a = 4·ln2/B6² (1/Hz²).
fn rbw_a(rbw_hz: f64) -> f64 {
    4.0 * LN_2 / (rbw_hz * rbw_hz)
}

/// Gain of an in-phase comb at one of its lines: Σ_k exp(−a·(k·f0)²), |k| ≤ 2.5·B6/f0 + 1.
/// About 1 for f0 ≥ 2·B6, about B_imp/f0 = 1.0645·B6/f0 for a fine comb (Poisson sum).
fn comb_gain(f0_hz: f64, rbw_hz: f64) -> f64 {
    let a = rbw_a(rbw_hz);
    let k_max = (2.5 * rbw_hz / f0_hz).ceil() as i64 + 1;
    if k_max > 100_000 {
        return 1.0645 * rbw_hz / f0_hz;
    }
    (-k_max..=k_max)
        .map(|k| {
            let df = k as f64 * f0_hz;
            (-a * df * df).exp()
        })
        .sum()
}

/// Fraction of the power of a dithered harmonic inside the RBW at its centre: harmonic n of
/// width W = n·f0·spread, spread uniformly, read through |H|²:
/// (B_noise/W)·erf(√(2a)·W/2), B_noise = √(π/(2a)); with sub-lines (rate ≥ B6/2) at least
/// one sub-line's share 1/round(W/rate).
fn spread_fraction(p: &Periodic, n: f64, rbw_hz: f64) -> f64 {
    if p.spread_pct <= 0.0 {
        return 1.0;
    }
    let a = rbw_a(rbw_hz);
    let w = n * p.f0_hz * p.spread_pct / 100.0;
    let b_noise = (PI / (2.0 * a)).sqrt();
    let mut frac = (b_noise / w * erf((2.0 * a).sqrt() * w / 2.0)).min(1.0);
    let sublines = p.spread_rate_hz >= rbw_hz / 2.0 && p.f0_hz >= rbw_hz / 2.0;
    if sublines {
        frac = frac.max(1.0 / (w / p.spread_rate_hz).round().max(1.0));
    }
    frac
}

/// Rms reading of harmonic n relative to harmonic 1, dB: the trapezoid spectrum (METHODS §5,
/// τr = t_10-90/0.8), the coupling tilt, the dither loss and the in-RBW comb gain.
pub(crate) fn relative_db(p: &Periodic, duty: f64, n: u32, rbw_hz: f64) -> f64 {
    let t = 1.0 / p.f0_hz;
    let ramp = p.edge_time_s / 0.8;
    let c1 = trapezoid_harmonic_peak(1, 1.0, t, duty, ramp);
    let cn = trapezoid_harmonic_peak(n, 1.0, t, duty, ramp);
    let nu = f64::from(n);
    let gain = if p.spread_pct > 0.0 {
        1.0
    } else {
        comb_gain(p.f0_hz, rbw_hz)
    };
    20.0 * (cn / c1 * gain).log10()
        + p.coupling_db_per_decade * nu.log10()
        + 10.0 * spread_fraction(p, nu, rbw_hz).log10()
}

/// Harmonic numbers of f0 inside [start, stop].
fn harmonics_in(f0_hz: f64, s: &ScanSetting) -> std::ops::RangeInclusive<u32> {
    let lo = (s.start_hz / f0_hz).ceil().max(1.0);
    let hi = (s.stop_hz / f0_hz).floor().min(f64::from(u32::MAX));
    (lo as u32)..=(hi as u32)
}

/// Rms floor of the scene at `freq_hz`, dBµV (−300 without a floor).
pub(crate) fn floor_at(scene: &Scene, freq_hz: f64) -> f64 {
    match &scene.floor {
        Some(f) => f.level_dbuv + f.slope_db_per_decade * (freq_hz / scene.scan.start_hz).log10(),
        None => -300.0,
    }
}

/// The noise floor as the display shows it at `freq_hz`, dBµV: the floor's rms, raised for a
/// peak detector to the median of the largest envelope reading over its display bucket
/// ([`peak_noise_offset_db`]). A line must stand out of what the display shows, not of an rms
/// the display never draws.
fn displayed_floor_at(scene: &Scene, freq_hz: f64) -> f64 {
    let s = &scene.scan;
    let rms = floor_at(scene, freq_hz);
    if s.detector != Detector::Peak {
        return rms;
    }
    let corr_hz = crate::synth::render::noise_correlation_hz(s.rbw_hz, s.sweep_time_factor);
    rms + peak_noise_offset_db(step_at(s, freq_hz), corr_hz)
}

/// Rate (per Hz of sweep) at which a Rayleigh envelope crosses upwards the level ρ·rms, for
/// complex Gaussian noise whose normalised correlation has curvature β = −ρ''(0).
///
/// # Formula
/// ```text
/// N(ρ) = √(β/π)·ρ·exp(−ρ²)
/// ```
/// # Source
/// Rice's level-crossing rate of a Rayleigh envelope; with Clarke's correlation J0(2π·f_m·τ)
/// (β = 2π²·f_m²) it is the familiar √(2π)·f_m·ρ·exp(−ρ²) of fading channels (from memory).
pub(crate) fn envelope_upcrossing_rate(rho: f64, beta: f64) -> f64 {
    (beta / std::f64::consts::PI).sqrt() * rho * (-rho * rho).exp()
}

/// How far (dB) the peak detector's reading of noise sits above the noise rms: the median of
/// the largest envelope value over a bucket `width_hz` wide, for an envelope whose complex
/// correlation is exp(−Δf²/(2s²)) (s = `corr_hz`, β = 1/s²). The largest stays under ρ·rms when
/// the bucket starts under it and the envelope does not cross it upwards inside; with crossings
/// few and apart, they are counted as Poisson. Never below 0 (one reading's median lies 1.6 dB
/// under its rms, and a line is not easier to see for that).
///
/// # Formula
/// ```text
/// P(max < ρ) ≈ (1 − exp(−ρ²))·exp(−w·N(ρ));   offset = max(0, 10·log10 ρ²_median)
/// ```
/// # Source
/// Rice's level-crossing rate ([`envelope_upcrossing_rate`]) with the Poisson approximation of
/// the crossings, the usual estimate of the distribution of the maximum of a smooth process.
pub(crate) fn peak_noise_offset_db(width_hz: f64, corr_hz: f64) -> f64 {
    let beta = 1.0 / (corr_hz * corr_hz).max(f64::MIN_POSITIVE);
    let below = |z: f64| {
        (1.0 - (-z).exp()) * (-width_hz.max(0.0) * envelope_upcrossing_rate(z.sqrt(), beta)).exp()
    };
    // P(max < ρ) rises with ρ² from ln 2 (where it is at most 1/2) on
    let (mut lo, mut hi) = (std::f64::consts::LN_2, 60.0);
    for _ in 0..60 {
        let mid = 0.5 * (lo + hi);
        if below(mid) < 0.5 {
            lo = mid;
        } else {
            hi = mid;
        }
    }
    (10.0 * (0.5 * (lo + hi)).log10()).max(0.0)
}

/// What a line at `freq_hz` must stand out of, dBµV: the displayed floor power-summed with every comb
/// of the scene too fine to resolve there (its coherent level through the RBW fills every bucket,
/// so a line under it does not show).
fn background_at(scene: &Scene, freq_hz: f64) -> f64 {
    let s = &scene.scan;
    let mut power = 10f64.powf(displayed_floor_at(scene, freq_hz) / 10.0);
    let sources = scene
        .switching
        .iter()
        .map(|p| (p, false))
        .chain(scene.clock.iter().map(|p| (p, true)));
    // the display bucket of the point that shows a line at `freq_hz`: a peak detector reads
    // the largest of the background over it, other detectors about its mean
    let half = step_at(s, freq_hz) / 2.0;
    let peak = s.detector == Detector::Peak;
    for (p, is_clock) in sources {
        let n = (freq_hz / p.f0_hz).round().max(1.0) as u32;
        let overlap = overlapping_harmonics(p, n);
        if (p.f0_hz > resolution(s, freq_hz) && overlap <= 1.0) || freq_hz < p.f0_hz {
            continue;
        }
        let duty = p.duty.unwrap_or(if is_clock { 0.5 } else { 0.0 });
        // dithered harmonics wider than the spacing overlap: their powers add; the reading is
        // the mean over the harmonics that merge there, not harmonic n alone, which may sit in
        // a null of the trapezoid spectrum while its neighbours do not
        let merged = overlap.max(s.rbw_hz / p.f0_hz);
        let reading = |k: u32| {
            p.fundamental_dbuv
                + merged_relative_db(p, duty, k, merged, s.rbw_hz)
                + 10.0 * overlapping_harmonics(p, k).max(1.0).log10()
        };
        let lo = ((freq_hz - half) / p.f0_hz).round().max(1.0) as u32;
        let hi = (((freq_hz + half) / p.f0_hz).round() as u32).max(lo);
        let stride = ((hi - lo) / 16).max(1) as usize;
        let readings = (lo..=hi).step_by(stride).map(reading);
        let level = if peak {
            readings.fold(f64::NEG_INFINITY, f64::max)
        } else {
            let (sum, count) =
                readings.fold((0.0, 0.0), |(s, c), l| (s + 10f64.powf(l / 10.0), c + 1.0));
            10.0 * (sum / f64::max(count, 1.0)).log10()
        };
        if level.is_finite() {
            power += 10f64.powf(level / 10.0);
        }
    }
    10.0 * power.log10()
}

/// Mean of [`relative_db`] in power over the harmonics around `n` that merge into one reading
/// (`merged` of them, at least n−1..n+1; at most 33 sampled evenly), dB.
fn merged_relative_db(p: &Periodic, duty: f64, n: u32, merged: f64, rbw_hz: f64) -> f64 {
    let half = (merged / 2.0).ceil().max(1.0) as u32;
    let lo = n.saturating_sub(half).max(1);
    let hi = n.saturating_add(half);
    let stride = ((hi - lo) / 32).max(1);
    let (mut sum, mut count) = (0.0, 0u32);
    for k in (lo..=hi).step_by(stride as usize) {
        sum += 10f64.powf(relative_db(p, duty, k, rbw_hz) / 10.0);
        count += 1;
    }
    10.0 * (sum / f64::from(count.max(1))).log10()
}

/// How many dithered harmonics of `p` overlap at harmonic `n`: its width n·f0·spread over the
/// spacing f0 (below 1 they stand apart).
fn overlapping_harmonics(p: &Periodic, n: u32) -> f64 {
    f64::from(n) * p.spread_pct / 100.0
}

/// Display step at `freq_hz`, Hz.
pub fn step_at(s: &ScanSetting, freq_hz: f64) -> f64 {
    let gaps = s.points.saturating_sub(1).max(1) as f64;
    match s.spacing {
        Spacing::Linear => (s.stop_hz - s.start_hz) / gaps,
        Spacing::Log => freq_hz * ((s.stop_hz / s.start_hz).powf(1.0 / gaps) - 1.0),
    }
}

/// Level (dBµV) that puts the worst in-span harmonic of `p` at `margin_db` under the limit,
/// kept within −20..=140 dBµV; `None` when no harmonic lies in the span and the limit.
fn fundamental_for(
    p: &Periodic,
    duty: f64,
    s: &ScanSetting,
    limit: &Limit,
    margin_db: f64,
) -> Option<f64> {
    let worst = harmonics_in(p.f0_hz, s)
        .filter_map(|n| {
            let l = limit.at(f64::from(n) * p.f0_hz)?;
            let r = relative_db(p, duty, n, s.rbw_hz);
            r.is_finite().then_some(r - l)
        })
        .fold(f64::NEG_INFINITY, f64::max);
    worst
        .is_finite()
        .then(|| (-margin_db - worst).clamp(-20.0, 140.0))
}

// ---------------------------------------------------------------------------------------------
// Sources drawn for a case

/// A periodic source with its role in the case.
#[derive(Debug, Clone)]
struct PeriodicSource {
    p: Periodic,
    is_clock: bool,
    kind: Kind,
    origin: Origin,
    in_dut: bool,
    in_ambient: bool,
}

/// A broadcast carrier with its raster and presence.
#[derive(Debug, Clone)]
struct CarrierSource {
    c: Carrier,
    label: &'static str,
    raster_hz: f64,
    in_dut: bool,
    in_ambient: bool,
}

/// Worst-margin target of a source: failing by 0-15 dB with probability `p_fail`, else passing
/// by 0-`pass_db` dB.
fn target_margin(rng: &mut Draw, p_fail: f64, pass_db: f64) -> f64 {
    if chance(rng, p_fail) {
        -uniform(rng, 0.0, 15.0)
    } else {
        uniform(rng, 0.0, pass_db)
    }
}

/// Sets the level of `p` for a target margin; `None` when it has no harmonic in the span.
fn levelled(
    mut p: Periodic,
    duty: f64,
    s: &ScanSetting,
    limit: &Limit,
    m: f64,
) -> Option<Periodic> {
    p.fundamental_dbuv = fundamental_for(&p, duty, s, limit, m)?;
    Some(p)
}

/// Edge time within the trapezoid's limit τr ≤ min(duty, 1 − duty)·T (the scene check).
fn fit_edge(edge_s: f64, f0_hz: f64, duty: f64) -> f64 {
    edge_s.min(0.9 * 0.8 * duty.min(1.0 - duty) / f0_hz)
}

/// Coupling tilt, dB/decade: conducted −10..+10 (LISN and filter path, common practice);
/// radiated +20..+40 (an electrically small radiator gains 20-40 dB/decade).
fn coupling(rng: &mut Draw, conducted: bool) -> f64 {
    if conducted {
        uniform(rng, -10.0, 10.0)
    } else {
        uniform(rng, 20.0, 40.0)
    }
}

fn converter(
    rng: &mut Draw,
    s: &ScanSetting,
    limit: &Limit,
    conducted: bool,
) -> Option<PeriodicSource> {
    let (name, lo, hi, common) = pick(rng, &CONVERTERS, CONVERTERS[0]);
    let f0 = if !common.is_empty() && chance(rng, 0.4) {
        // a common value with a ±2 % oscillator tolerance
        pick(rng, common, lo) * (1.0 + uniform(rng, -0.02, 0.02))
    } else {
        log_uniform(rng, lo, hi)
    };
    // LLC half bridges run near 50 % duty; the others 0.1-0.6 (brief; METHODS §5 trapezoid)
    let duty = if name == "llc" {
        uniform(rng, 0.45, 0.5)
    } else {
        uniform(rng, 0.1, 0.6)
    };
    // 10-90 % edges 5-100 ns
    let edge = fit_edge(log_uniform(rng, 5e-9, 100e-9), f0, duty);
    // dither in about 30 % of converters, 0.5-8 % total spread, rate 0 (continuous) or 1-30 kHz
    let (spread, rate) = if chance(rng, 0.3) {
        let rate = if chance(rng, 0.5) {
            0.0
        } else {
            log_uniform(rng, 1e3, 30e3)
        };
        (uniform(rng, 0.5, 8.0), rate)
    } else {
        (0.0, 0.0)
    };
    let p = Periodic {
        name: Some(format!("{name} {:.1} kHz", f0 / 1e3)),
        f0_hz: f0,
        duty: Some(duty),
        edge_time_s: edge,
        fundamental_dbuv: 0.0,
        coupling_db_per_decade: coupling(rng, conducted),
        spread_pct: spread,
        spread_rate_hz: rate,
        max_harmonic: 0,
    };
    let m = target_margin(rng, 0.6, 10.0);
    Some(PeriodicSource {
        p: levelled(p, duty, s, limit, m)?,
        is_clock: false,
        kind: Kind::Switching,
        origin: Origin::Dut,
        in_dut: true,
        in_ambient: false,
    })
}

fn clock(
    rng: &mut Draw,
    s: &ScanSetting,
    limit: &Limit,
    conducted: bool,
) -> Option<PeriodicSource> {
    let nominal = pick(rng, &CRYSTALS, 25e6);
    if nominal >= s.stop_hz || (!conducted && nominal < 1e6) {
        return None;
    }
    // ±50 ppm crystal error; duty 0.5 or near it; 10-90 % edges 1-5 ns
    let f0 = nominal * (1.0 + uniform(rng, -50e-6, 50e-6));
    let duty = if chance(rng, 0.6) {
        0.5
    } else {
        uniform(rng, 0.45, 0.55)
    };
    let edge = fit_edge(log_uniform(rng, 1e-9, 5e-9), f0, duty);
    let p = Periodic {
        name: Some(format!("clock {:.4} MHz", nominal / 1e6)),
        f0_hz: f0,
        duty: Some(duty),
        edge_time_s: edge,
        fundamental_dbuv: 0.0,
        coupling_db_per_decade: coupling(rng, conducted),
        spread_pct: 0.0,
        spread_rate_hz: 0.0,
        max_harmonic: 0,
    };
    let m = target_margin(rng, if conducted { 0.35 } else { 0.5 }, 15.0);
    Some(PeriodicSource {
        p: levelled(p, duty, s, limit, m)?,
        is_clock: true,
        kind: Kind::Clock,
        origin: Origin::Dut,
        in_dut: true,
        in_ambient: false,
    })
}

/// A comb finer than the RBW: a 2-8 kHz burst or PWM comb conducted, a 20-100 kHz converter
/// radiated (METHODS §10 flyback range reaches down to 50 kHz).
fn fine_comb(
    rng: &mut Draw,
    s: &ScanSetting,
    limit: &Limit,
    conducted: bool,
) -> Option<PeriodicSource> {
    let f0 = if conducted {
        log_uniform(rng, 2e3, 8e3)
    } else {
        log_uniform(rng, 20e3, 100e3)
    };
    let duty = uniform(rng, 0.1, 0.6);
    let edge = fit_edge(log_uniform(rng, 5e-9, 100e-9), f0, duty);
    let p = Periodic {
        name: Some(format!("pwm comb {:.2} kHz", f0 / 1e3)),
        f0_hz: f0,
        duty: Some(duty),
        edge_time_s: edge,
        fundamental_dbuv: 0.0,
        coupling_db_per_decade: coupling(rng, conducted),
        spread_pct: 0.0,
        spread_rate_hz: 0.0,
        max_harmonic: 0,
    };
    let m = target_margin(rng, 0.5, 10.0);
    Some(PeriodicSource {
        p: levelled(p, duty, s, limit, m)?,
        is_clock: false,
        kind: Kind::Switching,
        origin: Origin::Dut,
        in_dut: true,
        in_ambient: false,
    })
}

/// Presence of an ambient source: (in the DUT scene, in the ambient scenes, intermittent).
fn presence(rng: &mut Draw, p_intermittent: f64) -> (bool, bool, bool) {
    if chance(rng, p_intermittent) {
        if chance(rng, 0.5) {
            (true, false, true)
        } else {
            (false, true, true)
        }
    } else {
        (true, true, false)
    }
}

/// An electronic-ballast comb, 20-100 kHz (METHODS §10), half-bridge duty near 0.5, edges
/// 20-200 ns; mostly under the limit (ambient); intermittent in 30 % of cases.
fn lighting(rng: &mut Draw, s: &ScanSetting, limit: &Limit) -> Option<PeriodicSource> {
    let f0 = log_uniform(rng, 20e3, 100e3);
    let duty = uniform(rng, 0.45, 0.5);
    let edge = fit_edge(log_uniform(rng, 20e-9, 200e-9), f0, duty);
    let p = Periodic {
        name: Some(format!("ballast {:.1} kHz", f0 / 1e3)),
        f0_hz: f0,
        duty: Some(duty),
        edge_time_s: edge,
        fundamental_dbuv: 0.0,
        coupling_db_per_decade: uniform(rng, -10.0, 10.0),
        spread_pct: 0.0,
        spread_rate_hz: 0.0,
        max_harmonic: 0,
    };
    let m = uniform(rng, -5.0, 25.0);
    let (in_dut, in_ambient, _) = presence(rng, 0.3);
    Some(PeriodicSource {
        p: levelled(p, duty, s, limit, m)?,
        is_clock: false,
        kind: Kind::Lighting,
        origin: Origin::Ambient,
        in_dut,
        in_ambient,
    })
}

/// `count` distinct channels of `r` inside the span, at least `min_gap` channels apart.
fn channels(rng: &mut Draw, r: Raster, s: &ScanSetting, count: usize, min_gap: f64) -> Vec<f64> {
    let (_, step, first, last) = r;
    let lo = first.max(s.start_hz);
    let hi = last.min(s.stop_hz);
    let mut out: Vec<f64> = Vec::new();
    if hi < lo {
        return out;
    }
    let (k_lo, k_hi) = ((lo / step).ceil() as usize, (hi / step).floor() as usize);
    for _ in 0..count * 4 {
        if out.len() >= count {
            break;
        }
        let f = int(rng, k_lo, k_hi) as f64 * step;
        if out.iter().all(|g| (g - f).abs() >= min_gap * step) {
            out.push(f);
        }
    }
    out
}

#[allow(clippy::too_many_arguments)]
fn carrier(
    f: f64,
    label: &'static str,
    raster_hz: f64,
    level: f64,
    am: f64,
    fade: f64,
    (in_dut, in_ambient): (bool, bool),
) -> CarrierSource {
    CarrierSource {
        c: Carrier {
            name: None,
            freq_hz: f,
            level_dbuv: level,
            am_depth: am,
            fade_db: fade,
        },
        label,
        raster_hz,
        in_dut,
        in_ambient,
    }
}

/// Conducted broadcast ambient: LF (Region 1) and MW carriers on the 9 kHz raster or MW on
/// the 10 kHz raster (Region 2), shortwave carriers on 5 kHz steps (METHODS §7). Levels at the
/// LISN: LF/MW 20-60 dBµV, SW 15-50 dBµV; fading sd MW 0-2 dB, SW 1-6 dB; SW stations switch
/// on and off (15 % intermittent).
fn conducted_carriers(rng: &mut Draw, s: &ScanSetting) -> Vec<CarrierSource> {
    let mut out = Vec::new();
    let region2 = chance(rng, 0.3);
    let mw = if region2 { MW_10K } else { MW_9K };
    let n_mw = int(rng, 0, 8);
    for f in channels(rng, mw, s, n_mw, 2.0) {
        let (l, am, fade) = (
            uniform(rng, 20.0, 60.0),
            uniform(rng, 0.1, 0.6),
            uniform(rng, 0.0, 2.0),
        );
        out.push(carrier(f, mw.0, mw.1, l, am, fade, (true, true)));
    }
    if !region2 && chance(rng, 0.5) {
        let n_lf = int(rng, 0, 2);
        for f in channels(rng, LF_R1, s, n_lf, 2.0) {
            let (l, am, fade) = (
                uniform(rng, 20.0, 55.0),
                uniform(rng, 0.1, 0.6),
                uniform(rng, 0.0, 1.0),
            );
            out.push(carrier(f, LF_R1.0, LF_R1.1, l, am, fade, (true, true)));
        }
    }
    let n_sw = int(rng, 0, 6);
    for _ in 0..n_sw {
        let (lo, hi) = pick(rng, &HF_BANDS_KHZ, HF_BANDS_KHZ[4]);
        let r: Raster = (SW_LABEL, 5e3, f64::from(lo) * 1e3, f64::from(hi) * 1e3);
        let Some(&f) = channels(rng, r, s, 1, 1.0).first() else {
            continue;
        };
        if out
            .iter()
            .any(|c: &CarrierSource| (c.c.freq_hz - f).abs() < 1.0)
        {
            continue;
        }
        let (l, am, fade) = (
            uniform(rng, 15.0, 50.0),
            uniform(rng, 0.1, 0.6),
            uniform(rng, 1.0, 6.0),
        );
        let (d, a, _) = presence(rng, 0.15);
        out.push(carrier(f, SW_LABEL, 5e3, l, am, fade, (d, a)));
    }
    out
}

/// Radiated broadcast ambient: 0-10 FM carriers, 30-75 dBµV/m, FM being constant-envelope
/// (no AM), fading sd 0-1.5 dB, at least 300 kHz apart.
fn fm_carriers(rng: &mut Draw, s: &ScanSetting) -> Vec<CarrierSource> {
    let n = int(rng, 0, 10);
    channels(rng, FM_100K, s, n, 3.0)
        .into_iter()
        .map(|f| {
            let (l, fade) = (uniform(rng, 30.0, 75.0), uniform(rng, 0.0, 1.5));
            carrier(f, FM_100K.0, FM_100K.1, l, 0.0, fade, (true, true))
        })
        .collect()
}

/// Raster of the allocation holding `freq_hz` in this scenario, if any.
fn raster_at(freq_hz: f64, conducted: bool, region2: bool) -> Option<Raster> {
    let inside = |r: Raster| freq_hz >= r.2 && freq_hz <= r.3;
    if !conducted {
        return inside(FM_100K).then_some(FM_100K);
    }
    let mw = if region2 { MW_10K } else { MW_9K };
    if inside(mw) {
        return Some(mw);
    }
    if !region2 && inside(LF_R1) {
        return Some(LF_R1);
    }
    HF_BANDS_KHZ.iter().find_map(|&(lo, hi)| {
        let r: Raster = (SW_LABEL, 5e3, f64::from(lo) * 1e3, f64::from(hi) * 1e3);
        inside(r).then_some(r)
    })
}

/// Carriers 1-3 RBW from visible DUT harmonics that fall in a broadcast allocation (the case
/// of an ambient carrier next to a DUT line), on the allocation's raster.
fn near_carriers(
    rng: &mut Draw,
    scene: &Scene,
    sources: &[PeriodicSource],
    existing: &[CarrierSource],
    conducted: bool,
) -> Vec<CarrierSource> {
    let s = &scene.scan;
    let region2 = existing.iter().any(|c| c.raster_hz == 10e3);
    let mut out: Vec<CarrierSource> = Vec::new();
    let mut candidates: Vec<f64> = Vec::new();
    for src in sources.iter().filter(|x| x.origin == Origin::Dut) {
        for line in visible_lines(&src.p, src.is_clock, scene) {
            if raster_at(line.freq_hz, conducted, region2).is_some() {
                candidates.push(line.freq_hz);
            }
        }
    }
    let wanted = int(rng, 1, 2);
    for _ in 0..wanted {
        let h = pick(rng, &candidates, 0.0);
        let Some(r) = raster_at(h, conducted, region2) else {
            continue;
        };
        let sign = if chance(rng, 0.5) { 1.0 } else { -1.0 };
        let target = h + sign * uniform(rng, 1.0, 3.0) * s.rbw_hz;
        let f = (target / r.1).round() * r.1;
        let d = (f - h).abs();
        let taken = existing
            .iter()
            .chain(out.iter())
            .any(|c| (c.c.freq_hz - f).abs() < 1.0);
        if d < s.rbw_hz || d > 3.0 * s.rbw_hz || f < r.2 || f > r.3 || taken {
            continue;
        }
        if f < s.start_hz || f > s.stop_hz {
            continue;
        }
        let l = if conducted {
            uniform(rng, 20.0, 55.0)
        } else {
            uniform(rng, 30.0, 70.0)
        };
        let am = if conducted {
            uniform(rng, 0.1, 0.6)
        } else {
            0.0
        };
        let label = if r.1 == 9e3 { MW_9K.0 } else { r.0 };
        out.push(carrier(
            f,
            label,
            r.1,
            l,
            am,
            uniform(rng, 0.0, 2.0),
            (true, true),
        ));
    }
    out
}

// ---------------------------------------------------------------------------------------------
// The case

fn draw_setting(rng: &mut Draw, opts: &CaseOptions, seed: u64) -> (Scenario, ScanSetting) {
    let (scenario, start, stop, rbw) = if opts.conducted {
        let zoom = opts.zoom.unwrap_or_else(|| chance(rng, 0.4));
        if !zoom {
            (Scenario::ConductedFull, 150e3, 30e6, RBW_CONDUCTED_HZ)
        } else if chance(rng, 0.5) {
            // at least a decade inside 150 kHz-30 MHz
            let a = log_uniform(rng, 150e3, 3e6);
            let b = a * 10f64.powf(uniform(rng, 1.0, (30e6 / a).log10()));
            (Scenario::ConductedZoom, a, b.min(30e6), RBW_CONDUCTED_HZ)
        } else {
            // a zoom around one region, ×/÷ 1.3-3 about its centre
            let c = log_uniform(rng, 200e3, 25e6);
            let k = uniform(rng, 1.3, 3.0);
            (
                Scenario::ConductedZoom,
                (c / k).max(150e3),
                (c * k).min(30e6),
                RBW_CONDUCTED_HZ,
            )
        }
    } else {
        (Scenario::Radiated, 30e6, 1e9, RBW_RADIATED_HZ)
    };
    let mut points = if chance(rng, 0.7) {
        pick(rng, &[601, 1001, 6635, 10001], 1001)
    } else {
        int(rng, 601, 10001)
    };
    if let Some(m) = opts.max_points {
        points = points.min(m.max(2));
    }
    let spacing = if chance(rng, 0.2) {
        Spacing::Log
    } else {
        Spacing::Linear
    };
    // the average detector in 15 % of scans, and only with a step ≤ RBW/2 (METHODS §9): with
    // coarser steps it averages a line over a bucket wider than the RBW
    let fine_step = {
        let probe = ScanSetting {
            start_hz: start,
            stop_hz: stop,
            points,
            spacing,
            rbw_hz: rbw,
            vbw_hz: None,
            detector: Detector::Peak,
            sweeps: 1,
            seed,
            role: Role::Dut,
            quantity: Quantity::Voltage,
            sweep_time_factor: 2.5,
        };
        step_at(&probe, stop) <= rbw / 2.0
    };
    let detector = if fine_step && chance(rng, 0.15) {
        Detector::Average
    } else {
        Detector::Peak
    };
    let sweeps = if chance(rng, 0.25) { int(rng, 2, 3) } else { 1 };
    let setting = ScanSetting {
        start_hz: start,
        stop_hz: stop,
        points,
        spacing,
        rbw_hz: rbw,
        vbw_hz: Some(if opts.conducted { 30e3 } else { 300e3 }),
        detector,
        sweeps,
        seed,
        role: Role::Dut,
        quantity: if opts.conducted {
            Quantity::Voltage
        } else {
            Quantity::FieldStrength
        },
        sweep_time_factor: 2.5,
    };
    (scenario, setting)
}

/// Limit of the case: Class B three times as often as Class A (METHODS §1; radiated tables
/// are built in).
fn draw_limit(rng: &mut Draw, conducted: bool) -> &'static str {
    if conducted {
        pick(
            rng,
            &[
                "cispr32-b-qp",
                "cispr32-b-qp",
                "cispr32-b-qp",
                "cispr32-a-qp",
                "cispr32-b-av",
            ],
            "cispr32-b-qp",
        )
    } else {
        pick(
            rng,
            &[
                "cispr32-b-rad-3m",
                "cispr32-b-rad-3m",
                "cispr32-b-rad-3m",
                "cispr32-a-rad-3m",
                "cispr32-b-rad-10m",
            ],
            "cispr32-b-rad-3m",
        )
    }
}

/// A file form: any frequency unit, level unit dBµV/dBm/dBmV (radiated: dBµV/m, the only unit
/// that keeps field strength), any delimiter, decimal comma with `;` or tab, preamble style and
/// header drawn.
fn draw_form(rng: &mut Draw, conducted: bool) -> WriteOptions {
    let freq_unit = pick(
        rng,
        &[FreqUnit::Hz, FreqUnit::KHz, FreqUnit::MHz],
        FreqUnit::Hz,
    );
    let level_unit = if conducted {
        pick(
            rng,
            &[LevelUnit::DbUv, LevelUnit::DbM, LevelUnit::DbMv],
            LevelUnit::DbUv,
        )
    } else {
        LevelUnit::DbUvPerM
    };
    let delimiter = pick(
        rng,
        &[Delimiter::Comma, Delimiter::Semicolon, Delimiter::Tab],
        Delimiter::Comma,
    );
    let decimal_comma = delimiter != Delimiter::Comma && chance(rng, 0.5);
    WriteOptions {
        freq_unit,
        level_unit,
        delimiter,
        decimal_comma,
        instrument_preamble: chance(rng, 0.5),
        header: chance(rng, 0.75),
    }
}

/// Draws case `seed`.
///
/// # Errors
/// [`SceneError`] if a drawn scene fails [`Scene::validate`] or the limit is unknown (both
/// harness bugs; every draw is kept in range).
pub fn random_case(seed: u64, opts: &CaseOptions) -> Result<Case, SceneError> {
    let mut rng = Draw::seed_from_u64(seed);
    let base_seed = rng.random::<u64>() >> 1;
    let (scenario, scan) = draw_setting(&mut rng, opts, base_seed);
    let limit_name = draw_limit(&mut rng, opts.conducted);
    let limit = limit_of(limit_name)?;
    let conducted = opts.conducted;
    // floor -10..10 dBµV rms; tilt conducted −4..+2 dB/decade, radiated 0..+10 dB/decade (the
    // antenna factor rises with frequency)
    let floor = Floor {
        level_dbuv: uniform(&mut rng, -10.0, 10.0),
        slope_db_per_decade: if conducted {
            uniform(&mut rng, -4.0, 2.0)
        } else {
            uniform(&mut rng, 0.0, 10.0)
        },
    };
    let mut dut = Scene {
        title: Some(format!("random case {seed}")),
        name: Some(format!("case-{seed}")),
        scan,
        floor: Some(floor),
        switching: Vec::new(),
        clock: Vec::new(),
        carrier: Vec::new(),
        hump: Vec::new(),
        output: None,
        file: format!("case-{seed}"),
    };
    let sources = draw_periodic(&mut rng, &dut.scan, &limit, conducted);
    let mut carriers = if conducted {
        conducted_carriers(&mut rng, &dut.scan)
    } else {
        fm_carriers(&mut rng, &dut.scan)
    };
    if chance(&mut rng, 0.4) {
        let near = near_carriers(&mut rng, &dut, &sources, &carriers, conducted);
        carriers.extend(near);
    }
    for src in sources.iter().filter(|x| x.in_dut) {
        if src.is_clock {
            dut.clock.push(src.p.clone());
        } else {
            dut.switching.push(src.p.clone());
        }
    }
    dut.carrier = carriers
        .iter()
        .filter(|c| c.in_dut)
        .map(|c| c.c.clone())
        .collect();
    dut.validate()?;
    let ambient = ambient_scenes(&mut rng, &dut, &sources, &carriers)?;
    let mut truth: Vec<TruthFamily> = sources
        .iter()
        .map(|x| periodic_truth(x, &dut, &limit))
        .collect();
    truth.extend(carrier_truth(&carriers, &dut, &limit));
    Ok(Case {
        seed,
        scenario,
        form: draw_form(&mut rng, conducted),
        dut,
        ambient,
        truth,
        limit_name,
    })
}

/// Board and lighting sources. Conducted: 1-3 converters, 0-2 clocks; radiated: 0-2
/// converters, 1-4 clocks; a fine comb in 25 % of cases; a ballast comb in 40 % (conducted)
/// or 30 % (radiated) of cases.
fn draw_periodic(
    rng: &mut Draw,
    s: &ScanSetting,
    limit: &Limit,
    conducted: bool,
) -> Vec<PeriodicSource> {
    let (n_conv, n_clk) = if conducted {
        (int(rng, 1, 3), int(rng, 0, 2))
    } else {
        (pick(rng, &[0, 1, 1, 2, 2], 1), int(rng, 1, 4))
    };
    let mut out = Vec::new();
    for _ in 0..n_conv {
        out.extend(converter(rng, s, limit, conducted));
    }
    for _ in 0..n_clk {
        out.extend(clock(rng, s, limit, conducted));
    }
    if chance(rng, 0.25) {
        out.extend(fine_comb(rng, s, limit, conducted));
    }
    if chance(rng, if conducted { 0.4 } else { 0.3 }) {
        out.extend(lighting(rng, s, limit));
    }
    out
}

/// 1-3 ambient sweeps: the DUT scene's setting with another seed, one sweep each, lab
/// sources only.
fn ambient_scenes(
    rng: &mut Draw,
    dut: &Scene,
    sources: &[PeriodicSource],
    carriers: &[CarrierSource],
) -> Result<Vec<Scene>, SceneError> {
    let count = pick(rng, &[1, 1, 2, 2, 3], 1);
    let mut out = Vec::with_capacity(count);
    for k in 0..count {
        let mut a = dut.clone();
        a.title = Some(format!("ambient {} of {}", k + 1, dut.label()));
        a.name = Some(format!("{}-ambient-{}", dut.label(), k + 1));
        a.file = a.name.clone().unwrap_or_default();
        a.scan.role = Role::Ambient;
        a.scan.sweeps = 1;
        a.scan.seed = rng.random::<u64>() >> 1;
        a.clock.clear();
        a.switching = sources
            .iter()
            .filter(|x| x.in_ambient && x.origin == Origin::Ambient)
            .map(|x| x.p.clone())
            .collect();
        a.carrier = carriers
            .iter()
            .filter(|c| c.in_ambient)
            .map(|c| c.c.clone())
            .collect();
        a.validate()?;
        out.push(a);
    }
    Ok(out)
}

/// Visible lines of a periodic source in `scene` (declared levels).
fn visible_lines(p: &Periodic, is_clock: bool, scene: &Scene) -> Vec<TruthLine> {
    let duty = p.duty.unwrap_or(if is_clock { 0.5 } else { 0.0 });
    let s = &scene.scan;
    harmonics_in(p.f0_hz, s)
        .filter_map(|n| {
            let freq_hz = f64::from(n) * p.f0_hz;
            let level_dbuv = p.fundamental_dbuv + relative_db(p, duty, n, s.rbw_hz);
            // an unresolved comb is its own background: compare it with the floor alone
            let floor_dbuv = if p.f0_hz > resolution(s, freq_hz) {
                background_at(scene, freq_hz)
            } else {
                displayed_floor_at(scene, freq_hz)
            };
            // a dithered harmonic wider than the spacing has merged with its neighbours into a
            // continuum: it is part of the background, not a line
            let apart = overlapping_harmonics(p, n) <= 1.0;
            let masked = p.f0_hz > resolution(s, freq_hz)
                && stronger_line_near(scene, freq_hz, level_dbuv, Some(p.f0_hz), None);
            (apart && !masked && level_dbuv.is_finite() && level_dbuv >= floor_dbuv + VISIBLE_DB)
                .then_some(TruthLine {
                    harmonic: n,
                    freq_hz,
                    level_dbuv,
                    floor_dbuv,
                })
        })
        .collect()
}

/// Whether another source's resolved line within half the resolution distance of `freq_hz`
/// (max(RBW, display step)), or a dithered harmonic whose plateau reaches that close, reads
/// stronger than `level_dbuv`: the two show as one peak, at the stronger one, so the weaker is
/// not a line of its own. `own_f0` / `own_carrier` name the line's own source, which is
/// skipped.
fn stronger_line_near(
    scene: &Scene,
    freq_hz: f64,
    level_dbuv: f64,
    own_f0: Option<f64>,
    own_carrier: Option<f64>,
) -> bool {
    let s = &scene.scan;
    let near = resolution(s, freq_hz) / 2.0;
    let periodic = scene
        .switching
        .iter()
        .map(|p| (p, false))
        .chain(scene.clock.iter().map(|p| (p, true)));
    for (q, is_clock) in periodic {
        if own_f0 == Some(q.f0_hz) || q.f0_hz <= resolution(s, freq_hz) {
            continue;
        }
        let k = (freq_hz / q.f0_hz).round().max(1.0) as u32;
        // a dithered harmonic covers its whole plateau, k·f0·spread wide
        let half_plateau = 0.5 * f64::from(k) * q.f0_hz * q.spread_pct / 100.0;
        if (f64::from(k) * q.f0_hz - freq_hz).abs() >= near + half_plateau
            || overlapping_harmonics(q, k) > 1.0
        {
            continue;
        }
        let duty = q.duty.unwrap_or(if is_clock { 0.5 } else { 0.0 });
        if q.fundamental_dbuv + relative_db(q, duty, k, s.rbw_hz) > level_dbuv {
            return true;
        }
    }
    scene.carrier.iter().any(|c| {
        own_carrier != Some(c.freq_hz)
            && (c.freq_hz - freq_hz).abs() < near
            && c.level_dbuv > level_dbuv
    })
}

fn worst_margin(lines: &[TruthLine], limit: &Limit) -> Option<f64> {
    lines
        .iter()
        .filter_map(|l| limit.at(l.freq_hz).map(|x| x - l.level_dbuv))
        .reduce(f64::min)
}

/// Resolution distance at `freq_hz`: 2·max(RBW, display step).
pub(crate) fn resolution(s: &ScanSetting, freq_hz: f64) -> f64 {
    2.0 * s.rbw_hz.max(step_at(s, freq_hz))
}

fn periodic_truth(src: &PeriodicSource, dut: &Scene, limit: &Limit) -> TruthFamily {
    let lines = if src.in_dut {
        visible_lines(&src.p, src.is_clock, dut)
    } else {
        Vec::new()
    };
    let s = &dut.scan;
    let at = match lines.get(lines.len() / 2) {
        Some(l) => l.freq_hz,
        None => (s.start_hz * s.stop_hz).sqrt(),
    };
    TruthFamily {
        label: src.p.name.clone().unwrap_or_default(),
        f0_hz: src.p.f0_hz,
        accept_f0_hz: Vec::new(),
        kind: src.kind,
        origin: src.origin,
        harmonics_visible: lines.iter().map(|l| l.harmonic).collect(),
        resolved: src.p.f0_hz > resolution(s, at),
        worst_margin_db: worst_margin(&lines, limit),
        spread_pct: src.p.spread_pct,
        intermittent: src.origin == Origin::Ambient && src.in_dut != src.in_ambient,
        in_dut: src.in_dut,
        in_ambient: src.in_ambient,
        lines,
    }
}

fn gcd(a: u64, b: u64) -> u64 {
    if b == 0 { a } else { gcd(b, a % b) }
}

/// One truth family per carrier set (same label), f0 = its raster.
fn carrier_truth(carriers: &[CarrierSource], dut: &Scene, limit: &Limit) -> Vec<TruthFamily> {
    let mut labels: Vec<(&'static str, f64)> = Vec::new();
    for c in carriers {
        if !labels.iter().any(|(l, _)| *l == c.label) {
            labels.push((c.label, c.raster_hz));
        }
    }
    labels
        .into_iter()
        .map(|(label, raster)| {
            let set: Vec<&CarrierSource> = carriers.iter().filter(|c| c.label == label).collect();
            carrier_set_truth(label, raster, &set, dut, limit)
        })
        .collect()
}

fn carrier_set_truth(
    label: &str,
    raster: f64,
    set: &[&CarrierSource],
    dut: &Scene,
    limit: &Limit,
) -> TruthFamily {
    let s = &dut.scan;
    let mut lines: Vec<TruthLine> = set
        .iter()
        .filter(|c| c.in_dut)
        .filter_map(|c| {
            let f = c.c.freq_hz;
            let floor_dbuv = background_at(dut, f);
            let inside = f >= s.start_hz && f <= s.stop_hz;
            let masked = stronger_line_near(dut, f, c.c.level_dbuv, None, Some(f));
            (inside && !masked && c.c.level_dbuv >= floor_dbuv + VISIBLE_DB).then_some(TruthLine {
                harmonic: (f / raster).round() as u32,
                freq_hz: f,
                level_dbuv: c.c.level_dbuv,
                floor_dbuv,
            })
        })
        .collect();
    lines.sort_by(|a, b| a.freq_hz.total_cmp(&b.freq_hz));
    let isolated = lines
        .iter()
        .filter(|l| {
            let d = resolution(s, l.freq_hz);
            lines
                .iter()
                .all(|m| m.freq_hz == l.freq_hz || (m.freq_hz - l.freq_hz).abs() > d)
        })
        .count();
    let g = lines
        .iter()
        .fold(0u64, |g, l| gcd(g, l.freq_hz.round() as u64));
    let accept = if g > 0 && (g as f64 - raster).abs() > 0.5 {
        vec![g as f64]
    } else {
        Vec::new()
    };
    let in_dut = set.iter().any(|c| c.in_dut);
    let in_ambient = set.iter().any(|c| c.in_ambient);
    TruthFamily {
        label: label.to_string(),
        f0_hz: raster,
        accept_f0_hz: accept,
        kind: Kind::Broadcast,
        origin: Origin::Ambient,
        harmonics_visible: lines.iter().map(|l| l.harmonic).collect(),
        resolved: isolated >= MIN_HARMONICS,
        worst_margin_db: worst_margin(&lines, limit),
        spread_pct: 0.0,
        intermittent: set.iter().any(|c| c.in_dut != c.in_ambient),
        in_dut,
        in_ambient,
        lines,
    }
}

// ---------------------------------------------------------------------------------------------
// Scores

/// How one analysis did on its case. Counts only; [`Totals`] turns them into rates.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct CaseScore {
    /// Truth families recall counts ([`TruthFamily::eligible`]).
    pub eligible: usize,
    /// Of those, matched by a reported family.
    pub recalled: usize,
    /// Eligible truth families with at least 3 lines [`STRONG_DB`] above the floor.
    pub eligible_strong: usize,
    /// Of those, matched.
    pub recalled_strong: usize,
    /// Reported families with at least [`MIN_HARMONICS`] harmonics.
    pub reported: usize,
    /// Of those, matched to a truth family present in the DUT scene.
    pub reported_matched: usize,
    /// |f0_est − f0|/f0 of every matched pair.
    pub f0_rel_errors: Vec<f64>,
    /// Matched pairs of a switching or clock family with a stated σ.
    pub sigma_stated: usize,
    /// Of those, the truth within two stated σ of the estimate.
    pub sigma_covered: usize,
    /// Matched pairs (any reported family, any truth family in the DUT scene).
    pub matched: usize,
    /// Matched pairs whose origin equals the truth's (Dut or Ambient).
    pub origin_ok: usize,
    /// Matched pairs whose kind equals the truth's.
    pub kind_ok: usize,
    /// Truth lines of resolved families at least [`STRONG_DB`] above the floor.
    pub lines: usize,
    /// Of those, found as a peak within [`line_tolerance`] of their frequency.
    pub lines_found: usize,
    /// The case has an eligible DUT family that fails the limit.
    pub top1_case: bool,
    /// The rank-1 family matches the worst-failing eligible DUT family.
    pub top1_hit: bool,
    /// Unresolved combs in the DUT scene with visible lines (hump truth).
    pub unresolved_combs: usize,
    /// Of those, with a reported hump inside the span of their visible lines.
    pub humps_found: usize,
    /// Every eligible truth family (index into `Case::truth`) and whether it was matched.
    pub eligible_hits: Vec<(usize, bool)>,
    /// Labels of eligible truth families that were not matched.
    pub missed: Vec<String>,
    /// Fundamentals (Hz) of reported families (≥ 3 harmonics) that matched nothing.
    pub spurious_hz: Vec<f64>,
    /// Whether the analysis reported any family.
    pub any_family: bool,
}

/// Scores `analysis` against the truth of `case`.
///
/// Matching: every (truth in the DUT scene, reported family) pair with a relative f0 error
/// below [`MATCH_REL`] (against f0 or an accepted alternative) is a candidate; candidates are
/// taken greedily by increasing error, each truth and each report used at most once.
pub fn score_case(case: &Case, analysis: &Analysis) -> CaseScore {
    score_reports(case, &analysis.families, &analysis.peaks, &analysis.humps)
}

/// The score of a case whose analysis failed or crashed: nothing reported.
pub fn score_failed(case: &Case) -> CaseScore {
    score_reports(case, &[], &[], &[])
}

fn score_reports(
    case: &Case,
    families: &[Family],
    peaks: &[Peak],
    humps: &[crate::bandwidth::Hump],
) -> CaseScore {
    let truth = &case.truth;
    let pairs = match_families(truth, families);
    let mut sc = CaseScore {
        any_family: !families.is_empty(),
        ..CaseScore::default()
    };
    let truth_of = |ri: usize| pairs.iter().find(|p| p.1 == ri).map(|p| p.0);
    let report_of = |ti: usize| pairs.iter().find(|p| p.0 == ti).map(|p| p.1);
    for (ti, t) in truth.iter().enumerate() {
        if t.eligible() {
            sc.eligible += 1;
            let hit = report_of(ti).is_some();
            sc.recalled += usize::from(hit);
            sc.eligible_hits.push((ti, hit));
            if t.strong() {
                sc.eligible_strong += 1;
                sc.recalled_strong += usize::from(hit);
            }
            if !hit {
                sc.missed.push(format!(
                    "{} ({} harmonics)",
                    t.label,
                    t.harmonics_visible.len()
                ));
            }
        }
        if t.in_dut && !t.resolved && t.kind != Kind::Broadcast && !t.lines.is_empty() {
            sc.unresolved_combs += 1;
            let lo = t
                .lines
                .iter()
                .map(|l| l.freq_hz)
                .fold(f64::INFINITY, f64::min);
            let hi = t.lines.iter().map(|l| l.freq_hz).fold(0.0, f64::max);
            sc.humps_found +=
                usize::from(humps.iter().any(|h| h.start_hz <= hi && h.stop_hz >= lo));
        }
    }
    for (ri, r) in families.iter().enumerate() {
        if r.harmonics.len() >= MIN_HARMONICS {
            sc.reported += 1;
            if truth_of(ri).is_some() {
                sc.reported_matched += 1;
            } else {
                sc.spurious_hz.push(r.fundamental_hz);
            }
        }
    }
    for &(ti, ri, err) in &pairs {
        let (Some(t), Some(r)) = (truth.get(ti), families.get(ri)) else {
            continue;
        };
        sc.matched += 1;
        sc.f0_rel_errors.push(err);
        if r.fundamental_sigma_hz > 0.0 && matches!(t.kind, Kind::Switching | Kind::Clock) {
            sc.sigma_stated += 1;
            let off = std::iter::once(t.f0_hz)
                .chain(t.accept_f0_hz.iter().copied())
                .map(|f| (r.fundamental_hz - f).abs())
                .fold(f64::INFINITY, f64::min);
            sc.sigma_covered += usize::from(off <= 2.0 * r.fundamental_sigma_hz);
        }
        sc.origin_ok += usize::from(r.origin == t.origin);
        sc.kind_ok += usize::from(r.kind == t.kind);
    }
    score_lines(case, peaks, &mut sc);
    score_top1(truth, families, &mut sc);
    sc
}

/// Greedy one-to-one matching: (truth index, report index, relative error).
fn match_families(truth: &[TruthFamily], families: &[Family]) -> Vec<(usize, usize, f64)> {
    let mut cand: Vec<(usize, usize, f64)> = Vec::new();
    for (ti, t) in truth.iter().enumerate().filter(|(_, t)| t.in_dut) {
        for (ri, r) in families.iter().enumerate() {
            let e = t.rel_error(r.fundamental_hz);
            if e < MATCH_REL {
                cand.push((ti, ri, e));
            }
        }
    }
    cand.sort_by(|a, b| a.2.total_cmp(&b.2));
    let mut out: Vec<(usize, usize, f64)> = Vec::new();
    for c in cand {
        if !out.iter().any(|o| o.0 == c.0 || o.1 == c.1) {
            out.push(c);
        }
    }
    out
}

/// How far from a truth line a peak may lie and still be that line, Hz: max(RBW/2, display
/// step), or half the width of a dithered harmonic (n·f0·spread/2) when that is larger.
pub fn line_tolerance(s: &ScanSetting, t: &TruthFamily, l: &TruthLine) -> f64 {
    let spread_half = l.freq_hz * t.spread_pct / 100.0 / 2.0;
    (s.rbw_hz / 2.0).max(step_at(s, l.freq_hz)).max(spread_half)
}

fn score_lines(case: &Case, peaks: &[Peak], sc: &mut CaseScore) {
    let s = &case.dut.scan;
    for t in case.truth.iter().filter(|t| t.in_dut && t.resolved) {
        for l in t
            .lines
            .iter()
            .filter(|l| l.level_dbuv >= l.floor_dbuv + STRONG_DB)
        {
            sc.lines += 1;
            let tol = line_tolerance(s, t, l);
            if peaks.iter().any(|p| (p.freq_hz - l.freq_hz).abs() <= tol) {
                sc.lines_found += 1;
            }
        }
    }
}

fn score_top1(truth: &[TruthFamily], families: &[Family], sc: &mut CaseScore) {
    let worst = truth
        .iter()
        .filter(|t| t.eligible() && t.origin == Origin::Dut)
        .filter_map(|t| t.worst_margin_db.filter(|m| *m < 0.0).map(|m| (t, m)))
        .min_by(|a, b| a.1.total_cmp(&b.1));
    let Some((t, _)) = worst else {
        return;
    };
    sc.top1_case = true;
    sc.top1_hit = families
        .iter()
        .find(|f| f.rank == 1)
        .is_some_and(|f| t.rel_error(f.fundamental_hz) < MATCH_REL);
}

/// Sums of [`CaseScore`]s plus crash, error and time counts.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct Totals {
    /// Cases run.
    pub cases: usize,
    /// Cases whose reading or analysis panicked.
    pub crashes: usize,
    /// Cases whose reading or analysis returned an error.
    pub errors: usize,
    /// Cases the harness itself could not draw or render.
    pub harness_errors: usize,
    /// Cases whose analysis reported at least one family.
    pub cases_with_families: usize,
    /// Summed counts (see [`CaseScore`]).
    pub sum: CaseScore,
    /// Wall time of all cases, s.
    pub seconds: f64,
    /// Wall time of the analyses alone, s.
    pub analyze_seconds: f64,
    /// Cases with an eligible DUT family that fails the limit.
    pub top1_cases: usize,
    /// Of those, cases whose rank-1 family is the worst-failing one.
    pub top1_hits: usize,
}

impl Totals {
    /// Adds one scored case (a failed one too: score it with [`score_failed`]).
    pub fn add(&mut self, s: &CaseScore) {
        self.cases += 1;
        self.cases_with_families += usize::from(s.any_family);
        let t = &mut self.sum;
        t.eligible += s.eligible;
        t.recalled += s.recalled;
        t.eligible_strong += s.eligible_strong;
        t.recalled_strong += s.recalled_strong;
        t.reported += s.reported;
        t.reported_matched += s.reported_matched;
        t.f0_rel_errors.extend_from_slice(&s.f0_rel_errors);
        t.sigma_stated += s.sigma_stated;
        t.sigma_covered += s.sigma_covered;
        t.matched += s.matched;
        t.origin_ok += s.origin_ok;
        t.kind_ok += s.kind_ok;
        t.lines += s.lines;
        t.lines_found += s.lines_found;
        t.unresolved_combs += s.unresolved_combs;
        t.humps_found += s.humps_found;
        self.top1_cases += usize::from(s.top1_case);
        self.top1_hits += usize::from(s.top1_hit);
    }

    /// Rates and counts.
    pub fn summary(&self) -> Summary {
        let t = &self.sum;
        let mut errs = t.f0_rel_errors.clone();
        errs.sort_by(f64::total_cmp);
        let median = match errs.len() {
            0 => None,
            n if n % 2 == 1 => errs.get(n / 2).copied(),
            n => match (errs.get(n / 2 - 1), errs.get(n / 2)) {
                (Some(a), Some(b)) => Some(0.5 * (a + b)),
                _ => None,
            },
        };
        Summary {
            cases: self.cases,
            crashes: self.crashes,
            errors: self.errors,
            harness_errors: self.harness_errors,
            cases_with_families: self.cases_with_families,
            family_recall: ratio(t.recalled, t.eligible),
            family_recall_strong: ratio(t.recalled_strong, t.eligible_strong),
            family_precision: ratio(t.reported_matched, t.reported),
            median_f0_rel_error: median,
            sigma_coverage: ratio(t.sigma_covered, t.sigma_stated),
            peak_recall: ratio(t.lines_found, t.lines),
            origin_accuracy: ratio(t.origin_ok, t.matched),
            kind_accuracy: ratio(t.kind_ok, t.matched),
            top1_rate: ratio(self.top1_hits, self.top1_cases),
            hump_detection: ratio(t.humps_found, t.unresolved_combs),
            eligible_families: t.eligible,
            reported_families: t.reported,
            matched_families: t.matched,
            truth_lines: t.lines,
            top1_cases: self.top1_cases,
            unresolved_combs: t.unresolved_combs,
            seconds_total: self.seconds,
            seconds_per_case: if self.cases > 0 {
                self.seconds / self.cases as f64
            } else {
                0.0
            },
            analyze_seconds_per_case: if self.cases > 0 {
                self.analyze_seconds / self.cases as f64
            } else {
                0.0
            },
        }
    }
}

fn ratio(num: usize, den: usize) -> Option<f64> {
    (den > 0).then(|| num as f64 / den as f64)
}

/// The rates of a [`Totals`]; a rate is `None` (JSON null) when its denominator is zero.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Summary {
    /// Cases run.
    pub cases: usize,
    /// Cases whose reading or analysis panicked.
    pub crashes: usize,
    /// Cases whose reading or analysis returned an error.
    pub errors: usize,
    /// Cases the harness could not draw or render.
    pub harness_errors: usize,
    /// Cases whose analysis reported at least one family.
    pub cases_with_families: usize,
    /// Matched eligible truth families / eligible truth families.
    pub family_recall: Option<f64>,
    /// The same over truth families with 3 lines 10 dB above the floor.
    pub family_recall_strong: Option<f64>,
    /// Matched reported families (≥ 3 harmonics) / reported families (≥ 3 harmonics).
    pub family_precision: Option<f64>,
    /// Median |f0_est − f0|/f0 over matched pairs.
    pub median_f0_rel_error: Option<f64>,
    /// Matched converter and clock families whose truth lies within two stated σ of the
    /// estimate / those matched: about 0.95 when the σ are honest (normal errors).
    pub sigma_coverage: Option<f64>,
    /// Strong truth lines found as peaks / strong truth lines.
    pub peak_recall: Option<f64>,
    /// Matched pairs with the right origin / matched pairs.
    pub origin_accuracy: Option<f64>,
    /// Matched pairs with the right kind / matched pairs.
    pub kind_accuracy: Option<f64>,
    /// Cases whose rank-1 family is the worst-failing DUT family / cases with a failing one.
    pub top1_rate: Option<f64>,
    /// Unresolved combs with a reported hump over their visible lines / unresolved combs.
    pub hump_detection: Option<f64>,
    /// Denominator of the family recall.
    pub eligible_families: usize,
    /// Denominator of the family precision.
    pub reported_families: usize,
    /// Matched (truth, report) pairs: denominator of origin and kind accuracy.
    pub matched_families: usize,
    /// Denominator of the peak recall.
    pub truth_lines: usize,
    /// Denominator of the top-1 rate.
    pub top1_cases: usize,
    /// Unresolved DUT or lighting combs with visible lines (hump truth).
    pub unresolved_combs: usize,
    /// Wall time of all cases (render, file round trip, analysis), s.
    pub seconds_total: f64,
    /// `seconds_total` per case, s.
    pub seconds_per_case: f64,
    /// Analysis time alone per case, s.
    pub analyze_seconds_per_case: f64,
}

impl Summary {
    /// The targets of [`targets`] this summary misses, one sentence each (a rate with no
    /// denominator is not judged). A crash always misses.
    pub fn missed_targets(&self) -> Vec<String> {
        self.shortfalls(&targets::LEVELS)
    }

    /// Where this summary falls short of `levels`, one sentence each (a rate with no
    /// denominator is not judged). A crash always falls short.
    pub fn shortfalls(&self, levels: &Levels) -> Vec<String> {
        let mut out = Vec::new();
        if self.crashes > 0 {
            out.push(format!("{} crashes", self.crashes));
        }
        let mut at_least = |name: &str, v: Option<f64>, min: f64| {
            if let Some(v) = v.filter(|v| *v < min) {
                out.push(format!("{name} {v:.3} < {min}"));
            }
        };
        at_least("family recall", self.family_recall, levels.recall);
        at_least("family precision", self.family_precision, levels.precision);
        at_least("origin accuracy", self.origin_accuracy, levels.origin);
        at_least("kind accuracy", self.kind_accuracy, levels.kind);
        at_least("top-1 rate", self.top1_rate, levels.top1);
        if let Some(e) = self
            .median_f0_rel_error
            .filter(|e| *e > levels.median_f0_rel_error)
        {
            out.push(format!(
                "median f0 error {:.4} % > {} %",
                e * 100.0,
                levels.median_f0_rel_error * 100.0
            ));
        }
        out
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// A dithered converter of duty 0.25 in a radiated-like setting: its harmonics merge, and
    /// every fourth harmonic sits in a null of the trapezoid spectrum (|sin(π·n·d)| = 0 at
    /// n·d integer, METHODS §5).
    fn merged_scene() -> Scene {
        let mut sc: Scene =
            toml::from_str(crate::synth::scene::tests::EXAMPLE_BUCK).expect("scene");
        sc.clock.clear();
        sc.carrier.clear();
        sc.switching = vec![Periodic {
            name: Some("quarter duty".into()),
            f0_hz: 100e3,
            duty: Some(0.25),
            edge_time_s: 5e-9,
            fundamental_dbuv: 80.0,
            coupling_db_per_decade: 0.0,
            spread_pct: 4.0,
            spread_rate_hz: 0.0,
            max_harmonic: 0,
        }];
        sc
    }

    #[test]
    fn merged_background_is_the_envelope_not_the_nearest_harmonic() {
        let sc = merged_scene();
        // harmonic 200 (20 MHz) is a null (200·0.25 = 50); 202 is at the sinc envelope's crest
        // region. 8 harmonics merge there (200·4 %), so the reading is their mean power and
        // the two frequencies one spacing apart must read within a few dB of each other.
        let at_null = background_at(&sc, 20.0e6);
        let beside = background_at(&sc, 20.2e6);
        assert!(
            (at_null - beside).abs() < 3.0,
            "null {at_null:.1} dBµV vs beside {beside:.1} dBµV"
        );
        // and far above the receiver floor: the merged comb is the background there
        assert!(at_null > floor_at(&sc, 20.0e6) + 20.0, "{at_null:.1}");
    }

    #[test]
    fn a_line_beside_a_stronger_one_is_not_a_line_of_its_own() {
        // a carrier 756 Hz from a converter's 80 dBµV fundamental, under a 9 kHz RBW (common
        // practice: two lines closer than the RBW show as one response, at the stronger)
        let mut sc = merged_scene();
        sc.switching[0].f0_hz = 783_756.0;
        sc.switching[0].spread_pct = 0.0;
        sc.carrier = vec![Carrier {
            name: None,
            freq_hz: 783e3,
            level_dbuv: 50.0,
            am_depth: 0.3,
            fade_db: 0.0,
        }];
        assert!(stronger_line_near(&sc, 783e3, 50.0, None, Some(783e3)));
        // 40 kHz away it stands apart; and the converter's own line is not masked by itself
        assert!(!stronger_line_near(&sc, 823e3, 50.0, None, None));
        assert!(!stronger_line_near(
            &sc,
            783_756.0,
            80.0,
            Some(783_756.0),
            None
        ));
        // the carrier masks the weaker converter line it sits on when it is the stronger
        sc.carrier[0].level_dbuv = 90.0;
        assert!(stronger_line_near(
            &sc,
            783_756.0,
            80.0,
            Some(783_756.0),
            None
        ));
        // dithered by 6 %, the converter's fundamental spreads over 47 kHz (METHODS §9): a
        // 50 dBµV line 20 kHz off its centre sits on the plateau, one 40 kHz off stands beside it
        sc.switching[0].spread_pct = 6.0;
        assert!(stronger_line_near(&sc, 803.8e3, 50.0, None, None));
        assert!(!stronger_line_near(&sc, 823.8e3, 50.0, None, None));
    }

    #[test]
    fn envelope_crossings_and_the_median_of_the_largest() {
        // source: from memory, the level-crossing rate of a Rayleigh-fading envelope with
        // Doppler f_m: N = √(2π)·f_m·ρ·exp(−ρ²); Clarke's correlation J0(2π·f_m·τ) has
        // curvature β = 2π²·f_m². At ρ = 1 and f_m = 100 Hz: N = 92.2 crossings per second.
        let fm = 100.0;
        let beta = 2.0 * std::f64::consts::PI.powi(2) * fm * fm;
        let n = envelope_upcrossing_rate(1.0, beta);
        assert!((n - (2.0 * std::f64::consts::PI).sqrt() * fm * (-1f64).exp()).abs() < 1e-9);
        assert!((n - 92.2).abs() < 0.05);
        // a bucket far narrower than the correlation holds one reading: the median of a
        // Rayleigh envelope is √ln2 of its rms (−1.59 dB), which the offset clamps to 0
        assert_eq!(peak_noise_offset_db(1.0, 1e6), 0.0);
        // wider buckets read higher, and the offset grows slowly (like ln ln of the width)
        let a = peak_noise_offset_db(10.0, 1.0);
        let b = peak_noise_offset_db(100.0, 1.0);
        assert!(a > 3.0 && b > a + 1.0 && b < a + 3.0, "{a:.2} {b:.2}");
    }

    #[test]
    fn the_displayed_floor_matches_the_rendered_noise() {
        // a noise-only radiated scan, 30-1000 MHz in 922 points with a 120 kHz RBW (steps of
        // 8.8 B6): the median of the peak-detector trace must sit where the crossing-rate
        // estimate puts it (16.3 dBµV for a 10 dBµV rms floor; the render reads 16.15), within
        // half a dB
        let mut sc = merged_scene();
        sc.switching.clear();
        sc.scan.spacing = Spacing::Linear;
        sc.scan.start_hz = 30e6;
        sc.scan.stop_hz = 1e9;
        sc.scan.points = 922;
        sc.scan.rbw_hz = 120e3;
        sc.scan.detector = Detector::Peak;
        sc.floor = Some(crate::synth::scene::Floor {
            level_dbuv: 10.0,
            slope_db_per_decade: 0.0,
        });
        let scan = crate::synth::render::render(&sc).expect("render");
        let mut levels: Vec<f64> = scan.level_dbuv.to_vec();
        let median = crate::floor::quantile_in_place(&mut levels, 0.5);
        let predicted = displayed_floor_at(&sc, 500e6);
        assert!(
            (median - predicted).abs() < 0.5,
            "median {median:.2} vs {predicted:.2}"
        );
    }

    #[test]
    fn a_peak_detector_reads_the_largest_background_of_its_bucket() {
        // an undithered 100 kHz comb of duty 0.01: its trapezoid spectrum has nulls every 100
        // harmonics (n·d integer, METHODS §5), so 20 MHz (n = 200) sits in a null of a lobe
        // 10 MHz wide; on a 5 MHz grid the point showing 20 MHz holds 17.5-22.5 MHz, whose
        // largest reading (n = 225, |sin(π·2.25)| = 0.71) is what a line there must beat
        let mut sc = merged_scene();
        sc.switching[0].duty = Some(0.01);
        sc.switching[0].spread_pct = 0.0;
        sc.scan.spacing = Spacing::Linear;
        sc.scan.start_hz = 10e6;
        sc.scan.stop_hz = 30e6;
        sc.scan.points = 5;
        let p = &sc.switching[0];
        let crest = p.fundamental_dbuv + relative_db(p, 0.01, 225, sc.scan.rbw_hz);
        let at_null = background_at(&sc, 20.0e6);
        assert!(
            at_null > crest - 1.0,
            "bucket background {at_null:.1} dBµV vs its crest {crest:.1} dBµV"
        );
        // a sample detector reads the mean over the bucket instead: lower than the crest
        sc.scan.detector = Detector::Sample;
        assert!(background_at(&sc, 20.0e6) < at_null - 1.0);
    }
}
