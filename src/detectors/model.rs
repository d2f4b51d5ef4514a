//! The detector chain in the time domain: peak, quasi-peak (charge stage and critically
//! damped meter) and average (linear mean through the meter).
//!
//! # Equations
//! ```text
//! QP charge stage, carrier law (default):
//!                   dV/dt = G(e, V)/R − V/τd,  G = (ê/π)·(sin θ − θ·cos θ),  cos θ = V/ê
//! QP charge stage, envelope law (idealised):
//!                   dV/dt = max(e − V, 0)/τc − V/τd
//! meter:            T_L²·y'' + 2·T_L·y' + y = x        (x = V for QP, x = e for AV)
//! readings:         PK = max e;  QP = max y_QP / k;  AV = max y_AV
//! ```
//! `e` is the rms-calibrated envelope ([`super::signal`]); the carrier law reads it as the
//! crest ê of the IF carrier, which only scales R (G is homogeneous of degree one). `k` is
//! the steady V/e of a CW ([`charge_calibration`]: `cos θ` of the steady conduction angle, or
//! τd/(τc + τd)), so a CW of rms X reads X on all three detectors. R is set so that a sine
//! applied from rest charges the stage to 63 % of its final value in τc, the standard's
//! definition of the charge time constant. Readings are the maximum meter deflection in the
//! periodic steady state (for a single impulse: from rest, over the whole response).
//!
//! The carrier law is what the circuit does: the diode conducts only near the crests of the
//! IF carrier, and its mean current grows like (ê − V)^{3/2} near balance rather than like
//! ê − V. With it the model meets the standard's pulse-response table at every tabulated PRF
//! of bands A, B and C/D (largest gap 1.9 dB, band C/D at 1 Hz, within ±2 dB), where the
//! envelope law reads 1 to 4 dB high below the reference PRF (METHODS.md §3).
//!
//! # Integration
//! - Envelope law, exact exponential updates, no step-size stability limit: with `e` linear
//!   over a step the stage is a linear ODE while the diode conducts
//!   (`dV/dt = e/τc − V/τ`, `τ = τc·τd/(τc + τd)`) and a pure decay while it does not; both
//!   are solved exactly, and a step in which the diode switches is split at the switching
//!   time (found to first order), which keeps the scheme second order.
//! - Carrier law: exact decay while the diode is off; while it conducts, explicit
//!   Runge–Kutta steps against the local time constant π·R/θ (G is continuously
//!   differentiable, so no switching point is needed).
//! - The meter, driven by an input linear over the step (first-order hold), is propagated
//!   with its exact transition matrix `exp(A·h)` (double pole at −1/T_L).
//!
//! Steps are fine only where the envelope moves (see [`super::grid`]). The periodic steady
//! state is found directly rather than by simulating the settling: the charge stage's
//! voltage at the start of a period is the fixed point of the one-period map, found by
//! safeguarded false position (the map is increasing with slope below `exp(−T/τd)`, so the
//! root is unique and bracketed by 0 and max e); the meters are linear, so their periodic
//! state solves `(I − exp(A·T))·z = r`, r the response over one period from rest.
//!
//! # Source
//! CISPR 16-1-1 time constants (METHODS.md §2) and the definitions of the charge and
//! discharge time constants (from memory); the half-wave diode's conduction-angle analysis
//! (textbook rectifier theory); the idealised model of METHODS.md §3; the integration schemes
//! are textbook (exponential integrators, Runge–Kutta; exact discretisation of a linear
//! system with first-order hold).

use super::grid::{self, Grid};
use super::{Band, DetectorError, Signal, dbuv};
use serde::Serialize;
use std::collections::HashMap;

/// How the quasi-peak charge stage's diode draws current from the IF signal.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum ChargeLaw {
    /// The diode rectifies the IF carrier: it conducts only near the crests, over the
    /// conduction angle θ (`cos θ = V/ê`), and the charging current is the carrier-period mean
    /// `(ê/π)·(sin θ − θ·cos θ)/R`. `R` is set so that a suddenly applied sine reaches 63 % of
    /// its final value in τc, as the standard defines the charge time constant. This
    /// reproduces the standard's pulse-response table (the default).
    Carrier,
    /// The idealised model of METHODS.md §3: an ideal diode on the envelope,
    /// `dV/dt = max(e − V, 0)/τc − V/τd`. It reads 1 to 4 dB above the standard's table at low
    /// pulse rates; kept to reproduce METHODS.md's derived values.
    Envelope,
}

/// Resolution of the time-domain model.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct ModelSettings {
    /// The charge stage's diode law.
    pub charge_law: ChargeLaw,
    /// Steps across the core of a filtered impulse (|t| ≤ 1.5/B_imp), even. 160 gives about
    /// 0.002 dB (the scheme is second order; 40 gives about 0.03 dB).
    pub pulse_core_steps: usize,
    /// The coarse step is the shortest meter or discharge time constant divided by this.
    pub coarse_divisor: f64,
    /// Steps per impulse bandwidth of frequency while a dithered line passes the filter.
    pub sweep_steps_per_bimp: f64,
}

impl Default for ModelSettings {
    fn default() -> Self {
        ModelSettings {
            charge_law: ChargeLaw::Carrier,
            pulse_core_steps: 160,
            coarse_divisor: 40.0,
            sweep_steps_per_bimp: 40.0,
        }
    }
}

impl ModelSettings {
    /// Four times coarser than the default: about 0.03 dB, for quick checks.
    pub fn coarse() -> Self {
        ModelSettings {
            pulse_core_steps: 40,
            coarse_divisor: 20.0,
            sweep_steps_per_bimp: 12.0,
            ..ModelSettings::default()
        }
    }

    /// The idealised model of METHODS.md §3 (envelope diode law) at the default resolution.
    pub fn idealised() -> Self {
        ModelSettings {
            charge_law: ChargeLaw::Envelope,
            ..ModelSettings::default()
        }
    }

    /// Checks the settings.
    ///
    /// # Errors
    /// [`DetectorError::Settings`] naming the field that is out of range.
    pub fn check(&self) -> Result<(), DetectorError> {
        let bad = |field: &'static str, value: f64| Err(DetectorError::Settings { field, value });
        if self.pulse_core_steps < 8 || self.pulse_core_steps % 2 == 1 {
            return bad("pulse_core_steps (even, ≥ 8)", self.pulse_core_steps as f64);
        }
        if !(self.coarse_divisor.is_finite() && self.coarse_divisor >= 4.0) {
            return bad("coarse_divisor (≥ 4)", self.coarse_divisor);
        }
        if !(self.sweep_steps_per_bimp.is_finite() && self.sweep_steps_per_bimp >= 4.0) {
            return bad("sweep_steps_per_bimp (≥ 4)", self.sweep_steps_per_bimp);
        }
        Ok(())
    }
}

/// The three CISPR detector readings of one signal, dBµV (and the envelope's rms). A signal
/// the filter does not pass at all (a line many bandwidths off the tuning) reads −∞ dBµV.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct Readings {
    /// Peak: the envelope maximum.
    pub peak_dbuv: f64,
    /// Quasi-peak: maximum meter deflection after settling, calibrated to a CW.
    pub quasi_peak_dbuv: f64,
    /// Average: linear mean of the envelope through the average meter, its maximum deflection.
    pub average_dbuv: f64,
    /// Power mean of the envelope over a period, without meter (`None` for one impulse). This
    /// is not the CISPR rms-average detector; it shows where the power of a signal goes.
    pub rms_dbuv: Option<f64>,
}

impl Readings {
    /// QP − PK, dB.
    pub fn qp_minus_peak_db(&self) -> f64 {
        self.quasi_peak_dbuv - self.peak_dbuv
    }

    /// AV − PK, dB.
    pub fn av_minus_peak_db(&self) -> f64 {
        self.average_dbuv - self.peak_dbuv
    }
}

/// Detector readings of `signal` in `band` in the steady state.
///
/// # Errors
/// Those of [`Signal::check`] and [`ModelSettings::check`]; [`DetectorError::GridTooLarge`]
/// for a signal whose period needs more than two million steps (a repetition of hours, a
/// long burst of a dense comb).
pub fn simulate(
    band: Band,
    signal: &Signal,
    settings: &ModelSettings,
) -> Result<Readings, DetectorError> {
    signal.check(band)?;
    settings.check()?;
    let g = grid::build(band, signal, settings)?;
    let chain = Chain::new(band, settings.charge_law);
    let coefs = Coefs::new(&g, &chain);
    let peak = g.e.iter().copied().fold(0.0, f64::max);
    let (qp, av) = if g.periodic {
        let v0 = steady_charge(&g, &coefs, &chain, peak);
        let v = charge_trace(v0, &g, &coefs, &chain);
        (
            periodic_meter_max(&v, &g, &coefs.qp, chain.qp_meter_s),
            periodic_meter_max(&g.e, &g, &coefs.av, chain.av_meter_s),
        )
    } else {
        let v = charge_trace(0.0, &g, &coefs, &chain);
        (
            meter_pass([0.0, 0.0], &v, &g, &coefs.qp).1,
            meter_pass([0.0, 0.0], &g.e, &g, &coefs.av).1,
        )
    };
    Ok(Readings {
        peak_dbuv: dbuv(peak),
        quasi_peak_dbuv: dbuv(qp / chain.k),
        average_dbuv: dbuv(av),
        rms_dbuv: g.periodic.then(|| dbuv(rms(&g))),
    })
}

/// Most integration steps a finite-dwell measurement may take (a few seconds of work).
const MAX_DWELL_STEPS: f64 = 2e8;

/// Detector readings after measuring `signal` for `dwell_s` from rest (charge and meters at
/// zero when the measurement starts): the maximum deflections within the dwell.
///
/// # Errors
/// Those of [`simulate`], [`DetectorError::NotPositive`] for a dwell ≤ 0 and
/// [`DetectorError::DwellTooLong`] for one needing more than 2·10⁸ steps.
pub fn simulate_dwell(
    band: Band,
    signal: &Signal,
    dwell_s: f64,
    settings: &ModelSettings,
) -> Result<Readings, DetectorError> {
    signal.check(band)?;
    settings.check()?;
    if !(dwell_s.is_finite() && dwell_s > 0.0) {
        return Err(DetectorError::NotPositive {
            what: "dwell time (s)",
            value: dwell_s,
        });
    }
    let g = grid::build(band, signal, settings)?;
    let period: f64 = g.h.iter().sum();
    let steps = if g.periodic {
        (dwell_s / period).ceil() * g.h.len() as f64
    } else {
        g.h.len() as f64
    };
    if steps > MAX_DWELL_STEPS {
        return Err(DetectorError::DwellTooLong {
            dwell_s,
            max_s: MAX_DWELL_STEPS / g.h.len().max(1) as f64 * period,
        });
    }
    let chain = Chain::new(band, settings.charge_law);
    let coefs = Coefs::new(&g, &chain);
    let mut run = Transient::default();
    let mut t = 0.0;
    let mut peak: f64 = 0.0;
    'periods: loop {
        for i in 0..g.h.len() {
            peak = peak.max(g.e[i]);
            run.step(i, &g, &coefs, &chain);
            t += g.h[i];
            if t >= dwell_s {
                break 'periods;
            }
        }
        if !g.periodic {
            break;
        }
    }
    Ok(Readings {
        peak_dbuv: dbuv(peak),
        quasi_peak_dbuv: dbuv(run.qp_max / chain.k),
        average_dbuv: dbuv(run.av_max),
        rms_dbuv: None,
    })
}

/// Detector time constants of a band, and the charge stage's calibration.
#[derive(Debug, Clone, Copy)]
pub(crate) struct Chain {
    law: ChargeLaw,
    charge_s: f64,
    discharge_s: f64,
    /// Envelope law: time constant while the diode conducts, τc·τd/(τc + τd).
    on_s: f64,
    /// Carrier law: R·C of the conducting path (see [`ChargeCalibration`]).
    source_s: f64,
    /// CW calibration of the charge stage: V/e in the steady state of a sine.
    pub k: f64,
    qp_meter_s: f64,
    av_meter_s: f64,
}

/// The quasi-peak charge stage of a band under a diode law: what a steady sine charges it to,
/// and the conducting path's time constant that gives the standard's charge time constant.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct ChargeCalibration {
    /// R·C of the conducting path, s (τc itself for the envelope law).
    pub source_s: f64,
    /// Steady state of a sine of crest ê: V = k·ê (envelope law: τd/(τc + τd)).
    pub k: f64,
    /// Conduction angle in that steady state, rad (carrier law; 0 for the envelope law).
    pub conduction_angle_rad: f64,
}

/// Carrier-period mean of the charging current of a half-wave diode from a sine of crest `e`
/// into a capacitor at `v`, times R: `G = (ê/π)·(sin θ − θ·cos θ)`, `cos θ = v/ê`, zero when
/// `v ≥ ê`.
///
/// # Source
/// Derived: the diode conducts while `ê·cos φ > v`, i.e. for |φ| < θ, with current
/// `(ê·cos φ − v)/R`; its mean over a carrier period is `(1/2π)∫₋θ^θ (ê cos φ − v) dφ / R`.
/// A full-wave stage only halves R, which the calibration absorbs.
fn carrier_current(e: f64, v: f64) -> f64 {
    if !(e > v && e > 0.0) {
        return 0.0;
    }
    let r = (v / e).max(-1.0);
    let theta = r.acos();
    e * ((1.0 - r * r).max(0.0).sqrt() - r * theta) / std::f64::consts::PI
}

/// Steady conduction angle of the carrier law: the root of `tan θ − θ = π·R/τd` in (0, π/2).
///
/// # Source
/// Derived from `G(ê, V)/R = V/τd` with `V = ê·cos θ`; it is the textbook balance of a
/// half-wave peak rectifier with source resistance R and load resistance R_L,
/// `tan θ − θ = π·R/R_L` (radio-engineering handbooks, from memory).
fn steady_conduction_angle(source_over_discharge: f64) -> f64 {
    let target = std::f64::consts::PI * source_over_discharge;
    let (mut lo, mut hi) = (0.0f64, std::f64::consts::FRAC_PI_2);
    for _ in 0..200 {
        let mid = 0.5 * (lo + hi);
        if mid.tan() - mid < target {
            lo = mid;
        } else {
            hi = mid;
        }
    }
    0.5 * (lo + hi)
}

/// Time for the carrier-law stage, from rest under a sine of unit crest, to reach 63.2 % of
/// its final value, in units of R·C: `∫₀^{(1−1/e)·k} dV / (G(1, V) − ρ·V)`, ρ = R/τd
/// (composite Simpson rule, 400 intervals; the integrand is smooth on the range).
fn carrier_rise_time(rho: f64) -> f64 {
    let k = steady_conduction_angle(rho).cos();
    let top = (1.0 - (-1.0f64).exp()) * k;
    let f = |v: f64| 1.0 / (carrier_current(1.0, v) - rho * v);
    let n = 400;
    let h = top / n as f64;
    let mut sum = f(0.0) + f(top);
    for i in 1..n {
        sum += f(i as f64 * h) * if i % 2 == 1 { 4.0 } else { 2.0 };
    }
    sum * h / 3.0
}

/// Calibration of a band's charge stage under `law`.
///
/// # Formula
/// Envelope law: `R·C = τc`, `k = τd/(τc + τd)`. Carrier law: R such that
/// `R·S(R/τd) = τc`, S from [`carrier_rise_time`] (the standard's definition of the
/// electrical charge time constant: the time for the output to reach 63 % of its final value
/// after a constant sine is applied, CISPR 16-1-1, from memory), and `k = cos θ` with θ the
/// steady conduction angle. Band B gives R ≈ 0.25·τc and k ≈ 0.970.
pub fn charge_calibration(band: Band, law: ChargeLaw) -> ChargeCalibration {
    let (tc, td) = (band.qp_charge_s(), band.qp_discharge_s());
    match law {
        ChargeLaw::Envelope => ChargeCalibration {
            source_s: tc,
            k: td / (tc + td),
            conduction_angle_rad: 0.0,
        },
        ChargeLaw::Carrier => {
            static CACHE: std::sync::OnceLock<[ChargeCalibration; 3]> = std::sync::OnceLock::new();
            let slot = Band::ALL.iter().position(|&b| b == band).unwrap_or(0);
            CACHE.get_or_init(|| Band::ALL.map(carrier_calibration))[slot]
        }
    }
}

fn carrier_calibration(band: Band) -> ChargeCalibration {
    let (tc, td) = (band.qp_charge_s(), band.qp_discharge_s());
    // t63 = τd·ρ·S(ρ) grows with ρ; bisection in log ρ
    let (mut lo, mut hi) = ((1e-6 * tc / td).ln(), (tc / td).ln());
    for _ in 0..100 {
        let mid = 0.5 * (lo + hi);
        let rho = mid.exp();
        if td * rho * carrier_rise_time(rho) < tc {
            lo = mid;
        } else {
            hi = mid;
        }
    }
    let rho = (0.5 * (lo + hi)).exp();
    let theta = steady_conduction_angle(rho);
    ChargeCalibration {
        source_s: rho * td,
        k: theta.cos(),
        conduction_angle_rad: theta,
    }
}

impl Chain {
    pub(crate) fn new(band: Band, law: ChargeLaw) -> Self {
        let (tc, td) = (band.qp_charge_s(), band.qp_discharge_s());
        let cal = charge_calibration(band, law);
        Chain {
            law,
            charge_s: tc,
            discharge_s: td,
            on_s: tc * td / (tc + td),
            source_s: cal.source_s,
            k: cal.k,
            qp_meter_s: band.qp_meter_s(),
            av_meter_s: band.average_meter_s(),
        }
    }

    /// One step of the charge stage from `v0` with `e` linear from `e0` to `e1`.
    fn charge_step(&self, v0: f64, e0: f64, e1: f64, c: &StageCoef) -> f64 {
        match self.law {
            ChargeLaw::Envelope => self.envelope_step(v0, e0, e1, c),
            ChargeLaw::Carrier => self.carrier_step(v0, e0, e1, c),
        }
    }

    /// One step of the carrier law: exact decay while the diode is off at both ends, else an
    /// explicit Runge–Kutta step against the local time constant `π·R/θ` (the linearised rate
    /// `∂G/∂V = −θ/π`):
    /// one midpoint step when the step is under 2 % of it (local error below 10⁻⁶), else
    /// classic RK4 in substeps of at most half of it. θ is bounded over the whole step by
    /// `acos(V_off/max e)`, V_off the voltage the stage would decay to without conducting.
    fn carrier_step(&self, v0: f64, e0: f64, e1: f64, c: &StageCoef) -> f64 {
        let h = c.h;
        let v_off = v0 * c.decay;
        if e0 <= v0 && e1 <= v_off {
            return v_off;
        }
        let slope = (e1 - e0) / h;
        let rate = |t: f64, v: f64| {
            carrier_current(e0 + slope * t, v) / self.source_s - v / self.discharge_s
        };
        let midpoint = || v0 + h * rate(0.5 * h, v0 + 0.5 * h * rate(0.0, v0));
        // θ ≤ π/2 for V ≥ 0, so the local time constant is at least 2·R
        if h <= 0.04 * self.source_s {
            return midpoint();
        }
        // over the step V ≥ v_off and e ≤ max(e0, e1), which bounds the conduction angle
        let e_max = e0.max(e1);
        let theta = (v_off / e_max).clamp(-1.0, 1.0).acos().max(1e-3);
        let tau = (std::f64::consts::PI * self.source_s / theta).min(self.discharge_s);
        if h <= 0.02 * tau {
            return midpoint();
        }
        let n = (h / (0.5 * tau)).ceil();
        let dt = h / n;
        let mut v = v0;
        let mut t = 0.0;
        for _ in 0..n as usize {
            let k1 = rate(t, v);
            let k2 = rate(t + 0.5 * dt, v + 0.5 * dt * k1);
            let k3 = rate(t + 0.5 * dt, v + 0.5 * dt * k2);
            let k4 = rate(t + dt, v + dt * k3);
            v += dt / 6.0 * (k1 + 2.0 * k2 + 2.0 * k3 + k4);
            t += dt;
        }
        v
    }

    /// The charge stage while the diode conducts, over `h` with `e` going linearly from
    /// `e0` to `e1`.
    ///
    /// # Formula
    /// ```text
    /// V(h) = V0·E + [e0·τ(1−E) + m·(h·τ − τ²(1−E))]/τc,  E = exp(−h/τ), m = (e1 − e0)/h
    /// ```
    fn conduct(&self, v0: f64, e0: f64, e1: f64, h: f64) -> f64 {
        if h <= 0.0 {
            return v0;
        }
        let tau = self.on_s;
        let one_minus = -(-h / tau).exp_m1();
        let m = (e1 - e0) / h;
        v0 * (1.0 - one_minus)
            + (e0 * tau * one_minus + m * (h * tau - tau * tau * one_minus)) / self.charge_s
    }

    /// One step of the envelope law from `v0` (see the module docs), given the step's
    /// precomputed decay `exp(−h/τd)` and conducting update coefficients.
    fn envelope_step(&self, v0: f64, e0: f64, e1: f64, c: &StageCoef) -> f64 {
        let h = c.h;
        let v_off = v0 * c.decay;
        if e0 <= v0 {
            if e1 <= v_off {
                return v_off;
            }
            // the diode starts to conduct at s: e0 + m·s = V0·(1 − s/τd)
            let m = (e1 - e0) / h;
            let den = m + v0 / self.discharge_s;
            let s = if den > 0.0 {
                ((v0 - e0) / den).clamp(0.0, h)
            } else {
                0.0
            };
            let vs = v0 * (-s / self.discharge_s).exp();
            return self.conduct(vs, e0 + m * s, e1, h - s);
        }
        let v_on = v0 * c.keep + e0 * c.a0 + e1 * c.a1;
        if e1 >= v_on {
            return v_on;
        }
        // the diode stops at s: e0 + m·s = V0 + V'(0)·s
        let m = (e1 - e0) / h;
        let slope = (e0 - v0) / self.charge_s - v0 / self.discharge_s;
        let den = slope - m;
        let s = if den > 0.0 {
            ((e0 - v0) / den).clamp(0.0, h)
        } else {
            h
        };
        let vs = self.conduct(v0, e0, e0 + m * s, s);
        vs * (-(h - s) / self.discharge_s).exp()
    }
}

/// Precomputed coefficients of one step of the charge stage.
#[derive(Debug, Clone, Copy)]
struct StageCoef {
    h: f64,
    /// exp(−h/τd)
    decay: f64,
    /// Conducting update V1 = keep·V0 + a0·e0 + a1·e1.
    keep: f64,
    a0: f64,
    a1: f64,
}

/// Exact first-order-hold step of the critically damped meter, state z = (y, y').
///
/// # Formula
/// ```text
/// z1 = Φ·z0 + g0·x0 + g1·x1,   u = h/T, E = exp(−u)
/// Φ  = E·[[1 + u, h], [−h/T², 1 − u]]
/// Γ  = (1 − (1+u)E, (h/T²)·E)             (response to a unit step held over h)
/// K  = (T·(2 − (u² + 2u + 2)E), (1 + u + u²)E − 1)   (= ∫₀ʰ r·exp(A r)·b dr)
/// g0 = K/h,  g1 = Γ − K/h
/// ```
/// # Source
/// Derived: `exp(A·h) = e^{−h/T}(I + (A + I/T)·h)` for the double pole of
/// `T²y'' + 2Ty' + y = x`, integrated against an input linear over the step.
#[derive(Debug, Clone, Copy)]
struct MeterCoef {
    phi: [f64; 4],
    g0: [f64; 2],
    g1: [f64; 2],
}

impl MeterCoef {
    fn new(h: f64, tm: f64) -> Self {
        let u = h / tm;
        let e = (-u).exp();
        let gamma = [-(-u).exp_m1() - u * e, h / (tm * tm) * e];
        let k = [
            tm * (-2.0 * (-u).exp_m1() - (2.0 * u + u * u) * e),
            (u + u * u) * e + (-u).exp_m1(),
        ];
        let g0 = [k[0] / h, k[1] / h];
        MeterCoef {
            phi: [e * (1.0 + u), e * h, -e * h / (tm * tm), e * (1.0 - u)],
            g0,
            g1: [gamma[0] - g0[0], gamma[1] - g0[1]],
        }
    }

    fn step(&self, z: [f64; 2], x0: f64, x1: f64) -> [f64; 2] {
        let p = &self.phi;
        [
            p[0] * z[0] + p[1] * z[1] + self.g0[0] * x0 + self.g1[0] * x1,
            p[2] * z[0] + p[3] * z[1] + self.g0[1] * x0 + self.g1[1] * x1,
        ]
    }
}

/// Step coefficients of a grid, shared between equal step lengths.
struct Coefs {
    index: Vec<u32>,
    stage: Vec<StageCoef>,
    qp: MeterSet,
    av: MeterSet,
}

/// Meter coefficients per distinct step length (same indexing as `Coefs::stage`).
struct MeterSet {
    index: Vec<u32>,
    coef: Vec<MeterCoef>,
}

impl Coefs {
    fn new(g: &Grid, chain: &Chain) -> Self {
        let mut seen: HashMap<u64, u32> = HashMap::new();
        let mut lengths = Vec::new();
        let index =
            g.h.iter()
                .map(|&h| {
                    *seen.entry(h.to_bits()).or_insert_with(|| {
                        lengths.push(h);
                        (lengths.len() - 1) as u32
                    })
                })
                .collect::<Vec<u32>>();
        let stage = lengths
            .iter()
            .map(|&h| {
                let tau = chain.on_s;
                let one_minus = -(-h / tau).exp_m1();
                let a1 = (tau - tau * tau * one_minus / h) / chain.charge_s;
                StageCoef {
                    h,
                    decay: (-h / chain.discharge_s).exp(),
                    keep: 1.0 - one_minus,
                    a0: tau * one_minus / chain.charge_s - a1,
                    a1,
                }
            })
            .collect();
        let meters = |tm: f64| MeterSet {
            index: index.clone(),
            coef: lengths.iter().map(|&h| MeterCoef::new(h, tm)).collect(),
        };
        Coefs {
            stage,
            qp: meters(chain.qp_meter_s),
            av: meters(chain.av_meter_s),
            index,
        }
    }

    fn stage(&self, i: usize) -> &StageCoef {
        &self.stage[self.index[i] as usize]
    }
}

impl MeterSet {
    fn at(&self, i: usize) -> &MeterCoef {
        &self.coef[self.index[i] as usize]
    }
}

/// The charge stage over one period from `v0`: the voltage at the end.
fn charge_period(v0: f64, g: &Grid, c: &Coefs, chain: &Chain) -> f64 {
    let mut v = v0;
    for i in 0..g.h.len() {
        v = chain.charge_step(v, g.e[i], g.e[i + 1], c.stage(i));
    }
    v
}

/// The charge stage's voltage at every grid point from `v0`.
fn charge_trace(v0: f64, g: &Grid, c: &Coefs, chain: &Chain) -> Vec<f64> {
    let mut out = Vec::with_capacity(g.e.len());
    let mut v = v0;
    out.push(v);
    for i in 0..g.h.len() {
        v = chain.charge_step(v, g.e[i], g.e[i + 1], c.stage(i));
        out.push(v);
    }
    out
}

/// Start-of-period voltage of the periodic steady state: the root of `F(V) − V`, F the
/// one-period map, by false position with the Illinois safeguard.
///
/// # Source
/// Regula falsi with the Illinois modification (textbook root finding: the retained end's
/// function value is halved when the same end is kept twice); the bracket [0, max e] holds
/// because `F(0) ≥ 0` and the voltage only falls while `V ≥ e`.
fn steady_charge(g: &Grid, c: &Coefs, chain: &Chain, e_max: f64) -> f64 {
    let f = |v: f64| charge_period(v, g, c, chain) - v;
    let (mut a, mut b) = (0.0, e_max);
    let (mut fa, mut fb) = (f(a), f(b));
    if fa <= 0.0 {
        return 0.0;
    }
    if fb >= 0.0 {
        return b;
    }
    let mut side = 0i8;
    for _ in 0..200 {
        let x = (a * fb - b * fa) / (fb - fa);
        let fx = f(x);
        if fx == 0.0 || (b - a).abs() <= 1e-12 * e_max {
            return x;
        }
        if fx > 0.0 {
            a = x;
            fa = fx;
            if side == 1 {
                fb *= 0.5;
            }
            side = 1;
        } else {
            b = x;
            fb = fx;
            if side == -1 {
                fa *= 0.5;
            }
            side = -1;
        }
        if fx.abs() <= 1e-15 * e_max {
            return x;
        }
    }
    0.5 * (a + b)
}

/// Runs a meter over the grid from state `z0`, input `x` at the grid points: the final state
/// and the largest deflection (between grid points it is refined from the slopes: where y'
/// changes sign within a step, y' is taken as linear there).
fn meter_pass(z0: [f64; 2], x: &[f64], g: &Grid, m: &MeterSet) -> ([f64; 2], f64) {
    let mut z = z0;
    let mut y_max = z[0];
    for i in 0..g.h.len() {
        let next = m.at(i).step(z, x[i], x[i + 1]);
        y_max = y_max.max(next[0]);
        if z[1] > 0.0 && next[1] < 0.0 {
            let s = g.h[i] * z[1] / (z[1] - next[1]);
            y_max = y_max.max(z[0] + 0.5 * z[1] * s);
        }
        z = next;
    }
    (z, y_max)
}

/// Largest deflection of a meter of time constant `tm` in the periodic steady state of the
/// periodic input `x`.
///
/// # Formula
/// ```text
/// z* = (I − Φ_T)⁻¹·r,   Φ_T = exp(A·T),  r = state after one period from rest
/// ```
fn periodic_meter_max(x: &[f64], g: &Grid, m: &MeterSet, tm: f64) -> f64 {
    let (r, _) = meter_pass([0.0, 0.0], x, g, m);
    let period: f64 = g.h.iter().sum();
    let u = period / tm;
    let e = (-u).exp();
    // I − Φ_T
    let a = [
        1.0 - e * (1.0 + u),
        -e * period,
        e * period / (tm * tm),
        1.0 - e * (1.0 - u),
    ];
    let det = a[0] * a[3] - a[1] * a[2];
    let z = [
        (a[3] * r[0] - a[1] * r[1]) / det,
        (a[0] * r[1] - a[2] * r[0]) / det,
    ];
    meter_pass(z, x, g, m).1
}

/// The envelope's rms over the grid (trapezoid rule on e²), µV.
fn rms(g: &Grid) -> f64 {
    let mut sum = 0.0;
    let mut span = 0.0;
    for (i, &h) in g.h.iter().enumerate() {
        sum += 0.5 * h * (g.e[i] * g.e[i] + g.e[i + 1] * g.e[i + 1]);
        span += h;
    }
    if span > 0.0 { (sum / span).sqrt() } else { 0.0 }
}

/// State of the chain measuring from rest.
#[derive(Debug, Default)]
struct Transient {
    v: f64,
    qp: [f64; 2],
    av: [f64; 2],
    qp_max: f64,
    av_max: f64,
}

impl Transient {
    fn step(&mut self, i: usize, g: &Grid, c: &Coefs, chain: &Chain) {
        let v1 = chain.charge_step(self.v, g.e[i], g.e[i + 1], c.stage(i));
        self.qp = c.qp.at(i).step(self.qp, self.v, v1);
        self.av = c.av.at(i).step(self.av, g.e[i], g.e[i + 1]);
        self.v = v1;
        self.qp_max = self.qp_max.max(self.qp[0]);
        self.av_max = self.av_max.max(self.av[0]);
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn meter_step_matches_fine_rk4() {
        // source: textbook oracle, RK4 at a 1000-times finer step on T²y'' + 2Ty' + y = x
        let tm = 0.16;
        let h = 0.01;
        let c = MeterCoef::new(h, tm);
        let (x0, x1) = (1.0, 3.0);
        let z = c.step([0.2, -1.0], x0, x1);
        let f = |t: f64, y: [f64; 2]| {
            let x = x0 + (x1 - x0) * t / h;
            [y[1], (x - y[0] - 2.0 * tm * y[1]) / (tm * tm)]
        };
        let n = 1000;
        let dt = h / n as f64;
        let mut y = [0.2, -1.0];
        for i in 0..n {
            let t = i as f64 * dt;
            let k1 = f(t, y);
            let k2 = f(
                t + dt / 2.0,
                [y[0] + dt / 2.0 * k1[0], y[1] + dt / 2.0 * k1[1]],
            );
            let k3 = f(
                t + dt / 2.0,
                [y[0] + dt / 2.0 * k2[0], y[1] + dt / 2.0 * k2[1]],
            );
            let k4 = f(t + dt, [y[0] + dt * k3[0], y[1] + dt * k3[1]]);
            for j in 0..2 {
                y[j] += dt / 6.0 * (k1[j] + 2.0 * k2[j] + 2.0 * k3[j] + k4[j]);
            }
        }
        assert!((z[0] - y[0]).abs() < 1e-10, "{} {}", z[0], y[0]);
        assert!((z[1] - y[1]).abs() < 1e-8, "{} {}", z[1], y[1]);
    }

    #[test]
    fn carrier_current_is_the_mean_diode_current_over_a_carrier_period() {
        // source: derived, the mean of max(ê·cos φ − v, 0) over φ ∈ [0, 2π) by the midpoint rule
        for (e, v) in [(1.0, 0.0), (1.0, 0.5), (2.0, 1.9), (1.0, 1.0), (1.0, 1.2)] {
            let n = 200_000;
            let mean = (0..n)
                .map(|i| {
                    let phi = std::f64::consts::TAU * (i as f64 + 0.5) / n as f64;
                    (e * phi.cos() - v).max(0.0)
                })
                .sum::<f64>()
                / n as f64;
            assert!((carrier_current(e, v) - mean).abs() < 1e-9, "{e} {v}");
        }
    }

    #[test]
    fn carrier_law_steady_state_matches_a_rectifier_driven_cycle_by_cycle() {
        // source: textbook peak rectifier, tan θ − θ = π·R/R_L (from memory), checked here
        // against the circuit itself: an ideal diode with source resistance R charging C
        // against the load R_L, driven by the carrier (not its mean), integrated by RK4
        let (r, rl) = (1.0, 10.0);
        let theta = steady_conduction_angle(r / rl);
        assert!((theta.tan() - theta - std::f64::consts::PI * r / rl).abs() < 1e-12);
        let period = 0.02;
        let dt = period / 200.0;
        let f = |t: f64, v: f64| {
            let e = (std::f64::consts::TAU * t / period).cos();
            (e - v).max(0.0) / r - v / rl
        };
        let (mut v, mut t, mut mean, mut samples) = (0.0, 0.0, 0.0, 0);
        while t < 12.0 * rl {
            let k1 = f(t, v);
            let k2 = f(t + 0.5 * dt, v + 0.5 * dt * k1);
            let k3 = f(t + 0.5 * dt, v + 0.5 * dt * k2);
            let k4 = f(t + dt, v + dt * k3);
            v += dt / 6.0 * (k1 + 2.0 * k2 + 2.0 * k3 + k4);
            t += dt;
            if t > 10.0 * rl {
                mean += v;
                samples += 1;
            }
        }
        mean /= samples as f64;
        assert!(
            (mean - theta.cos()).abs() < 2e-3,
            "{mean} vs {}",
            theta.cos()
        );
    }

    #[test]
    fn carrier_law_rises_to_63_percent_in_the_charge_time_constant() {
        // source: CISPR 16-1-1 definition of the electrical charge time constant (from memory):
        // after a constant sine is applied, the output reaches 63 % of its final value in τc
        for band in Band::ALL {
            let chain = Chain::new(band, ChargeLaw::Carrier);
            let h = chain.charge_s / 1000.0;
            let c = StageCoef {
                h,
                decay: (-h / chain.discharge_s).exp(),
                keep: 0.0,
                a0: 0.0,
                a1: 0.0,
            };
            let mut v = 0.0;
            for _ in 0..1000 {
                v = chain.charge_step(v, 1.0, 1.0, &c);
            }
            let target = (1.0 - (-1.0f64).exp()) * chain.k;
            assert!((v - target).abs() < 1e-5, "{band}: {v} vs {target}");
            let h = chain.discharge_s / 100.0;
            let c = StageCoef {
                h,
                decay: (-h / chain.discharge_s).exp(),
                ..c
            };
            let mut settled = v;
            for _ in 0..4000 {
                settled = chain.charge_step(settled, 1.0, 1.0, &c);
            }
            assert!((settled - chain.k).abs() < 1e-6, "{band}: {settled}");
        }
    }

    #[test]
    fn carrier_step_matches_a_fine_step_oracle_when_the_diode_turns_on_mid_step() {
        // source: numerical oracle, the same step cut into 4000 pieces (e linear throughout)
        let chain = Chain::new(Band::B, ChargeLaw::Carrier);
        let coef = |h: f64| StageCoef {
            h,
            decay: (-h / chain.discharge_s).exp(),
            keep: 0.0,
            a0: 0.0,
            a1: 0.0,
        };
        for (v0, e0, e1, h) in [
            (1.0, 0.5, 3.0, 4e-3),
            (1.0, 0.9, 1.2, 4e-3),
            (0.0, 0.0, 1.0, 4e-3),
            (0.5, 2.0, 0.1, 4e-3),
        ] {
            let one = chain.charge_step(v0, e0, e1, &coef(h));
            let n = 4000;
            let small = coef(h / n as f64);
            let mut v = v0;
            for i in 0..n {
                let (a, b) = (i as f64 / n as f64, (i + 1) as f64 / n as f64);
                v = chain.charge_step(v, e0 + (e1 - e0) * a, e0 + (e1 - e0) * b, &small);
            }
            // 10⁻⁴ relative is 0.001 dB (a step in which the diode switches on loses RK4 order)
            assert!(
                (one - v).abs() < 1e-4 * v.max(1e-3),
                "{v0} {e0} {e1}: {one} vs {v}"
            );
        }
    }

    #[test]
    fn charge_stage_reaches_the_cw_balance() {
        // source: derived, steady state of dV/dt = (E − V)/τc − V/τd is V = E·τd/(τc + τd)
        let chain = Chain::new(Band::B, ChargeLaw::Envelope);
        let mut v = 0.0;
        let c = StageCoef {
            h: 1e-4,
            decay: (-1e-4 / chain.discharge_s).exp(),
            keep: (-1e-4 / chain.on_s).exp(),
            a0: 0.0,
            a1: 0.0,
        };
        for _ in 0..2000 {
            v = chain.conduct(v, 1.0, 1.0, c.h);
        }
        assert!((v - chain.k).abs() < 1e-12);
    }
}
