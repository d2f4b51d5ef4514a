//! Predicted quasi-peak and average readings from a peak reading and the evidence about the
//! emission.

use super::table::{dither_rates_hz, standard_relative_qp};
use super::{
    Band, DetectorError, Gated, ModelSettings, Profile, Signal, dither_response, impulse_response,
    simulate, standard_tolerance_db,
};
use serde::Serialize;

/// What a peak scan tells about an emission.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
#[serde(rename_all = "kebab-case", tag = "kind")]
pub enum Evidence {
    /// A line resolved by the RBW whose level is steady: a CW.
    StableLine,
    /// An impulsive emission or a comb the RBW does not resolve; `prf_hz` is the pulse
    /// repetition frequency, i.e. the comb's line spacing.
    Impulsive { prf_hz: f64 },
    /// A dithered (spread-spectrum) line sweeping over `sweep_hz` peak to peak; its dither
    /// rate and profile when known.
    Dithered {
        sweep_hz: f64,
        rate_hz: Option<f64>,
        profile: Option<Profile>,
    },
    /// A line switched on and off at `rate_hz`, on for the fraction `duty` of each period.
    Burst { rate_hz: f64, duty: f64 },
}

/// Where a prediction's numbers come from.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum Basis {
    /// A CW reads the same on peak, QP and average (METHODS.md §2, source S8).
    Cw,
    /// The impulse table of the model and the standard's pulse-response curve.
    PulseResponse,
    /// The dither table of the model.
    DitherTable,
    /// The time-domain model of a gated line.
    BurstModel,
}

impl Basis {
    /// One line on the method and its sources.
    pub fn describe(self) -> &'static str {
        match self {
            Basis::Cw => "CW: QP = AV = peak (METHODS.md §2)",
            Basis::PulseResponse => {
                "impulsive: midway between the time-domain model and the CISPR 16-1-1 pulse \
                 response [from memory], their gap and the standard's tolerance as uncertainty"
            }
            Basis::DitherTable => {
                "dithered line: model table (quasi-static envelope), spread over unknown rate \
                 and profile and the standard's tolerance as uncertainty"
            }
            Basis::BurstModel => {
                "burst: time-domain model of the gated line, the standard's tolerance as \
                 uncertainty"
            }
        }
    }
}

/// Predicted QP and AV readings with their uncertainty (half-width of the interval, dB).
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct Prediction {
    pub band: Band,
    pub peak_dbuv: f64,
    pub quasi_peak_dbuv: f64,
    pub quasi_peak_uncertainty_db: f64,
    pub average_dbuv: f64,
    pub average_uncertainty_db: f64,
    pub basis: Basis,
}

/// Allowance for a "stable" line's residual modulation or drift that a peak scan cannot
/// show, dB (common practice).
const CW_UNCERTAINTY_DB: f64 = 0.5;

/// Uncertainty of a predicted average reading relative to peak, dB: a real filter's impulse
/// bandwidth departs from the Gaussian's, and the peak of a pulse scales with it while the
/// average does not; ±10 % of bandwidth is ±0.9 dB (common practice, rounded up to 1 dB).
const AV_UNCERTAINTY_DB: f64 = 1.0;

/// Predicts the QP and AV readings of an emission whose peak reading is `peak_dbuv`.
///
/// # Method
/// - [`Evidence::StableLine`]: QP = AV = PK (METHODS.md §2, source S8), ±0.5 dB (common
///   practice allowance for modulation the scan cannot show).
/// - [`Evidence::Impulsive`]: QP − PK midway between the model's table
///   ([`super::impulse_response`]) and the standard's curve
///   ([`super::standard_pulse_response_db`], anchored at the reference impulse), ± the
///   standard's tolerance ([`super::standard_tolerance_db`], ±1 to ±2 dB, METHODS.md §3
///   [from memory]) plus half their gap (within 1 dB at most PRFs, up to 1.9 dB in band
///   C/D at 1 Hz, [`super::ChargeLaw::Carrier`]). AV − PK from the model table (`≈ 20·log10(PRF/B_imp)`,
///   METHODS.md §3, derived) ±1 dB. From `4·B_imp` up the comb's lines are resolved: a CW.
/// - [`Evidence::Dithered`]: the dither table ([`super::dither_response`]), the maximum over
///   the sweep; an unknown rate or profile spans the table's rates (1 Hz to `B_imp/10`) and
///   both profiles, the centre of the span is the prediction and its half-width is added to
///   the tolerance (the standard's at the passes' rate `2·f_m`, or ±2 dB when the rate is
///   unknown; ±1 dB for AV).
/// - [`Evidence::Burst`]: the time-domain model of a tuned line gated at the rate and duty,
///   ± the standard's tolerance at the burst rate (QP), ±1 dB (AV).
/// # Errors
/// [`DetectorError::LevelNotFinite`], [`DetectorError::NotPositive`],
/// [`DetectorError::DutyOutOfRange`], and those of [`simulate`] for a burst.
pub fn predict(
    band: Band,
    peak_dbuv: f64,
    evidence: &Evidence,
) -> Result<Prediction, DetectorError> {
    if !peak_dbuv.is_finite() {
        return Err(DetectorError::LevelNotFinite {
            level_dbuv: peak_dbuv,
        });
    }
    let (qp, qp_u, av, av_u, basis) = match *evidence {
        Evidence::StableLine => cw(),
        Evidence::Impulsive { prf_hz } => impulsive(band, prf_hz)?,
        Evidence::Dithered {
            sweep_hz,
            rate_hz,
            profile,
        } => dithered(band, sweep_hz, rate_hz, profile)?,
        Evidence::Burst { rate_hz, duty } => burst(band, rate_hz, duty)?,
    };
    Ok(Prediction {
        band,
        peak_dbuv,
        quasi_peak_dbuv: peak_dbuv + qp,
        quasi_peak_uncertainty_db: qp_u,
        average_dbuv: peak_dbuv + av,
        average_uncertainty_db: av_u,
        basis,
    })
}

/// (QP − PK, its uncertainty, AV − PK, its uncertainty, basis), dB.
type Relative = (f64, f64, f64, f64, Basis);

fn cw() -> Relative {
    (0.0, CW_UNCERTAINTY_DB, 0.0, CW_UNCERTAINTY_DB, Basis::Cw)
}

fn impulsive(band: Band, prf_hz: f64) -> Result<Relative, DetectorError> {
    if !(prf_hz.is_finite() && prf_hz > 0.0) {
        return Err(DetectorError::NotPositive {
            what: "pulse repetition frequency (Hz)",
            value: prf_hz,
        });
    }
    if prf_hz >= 4.0 * band.impulse_bandwidth_hz() {
        return Ok(cw());
    }
    let model = impulse_response(band, Some(prf_hz))?;
    let standard = standard_relative_qp(band, Some(prf_hz))?;
    let gap = (model.qp_minus_peak_db - standard).abs();
    Ok((
        0.5 * (model.qp_minus_peak_db + standard),
        standard_tolerance_db(band, Some(prf_hz)) + 0.5 * gap,
        model.av_minus_peak_db,
        AV_UNCERTAINTY_DB,
        Basis::PulseResponse,
    ))
}

fn dithered(
    band: Band,
    sweep_hz: f64,
    rate_hz: Option<f64>,
    profile: Option<Profile>,
) -> Result<Relative, DetectorError> {
    let rates: Vec<f64> = match rate_hz {
        Some(r) => vec![r],
        None => dither_rates_hz(band).to_vec(),
    };
    let profiles = match profile {
        Some(p) => vec![p],
        None => vec![Profile::Triangular, Profile::Sinusoidal],
    };
    let (mut qp_lo, mut qp_hi, mut av_lo, mut av_hi) = (f64::MAX, f64::MIN, f64::MAX, f64::MIN);
    for &r in &rates {
        for &p in &profiles {
            let d = dither_response(band, sweep_hz, r, p)?;
            qp_lo = qp_lo.min(d.qp_minus_peak_db);
            qp_hi = qp_hi.max(d.qp_minus_peak_db);
            av_lo = av_lo.min(d.av_minus_peak_db);
            av_hi = av_hi.max(d.av_minus_peak_db);
        }
    }
    if qp_lo > qp_hi {
        return Ok(cw());
    }
    let tol = standard_tolerance_db(band, rate_hz.map(|r| 2.0 * r));
    Ok((
        0.5 * (qp_lo + qp_hi),
        0.5 * (qp_hi - qp_lo) + tol,
        0.5 * (av_lo + av_hi),
        0.5 * (av_hi - av_lo) + AV_UNCERTAINTY_DB,
        Basis::DitherTable,
    ))
}

fn burst(band: Band, rate_hz: f64, duty: f64) -> Result<Relative, DetectorError> {
    if !(duty.is_finite() && duty > 0.0 && duty < 1.0) {
        return Err(DetectorError::DutyOutOfRange { duty });
    }
    if !(rate_hz.is_finite() && rate_hz > 0.0) {
        return Err(DetectorError::NotPositive {
            what: "burst repetition rate (Hz)",
            value: rate_hz,
        });
    }
    let signal = Signal::Burst {
        carrier: Gated::Cw {
            amplitude_uv: 1.0,
            offset_hz: 0.0,
        },
        on_s: duty / rate_hz,
        rate_hz,
    };
    let r = simulate(band, &signal, &ModelSettings::coarse())?;
    Ok((
        r.qp_minus_peak_db(),
        standard_tolerance_db(band, Some(rate_hz)),
        r.av_minus_peak_db(),
        AV_UNCERTAINTY_DB,
        Basis::BurstModel,
    ))
}
