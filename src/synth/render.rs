//! Renders a [`Scene`] as the trace a swept receiver with a Gaussian resolution filter shows.
//!
//! # Model
//! - **Display grid.** N points from start to stop inclusive (linear or log spacing). Each
//!   point's bucket spans halfway to its neighbours; the end buckets are symmetric about their
//!   point. Inside a bucket of width w the receiver is sampled at n = max(1, ⌈w / (B6/8)⌉)
//!   evenly spaced sub-sample frequencies; a spacing ≤ B6/8 keeps every line within B6/16 of a
//!   sub-sample, a Gaussian loss of at most 8.686·4·ln2·(1/16)² = 0.094 dB. A bucket with
//!   n = 1, and every bucket of the sample detector, is sampled at the display point itself.
//! - **Filter.** |H(Δf)| = exp(−a·Δf²), a = 4·ln2/B6², −6 dB at Δf = ±B6/2. Impulse bandwidth
//!   B_imp = ∫|H| df = √(π/a) = 1.0645·B6; noise bandwidth B_noise = ∫|H|² df = √(π/(2a)) =
//!   0.7527·B6 (both derived from the Gaussian integral).
//! - **Calibration.** The receiver is rms-calibrated: a CW of rms X µV reads X µV. All
//!   arithmetic is in linear µV (rms); output is 20·log10(envelope / 1 µV) dBµV.
//! - **Envelope.** At each sub-sample the IF envelope is |Σ_g A_g·e^{jθ_g} + σ·z|: A_g the
//!   coherent amplitude of source group g (a carrier, or all harmonics of one periodic
//!   source), θ_g an independent uniform phase per group and sub-sample, σ² the incoherent
//!   (noise-like) power (receiver floor, humps, spread-spectrum harmonics) and z unit complex
//!   Gaussian noise (E|z|² = 1) correlated along the sweep.
//! - **Periodic sources.** Harmonics of one switching converter or clock add coherently
//!   within the RBW: A(f) = Σ_k a_k·|H(f − f_k)| over the lines within ±2.5·B6, the
//!   worst-case in-phase sum, an upper bound of the peak reading. Combs with f0 ≥ B6/2 are
//!   listed as lines and summed at every sub-sample. Finer combs are summed on a grid of
//!   spacing B6/16 (each line deposited onto its two nearest nodes, then convolved with |H|)
//!   and interpolated; above 20 million harmonics the Poisson form a(f)·B_imp/f0 replaces the
//!   sum. Spread-spectrum harmonics are incoherent power (see `spread_mass`).
//! - **Detectors.** peak = max over the bucket's sub-samples; average = mean of the envelope;
//!   rms = √(mean of envelope²); sample = the sub-sample at the display point.
//!
//! Costs are O(sub-samples + harmonics + span/B6) per sweep; nothing loops over all lines per
//! point.

use super::SceneError;
use super::scene::{Periodic, Scene, Spacing};
use crate::scan::{Detector, Scan, ScanMeta};
use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;
use rand_distr::{Distribution, Normal, StandardNormal};
use statrs::function::erf::erf;
use std::f64::consts::{LN_2, PI, TAU};

/// Coherent lines are summed within ±2.5·B6 of a sub-sample; |H| there is 2^-25 (−150 dB).
const LINE_WINDOW_B6: f64 = 2.5;
/// Sources are generated up to 3·B6 beyond the sub-sample range.
const MARGIN_B6: f64 = 3.0;
/// Largest number of sub-samples in one sweep.
const MAX_SUBSAMPLES: usize = 30_000_000;
/// Largest correlated-noise grid; beyond it noise samples are drawn independently.
const MAX_NOISE_NODES: usize = 4_000_000;
/// Largest evaluation grid for fine combs and spread-spectrum sources.
const MAX_EVAL_NODES: usize = 4_000_000;
/// Largest number of lines (harmonics or spread sub-lines) one source may generate.
const MAX_LINES: usize = 20_000_000;
/// Envelope floor, µV (−240 dBµV): keeps 20·log10 finite for a silent sub-sample.
const TINY_UV: f64 = 1e-12;

/// sinc(x) = sin(x)/x, with sinc(0) = 1.
fn sinc(x: f64) -> f64 {
    if x.abs() < 1e-9 { 1.0 } else { x.sin() / x }
}

/// Peak amplitude (volts) of harmonic `n` of a periodic trapezoid pulse train.
///
/// # Formula
/// ```text
/// c_n = 2·A·(τ/T)·|sinc(n·π·τ/T)|·|sinc(n·π·τr/T)|,  sinc(x) = sin(x)/x
/// ```
/// with A = `amplitude_v` (V), T = `period_s` (s), τ = `duty`·T the pulse width between the
/// 50 % points, and τr = `ramp_s` (s) the full linear rise (= fall) time. A 10-90 % edge time
/// t corresponds to τr = t/0.8. For n = 0 the mean value A·τ/T is returned. Returns NaN when
/// the period is not positive.
///
/// # Source
/// Paul's trapezoid spectrum (Introduction to Electromagnetic Compatibility), one-sided
/// Fourier-series magnitude.
pub fn trapezoid_harmonic_peak(
    n: u32,
    amplitude_v: f64,
    period_s: f64,
    duty: f64,
    ramp_s: f64,
) -> f64 {
    if n == 0 {
        return if period_s > 0.0 {
            amplitude_v * duty
        } else {
            f64::NAN
        };
    }
    trapezoid_at(f64::from(n), amplitude_v, period_s, duty, ramp_s)
}

/// [`trapezoid_harmonic_peak`] at a continuous harmonic number ν (same formula and units).
fn trapezoid_at(nu: f64, amplitude_v: f64, period_s: f64, duty: f64, ramp_s: f64) -> f64 {
    if period_s.is_nan() || period_s <= 0.0 {
        return f64::NAN;
    }
    2.0 * amplitude_v * duty * sinc(PI * nu * duty).abs() * sinc(PI * nu * ramp_s / period_s).abs()
}

/// The Gaussian resolution filter.
#[derive(Debug, Clone, Copy)]
struct Rbw {
    /// 6 dB bandwidth, Hz.
    b6: f64,
    /// a = 4·ln2/B6² (1/Hz²), so that |H(Δf)| = exp(−a·Δf²).
    a: f64,
    /// Impulse bandwidth √(π/a) = 1.0645·B6, Hz.
    b_imp: f64,
}

impl Rbw {
    /// Filter of 6 dB bandwidth `b6` Hz: a = 4·ln2/B6² (derived: exp(−a·(B6/2)²) = 1/2).
    fn new(b6: f64) -> Rbw {
        let a = 4.0 * LN_2 / (b6 * b6);
        Rbw {
            b6,
            a,
            b_imp: (PI / a).sqrt(),
        }
    }

    /// |H(Δf)| = exp(−a·Δf²) (voltage response, 1 at the centre).
    fn h(&self, df: f64) -> f64 {
        (-self.a * df * df).exp()
    }
}

/// A uniform frequency grid x_j = lo + j·h, j = 0..n.
#[derive(Debug, Clone, Copy)]
struct Grid {
    lo: f64,
    h: f64,
    n: usize,
}

impl Grid {
    fn x(&self, j: usize) -> f64 {
        self.lo + j as f64 * self.h
    }

    /// Index i and weight t of the linear interpolation x = (1−t)·x_i + t·x_{i+1}.
    fn locate(&self, f: f64) -> (usize, f64) {
        let p = ((f - self.lo) / self.h).max(0.0);
        let i = (p.floor() as usize).min(self.n.saturating_sub(2));
        (i, (p - i as f64).clamp(0.0, 1.0))
    }

    /// Linear interpolation of node values `v` at `f`.
    fn interp(&self, v: &[f64], f: f64) -> f64 {
        let (i, t) = self.locate(f);
        match (v.get(i), v.get(i + 1)) {
            (Some(a), Some(b)) => (1.0 - t) * a + t * b,
            (Some(a), None) => *a,
            _ => 0.0,
        }
    }

    /// Spreads a point mass at `f` onto its two neighbouring nodes (linear weights).
    fn deposit(&self, v: &mut [f64], f: f64, mass: f64) {
        let p = (f - self.lo) / self.h;
        if p < 0.0 || p > (self.n - 1) as f64 {
            return;
        }
        let i = (p.floor() as usize).min(self.n.saturating_sub(2));
        let t = p - i as f64;
        v[i] += (1.0 - t) * mass;
        if let Some(x) = v.get_mut(i + 1) {
            *x += t * mass;
        }
    }
}

/// Harmonics of one periodic source listed as lines (sorted by frequency, rms µV).
#[derive(Debug, Clone)]
struct LineGroup {
    freq_hz: Vec<f64>,
    amp_uv: Vec<f64>,
}

/// A carrier: frequency, rms µV, AM depth, fade standard deviation in dB.
#[derive(Debug, Clone)]
struct CarrierPlan {
    freq_hz: f64,
    amp_uv: f64,
    am_depth: f64,
    fade_db: f64,
}

/// A hump: ln of its ends and its peak power in µV².
#[derive(Debug, Clone)]
struct HumpPlan {
    ln_lo: f64,
    ln_hi: f64,
    power: f64,
}

/// How the receiver noise is generated.
#[derive(Debug, Clone)]
enum NoisePlan {
    /// No incoherent power anywhere: no noise drawn.
    Silent,
    /// White complex Gaussian noise on `grid` (extended by `taps.len()-1` nodes) filtered by
    /// `taps`; `rho1` is the correlation of neighbouring nodes.
    Correlated {
        grid: Grid,
        taps: Vec<f64>,
        rho1: f64,
    },
    /// One independent unit complex Gaussian per sub-sample.
    Independent,
}

/// Everything of a scene that does not change from sweep to sweep.
#[derive(Debug, Clone)]
struct Plan {
    freqs: Vec<f64>,
    detector: Detector,
    rbw: Rbw,
    floor: Option<(f64, f64, f64)>,
    humps: Vec<HumpPlan>,
    lines: Vec<LineGroup>,
    carriers: Vec<CarrierPlan>,
    eval: Grid,
    combs: Vec<Vec<f64>>,
    incoherent: Option<Vec<f64>>,
    noise: NoisePlan,
    seed: u64,
}

/// Bucket edges of display point `i`: halfway to the neighbours, end buckets symmetric, the
/// lower edge kept at or above half the first frequency.
fn bucket(freqs: &[f64], i: usize) -> (f64, f64) {
    let n = freqs.len();
    let f = freqs[i];
    let lo = if i > 0 {
        0.5 * (freqs[i - 1] + f)
    } else {
        f - 0.5 * (freqs[1] - f)
    };
    let hi = if i + 1 < n {
        0.5 * (f + freqs[i + 1])
    } else {
        f + 0.5 * (f - freqs[n - 2])
    };
    (lo.max(0.5 * freqs[0]), hi)
}

/// Number of sub-samples of bucket [lo, hi]: n = max(1, ⌈(hi−lo)/(B6/8)⌉); 1 for the sample
/// detector.
fn sub_count(lo: f64, hi: f64, b6: f64, detector: Detector) -> usize {
    if detector == Detector::Sample {
        return 1;
    }
    let n = ((hi - lo) / (b6 / 8.0)).ceil();
    if n.is_finite() && n >= 1.0 {
        n as usize
    } else {
        1
    }
}

/// Sub-sample `j` of `n` in bucket [lo, hi] of point `f`: the point itself when n = 1, else
/// lo + (j + ½)·(hi − lo)/n.
fn sub_freq(lo: f64, hi: f64, f: f64, j: usize, n: usize) -> f64 {
    if n == 1 {
        f
    } else {
        lo + (j as f64 + 0.5) * (hi - lo) / n as f64
    }
}

/// Display frequencies: start + i·(stop − start)/(N − 1), or start·(stop/start)^(i/(N − 1))
/// for log spacing; the last point is exactly stop.
fn display_grid(start: f64, stop: f64, points: usize, spacing: Spacing) -> Vec<f64> {
    let last = (points - 1) as f64;
    let mut v: Vec<f64> = (0..points)
        .map(|i| {
            let x = i as f64 / last;
            match spacing {
                Spacing::Linear => start + x * (stop - start),
                Spacing::Log => start * (x * (stop / start).ln()).exp(),
            }
        })
        .collect();
    if let Some(l) = v.last_mut() {
        *l = stop;
    }
    v
}

fn too_large(file: &str, field: &str, value: impl std::fmt::Display, expected: &str) -> SceneError {
    SceneError::BadField {
        file: file.to_string(),
        field: field.to_string(),
        value: value.to_string(),
        expected: expected.to_string(),
    }
}

/// Convolves node values with a symmetric kernel `k` (k[0] centre, k[m] at ±m nodes).
fn convolve(v: &[f64], k: &[f64]) -> Vec<f64> {
    let n = v.len();
    let m = k.len().saturating_sub(1);
    let mut out = vec![0.0; n];
    for (j, &x) in v.iter().enumerate() {
        if x == 0.0 {
            continue;
        }
        let a = j.saturating_sub(m);
        let b = (j + m + 1).min(n);
        for (i, o) in out.iter_mut().enumerate().take(b).skip(a) {
            *o += x * k[i.abs_diff(j)];
        }
    }
    out
}

/// One periodic source prepared for rendering.
struct PeriodicSource<'a> {
    p: &'a Periodic,
    field: String,
    duty: f64,
    /// Full ramp τr = t_10-90/0.8, s.
    ramp_s: f64,
    /// rms µV of harmonic 1.
    u1: f64,
    /// c_1 for A = 1 V.
    c1: f64,
}

impl PeriodicSource<'_> {
    /// Rms amplitude (µV) of harmonic ν: a(ν) = U1·(c_ν/c_1)·ν^(coupling/20), i.e. the
    /// trapezoid spectrum scaled so harmonic 1 reads `fundamental_dbuv`, tilted by
    /// coupling_db_per_decade·log10(ν) dB.
    fn amp(&self, nu: f64) -> f64 {
        let t = 1.0 / self.p.f0_hz;
        let c = trapezoid_at(nu, 1.0, t, self.duty, self.ramp_s);
        self.u1 * c / self.c1 * 10f64.powf(self.p.coupling_db_per_decade * nu.log10() / 20.0)
    }

    /// Mean line amplitude around harmonic ν, for the Poisson form of a very fine comb: the
    /// |sin(π·ν·duty)| factor of a(ν) (c_n = (2A/(πn))·|sin(πn·duty)|·|sinc(πn·τr/T)|) is
    /// replaced by its average 2/π once ν is past the first lobe (ν·min(duty, 1−duty) > ½).
    fn mean_amp(&self, nu: f64) -> f64 {
        let d = self.duty.min(1.0 - self.duty);
        if nu * d <= 0.5 {
            return self.amp(nu);
        }
        let t = 1.0 / self.p.f0_hz;
        let c = (2.0 / (PI * nu)) * (2.0 / PI) * sinc(PI * nu * self.ramp_s / t).abs();
        self.u1 * c / self.c1 * 10f64.powf(self.p.coupling_db_per_decade * nu.log10() / 20.0)
    }
}

impl Plan {
    #[allow(clippy::too_many_lines)]
    fn new(scene: &Scene) -> Result<Plan, SceneError> {
        scene.validate()?;
        let file = scene.file.as_str();
        let s = &scene.scan;
        let rbw = Rbw::new(s.rbw_hz);
        let freqs = display_grid(s.start_hz, s.stop_hz, s.points, s.spacing);
        let mut total = 0usize;
        for i in 0..freqs.len() {
            let (lo, hi) = bucket(&freqs, i);
            total = total.saturating_add(sub_count(lo, hi, rbw.b6, s.detector));
        }
        if total > MAX_SUBSAMPLES {
            return Err(too_large(
                file,
                "scan.rbw_hz",
                s.rbw_hz,
                &format!(
                    "a bandwidth that needs at most {MAX_SUBSAMPLES} internal samples (span/(rbw/8) + points = {total}); raise rbw_hz or narrow the span"
                ),
            ));
        }
        let sub_lo = bucket(&freqs, 0).0;
        let sub_hi = bucket(&freqs, freqs.len() - 1).1;
        let margin = MARGIN_B6 * rbw.b6;

        // Evaluation grid for fine combs and spread spectrum: spacing B6/16, 3·B6 beyond the
        // sub-samples on both sides.
        let eh = rbw.b6 / 16.0;
        let en = ((sub_hi - sub_lo + 2.0 * margin) / eh).ceil() + 1.0;
        let eval = Grid {
            lo: sub_lo - margin,
            h: eh,
            n: if en.is_finite() {
                en.max(2.0) as usize
            } else {
                usize::MAX
            },
        };

        let mut lines = Vec::new();
        let mut combs = Vec::new();
        let mut inc_mass: Option<Vec<f64>> = None;
        let periodic = scene
            .switching
            .iter()
            .enumerate()
            .map(|(i, p)| (format!("switching[{i}]"), p, false))
            .chain(
                scene
                    .clock
                    .iter()
                    .enumerate()
                    .map(|(i, p)| (format!("clock[{i}]"), p, true)),
            );
        for (field, p, is_clock) in periodic {
            let duty = Scene::duty_of(p, is_clock).unwrap_or(0.5);
            let ramp_s = p.edge_time_s / 0.8;
            let c1 = trapezoid_harmonic_peak(1, 1.0, 1.0 / p.f0_hz, duty, ramp_s);
            if !(c1.is_finite() && c1 > 0.0) {
                return Err(too_large(
                    file,
                    &format!("{field}.edge_time_s"),
                    p.edge_time_s,
                    "an edge time that leaves harmonic 1 non-zero",
                ));
            }
            let src = PeriodicSource {
                p,
                field,
                duty,
                ramp_s,
                u1: 10f64.powf(p.fundamental_dbuv / 20.0),
                c1,
            };
            let fine = p.f0_hz < rbw.b6 / 2.0;
            if (p.spread_pct > 0.0 || fine) && eval.n > MAX_EVAL_NODES {
                return Err(too_large(
                    file,
                    "scan.rbw_hz",
                    s.rbw_hz,
                    &format!(
                        "a bandwidth of at least span/{} for a spread-spectrum source or a comb finer than rbw/2 ({})",
                        MAX_EVAL_NODES / 16,
                        src.field
                    ),
                ));
            }
            if p.spread_pct > 0.0 {
                let mass = inc_mass.get_or_insert_with(|| vec![0.0; eval.n]);
                spread_mass(&src, &rbw, &eval, sub_lo, sub_hi, mass, file)?;
            } else if fine {
                combs.push(fine_comb(&src, &rbw, &eval, sub_hi)?);
            } else {
                lines.push(listed_lines(&src, &rbw, sub_lo, sub_hi, file)?);
            }
        }
        // Incoherent masses (µV² per node) → power in the RBW: P(x_i) = Σ_j m_j·|H(x_i − x_j)|².
        let incoherent = inc_mass.map(|m| {
            let kmax = (LINE_WINDOW_B6 * rbw.b6 / eh).ceil() as usize;
            let k2: Vec<f64> = (0..=kmax).map(|k| rbw.h(k as f64 * eh).powi(2)).collect();
            convolve(&m, &k2)
        });

        let carriers = scene
            .carrier
            .iter()
            .map(|c| CarrierPlan {
                freq_hz: c.freq_hz,
                amp_uv: 10f64.powf(c.level_dbuv / 20.0),
                am_depth: c.am_depth,
                fade_db: c.fade_db,
            })
            .collect();
        let humps: Vec<HumpPlan> = scene
            .hump
            .iter()
            .map(|h| HumpPlan {
                ln_lo: h.start_hz.ln(),
                ln_hi: h.stop_hz.ln(),
                power: 10f64.powf(h.level_dbuv / 10.0),
            })
            .collect();
        let floor = scene.floor.as_ref().map(|f| {
            (
                10f64.powf(f.level_dbuv / 10.0),
                f.slope_db_per_decade,
                s.start_hz,
            )
        });

        let noise = if floor.is_none() && humps.is_empty() && incoherent.is_none() {
            NoisePlan::Silent
        } else {
            noise_plan(&rbw, s.sweep_time_factor, sub_lo, sub_hi)
        };
        Ok(Plan {
            freqs,
            detector: s.detector,
            rbw,
            floor,
            humps,
            lines,
            carriers,
            eval,
            combs,
            incoherent,
            noise,
            seed: s.seed,
        })
    }
}

/// Lines of a comb with f0 ≥ B6/2: harmonics n·f0 from 3·B6 below the first sub-sample up to
/// 3·B6 above the last (and at most `max_harmonic`), rms µV each.
fn listed_lines(
    src: &PeriodicSource,
    rbw: &Rbw,
    sub_lo: f64,
    sub_hi: f64,
    file: &str,
) -> Result<LineGroup, SceneError> {
    let f0 = src.p.f0_hz;
    let margin = MARGIN_B6 * rbw.b6;
    let (n_lo, n_hi) = harmonic_range(src.p, (sub_lo - margin) / f0, (sub_hi + margin) / f0);
    let count = if n_hi >= n_lo { n_hi - n_lo + 1.0 } else { 0.0 };
    if count > MAX_LINES as f64 {
        return Err(too_many(src, file, count));
    }
    let mut g = LineGroup {
        freq_hz: Vec::with_capacity(count as usize),
        amp_uv: Vec::with_capacity(count as usize),
    };
    let mut n = n_lo;
    while n <= n_hi {
        g.freq_hz.push(n * f0);
        g.amp_uv.push(src.amp(n));
        n += 1.0;
    }
    Ok(g)
}

/// Harmonic numbers n with n_a ≤ n ≤ n_b, n ≥ 1 and n ≤ max_harmonic (when set).
fn harmonic_range(p: &Periodic, n_a: f64, n_b: f64) -> (f64, f64) {
    let lo = n_a.ceil().max(1.0);
    let mut hi = n_b.floor();
    if p.max_harmonic > 0 {
        hi = hi.min(f64::from(p.max_harmonic));
    }
    (lo, hi)
}

fn too_many(src: &PeriodicSource, file: &str, count: f64) -> SceneError {
    too_large(
        file,
        &format!("{}.f0_hz", src.field),
        src.p.f0_hz,
        &format!(
            "at most {MAX_LINES} lines in the scan (found {count:.0}); set max_harmonic, raise f0_hz or narrow the span"
        ),
    )
}

/// Coherent amplitude (µV) on the evaluation grid of a comb finer than B6/2.
///
/// Each harmonic's rms amplitude a_n is deposited at n·f0 (linear weights onto the two
/// nearest nodes) and the result is convolved with |H|: A(x) = Σ_n a_n·|H(x − n·f0)|, the
/// worst-case in-phase sum (an upper bound of the peak reading). With more than
/// `MAX_LINES` harmonics the Poisson-summation form is used instead:
/// ```text
/// A(x) ≈ ā(x/f0)·(B_imp/f0)·½·[erf(√a·(x_hi − x)) − erf(√a·(x_lo − x))]
/// ```
/// with ā the mean line amplitude near harmonic x/f0 and x_lo, x_hi the comb's ends
/// (half a spacing beyond the first and last harmonic); the ripple of the exact sum about it
/// is of order exp(−π·(B_imp/f0)²).
fn fine_comb(
    src: &PeriodicSource,
    rbw: &Rbw,
    eval: &Grid,
    sub_hi: f64,
) -> Result<Vec<f64>, SceneError> {
    let f0 = src.p.f0_hz;
    let margin = MARGIN_B6 * rbw.b6;
    let x_first = eval.lo;
    let (n_lo, n_hi) = harmonic_range(src.p, x_first / f0, (sub_hi + margin) / f0);
    let count = if n_hi >= n_lo { n_hi - n_lo + 1.0 } else { 0.0 };
    if count <= MAX_LINES as f64 {
        let mut mass = vec![0.0; eval.n];
        let mut n = n_lo;
        while n <= n_hi {
            eval.deposit(&mut mass, n * f0, src.amp(n));
            n += 1.0;
        }
        let kmax = (LINE_WINDOW_B6 * rbw.b6 / eval.h).ceil() as usize;
        let k1: Vec<f64> = (0..=kmax).map(|k| rbw.h(k as f64 * eval.h)).collect();
        return Ok(convolve(&mass, &k1));
    }
    let (_, n_top) = harmonic_range(src.p, 1.0, (sub_hi + margin) / f0);
    Ok(poisson_comb(src, rbw, eval, n_top))
}

/// Poisson-summation form of a fine comb's coherent amplitude (µV) on the evaluation grid:
/// ```text
/// A(x) ≈ ā(x/f0)·(B_imp/f0)·½·[erf(√a·(x_hi − x)) − erf(√a·(x_lo − x))],
/// ```
/// x_lo = f0/2, x_hi = (n_top + ½)·f0, ā the mean line amplitude (see
/// `PeriodicSource::mean_amp`). Source: derived, Σ_n g(n·f0) ≈ (1/f0)·∫ g(ν) dν for g varying
/// slowly on the scale f0 (Poisson summation), with g = ā·|H|.
fn poisson_comb(src: &PeriodicSource, rbw: &Rbw, eval: &Grid, n_top: f64) -> Vec<f64> {
    let f0 = src.p.f0_hz;
    let (x_lo, x_hi) = (0.5 * f0, (n_top + 0.5) * f0);
    let sa = rbw.a.sqrt();
    (0..eval.n)
        .map(|j| {
            let x = eval.x(j);
            let edge = 0.5 * (erf(sa * (x_hi - x)) - erf(sa * (x_lo - x)));
            src.mean_amp((x / f0).max(1.0)) * rbw.b_imp / f0 * edge
        })
        .collect()
}

/// Adds the incoherent power masses (µV² per evaluation node) of a spread-spectrum source.
///
/// Harmonic n (power P_n = a_n², µV²) is spread uniformly over W_n = n·f0·spread_pct/100
/// centred on n·f0. With a modulation rate below B6/2, or for a comb finer than B6/2, it is a
/// continuous density P_n/W_n: each node receives the integral of the density over its cell
/// (constant cells by a difference array, the two partial end cells directly), so that after
/// the convolution with |H|² the power in the RBW is
/// ```text
/// P_in(f) = (P_n/W_n)·√(π/(2a))/2·[erf(√(2a)(f−c+W/2)) − erf(√(2a)(f−c−W/2))].
/// ```
/// With a faster rate it is m = max(1, round(W_n/rate)) sub-lines of power P_n/m at
/// spacing W_n/m, power-summed through |H|². For W_n ≫ RBW the reading drops by about
/// 10·log10(W_n/B_noise) (common practice rule).
fn spread_mass(
    src: &PeriodicSource,
    rbw: &Rbw,
    eval: &Grid,
    sub_lo: f64,
    sub_hi: f64,
    mass: &mut [f64],
    file: &str,
) -> Result<(), SceneError> {
    let p = src.p;
    let f0 = p.f0_hz;
    let sp = p.spread_pct / 100.0;
    let margin = MARGIN_B6 * rbw.b6;
    let (n_lo, n_hi) = harmonic_range(
        p,
        (sub_lo - margin) / (f0 * (1.0 + sp / 2.0)),
        (sub_hi + margin) / (f0 * (1.0 - sp / 2.0)),
    );
    let count = if n_hi >= n_lo { n_hi - n_lo + 1.0 } else { 0.0 };
    if count > MAX_LINES as f64 {
        return Err(too_many(src, file, count));
    }
    let continuous = p.spread_rate_hz < rbw.b6 / 2.0 || f0 < rbw.b6 / 2.0;
    if !continuous {
        // Sub-line count: Σ_n round(n·f0·sp/rate) ≈ f0·sp/rate·(n_hi² − n_lo²)/2 + count.
        let sublines = f0 * sp / p.spread_rate_hz * (n_hi * n_hi - n_lo * n_lo) / 2.0 + count;
        if sublines > MAX_LINES as f64 {
            return Err(too_large(
                file,
                &format!("{}.spread_rate_hz", src.field),
                p.spread_rate_hz,
                &format!(
                    "a rate giving at most {MAX_LINES} spread sub-lines in the scan (found about {sublines:.0})"
                ),
            ));
        }
    }
    // Running density per node (difference array of constant cells).
    let mut dens = vec![0.0; eval.n + 1];
    let h = eval.h;
    let mut n = n_lo;
    while n <= n_hi {
        let c = n * f0;
        let w = c * sp;
        let power = src.amp(n).powi(2);
        n += 1.0;
        if !continuous {
            let m = (w / p.spread_rate_hz).round().max(1.0);
            let mut j = 0.0;
            while j < m {
                eval.deposit(mass, c - w / 2.0 + (j + 0.5) * w / m, power / m);
                j += 1.0;
            }
            continue;
        }
        let d = power / w;
        let (b0, b1) = (c - w / 2.0, c + w / 2.0);
        // Cell j covers [x_j − h/2, x_j + h/2]; u = position in cells.
        let u0 = (b0 - eval.lo) / h + 0.5;
        let u1 = (b1 - eval.lo) / h + 0.5;
        if u1 <= 0.0 || u0 >= eval.n as f64 {
            continue;
        }
        let (u0, u1) = (u0.max(0.0), u1.min(eval.n as f64));
        let (j0, j1) = (u0.floor() as usize, u1.floor() as usize);
        if j0 == j1 {
            if let Some(x) = mass.get_mut(j0) {
                *x += d * (u1 - u0) * h;
            }
            continue;
        }
        if let Some(x) = mass.get_mut(j0) {
            *x += d * (j0 as f64 + 1.0 - u0) * h;
        }
        if let Some(x) = mass.get_mut(j1) {
            *x += d * (u1 - j1 as f64) * h;
        }
        // Full cells j0+1 .. j1-1.
        if j1 > j0 + 1 {
            dens[j0 + 1] += d * h;
            dens[j1] -= d * h;
        }
    }
    let mut run = 0.0;
    for (m, dd) in mass.iter_mut().zip(&dens) {
        run += dd;
        *m += run.max(0.0);
    }
    Ok(())
}

/// Frequency scale s of the swept envelope's correlation, ρ(Δf) = exp(−Δf²/(2·s²)), for a
/// Gaussian RBW of −6 dB width `b6_hz` swept at B6²/k Hz/s (see [`noise_plan`]).
///
/// # Formula
/// ```text
/// s = 2·√ln2·B6/(π·k)
/// ```
pub(crate) fn noise_correlation_hz(b6_hz: f64, sweep_time_factor: f64) -> f64 {
    2.0 * LN_2.sqrt() * b6_hz / (PI * sweep_time_factor)
}

/// Correlated-noise grid.
///
/// The envelope is observed while sweeping at B6²/k Hz/s (k = sweep_time_factor), so the
/// complex noise at two sub-samples Δf apart has correlation
/// ```text
/// ρ(Δf) = exp(−π²·k²·Δf²/(8·ln2·B6²)) = exp(−Δf²/(2·s²)),  s = 2·√ln2·B6/(π·k)
/// ```
/// (the Fourier transform of |H|² read as a time lag Δt = Δf·k/B6²). White complex noise on a
/// grid of spacing h = s_g/2 is filtered by a Gaussian kernel of std s_g = s/√2 (a Gaussian
/// convolved with itself has std s), truncated at ±4·s_g and normalised to unit output
/// variance. Source: derived (Gaussian filter response, constant sweep rate).
fn noise_plan(rbw: &Rbw, k: f64, sub_lo: f64, sub_hi: f64) -> NoisePlan {
    let s = noise_correlation_hz(rbw.b6, k);
    let sg = s / 2f64.sqrt();
    let h = sg / 2.0;
    let nodes = ((sub_hi - sub_lo) / h).ceil() + 2.0;
    if !nodes.is_finite() || nodes > MAX_NOISE_NODES as f64 {
        return NoisePlan::Independent;
    }
    let m = (4.0 * sg / h).ceil() as usize;
    let raw: Vec<f64> = (0..=m)
        .map(|j| (-(j as f64 * h).powi(2) / (2.0 * sg * sg)).exp())
        .collect();
    let norm = (raw[0] * raw[0] + 2.0 * raw[1..].iter().map(|x| x * x).sum::<f64>()).sqrt();
    let taps: Vec<f64> = raw.iter().map(|x| x / norm).collect();
    // Lag-1 autocorrelation of the normalised kernel: Σ_j w_j·w_{j+1} over j = −m..m−1.
    let w = |j: isize| taps.get(j.unsigned_abs()).copied().unwrap_or(0.0);
    let mi = m as isize;
    let rho1 = (-mi..mi).map(|j| w(j) * w(j + 1)).sum();
    NoisePlan::Correlated {
        grid: Grid {
            lo: sub_lo,
            h,
            n: nodes as usize,
        },
        taps,
        rho1,
    }
}

/// A unit complex Gaussian: each part N(0, ½), so E|z|² = 1.
fn unit_complex(rng: &mut ChaCha8Rng) -> (f64, f64) {
    let re: f64 = StandardNormal.sample(rng);
    let im: f64 = StandardNormal.sample(rng);
    (
        re * std::f64::consts::FRAC_1_SQRT_2,
        im * std::f64::consts::FRAC_1_SQRT_2,
    )
}

/// State of one sweep.
struct Sweep {
    rng: ChaCha8Rng,
    noise_rng: ChaCha8Rng,
    nodes: Vec<(f64, f64)>,
    cursors: Vec<usize>,
    fades: Vec<f64>,
}

impl Plan {
    /// Incoherent power (µV²) at `f`: floor σ0²·(f/start)^(slope/10) + humps + spread.
    ///
    /// A hump adds P·½·(1 − cos 2πx), x = ln(f/start)/ln(stop/start) in [0, 1] (raised cosine
    /// in log frequency, P at the log-centre).
    fn variance(&self, f: f64) -> f64 {
        let mut var = 0.0;
        if let Some((v0, slope, start)) = self.floor {
            var += if slope == 0.0 {
                v0
            } else {
                v0 * (f.max(TINY_UV) / start).powf(slope / 10.0)
            };
        }
        if !self.humps.is_empty() {
            let lf = f.max(TINY_UV).ln();
            for h in &self.humps {
                if lf > h.ln_lo && lf < h.ln_hi {
                    let x = (lf - h.ln_lo) / (h.ln_hi - h.ln_lo);
                    var += h.power * 0.5 * (1.0 - (TAU * x).cos());
                }
            }
        }
        if let Some(inc) = &self.incoherent {
            var += self.eval.interp(inc, f).max(0.0);
        }
        var
    }

    /// Unit complex noise at `f`: linear interpolation between grid nodes, renormalised to
    /// unit variance by √((1−t)² + t² + 2t(1−t)·ρ1).
    fn noise_at(&self, sw: &mut Sweep, f: f64) -> (f64, f64) {
        match &self.noise {
            NoisePlan::Silent => (0.0, 0.0),
            NoisePlan::Independent => unit_complex(&mut sw.noise_rng),
            NoisePlan::Correlated { grid, rho1, .. } => {
                let (i, t) = grid.locate(f);
                let a = sw.nodes.get(i).copied().unwrap_or((0.0, 0.0));
                let b = sw.nodes.get(i + 1).copied().unwrap_or(a);
                let norm = ((1.0 - t).powi(2) + t * t + 2.0 * t * (1.0 - t) * rho1).sqrt();
                (
                    ((1.0 - t) * a.0 + t * b.0) / norm,
                    ((1.0 - t) * a.1 + t * b.1) / norm,
                )
            }
        }
    }

    fn start_sweep(&self, index: usize) -> Sweep {
        let mut rng = ChaCha8Rng::seed_from_u64(self.seed);
        rng.set_stream(2 * index as u64 + 1);
        let mut noise_rng = ChaCha8Rng::seed_from_u64(self.seed);
        noise_rng.set_stream(2 * index as u64);
        let nodes = match &self.noise {
            NoisePlan::Correlated { grid, taps, .. } => {
                let m = taps.len() - 1;
                let white: Vec<(f64, f64)> = (0..grid.n + 2 * m)
                    .map(|_| unit_complex(&mut noise_rng))
                    .collect();
                (0..grid.n)
                    .map(|i| {
                        let mut acc = (0.0, 0.0);
                        for (j, w) in white[i..=i + 2 * m].iter().enumerate() {
                            let k = taps[j.abs_diff(m)];
                            acc.0 += k * w.0;
                            acc.1 += k * w.1;
                        }
                        acc
                    })
                    .collect()
            }
            _ => Vec::new(),
        };
        let fades = self
            .carriers
            .iter()
            .map(|c| {
                if c.fade_db > 0.0 {
                    let db = Normal::new(0.0, c.fade_db)
                        .map(|n| n.sample(&mut rng))
                        .unwrap_or(0.0);
                    10f64.powf(db / 20.0)
                } else {
                    1.0
                }
            })
            .collect();
        Sweep {
            rng,
            noise_rng,
            nodes,
            cursors: vec![0; self.lines.len()],
            fades,
        }
    }

    /// Adds a coherent amplitude with a fresh uniform phase.
    fn add_phased(rng: &mut ChaCha8Rng, acc: &mut (f64, f64), amp: f64) {
        if amp > 0.0 {
            let theta = rng.random::<f64>() * TAU;
            let (s, c) = theta.sin_cos();
            acc.0 += amp * c;
            acc.1 += amp * s;
        }
    }

    /// IF envelope (µV) at sub-sample `f`; sub-samples must come in ascending order.
    fn envelope(&self, sw: &mut Sweep, f: f64) -> f64 {
        let var = self.variance(f);
        let mut acc = if var > 0.0 {
            let z = self.noise_at(sw, f);
            let sd = var.sqrt();
            (sd * z.0, sd * z.1)
        } else {
            (0.0, 0.0)
        };
        let win = LINE_WINDOW_B6 * self.rbw.b6;
        for (g, cur) in self.lines.iter().zip(sw.cursors.iter_mut()) {
            while *cur < g.freq_hz.len() && g.freq_hz[*cur] < f - win {
                *cur += 1;
            }
            let mut amp = 0.0;
            for (fk, ak) in g.freq_hz[*cur..].iter().zip(&g.amp_uv[*cur..]) {
                if *fk > f + win {
                    break;
                }
                amp += ak * self.rbw.h(f - fk);
            }
            Self::add_phased(&mut sw.rng, &mut acc, amp);
        }
        for comb in &self.combs {
            let amp = self.eval.interp(comb, f).max(0.0);
            Self::add_phased(&mut sw.rng, &mut acc, amp);
        }
        for (c, fade) in self.carriers.iter().zip(&sw.fades) {
            let df = f - c.freq_hz;
            if df.abs() <= win {
                let am = if c.am_depth > 0.0 {
                    1.0 + c.am_depth * (2.0 * sw.rng.random::<f64>() - 1.0)
                } else {
                    1.0
                };
                Self::add_phased(&mut sw.rng, &mut acc, c.amp_uv * fade * am * self.rbw.h(df));
            }
        }
        (acc.0 * acc.0 + acc.1 * acc.1).sqrt()
    }

    /// Levels (dBµV) of sweep `index`: each bucket's sub-samples combined by the detector,
    /// 20·log10(max(envelope, 1e-12 µV)).
    fn sweep(&self, index: usize) -> Vec<f64> {
        let mut sw = self.start_sweep(index);
        let mut out = Vec::with_capacity(self.freqs.len());
        for i in 0..self.freqs.len() {
            let (lo, hi) = bucket(&self.freqs, i);
            let n = sub_count(lo, hi, self.rbw.b6, self.detector);
            let (mut peak, mut sum, mut sum2) = (0.0f64, 0.0, 0.0);
            for j in 0..n {
                let e = self.envelope(&mut sw, sub_freq(lo, hi, self.freqs[i], j, n));
                peak = peak.max(e);
                sum += e;
                sum2 += e * e;
            }
            let v = match self.detector {
                Detector::Average => sum / n as f64,
                Detector::Rms => (sum2 / n as f64).sqrt(),
                // Peak; sample has n = 1; quasi-peak is refused by validation.
                _ => peak,
            };
            out.push(20.0 * v.max(TINY_UV).log10());
        }
        out
    }
}

/// Metadata of a rendered scan; nothing random in it.
fn meta(scene: &Scene) -> ScanMeta {
    ScanMeta {
        rbw_hz: Some(scene.scan.rbw_hz),
        vbw_hz: scene.scan.vbw_hz,
        detector: Some(scene.scan.detector),
        role: scene.scan.role,
        quantity: scene.scan.quantity,
        title: scene.title.clone(),
        source: None,
        extra: vec![
            ("scene".to_string(), scene.label()),
            ("seed".to_string(), scene.scan.seed.to_string()),
        ],
    }
}

fn to_scan(scene: &Scene, freqs: &[f64], levels: Vec<f64>) -> Result<Scan, SceneError> {
    Scan::new(freqs.to_vec(), levels, meta(scene)).map_err(|e| SceneError::Render {
        file: scene.file.clone(),
        reason: e.to_string(),
    })
}

/// Renders one trace of the scene: a single sweep, or the max-hold (point-wise maximum of
/// the dBµV levels) of `scan.sweeps` sweeps with fresh noise each. The sweeps are those of
/// [`render_sweeps`].
///
/// # Errors
/// [`SceneError::BadField`] for a value [`Scene::validate`] refuses or a scene too large to
/// render; [`SceneError::Render`] if the points do not make a valid scan.
pub fn render(scene: &Scene) -> Result<Scan, SceneError> {
    if scene.scan.detector == Detector::QuasiPeak {
        return super::detect::render_detector(scene, Detector::QuasiPeak);
    }
    let plan = Plan::new(scene)?;
    let mut levels = plan.sweep(0);
    for k in 1..scene.scan.sweeps {
        for (l, x) in levels.iter_mut().zip(plan.sweep(k)) {
            *l = l.max(x);
        }
    }
    to_scan(scene, &plan.freqs, levels)
}

/// Renders `count` separate sweeps of the scene (no max-hold), with fresh noise, AM and fade
/// draws each. Sweep i draws from ChaCha8 streams 2i and 2i+1 of the scene seed, so results
/// are reproducible and sweep 0 equals a one-sweep [`render`].
///
/// # Errors
/// As [`render`].
pub fn render_sweeps(scene: &Scene, count: usize) -> Result<Vec<Scan>, SceneError> {
    let plan = Plan::new(scene)?;
    (0..count)
        .map(|k| to_scan(scene, &plan.freqs, plan.sweep(k)))
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::synth::parse_scene;
    use rustfft::{FftPlanner, num_complex::Complex};
    use statrs::distribution::{Chi, ContinuousCDF};
    use statrs::statistics::Distribution as _;

    fn scene(text: &str) -> Scene {
        parse_scene(text, "test.toml").unwrap()
    }

    fn db(x: f64) -> f64 {
        20.0 * x.log10()
    }

    fn uv(level_dbuv: f64) -> f64 {
        10f64.powf(level_dbuv / 20.0)
    }

    fn index_of(scan: &Scan, f: f64) -> usize {
        let mut best = 0;
        for (i, x) in scan.freq_hz.iter().enumerate() {
            if (x - f).abs() < (scan.freq_hz[best] - f).abs() {
                best = i;
            }
        }
        best
    }

    fn median(v: &mut [f64]) -> f64 {
        v.sort_by(f64::total_cmp);
        let n = v.len();
        if n % 2 == 1 {
            v[n / 2]
        } else {
            0.5 * (v[n / 2 - 1] + v[n / 2])
        }
    }

    fn cw_scene(points: usize, freq_hz: f64) -> Scene {
        scene(&format!(
            "[scan]\nstart_hz = 150e3\nstop_hz = 30e6\npoints = {points}\nrbw_hz = 9e3\nseed = 5\n\
             [floor]\nlevel_dbuv = -30.0\n\
             [[carrier]]\nfreq_hz = {freq_hz}\nlevel_dbuv = 60.0\nam_depth = 0.0\nfade_db = 0.0\n"
        ))
    }

    #[test]
    fn cw_line_reads_its_level_on_and_between_points() {
        // source: common practice, an rms-calibrated receiver reads a CW of X dBµV as X dBµV;
        // the Gaussian loss at the nearest sub-sample is at most 0.094 dB (derived).
        for points in [6635usize, 1001] {
            let step = (30e6 - 150e3) / (points - 1) as f64;
            for offset in [0.0, 0.5, 0.37] {
                let f = 150e3 + (500.0 + offset) * step;
                let scan = render(&cw_scene(points, f)).unwrap();
                let i = index_of(&scan, f);
                let near = scan.level_dbuv.slice(ndarray::s![i - 1..=i + 1]);
                let top = near.iter().copied().fold(f64::MIN, f64::max);
                assert!(
                    (top - 60.0).abs() < 0.5,
                    "points {points} offset {offset}: {top}"
                );
                assert!(
                    top <= 60.01,
                    "a peak detector never reads above the line: {top}"
                );
                if offset == 0.0 {
                    assert!((scan.level_dbuv[i] - 60.0).abs() < 0.5);
                }
            }
        }
    }

    /// One period of a trapezoid sampled at m points: rise over [0, τr), high to τ, fall over
    /// [τ, τ + τr), low to T (50 % width τ).
    fn sampled_trapezoid(m: usize, a: f64, t: f64, tau: f64, tr: f64) -> Vec<f64> {
        (0..m)
            .map(|i| {
                let x = i as f64 * t / m as f64;
                if x < tr {
                    a * x / tr
                } else if x < tau {
                    a
                } else if x < tau + tr {
                    a * (1.0 - (x - tau) / tr)
                } else {
                    0.0
                }
            })
            .collect()
    }

    #[test]
    fn trapezoid_harmonics_match_an_fft_of_the_waveform() {
        // source: rustfft of a sampled trapezoid; one-sided peak amplitude c_n = 2·|X_n|/M.
        let (m, a, t, duty, tr) = (1usize << 16, 1.0, 10e-6, 0.3, 200e-9);
        let mut buf: Vec<Complex<f64>> = sampled_trapezoid(m, a, t, duty * t, tr)
            .into_iter()
            .map(|x| Complex::new(x, 0.0))
            .collect();
        FftPlanner::new().plan_fft_forward(m).process(&mut buf);
        let c1 = trapezoid_harmonic_peak(1, a, t, duty, tr);
        let mut checked = 0;
        for n in 1..=20u32 {
            let formula = trapezoid_harmonic_peak(n, a, t, duty, tr);
            let fft = 2.0 * buf[n as usize].norm() / m as f64;
            // Harmonics 10 and 20 sit on a null of sinc(nπ·0.3) (n·0.3 an integer): there
            // both are numerically tiny (> 40 dB below c_1) and a dB comparison is meaningless.
            if formula < c1 * 1e-2 {
                assert!(fft < c1 * 1e-2, "n = {n}: fft {fft}");
                continue;
            }
            checked += 1;
            assert!(
                (db(formula) - db(fft)).abs() < 0.1,
                "n = {n}: {formula} vs {fft}"
            );
        }
        assert_eq!(checked, 18);
        assert!(
            trapezoid_harmonic_peak(2, a, t, duty, tr) > 0.1 * c1,
            "duty 0.3 has even harmonics"
        );
    }

    #[test]
    fn trapezoid_harmonics_match_the_handbook_values() {
        // source: derived from Paul's trapezoid spectrum (Introduction to Electromagnetic
        // Compatibility), A = 1 V, T = 10 µs, τ = 5 µs, τr = 50 ns; dBµV peak = 20·log10(c_n/1 µV).
        let c = |n| trapezoid_harmonic_peak(n, 1.0, 10e-6, 0.5, 50e-9);
        // source: derived, c_1 = 2·A·½·sinc(π/2) = 2/π = 0.6366 V at a negligible ramp.
        assert!((c(1) - 2.0 / PI).abs() < 1e-4);
        for (n, want) in [
            (1, 116.08),
            (3, 106.53),
            (5, 102.09),
            (11, 95.21),
            (101, 71.98),
        ] {
            let got = db(c(n) / 1e-6);
            assert!((got - want).abs() < 0.01, "c{n}: {got} dBµV, want {want}");
        }
        // source: derived, sin(n·π/2) = 0 for even n: 50 % duty has no even harmonics.
        for n in [2, 4, 10, 100] {
            assert!(c(n) < 1e-12 * c(1), "c{n} = {}", c(n));
        }
        // source: derived, the mean of the waveform is A·τ/T.
        assert!((trapezoid_harmonic_peak(0, 1.0, 10e-6, 0.3, 50e-9) - 0.3).abs() < 1e-12);
        assert!(trapezoid_harmonic_peak(1, 1.0, 0.0, 0.3, 0.0).is_nan());
    }

    fn noise_scene(points: usize, start: f64, step: f64, detector: &str) -> Scene {
        let stop = start + step * (points - 1) as f64;
        scene(&format!(
            "[scan]\nstart_hz = {start}\nstop_hz = {stop}\npoints = {points}\nrbw_hz = 9e3\n\
             detector = \"{detector}\"\nseed = 11\n[floor]\nlevel_dbuv = 10.0\n"
        ))
    }

    #[test]
    fn noise_envelope_is_rayleigh_with_the_set_rms() {
        // Points 2·RBW apart: the complex noise correlation there is exp(−(2·B6)²/(2s²)) with
        // s = 2√ln2·B6/(π·2.5) = 0.212·B6, i.e. e^-44 (derived): independent samples.
        let scan = render(&noise_scene(20_000, 1e6, 18e3, "sample")).unwrap();
        let env: Vec<f64> = scan.level_dbuv.iter().map(|l| uv(*l)).collect();
        let n = env.len() as f64;
        let rms = (env.iter().map(|e| e * e).sum::<f64>() / n).sqrt();
        // source: derived, E|n|² = σ², σ = 10 dBµV (the rms detector's reading).
        assert!((db(rms) - 10.0).abs() < 0.2, "rms {} dBµV", db(rms));
        // source: statrs, the envelope of circular complex Gaussian noise is Rayleigh, the chi
        // distribution with 2 degrees of freedom scaled by σ/√2.
        let chi = Chi::new(2).unwrap();
        let want = chi.mean().unwrap() / chi.inverse_cdf(0.5);
        let mean = env.iter().sum::<f64>() / n;
        let mut sorted = env.clone();
        let med = median(&mut sorted);
        assert!(
            ((mean / med) / want - 1.0).abs() < 0.01,
            "mean/median {} vs {want}",
            mean / med
        );
        // Kolmogorov-type check against the scaled Chi(2) CDF.
        let scale = uv(10.0) / 2f64.sqrt();
        let mut d_max = 0.0f64;
        for (i, e) in sorted.iter().enumerate() {
            let f = chi.cdf(e / scale);
            d_max = d_max
                .max((f - i as f64 / n).abs())
                .max((f - (i + 1) as f64 / n).abs());
        }
        assert!(d_max < 0.02, "max CDF deviation {d_max}");
    }

    fn corr(x: &[f64], y: &[f64]) -> f64 {
        let n = x.len() as f64;
        let (mx, my) = (x.iter().sum::<f64>() / n, y.iter().sum::<f64>() / n);
        let cov: f64 = x.iter().zip(y).map(|(a, b)| (a - mx) * (b - my)).sum();
        let vx: f64 = x.iter().map(|a| (a - mx).powi(2)).sum();
        let vy: f64 = y.iter().map(|b| (b - my).powi(2)).sum();
        cov / (vx * vy).sqrt()
    }

    #[test]
    fn fine_grid_noise_is_correlated_along_the_sweep() {
        // Step 450 Hz = B6/20: complex correlation ρ = exp(−Δf²/(2s²)), s = 0.212·B6 = 1910 Hz,
        // so ρ = 0.973 at lag 1 and 0.063 at lag 10 (derived); the Rayleigh envelope's
        // correlation is close to |ρ|² (0.95 and 0.004).
        let scan = render(&noise_scene(2001, 1e6, 450.0, "sample")).unwrap();
        let env: Vec<f64> = scan.level_dbuv.iter().map(|l| uv(*l)).collect();
        let lag1 = corr(&env[..env.len() - 1], &env[1..]);
        let lag10 = corr(&env[..env.len() - 10], &env[10..]);
        assert!(lag1 > 0.8, "lag-1 correlation {lag1}");
        assert!(lag10.abs() < 0.2, "lag-10 correlation {lag10}");
    }

    #[test]
    fn coarse_grid_peak_detector_sits_above_the_rayleigh_median() {
        // Buckets 2·B6 wide hold 16 sub-samples. Order statistics (derived): the median of the
        // maximum of k independent Rayleigh samples of rms σ is σ·√(−ln(1 − 0.5^(1/k))).
        // Lower bound: sub-samples B6 apart are independent (ρ = exp(−B6²/(2s²)) = 1.5e-5), so
        // each bucket holds at least 2 independent samples. Upper bound: all 17 independent
        // (positive correlation only lowers the maximum).
        let scan = render(&noise_scene(2000, 1e6, 18e3, "peak")).unwrap();
        let mut env: Vec<f64> = scan.level_dbuv.iter().map(|l| uv(*l)).collect();
        let med = db(median(&mut env));
        let max_median = |k: f64| 10.0 + db((-(1.0 - 0.5f64.powf(1.0 / k)).ln()).sqrt());
        let (lower, upper) = (max_median(2.0), max_median(17.0));
        // source: statrs Chi(2) median = √(2·ln2), a single sample's median 10 − 1.59 dB.
        let rayleigh = 10.0 + db(Chi::new(2).unwrap().inverse_cdf(0.5) / 2f64.sqrt());
        assert!((lower - rayleigh - 2.48).abs() < 0.01);
        assert!(
            med > lower - 0.2 && med < upper + 0.2,
            "peak median {med}, bounds {lower}..{upper}"
        );
    }

    const FINE_COMB: &str = "[scan]\nstart_hz = 20e3\nstop_hz = 40e3\npoints = 201\nrbw_hz = 9e3\n\
        [[switching]]\nf0_hz = 1e3\nduty = 0.01\nedge_time_s = 20e-9\nfundamental_dbuv = 80.0\n";

    /// Slow oracle: the coherent in-phase sum of every line, A(f) = Σ_n a_n·|H(f − n·f0)|.
    fn comb_oracle(f: f64, f0: f64, duty: f64, ramp: f64, u1: f64, b6: f64) -> f64 {
        let a = 4.0 * LN_2 / (b6 * b6);
        let c1 = trapezoid_harmonic_peak(1, 1.0, 1.0 / f0, duty, ramp);
        (1..=200u32)
            .map(|n| {
                let an = u1 * trapezoid_harmonic_peak(n, 1.0, 1.0 / f0, duty, ramp) / c1;
                an * (-a * (f - f64::from(n) * f0).powi(2)).exp()
            })
            .sum()
    }

    #[test]
    fn fine_comb_reads_impulse_bandwidth_over_spacing_above_its_lines() {
        let sc = scene(FINE_COMB);
        let scan = render(&sc).unwrap();
        let (f0, duty, ramp, u1) = (1e3, 0.01, 20e-9 / 0.8, uv(80.0));
        for (f, l) in scan.freq_hz.iter().zip(scan.level_dbuv.iter()) {
            let want = db(comb_oracle(*f, f0, duty, ramp, u1, 9e3));
            assert!((l - want).abs() < 0.1, "{f} Hz: {l} vs oracle {want}");
        }
        // source: derived (Poisson summation), A(f) = a(f)·B_imp/f0; B_imp = √(π/a) = 1.0645·B6,
        // 20·log10(1.0645·9000/1000) = +19.63 dB above the line level.
        let i = index_of(&scan, 30e3);
        let c1 = trapezoid_harmonic_peak(1, 1.0, 1e-3, duty, ramp);
        let line = db(u1 * trapezoid_harmonic_peak(30, 1.0, 1e-3, duty, ramp) / c1);
        let gain = scan.level_dbuv[i] - line;
        assert!((gain - 19.63).abs() < 0.2, "comb gain {gain} dB");
        assert!((db(1.0645 * 9.0) - 19.63).abs() < 0.01);

        // The Poisson form (used for combs with too many lines) agrees with the oracle here.
        let rbw = Rbw::new(9e3);
        let p = &sc.switching[0];
        let src = PeriodicSource {
            p,
            field: "switching[0]".into(),
            duty,
            ramp_s: ramp,
            u1,
            c1: trapezoid_harmonic_peak(1, 1.0, 1e-3, duty, ramp),
        };
        let eval = Grid {
            lo: 20e3,
            h: 500.0,
            n: 41,
        };
        let poisson = poisson_comb(&src, &rbw, &eval, 200.0);
        for (j, v) in poisson.iter().enumerate() {
            let want = comb_oracle(eval.x(j), f0, duty, ramp, u1, 9e3);
            assert!(
                (db(*v) - db(want)).abs() < 0.2,
                "{}: {} vs {}",
                eval.x(j),
                db(*v),
                db(want)
            );
        }
    }

    fn spread_scene(spread_pct: f64, detector: &str) -> Scene {
        spread_scene_at_rate(spread_pct, detector, 3e3)
    }

    fn spread_scene_at_rate(spread_pct: f64, detector: &str, rate: f64) -> Scene {
        scene(&format!(
            "[scan]\nstart_hz = 250e3\nstop_hz = 560e3\npoints = 621\nrbw_hz = 9e3\ndetector = \"{detector}\"\nseed = 2\n\
             [floor]\nlevel_dbuv = -40.0\n\
             [[switching]]\nf0_hz = 100e3\nduty = 0.3\nedge_time_s = 20e-9\nfundamental_dbuv = 80.0\n\
             spread_pct = {spread_pct}\nspread_rate_hz = {rate}\n"
        ))
    }

    #[test]
    fn spread_spectrum_lowers_and_widens_the_harmonics() {
        let plain = render(&spread_scene(0.0, "peak")).unwrap();
        let i5 = index_of(&plain, 500e3);
        // Expected rms power: the mean over 200 sweeps of the rms-detector power.
        let sweeps = render_sweeps(&spread_scene(8.0, "rms"), 200).unwrap();
        let n = plain.len();
        let mut power = vec![0.0; n];
        for s in &sweeps {
            for (p, l) in power.iter_mut().zip(s.level_dbuv.iter()) {
                *p += 10f64.powf(l / 10.0) / sweeps.len() as f64;
            }
        }
        let f = &plain.freq_hz;
        let top = |c: f64, w: f64| {
            let v: Vec<f64> = (0..n)
                .filter(|&i| (f[i] - c).abs() <= w / 2.0 - 9e3)
                .map(|i| power[i])
                .collect();
            10.0 * (v.iter().sum::<f64>() / v.len() as f64).log10()
        };
        // source: common practice rule, reduction 10·log10(W_5/B_noise), W_5 = 5·100 kHz·8 % =
        // 40 kHz, B_noise = √(π/(2a)) = √(π/(8·ln2))·B6 = 0.7527·B6 = 6774 Hz: 7.71 dB.
        let b_noise = (PI / (2.0 * Rbw::new(9e3).a)).sqrt();
        assert!((b_noise / (0.7527 * 9e3) - 1.0).abs() < 1e-4);
        let want = 10.0 * (40e3 / b_noise).log10();
        let got = plain.level_dbuv[i5] - top(500e3, 40e3);
        assert!(
            (got - want).abs() < 1.5,
            "reduction {got} dB, rule {want} dB"
        );
        // −6 dB width (power at a quarter of the flat top). Source: derived, a uniform density
        // of width W seen through |H|² falls to 1/4 at 0.4769/√(2a) = 0.2025·B6 outside each
        // edge, so the width is W + 0.405·B6; it grows with the harmonic number.
        let width = |c: f64, w: f64| {
            let thr = top(c, w) - 6.0;
            let ic = index_of(&plain, c);
            let cross = |dir: isize| {
                let mut i = ic as isize;
                loop {
                    let j = i + dir;
                    let (li, lj) = (
                        10.0 * power[i as usize].log10(),
                        10.0 * power[j as usize].log10(),
                    );
                    if lj < thr {
                        let t = (li - thr) / (li - lj);
                        return f[i as usize] + t * (f[j as usize] - f[i as usize]);
                    }
                    i = j;
                }
            };
            cross(1) - cross(-1)
        };
        let (w3, w5) = (width(300e3, 24e3), width(500e3, 40e3));
        assert!(
            (w3 - (24e3 + 0.405 * 9e3)).abs() < 1.5e3,
            "width of harmonic 3: {w3} Hz"
        );
        assert!(
            (w5 - (40e3 + 0.405 * 9e3)).abs() < 1.5e3,
            "width of harmonic 5: {w5} Hz"
        );
        assert!(w5 > w3 + 10e3);
    }

    /// Mean linear power (µV²) of each point over `count` sweeps.
    fn mean_power(sc: &Scene, count: usize) -> Vec<f64> {
        let sweeps = render_sweeps(sc, count).unwrap();
        let mut power = vec![0.0; sc.scan.points];
        for s in &sweeps {
            for (p, l) in power.iter_mut().zip(s.level_dbuv.iter()) {
                *p += 10f64.powf(l / 10.0) / count as f64;
            }
        }
        power
    }

    #[test]
    fn fast_spread_becomes_resolved_sub_lines() {
        // Rate 20 kHz ≥ B6/2: W_5 = 40 kHz holds m = 2 sub-lines at 500 kHz ± 10 kHz, each of
        // power P/2. Source: derived, the rms reading at a sub-line is
        // P/2·(1 + exp(−2a·(20 kHz)²)) = P/2 (the other line is 20 kHz away): −3.01 dB.
        let plain = render(&spread_scene(0.0, "peak")).unwrap();
        let sc = spread_scene_at_rate(8.0, "rms", 20e3);
        let power = mean_power(&sc, 100);
        let i = index_of(&plain, 510e3);
        let got = 10.0 * power[i].log10() - plain.level_dbuv[index_of(&plain, 500e3)];
        assert!((got + 3.01).abs() < 0.8, "sub-line reading {got} dB");
        let j = index_of(&plain, 500e3);
        assert!(
            10.0 * power[j].log10() < plain.level_dbuv[j] - 10.0,
            "the dip between the sub-lines"
        );
    }

    #[test]
    fn floor_slope_and_hump_set_the_noise_power() {
        // source: derived, E|n|² = σ²(f) = σ0²·(f/start)^(slope/10): the mean of e²/σ²(f) is 1.
        let sc = scene(
            "[scan]\nstart_hz = 1e6\nstop_hz = 100e6\npoints = 5001\nrbw_hz = 9e3\ndetector = \"sample\"\n\
             [floor]\nlevel_dbuv = 20.0\nslope_db_per_decade = -10.0\n",
        );
        let scan = render(&sc).unwrap();
        let ratio: f64 = scan
            .freq_hz
            .iter()
            .zip(scan.level_dbuv.iter())
            .map(|(f, l)| 10f64.powf((l - (20.0 - 10.0 * (f / 1e6).log10())) / 10.0))
            .sum::<f64>()
            / scan.len() as f64;
        assert!(
            (10.0 * ratio.log10()).abs() < 0.2,
            "mean normalised power {ratio}"
        );

        // A hump alone: the rms reading at its log-centre is its level; source: derived,
        // raised cosine ½·(1 − cos 2πx) = 1 at x = ½ (√(2 MHz · 8 MHz) = 4 MHz).
        let sc = scene(
            "[scan]\nstart_hz = 1e6\nstop_hz = 10e6\npoints = 901\nrbw_hz = 9e3\ndetector = \"rms\"\n\
             [[hump]]\nstart_hz = 2e6\nstop_hz = 8e6\nlevel_dbuv = 30.0\n",
        );
        let power = mean_power(&sc, 20);
        let centre: Vec<f64> = (0..901)
            .filter(|i| (3.9e6..=4.1e6).contains(&(1e6 + *i as f64 * 1e4)))
            .map(|i| power[i])
            .collect();
        let top = 10.0 * (centre.iter().sum::<f64>() / centre.len() as f64).log10();
        assert!((top - 30.0).abs() < 0.5, "hump top {top} dBµV");
        assert!(
            power[50] < 1e-6 && power[850] < 1e-6,
            "nothing outside the hump"
        );
    }

    #[test]
    fn carrier_am_and_fade_follow_their_draws() {
        let text = "[scan]\nstart_hz = 1e6\nstop_hz = 2e6\npoints = 1001\nrbw_hz = 9e3\ndetector = \"sample\"\nseed = 4\n\
                    [[carrier]]\nfreq_hz = 1.5e6\nlevel_dbuv = 60.0\nam_depth = AM\nfade_db = FADE\n";
        let at = |am: &str, fade: &str| -> Vec<f64> {
            let sc = scene(&text.replace("AM", am).replace("FADE", fade));
            render_sweeps(&sc, 400)
                .unwrap()
                .iter()
                .map(|s| s.level_dbuv[500])
                .collect()
        };
        // source: derived, amplitude factor 1 + m·u with u uniform in [−1, 1]: readings within
        // 60 + 20·log10(1 ± 0.5) and a mean linear amplitude of 1.
        let am = at("0.5", "0.0");
        assert!(
            am.iter()
                .all(|l| *l <= 60.0 + db(1.5) + 1e-9 && *l >= 60.0 + db(0.5) - 1e-9)
        );
        let mean = am.iter().map(|l| uv(*l)).sum::<f64>() / am.len() as f64 / uv(60.0);
        assert!((mean - 1.0).abs() < 0.03, "mean AM factor {mean}");
        // source: derived, the fade is a normal draw in dB: the sweep-to-sweep std is fade_db.
        let fade = at("0.0", "2.0");
        let m = fade.iter().sum::<f64>() / fade.len() as f64;
        let sd =
            (fade.iter().map(|l| (l - m).powi(2)).sum::<f64>() / (fade.len() - 1) as f64).sqrt();
        assert!(
            (sd - 2.0).abs() < 0.25 && (m - 60.0).abs() < 0.3,
            "fade mean {m}, std {sd}"
        );
    }

    #[test]
    fn clock_defaults_to_half_duty_and_max_harmonic_cuts_the_comb() {
        // source: derived from Paul's trapezoid spectrum, 50 % duty: c_n ∝ |sin(nπ/2)|/n, so
        // harmonic 3 reads 20·log10(1/3) = −9.54 dB below harmonic 1 (ramp term ≈ 1) and even
        // harmonics vanish.
        let sc = scene(
            "[scan]\nstart_hz = 500e3\nstop_hz = 6e6\npoints = 1101\nrbw_hz = 9e3\n\
             [[clock]]\nf0_hz = 1e6\nedge_time_s = 1e-9\nfundamental_dbuv = 60.0\nmax_harmonic = 3\n",
        );
        let scan = render(&sc).unwrap();
        let at = |f: f64| scan.level_dbuv[index_of(&scan, f)];
        assert!((at(1e6) - 60.0).abs() < 0.05);
        assert!((at(3e6) - (60.0 - 9.54)).abs() < 0.05, "{}", at(3e6));
        assert!(at(2e6) < -100.0, "even harmonic {}", at(2e6));
        assert!(
            at(5e6) < -100.0,
            "harmonic 5 is above max_harmonic: {}",
            at(5e6)
        );
    }

    #[test]
    fn field_strength_scene_says_so_in_its_metadata() {
        let sc = scene(crate::synth::scene::tests::EXAMPLE_RADIATED);
        let scan = render(&sc).unwrap();
        assert_eq!(scan.meta.quantity, crate::scan::Quantity::FieldStrength);
        assert_eq!(scan.meta.role, crate::scan::Role::Ambient);
        assert_eq!(
            scan.meta.extra[0],
            ("scene".to_string(), "test.toml".to_string())
        );
        let ratio = scan.freq_hz[1] / scan.freq_hz[0];
        assert!(
            (scan.freq_hz[4000] / scan.freq_hz[3999] - ratio).abs() < 1e-9,
            "log spacing"
        );
    }

    #[test]
    fn edge_cases_render_or_refuse_without_panicking() {
        let base = "[scan]\nstart_hz = 150e3\nstop_hz = 1e6\npoints = 101\nrbw_hz = 9e3\n[floor]\nlevel_dbuv = 0.0\n";
        let periodic = |extra: &str| {
            format!(
                "{base}[[switching]]\nf0_hz = F0\nduty = 0.3\nedge_time_s = 0.0\nfundamental_dbuv = 60.0\n{extra}"
            )
        };
        let cases = [
            // Poisson form (more than 20 million harmonics up to the stop).
            periodic("").replace("F0", "0.01"),
            // Fine comb with spread.
            periodic("spread_pct = 10.0\n").replace("F0", "2e3"),
            // Spread narrower than a grid cell.
            periodic("spread_pct = 0.001\n").replace("F0", "100e3"),
            // Fast spread on a coarse comb.
            periodic("spread_pct = 20.0\nspread_rate_hz = 50e3\n").replace("F0", "100e3"),
            // Noise grid too large: independent noise samples.
            base.replace("[floor]", "sweep_time_factor = 1e6\n[floor]"),
            base.replace("points = 101", "points = 2"),
            base.replace("points = 101\n", "points = 101\nspacing = \"log\"\n"),
        ];
        for text in &cases {
            let scan = render(&scene(text)).unwrap();
            assert!(scan.level_dbuv.iter().all(|l| l.is_finite()), "{text}");
        }
        // Poisson form, noise-free: A(f) = ā(f/f0)·B_imp/f0 with the mean line amplitude
        // ā(ν) = U1·(2/(πν))·(2/π)/c_1 past the first lobe (mean of |sin| is 2/π); derived.
        let quiet = cases[0].replace("[floor]\nlevel_dbuv = 0.0\n", "");
        let scan = render(&scene(&quiet)).unwrap();
        let (f, l) = (scan.freq_hz[50], scan.level_dbuv[50]);
        let c1 = trapezoid_harmonic_peak(1, 1.0, 100.0, 0.3, 0.0);
        let a_mean = uv(60.0) * (2.0 / (PI * f / 0.01)) * (2.0 / PI) / c1;
        let want = db(a_mean * (PI / Rbw::new(9e3).a).sqrt() / 0.01);
        assert!((l - want).abs() < 0.1, "{l} vs {want}");
        let huge = base
            .replace("rbw_hz = 9e3", "rbw_hz = 1.0")
            .replace("stop_hz = 1e6", "stop_hz = 1e9");
        let err = render(&scene(&huge)).unwrap_err();
        assert!(
            matches!(&err, SceneError::BadField { field, .. } if field == "scan.rbw_hz"),
            "{err}"
        );
    }

    #[test]
    fn seeds_reproduce_and_vary_the_noise() {
        let text = crate::synth::scene::tests::EXAMPLE_BUCK;
        let a = render(&scene(text)).unwrap();
        let b = render(&scene(text)).unwrap();
        assert_eq!(a, b);
        let other = scene(&text.replace("seed = 1", "seed = 2"));
        let c = render(&other).unwrap();
        let differing = a
            .level_dbuv
            .iter()
            .zip(c.level_dbuv.iter())
            .filter(|(x, y)| x != y)
            .count();
        assert!(differing > a.len() / 2, "only {differing} points differ");
        assert_eq!(
            a.meta.extra,
            vec![
                ("scene".to_string(), "buck demo".to_string()),
                ("seed".to_string(), "1".to_string())
            ]
        );
        let sweeps = render_sweeps(&scene(text), 3).unwrap();
        assert_eq!(sweeps[0].level_dbuv, a.level_dbuv);
        assert_ne!(sweeps[1].level_dbuv, sweeps[0].level_dbuv);
    }

    #[test]
    fn max_hold_is_the_pointwise_maximum_of_the_sweeps() {
        let text = crate::synth::scene::tests::EXAMPLE_BUCK.replace("sweeps = 1", "sweeps = 4");
        let sc = scene(&text);
        let held = render(&sc).unwrap();
        let sweeps = render_sweeps(&sc, 4).unwrap();
        for i in 0..held.len() {
            let m = sweeps
                .iter()
                .map(|s| s.level_dbuv[i])
                .fold(f64::MIN, f64::max);
            assert_eq!(held.level_dbuv[i], m);
        }
    }

    #[test]
    fn detectors_order_peak_rms_average_on_noise() {
        // source: derived, for any set of non-negative samples max ≥ √(mean x²) ≥ mean x.
        let det = |d: &str| render(&noise_scene(300, 1e6, 18e3, d)).unwrap();
        let (pk, rms, avg) = (det("peak"), det("rms"), det("average"));
        for i in 0..pk.len() {
            assert!(pk.level_dbuv[i] >= rms.level_dbuv[i] - 1e-9);
            assert!(rms.level_dbuv[i] >= avg.level_dbuv[i] - 1e-9);
        }
    }

    #[test]
    fn silent_scene_is_at_the_floor_value() {
        let sc = scene("[scan]\nstart_hz = 1e6\nstop_hz = 2e6\npoints = 11\nrbw_hz = 9e3\n");
        let scan = render(&sc).unwrap();
        assert!(scan.level_dbuv.iter().all(|l| (*l + 240.0).abs() < 1e-9));
    }

    #[test]
    fn example_scenes_render_with_their_metadata() {
        for text in [
            crate::synth::scene::tests::EXAMPLE_BUCK,
            crate::synth::scene::tests::EXAMPLE_RADIATED,
        ] {
            let sc = scene(text);
            let scan = render(&sc).unwrap();
            assert_eq!(scan.len(), sc.scan.points);
            assert_eq!(scan.meta.rbw_hz, Some(sc.scan.rbw_hz));
            assert_eq!(scan.meta.detector, Some(sc.scan.detector));
            assert_eq!(scan.meta.quantity, sc.scan.quantity);
            assert!(scan.level_dbuv.iter().all(|l| l.is_finite()));
        }
    }

    #[test]
    #[ignore = "timing; run with cargo test --release -- --ignored"]
    fn million_point_scene_renders_quickly() {
        let text =
            crate::synth::scene::tests::EXAMPLE_BUCK.replace("points = 6635", "points = 1000000");
        let sc = scene(&text);
        let t = std::time::Instant::now();
        let scan = render(&sc).unwrap();
        let dt = t.elapsed();
        println!("1,000,000 points: {dt:?}");
        assert_eq!(scan.len(), 1_000_000);
        assert!(dt.as_secs_f64() < 5.0);
    }
}
