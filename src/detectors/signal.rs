//! Test signals and their IF envelope through the band's Gaussian resolution filter.
//!
//! Every envelope here is *rms-calibrated*: the magnitude of the IF signal's complex envelope
//! divided by √2, so that an unmodulated sine of rms amplitude `A` tuned to the filter centre
//! gives the constant envelope `A`. Amplitudes are in µV, impulse areas in µV·s, so envelopes
//! and readings come out in µV and, through `20·log10`, in dBµV.
//!
//! # The model filter
//! The resolution filter is the Gaussian of the idealised receiver model (METHODS.md §3):
//! `|H(f)| = exp(−a·f²)`, `a = 4·ln2/B6²`, with the impulse bandwidth
//! `B_imp = √(π/a) = 1.0645·B6` (see [`Band::impulse_bandwidth_hz`]). Its low-pass equivalent
//! impulse response is `h(t) = B_imp·exp(−π·(B_imp·t)²)` (unit area, so `H(0) = 1`), the
//! inverse Fourier transform of `exp(−π·(f/B_imp)²)`.
//!
//! # Dithered lines
//! A dithered line's envelope is the quasi-static (instantaneous-frequency) approximation
//! `e(t) = A·|H(f_inst(t) − f_tuned)|`, valid when the dither rate is far below the RBW
//! (`f_m ≪ RBW`: each pass through the filter is slow against its response time), with the
//! exact correction for a linear sweep through a Gaussian filter applied at the local sweep
//! rate (see `chirp_gain`): it lowers and widens each pass once the sweep rate nears `B_imp²`.
//! Rates above `B_imp/10` are refused.

use super::{Band, DetectorError};
use serde::Serialize;
use statrs::function::erf::erf;
use std::f64::consts::{PI, SQRT_2};

/// Half-span of a filtered impulse in units of `1/B_imp`: beyond it the envelope is below
/// `exp(−9π) = 5e-13` of its peak and is taken as zero.
pub(crate) const PULSE_HALF_SPAN: f64 = 3.0;
/// Half-span of the central part of a filtered impulse, in units of `1/B_imp`, sampled with
/// the fine step (the envelope there is above `exp(−2.25π) = 8.5e-4` of its peak).
pub(crate) const PULSE_CORE_HALF_SPAN: f64 = 1.5;
/// Fastest dither rate the quasi-static envelope accepts, as a fraction of `B_imp`: successive
/// passes of the line through the filter must be well apart compared with the filter's
/// memory (about `1/B_imp`).
pub const MAX_DITHER_RATE_PER_BIMP: f64 = 0.1;
/// Densest gated pulse train accepted, as a multiple of `B_imp`: above it the pulses are
/// resolved lines, better modelled as a gated CW of the line nearest the tuning.
pub const MAX_GATED_PRF_PER_BIMP: f64 = 8.0;

/// Fastest repetition of a tuned gated CW, as a multiple of `B_imp`: above it the gating's
/// sidebands fall outside the filter and the envelope is nearly the constant duty × amplitude
/// (and the sum over neighbouring bursts would grow long).
pub const MAX_TUNED_BURST_RATE_PER_BIMP: f64 = 10.0;

/// Frequency profile of a dithered line over one modulation period.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum Profile {
    /// Linear up and down sweeps (constant sweep rate).
    Triangular,
    /// Sinusoidal frequency modulation (slow at the turning points).
    Sinusoidal,
}

/// What a burst gates on and off.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
#[serde(rename_all = "kebab-case", tag = "kind")]
pub enum Gated {
    /// An unmodulated line of rms amplitude `amplitude_uv`, `offset_hz` from the tuning.
    Cw { amplitude_uv: f64, offset_hz: f64 },
    /// Impulses of area `area_uv_s` at `prf_hz`, the tuning `offset_hz` from a line of the comb.
    Pulses {
        area_uv_s: f64,
        prf_hz: f64,
        offset_hz: f64,
    },
}

/// A signal at the receiver input.
///
/// Offsets are the signal's frequency minus the receiver's tuned frequency, Hz. For pulses the
/// offset is that of the tuning from the nearest comb line; it matters only where the filtered
/// pulses overlap (PRF comparable with `B_imp` or above).
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
#[serde(rename_all = "kebab-case", tag = "kind")]
pub enum Signal {
    /// An unmodulated sine of rms amplitude `amplitude_uv`.
    Cw { amplitude_uv: f64, offset_hz: f64 },
    /// One isolated impulse of area `area_uv_s` (µV·s), at time zero.
    Impulse { area_uv_s: f64 },
    /// A periodic train of impulses of area `area_uv_s` at `prf_hz`.
    PulseTrain {
        area_uv_s: f64,
        prf_hz: f64,
        offset_hz: f64,
    },
    /// `carrier` switched on for `on_s` at the start of every period `1/rate_hz`.
    Burst {
        carrier: Gated,
        on_s: f64,
        rate_hz: f64,
    },
    /// A line of rms amplitude `amplitude_uv` whose frequency is swept over `deviation_hz`
    /// (peak to peak) around its centre at `rate_hz`; `offset_hz` is the centre's offset.
    Dithered {
        amplitude_uv: f64,
        deviation_hz: f64,
        rate_hz: f64,
        profile: Profile,
        offset_hz: f64,
    },
}

/// A positive, finite value, or the error naming it.
fn positive(what: &'static str, value: f64) -> Result<(), DetectorError> {
    if value.is_finite() && value > 0.0 {
        Ok(())
    } else {
        Err(DetectorError::NotPositive { what, value })
    }
}

/// A finite value, or the error naming it.
fn finite(what: &'static str, value: f64) -> Result<(), DetectorError> {
    if value.is_finite() {
        Ok(())
    } else {
        Err(DetectorError::NotFinite { what, value })
    }
}

impl Signal {
    /// Checks that the signal can be modelled in `band`.
    ///
    /// # Errors
    /// [`DetectorError::NotPositive`] / [`DetectorError::NotFinite`] for a bad field;
    /// [`DetectorError::BurstTooLong`] when the on time exceeds the period;
    /// [`DetectorError::BurstGapTooShort`] when the off time is under `6/B_imp` (the filtered
    /// bursts would run into each other) for a burst other than of a tuned CW (whose filtered
    /// bursts add in phase, so any gap is modelled); [`DetectorError::GatedPulsesTooDense`] for a gated
    /// train above `8·B_imp`; [`DetectorError::BurstRateTooHigh`] for a tuned burst repeating
    /// faster than `10·B_imp`; [`DetectorError::DitherTooFast`] for a dither rate above
    /// `B_imp/10` (outside the quasi-static envelope model).
    pub fn check(&self, band: Band) -> Result<(), DetectorError> {
        let b = band.impulse_bandwidth_hz();
        match *self {
            Signal::Cw {
                amplitude_uv,
                offset_hz,
            } => {
                positive("CW amplitude (µV)", amplitude_uv)?;
                finite("offset (Hz)", offset_hz)
            }
            Signal::Impulse { area_uv_s } => positive("impulse area (µV·s)", area_uv_s),
            Signal::PulseTrain {
                area_uv_s,
                prf_hz,
                offset_hz,
            } => {
                positive("impulse area (µV·s)", area_uv_s)?;
                positive("pulse repetition frequency (Hz)", prf_hz)?;
                finite("offset (Hz)", offset_hz)
            }
            Signal::Burst {
                carrier,
                on_s,
                rate_hz,
            } => check_burst(carrier, on_s, rate_hz, b),
            Signal::Dithered {
                amplitude_uv,
                deviation_hz,
                rate_hz,
                offset_hz,
                ..
            } => {
                positive("dithered line amplitude (µV)", amplitude_uv)?;
                finite("offset (Hz)", offset_hz)?;
                positive("dither rate (Hz)", rate_hz)?;
                if !(deviation_hz.is_finite() && deviation_hz >= 0.0) {
                    return Err(DetectorError::NotPositive {
                        what: "dither deviation (Hz, peak to peak)",
                        value: deviation_hz,
                    });
                }
                let max_hz = MAX_DITHER_RATE_PER_BIMP * b;
                if rate_hz > max_hz {
                    return Err(DetectorError::DitherTooFast { rate_hz, max_hz });
                }
                Ok(())
            }
        }
    }

    /// Period of the envelope, s; `None` for a single impulse. A CW has no period of its own
    /// and reports `None` too (its envelope is constant).
    pub fn period_s(&self) -> Option<f64> {
        match *self {
            Signal::Cw { .. } | Signal::Impulse { .. } => None,
            Signal::PulseTrain { prf_hz, .. } => Some(1.0 / prf_hz),
            Signal::Burst { rate_hz, .. } | Signal::Dithered { rate_hz, .. } => Some(1.0 / rate_hz),
        }
    }

    /// The rms-calibrated IF envelope at the times `t_s`, µV.
    ///
    /// # Errors
    /// Those of [`Signal::check`].
    pub fn envelope_uv(&self, band: Band, t_s: &[f64]) -> Result<Vec<f64>, DetectorError> {
        self.check(band)?;
        Ok(t_s.iter().map(|&t| self.envelope_at(band, t)).collect())
    }

    /// The envelope at one time, for a signal that passed [`Signal::check`].
    pub(crate) fn envelope_at(&self, band: Band, t: f64) -> f64 {
        let b = band.impulse_bandwidth_hz();
        match *self {
            Signal::Cw {
                amplitude_uv,
                offset_hz,
            } => amplitude_uv * band.filter_gain(offset_hz),
            Signal::Impulse { area_uv_s } => pulse_envelope(area_uv_s, b, t),
            Signal::PulseTrain {
                area_uv_s,
                prf_hz,
                offset_hz,
            } => train_envelope(area_uv_s, prf_hz, offset_hz, b, t),
            Signal::Burst {
                carrier,
                on_s,
                rate_hz,
            } => {
                let w = PULSE_HALF_SPAN / b;
                let period = 1.0 / rate_hz;
                let u = (t + w).rem_euclid(period) - w;
                match carrier {
                    Gated::Cw {
                        amplitude_uv,
                        offset_hz: 0.0,
                    } => {
                        // tuned: the responses to neighbouring bursts are real and add
                        let lo = ((u - on_s - w) / period).floor() as i64;
                        let hi = ((u + w) / period).ceil() as i64;
                        let sum: f64 = (lo..=hi)
                            .map(|k| gated_cw_gain(on_s, 0.0, b, u - k as f64 * period))
                            .sum();
                        amplitude_uv * sum.min(1.0)
                    }
                    _ => burst_envelope(carrier, on_s, b, u),
                }
            }
            Signal::Dithered {
                amplitude_uv,
                deviation_hz,
                rate_hz,
                profile,
                offset_hz,
            } => {
                let (df, rate) =
                    dither_offset(profile, deviation_hz, rate_hz, offset_hz, t * rate_hz);
                amplitude_uv * chirp_gain(df, rate, b)
            }
        }
    }
}

/// Checks a burst's fields (see [`Signal::check`]).
fn check_burst(carrier: Gated, on_s: f64, rate_hz: f64, b: f64) -> Result<(), DetectorError> {
    match carrier {
        Gated::Cw {
            amplitude_uv,
            offset_hz,
        } => {
            positive("burst CW amplitude (µV)", amplitude_uv)?;
            finite("offset (Hz)", offset_hz)?;
        }
        Gated::Pulses {
            area_uv_s,
            prf_hz,
            offset_hz,
        } => {
            positive("impulse area (µV·s)", area_uv_s)?;
            positive("pulse repetition frequency (Hz)", prf_hz)?;
            finite("offset (Hz)", offset_hz)?;
            let max_hz = MAX_GATED_PRF_PER_BIMP * b;
            if prf_hz > max_hz {
                return Err(DetectorError::GatedPulsesTooDense { prf_hz, max_hz });
            }
        }
    }
    positive("burst on time (s)", on_s)?;
    positive("burst repetition rate (Hz)", rate_hz)?;
    let period_s = 1.0 / rate_hz;
    if on_s > period_s {
        return Err(DetectorError::BurstTooLong { on_s, period_s });
    }
    if let Gated::Cw { offset_hz: 0.0, .. } = carrier {
        // a tuned line: the filtered bursts add in phase, any gap will do
        let max_hz = MAX_TUNED_BURST_RATE_PER_BIMP * b;
        if rate_hz > max_hz {
            return Err(DetectorError::BurstRateTooHigh { rate_hz, max_hz });
        }
        return Ok(());
    }
    let min_s = 2.0 * PULSE_HALF_SPAN / b;
    let off_s = period_s - on_s;
    if off_s < min_s {
        return Err(DetectorError::BurstGapTooShort { off_s, min_s });
    }
    Ok(())
}

/// Envelope of one filtered impulse centred on `t = 0`, µV.
///
/// # Formula
/// ```text
/// e(t) = √2·IS·B_imp·exp(−π·(B_imp·t)²)
/// ```
/// IS in µV·s. The IF envelope of an impulse through the Gaussian filter is
/// `2·IS·B_imp·exp(−π(B_imp·t)²)` (a flat two-sided spectral density IS through a band-pass
/// filter of low-pass equivalent `h(t)`); divided by √2 it is rms-calibrated, so its peak
/// reads `PK = √2·IS·B_imp`.
/// # Source
/// METHODS.md §3 (the idealised model) and the derived relation `PK = √2·IS·B_imp`.
pub(crate) fn pulse_envelope(area_uv_s: f64, b: f64, t: f64) -> f64 {
    let x = b * t;
    SQRT_2 * area_uv_s * b * (-PI * x * x).exp()
}

/// Envelope of an infinite impulse train at `prf_hz`, tuned `offset_hz` from a comb line.
///
/// # Formula
/// Where the filtered pulses do not overlap (`1/PRF ≥ 6/B_imp`) the envelope is that of the
/// nearest pulse. Otherwise the pulses add as phasors (pulse k carries `exp(−j2π·Δ·k/PRF)`,
/// Δ the tuning offset from a line); by Poisson's summation formula the same sum is the sum
/// of the comb lines through the filter:
/// ```text
/// e(t) = |Σ_k √2·IS·B·exp(−π B²(t − k/PRF)²)·exp(−j2πΔk/PRF)|
///      = |Σ_m √2·IS·PRF·exp(−π((m·PRF − Δ)/B)²)·exp(j2π·m·PRF·t)|
/// ```
/// The pulse sum is used up to `PRF = B_imp`, the line sum above it (either needs at most
/// about six terms).
/// # Source
/// Derived: superposition through a linear filter; Poisson summation of a Gaussian.
pub(crate) fn train_envelope(area_uv_s: f64, prf_hz: f64, offset_hz: f64, b: f64, t: f64) -> f64 {
    let period = 1.0 / prf_hz;
    let w = PULSE_HALF_SPAN / b;
    let k0 = (t / period).round();
    if period >= 2.0 * w {
        return pulse_envelope(area_uv_s, b, t - k0 * period);
    }
    // offset from the nearest line, in [−PRF/2, PRF/2]
    let delta = offset_hz - (offset_hz / prf_hz).round() * prf_hz;
    let (mut re, mut im) = (0.0, 0.0);
    if prf_hz <= b {
        let span = (w / period).ceil() as i64;
        for k in -span..=span {
            let tk = (k0 + k as f64) * period;
            let a = pulse_envelope(area_uv_s, b, t - tk);
            let phase = -2.0 * PI * delta * tk;
            re += a * phase.cos();
            im += a * phase.sin();
        }
    } else {
        let span = (PULSE_HALF_SPAN * b / prf_hz).ceil() as i64 + 1;
        let tr = t - k0 * period;
        for m in -span..=span {
            let f = m as f64 * prf_hz - delta;
            let x = f / b;
            let a = SQRT_2 * area_uv_s * prf_hz * (-PI * x * x).exp();
            let phase = 2.0 * PI * m as f64 * prf_hz * tr;
            re += a * phase.cos();
            im += a * phase.sin();
        }
    }
    re.hypot(im)
}

/// Envelope of one burst starting at `u = 0`, at time `u` (−w ≤ u < period − w).
fn burst_envelope(carrier: Gated, on_s: f64, b: f64, u: f64) -> f64 {
    match carrier {
        Gated::Cw {
            amplitude_uv,
            offset_hz,
        } => amplitude_uv * gated_cw_gain(on_s, offset_hz, b, u),
        Gated::Pulses {
            area_uv_s,
            prf_hz,
            offset_hz,
        } => gated_pulses_envelope(area_uv_s, prf_hz, offset_hz, on_s, b, u),
    }
}

/// Number of impulses in a burst: those at `k/PRF < on_s`, at least one.
pub(crate) fn pulses_in_burst(prf_hz: f64, on_s: f64) -> usize {
    ((on_s * prf_hz).ceil() as usize).max(1)
}

/// Envelope of the impulses `k/PRF`, `k = 0 … n−1`, of one burst (phasor sum where they
/// overlap, as in [`train_envelope`]).
fn gated_pulses_envelope(area: f64, prf_hz: f64, offset_hz: f64, on_s: f64, b: f64, u: f64) -> f64 {
    let n = pulses_in_burst(prf_hz, on_s) as i64;
    let period = 1.0 / prf_hz;
    let w = PULSE_HALF_SPAN / b;
    let delta = offset_hz - (offset_hz / prf_hz).round() * prf_hz;
    let lo = (((u - w) / period).ceil() as i64).max(0);
    let hi = (((u + w) / period).floor() as i64).min(n - 1);
    let (mut re, mut im) = (0.0, 0.0);
    for k in lo..=hi {
        let tk = k as f64 * period;
        let a = pulse_envelope(area, b, u - tk);
        let phase = -2.0 * PI * delta * tk;
        re += a * phase.cos();
        im += a * phase.sin();
    }
    re.hypot(im)
}

/// Gain of the filter for a sine switched on over `0 ≤ t < on_s`, at time `u`, for a line
/// `offset_hz` from the tuning.
///
/// # Formula
/// ```text
/// g(u) = |∫_{u−T_on}^{u} h(s)·exp(−j2π·Δ·s) ds|,  h(s) = B·exp(−π(B·s)²)
/// Δ = 0:  g(u) = ½·[erf(√π·B·u) − erf(√π·B·(u − T_on))]
/// ```
/// Away from the edges (both limits beyond ±3/B) the integral is `|H(Δ)|`. With an offset the
/// edge values come from Gauss-Legendre quadrature (8 points per panel, one panel per
/// quarter cycle of the offset or per `1/(2B)`, whichever is shorter).
/// # Source
/// Derived: convolution of the gated carrier's complex envelope with the filter's low-pass
/// equivalent impulse response.
pub(crate) fn gated_cw_gain(on_s: f64, offset_hz: f64, b: f64, u: f64) -> f64 {
    let w = PULSE_HALF_SPAN / b;
    let lo = (u - on_s).max(-w);
    let hi = u.min(w);
    if hi <= lo {
        return 0.0;
    }
    if offset_hz == 0.0 {
        let s = PI.sqrt() * b;
        return 0.5 * (erf(s * u) - erf(s * (u - on_s)));
    }
    if lo <= -w && hi >= w {
        let x = offset_hz / b;
        return (-PI * x * x).exp();
    }
    let panel = (0.25 / offset_hz.abs()).min(0.5 / b);
    let n = ((hi - lo) / panel).ceil().max(1.0) as usize;
    let step = (hi - lo) / n as f64;
    let (mut re, mut im) = (0.0, 0.0);
    for i in 0..n {
        let mid = lo + (i as f64 + 0.5) * step;
        for (x, wgt) in GAUSS_LEGENDRE_8 {
            let s = mid + 0.5 * step * x;
            let a = 0.5 * step * wgt * b * (-PI * (b * s) * (b * s)).exp();
            let phase = -2.0 * PI * offset_hz * s;
            re += a * phase.cos();
            im += a * phase.sin();
        }
    }
    re.hypot(im)
}

/// Nodes and weights of 8-point Gauss-Legendre quadrature on [−1, 1] (the roots of the
/// Legendre polynomial P8 and their weights, as tabulated in handbooks of numerical analysis;
/// the weights sum to 2).
const GAUSS_LEGENDRE_8: [(f64, f64); 8] = [
    (-0.960_289_856_497_536_3, 0.101_228_536_290_376_3),
    (-0.796_666_477_413_626_7, 0.222_381_034_453_374_5),
    (-0.525_532_409_916_329, 0.313_706_645_877_887_3),
    (-0.183_434_642_495_649_8, 0.362_683_783_378_362),
    (0.183_434_642_495_649_8, 0.362_683_783_378_362),
    (0.525_532_409_916_329, 0.313_706_645_877_887_3),
    (0.796_666_477_413_626_7, 0.222_381_034_453_374_5),
    (0.960_289_856_497_536_3, 0.101_228_536_290_376_3),
];

/// Offset of a dithered line from the tuning (Hz) and its sweep rate (Hz/s) at modulation
/// phase `cycles` (in periods).
///
/// Triangular: `p(φ) = −1 + 4φ` for `φ < ½`, `3 − 4φ` after, sweep rate `±2·D·f_m`;
/// sinusoidal: `p(φ) = sin(2πφ)`, rate `π·D·f_m·cos(2πφ)`; the line sits at
/// `Δc + (D/2)·p(φ)`, D the peak-to-peak deviation, Δc the centre's offset.
pub(crate) fn dither_offset(
    profile: Profile,
    deviation_hz: f64,
    rate_hz: f64,
    offset_hz: f64,
    cycles: f64,
) -> (f64, f64) {
    let phi = cycles.rem_euclid(1.0);
    let half = 0.5 * deviation_hz;
    match profile {
        Profile::Triangular => {
            if phi < 0.5 {
                (offset_hz + half * (4.0 * phi - 1.0), 4.0 * half * rate_hz)
            } else {
                (offset_hz + half * (3.0 - 4.0 * phi), -4.0 * half * rate_hz)
            }
        }
        Profile::Sinusoidal => {
            let a = 2.0 * PI * phi;
            (
                offset_hz + half * a.sin(),
                2.0 * PI * half * rate_hz * a.cos(),
            )
        }
    }
}

/// Gain of the Gaussian filter for a line at `offset_hz` sweeping at `rate_hz_per_s`.
///
/// # Formula
/// ```text
/// κ = ḟ / B_imp²
/// g = (1 + κ²)^(−1/4) · exp(−π·Δf² / (B_imp²·(1 + κ²)))
/// ```
/// For a linear sweep (chirp `exp(jπ·ḟ·t²)`) through `h(t) = B·exp(−π(Bt)²)` the output
/// magnitude is exactly `B/(B⁴ + ḟ²)^(1/4)·exp(−π ḟ² B² t²/(B⁴ + ḟ²))`, i.e. the expression
/// above with `Δf = ḟ·t`. For `κ → 0` it is the quasi-static (instantaneous-frequency) gain
/// `|H(Δf)|`; the peak loss of a sweep is `5·log10(1 + κ²)` dB (0.2 dB at κ = 1/3).
/// Applied locally (with the local sweep rate) it is the quasi-static approximation with the
/// first correction for fast sweeps; it holds while the rate changes little during one pass
/// through the filter and the passes are well apart, i.e. for a dither rate `f_m ≪ RBW`
/// (enforced: `f_m ≤ B_imp/10`).
/// # Source
/// Derived: the Gaussian integral `∫exp(−αs² − βs) ds = √(π/α)·exp(β²/(4α))` with
/// `α = π(B² − jḟ)`, `β = j2πḟt`.
pub(crate) fn chirp_gain(offset_hz: f64, rate_hz_per_s: f64, b: f64) -> f64 {
    let kappa = rate_hz_per_s / (b * b);
    let stretch = 1.0 + kappa * kappa;
    let x = offset_hz / b;
    stretch.powf(-0.25) * (-PI * x * x / stretch).exp()
}

#[cfg(test)]
mod tests {
    use super::*;

    fn bimp() -> f64 {
        Band::B.impulse_bandwidth_hz()
    }

    #[test]
    fn pulse_and_line_sums_agree() {
        // source: Poisson summation (derived), the two forms of train_envelope at PRF = B/2
        // and 2B, tuned 0.3·PRF off a line
        let b = bimp();
        for prf in [0.5 * b, 0.9 * b, 1.2 * b, 2.0 * b] {
            let off = 0.3 * prf;
            for i in 0..20 {
                let t = i as f64 * 0.05 / prf;
                let direct = {
                    let (mut re, mut im) = (0.0, 0.0);
                    for k in -60..=60 {
                        let tk = k as f64 / prf;
                        let a = pulse_envelope(1e-3, b, t - tk);
                        let p = -2.0 * PI * off * tk;
                        re += a * p.cos();
                        im += a * p.sin();
                    }
                    re.hypot(im)
                };
                let model = train_envelope(1e-3, prf, off, b, t);
                assert!((model / direct - 1.0).abs() < 1e-9, "prf {prf} t {t}");
            }
        }
    }

    #[test]
    fn resolved_comb_line_reads_as_a_cw() {
        // source: METHODS.md §3 [DER], a resolved line of a train is a CW of rms √2·IS·PRF
        let b = bimp();
        let prf = 10.0 * b;
        let e = train_envelope(1e-3, prf, 0.0, b, 0.123 / prf);
        assert!((e / (SQRT_2 * 1e-3 * prf) - 1.0).abs() < 1e-12);
    }

    #[test]
    fn gated_cw_quadrature_matches_the_error_function() {
        // source: derived, ∫ h = ½[erf(√π B u) − erf(√π B (u − T))]; quadrature with a
        // vanishing offset against the closed form
        let b = bimp();
        let on = 2.0 / b;
        for i in 0..40 {
            let u = -3.0 / b + i as f64 * 0.2 / b;
            let exact = gated_cw_gain(on, 0.0, b, u);
            let quad = gated_cw_gain(on, 1e-9, b, u);
            assert!((exact - quad).abs() < 1e-9, "u {u}: {exact} {quad}");
        }
    }

    #[test]
    fn gauss_legendre_rule_is_exact_to_degree_15() {
        // source: textbook, an n-point Gauss-Legendre rule integrates degree 2n − 1 exactly:
        // ∫₋₁¹ x¹⁴ dx = 2/15, weights sum to 2
        let sum: f64 = GAUSS_LEGENDRE_8.iter().map(|(_, w)| w).sum();
        assert!((sum - 2.0).abs() < 1e-14);
        let x14: f64 = GAUSS_LEGENDRE_8.iter().map(|(x, w)| w * x.powi(14)).sum();
        assert!((x14 - 2.0 / 15.0).abs() < 1e-14);
    }

    #[test]
    fn chirp_gain_matches_direct_convolution() {
        // source: derived, numerical convolution of exp(jπ k t²) with B·exp(−π B² s²)
        let b = bimp();
        for kappa in [0.0, 0.3, 1.0, 3.0] {
            let k = kappa * b * b;
            for t_b in [0.0, 0.4, 1.0] {
                let t = t_b / b;
                let n = 4000;
                let ds = 8.0 / b / n as f64;
                let (mut re, mut im) = (0.0, 0.0);
                for i in 0..=n {
                    let s = -4.0 / b + i as f64 * ds;
                    let w = if i == 0 || i == n { 0.5 } else { 1.0 };
                    let a = w * ds * b * (-PI * (b * s) * (b * s)).exp();
                    let p = PI * k * (t - s) * (t - s);
                    re += a * p.cos();
                    im += a * p.sin();
                }
                let direct = re.hypot(im);
                let model = chirp_gain(k * t, k, b);
                assert!((direct - model).abs() < 1e-6, "κ {kappa} t {t_b}");
            }
        }
    }

    #[test]
    fn bad_signals_are_refused() {
        let cw = Signal::Cw {
            amplitude_uv: -1.0,
            offset_hz: 0.0,
        };
        assert!(matches!(
            cw.check(Band::B),
            Err(DetectorError::NotPositive { .. })
        ));
        let burst = Signal::Burst {
            carrier: Gated::Cw {
                amplitude_uv: 1.0,
                offset_hz: 100.0,
            },
            on_s: 0.099_99,
            rate_hz: 10.0,
        };
        assert!(matches!(
            burst.check(Band::B),
            Err(DetectorError::BurstGapTooShort { .. })
        ));
        let dither = Signal::Dithered {
            amplitude_uv: 1.0,
            deviation_hz: 1e5,
            rate_hz: 5e3,
            profile: Profile::Triangular,
            offset_hz: 0.0,
        };
        assert!(matches!(
            dither.check(Band::B),
            Err(DetectorError::DitherTooFast { .. })
        ));
    }
}
