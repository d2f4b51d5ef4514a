//! Sized remedies: for a failing family, how much filter, choke, ferrite, edge slowing or
//! spread spectrum delivers the attenuation it needs, each with the model it rests on and that
//! model's assumptions stated beside the numbers.
//!
//! ```
//! use spurhound::analysis::Kind;
//! use spurhound::attribution::sizing::{size_remedies, Exceedance, SizingParams, Subject};
//! // a 100 kHz converter, conducted scan: 10 dB over the limit at 300 kHz
//! let subject = Subject { fundamental_hz: 100e3, kind: Kind::Switching, conducted: true,
//!                         edge_time_s: None, duty: None, spread_pct: None };
//! let over = [Exceedance { freq_hz: 300e3, over_db: 10.0 }];
//! let sized = size_remedies(&subject, &over, &SizingParams::default())?;
//! let lc = sized.lc_filter.as_ref().unwrap();
//! // 10 dB + 6 dB design margin = 16 dB
//! assert_eq!(sized.needs[0].needed_db, 16.0);
//! assert!(lc.predicted.iter().all(|p| p.predicted_db >= p.needed_db));
//! # Ok::<(), spurhound::attribution::sizing::SizingError>(())
//! ```
//!
//! The attenuation needed at each failing frequency is its exceedance (level − limit) plus a
//! design margin ([`DESIGN_MARGIN_DB`]). Every model is a first estimate for choosing parts to
//! try, not a filter design: parasitics (capacitor ESL, winding capacitance), the real source and
//! mains impedances and the DM/CM split decide what a part really gives.

use crate::analysis::{Kind, fmt_hz};
use serde::Serialize;
use std::f64::consts::PI;

/// Attenuation asked beyond the exceedance: 6 dB (common practice: a pre-compliance result
/// carries the spread of set-ups, cables and the LISN's ±20 % impedance tolerance, METHODS §8).
pub const DESIGN_MARGIN_DB: f64 = 6.0;

/// A CISPR 16-1-2 50 µH ‖ 50 Ω V-network presents ≈ 50 Ω to differential-mode noise above
/// about 1 MHz (METHODS §8: 49.4 Ω at 1 MHz, 34.3 Ω at 150 kHz).
pub const LISN_OHM: f64 = 50.0;

/// Common-mode load of the LISN: its two 50 Ω line ports in parallel (derived: 50 ‖ 50 = 25 Ω).
pub const LISN_CM_OHM: f64 = 25.0;

/// Common-mode impedance of a cable loop in radiated tests, taken as the 150 Ω that coupling
/// networks for cables present (from memory: the 150 Ω common-mode impedance of the
/// coupling/decoupling networks of IEC 61000-4-6 and the impedance-stabilisation networks of
/// CISPR 16-1-2; a real cable's varies widely with length and layout).
pub const CABLE_CM_OHM: f64 = 150.0;

// below about 5 MHz conducted noise is mostly differential mode, above it mostly common mode
// (rule of thumb, METHODS §9); one definition, in remedies
use super::remedies::DM_CM_BOUNDARY_HZ;

/// E6 series of preferred values, one decade (IEC 60063; from memory, the series are widely
/// tabulated).
pub const E6: [f64; 6] = [1.0, 1.5, 2.2, 3.3, 4.7, 6.8];

/// E12 series of preferred values, one decade (IEC 60063; from memory).
pub const E12: [f64; 12] = [1.0, 1.2, 1.5, 1.8, 2.2, 2.7, 3.3, 3.9, 4.7, 5.6, 6.8, 8.2];

/// What sizing can be wrong about: a parameter or subject value out of range.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
#[non_exhaustive]
pub enum SizingError {
    #[error("sizing: `{field}` = {value}: expected {expected}")]
    BadParam {
        field: &'static str,
        value: f64,
        expected: &'static str,
    },
}

/// One failing point of a family: how far its level is over the limit.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct Exceedance {
    pub freq_hz: f64,
    /// Level minus limit (dB); only positive values fail and are sized.
    pub over_db: f64,
}

/// The attenuation a remedy must give at one frequency: exceedance plus design margin.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct Need {
    pub freq_hz: f64,
    pub needed_db: f64,
}

/// What is known of the failing family's source.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Subject {
    pub fundamental_hz: f64,
    pub kind: Kind,
    /// Conducted (LISN) scan; false for radiated.
    pub conducted: bool,
    /// 10-90 % rise time of its edges (s), e.g. from the source inventory's `edge_time_s`.
    pub edge_time_s: Option<f64>,
    /// High time over period, 0 < duty < 1.
    pub duty: Option<f64>,
    /// Present total peak-to-peak dither, % of the fundamental.
    pub spread_pct: Option<f64>,
}

/// Settings of the sizing models; [`Default`] gives the documented values.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct SizingParams {
    /// dB asked beyond each exceedance ([`DESIGN_MARGIN_DB`]).
    pub design_margin_db: f64,
    /// Differential-mode load of the LISN, Ω ([`LISN_OHM`]).
    pub lisn_ohm: f64,
    /// Characteristic impedance √(L/C) aimed at when picking LC parts, Ω (default 50 Ω, the
    /// LISN's: the LISN's resistance then damps the resonance to ζ = R/(2·Z0) = 0.5).
    pub filter_z0_ohm: f64,
    /// Common-mode loop resistance of a conducted test, Ω ([`LISN_CM_OHM`]).
    pub cm_loop_ohm: f64,
    /// Common-mode loop resistance of a cable in a radiated test, Ω ([`CABLE_CM_OHM`]).
    pub cable_cm_ohm: f64,
    /// Stray capacitance of the common-mode source path (switch node or heatsink to earth), F;
    /// `None` neglects the source's own impedance.
    pub stray_capacitance_f: Option<f64>,
    /// A ferrite clamp's impedance for one pass at the binding frequency, Ω; `None` takes the
    /// low end of [`typical_clamp_single_pass_ohm`].
    pub ferrite_single_pass_ohm: Option<f64>,
    /// Most passes through one clamp before its self-resonance spoils it (default 4, common
    /// practice).
    pub max_ferrite_turns: u32,
    /// n = C_d / C of the damping leg across the filter capacitor (default 4).
    pub damping_ratio: f64,
    /// Resolution bandwidth of the scan, Hz (default 9 kHz, CISPR band B).
    pub rbw_hz: f64,
}

impl Default for SizingParams {
    fn default() -> Self {
        SizingParams {
            design_margin_db: DESIGN_MARGIN_DB,
            lisn_ohm: LISN_OHM,
            filter_z0_ohm: LISN_OHM,
            cm_loop_ohm: LISN_CM_OHM,
            cable_cm_ohm: CABLE_CM_OHM,
            stray_capacitance_f: None,
            ferrite_single_pass_ohm: None,
            max_ferrite_turns: 4,
            damping_ratio: 4.0,
            rbw_hz: 9e3,
        }
    }
}

fn bad(field: &'static str, value: f64, expected: &'static str) -> SizingError {
    SizingError::BadParam {
        field,
        value,
        expected,
    }
}

fn positive(field: &'static str, value: f64) -> Result<(), SizingError> {
    if value.is_finite() && value > 0.0 {
        Ok(())
    } else {
        Err(bad(field, value, "a positive finite number"))
    }
}

impl SizingParams {
    /// Checks every setting.
    ///
    /// # Errors
    /// [`SizingError::BadParam`] naming the first bad field.
    pub fn check(&self) -> Result<(), SizingError> {
        if !(self.design_margin_db.is_finite() && self.design_margin_db >= 0.0) {
            return Err(bad(
                "design_margin_db",
                self.design_margin_db,
                "a margin of 0 dB or more",
            ));
        }
        positive("lisn_ohm", self.lisn_ohm)?;
        positive("filter_z0_ohm", self.filter_z0_ohm)?;
        positive("cm_loop_ohm", self.cm_loop_ohm)?;
        positive("cable_cm_ohm", self.cable_cm_ohm)?;
        positive("damping_ratio", self.damping_ratio)?;
        positive("rbw_hz", self.rbw_hz)?;
        if let Some(c) = self.stray_capacitance_f {
            positive("stray_capacitance_f", c)?;
        }
        if let Some(z) = self.ferrite_single_pass_ohm {
            positive("ferrite_single_pass_ohm", z)?;
        }
        if self.max_ferrite_turns == 0 {
            return Err(bad("max_ferrite_turns", 0.0, "at least one pass"));
        }
        Ok(())
    }
}

/// A remedy's attenuation at one failing frequency, as its model predicts it.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct Predicted {
    pub freq_hz: f64,
    pub needed_db: f64,
    pub predicted_db: f64,
}

/// A damping leg (R_d in series with C_d) across the filter capacitor.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct Damping {
    pub capacitance_f: f64,
    pub resistance_ohm: f64,
    /// Peak of the filter's output impedance with the leg (source side shorted), Ω.
    pub peak_output_ohm: f64,
}

/// A single-stage LC low-pass (series L towards the LISN, shunt C at the noise source).
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct LcFilter {
    /// The failure that sets the corner, and what it needs.
    pub binding: Need,
    /// f / 10^(N/40): the corner from the 40 dB/decade asymptote alone.
    pub corner_asymptotic_hz: f64,
    /// The corner that gives N exactly with the LISN's damping ([`lc_corner_hz`]).
    pub corner_hz: f64,
    /// Standard parts: L from E12, C from E6.
    pub inductance_h: f64,
    pub capacitance_f: f64,
    /// 1/(2π√(LC)) of those parts.
    pub actual_corner_hz: f64,
    /// √(L/C) of those parts.
    pub z0_ohm: f64,
    pub predicted: Vec<Predicted>,
    pub damping: Damping,
    pub model: &'static str,
    pub assumptions: Vec<&'static str>,
    pub warnings: Vec<String>,
    pub sentence: String,
}

/// A CLC (pi) low-pass: C, series L, C; offered when it needs a smaller inductor than the LC.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct PiFilter {
    pub binding: Need,
    pub inductance_h: f64,
    /// Each of the two shunt capacitors.
    pub capacitance_f: f64,
    pub actual_corner_hz: f64,
    pub predicted: Vec<Predicted>,
    pub model: &'static str,
    pub assumptions: Vec<&'static str>,
    pub sentence: String,
}

/// A common-mode choke in series with the common-mode loop.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct CmChoke {
    pub binding: Need,
    /// Loop resistance the choke works against, Ω.
    pub loop_ohm: f64,
    /// |Z| needed at the binding frequency if it adds in phase with the loop (the resistive
    /// region of a ferrite choke): Z_loop·(10^(N/20) − 1).
    pub impedance_ohm: f64,
    /// Inductance needed if the choke is a pure reactance there (largest over the failures).
    pub inductance_h: f64,
    pub predicted: Vec<Predicted>,
    pub model: &'static str,
    pub assumptions: Vec<&'static str>,
    pub warnings: Vec<String>,
    pub sentence: String,
}

/// A clamp-on ferrite on the cable.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct FerriteClamp {
    pub binding: Need,
    pub loop_ohm: f64,
    /// Impedance needed at the binding frequency, Ω.
    pub needed_ohm: f64,
    /// One pass, Ω, and whether it is the generic assumption rather than a given value.
    pub single_pass_ohm: f64,
    pub single_pass_assumed: bool,
    /// Passes through one clamp (capped at `max_ferrite_turns`).
    pub turns: u32,
    /// Clamps in series (impedances add) when one clamp with the capped turns is not enough.
    pub clamps: u32,
    pub model: &'static str,
    pub assumptions: Vec<&'static str>,
    pub warnings: Vec<String>,
    pub sentence: String,
}

/// Slower switching edges (gate resistor, snubber, slew-rate setting).
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct EdgeSlowing {
    pub binding: Need,
    /// Factor by which the rise (and fall) time must grow.
    pub factor: f64,
    /// Present and new 10-90 % rise time, s, when the present one is known.
    pub rise_time_s: Option<f64>,
    pub new_rise_time_s: Option<f64>,
    /// Present and new upper break point 1/(π·τr) of the trapezoid envelope, Hz.
    pub corner_hz: Option<f64>,
    pub new_corner_hz: Option<f64>,
    /// Whether the new edges still fit in the pulse (τr ≤ the shorter of on- and off-time).
    pub feasible: bool,
    pub model: &'static str,
    pub assumptions: Vec<&'static str>,
    pub warnings: Vec<String>,
    pub sentence: String,
}

/// Spread-spectrum (frequency dither) depth.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct SpreadDepth {
    pub binding: Need,
    /// Harmonic number of the binding frequency.
    pub harmonic: f64,
    /// Total peak-to-peak spread needed by the RBW rule, % of the fundamental.
    pub spread_pct: f64,
    pub rbw_hz: f64,
    /// The same from the published empirical rule for clocks (clocks only).
    pub empirical_spread_pct: Option<f64>,
    pub model: &'static str,
    pub assumptions: Vec<&'static str>,
    pub warnings: Vec<String>,
    pub sentence: String,
}

/// A layout or shielding note and the rule of thumb it rests on.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct LayoutNote {
    pub text: String,
    pub rule: &'static str,
}

/// Everything [`size_remedies`] found; a remedy that does not apply is `None`.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct SizedRemedies {
    pub needs: Vec<Need>,
    pub lc_filter: Option<LcFilter>,
    pub pi_filter: Option<PiFilter>,
    pub cm_choke: Option<CmChoke>,
    pub ferrite: Option<FerriteClamp>,
    pub edges: Option<EdgeSlowing>,
    pub spread: Option<SpreadDepth>,
    pub notes: Vec<LayoutNote>,
}

impl SizedRemedies {
    /// One sentence per remedy, in the order of the fields, then the layout notes.
    pub fn sentences(&self) -> Vec<String> {
        let mut out = Vec::new();
        out.extend(self.lc_filter.iter().map(|r| r.sentence.clone()));
        out.extend(self.pi_filter.iter().map(|r| r.sentence.clone()));
        out.extend(self.cm_choke.iter().map(|r| r.sentence.clone()));
        out.extend(self.ferrite.iter().map(|r| r.sentence.clone()));
        out.extend(self.edges.iter().map(|r| r.sentence.clone()));
        out.extend(self.spread.iter().map(|r| r.sentence.clone()));
        out.extend(self.notes.iter().map(|n| n.text.clone()));
        out
    }
}

/// The attenuation each failing point needs: `over_db + margin_db` for every finite point with
/// a positive frequency and a positive exceedance, in the order given.
pub fn needs(exceedances: &[Exceedance], margin_db: f64) -> Vec<Need> {
    exceedances
        .iter()
        .filter(|e| e.freq_hz.is_finite() && e.freq_hz > 0.0 && e.over_db.is_finite())
        .filter(|e| e.over_db > 0.0)
        .map(|e| Need {
            freq_hz: e.freq_hz,
            needed_db: e.over_db + margin_db,
        })
        .collect()
}

/// Sizes every remedy that applies to `subject` for its `exceedances`.
///
/// Conducted scans get an LC filter (and a pi filter where it needs a smaller inductor), sized
/// on the failures below [`DM_CM_BOUNDARY_HZ`], and a common-mode choke and a ferrite sized on
/// those above it (each on all failures when its side has none, with a warning). Radiated scans
/// get the ferrite (150 Ω cable loop). Periodic sources (switching, clock, other) get edge
/// slowing; switching and clock sources get spread spectrum. Layout notes follow the same rules
/// of thumb. Ambient families are not the board's: do not size them.
///
/// # Errors
/// [`SizingError::BadParam`] for a bad setting or a fundamental that is not positive.
pub fn size_remedies(
    subject: &Subject,
    exceedances: &[Exceedance],
    params: &SizingParams,
) -> Result<SizedRemedies, SizingError> {
    params.check()?;
    positive("fundamental_hz", subject.fundamental_hz)?;
    let needs = needs(exceedances, params.design_margin_db);
    let (dm, cm, dm_all, cm_all) = split_by_mode(&needs);
    let periodic = matches!(subject.kind, Kind::Switching | Kind::Clock | Kind::Other);
    let ditherable = matches!(subject.kind, Kind::Switching | Kind::Clock);
    let conducted = subject.conducted;
    let mut lc_filter = conducted.then(|| lc_filter(&dm, params)).flatten();
    if let (Some(f), true) = (lc_filter.as_mut(), dm_all) {
        f.warnings.push(MODE_WARNING_DM.into());
    }
    let pi_filter = match &lc_filter {
        Some(lc) => pi_filter(&dm, params).filter(|p| p.inductance_h < lc.inductance_h),
        None => None,
    };
    let mut cm_choke = conducted.then(|| cm_choke(&cm, params)).flatten();
    if let (Some(c), true) = (cm_choke.as_mut(), cm_all) {
        c.warnings.push(MODE_WARNING_CM.into());
    }
    let loop_ohm = if conducted {
        params.cm_loop_ohm
    } else {
        params.cable_cm_ohm
    };
    let ferrite_needs = if conducted { &cm } else { &needs };
    Ok(SizedRemedies {
        lc_filter,
        pi_filter,
        cm_choke,
        ferrite: ferrite_clamp(ferrite_needs, loop_ohm, params),
        edges: periodic.then(|| edge_slowing(&needs, subject)).flatten(),
        spread: ditherable
            .then(|| spread_depth(&needs, subject, params.rbw_hz))
            .flatten(),
        notes: layout_notes(&needs, subject),
        needs,
    })
}

const MODE_WARNING_DM: &str = "all failures lie above 5 MHz, where common mode usually dominates (METHODS §9): a differential-mode filter may not reach them";
const MODE_WARNING_CM: &str = "all failures lie below 5 MHz, where differential mode usually dominates (METHODS §9): measure the DM/CM split before fitting a choke";

/// Needs below and above [`DM_CM_BOUNDARY_HZ`]; a side without failures takes all of them
/// (and says so with its flag).
fn split_by_mode(needs: &[Need]) -> (Vec<Need>, Vec<Need>, bool, bool) {
    let (dm, cm): (Vec<Need>, Vec<Need>) =
        needs.iter().partition(|n| n.freq_hz < DM_CM_BOUNDARY_HZ);
    let dm_all = dm.is_empty() && !cm.is_empty();
    let cm_all = cm.is_empty() && !dm.is_empty();
    (
        if dm_all { needs.to_vec() } else { dm },
        if cm_all { needs.to_vec() } else { cm },
        dm_all,
        cm_all,
    )
}

// ---------------------------------------------------------------------------------------------
// Small complex arithmetic for the filter models.

#[derive(Debug, Clone, Copy, PartialEq)]
struct Cx {
    re: f64,
    im: f64,
}

impl Cx {
    fn new(re: f64, im: f64) -> Cx {
        Cx { re, im }
    }
    fn add(self, o: Cx) -> Cx {
        Cx::new(self.re + o.re, self.im + o.im)
    }
    fn mul(self, o: Cx) -> Cx {
        Cx::new(
            self.re * o.re - self.im * o.im,
            self.re * o.im + self.im * o.re,
        )
    }
    fn inv(self) -> Cx {
        let d = self.re * self.re + self.im * self.im;
        Cx::new(self.re / d, -self.im / d)
    }
    fn abs(self) -> f64 {
        self.re.hypot(self.im)
    }
}

// ---------------------------------------------------------------------------------------------
// LC and pi filters.

/// Resonance (corner) frequency of an LC pair, Hz.
///
/// # Formula
/// ```text
/// f = 1 / (2π·√(L·C))
/// ```
/// L in H, C in F.
/// # Source
/// The series/parallel LC resonance (any circuits handbook).
pub fn lc_resonance_hz(inductance_h: f64, capacitance_f: f64) -> f64 {
    1.0 / (2.0 * PI * (inductance_h * capacitance_f).sqrt())
}

/// Corner of a second-order low-pass that gives `needed_db` at `freq_hz` on its asymptote.
///
/// # Formula
/// ```text
/// f_c = f / 10^(N/40)
/// ```
/// # Source
/// Derived: a second-order roll-off falls 40 dB/decade above its corner, so N dB need
/// N/40 decades between the corner and f.
pub fn lc_corner_asymptotic_hz(freq_hz: f64, needed_db: f64) -> f64 {
    freq_hz / 10f64.powf(needed_db / 40.0)
}

/// Insertion loss (dB) of a series L and shunt C between a noise current source (at C) and a
/// resistive load R (the LISN).
///
/// # Formula
/// ```text
/// IL = 20·log10 |1 − ω²LC + jωRC|
/// ```
/// Without the filter the whole noise current flows into R; with it the current divides between
/// C and L + R. In x = f/f_c and r = R/√(L/C): |1 − x² + j·r·x|, a second-order section with
/// damping ratio ζ = r/2.
/// # Source
/// Derived: current divider; the source is an ideal current source (common practice for a
/// converter's pulsed input current).
pub fn lc_insertion_loss_db(
    freq_hz: f64,
    inductance_h: f64,
    capacitance_f: f64,
    r_ohm: f64,
) -> f64 {
    let w = 2.0 * PI * freq_hz;
    let il = Cx::new(
        1.0 - w * w * inductance_h * capacitance_f,
        w * r_ohm * capacitance_f,
    );
    20.0 * il.abs().log10()
}

/// Corner at which the LC of [`lc_insertion_loss_db`] gives exactly `needed_db` at `freq_hz`,
/// for r = R/Z0.
///
/// # Formula
/// ```text
/// G = 10^(N/20);  u = x² solves u² + (r² − 2)·u + (1 − G²) = 0:
/// u = [(2 − r²) + √((r² − 2)² + 4(G² − 1))] / 2;   f_c = f / √u
/// ```
/// For r = √2 (ζ = 0.707) this is the maximally flat response, IL = 10·log10(1 + x⁴).
/// # Source
/// Derived from |1 − x² + j·r·x| = G.
pub fn lc_corner_hz(freq_hz: f64, needed_db: f64, r_over_z0: f64) -> f64 {
    let g2 = 10f64.powf(needed_db / 10.0);
    let b = r_over_z0 * r_over_z0 - 2.0;
    let u = (-b + (b * b + 4.0 * (g2 - 1.0)).max(0.0).sqrt()) / 2.0;
    if u > 0.0 { freq_hz / u.sqrt() } else { freq_hz }
}

/// The smallest value of `series` (one decade, e.g. [`E6`]) times a power of ten that is at
/// least `value` (within a part in 10⁹); `None` for a value that is not positive and finite.
pub fn series_at_or_above(value: f64, series: &[f64]) -> Option<f64> {
    if !(value.is_finite() && value > 0.0) {
        return None;
    }
    let decade = 10f64.powf(value.log10().floor());
    let candidates = series
        .iter()
        .map(|&s| s * decade)
        .chain(std::iter::once(10.0 * decade));
    candidates.into_iter().find(|&v| v >= value * (1.0 - 1e-9))
}

/// The next value of `series` above `value` (for stepping a part up).
fn series_next(value: f64, series: &[f64]) -> Option<f64> {
    series_at_or_above(value * 1.0001, series)
}

/// Optimal series R_d–C_d damping leg across the filter capacitor, with C_d = n·C.
///
/// # Formula
/// ```text
/// R_d = Z0·√[(2 + n)(4 + 3n) / (2n²(4 + n))],   peak |Z_out| = Z0·√(2(2 + n)) / n
/// ```
/// Z0 = √(L/C); Z_out is the filter's output impedance seen by the converter with the source
/// side shorted. n = 4 gives R_d ≈ 0.61·Z0 and a peak of 0.87·Z0.
/// # Source
/// The optimal single-resistor damping of an LC input filter in the power-electronics
/// literature (from memory); the unit test confirms it by a brute-force search of R_d.
pub fn optimal_damping(z0_ohm: f64, n: f64) -> (f64, f64) {
    let r = z0_ohm * ((2.0 + n) * (4.0 + 3.0 * n) / (2.0 * n * n * (4.0 + n))).sqrt();
    let peak = z0_ohm * (2.0 * (2.0 + n)).sqrt() / n;
    (r, peak)
}

/// |Z_out| (Ω) of L ‖ C ‖ (R_d + 1/(jωC_d)) at `freq_hz` (source side shorted).
pub fn damped_output_impedance_ohm(
    freq_hz: f64,
    inductance_h: f64,
    capacitance_f: f64,
    damping_c_f: f64,
    damping_r_ohm: f64,
) -> f64 {
    let w = 2.0 * PI * freq_hz;
    let y_l = Cx::new(0.0, -1.0 / (w * inductance_h));
    let y_c = Cx::new(0.0, w * capacitance_f);
    let y_d = Cx::new(damping_r_ohm, -1.0 / (w * damping_c_f)).inv();
    y_l.add(y_c).add(y_d).inv().abs()
}

/// Insertion loss (dB) of the LC with its damping leg, between a current source and R.
fn damped_lc_insertion_loss_db(freq_hz: f64, lc: (f64, f64), damping: &Damping, r: f64) -> f64 {
    let w = 2.0 * PI * freq_hz;
    let (l, c) = lc;
    let y_shunt = Cx::new(0.0, w * c)
        .add(Cx::new(damping.resistance_ohm, -1.0 / (w * damping.capacitance_f)).inv());
    let z_series = Cx::new(r, w * l);
    20.0 * Cx::new(1.0, 0.0).add(z_series.mul(y_shunt)).abs().log10()
}

/// Picks standard parts for a corner at or below `corner_hz` near `z0_ohm`: C rounded up to E6,
/// L = 1/((2π·f_c)²·C) rounded up to E12 (both roundings lower the corner).
fn standard_lc(corner_hz: f64, z0_ohm: f64) -> Option<(f64, f64)> {
    let w = 2.0 * PI * corner_hz;
    let c = series_at_or_above(1.0 / (w * z0_ohm), &E6)?;
    let l = series_at_or_above(1.0 / (w * w * c), &E12)?;
    Some((l, c))
}

/// Steps `l` up the E12 series until `loss(l)` meets every need (at most two decades).
fn meet_needs(mut l: f64, needs: &[Need], loss: impl Fn(f64, f64) -> f64) -> Option<f64> {
    for _ in 0..24 {
        if needs.iter().all(|n| loss(n.freq_hz, l) >= n.needed_db) {
            return Some(l);
        }
        l = series_next(l, &E12)?;
    }
    None
}

const LC_MODEL: &str = "second-order LC low-pass: IL = 20·log10|1 − ω²LC + jωRC|, 40 dB/decade above f_c = 1/(2π√(LC))";
const LC_ASSUMPTIONS: [&str; 4] = [
    "the converter is an ideal noise current source at the capacitor",
    "the LISN is a 50 Ω resistive load (METHODS §8: 50 µH ‖ 50 Ω, 34 Ω at 150 kHz, ±20 %)",
    "ideal parts: capacitor ESL and inductor winding capacitance end the roll-off at their self-resonances",
    "the failures are differential mode",
];

/// Sizes the LC low-pass on `needs` (None when there are none).
///
/// The binding failure is the one that asks for the lowest corner ([`lc_corner_hz`] with the
/// LISN's damping r = R/Z0); parts come from [`standard_lc`], and L is stepped up while any
/// failure is short of its need. The damping leg is [`optimal_damping`] with C_d = n·C rounded
/// up to E6 and R_d to the nearest E12 value at or above it.
fn lc_filter(needs: &[Need], p: &SizingParams) -> Option<LcFilter> {
    let r = p.lisn_ohm / p.filter_z0_ohm;
    let (binding, corner_hz) = needs
        .iter()
        .map(|n| (*n, lc_corner_hz(n.freq_hz, n.needed_db, r)))
        .min_by(|a, b| a.1.total_cmp(&b.1))?;
    let (l0, c) = standard_lc(corner_hz, p.filter_z0_ohm)?;
    let l = meet_needs(l0, needs, |f, l| lc_insertion_loss_db(f, l, c, p.lisn_ohm))?;
    let z0 = (l / c).sqrt();
    let (rd, _) = optimal_damping(z0, p.damping_ratio);
    let cd = series_at_or_above(p.damping_ratio * c, &E6)?;
    let rd = series_at_or_above(rd, &E12)?;
    let peak = peak_output_impedance(l, c, cd, rd);
    let damping = Damping {
        capacitance_f: cd,
        resistance_ohm: rd,
        peak_output_ohm: peak,
    };
    let predicted = predict(needs, |f| lc_insertion_loss_db(f, l, c, p.lisn_ohm));
    let actual_corner_hz = lc_resonance_hz(l, c);
    let damped_ok = needs.iter().all(|n| {
        damped_lc_insertion_loss_db(n.freq_hz, (l, c), &damping, p.lisn_ohm) >= n.needed_db
    });
    let mut warnings = Vec::new();
    if !damped_ok {
        warnings.push("with the damping leg fitted the filter falls short at some failure: step L up one value".into());
    }
    let sentence = format!(
        "LC filter: {} in series and {} across the supply input (corner {}) give ≥ {:.0} dB at {}, the binding failure; damp it with {} in series with {} across the capacitor",
        fmt_si(l, "H"),
        fmt_si(c, "F"),
        fmt_hz(actual_corner_hz),
        binding.needed_db,
        fmt_hz(binding.freq_hz),
        fmt_si(rd, "Ω"),
        fmt_si(cd, "F"),
    );
    Some(LcFilter {
        binding,
        corner_asymptotic_hz: lc_corner_asymptotic_hz(binding.freq_hz, binding.needed_db),
        corner_hz,
        inductance_h: l,
        capacitance_f: c,
        actual_corner_hz,
        z0_ohm: z0,
        predicted,
        damping,
        model: LC_MODEL,
        assumptions: LC_ASSUMPTIONS.to_vec(),
        warnings,
        sentence,
    })
}

/// Peak over frequency of [`damped_output_impedance_ohm`], searched on a log grid from a
/// decade below to a decade above the LC resonance.
fn peak_output_impedance(l: f64, c: f64, cd: f64, rd: f64) -> f64 {
    let f0 = lc_resonance_hz(l, c);
    (0..=2000)
        .map(|i| f0 * 10f64.powf(-1.0 + f64::from(i) / 1000.0))
        .map(|f| damped_output_impedance_ohm(f, l, c, cd, rd))
        .fold(0.0, f64::max)
}

fn predict(needs: &[Need], loss: impl Fn(f64) -> f64) -> Vec<Predicted> {
    needs
        .iter()
        .map(|n| Predicted {
            freq_hz: n.freq_hz,
            needed_db: n.needed_db,
            predicted_db: loss(n.freq_hz),
        })
        .collect()
}

/// Insertion loss (dB) of a CLC (pi) low-pass, C1 at the current source, L, C2 across R.
///
/// # Formula
/// ```text
/// IL = 20·log10 |1 + jωR(C1 + C2) − ω²LC1 − jω³LC1C2R|
/// ```
/// third order: 60 dB/decade far above the corner. For C1 = C2 = C, x = f/f_c and
/// r = R/√(L/C): |1 − x² + j·r·x·(2 − x²)|.
/// # Source
/// Derived: two current dividers (C1 against L + C2 ‖ R, then C2 against R).
pub fn pi_insertion_loss_db(
    freq_hz: f64,
    inductance_h: f64,
    capacitance_f: f64,
    r_ohm: f64,
) -> f64 {
    let w = 2.0 * PI * freq_hz;
    let (l, c) = (inductance_h, capacitance_f);
    let il = Cx::new(
        1.0 - w * w * l * c,
        w * r_ohm * 2.0 * c - w * w * w * l * c * c * r_ohm,
    );
    20.0 * il.abs().log10()
}

/// x = f/f_c at which the pi of [`pi_insertion_loss_db`] (C1 = C2) reaches `needed_db`;
/// searched at x ≥ 2, where the loss rises monotonically (below, the pi's own resonance at
/// x = √2 gives no loss at all).
fn pi_ratio(needed_db: f64, r: f64) -> f64 {
    let loss = |x: f64| 20.0 * Cx::new(1.0 - x * x, r * x * (2.0 - x * x)).abs().log10();
    let (mut lo, mut hi) = (2.0f64, 1e4f64);
    if loss(lo) >= needed_db {
        return lo;
    }
    for _ in 0..100 {
        let mid = (lo * hi).sqrt();
        if loss(mid) >= needed_db {
            hi = mid;
        } else {
            lo = mid;
        }
    }
    hi
}

/// Sizes the CLC (pi) filter on `needs`; parts as for the LC (C1 = C2 from E6, L from E12).
fn pi_filter(needs: &[Need], p: &SizingParams) -> Option<PiFilter> {
    let r = p.lisn_ohm / p.filter_z0_ohm;
    let (binding, corner_hz) = needs
        .iter()
        .map(|n| (*n, n.freq_hz / pi_ratio(n.needed_db, r)))
        .min_by(|a, b| a.1.total_cmp(&b.1))?;
    let (l0, c) = standard_lc(corner_hz, p.filter_z0_ohm)?;
    let l = meet_needs(l0, needs, |f, l| pi_insertion_loss_db(f, l, c, p.lisn_ohm))?;
    let actual_corner_hz = lc_resonance_hz(l, c);
    let sentence = format!(
        "or a pi filter: {} on each side of {} (corner {}), 60 dB/decade, a smaller inductor for ≥ {:.0} dB at {}",
        fmt_si(c, "F"),
        fmt_si(l, "H"),
        fmt_hz(actual_corner_hz),
        binding.needed_db,
        fmt_hz(binding.freq_hz)
    );
    Some(PiFilter {
        binding,
        inductance_h: l,
        capacitance_f: c,
        actual_corner_hz,
        predicted: predict(needs, |f| pi_insertion_loss_db(f, l, c, p.lisn_ohm)),
        model: "CLC (pi) low-pass: IL = 20·log10|1 + jωR(C1+C2) − ω²LC1 − jω³LC1C2R|, 60 dB/decade",
        assumptions: LC_ASSUMPTIONS.to_vec(),
        sentence,
    })
}

// ---------------------------------------------------------------------------------------------
// Common-mode choke and ferrite.

/// Series impedance that gives `needed_db` in a loop of `loop_ohm` when the two add in phase.
///
/// # Formula
/// ```text
/// IL = 20·log10(1 + Z/Z_loop)   ⇒   Z = Z_loop·(10^(IL/20) − 1)
/// ```
/// # Source
/// Derived: a series impedance in a loop driven by a voltage source; in phase holds for a
/// resistive impedance (a ferrite in its lossy region) in a resistive loop.
pub fn series_impedance_for_loss_ohm(needed_db: f64, loop_ohm: f64) -> f64 {
    loop_ohm * (10f64.powf(needed_db / 20.0) - 1.0)
}

/// Inductance (H) of a common-mode choke that gives `needed_db` at `freq_hz` in a loop of
/// resistance R, with an optional stray capacitance C_s in the source path.
///
/// # Formula
/// ```text
/// X_s = 1/(ωC_s) (0 without C_s);   G = 10^(N/20)
/// IL = |R + j(ωL − X_s)| / |R − jX_s| = G   ⇒   ωL = X_s + √(G²(R² + X_s²) − R²)
/// ```
/// The reactances are in quadrature with R (an inductance), so for C_s = 0: ωL = R·√(G² − 1).
/// # Source
/// Derived: loop current of a voltage source through R, C_s and L.
pub fn cm_choke_inductance_h(
    freq_hz: f64,
    needed_db: f64,
    loop_ohm: f64,
    stray_capacitance_f: Option<f64>,
) -> f64 {
    let w = 2.0 * PI * freq_hz;
    let xs = stray_capacitance_f.map_or(0.0, |c| 1.0 / (w * c));
    let g2 = 10f64.powf(needed_db / 10.0);
    let r2 = loop_ohm * loop_ohm;
    (xs + (g2 * (r2 + xs * xs) - r2).max(0.0).sqrt()) / w
}

/// Insertion loss (dB) of a choke of `inductance_h` in the loop of [`cm_choke_inductance_h`].
pub fn cm_choke_loss_db(
    freq_hz: f64,
    inductance_h: f64,
    loop_ohm: f64,
    stray_capacitance_f: Option<f64>,
) -> f64 {
    let w = 2.0 * PI * freq_hz;
    let xs = stray_capacitance_f.map_or(0.0, |c| 1.0 / (w * c));
    let with = loop_ohm.hypot(w * inductance_h - xs);
    let without = loop_ohm.hypot(xs);
    20.0 * (with / without).log10()
}

fn cm_choke(needs: &[Need], p: &SizingParams) -> Option<CmChoke> {
    let cs = p.stray_capacitance_f;
    let (binding, l) = needs
        .iter()
        .map(|n| {
            (
                *n,
                cm_choke_inductance_h(n.freq_hz, n.needed_db, p.cm_loop_ohm, cs),
            )
        })
        .max_by(|a, b| a.1.total_cmp(&b.1))?;
    let w = 2.0 * PI * binding.freq_hz;
    let loop_mag = p.cm_loop_ohm.hypot(cs.map_or(0.0, |c| 1.0 / (w * c)));
    let impedance_ohm = series_impedance_for_loss_ohm(binding.needed_db, loop_mag);
    let mut warnings = Vec::new();
    if let Some(c) = cs {
        warnings.push(format!(
            "the choke and the {} stray capacitance resonate near {}: there the emission rises; check that region after fitting it",
            fmt_si(c, "F"),
            fmt_hz(lc_resonance_hz(l, c))
        ));
    }
    if needs.iter().any(|n| n.freq_hz >= 10e6) {
        warnings.push("above about 10 MHz a choke's winding capacitance limits it (common practice): read its impedance curve at the failing frequency".into());
    }
    let sentence = format!(
        "common-mode choke: ≥ {} per line (|Z| ≥ {:.0} Ω at {}) gives ≥ {:.0} dB against the LISN's {:.0} Ω common-mode load",
        fmt_si(l, "H"),
        impedance_ohm,
        fmt_hz(binding.freq_hz),
        binding.needed_db,
        p.cm_loop_ohm,
    );
    Some(CmChoke {
        binding,
        loop_ohm: p.cm_loop_ohm,
        impedance_ohm,
        inductance_h: l,
        predicted: predict(needs, |f| cm_choke_loss_db(f, l, p.cm_loop_ohm, cs)),
        model: "series impedance in the common-mode loop: IL = 20·log10|Z_loop + Z_choke| / |Z_loop|",
        assumptions: vec![
            "common-mode noise is a voltage source driving the LISN's two 50 Ω ports in parallel (25 Ω)",
            "the source's own impedance (stray capacitance of the switch node or heatsink) is neglected unless given; neglecting it understates the choke needed",
            "the choke is a pure inductance at the failing frequency",
        ],
        warnings,
        sentence,
    })
}

/// Typical impedance range (Ω) of one pass through a clamp-on cable ferrite at `freq_hz`:
/// roughly 100-300 Ω from 100 MHz to 1 GHz (common practice), falling about as √f below
/// 100 MHz (from memory: a rough shape of the inductive region; the part's impedance curve
/// decides).
pub fn typical_clamp_single_pass_ohm(freq_hz: f64) -> (f64, f64) {
    let scale = (freq_hz / 100e6).clamp(0.0, 1.0).sqrt();
    (100.0 * scale, 300.0 * scale)
}

/// Passes N through a ferrite such that N²·Z₁ ≥ `needed_ohm`.
///
/// # Formula
/// ```text
/// N = ⌈√(Z_needed / Z₁)⌉
/// ```
/// # Source
/// METHODS §9: a ferrite's impedance scales with N² (N passes through the core).
pub fn ferrite_turns(needed_ohm: f64, single_pass_ohm: f64) -> u32 {
    let n = (needed_ohm / single_pass_ohm).max(1.0).sqrt().ceil();
    if n.is_finite() && n < f64::from(u32::MAX) {
        n as u32
    } else {
        u32::MAX
    }
}

fn ferrite_clamp(needs: &[Need], loop_ohm: f64, p: &SizingParams) -> Option<FerriteClamp> {
    let single = |f: f64| {
        p.ferrite_single_pass_ohm
            .unwrap_or_else(|| typical_clamp_single_pass_ohm(f).0)
    };
    let (binding, needed_ohm, z1) = needs
        .iter()
        .map(|n| {
            let z = series_impedance_for_loss_ohm(n.needed_db, loop_ohm);
            (*n, z, single(n.freq_hz))
        })
        .filter(|x| x.2 > 0.0)
        .max_by(|a, b| (a.1 / a.2).total_cmp(&(b.1 / b.2)))?;
    let wanted = ferrite_turns(needed_ohm, z1);
    let turns = wanted.min(p.max_ferrite_turns);
    let per_clamp = f64::from(turns).powi(2) * z1;
    let clamps = (needed_ohm / per_clamp).max(1.0).ceil() as u32;
    let mut warnings = vec![
        "each extra pass adds winding capacitance (about ∝ N) while Z grows as N², so the self-resonance falls (METHODS §9): check the core's curve for N passes".to_string(),
    ];
    if wanted > p.max_ferrite_turns {
        warnings.push(format!(
            "{wanted} passes would be needed; capped at {turns}: use {clamps} clamps in series (their impedances add), a larger core, or fix it at the source"
        ));
    }
    let assumed = p.ferrite_single_pass_ohm.is_none();
    let sentence = format!(
        "ferrite clamp: {} pass{} through {} clamp{} (≈ {:.0} Ω per pass{} at {}) give the {:.0} Ω needed for {:.0} dB against a {:.0} Ω common-mode loop",
        turns,
        if turns == 1 { "" } else { "es" },
        clamps,
        if clamps == 1 { "" } else { "s in series" },
        z1,
        if assumed { ", a typical value" } else { "" },
        fmt_hz(binding.freq_hz),
        needed_ohm,
        binding.needed_db,
        loop_ohm
    );
    Some(FerriteClamp {
        binding,
        loop_ohm,
        needed_ohm,
        single_pass_ohm: z1,
        single_pass_assumed: assumed,
        turns,
        clamps,
        model: "resistive series impedance N²·Z₁ in the common-mode loop: IL = 20·log10(1 + N²Z₁/Z_loop)",
        assumptions: vec![
            "the ferrite is resistive at the failing frequency and adds in phase with the loop",
            "loop: 25 Ω (LISN, conducted) or 150 Ω (cable, radiated)",
            "without a given value, one pass is the low end of a typical clamp: 100-300 Ω at 100 MHz, about ∝ √f below (common practice / from memory)",
        ],
        warnings,
        sentence,
    })
}

// ---------------------------------------------------------------------------------------------
// Edge slowing.

/// Break points of the trapezoid envelope, Hz: 1/(π·τ) and 1/(π·τr).
///
/// # Formula
/// ```text
/// f1 = 1/(π·τ),  f2 = 1/(π·τr)
/// ```
/// τ: pulse width at the 50 % points, τr: full linear ramp time (= 10-90 % time / 0.8).
/// # Source
/// METHODS §5: the trapezoid spectrum (flat to f1, −20 dB/decade to f2, −40 dB/decade above).
pub fn trapezoid_breakpoints_hz(pulse_width_s: f64, ramp_s: f64) -> (f64, f64) {
    (1.0 / (PI * pulse_width_s), 1.0 / (PI * ramp_s))
}

/// Upper envelope of |sin x / x|: sin x / x up to x = π/2, 1/x beyond (the two meet with equal
/// slope at π/2; the envelope touches |sin x/x| wherever |sin x| = 1).
pub fn sinc_envelope(x: f64) -> f64 {
    let x = x.abs();
    if x < 1e-12 {
        1.0
    } else if x <= PI / 2.0 {
        x.sin() / x
    } else {
        1.0 / x
    }
}

/// Reduction (dB) of the trapezoid harmonic envelope at `freq_hz` when the ramp time `ramp_s`
/// grows by `factor`.
///
/// # Formula
/// ```text
/// ΔL = 20·log10[ E(π·f·τr) / E(π·f·k·τr) ],   E from [`sinc_envelope`]
/// ```
/// The rise-time factor of the trapezoid spectrum is |sin(π f τr)/(π f τr)| (METHODS §5); the
/// pulse-width factor is unchanged. Well above both the old and the new corner this is
/// 20·log10(k) (the envelope there is ∝ 1/τr); below the new corner 1/(π·k·τr) it is nearly 0.
/// # Source
/// Derived from METHODS §5.
pub fn edge_reduction_db(freq_hz: f64, ramp_s: f64, factor: f64) -> f64 {
    let x = PI * freq_hz * ramp_s;
    20.0 * (sinc_envelope(x) / sinc_envelope(x * factor)).log10()
}

/// Rise-time factor for `needed_db` far above both corners: k = 10^(N/20) (derived: the
/// envelope above 1/(π·τr) is 2A/(π²·T·f²·τr), ∝ 1/τr; METHODS §5).
pub fn edge_factor_far(needed_db: f64) -> f64 {
    10f64.powf(needed_db / 20.0)
}

/// Rise-time factor k ≥ 1 that gives `needed_db` at `freq_hz` by [`edge_reduction_db`];
/// `None` when even k = 10⁶ does not.
pub fn edge_factor(freq_hz: f64, ramp_s: f64, needed_db: f64) -> Option<f64> {
    let (mut lo, mut hi) = (0.0f64, 6.0f64); // log10 k
    if edge_reduction_db(freq_hz, ramp_s, 10f64.powf(hi)) < needed_db {
        return None;
    }
    for _ in 0..80 {
        let mid = 0.5 * (lo + hi);
        if edge_reduction_db(freq_hz, ramp_s, 10f64.powf(mid)) >= needed_db {
            hi = mid;
        } else {
            lo = mid;
        }
    }
    Some(10f64.powf(hi))
}

/// 10-90 % time of a linear ramp over the full ramp time (METHODS §5).
pub const TEN_NINETY_SHARE: f64 = 0.8;

fn edge_slowing(needs: &[Need], s: &Subject) -> Option<EdgeSlowing> {
    let worst = needs
        .iter()
        .max_by(|a, b| a.needed_db.total_cmp(&b.needed_db))?;
    let Some(t1090) = s.edge_time_s.filter(|t| t.is_finite() && *t > 0.0) else {
        return Some(edge_unknown(*worst));
    };
    let ramp = t1090 / TEN_NINETY_SHARE;
    let period = 1.0 / s.fundamental_hz;
    let duty = s.duty.unwrap_or(0.5);
    let room = duty.min(1.0 - duty) * period; // the ramp must fit in the shorter half
    let k_room = (room / ramp).max(1.0);
    let factors: Vec<(Need, Option<f64>)> = needs
        .iter()
        .map(|n| (*n, edge_factor(n.freq_hz, ramp, n.needed_db)))
        .collect();
    let binding = factors.iter().max_by(|a, b| {
        a.1.unwrap_or(f64::INFINITY)
            .total_cmp(&b.1.unwrap_or(f64::INFINITY))
    })?;
    let k = binding.1.unwrap_or(f64::INFINITY);
    let feasible = k <= k_room;
    let k_used = k.min(k_room);
    let new_corner = 1.0 / (PI * k_used * ramp);
    let mut warnings = Vec::new();
    if feasible && k * ramp > 0.1 * room {
        warnings.push("the new edges take more than a tenth of the shorter of on- and off-time: a converter's switching losses grow about in proportion to edge time, a clock's timing margins shrink (common practice)".into());
    }
    if !feasible {
        let short: Vec<String> = needs
            .iter()
            .filter(|n| edge_reduction_db(n.freq_hz, ramp, k_room) < n.needed_db)
            .map(|n| fmt_hz(n.freq_hz))
            .collect();
        warnings.push(format!(
            "the edges cannot grow by {:.1}×: they would fill the pulse; at the longest edge ({}) slowing cannot reach {}, slowing cannot help below its new corner {}",
            k,
            fmt_s(k_room * ramp * TEN_NINETY_SHARE),
            short.join(", "),
            fmt_hz(new_corner)
        ));
    }
    let sentence = format!(
        "slower edges: a {:.1}× longer rise and fall time ({} → {} 10-90 %, gate resistor or snubber) gives ≥ {:.0} dB at {}; no effect below the new corner {}",
        k_used,
        fmt_s(t1090),
        fmt_s(t1090 * k_used),
        binding.0.needed_db,
        fmt_hz(binding.0.freq_hz),
        fmt_hz(new_corner)
    );
    Some(EdgeSlowing {
        binding: binding.0,
        factor: k,
        rise_time_s: Some(t1090),
        new_rise_time_s: Some(t1090 * k_used),
        corner_hz: Some(1.0 / (PI * ramp)),
        new_corner_hz: Some(new_corner),
        feasible,
        model: EDGE_MODEL,
        assumptions: EDGE_ASSUMPTIONS.to_vec(),
        warnings,
        sentence,
    })
}

const EDGE_MODEL: &str = "trapezoid spectrum (METHODS §5): rise-time factor |sin(πfτr)/(πfτr)|; above 1/(πτr) the envelope is ∝ 1/τr, so k× slower edges give 20·log10(k) dB";
const EDGE_ASSUMPTIONS: [&str; 3] = [
    "the emission follows the trapezoid envelope of the switching waveform (ringing and resonances of the coupling path aside)",
    "rise and fall are equal linear ramps; τr = t(10-90 %)/0.8",
    "the upper envelope of the sinc factor is used, not the value at each harmonic (which has nulls)",
];

/// Edge slowing when the present rise time is unknown: k = 10^(N/20) for the largest need,
/// valid if the failures lie above the present corner (a lower bound otherwise).
fn edge_unknown(worst: Need) -> EdgeSlowing {
    let k = edge_factor_far(worst.needed_db);
    EdgeSlowing {
        binding: worst,
        factor: k,
        rise_time_s: None,
        new_rise_time_s: None,
        corner_hz: None,
        new_corner_hz: None,
        feasible: true,
        model: EDGE_MODEL,
        assumptions: EDGE_ASSUMPTIONS.to_vec(),
        warnings: vec!["the present rise time is unknown: the factor assumes the failures lie above the edge corner 1/(π·τr); below it more is needed, and below the new corner slowing does nothing".into()],
        sentence: format!(
            "slower edges: rise and fall times {:.1}× longer give ≥ {:.0} dB at {} if it lies above the edge corner 1/(π·τr) (declare edge_time_s to check)",
            k,
            worst.needed_db,
            fmt_hz(worst.freq_hz)
        ),
    }
}

// ---------------------------------------------------------------------------------------------
// Spread spectrum.

/// Peak-reading reduction (dB) of harmonic n under a total spread Δf of the fundamental.
///
/// # Formula
/// ```text
/// ΔL ≈ 10·log10(n·Δf / RBW)
/// ```
/// valid for n·Δf ≫ RBW and a modulation rate well below the RBW; an upper estimate.
/// # Source
/// METHODS §9 (common practice).
pub fn spread_reduction_db(harmonic: f64, spread_hz: f64, rbw_hz: f64) -> f64 {
    10.0 * (harmonic * spread_hz / rbw_hz).log10()
}

/// Total spread (fraction of the fundamental) that lowers the reading at `freq_hz` by
/// `needed_db`: [`spread_reduction_db`] inverted, with n·Δf = δ·f:
/// δ = RBW·10^(N/10) / f.
pub fn spread_for_reduction(freq_hz: f64, needed_db: f64, rbw_hz: f64) -> f64 {
    rbw_hz * 10f64.powf(needed_db / 10.0) / freq_hz
}

/// Published empirical peak reduction (dB) of a spread-spectrum clock harmonic.
///
/// # Formula
/// ```text
/// A = 6.5 + 9·log10(f / 1 MHz) + 9·log10(δ)
/// ```
/// δ: total spread as a fraction (2 % → 0.02).
/// # Source
/// METHODS §9 [C: S36]; check values 66.6 MHz, 2 % → 7.62 dB; 199.8 MHz → 11.91 dB.
pub fn empirical_spread_reduction_db(freq_hz: f64, spread: f64) -> f64 {
    6.5 + 9.0 * (freq_hz / 1e6).log10() + 9.0 * spread.log10()
}

/// [`empirical_spread_reduction_db`] inverted: δ = 10^((A − 6.5 − 9·log10(f/MHz)) / 9).
pub fn empirical_spread_for_reduction(freq_hz: f64, reduction_db: f64) -> f64 {
    10f64.powf((reduction_db - 6.5 - 9.0 * (freq_hz / 1e6).log10()) / 9.0)
}

fn spread_depth(needs: &[Need], s: &Subject, rbw_hz: f64) -> Option<SpreadDepth> {
    let present = s.spread_pct.unwrap_or(0.0) / 100.0;
    // a source that is already dithered shows its reduction in the measured levels: the new
    // spread must give that reduction plus the need
    let rbw_rule = |n: &Need| {
        let have = if present > 0.0 {
            spread_reduction_db(1.0, present * n.freq_hz, rbw_hz).max(0.0)
        } else {
            0.0
        };
        spread_for_reduction(n.freq_hz, have + n.needed_db, rbw_hz)
    };
    let (binding, delta) = needs
        .iter()
        .map(|n| (*n, rbw_rule(n)))
        .max_by(|a, b| a.1.total_cmp(&b.1))?;
    let empirical = (s.kind == Kind::Clock).then(|| {
        let have = if present > 0.0 {
            empirical_spread_reduction_db(binding.freq_hz, present).max(0.0)
        } else {
            0.0
        };
        empirical_spread_for_reduction(binding.freq_hz, have + binding.needed_db)
    });
    let mut warnings = vec!["quasi-peak and average readings fall by other amounts than the peak (they depend on the modulation rate); the emitted power is not reduced".to_string()];
    let limit = if s.kind == Kind::Clock { 0.02 } else { 0.10 };
    if delta > limit {
        warnings.push(format!(
            "{:.1} % is beyond the {:.0} % commonly used for {} (common practice){}",
            delta * 100.0,
            limit * 100.0,
            if s.kind == Kind::Clock {
                "clocks: timing margins suffer"
            } else {
                "converters: regulation and magnetics suffer"
            },
            if delta >= 1.0 {
                "; spread spectrum cannot deliver this"
            } else {
                ""
            }
        ));
    }
    let harmonic = binding.freq_hz / s.fundamental_hz;
    let sentence = if delta > limit {
        format!(
            "spread spectrum: not a practical fix here: ≥ {:.0} dB at {} would take a total spread of {:.1} % of {}, beyond the {:.0} % commonly used",
            binding.needed_db,
            fmt_hz(binding.freq_hz),
            delta * 100.0,
            fmt_hz(s.fundamental_hz),
            limit * 100.0
        )
    } else {
        format!(
            "spread spectrum: a total spread of {:.2} % of {} ({}) lowers the peak reading of harmonic {:.0} at {} by ≥ {:.0} dB in a {} RBW",
            delta * 100.0,
            fmt_hz(s.fundamental_hz),
            fmt_hz(delta * s.fundamental_hz),
            harmonic,
            fmt_hz(binding.freq_hz),
            binding.needed_db,
            fmt_hz(rbw_hz)
        )
    };
    Some(SpreadDepth {
        binding,
        harmonic,
        spread_pct: delta * 100.0,
        rbw_hz,
        empirical_spread_pct: empirical.map(|d| d * 100.0),
        model: "ΔL ≈ 10·log10(n·Δf/RBW) (METHODS §9); for clocks also A = 6.5 + 9·log10(f/MHz) + 9·log10(δ)",
        assumptions: vec![
            "n·Δf ≫ RBW and a modulation rate well below the RBW (peak detector)",
            "an upper estimate: the reduction depends on the modulation profile",
        ],
        warnings,
        sentence,
    })
}

// ---------------------------------------------------------------------------------------------
// Layout notes.

fn layout_notes(needs: &[Need], s: &Subject) -> Vec<LayoutNote> {
    let mut out = Vec::new();
    let below_boundary = needs.iter().any(|n| n.freq_hz < DM_CM_BOUNDARY_HZ);
    let above_boundary = needs.iter().any(|n| n.freq_hz >= DM_CM_BOUNDARY_HZ);
    let any = |lo: f64, hi: f64| needs.iter().any(|n| (lo..=hi).contains(&n.freq_hz));
    let converter = s.kind == Kind::Switching;
    if s.conducted && below_boundary && converter {
        out.push(LayoutNote {
            text: "differential mode: put the filter capacitor right at the converter input and keep the loop of input capacitor, switch and return small".into(),
            rule: "below about 5 MHz conducted noise is mostly differential mode (METHODS §9)",
        });
    }
    if s.conducted && above_boundary && converter {
        out.push(LayoutNote {
            text: "common mode: shrink the switch-node copper and its capacitance to heatsink and chassis, return Y capacitors to the primary side, keep input and output wiring apart".into(),
            rule: "above about 5 MHz conducted noise is mostly common mode, driven through stray capacitance (METHODS §9)",
        });
    }
    if s.kind == Kind::Switching && s.conducted && any(3e6, 12e6) {
        out.push(LayoutNote {
            text: "3-12 MHz: an RC snubber across the switch damps drain ringing".into(),
            rule: "flyback drain ringing (3-12 MHz) drives common-mode current through stray capacitance (METHODS §9)",
        });
    }
    if s.kind == Kind::Switching && s.conducted && any(20e6, 30e6) {
        out.push(LayoutNote {
            text: "20-30 MHz: a snubber across the output rectifier damps its reverse-recovery ringing".into(),
            rule: "output-diode ringing (20-30 MHz) drives common-mode current through stray capacitance (METHODS §9)",
        });
    }
    if !s.conducted {
        out.push(LayoutNote {
            text: "radiated: cables are the usual antennas; terminate cable shields all round at the enclosure, keep return paths unbroken under fast signals, and filter where cables leave the board".into(),
            rule: "common-mode current on cables dominates radiated emission below a few hundred MHz (common practice)",
        });
    }
    if s.kind == Kind::Clock {
        out.push(LayoutNote {
            text: "clock: a series resistor at the driver slows the edges and damps reflections; route the clock over an unbroken ground plane".into(),
            rule: "edge rate sets the upper envelope of a clock's harmonics (METHODS §5)",
        });
    }
    out
}

// ---------------------------------------------------------------------------------------------
// Formatting.

/// A value with an SI prefix and three significant digits: 2.2e-7, "F" → "220 nF".
pub fn fmt_si(value: f64, unit: &str) -> String {
    const PREFIXES: [(f64, &str); 8] = [
        (1e9, "G"),
        (1e6, "M"),
        (1e3, "k"),
        (1.0, ""),
        (1e-3, "m"),
        (1e-6, "µ"),
        (1e-9, "n"),
        (1e-12, "p"),
    ];
    if !value.is_finite() || value == 0.0 {
        return format!("{value} {unit}");
    }
    let (scale, prefix) = PREFIXES
        .iter()
        .find(|(s, _)| value.abs() >= *s * 0.9995)
        .copied()
        .unwrap_or((1e-12, "p"));
    let m = value / scale;
    let digits = if m >= 99.95 {
        0
    } else if m >= 9.995 {
        1
    } else {
        2
    };
    let text = format!("{m:.digits$}");
    let text = if text.contains('.') {
        text.trim_end_matches('0').trim_end_matches('.').to_string()
    } else {
        text
    };
    format!("{text} {prefix}{unit}")
}

fn fmt_s(seconds: f64) -> String {
    fmt_si(seconds, "s")
}

#[cfg(test)]
mod tests {
    use super::*;

    fn close(a: f64, b: f64, tol: f64) -> bool {
        (a - b).abs() <= tol
    }

    #[test]
    fn lc_resonance_of_a_known_pair() {
        // source: handbook formula f = 1/(2π√(LC)); 10 µH, 1 µF: 1/(2π·3.1623e-6) = 50.33 kHz
        assert!(close(lc_resonance_hz(10e-6, 1e-6), 50_329.2, 0.1));
    }

    #[test]
    fn asymptotic_corner_is_one_decade_per_40_db() {
        // source: derived, second-order roll-off 40 dB/decade: 40 dB at 150 kHz → 15 kHz;
        // 46 dB → 150 kHz / 10^1.15 = 10.619 kHz
        assert!(close(lc_corner_asymptotic_hz(150e3, 40.0), 15e3, 1e-6));
        assert!(close(lc_corner_asymptotic_hz(150e3, 46.0), 10_619.2, 0.1));
    }

    #[test]
    fn exact_corner_at_zeta_0707_is_the_maximally_flat_response() {
        // source: textbook, the maximally flat second-order low-pass (ζ = 1/√2) has |H|² = 1/(1 + x⁴), so
        // 40 dB needs x⁴ = 10⁴ − 1: x = 9.99975, corner 15.0004 kHz for 150 kHz
        let r = 2f64.sqrt();
        let fc = lc_corner_hz(150e3, 40.0, r);
        assert!(close(fc, 150e3 / (1e4f64 - 1.0).powf(0.25), 1e-6));
        // and the loss of an LC with that corner and Z0 = R/√2, at 10× the corner: 10·log10(1 + 10⁴)
        let z0 = 50.0 / r;
        let w = 2.0 * PI * 10e3;
        let (l, c) = (z0 / w, 1.0 / (w * z0));
        assert!(close(
            lc_insertion_loss_db(100e3, l, c, 50.0),
            10.0 * 10001f64.log10(),
            1e-9
        ));
        // ζ = 0.5 (Z0 = R) needs a lower corner than the asymptote: u = (1 + √(4G² − 3))/2
        // (derived from the same quadratic)
        let g2 = 1e4;
        let u = (1.0 + (4.0 * g2 - 3.0f64).sqrt()) / 2.0;
        assert!(close(
            lc_corner_hz(150e3, 40.0, 1.0),
            150e3 / u.sqrt(),
            1e-6
        ));
        assert!(lc_corner_hz(150e3, 40.0, 1.0) < lc_corner_asymptotic_hz(150e3, 40.0));
    }

    #[test]
    fn preferred_values_round_up() {
        // source: IEC 60063 E6 (1.0 1.5 2.2 3.3 4.7 6.8) and E12 series (from memory)
        assert!(close(
            series_at_or_above(0.212e-6, &E6).unwrap(),
            0.22e-6,
            1e-15
        ));
        assert!(close(series_at_or_above(4.8, &E6).unwrap(), 6.8, 1e-12));
        assert!(close(series_at_or_above(6.9, &E6).unwrap(), 10.0, 1e-12));
        assert!(close(series_at_or_above(1.0, &E6).unwrap(), 1.0, 1e-12));
        assert!(close(
            series_at_or_above(530e-6, &E12).unwrap(),
            560e-6,
            1e-15
        ));
        assert_eq!(series_at_or_above(0.0, &E6), None);
        assert_eq!(series_at_or_above(f64::NAN, &E6), None);
    }

    #[test]
    fn lc_design_meets_every_need_with_standard_parts() {
        let needs = [
            Need {
                freq_hz: 150e3,
                needed_db: 30.0,
            },
            Need {
                freq_hz: 450e3,
                needed_db: 50.0,
            },
        ];
        let f = lc_filter(&needs, &SizingParams::default()).unwrap();
        // 450 kHz at 50 dB asks for the lower corner than 150 kHz at 30 dB (derived from the
        // asymptote: 25.3 kHz against 26.7 kHz)
        assert_eq!(f.binding.freq_hz, 450e3);
        assert!(f.actual_corner_hz <= f.corner_hz * (1.0 + 1e-9));
        assert!(
            f.predicted.iter().all(|p| p.predicted_db >= p.needed_db),
            "{:?}",
            f.predicted
        );
        let mantissa = |v: f64| v / 10f64.powf(v.log10().floor());
        assert!(
            E6.iter()
                .any(|&e| close(mantissa(f.capacitance_f), e, 1e-9))
        );
        assert!(
            E12.iter()
                .any(|&e| close(mantissa(f.inductance_h), e, 1e-9))
        );
        assert!(f.sentence.starts_with("LC filter:"), "{}", f.sentence);
    }

    #[test]
    fn closed_form_damping_is_the_brute_force_optimum() {
        // The closed form is quoted from memory; a brute-force search over R_d of the peak
        // output impedance confirms it (Z0 = 10 Ω: L = 100 µH, C = 1 µF; n = 4).
        let (l, c, n): (f64, f64, f64) = (100e-6, 1e-6, 4.0);
        let z0 = (l / c).sqrt();
        let (r_formula, peak_formula) = optimal_damping(z0, n);
        assert!(close(r_formula / z0, 0.6124, 1e-4));
        assert!(close(peak_formula / z0, 0.8660, 1e-4));
        let (r_best, peak_best) = (1..=400)
            .map(|i| f64::from(i) * 0.005 * z0)
            .map(|r| (r, peak_output_impedance(l, c, n * c, r)))
            .min_by(|a, b| a.1.total_cmp(&b.1))
            .unwrap();
        assert!(
            close(r_best, r_formula, 0.01 * z0),
            "{r_best} vs {r_formula}"
        );
        assert!(
            close(peak_best, peak_formula, 0.005 * z0),
            "{peak_best} vs {peak_formula}"
        );
    }

    #[test]
    fn pi_filter_rises_at_60_db_per_decade() {
        // source: derived, third-order roll-off: far above the corner |IL| ≈ r·x³; a decade
        // more frequency adds 60 dB
        let (l, c) = (100e-6, 1e-6);
        let fc = lc_resonance_hz(l, c);
        let a = pi_insertion_loss_db(100.0 * fc, l, c, 50.0);
        let b = pi_insertion_loss_db(1000.0 * fc, l, c, 50.0);
        assert!(close(b - a, 60.0, 0.01), "{}", b - a);
        // and no loss at its own resonance x = √2 (derived: 1 − x² = −1, 2 − x² = 0)
        assert!(close(
            pi_insertion_loss_db(2f64.sqrt() * fc, l, c, 50.0),
            0.0,
            1e-9
        ));
    }

    #[test]
    fn cm_choke_impedance_for_a_given_insertion_loss() {
        // source: derived from IL = 20·log10(1 + Z/Z_loop): 20 dB in 25 Ω → Z = 25·(10 − 1)
        assert!(close(
            series_impedance_for_loss_ohm(20.0, 25.0),
            225.0,
            1e-9
        ));
        // 6.02 dB (a factor 2) → Z = Z_loop
        assert!(close(
            series_impedance_for_loss_ohm(20.0 * 2f64.log10(), 25.0),
            25.0,
            1e-9
        ));
        // pure inductance in quadrature: ωL = 25·√(10² − 1) = 248.75 Ω, at 10 MHz 3.959 µH
        let l = cm_choke_inductance_h(10e6, 20.0, 25.0, None);
        assert!(close(2.0 * PI * 10e6 * l, 25.0 * 99f64.sqrt(), 1e-9));
        assert!(close(l, 3.959e-6, 1e-9));
        // with a stray capacitance the loop loss formula gives the need back
        let l = cm_choke_inductance_h(10e6, 20.0, 25.0, Some(50e-12));
        assert!(close(
            cm_choke_loss_db(10e6, l, 25.0, Some(50e-12)),
            20.0,
            1e-9
        ));
        assert!(l > 3.959e-6, "a capacitive source path asks for more");
    }

    #[test]
    fn ferrite_turns_follow_n_squared() {
        // source: METHODS §9, Z ∝ N²: 900 Ω from 100 Ω per pass is 3 passes (9 × 100)
        assert_eq!(ferrite_turns(900.0, 100.0), 3);
        assert_eq!(ferrite_turns(901.0, 100.0), 4);
        assert_eq!(ferrite_turns(50.0, 100.0), 1);
        // generic clamp: 100-300 Ω at 100 MHz (common practice)
        assert_eq!(typical_clamp_single_pass_ohm(100e6), (100.0, 300.0));
        assert_eq!(typical_clamp_single_pass_ohm(500e6), (100.0, 300.0));
    }

    #[test]
    fn ferrite_caps_the_turns_and_adds_clamps() {
        let p = SizingParams {
            ferrite_single_pass_ohm: Some(20.0),
            ..SizingParams::default()
        };
        // 30 dB in 150 Ω: 150·(31.62 − 1) = 4593 Ω (derived); 4593/20 → 16 passes wanted;
        // capped at 4 (320 Ω per clamp) → 15 clamps
        let n = [Need {
            freq_hz: 50e6,
            needed_db: 30.0,
        }];
        let f = ferrite_clamp(&n, 150.0, &p).unwrap();
        assert!(close(f.needed_ohm, 150.0 * (10f64.powf(1.5) - 1.0), 1e-9));
        assert_eq!(f.turns, 4);
        assert_eq!(f.clamps, 15);
        assert!(
            f.warnings.iter().any(|w| w.contains("16 passes")),
            "{:?}",
            f.warnings
        );
    }

    #[test]
    fn trapezoid_breakpoints_of_the_methods_check_case() {
        // source: METHODS §5 check value: τ = 5 µs, τr = 50 ns → 63.66 kHz and 6.366 MHz
        let (f1, f2) = trapezoid_breakpoints_hz(5e-6, 50e-9);
        assert!(close(f1, 63_662.0, 1.0));
        assert!(close(f2, 6.3662e6, 100.0));
    }

    #[test]
    fn edge_factor_far_above_the_corners_is_20_db_per_decade_of_rise_time() {
        // source: derived from METHODS §5: above 1/(π·τr) the envelope is 2A/(π²·T·f²·τr),
        // ∝ 1/τr, so 12 dB needs k = 10^(12/20) = 3.98
        assert!(close(edge_factor_far(12.0), 3.981, 1e-3));
        let ramp = 50e-9; // corner 6.37 MHz
        let k = edge_factor(1e9, ramp, 12.0).unwrap(); // new corner 1.6 MHz, far below 1 GHz
        assert!(close(k, 3.981, 1e-3), "{k}");
        assert!(close(
            edge_reduction_db(1e9, ramp, 2.0),
            20.0 * 2f64.log10(),
            1e-9
        ));
    }

    #[test]
    fn slower_edges_lower_the_synthesised_harmonics_by_20_db_per_decade_of_rise_time() {
        // oracle: the synth's trapezoid harmonics (METHODS §5 formula). 100 kHz, 50 % duty,
        // ramps 50 ns and 200 ns; over the odd harmonics 1001-1401 (100-140 MHz, above both
        // corners) the largest c_n·n² is the envelope level, which is ∝ 1/τr: 4× slower edges
        // give 20·log10(4) = 12.04 dB, not 24 dB.
        use crate::synth::trapezoid_harmonic_peak;
        let top = |ramp: f64| {
            (500..=700)
                .map(|k| 2 * k + 1)
                .map(|n| trapezoid_harmonic_peak(n, 1.0, 10e-6, 0.5, ramp) * f64::from(n).powi(2))
                .fold(0.0, f64::max)
        };
        let drop_db = 20.0 * (top(50e-9) / top(200e-9)).log10();
        assert!(close(drop_db, 20.0 * 4f64.log10(), 0.05), "{drop_db}");
        assert!(close(edge_reduction_db(120e6, 50e-9, 4.0), drop_db, 0.05));
    }

    #[test]
    fn edge_factor_near_and_below_the_corner() {
        let ramp = 50e-9;
        let corner = 1.0 / (PI * ramp);
        // at the old corner (x = 1): E(1) = sin 1 = 0.8415, E(k) = 1/k for k ≥ π/2, so k = 4
        // gives 20·log10(4·0.8415) = 10.54 dB, 1.5 dB short of the far value (derived)
        assert!(close(
            edge_reduction_db(corner, ramp, 4.0),
            20.0 * (4.0 * 1f64.sin()).log10(),
            1e-9
        ));
        // below the new corner slowing does almost nothing: a tenth of it, < 0.1 dB
        let k = 4.0;
        let f = 0.1 / (PI * k * ramp);
        assert!(edge_reduction_db(f, ramp, k) < 0.1);
        // the envelope touches |sinc| where |sin x| = 1 and equals it below π/2
        let x = 1.5 * PI;
        assert!(close(sinc_envelope(x), (x.sin() / x).abs(), 1e-12));
        assert!(close(sinc_envelope(0.5), 0.5f64.sin() / 0.5, 1e-12));
    }

    #[test]
    fn edge_slowing_checks_that_the_edges_fit() {
        let s = Subject {
            fundamental_hz: 100e3,
            kind: Kind::Switching,
            conducted: true,
            edge_time_s: Some(40e-9), // ramp 50 ns, as the METHODS §5 case
            duty: Some(0.5),
            spread_pct: None,
        };
        let ok = edge_slowing(
            &[Need {
                freq_hz: 20e6,
                needed_db: 12.0,
            }],
            &s,
        )
        .unwrap();
        assert!(ok.feasible);
        assert!(close(ok.corner_hz.unwrap(), 6.3662e6, 100.0));
        assert!(ok.new_corner_hz.unwrap() < 20e6 / 1.5);
        // 150 kHz at 60 dB: would need edges far longer than the 5 µs half period
        let no = edge_slowing(
            &[Need {
                freq_hz: 150e3,
                needed_db: 60.0,
            }],
            &s,
        )
        .unwrap();
        assert!(!no.feasible);
        assert!(
            no.warnings.iter().any(|w| w.contains("cannot help below")),
            "{:?}",
            no.warnings
        );
    }

    #[test]
    fn spread_spectrum_check_values() {
        // source: METHODS §9 [C: S36]: 66.6 MHz, 2 % → 7.62 dB; 199.8 MHz, 2 % → 11.91 dB
        assert!(close(
            empirical_spread_reduction_db(66.6e6, 0.02),
            7.62,
            0.005
        ));
        assert!(close(
            empirical_spread_reduction_db(199.8e6, 0.02),
            11.91,
            0.005
        ));
        assert!(close(
            empirical_spread_for_reduction(66.6e6, 7.62),
            0.02,
            1e-4
        ));
        // source: METHODS §9 [DER]: 100 kHz ± 4 kHz, 5th harmonic, RBW 9 kHz → 6.5 dB
        assert!(close(
            spread_reduction_db(5.0, 8e3, 9e3),
            10.0 * (40.0f64 / 9.0).log10(),
            1e-12
        ));
        assert!(close(spread_reduction_db(5.0, 8e3, 9e3), 6.5, 0.05));
        // inverted: 6.478 dB at 500 kHz in 9 kHz needs δ = 8 %, i.e. 8 kHz of 100 kHz
        let d = spread_for_reduction(500e3, 10.0 * (40.0f64 / 9.0).log10(), 9e3);
        assert!(close(d, 0.08, 1e-12));
    }

    #[test]
    fn spread_of_a_dithered_source_grows_from_its_present_depth() {
        let s = Subject {
            fundamental_hz: 100e3,
            kind: Kind::Switching,
            conducted: true,
            edge_time_s: None,
            duty: None,
            spread_pct: Some(8.0),
        };
        // present 8 % at 500 kHz gives 6.48 dB already; 3 dB more doubles the spread
        // (derived: ΔL ∝ 10·log10 δ)
        let n = [Need {
            freq_hz: 500e3,
            needed_db: 10.0 * 2f64.log10(),
        }];
        let d = spread_depth(&n, &s, 9e3).unwrap();
        assert!(close(d.spread_pct, 16.0, 1e-9));
        assert!(d.warnings.iter().any(|w| w.contains("beyond the 10 %")));
    }

    #[test]
    fn conducted_converter_gets_filters_and_radiated_clock_gets_ferrite() {
        let conv = Subject {
            fundamental_hz: 100e3,
            kind: Kind::Switching,
            conducted: true,
            edge_time_s: Some(20e-9),
            duty: Some(0.3),
            spread_pct: None,
        };
        let over = [
            Exceedance {
                freq_hz: 300e3,
                over_db: 10.0,
            },
            Exceedance {
                freq_hz: 12e6,
                over_db: 5.0,
            },
            Exceedance {
                freq_hz: 500e3,
                over_db: -3.0,
            },
        ];
        let r = size_remedies(&conv, &over, &SizingParams::default()).unwrap();
        assert_eq!(r.needs.len(), 2, "the passing point is not sized");
        assert_eq!(r.lc_filter.as_ref().unwrap().binding.freq_hz, 300e3);
        assert_eq!(r.cm_choke.as_ref().unwrap().binding.freq_hz, 12e6);
        assert!(r.edges.is_some() && r.spread.is_some());
        assert!(r.notes.iter().any(|n| n.text.starts_with("3-12 MHz")));
        assert!(r.sentences().len() >= 6);

        let clock = Subject {
            fundamental_hz: 25e6,
            kind: Kind::Clock,
            conducted: false,
            edge_time_s: Some(1e-9),
            duty: None,
            spread_pct: None,
        };
        let over = [Exceedance {
            freq_hz: 125e6,
            over_db: 4.0,
        }];
        let r = size_remedies(&clock, &over, &SizingParams::default()).unwrap();
        assert!(r.lc_filter.is_none() && r.cm_choke.is_none());
        let f = r.ferrite.as_ref().unwrap();
        // 10 dB in 150 Ω: 150·(3.162 − 1) = 324 Ω; 100 Ω per pass → 2 passes (derived)
        assert_eq!(f.loop_ohm, 150.0);
        assert_eq!(f.turns, 2);
        assert!(r.spread.as_ref().unwrap().empirical_spread_pct.is_some());
    }

    #[test]
    fn bad_settings_are_named() {
        let p = SizingParams {
            rbw_hz: 0.0,
            ..SizingParams::default()
        };
        let s = Subject {
            fundamental_hz: 1e5,
            kind: Kind::Switching,
            conducted: true,
            edge_time_s: None,
            duty: None,
            spread_pct: None,
        };
        assert!(matches!(
            size_remedies(&s, &[], &p),
            Err(SizingError::BadParam {
                field: "rbw_hz",
                ..
            })
        ));
        let s0 = Subject {
            fundamental_hz: f64::NAN,
            ..s
        };
        assert!(matches!(
            size_remedies(&s0, &[], &SizingParams::default()),
            Err(SizingError::BadParam {
                field: "fundamental_hz",
                ..
            })
        ));
        // nothing failing: nothing sized
        let r = size_remedies(&s, &[], &SizingParams::default()).unwrap();
        assert!(r.lc_filter.is_none() && r.edges.is_none() && r.notes.is_empty());
    }

    #[test]
    fn si_formatting() {
        assert_eq!(fmt_si(2.2e-7, "F"), "220 nF");
        assert_eq!(fmt_si(4.7e-6, "H"), "4.7 µH");
        assert_eq!(fmt_si(1e-3, "H"), "1 mH");
        assert_eq!(fmt_si(33.0, "Ω"), "33 Ω");
        assert_eq!(fmt_si(1.5e-8, "s"), "15 ns");
    }
}
