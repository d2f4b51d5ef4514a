//! Fingerprint of a switching family: duty cycle, edge time, coupling tilt and amplitude from a
//! fit of the trapezoid spectrum to its harmonic levels, each with a 95 % interval or a bound;
//! the dither depth from the growth of the line widths; and a rule-of-thumb score of
//! differential against common mode.
//!
//! # Model
//! A trapezoidal pulse train of height A (V), period T, width τ = D·T between the 50 % points
//! and equal linear ramps τr (0 → A; a 10-90 % time is 0.8·τr) has the one-sided harmonic
//! amplitudes (METHODS.md §5)
//! ```text
//! c_n = 2·A·D·|sinc(n·π·D)|·|sinc(n·π·r)|,   r = τr/T,  sinc(x) = sin(x)/x
//! ```
//! and a receiver reads 20·log10(c_n/√2 / 1 µV) dBµV. The coupling path (LISN, the converter's
//! input filter, stray capacitance, an antenna) tilts the spectrum; the fit models that as
//! t·log10(n) dB. In dB, with a = 20·log10(A / 1 µV):
//! ```text
//! L_n = a + 20·log10(√2·D) + H(n·π·D) + H(n·π·r) + t·log10(n)
//! H(x) = 10·log10( sinc²(x) + ε²/(1 + x²) )
//! ```
//! The ε term (ε = [`NULL_FLOOR`]) keeps the nulls of the sinc finite: a measured harmonic near a
//! null is filled by unequal edges and ringing, and −∞ would wreck any fit; it sits 34 dB under
//! the sinc's envelope 1/x and changes no level off the nulls by more than 0.01 dB.
//!
//! D and 1 − D give the same spectrum (|sin(nπ(1 − D))| = |sin(nπD)|): the fit reports D ≤ 0.5.
//!
//! # Identifiability of the tilt
//! Between its two break points the trapezoid falls at −20 dB/decade and above the second at
//! −40 dB/decade; a straight tilt in log n is the same shape as either slope, so the tilt is told
//! apart only by the kink at the edge corner 1/(π·τr) (with data on both sides of it) and by the
//! sinc's nulls, which a tilt does not move. When the corner lies outside the harmonics seen,
//! tilt and edge time trade against each other. The tilt is therefore fitted with a Gaussian
//! prior 0 ± [`TILT_PRIOR_SD_DB_PER_DECADE`] (a penalised least-squares fit; centred at
//! [`DITHER_TILT_DB_PER_DECADE`] for a dithered family): it follows the data where the corner is
//! seen and stays near its centre where it is not, and the edge time's interval then carries
//! that uncertainty.
//!
//! # Data
//! Each seen harmonic gives a reading y_n with an uncertainty σ_n (repeatability and noise,
//! [`level_sigma_db`]). It was seen because it read above the detection threshold T_n, so the
//! model compared with it is the mean of a reading so selected, E[y | y > T_n]
//! ([`selected_mean_db`]); without that, the weak harmonics near the threshold (the ones that
//! carry the edge corner) read high on average and pull the edge time short. A harmonic that
//! should lie in the scan but shows nothing there enters as censored: its reading was below the
//! threshold U_n ([`AbsentHarmonic`]), which rules out a model level well above it (a duty whose
//! even harmonics would show, a corner too high).
//!
//! # Fit
//! Weighted residuals u_n = (y_n − L_n)/σ_n under the Huber loss ρ(u) = u²/2 for |u| ≤ k,
//! k·|u| − k²/2 beyond (k = 1.345, the usual 95 %-efficiency corner): harmonics caught from a
//! neighbouring source or sitting on a null count linearly, not quadratically. The loss is
//! minimised as least squares on the pseudo-residuals ũ = sign(u)·√(2ρ(u)), so Σρ = ½Σũ²
//! exactly; each absent harmonic adds −2·ln Φ((U_n − L_n)/σ) (a censored observation); the tilt
//! prior adds ((t − μ)/σ_t)². The sum S(θ) is minimised by Levenberg–Marquardt with box bounds
//! (D in [D_min, ½], r in [r_min, D]). The |sinc(nπD)| factor gives S a local minimum about
//! every 1/(2·n_max) in D, so the starts come from a grid over D (step 1/(4·n_max)) and r on
//! which a and t are solved in closed form (iteratively reweighted least squares with the
//! prior), then a finer scan over r at the six best D; the best three r minima of each are
//! refined and the lowest S kept. The fit is marked poor, and neither duty nor edges reported,
//! when the robust residual scale 1.4826·median|y − L| exceeds [`POOR_FIT_DB`] (most of the
//! members are another source's).
//!
//! # Intervals
//! With m seen harmonics, p = 4 parameters and s² = max(1, S(θ̂)/(m − p)) (never below the
//! stated per-harmonic uncertainties), the 95 % profile interval of a parameter θ_j is the set
//! of values where
//! ```text
//! S_j(θ_j) − S(θ̂) ≤ s²·F(1, m − p; 0.95) = s²·t²(m − p; 0.975)
//! ```
//! with S_j the minimum over the other parameters (profile likelihood; any nonlinear regression
//! text). It is used for D and τr, whose objectives are far from quadratic (nulls, a break point
//! at the end of the data): D by walking out from its optimum (widened to cover any other local
//! optimum in D inside the threshold, an alias of the nulls), τr by scanning the whole range of
//! r (the ramp factor's nulls make S_j multimodal there too). The amplitude and the tilt get
//! Wald intervals θ̂_j ± t·√(s²·C_jj), C = (J̃ᵀJ̃)⁻¹ at the optimum (the linearised covariance of
//! nonlinear least squares). A profile that stays under the threshold up to a bound of its
//! parameter leaves that side open: the edge time then has only an upper bound (corner above
//! the last harmonic) or a lower bound, and is not reported as a number. τr's lower end also
//! needs the data to ask for a corner: when a fit with no corner in range and a three times
//! wider tilt prior comes within the threshold, only the upper bound stands.
//!
//! # A family's fingerprint
//! [`fingerprint`] feeds a family's members to the fit (their readings less the noise's push on
//! a peak detector, [`noise_corrected_dbuv`]), handles dither ([`DITHER_TILT_DB_PER_DECADE`]),
//! takes the dither depth and its interval from the envelope's width growth, and adds the
//! differential/common-mode score, a rule of thumb for conducted scans only ([`mode_score`]).
//!
//! ```
//! use spurhound::families::fingerprint::{fit_trapezoid, HarmonicLevel, FitParams, Status};
//! use spurhound::synth::trapezoid_harmonic_peak;
//! // 100 kHz, duty 0.3, 100 ns ramps (80 ns 10-90 %): harmonics 2 to 120, read in dBµV rms
//! let levels: Vec<HarmonicLevel> = (2..=120)
//!     .map(|n| {
//!         let c = trapezoid_harmonic_peak(n, 1.0, 10e-6, 0.3, 100e-9);
//!         HarmonicLevel {
//!             n,
//!             level_dbuv: 20.0 * (c / 2f64.sqrt() / 1e-6).log10(),
//!             sigma_db: 0.5,
//!             threshold_dbuv: None,
//!         }
//!     })
//!     .filter(|h| h.level_dbuv > 60.0) // the harmonics near a null sink under the floor
//!     .collect();
//! let fit = fit_trapezoid(&levels, &[], &FitParams::default())?;
//! assert!((fit.duty - 0.3).abs() < 0.005);
//! assert_eq!(fit.ramp_status, Status::Estimated);
//! assert!((fit.ramp_ratio * 10e-6 - 100e-9).abs() < 5e-9);
//! # Ok::<(), spurhound::families::fingerprint::FingerprintError>(())
//! ```

use super::envelope::Envelope;
use crate::attribution::remedies::DM_CM_BOUNDARY_HZ;
use crate::bandwidth::local_step;
use crate::floor::Floor;
use crate::scan::Scan;
use serde::Serialize;
use statrs::distribution::{ContinuousCDF, StudentsT};
use std::f64::consts::{LN_10, PI, SQRT_2};

/// ε of the floored sinc H(x) = 10·log10(sinc²(x) + ε²/(1 + x²)): −34 dB under the envelope.
pub const NULL_FLOOR: f64 = 0.02;

/// ε of the floored sinc at an absent harmonic: −60 dB under the envelope. A harmonic that is not
/// seen may well sit in a true null, and the seen harmonics' floor [`NULL_FLOOR`] would claim a
/// level that the censored term then refutes (our choice).
pub const ABSENT_NULL_FLOOR: f64 = 1e-3;

/// Standard deviation of the Gaussian prior on the coupling tilt, dB/decade (our choice: a
/// capacitive path adds +20 dB/decade, an inductive or capacitive shunt ±20; the prior lets
/// the data move the tilt by that much when they can tell it).
pub const TILT_PRIOR_SD_DB_PER_DECADE: f64 = 10.0;

/// Corner of the Huber loss in units of σ: 1.345 gives 95 % efficiency at the normal
/// distribution (common practice for M-estimation).
pub const HUBER_K: f64 = 1.345;

/// A harmonic level's repeatability across one scan, dB: the analyzer's frequency response and
/// the LISN factor vary by a few tenths of a dB over the band (from memory, typical data-sheet
/// flatness); the noise term of [`level_sigma_db`] adds to it.
pub const LEVEL_REPEATABILITY_DB: f64 = 0.5;

/// A dithered family's harmonic n is spread over Δf_n = n·Δf, which lowers its peak reading by
/// about 10·log10(Δf_n/RBW) when Δf_n ≫ RBW (METHODS.md §9, an upper estimate): a tilt of
/// −10 dB/decade. The tilt prior of a dithered family is centred there (derived).
pub const DITHER_TILT_DB_PER_DECADE: f64 = -10.0;

/// Uncertainty added (in quadrature) to the levels of a dithered family, dB: the spreading loss
/// departs from its log-linear law where Δf_n is near the RBW and depends on the modulation
/// profile and rate (METHODS.md §9); 1.5 dB is our allowance.
pub const DITHER_SD_DB: f64 = 1.5;

/// Fewest harmonics a fingerprint is fitted to (four parameters need more data than that).
pub const MIN_HARMONICS: usize = 5;

/// One harmonic's reading.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct HarmonicLevel {
    /// Harmonic number, ≥ 1.
    pub n: u32,
    /// Receiver reading (rms), dBµV.
    pub level_dbuv: f64,
    /// Standard uncertainty of the reading, dB (> 0); see [`level_sigma_db`].
    pub sigma_db: f64,
    /// Detection threshold at the harmonic, dBµV: it was seen because it read above it. The
    /// fit then compares the reading with the mean of a reading so selected (see
    /// [`selected_mean_db`]); `None` for no selection.
    pub threshold_dbuv: Option<f64>,
}

/// A harmonic expected but not seen: its reading lay below `below_dbuv` (in the analysis, the
/// detection threshold around its frequency, where the trace stays under it).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct AbsentHarmonic {
    pub n: u32,
    pub below_dbuv: f64,
    /// How far above the bound a reading could still hide, dB (> 0).
    pub sigma_db: f64,
}

/// Settings of [`fit_trapezoid`]; [`Default`] gives the documented constants.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct FitParams {
    /// Centre of the tilt prior, dB/decade (0; −10 for a dithered family, see [`fingerprint`]).
    pub tilt_prior_mean_db_per_decade: f64,
    /// [`TILT_PRIOR_SD_DB_PER_DECADE`]; `0` fixes the tilt at the prior's centre.
    pub tilt_prior_sd_db_per_decade: f64,
    /// [`HUBER_K`].
    pub huber_k: f64,
    /// [`NULL_FLOOR`].
    pub null_floor: f64,
    /// Coverage of the intervals (default 0.95).
    pub coverage: f64,
}

impl Default for FitParams {
    fn default() -> Self {
        FitParams {
            tilt_prior_mean_db_per_decade: 0.0,
            tilt_prior_sd_db_per_decade: TILT_PRIOR_SD_DB_PER_DECADE,
            huber_k: HUBER_K,
            null_floor: NULL_FLOOR,
            coverage: 0.95,
        }
    }
}

/// What a fingerprint can be wrong about.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
#[non_exhaustive]
pub enum FingerprintError {
    #[error("a trapezoid fit needs at least {needed} harmonics, got {found}")]
    TooFewHarmonics { found: usize, needed: usize },
    #[error(
        "harmonic {n}: level {level_dbuv} dBuV or uncertainty {sigma_db} dB is not usable (finite level, positive uncertainty, n >= 1)"
    )]
    BadHarmonic {
        n: u32,
        level_dbuv: f64,
        sigma_db: f64,
    },
    #[error("fit setting `{field}` = {value}: expected {expected}")]
    BadParam {
        field: &'static str,
        value: f64,
        expected: &'static str,
    },
}

/// How well the data pin a parameter down.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum Status {
    /// A value with a two-sided interval.
    Estimated,
    /// Only an upper bound: the profile stays flat down to the parameter's lower limit.
    UpperBound,
    /// Only a lower bound.
    LowerBound,
    /// Flat both ways.
    NotIdentifiable,
}

/// The trapezoid parameters in the units of the fit.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Shape {
    /// a = 20·log10(A / 1 µV), A the pulse height (V) as the receiver sees it at harmonic 1.
    pub amplitude_dbuv: f64,
    /// t, dB per decade of harmonic number.
    pub tilt_db_per_decade: f64,
    /// D = τ/T.
    pub duty: f64,
    /// r = τr/T (full ramp over period).
    pub ramp_ratio: f64,
}

/// 10·log10 of the floored squared sinc and its derivative in x.
///
/// # Formula
/// ```text
/// h(x) = sinc²(x) + ε²/(1 + x²),  H = 10·log10 h,  H' = (10/ln 10)·h'/h
/// h'(x) = 2·sinc(x)·sinc'(x) − 2·ε²·x/(1 + x²)²,  sinc'(x) = (x·cos x − sin x)/x²
/// ```
/// with the series sinc ≈ 1 − x²/6, sinc' ≈ −x/3 for |x| < 10⁻⁴.
fn floored_sinc_db(x: f64, eps: f64) -> (f64, f64) {
    let (s, ds) = if x.abs() < 1e-4 {
        (1.0 - x * x / 6.0, -x / 3.0)
    } else {
        (x.sin() / x, (x * x.cos() - x.sin()) / (x * x))
    };
    let q = 1.0 + x * x;
    let h = s * s + eps * eps / q;
    let dh = 2.0 * s * ds - 2.0 * eps * eps * x / (q * q);
    (10.0 * h.log10(), 10.0 / LN_10 * dh / h)
}

/// H(x) of [`floored_sinc_db`] without the derivative.
fn floored_sinc_value_db(x: f64, eps: f64) -> f64 {
    let s = if x.abs() < 1e-4 {
        1.0 - x * x / 6.0
    } else {
        x.sin() / x
    };
    10.0 * (s * s + eps * eps / (1.0 + x * x)).log10()
}

/// Level (dBµV rms) of harmonic `n` of the trapezoid `shape`, with the nulls floored at
/// `null_floor` (0 gives the exact formula).
///
/// # Formula
/// ```text
/// L_n = a + 20·log10(√2·D) + H(n·π·D) + H(n·π·r) + t·log10(n)
/// ```
/// the dB form of c_n = 2·A·D·|sinc(nπD)|·|sinc(nπr)| read as rms (÷√2), see the module docs.
///
/// # Source
/// METHODS.md §5 (trapezoid spectrum); the tilt and the floor are this module's.
pub fn trapezoid_level_dbuv(n: u32, shape: &Shape, null_floor: f64) -> f64 {
    let nu = f64::from(n);
    let (hd, _) = floored_sinc_db(nu * PI * shape.duty, null_floor);
    let (hr, _) = floored_sinc_db(nu * PI * shape.ramp_ratio, null_floor);
    shape.amplitude_dbuv
        + 20.0 * (SQRT_2 * shape.duty).log10()
        + hd
        + hr
        + shape.tilt_db_per_decade * nu.log10()
}

/// Standard uncertainty (dB) of a line's reading `over_floor_db` above the noise floor.
///
/// # Formula
/// ```text
/// σ = √( σ_rep² + (20/ln 10 · 10^(−snr/20) / √2)² ),  capped at 6 dB
/// ```
/// A line of amplitude a in complex Gaussian noise of rms σn reads |a + σn·z|; for a ≫ σn the
/// reading moves by Re(σn·z) ~ N(0, σn²/2), i.e. 8.686·σn/(a·√2) dB (derived, first order).
/// σ_rep is [`LEVEL_REPEATABILITY_DB`].
pub fn level_sigma_db(over_floor_db: f64) -> f64 {
    let snr = if over_floor_db.is_finite() {
        over_floor_db.max(0.0)
    } else {
        0.0
    };
    let noise = 20.0 / LN_10 * 10f64.powf(-snr / 20.0) / SQRT_2;
    LEVEL_REPEATABILITY_DB.hypot(noise).min(6.0)
}

/// Mean push of the noise on a peak-detected line, as a share of the floor's median (linear).
///
/// # Derivation
/// A line of amplitude a over noise n (complex Gaussian, E|n|² = σ²) reads, on a positive-peak
/// detector, R = max_j |a + n_j| ≈ a + max_j Re(n_j) for a ≫ σ, Re(n_j) ~ N(0, σ²/2), the
/// maximum taken over the K independent noise samples at the line's top. A noise point's
/// median is F = σ·√(−ln(1 − 2^(−1/M))) for M samples per point (the max-of-M Rayleigh law of
/// [`crate::floor`]). So E\[R\] − a = γ·F with
/// ```text
/// γ = μ_K / (√2·√(−ln(1 − 2^(−1/M)))),  μ_K = E[max of K standard normals]
/// ```
/// K = 2 (μ_2 = 1/√π) and M = 3 (a 4.5 kHz step at a 9 kHz RBW) give γ = 0.3175 (derived).
pub const NOISE_PUSH: f64 = 0.3175;

/// The reading of a peak-detected line `over_floor_db` above the median floor, less the noise's
/// mean push: 20·log10(10^(L/20) − γ·10^(F/20)) = L + 20·log10(1 − γ·10^(−over/20)), with
/// γ = [`NOISE_PUSH`] (first order; the push is 0.3 dB at 20 dB over the floor, 1 dB at 10).
/// Below 6 dB over the floor the correction is held at its 6 dB value.
pub fn noise_corrected_dbuv(level_dbuv: f64, over_floor_db: f64) -> f64 {
    let over = if over_floor_db.is_finite() {
        over_floor_db.max(6.0)
    } else {
        6.0
    };
    level_dbuv + 20.0 * (1.0 - NOISE_PUSH * 10f64.powf(-over / 20.0)).log10()
}

/// Parameter indices of θ = (a, t, D, ln r).
const AMP: usize = 0;
const TILT: usize = 1;
const DUTY: usize = 2;
const RAMP: usize = 3;
const P: usize = 4;

type Theta = [f64; P];

/// What the model's terms share at one θ: r = e^(ln r), 20·log10(√2·D) and its D-derivative.
struct Consts {
    r: f64,
    base: f64,
    dbase: f64,
}

impl Consts {
    fn of(th: &Theta) -> Consts {
        Consts {
            r: th[RAMP].exp(),
            base: 20.0 * (SQRT_2 * th[DUTY]).log10(),
            dbase: 20.0 / (LN_10 * th[DUTY]),
        }
    }
}

/// The objective: data, loss and bounds.
#[derive(Debug, Clone)]
struct Problem {
    n: Vec<f64>,
    y: Vec<f64>,
    sigma: Vec<f64>,
    /// 1/σ² and log10 n.
    w: Vec<f64>,
    x: Vec<f64>,
    /// Detection thresholds, −∞ where none.
    thr: Vec<f64>,
    /// Absent harmonics: n, log10 n, upper bound, σ.
    cn: Vec<f64>,
    cx: Vec<f64>,
    cu: Vec<f64>,
    cs: Vec<f64>,
    /// 1/σ_t, 0 when the tilt is fixed at 0.
    inv_tilt_sd: f64,
    /// Centre of the tilt prior.
    tilt_mean: f64,
    k: f64,
    eps: f64,
    duty_lo: f64,
    ln_ramp_lo: f64,
}

impl Problem {
    fn m(&self) -> usize {
        self.n.len()
    }

    fn tilt_free(&self) -> bool {
        self.inv_tilt_sd > 0.0
    }

    /// Model level of data point i (the mean of a reading selected by its threshold) and its
    /// gradient in θ.
    fn level(&self, i: usize, th: &Theta) -> (f64, Theta) {
        self.level_with(i, th, &Consts::of(th))
    }

    fn level_with(&self, i: usize, th: &Theta, k: &Consts) -> (f64, Theta) {
        let (l, grad) = self.model(self.n[i], self.x[i], th, k, self.eps);
        if self.thr[i] == f64::NEG_INFINITY {
            return (l, grad);
        }
        let (mean, slope) = selected_mean_db(l, self.sigma[i], self.thr[i]);
        (mean, grad.map(|g| g * slope))
    }

    /// The trapezoid level L at harmonic number ν (x = log10 ν) and its gradient in θ, the
    /// nulls floored at `eps`.
    fn model(&self, nu: f64, x: f64, th: &Theta, k: &Consts, eps: f64) -> (f64, Theta) {
        let (hd, dhd) = floored_sinc_db(nu * PI * th[DUTY], eps);
        let (hr, dhr) = floored_sinc_db(nu * PI * k.r, eps);
        let l = th[AMP] + k.base + hd + hr + th[TILT] * x;
        let grad = [1.0, x, k.dbase + dhd * nu * PI, dhr * nu * PI * k.r];
        (l, grad)
    }

    /// Pseudo-residuals ũ (data, then the tilt prior) and optionally their Jacobian.
    fn residuals(&self, th: &Theta, mut jac: Option<&mut Vec<Theta>>) -> Vec<f64> {
        let k = Consts::of(th);
        let mut e = Vec::with_capacity(self.m() + self.cn.len() + 1);
        if let Some(j) = jac.as_deref_mut() {
            j.clear();
        }
        for i in 0..self.m() {
            let (l, g) = self.level_with(i, th, &k);
            let u = (self.y[i] - l) / self.sigma[i];
            let (ru, dru) = huber_root(u, self.k);
            e.push(ru);
            if let Some(j) = jac.as_deref_mut() {
                let f = -dru / self.sigma[i];
                j.push([f * g[0], f * g[1], f * g[2], f * g[3]]);
            }
        }
        for c in 0..self.cn.len() {
            let (l, g) = self.model(self.cn[c], self.cx[c], th, &k, ABSENT_NULL_FLOOR);
            let (ec, dec) = censored_root(l, self.cu[c], self.cs[c]);
            e.push(ec);
            if let Some(j) = jac.as_deref_mut() {
                j.push(g.map(|x| x * dec));
            }
        }
        e.push((th[TILT] - self.tilt_mean) * self.inv_tilt_sd);
        if let Some(j) = jac {
            j.push([0.0, self.inv_tilt_sd, 0.0, 0.0]);
        }
        e
    }

    /// S(θ) = Σ ũ² + Σ c + ((t − μ)/σ_t)² (seen, absent, prior).
    fn cost(&self, th: &Theta) -> f64 {
        self.residuals(th, None).iter().map(|e| e * e).sum()
    }

    /// θ inside the bounds D ∈ [D_min, ½], ln r ∈ [ln r_min, ln D]; a fixed ln r keeps D ≥ r.
    fn project(&self, th: &Theta, fixed: Option<usize>) -> Theta {
        let mut t = *th;
        if !self.tilt_free() {
            t[TILT] = self.tilt_mean;
        }
        if fixed == Some(RAMP) {
            let r = t[RAMP].exp();
            t[DUTY] = t[DUTY].clamp(self.duty_lo.max(r), 0.5);
        } else {
            t[DUTY] = t[DUTY].clamp(self.duty_lo, 0.5);
            t[RAMP] = t[RAMP].clamp(self.ln_ramp_lo, t[DUTY].ln());
        }
        t
    }

    /// Which parameters move: all but `fixed`, and not the tilt when it is fixed at 0.
    fn free(&self, fixed: Option<usize>) -> Vec<usize> {
        (0..P)
            .filter(|&j| Some(j) != fixed && (j != TILT || self.tilt_free()))
            .collect()
    }
}

/// Mean of a reading N(L, σ²) given that it exceeds the threshold T, and its derivative in L.
///
/// # Formula
/// ```text
/// E[y | y > T] = L + σ·λ(α),  α = (T − L)/σ,  λ(α) = φ(α)/(1 − Φ(α))
/// d/dL = 1 − λ(α)·(λ(α) − α)
/// ```
/// the mean of a truncated normal distribution (λ is the hazard rate of the standard normal;
/// any statistics text); λ ≈ α + 1/α − 2/α³ for α > 10 (its asymptotic series).
pub fn selected_mean_db(level_db: f64, sigma_db: f64, threshold_db: f64) -> (f64, f64) {
    let a = (threshold_db - level_db) / sigma_db;
    let lambda = if a > 10.0 {
        a + 1.0 / a - 2.0 / (a * a * a)
    } else {
        let phi = (-0.5 * a * a).exp() / (2.0 * PI).sqrt();
        let q = 0.5 * statrs::function::erf::erfc(a / SQRT_2);
        if q > 0.0 { phi / q } else { a }
    };
    let slope = (1.0 - lambda * (lambda - a)).clamp(0.0, 1.0);
    (level_db + sigma_db * lambda, slope)
}

/// Pseudo-residual of an absent harmonic whose reading lay below U, and its derivative in the
/// model level L.
///
/// # Formula
/// ```text
/// α = (U − L)/σ,  c = −2·ln Φ(α),  e = √c,  de/dL = φ(α)/(Φ(α)·σ·e)
/// ```
/// the log-likelihood of a left-censored normal observation (censored regression; any
/// statistics text). For α < −30: ln Φ(α) ≈ −α²/2 − ln(−α) − ½·ln(2π), φ/Φ ≈ −α − 1/α (the
/// asymptotic series).
fn censored_root(level: f64, below: f64, sigma: f64) -> (f64, f64) {
    let a = (below - level) / sigma;
    let (c, ratio) = if a < -30.0 {
        (a * a + 2.0 * (-a).ln() + (2.0 * PI).ln(), -a - 1.0 / a)
    } else {
        let cdf = 0.5 * statrs::function::erf::erfc(-a / SQRT_2);
        let pdf = (-0.5 * a * a).exp() / (2.0 * PI).sqrt();
        (-2.0 * cdf.ln(), pdf / cdf)
    };
    let e = c.max(0.0).sqrt();
    if e < 1e-150 {
        return (0.0, 0.0);
    }
    (e, ratio / (sigma * e))
}

/// Square-root Huber pseudo-residual ũ = sign(u)·√(2ρ(u)) and dũ/du.
///
/// # Formula
/// ```text
/// |u| ≤ k: ũ = u, dũ/du = 1;   |u| > k: ũ = sign(u)·√(2k|u| − k²), dũ/du = k/|ũ|
/// ```
/// so that ½·ũ² = ρ(u), the Huber loss (robust M-estimation; any robust-statistics text).
fn huber_root(u: f64, k: f64) -> (f64, f64) {
    if u.abs() <= k {
        (u, 1.0)
    } else {
        let v = (2.0 * k * u.abs() - k * k).sqrt();
        (u.signum() * v, k / v)
    }
}

/// Solves the symmetric positive definite system A·x = b (Cholesky); `None` when A is not
/// positive definite.
///
/// # Source
/// Cholesky factorisation A = L·Lᵀ, forward and back substitution (any numerical-methods text).
fn cholesky_solve(a: &[Vec<f64>], b: &[f64]) -> Option<Vec<f64>> {
    let k = b.len();
    let mut l = vec![vec![0.0; k]; k];
    for i in 0..k {
        for j in 0..=i {
            let s: f64 = a[i][j] - (0..j).map(|q| l[i][q] * l[j][q]).sum::<f64>();
            if i == j {
                if s <= 0.0 || !s.is_finite() {
                    return None;
                }
                l[i][i] = s.sqrt();
            } else {
                l[i][j] = s / l[j][j];
            }
        }
    }
    let mut z = vec![0.0; k];
    for i in 0..k {
        z[i] = (b[i] - (0..i).map(|q| l[i][q] * z[q]).sum::<f64>()) / l[i][i];
    }
    let mut x = vec![0.0; k];
    for i in (0..k).rev() {
        x[i] = (z[i] - (i + 1..k).map(|q| l[q][i] * x[q]).sum::<f64>()) / l[i][i];
    }
    Some(x)
}

/// Inverse of a symmetric positive definite matrix, column by column; `None` when singular.
fn spd_inverse(a: &[Vec<f64>]) -> Option<Vec<Vec<f64>>> {
    let k = a.len();
    let mut inv = vec![vec![0.0; k]; k];
    for c in 0..k {
        let mut e = vec![0.0; k];
        e[c] = 1.0;
        let x = cholesky_solve(a, &e)?;
        for r in 0..k {
            inv[r][c] = x[r];
        }
    }
    Some(inv)
}

/// JᵀJ and Jᵀe restricted to the parameters `free`.
fn normal_equations(jac: &[Theta], e: &[f64], free: &[usize]) -> (Vec<Vec<f64>>, Vec<f64>) {
    let k = free.len();
    let mut jtj = vec![vec![0.0; k]; k];
    let mut jte = vec![0.0; k];
    for (row, ei) in jac.iter().zip(e) {
        for (a, &p) in free.iter().enumerate() {
            jte[a] += row[p] * ei;
            for (b, &q) in free.iter().enumerate().take(a + 1) {
                jtj[a][b] += row[p] * row[q];
            }
        }
    }
    // the upper triangle mirrors the lower one
    let lower = jtj.clone();
    for (a, row) in jtj.iter_mut().enumerate() {
        for (b, x) in row.iter_mut().enumerate().skip(a + 1) {
            *x = lower[b][a];
        }
    }
    (jtj, jte)
}

/// Minimises S(θ) from `start` over all parameters but `fixed`, by Levenberg–Marquardt with
/// the bounds enforced by projecting every trial point; returns the point and S.
///
/// # Method
/// Step δ from (JᵀJ + λ·diag(JᵀJ))·δ = −Jᵀe (diagonal scaling; the diagonal is floored
/// at 10⁻¹²·its largest element so a flat direction stays regular); a trial that lowers S is
/// taken and λ divided by 3, else λ is multiplied by 4. It stops when S falls by less than
/// 10⁻¹²·(1 + S), after 200 iterations, or when λ exceeds 10¹⁰. (Nonlinear least squares,
/// any numerical-methods text.)
fn levenberg_marquardt(pb: &Problem, start: &Theta, fixed: Option<usize>) -> (Theta, f64) {
    let free = pb.free(fixed);
    let mut th = pb.project(start, fixed);
    let mut jac = Vec::with_capacity(pb.m() + pb.cn.len() + 1);
    let mut jac_trial = Vec::with_capacity(pb.m() + pb.cn.len() + 1);
    let mut e = pb.residuals(&th, Some(&mut jac));
    let mut cost: f64 = e.iter().map(|x| x * x).sum();
    let mut lambda = 1e-3;
    for _ in 0..200 {
        let (jtj, jte) = normal_equations(&jac, &e, &free);
        let top = (0..free.len()).map(|a| jtj[a][a]).fold(0.0, f64::max);
        let mut improved = false;
        while lambda <= 1e10 {
            let mut a = jtj.clone();
            for (q, row) in a.iter_mut().enumerate() {
                row[q] += lambda * jtj[q][q].max(1e-12 * top).max(1e-300);
            }
            let neg: Vec<f64> = jte.iter().map(|g| -g).collect();
            let Some(step) = cholesky_solve(&a, &neg) else {
                lambda *= 4.0;
                continue;
            };
            let mut trial = th;
            for (q, &p) in free.iter().enumerate() {
                trial[p] += step[q];
            }
            let trial = pb.project(&trial, fixed);
            let e_trial = pb.residuals(&trial, Some(&mut jac_trial));
            let c: f64 = e_trial.iter().map(|x| x * x).sum();
            if c.is_finite() && c < cost {
                let drop = cost - c;
                th = trial;
                e = e_trial;
                std::mem::swap(&mut jac, &mut jac_trial);
                cost = c;
                lambda = (lambda / 3.0).max(1e-12);
                improved = drop > 1e-7 * (1.0 + cost);
                break;
            }
            lambda *= 4.0;
        }
        if !improved {
            break;
        }
    }
    (th, cost)
}

/// The data checked and put into a [`Problem`].
fn problem(
    levels: &[HarmonicLevel],
    absent: &[AbsentHarmonic],
    params: &FitParams,
) -> Result<Problem, FingerprintError> {
    check_params(params)?;
    if levels.len() < MIN_HARMONICS {
        return Err(FingerprintError::TooFewHarmonics {
            found: levels.len(),
            needed: MIN_HARMONICS,
        });
    }
    if let Some(h) = levels.iter().find(|h| {
        h.n == 0 || !h.level_dbuv.is_finite() || !(h.sigma_db.is_finite() && h.sigma_db > 0.0)
    }) {
        return Err(FingerprintError::BadHarmonic {
            n: h.n,
            level_dbuv: h.level_dbuv,
            sigma_db: h.sigma_db,
        });
    }
    if let Some(h) = absent.iter().find(|h| {
        h.n == 0 || !h.below_dbuv.is_finite() || !(h.sigma_db.is_finite() && h.sigma_db > 0.0)
    }) {
        return Err(FingerprintError::BadHarmonic {
            n: h.n,
            level_dbuv: h.below_dbuv,
            sigma_db: h.sigma_db,
        });
    }
    let n_max = levels
        .iter()
        .map(|h| h.n)
        .chain(absent.iter().map(|h| h.n))
        .map(f64::from)
        .fold(1.0, f64::max);
    Ok(Problem {
        cn: absent.iter().map(|h| f64::from(h.n)).collect(),
        cx: absent.iter().map(|h| f64::from(h.n).log10()).collect(),
        cu: absent.iter().map(|h| h.below_dbuv).collect(),
        cs: absent.iter().map(|h| h.sigma_db).collect(),
        n: levels.iter().map(|h| f64::from(h.n)).collect(),
        y: levels.iter().map(|h| h.level_dbuv).collect(),
        sigma: levels.iter().map(|h| h.sigma_db).collect(),
        w: levels.iter().map(|h| h.sigma_db.powi(-2)).collect(),
        x: levels.iter().map(|h| f64::from(h.n).log10()).collect(),
        thr: levels
            .iter()
            .map(|h| h.threshold_dbuv.unwrap_or(f64::NEG_INFINITY))
            .collect(),
        tilt_mean: params.tilt_prior_mean_db_per_decade,
        inv_tilt_sd: if params.tilt_prior_sd_db_per_decade > 0.0 {
            1.0 / params.tilt_prior_sd_db_per_decade
        } else {
            0.0
        },
        k: params.huber_k,
        eps: params.null_floor,
        // a tenth of the resolution 1/n_max: below it every duty looks alike
        duty_lo: (0.1 / n_max).clamp(1e-4, 0.01),
        // the edge corner 100 times above the last harmonic: the ramp factor is 1 to 2·10⁻⁵ dB
        ln_ramp_lo: (0.01 / (PI * n_max)).ln(),
    })
}

fn check_params(p: &FitParams) -> Result<(), FingerprintError> {
    let bad = |field, value, expected| {
        Err(FingerprintError::BadParam {
            field,
            value,
            expected,
        })
    };
    if !p.tilt_prior_mean_db_per_decade.is_finite() {
        return bad(
            "tilt_prior_mean_db_per_decade",
            p.tilt_prior_mean_db_per_decade,
            "a finite value",
        );
    }
    if !(p.tilt_prior_sd_db_per_decade >= 0.0 && p.tilt_prior_sd_db_per_decade.is_finite()) {
        return bad(
            "tilt_prior_sd_db_per_decade",
            p.tilt_prior_sd_db_per_decade,
            "a finite value >= 0",
        );
    }
    if !(p.huber_k > 0.0 && p.huber_k.is_finite()) {
        return bad("huber_k", p.huber_k, "a finite value > 0");
    }
    if !(0.0..0.5).contains(&p.null_floor) {
        return bad("null_floor", p.null_floor, "0 <= value < 0.5");
    }
    if !(p.coverage > 0.0 && p.coverage < 1.0) {
        return bad("coverage", p.coverage, "0 < value < 1");
    }
    Ok(())
}

/// Weighted linear least squares of z on (1, x) with the prior on the slope: minimises
/// Σ w·(z − a − t·x)² + (t·p)², p = 1/σ_t (t = 0 when p = 0). Returns (a, t, cost).
///
/// # Formula
/// ```text
/// [Σw  Σwx      ] [a]   [Σwz ]
/// [Σwx Σwx² + p²] [t] = [Σwxz],  cost = Σwz² − a·Σwz − t·Σwxz
/// ```
/// (normal equations; any statistics text).
fn linear_amp_tilt(sums: &Sums, p: f64) -> (f64, f64, f64) {
    let Sums {
        w,
        wx,
        wxx,
        wz,
        wxz,
        wzz,
    } = *sums;
    if p == 0.0 {
        let a = wz / w;
        return (a, 0.0, wzz - a * wz);
    }
    let det = w * (wxx + p * p) - wx * wx;
    let a = (wz * (wxx + p * p) - wx * wxz) / det;
    let t = (w * wxz - wx * wz) / det;
    (a, t, wzz - a * wz - t * wxz)
}

#[derive(Debug, Clone, Copy, Default)]
struct Sums {
    w: f64,
    wx: f64,
    wxx: f64,
    wz: f64,
    wxz: f64,
    wzz: f64,
}

/// One point of the start grids: θ and its quadratic cost.
#[derive(Debug, Clone, Copy)]
struct GridPoint {
    theta: Theta,
    cost: f64,
}

/// 20·log10(√2·D) + H(nπD) for every harmonic, seen then absent (values only).
fn duty_db(pb: &Problem, d: f64) -> Vec<f64> {
    let base = 20.0 * (SQRT_2 * d).log10();
    let seen = pb.n.iter().map(|nu| (nu, pb.eps));
    let absent = pb.cn.iter().map(|nu| (nu, ABSENT_NULL_FLOOR));
    seen.chain(absent)
        .map(|(nu, eps)| base + floored_sinc_value_db(nu * PI * d, eps))
        .collect()
}

/// H(nπr) for every harmonic, seen then absent (values only).
fn ramp_db(pb: &Problem, ln_r: f64) -> Vec<f64> {
    let r = ln_r.exp();
    let seen = pb.n.iter().map(|nu| (nu, pb.eps));
    let absent = pb.cn.iter().map(|nu| (nu, ABSENT_NULL_FLOOR));
    seen.chain(absent)
        .map(|(nu, eps)| floored_sinc_value_db(nu * PI * r, eps))
        .collect()
}

/// (a, t) for the model offsets `duty + ramp` by iteratively reweighted least squares: the
/// closed form of [`linear_amp_tilt`], then `reweights` rounds with the Huber weights
/// w·min(1, k/|u|) (the usual IRLS form of an M-estimate; any robust-statistics text). Returns
/// the grid point at (d, ln r) with its objective: the Huber loss and the prior as in the local
/// fit, the absent harmonics as the cheaper hinge Σ max(0, (L − U)/σ)² (the censored term's
/// large-excess form without its logarithm).
fn closed_form(
    pb: &Problem,
    (duty, ramp): (&[f64], &[f64]),
    d: f64,
    ln_r: f64,
    reweights: usize,
) -> GridPoint {
    // t = μ + t': the prior on t' is centred at 0
    let z: Vec<f64> = (0..pb.m())
        .map(|i| pb.y[i] - duty[i] - ramp[i] - pb.tilt_mean * pb.x[i])
        .collect();
    let mut wts = pb.w.clone();
    let (mut a, mut t) = (0.0, 0.0);
    for round in 0..=reweights {
        let mut s = Sums::default();
        for i in 0..pb.m() {
            let (w, x) = (wts[i], pb.x[i]);
            s.w += w;
            s.wx += w * x;
            s.wxx += w * x * x;
            s.wz += w * z[i];
            s.wxz += w * x * z[i];
            s.wzz += w * z[i] * z[i];
        }
        (a, t, _) = linear_amp_tilt(&s, pb.inv_tilt_sd);
        if round < reweights {
            for i in 0..pb.m() {
                let u = (z[i] - a - t * pb.x[i]) / pb.sigma[i];
                wts[i] = pb.w[i] * (pb.k / u.abs()).min(1.0);
            }
        }
    }
    let cost: f64 = (0..pb.m())
        .map(|i| {
            huber_root((z[i] - a - t * pb.x[i]) / pb.sigma[i], pb.k)
                .0
                .powi(2)
        })
        .sum::<f64>()
        + (0..pb.cn.len())
            .map(|c| {
                let k = pb.m() + c;
                let l = a + (pb.tilt_mean + t) * pb.cx[c] + duty[k] + ramp[k];
                ((l - pb.cu[c]) / pb.cs[c]).max(0.0).powi(2)
            })
            .sum::<f64>()
        + (t * pb.inv_tilt_sd).powi(2);
    GridPoint {
        theta: [a, pb.tilt_mean + t, d, ln_r],
        cost,
    }
}

/// Stage 1 of the start search: D from D_min to ½ in steps of 1/(4·n_max) (at most 2000
/// values; the objective has a local minimum about every 1/(2·n_max)), ln r on 6 values from
/// ln r_min to ln ½ (r ≤ D), one Huber reweighting. Per D, the best point over r.
fn duty_grid(pb: &Problem) -> Vec<GridPoint> {
    let n_max = pb.n.iter().copied().fold(1.0, f64::max);
    let step = (0.25 / n_max).max((0.5 - pb.duty_lo) / 2000.0);
    let count = ((0.5 - pb.duty_lo) / step).ceil() as usize + 1;
    const RAMPS: usize = 6;
    let ln_hi = 0.5f64.ln();
    let ramps: Vec<(f64, Vec<f64>)> = (0..RAMPS)
        .map(|j| {
            let lr = pb.ln_ramp_lo + (ln_hi - pb.ln_ramp_lo) * j as f64 / (RAMPS - 1) as f64;
            (lr, ramp_db(pb, lr))
        })
        .collect();
    (0..count)
        .map(|i| {
            let d = (pb.duty_lo + i as f64 * step).min(0.5);
            let dd = duty_db(pb, d);
            ramps
                .iter()
                .take_while(|(lr, _)| lr.exp() <= d)
                .map(|(lr, rdb)| closed_form(pb, (&dd, rdb), d, *lr, 1))
                .min_by(|a, b| a.cost.total_cmp(&b.cost))
                .unwrap_or(GridPoint {
                    theta: [0.0, 0.0, d, pb.ln_ramp_lo],
                    cost: f64::INFINITY,
                })
        })
        .collect()
}

/// Stage 2: at a fixed D, ln r from ln r_min to ln D in steps of 0.04 (the ramp factor's nulls
/// make the objective in r multimodal too).
fn ramp_scan(pb: &Problem, d: f64) -> Vec<GridPoint> {
    let dd = duty_db(pb, d);
    let hi = d.ln();
    let count = ((hi - pb.ln_ramp_lo) / 0.04).ceil().max(1.0) as usize;
    (0..=count)
        .map(|j| {
            let lr = (pb.ln_ramp_lo + 0.04 * j as f64).min(hi);
            closed_form(pb, (&dd, &ramp_db(pb, lr)), d, lr, 2)
        })
        .collect()
}

/// Local minima of a sequence of grid points, best first, at most `count`.
fn local_minima(grid: &[GridPoint], count: usize) -> Vec<GridPoint> {
    let mut minima: Vec<GridPoint> = (0..grid.len())
        .filter(|&i| {
            let c = grid[i].cost;
            let left = i == 0 || grid[i - 1].cost >= c;
            let right = i + 1 == grid.len() || grid[i + 1].cost > c;
            c.is_finite() && left && right
        })
        .map(|i| grid[i])
        .collect();
    minima.sort_by(|a, b| a.cost.total_cmp(&b.cost));
    minima.truncate(count);
    minima
}

/// Starts of the local fits: the 6 best minima over D of stage 1, each with the 3 best minima
/// over r of stage 2.
fn global_starts(pb: &Problem) -> Vec<Theta> {
    local_minima(&duty_grid(pb), 6)
        .iter()
        .flat_map(|g| local_minima(&ramp_scan(pb, g.theta[DUTY]), 3))
        .map(|g| g.theta)
        .collect()
}

/// The fitted trapezoid with its intervals.
#[derive(Debug, Clone, PartialEq)]
pub struct TrapezoidFit {
    /// Best-fit D (≤ 0.5).
    pub duty: f64,
    /// Profile interval of D; an end is `None` when open.
    pub duty_ci: (Option<f64>, Option<f64>),
    pub duty_status: Status,
    /// Best-fit r = τr/T.
    pub ramp_ratio: f64,
    /// Profile interval of r; an end is `None` when open.
    pub ramp_ci: (Option<f64>, Option<f64>),
    pub ramp_status: Status,
    /// a (dBµV), pulse height at the receiver, and its Wald interval.
    pub amplitude_dbuv: f64,
    pub amplitude_ci_dbuv: Option<(f64, f64)>,
    /// t (dB/decade) and its Wald interval.
    pub tilt_db_per_decade: f64,
    pub tilt_ci_db_per_decade: Option<(f64, f64)>,
    /// Other local optima in D that fit within the interval threshold (aliases of the nulls);
    /// `duty_ci` is widened to cover them.
    pub duty_aliases: Vec<f64>,
    /// √(mean (y − L)²), dB.
    pub residual_rms_db: f64,
    /// Residuals y − L per input harmonic, dB.
    pub residuals_db: Vec<f64>,
    /// Harmonics beyond the Huber corner (down-weighted).
    pub outliers: usize,
    /// The objective S at the optimum and the interval threshold s²·F.
    pub objective: f64,
    pub threshold: f64,
}

impl TrapezoidFit {
    /// The best-fit shape.
    pub fn shape(&self) -> Shape {
        Shape {
            amplitude_dbuv: self.amplitude_dbuv,
            tilt_db_per_decade: self.tilt_db_per_decade,
            duty: self.duty,
            ramp_ratio: self.ramp_ratio,
        }
    }
}

/// The objective S(θ) of [`fit_trapezoid`] at `shape`: Σũ² over the seen harmonics, the
/// censored terms of the absent ones and the tilt prior (see the module docs). For tests and
/// oracles.
///
/// # Errors
/// As [`fit_trapezoid`].
pub fn objective(
    levels: &[HarmonicLevel],
    absent: &[AbsentHarmonic],
    shape: &Shape,
    params: &FitParams,
) -> Result<f64, FingerprintError> {
    let pb = problem(levels, absent, params)?;
    Ok(pb.cost(&[
        shape.amplitude_dbuv,
        shape.tilt_db_per_decade,
        shape.duty,
        shape.ramp_ratio.max(1e-300).ln(),
    ]))
}

/// Fits the trapezoid to `levels` (see the module docs for the model, loss and intervals).
///
/// # Errors
/// [`FingerprintError::TooFewHarmonics`] below [`MIN_HARMONICS`], `BadHarmonic` for a
/// non-finite level, a non-positive σ or n = 0, `BadParam` for settings out of range.
pub fn fit_trapezoid(
    levels: &[HarmonicLevel],
    absent: &[AbsentHarmonic],
    params: &FitParams,
) -> Result<TrapezoidFit, FingerprintError> {
    let pb = problem(levels, absent, params)?;
    let starts = global_starts(&pb);
    let refined: Vec<(Theta, f64)> = starts
        .iter()
        .map(|s| levenberg_marquardt(&pb, s, None))
        .collect();
    let Some(&(best, cost)) = refined.iter().min_by(|a, b| a.1.total_cmp(&b.1)) else {
        return Err(FingerprintError::TooFewHarmonics {
            found: levels.len(),
            needed: MIN_HARMONICS,
        });
    };
    let dof = (pb.m() - pb.free(None).len()).max(1);
    let s2 = (cost / dof as f64).max(1.0);
    let t = StudentsT::new(0.0, 1.0, dof as f64)
        .map(|d| d.inverse_cdf(0.5 + 0.5 * params.coverage))
        .unwrap_or(2.0);
    let threshold = s2 * t * t;
    let n_max = pb.n.iter().copied().fold(1.0, f64::max);
    let duty_walk = Walk {
        index: DUTY,
        lo: pb.duty_lo,
        hi: 0.5,
        first_step: 0.02 / n_max,
        max_step: 0.25 / n_max,
    };
    let ramp_walk = Walk {
        index: RAMP,
        lo: pb.ln_ramp_lo,
        hi: 0.5f64.ln(),
        first_step: RAMP_SCAN_STEP,
        max_step: RAMP_SCAN_STEP,
    };
    let (d_lo, d_hi) = profile_interval(&pb, &best, cost, threshold, &duty_walk);
    let (r_lo, r_hi) = profile_scan(&pb, &best, cost, threshold, &ramp_walk);
    // τr's lower end stands only if the data need a corner (not merely the tilt prior)
    let r_lo = r_lo.filter(|_| !pb.tilt_free() || corner_needed(&pb, &best, threshold));
    let mut duty_aliases: Vec<f64> = refined
        .iter()
        .filter(|(th, c)| {
            c - cost <= threshold
                && (th[DUTY] < d_lo.unwrap_or(pb.duty_lo) || th[DUTY] > d_hi.unwrap_or(0.5))
        })
        .map(|(th, _)| th[DUTY])
        .collect();
    duty_aliases.sort_by(f64::total_cmp);
    // several starts end in one alias: keep one per 1/(4·n_max)
    duty_aliases.dedup_by(|a, b| (*a - *b).abs() < 0.25 / n_max);
    let wald = wald_intervals(&pb, &best, s2, t);
    let residuals_db: Vec<f64> = (0..pb.m())
        .map(|i| pb.y[i] - pb.level(i, &best).0)
        .collect();
    let outliers = (0..pb.m())
        .filter(|&i| (residuals_db[i] / pb.sigma[i]).abs() > pb.k * s2.sqrt())
        .count();
    let rms = (residuals_db.iter().map(|r| r * r).sum::<f64>() / pb.m() as f64).sqrt();
    let (duty_status, duty_ci) = duty_interval((d_lo, d_hi), &duty_aliases);
    Ok(TrapezoidFit {
        duty: best[DUTY],
        duty_ci,
        duty_status,
        ramp_ratio: best[RAMP].exp(),
        ramp_ci: (r_lo.map(f64::exp), r_hi.map(f64::exp)),
        ramp_status: status(r_lo.is_some(), r_hi.is_some()),
        amplitude_dbuv: best[AMP],
        amplitude_ci_dbuv: wald.map(|w| w[AMP]),
        tilt_db_per_decade: best[TILT],
        tilt_ci_db_per_decade: wald.map(|w| w[TILT]).filter(|_| pb.tilt_free()),
        duty_aliases,
        residual_rms_db: rms,
        residuals_db,
        outliers,
        objective: cost,
        threshold,
    })
}

/// An interval whose open ends are `None`.
type Interval = (Option<f64>, Option<f64>);

/// The duty's status and interval from its profile ends and aliases. D ≤ ½ by convention, so a
/// walk that reaches ½ closes the interval there; an upper bound near ½ says nothing; when the
/// nulls alias, the confidence set is a union of intervals and its hull is reported.
fn duty_interval((lo, hi): Interval, aliases: &[f64]) -> (Status, Interval) {
    let (status, mut ci) = match (lo, hi) {
        (Some(lo), hi) => (Status::Estimated, (Some(lo), Some(hi.unwrap_or(0.5)))),
        (None, Some(hi)) if hi < 0.49 => (Status::UpperBound, (None, Some(hi))),
        (None, _) => (Status::NotIdentifiable, (None, None)),
    };
    for &a in aliases {
        ci.0 = ci.0.map(|lo| lo.min(a));
        ci.1 = ci.1.map(|hi| hi.max(a));
    }
    (status, ci)
}

fn status(has_lo: bool, has_hi: bool) -> Status {
    match (has_lo, has_hi) {
        (true, true) => Status::Estimated,
        (false, true) => Status::UpperBound,
        (true, false) => Status::LowerBound,
        (false, false) => Status::NotIdentifiable,
    }
}

/// Wald intervals θ̂_j ± t·√(s²·C_jj), C = (J̃ᵀJ̃)⁻¹ over the free parameters, for a and t;
/// `None` when the matrix is singular.
fn wald_intervals(pb: &Problem, th: &Theta, s2: f64, t: f64) -> Option<[(f64, f64); 2]> {
    let free = pb.free(None);
    let mut jac = Vec::new();
    let e = pb.residuals(th, Some(&mut jac));
    let (jtj, _) = normal_equations(&jac, &e, &free);
    let c = spd_inverse(&jtj)?;
    let mut out = [(th[AMP], th[AMP]), (th[TILT], th[TILT])];
    for (q, &p) in free.iter().enumerate() {
        if p == AMP || p == TILT {
            let half = t * (s2 * c[q][q]).sqrt();
            out[p] = (th[p] - half, th[p] + half);
        }
    }
    Some(out)
}

/// How a profile walks along one parameter.
#[derive(Debug, Clone, Copy)]
struct Walk {
    index: usize,
    lo: f64,
    hi: f64,
    first_step: f64,
    max_step: f64,
}

/// How much wider the tilt prior is in [`corner_needed`]'s test (3 × 10 = 30 dB/decade).
const LOOSE_TILT_FACTOR: f64 = 3.0;

/// Whether the data need an edge corner inside the harmonics seen: the best fit against the best
/// fit with no corner in range (r at its lower bound), both with the tilt prior three times
/// wider. A straight tilt reproduces the −20 → −40 dB/decade bend only when the bend lies at an
/// end of the data (the tilt-corner trade-off of the module docs); if the corner-free fit comes
/// within the interval threshold, the data do not bound τr from below.
fn corner_needed(pb: &Problem, best: &Theta, threshold: f64) -> bool {
    let mut loose = pb.clone();
    loose.inv_tilt_sd /= LOOSE_TILT_FACTOR;
    let (_, with) = levenberg_marquardt(&loose, best, None);
    let mut flat = *best;
    flat[RAMP] = pb.ln_ramp_lo;
    let without = [0.0, -20.0]
        .iter()
        .map(|dt| {
            let mut start = flat;
            start[TILT] += dt;
            levenberg_marquardt(&loose, &start, Some(RAMP)).1
        })
        .fold(f64::INFINITY, f64::min);
    without - with > threshold
}

/// Step of the scan over ln r in [`profile_scan`] (22 % in r).
const RAMP_SCAN_STEP: f64 = 0.2;

/// The hull of the profile confidence set of parameter j over its whole range: S_j is
/// evaluated at every `walk.first_step` from the best value out to both bounds, each point
/// refitted from its neighbour (continuation) and, when that lands outside but within ten
/// thresholds, again from the best fit, the lower kept; the
/// set's outermost points inside the threshold are refined by 10 bisections towards the next
/// point outside. Unlike [`profile_interval`], a second region inside the threshold beyond a
/// barrier is found: the ramp factor's nulls make S_j multimodal in r. An end is `None` when
/// the set reaches the bound.
fn profile_scan(
    pb: &Problem,
    best: &Theta,
    cost: f64,
    threshold: f64,
    walk: &Walk,
) -> (Option<f64>, Option<f64>) {
    let j = walk.index;
    let refit = |from: &Theta, x: f64| {
        let mut start = *from;
        start[j] = x;
        levenberg_marquardt(pb, &start, Some(j))
    };
    let side = |dir: f64| -> Option<f64> {
        let bound = if dir < 0.0 { walk.lo } else { walk.hi };
        let mut prev = *best;
        let mut extreme = (*best, best[j]);
        let mut outside_next: Option<f64> = None;
        let mut x = best[j];
        while (bound - x) * dir > 0.0 {
            x = if (bound - x) * dir <= walk.first_step {
                bound
            } else {
                x + dir * walk.first_step
            };
            let (mut th, mut c) = refit(&prev, x);
            if c - cost > threshold && c - cost < 10.0 * threshold {
                // the continuation may sit in a worse basin than a start from the best fit
                let (b, cb) = refit(best, x);
                if cb < c {
                    (th, c) = (b, cb);
                }
            }
            if c - cost <= threshold {
                extreme = (th, x);
                outside_next = None;
            } else if outside_next.is_none() {
                outside_next = Some(x);
            }
            prev = th;
        }
        let mut b = outside_next?;
        let mut inside = extreme.0;
        for _ in 0..10 {
            let mid = 0.5 * (inside[j] + b);
            let (tm, cm) = refit(&inside, mid);
            if cm - cost > threshold {
                b = mid;
            } else {
                inside = tm;
                inside[j] = mid;
            }
        }
        Some(0.5 * (inside[j] + b))
    };
    (side(-1.0), side(1.0))
}

/// Both ends of the profile interval of parameter `walk.index`; an end is `None` when the
/// profile stays under the threshold up to the parameter's bound.
fn profile_interval(
    pb: &Problem,
    best: &Theta,
    cost: f64,
    threshold: f64,
    walk: &Walk,
) -> (Option<f64>, Option<f64>) {
    (
        profile_end(pb, best, cost, threshold, walk, -1.0),
        profile_end(pb, best, cost, threshold, walk, 1.0),
    )
}

/// Walks parameter j from its best value in direction `dir` with growing steps (×1.6, up to
/// `max_step`), refitting the others from the last point inside, until the profile S_j − S(θ̂)
/// exceeds `threshold`; the crossing is then bisected 12 times. `None` when the bound is
/// reached inside.
fn profile_end(
    pb: &Problem,
    best: &Theta,
    cost: f64,
    threshold: f64,
    walk: &Walk,
    dir: f64,
) -> Option<f64> {
    let j = walk.index;
    let bound = if dir < 0.0 { walk.lo } else { walk.hi };
    let mut inside = *best;
    let mut step = walk.first_step;
    let refit = |from: &Theta, x: f64| {
        let mut start = *from;
        start[j] = x;
        levenberg_marquardt(pb, &start, Some(j))
    };
    loop {
        if (bound - inside[j]) * dir <= 0.0 {
            return None;
        }
        let x = if (bound - inside[j]) * dir <= step {
            bound
        } else {
            inside[j] + dir * step
        };
        let (th, c) = refit(&inside, x);
        if c - cost > threshold {
            let (mut a, mut b) = (inside, x);
            for _ in 0..12 {
                let mid = 0.5 * (a[j] + b);
                let (tm, cm) = refit(&a, mid);
                if cm - cost > threshold {
                    b = mid;
                } else {
                    a = tm;
                }
            }
            return Some(0.5 * (a[j] + b));
        }
        inside = th;
        inside[j] = x;
        step = (step * 1.6).min(walk.max_step);
    }
}

// ---------------------------------------------------------------------------------------------
// The family's fingerprint.

/// A member's reading as the fit takes it: `(level_dbuv, over_floor_db, significance_db)` of
/// its peak. On a peak detector the level loses the noise's push ([`noise_corrected_dbuv`]);
/// the uncertainty comes from the height over the floor ([`level_sigma_db`]); the threshold it
/// was detected over is the level less its significance.
pub fn seen_harmonic(
    n: u32,
    (level_dbuv, over_floor_db, significance_db): (f64, f64, f64),
    peak_detector: bool,
) -> HarmonicLevel {
    let level_dbuv = if peak_detector {
        noise_corrected_dbuv(level_dbuv, over_floor_db)
    } else {
        level_dbuv
    };
    HarmonicLevel {
        n,
        level_dbuv,
        sigma_db: level_sigma_db(over_floor_db),
        threshold_dbuv: Some(level_dbuv - significance_db),
    }
}

/// Most absent harmonics a fit looks at (evenly thinned beyond).
pub const MAX_ABSENT: usize = 150;

/// How far a model level may sit above the detection threshold at an absent harmonic at little
/// cost, dB (a reading there fluctuates by a few dB with the noise; our choice).
pub const ABSENT_SD_DB: f64 = 1.5;

/// The harmonics of fundamental `f0_hz` inside the scan, up to 1.5 times the highest member,
/// that are not `members` (for an odd-only family the even ones too) and where nothing was
/// detected: the trace stays under the floor's detection threshold within half an RBW (at
/// least 1.5 display steps; for a dithered family at least half its spread) of the harmonic,
/// so it read below that threshold (its highest value there is the bound). A harmonic that
/// shows but was not claimed is left out (it is neither a member nor below anything); the bound
/// is the threshold, not the trace, since a line just under the threshold is what the trace
/// shows there.
pub fn absent_harmonics(
    scan: &Scan,
    floor: &Floor,
    f0_hz: f64,
    members: &[u32],
    spread_pct: Option<f64>,
) -> Vec<AbsentHarmonic> {
    let (start, stop) = scan.span_hz();
    let (Some(freqs), Some(levels)) = (scan.freq_hz.as_slice(), scan.level_dbuv.as_slice()) else {
        return Vec::new();
    };
    let top = members.iter().copied().max().unwrap_or(0);
    if f0_hz.is_nan() || f0_hz <= 0.0 || top == 0 || freqs.len() < 2 {
        return Vec::new();
    }
    let first = ((start / f0_hz).ceil() as u32).max(1);
    let last = ((stop / f0_hz).floor() as u32).min(top + top / 2);
    let spread = spread_pct.unwrap_or(0.0) / 100.0;
    let mut out: Vec<AbsentHarmonic> = (first..=last)
        .filter(|n| !members.contains(n))
        .filter_map(|n| {
            let f = f64::from(n) * f0_hz;
            let at = freqs.partition_point(|&x| x < f).min(freqs.len() - 1);
            let step = local_step(scan, at);
            let rbw = scan.meta.rbw_hz.unwrap_or(2.0 * step);
            let half = (0.5 * rbw).max(1.5 * step).max(0.5 * f * spread);
            let lo = freqs.partition_point(|&x| x < f - half);
            let hi = freqs.partition_point(|&x| x <= f + half);
            let trace = levels.get(lo..hi)?;
            let threshold = floor.threshold_dbuv.get(lo..hi)?;
            if trace.iter().zip(threshold).any(|(l, t)| l > t) {
                return None;
            }
            Some(AbsentHarmonic {
                n,
                below_dbuv: threshold.iter().copied().reduce(f64::max)?,
                sigma_db: ABSENT_SD_DB,
            })
        })
        .collect();
    if out.len() > MAX_ABSENT {
        let k = out.len().div_ceil(MAX_ABSENT);
        out = out.into_iter().step_by(k).collect();
    }
    out
}

/// What the analysis knows of a family for its fingerprint.
#[derive(Debug, Clone, Copy)]
pub struct FamilyLevels<'a> {
    pub fundamental_hz: f64,
    /// Its harmonics' readings (uncorrected for dither).
    pub harmonics: &'a [HarmonicLevel],
    /// Harmonics expected in the scan but not among its members.
    pub absent: &'a [AbsentHarmonic],
    /// Its envelope (for the dither depth).
    pub envelope: Option<&'a Envelope>,
    /// RBW of the scan, Hz (for the dither correction).
    pub rbw_hz: Option<f64>,
    /// A conducted (LISN) scan: only then is the DM/CM rule of thumb applied.
    pub conducted: bool,
}

/// Differential against common mode, by rule of thumb (METHODS.md §9).
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct ModeScore {
    /// 0 to 1: the power-weighted share of the family's harmonics that the rule of thumb puts in
    /// differential mode.
    pub dm_likelihood: f64,
    /// "mostly differential mode", "mostly common mode" or "mixed".
    pub verdict: &'static str,
    /// Always "rule of thumb": a measured DM/CM split (a combiner on the LISN) wins.
    pub basis: &'static str,
    pub reasons: Vec<String>,
}

/// Whether the trapezoid describes a family's harmonics.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum Quality {
    Good,
    Poor,
}

/// The fingerprint of a switching family.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Fingerprint {
    /// Harmonics the fit used.
    pub harmonics_used: usize,
    /// Poor when the trapezoid does not describe the harmonics ([`POOR_FIT_DB`]); duty and
    /// edges are then not reported.
    pub fit_quality: Quality,
    /// Best-fit duty (≤ 0.5; 1 − D gives the same spectrum); `None` unless estimated.
    pub duty: Option<f64>,
    /// 95 % interval of the duty; a `null` end is open.
    pub duty_ci: (Option<f64>, Option<f64>),
    pub duty_status: Status,
    /// 10-90 % edge time (= 0.8·τr), s; `None` unless estimated.
    pub edge_time_s: Option<f64>,
    /// 95 % interval of the edge time, s; `[null, x]` is an upper bound only.
    pub edge_time_ci_s: (Option<f64>, Option<f64>),
    pub edge_time_status: Status,
    /// Break points of the envelope: 1/(π·τ) and 1/(π·τr), Hz (from the best fit).
    pub pulse_corner_hz: f64,
    pub edge_corner_hz: Option<f64>,
    /// Pulse height at the receiver port, dBµV (peak of the trapezoid, referred to harmonic 1
    /// of the tilt), and its 95 % interval.
    pub amplitude_dbuv: f64,
    pub amplitude_ci_dbuv: Option<(f64, f64)>,
    /// Coupling tilt, dB/decade, and its 95 % interval (fitted with a 0 ± 10 prior).
    pub tilt_db_per_decade: f64,
    pub tilt_ci_db_per_decade: Option<(f64, f64)>,
    /// Rms of the level residuals, dB.
    pub residual_rms_db: f64,
    /// Their robust scale, 1.4826·median|r|, dB.
    pub residual_robust_db: f64,
    /// Harmonics down-weighted by the robust loss.
    pub outliers: usize,
    /// Dither depth (peak to peak, % of f0) from the width growth, and its 95 % interval.
    pub spread_pct: Option<f64>,
    pub spread_ci_pct: Option<(f64, f64)>,
    /// DM/CM by rule of thumb (conducted scans only).
    pub mode: Option<ModeScore>,
    pub notes: Vec<String>,
}

/// The fingerprint of a family: the trapezoid fit of its (dither-corrected) levels, its dither
/// depth and the DM/CM rule of thumb.
///
/// A dithered family (the envelope gives a spread) is fitted with its tilt prior centred at
/// [`DITHER_TILT_DB_PER_DECADE`] and [`DITHER_SD_DB`] added to every level's uncertainty; its
/// levels are not corrected one by one, because the width growth that flags dither is easily
/// faked by neighbouring lines and a wrong correction would bend the envelope.
///
/// # Errors
/// As [`fit_trapezoid`].
pub fn fingerprint(
    fam: &FamilyLevels,
    params: &FitParams,
) -> Result<Fingerprint, FingerprintError> {
    let mut notes = Vec::new();
    let spread = fam.envelope.and_then(|e| e.spread_pct);
    let (levels, fit) = match spread {
        Some(sp) => dithered_fit(fam, sp, params, &mut notes)?,
        None => (
            fam.harmonics.to_vec(),
            fit_trapezoid(fam.harmonics, fam.absent, params)?,
        ),
    };
    let robust = robust_scale_db(&fit.residuals_db);
    let good = robust <= POOR_FIT_DB;
    let estimated = |st: Status| st == Status::Estimated;
    let period = 1.0 / fam.fundamental_hz;
    let edge = |r: f64| 0.8 * r * period;
    let n_lo = levels.iter().map(|h| h.n).min().unwrap_or(1);
    let n_hi = levels.iter().map(|h| h.n).max().unwrap_or(1);
    let (duty_status, edge_time_status) = if good {
        fit_notes(&fit, fam.fundamental_hz, n_lo, n_hi, &mut notes);
        (fit.duty_status, fit.ramp_status)
    } else {
        notes.push(format!(
            "the trapezoid does not describe these harmonics (robust residual {robust:.1} dB): another source shares them, or the waveform is not a trapezoid; duty and edges not estimated"
        ));
        (Status::NotIdentifiable, Status::NotIdentifiable)
    };
    let (spread_pct, spread_ci_pct) = dither(fam, spread);
    let mode = fam.conducted.then(|| {
        let evidence = (good && estimated(edge_time_status)).then_some(&fit);
        mode_score(&levels, evidence, fam.fundamental_hz)
    });
    if !fam.conducted {
        notes.push("no DM/CM score: the rule of thumb is for conducted scans".into());
    }
    let kept = |st: Status, ci: (Option<f64>, Option<f64>)| {
        if st == Status::NotIdentifiable {
            (None, None)
        } else {
            ci
        }
    };
    let ramp_ci = kept(edge_time_status, fit.ramp_ci);
    Ok(Fingerprint {
        harmonics_used: levels.len(),
        fit_quality: if good { Quality::Good } else { Quality::Poor },
        duty: estimated(duty_status).then_some(fit.duty),
        duty_ci: kept(duty_status, fit.duty_ci),
        duty_status,
        edge_time_s: estimated(edge_time_status).then(|| edge(fit.ramp_ratio)),
        edge_time_ci_s: (ramp_ci.0.map(edge), ramp_ci.1.map(edge)),
        edge_time_status,
        pulse_corner_hz: fam.fundamental_hz / (PI * fit.duty),
        edge_corner_hz: estimated(edge_time_status)
            .then(|| fam.fundamental_hz / (PI * fit.ramp_ratio)),
        amplitude_dbuv: fit.amplitude_dbuv,
        amplitude_ci_dbuv: fit.amplitude_ci_dbuv,
        tilt_db_per_decade: fit.tilt_db_per_decade,
        // without an edge corner in the data the tilt trades against it: no interval
        tilt_ci_db_per_decade: fit
            .tilt_ci_db_per_decade
            .filter(|_| estimated(edge_time_status)),
        residual_rms_db: fit.residual_rms_db,
        residual_robust_db: robust,
        outliers: fit.outliers,
        spread_pct,
        spread_ci_pct,
        mode,
        notes,
    })
}

/// A robust residual scale above this (dB) marks the fit poor: well-behaved families, even
/// dithered ones with a few intruders, stay under 1.5 dB on synthetic scenes (our choice).
pub const POOR_FIT_DB: f64 = 3.0;

/// Robust scale of the residuals, dB: 1.4826·median|r| (the normal-consistent median absolute
/// deviation about zero; any robust-statistics text).
fn robust_scale_db(residuals: &[f64]) -> f64 {
    let mut a: Vec<f64> = residuals.iter().map(|r| r.abs()).collect();
    if a.is_empty() {
        return 0.0;
    }
    a.sort_by(f64::total_cmp);
    let k = a.len();
    let median = if k % 2 == 1 {
        a[k / 2]
    } else {
        0.5 * (a[k / 2 - 1] + a[k / 2])
    };
    1.4826 * median
}

/// The fit of a dithered family. Its harmonic n is spread over Δf_n = n·Δf, which lowers its
/// peak reading by about 10·log10(Δf_n/RBW) when Δf_n ≫ RBW (METHODS.md §9, an upper estimate).
/// Two fits are made, each with [`DITHER_SD_DB`] added to the level uncertainties: (a) levels
/// raised by 10·log10(max(1, Δf_n/RBW)), tilt prior at its usual centre; (b) levels as read,
/// tilt prior centred at [`DITHER_TILT_DB_PER_DECADE`] (the loss as a tilt). The one with the
/// smaller objective is kept: the width growth that flags dither is easily faked by
/// neighbouring lines, and a correction for a dither that is not there bends the envelope.
fn dithered_fit(
    fam: &FamilyLevels,
    spread_pct: f64,
    params: &FitParams,
    notes: &mut Vec<String>,
) -> Result<(Vec<HarmonicLevel>, TrapezoidFit), FingerprintError> {
    let widened: Vec<HarmonicLevel> = fam
        .harmonics
        .iter()
        .map(|h| HarmonicLevel {
            sigma_db: h.sigma_db.hypot(DITHER_SD_DB),
            ..*h
        })
        .collect();
    let as_tilt = FitParams {
        tilt_prior_mean_db_per_decade: params.tilt_prior_mean_db_per_decade
            + DITHER_TILT_DB_PER_DECADE,
        ..*params
    };
    let b = fit_trapezoid(&widened, fam.absent, &as_tilt)?;
    let Some(rbw) = fam.rbw_hz.filter(|r| *r > 0.0) else {
        notes.push("dithered: the spreading loss is taken as a −10 dB/decade tilt (rule of thumb, METHODS §9)".into());
        return Ok((widened, b));
    };
    let raise = |n: u32| {
        let width_hz = f64::from(n) * fam.fundamental_hz * spread_pct / 100.0;
        10.0 * (width_hz / rbw).max(1.0).log10()
    };
    let raised: Vec<HarmonicLevel> = widened
        .iter()
        .map(|h| HarmonicLevel {
            level_dbuv: h.level_dbuv + raise(h.n),
            threshold_dbuv: h.threshold_dbuv.map(|t| t + raise(h.n)),
            ..*h
        })
        .collect();
    let raised_absent: Vec<AbsentHarmonic> = fam
        .absent
        .iter()
        .map(|h| AbsentHarmonic {
            below_dbuv: h.below_dbuv + raise(h.n),
            ..*h
        })
        .collect();
    let a = fit_trapezoid(&raised, &raised_absent, params)?;
    if a.objective <= b.objective {
        notes.push("dithered: levels raised by 10·log10(n·Δf/RBW) for the spreading loss (rule of thumb, METHODS §9)".into());
        Ok((raised, a))
    } else {
        notes.push("dithered: the spreading loss is taken as a −10 dB/decade tilt, which fits better than raising each level (rule of thumb, METHODS §9)".into());
        Ok((widened, b))
    }
}

/// Sentences on what the fit can and cannot tell.
fn fit_notes(fit: &TrapezoidFit, f0: f64, n_lo: u32, n_hi: u32, notes: &mut Vec<String>) {
    use crate::analysis::fmt_hz;
    if fit.duty_status == Status::Estimated {
        notes.push(format!(
            "duty {:.2} or {:.2}: D and 1 − D give the same spectrum",
            fit.duty,
            1.0 - fit.duty
        ));
    }
    if !fit.duty_aliases.is_empty() {
        let list: Vec<String> = fit.duty_aliases.iter().map(|a| format!("{a:.3}")).collect();
        notes.push(format!(
            "another duty fits about as well ({}; the sinc's nulls alias): the interval covers it",
            list.join(", ")
        ));
    }
    let top = fmt_hz(f64::from(n_hi) * f0);
    let bottom = fmt_hz(f64::from(n_lo) * f0);
    match fit.ramp_status {
        Status::Estimated => {}
        Status::UpperBound => notes.push(format!(
            "edge corner 1/(π·τr) above the last harmonic ({top}): only an upper bound on the edge time"
        )),
        Status::LowerBound => notes.push(format!(
            "the ramps may fill the pulse: only a lower bound on the edge time (first harmonic {bottom})"
        )),
        Status::NotIdentifiable => {
            notes.push("edge time not identifiable: no bend of the envelope inside the harmonics seen, and a steeper coupling tilt would look the same".into());
        }
    }
    if fit.outliers > 0 {
        notes.push(format!(
            "{} harmonic(s) off the trapezoid, down-weighted (another source, a null, ringing)",
            fit.outliers
        ));
    }
}

/// Dither depth from the envelope: spread_pct = 100·g/f0, g the width growth per harmonic
/// number, and its interval 100·(g ± t(m − 2; 0.975)·se(g))/f0, clipped at 0 (ordinary least
/// squares slope and its standard error; any statistics text).
fn dither(fam: &FamilyLevels, spread: Option<f64>) -> (Option<f64>, Option<(f64, f64)>) {
    let Some(sp) = spread else {
        return (None, None);
    };
    let se = fam.envelope.and_then(|e| e.width_growth_se_hz);
    let dof = fam.harmonics.len().saturating_sub(2);
    let ci = se.filter(|_| dof > 0).and_then(|se| {
        let t = StudentsT::new(0.0, 1.0, dof as f64)
            .ok()?
            .inverse_cdf(0.975);
        let half = t * se / fam.fundamental_hz * 100.0;
        Some(((sp - half).max(0.0), sp + half))
    });
    (Some(sp), ci)
}

/// Differential-mode share by rule of thumb (conducted scans).
///
/// # Rule (METHODS.md §9; the shape of the step and the weights are ours)
/// ```text
/// p_dm(f) = 1 / (1 + (f / 5 MHz)³)                  below ~5 MHz mostly DM, above mostly CM
/// CM odds × 10^(t_low/20) above 1 MHz                a rising coupling tilt (capacitive path,
///                                                    +20 dB/decade) is CM-like; t_low = the lower
///                                                    end of the tilt's interval, if > 0
/// CM odds × 2 at 3-12 MHz when those harmonics       drain ringing drives CM through stray
/// stand ≥ 3 dB over the trapezoid on average         capacitance
/// dm_likelihood = Σ P_n·p_dm(f_n) / Σ P_n,  P_n = 10^(L_n/10) (the family's power)
/// ```
/// Without a good fit (`None`) only the frequency rule is used.
pub fn mode_score(levels: &[HarmonicLevel], fit: Option<&TrapezoidFit>, f0: f64) -> ModeScore {
    let mut reasons = vec![format!(
        "below about {} MHz conducted noise is mostly differential mode, above mostly common mode",
        DM_CM_BOUNDARY_HZ / 1e6
    )];
    let rising = fit
        .and_then(|f| f.tilt_ci_db_per_decade)
        .map_or(0.0, |(lo, _)| lo.max(0.0));
    if rising > 0.0 {
        reasons.push(format!(
            "the coupling rises by {:.0} dB/decade or more: a capacitive, common-mode-like path",
            rising
        ));
    }
    let no_residuals = Vec::new();
    let ringing: Vec<f64> = levels
        .iter()
        .zip(fit.map_or(&no_residuals, |f| &f.residuals_db))
        .filter(|(h, _)| (3e6..=12e6).contains(&(f64::from(h.n) * f0)))
        .map(|(_, r)| *r)
        .collect();
    let excess = if ringing.len() >= 3 {
        ringing.iter().sum::<f64>() / ringing.len() as f64
    } else {
        0.0
    };
    let ringing_cm = excess >= 3.0;
    if ringing_cm {
        reasons.push(format!(
            "the harmonics at 3-12 MHz stand {excess:.1} dB over the trapezoid: ringing, which drives common mode"
        ));
    }
    let top = levels
        .iter()
        .map(|h| h.level_dbuv)
        .fold(f64::NEG_INFINITY, f64::max);
    let (mut num, mut den) = (0.0, 0.0);
    for h in levels {
        let f = f64::from(h.n) * f0;
        let p = 1.0 / (1.0 + (f / DM_CM_BOUNDARY_HZ).powi(3));
        let mut cm_odds = (1.0 - p) / p.max(1e-300);
        if f >= 1e6 {
            cm_odds *= 10f64.powf(rising / 20.0);
        }
        if ringing_cm && (3e6..=12e6).contains(&f) {
            cm_odds *= 2.0;
        }
        let w = 10f64.powf((h.level_dbuv - top) / 10.0);
        num += w / (1.0 + cm_odds);
        den += w;
    }
    let dm = if den > 0.0 { num / den } else { 0.5 };
    ModeScore {
        dm_likelihood: dm,
        verdict: if dm >= 0.65 {
            "mostly differential mode"
        } else if dm <= 0.35 {
            "mostly common mode"
        } else {
            "mixed differential and common mode"
        },
        basis: "rule of thumb",
        reasons,
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::synth::trapezoid_harmonic_peak;

    fn rms_dbuv(c_peak_v: f64) -> f64 {
        20.0 * (c_peak_v / SQRT_2 / 1e-6).log10()
    }

    /// Harmonic levels of the synth's trapezoid formula (a separate implementation), with an
    /// optional tilt, kept above `floor_dbuv`.
    fn levels(
        ns: impl Iterator<Item = u32>,
        duty: f64,
        ramp_ratio: f64,
        tilt: f64,
        floor_dbuv: f64,
    ) -> Vec<HarmonicLevel> {
        ns.map(|n| HarmonicLevel {
            n,
            level_dbuv: rms_dbuv(trapezoid_harmonic_peak(n, 1.0, 1.0, duty, ramp_ratio))
                + tilt * f64::from(n).log10(),
            sigma_db: 0.5,
            threshold_dbuv: None,
        })
        .filter(|h| h.level_dbuv > floor_dbuv)
        .collect()
    }

    #[test]
    fn model_matches_the_methods_check_values() {
        // source: METHODS.md §5, derived: A = 1 V, T = 10 µs, τ = 5 µs, τr = 50 ns:
        // c1 = 116.08, c3 = 106.53, c5 = 102.09, c11 = 95.21, c101 = 71.98 dBµV peak
        let shape = Shape {
            amplitude_dbuv: 120.0, // 1 V = 120 dBµV
            tilt_db_per_decade: 0.0,
            duty: 0.5,
            ramp_ratio: 50e-9 / 10e-6,
        };
        for (n, peak) in [
            (1, 116.08),
            (3, 106.53),
            (5, 102.09),
            (11, 95.21),
            (101, 71.98),
        ] {
            for eps in [0.0, NULL_FLOOR] {
                // rms + 3.01 dB = peak (derived: 20·log10 √2)
                let got = trapezoid_level_dbuv(n, &shape, eps) + 20.0 * SQRT_2.log10();
                assert!((got - peak).abs() < 0.01, "n = {n}, ε = {eps}: {got}");
            }
        }
        // source: METHODS.md §5, derived: break points 1/(πτ) = 63.66 kHz, 1/(πτr) = 6.366 MHz
        let f0 = 100e3;
        assert!((f0 / (PI * shape.duty) - 63.66e3).abs() < 10.0);
        assert!((f0 / (PI * shape.ramp_ratio) - 6.366e6).abs() < 1e3);
    }

    #[test]
    fn analytic_gradient_matches_finite_differences() {
        let lv = levels(2..40, 0.3, 0.01, 0.0, -1e9);
        let pb = problem(&lv, &[], &FitParams::default()).unwrap();
        let th = [118.0, 3.0, 0.27, (0.013f64).ln()];
        for i in [0, 5, 17, 30] {
            let (_, g) = pb.level(i, &th);
            for p in 0..P {
                let h = 1e-6;
                let (mut a, mut b) = (th, th);
                a[p] += h;
                b[p] -= h;
                let fd = (pb.level(i, &a).0 - pb.level(i, &b).0) / (2.0 * h);
                assert!(
                    (fd - g[p]).abs() < 1e-5 * (1.0 + g[p].abs()),
                    "{i} {p}: {fd} vs {}",
                    g[p]
                );
            }
        }
    }

    #[test]
    fn recovers_duty_and_ramp_with_a_tilt() {
        // source: the synth's trapezoid formula (METHODS.md §5), duty 0.32, ramp 1 % of T
        // (corner at n = 32), +6 dB/decade coupling; harmonics 2-150 above 40 dB under c1
        let lv = levels(2..=150, 0.32, 0.01, 6.0, 62.0);
        let fit = fit_trapezoid(&lv, &[], &FitParams::default()).unwrap();
        assert!((fit.duty - 0.32).abs() < 1e-3, "{fit:?}");
        assert!((fit.ramp_ratio / 0.01 - 1.0).abs() < 0.01, "{fit:?}");
        assert!((fit.tilt_db_per_decade - 6.0).abs() < 0.2, "{fit:?}");
        assert_eq!(fit.duty_status, Status::Estimated);
        assert_eq!(fit.ramp_status, Status::Estimated);
        let (lo, hi) = (fit.ramp_ci.0.unwrap(), fit.ramp_ci.1.unwrap());
        assert!(lo < 0.01 && 0.01 < hi, "{:?}", fit.ramp_ci);
    }

    #[test]
    fn optimiser_beats_a_grid_search_on_the_same_objective() {
        // oracle: a grid over (D, r), exact in (a, t) by iteratively reweighted least squares
        // (the Huber loss is convex in them), on the same objective S(θ)
        let mut lv = levels(3..=60, 0.37, 0.02, 0.0, 55.0);
        // a mis-assigned member 12 dB high and measurement scatter (deterministic)
        for (i, h) in lv.iter_mut().enumerate() {
            h.level_dbuv += 0.3 * ((i * 7919) % 13) as f64 / 13.0 - 0.15;
        }
        lv[10].level_dbuv += 12.0;
        let params = FitParams::default();
        let fit = fit_trapezoid(&lv, &[], &params).unwrap();
        let best = objective(&lv, &[], &fit.shape(), &params).unwrap();
        let mut oracle = f64::INFINITY;
        for i in 0..=240 {
            let d = 0.01 + 0.49 * f64::from(i) / 240.0;
            for j in 0..=20 {
                let r = (0.001f64.ln() + f64::from(j) / 20.0 * (0.2f64.ln() - 0.001f64.ln())).exp();
                if r > d {
                    continue;
                }
                oracle = oracle.min(irls_cost(&lv, d, r, &params));
            }
        }
        assert!(best <= oracle + 1e-9, "optimiser {best} vs grid {oracle}");
        assert!((fit.duty - 0.37).abs() < 0.003, "{fit:?}");
        assert!(fit.outliers >= 1);
    }

    /// min over (a, t) of S at fixed (D, r): IRLS on the Huber weights, 25 rounds.
    fn irls_cost(lv: &[HarmonicLevel], d: f64, r: f64, params: &FitParams) -> f64 {
        let base: Vec<f64> = lv
            .iter()
            .map(|h| {
                let s = Shape {
                    amplitude_dbuv: 0.0,
                    tilt_db_per_decade: 0.0,
                    duty: d,
                    ramp_ratio: r,
                };
                trapezoid_level_dbuv(h.n, &s, params.null_floor)
            })
            .collect();
        let (mut a, mut t) = (0.0, 0.0);
        let p = 1.0 / params.tilt_prior_sd_db_per_decade;
        let mut wts = vec![1.0; lv.len()];
        for _ in 0..25 {
            let mut s = Sums::default();
            for (i, h) in lv.iter().enumerate() {
                let w = wts[i] / (h.sigma_db * h.sigma_db);
                let x = f64::from(h.n).log10();
                let z = h.level_dbuv - base[i];
                s.w += w;
                s.wx += w * x;
                s.wxx += w * x * x;
                s.wz += w * z;
                s.wxz += w * x * z;
                s.wzz += w * z * z;
            }
            (a, t, _) = linear_amp_tilt(&s, p);
            for (i, h) in lv.iter().enumerate() {
                let u = (h.level_dbuv - base[i] - a - t * f64::from(h.n).log10()) / h.sigma_db;
                wts[i] = if u.abs() <= params.huber_k {
                    1.0
                } else {
                    params.huber_k / u.abs()
                };
            }
        }
        let shape = Shape {
            amplitude_dbuv: a,
            tilt_db_per_decade: t,
            duty: d,
            ramp_ratio: r,
        };
        objective(lv, &[], &shape, params).unwrap()
    }

    #[test]
    fn corner_above_the_last_harmonic_gives_an_upper_bound() {
        // source: METHODS.md §5 envelope: with τr = 0.05 % of T the edge corner sits at
        // n = 1/(π·0.0005) = 637, far above the harmonics 1-40: the data bound τr from above only
        let lv = levels(1..=40, 0.3, 0.0005, 0.0, 60.0);
        let fit = fit_trapezoid(&lv, &[], &FitParams::default()).unwrap();
        assert_eq!(fit.ramp_status, Status::UpperBound, "{fit:?}");
        assert!(fit.ramp_ci.0.is_none());
        let hi = fit.ramp_ci.1.unwrap();
        assert!(hi > 0.0005 && hi < 0.02, "{hi}");
        let fp = fingerprint(
            &FamilyLevels {
                fundamental_hz: 100e3,
                harmonics: &lv,
                absent: &[],
                envelope: None,
                rbw_hz: Some(9e3),
                conducted: true,
            },
            &FitParams::default(),
        )
        .unwrap();
        assert_eq!(fp.edge_time_s, None);
        assert_eq!(fp.edge_time_status, Status::UpperBound);
        assert!(fp.edge_time_ci_s.0.is_none() && fp.edge_time_ci_s.1.is_some());
        assert!(fp.notes.iter().any(|n| n.contains("upper bound")));
    }

    #[test]
    fn odd_harmonics_alone_alias_a_half_duty_with_a_quarter() {
        // source: METHODS.md §5, a 50 % duty has only odd harmonics; derived: for odd n,
        // |sin(nπ/4)| = √½ for every n, so D = ¼ gives the odd harmonics of D = ½ 3 dB lower
        let lv = levels(1..=80, 0.5, 0.004, 0.0, 50.0);
        assert!(lv.iter().all(|h| h.n % 2 == 1));
        let fit = fit_trapezoid(&lv, &[], &FitParams::default()).unwrap();
        assert!(fit.duty > 0.497, "{fit:?}");
        assert_eq!(fit.duty_ci.1, Some(0.5));
        assert!(
            fit.duty_aliases.iter().any(|a| (a - 0.25).abs() < 0.002),
            "{:?}",
            fit.duty_aliases
        );
        assert!(
            fit.duty_ci.0.unwrap() <= 0.25,
            "the interval covers the alias"
        );
    }

    #[test]
    fn bad_input_is_an_error_not_a_panic() {
        let mut lv = levels(1..=10, 0.3, 0.01, 0.0, -1e9);
        assert!(matches!(
            fit_trapezoid(&lv[..4], &[], &FitParams::default()),
            Err(FingerprintError::TooFewHarmonics { found: 4, .. })
        ));
        lv[2].level_dbuv = f64::NAN;
        assert!(matches!(
            fit_trapezoid(&lv, &[], &FitParams::default()),
            Err(FingerprintError::BadHarmonic { n: 3, .. })
        ));
        let bad = FitParams {
            coverage: 1.5,
            ..FitParams::default()
        };
        assert!(fit_trapezoid(&lv, &[], &bad).is_err());
    }

    #[test]
    fn selected_mean_is_the_truncated_normal_mean() {
        // source: derived, E[y | y > L] = L + σ·φ(0)/(1 − Φ(0)) = L + σ·√(2/π) = L + 0.7979·σ
        let (m, slope) = selected_mean_db(40.0, 2.0, 40.0);
        assert!((m - (40.0 + 2.0 * 0.797_884_6)).abs() < 1e-6, "{m}");
        // d/dL = 1 − λ(λ − α) at α = 0: 1 − 2/π (derived)
        assert!((slope - (1.0 - 2.0 / PI)).abs() < 1e-6, "{slope}");
        // a threshold far under the level selects nothing
        let (m, slope) = selected_mean_db(40.0, 1.0, 0.0);
        assert!((m - 40.0).abs() < 1e-9 && (slope - 1.0).abs() < 1e-9);
        // far above: the mean sits just over the threshold (λ ≈ α + 1/α)
        let (m, _) = selected_mean_db(0.0, 1.0, 30.0);
        assert!((m - 30.0 - 1.0 / 30.0).abs() < 1e-3, "{m}");
    }

    #[test]
    fn censored_term_is_the_normal_log_likelihood_with_its_gradient() {
        // source: derived, −2·ln Φ(0) = 2·ln 2 when the model level sits on the bound
        let (e, _) = censored_root(20.0, 20.0, 1.5);
        assert!((e * e - 2.0 * 2f64.ln()).abs() < 1e-9);
        for (l, u) in [(18.0, 20.0), (25.0, 20.0), (80.0, 20.0), (0.0, 20.0)] {
            let h = 1e-6;
            let fd = (censored_root(l + h, u, 1.5).0 - censored_root(l - h, u, 1.5).0) / (2.0 * h);
            let (_, g) = censored_root(l, u, 1.5);
            assert!((fd - g).abs() < 1e-4 * (1.0 + g.abs()), "{l}: {fd} vs {g}");
        }
    }

    #[test]
    fn absent_even_harmonics_pin_a_half_duty() {
        // source: METHODS.md §5: a 50 % duty has no even harmonics. Odd harmonics 1-39 seen,
        // the even ones absent under a threshold 40 dB below harmonic 1
        let lv = levels((1..=39).step_by(2), 0.5, 0.002, 0.0, -1e9);
        let top = lv[0].level_dbuv;
        let absent: Vec<AbsentHarmonic> = (2..=40)
            .step_by(2)
            .map(|n| AbsentHarmonic {
                n,
                below_dbuv: top - 40.0,
                sigma_db: 1.5,
            })
            .collect();
        let fit = fit_trapezoid(&lv, &absent, &FitParams::default()).unwrap();
        assert!(fit.duty > 0.495, "{fit:?}");
        assert!(fit.duty_ci.0.unwrap() > 0.49, "{:?}", fit.duty_ci);
    }

    #[test]
    fn noise_sigma_falls_with_the_signal_to_noise_ratio() {
        // source: derived, 8.686·10^(−20/20)/√2 = 0.614 dB at 20 dB, with 0.5 dB repeatability
        assert!((level_sigma_db(20.0) - 0.5f64.hypot(0.6142)).abs() < 1e-3);
        assert!((level_sigma_db(80.0) - 0.5).abs() < 1e-3);
        assert_eq!(level_sigma_db(f64::NAN), 6.0f64.min(0.5f64.hypot(6.142)));
        // source: derived, 20·log10(1 − 0.3175·10^(−20/20)) = −0.2803 dB at 20 dB over the floor
        assert!((noise_corrected_dbuv(50.0, 20.0) - (50.0 - 0.2803)).abs() < 1e-3);
    }

    #[test]
    fn mode_rule_of_thumb_follows_frequency_and_tilt() {
        // source: METHODS.md §9: below ~5 MHz mostly DM, above mostly CM
        let low = levels(1..=20, 0.3, 0.002, 0.0, -1e9);
        let fit = fit_trapezoid(&low, &[], &FitParams::default()).unwrap();
        let s = mode_score(&low, Some(&fit), 100e3); // 100 kHz-2 MHz
        assert!(s.dm_likelihood > 0.9, "{s:?}");
        assert_eq!(s.verdict, "mostly differential mode");
        let high = levels(1..=8, 0.3, 0.002, 0.0, -1e9);
        let fit = fit_trapezoid(&high, &[], &FitParams::default()).unwrap();
        let s = mode_score(&high, Some(&fit), 8e6); // 8-64 MHz
        assert!(s.dm_likelihood < 0.35, "{s:?}");
        assert_eq!(s.basis, "rule of thumb");
        // a coupling rising at +20 dB/decade (a capacitive path) is common-mode-like:
        // 1-20 MHz harmonics of a 1 MHz source with and without it
        let flat = levels(1..=20, 0.3, 0.002, 0.0, -1e9);
        let rising = levels(1..=20, 0.3, 0.002, 20.0, -1e9);
        let score = |lv: &[HarmonicLevel]| {
            let fit = fit_trapezoid(lv, &[], &FitParams::default()).unwrap();
            mode_score(lv, Some(&fit), 1e6)
        };
        let (a, b) = (score(&flat), score(&rising));
        assert!(b.dm_likelihood < a.dm_likelihood - 0.1, "{a:?} {b:?}");
        assert!(b.reasons.iter().any(|r| r.contains("capacitive")));
    }
}
