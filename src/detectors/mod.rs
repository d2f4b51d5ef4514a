//! The CISPR 16-1-1 measuring receiver as a model: peak, quasi-peak and average readings of
//! CW, impulsive, burst and dithered signals, and predicted QP/AV for a peak-only scan.
//!
//! - [`Band`] holds each band's resolution bandwidth and detector time constants.
//! - [`Signal`] describes what reaches the receiver; [`Signal::envelope_uv`] gives its IF
//!   envelope through the band's Gaussian filter.
//! - [`simulate`] runs the detectors in the time domain to their steady state;
//!   [`simulate_dwell`] measures for a finite dwell from rest. The quasi-peak diode rectifies
//!   the IF carrier ([`ChargeLaw::Carrier`], the default), which meets the standard's
//!   pulse-response table in every band; [`ChargeLaw::Envelope`] is the idealised model of
//!   METHODS.md §3.
//! - [`impulse_response`] and [`dither_response`] read precomputed tables of QP and AV
//!   relative to peak; [`standard_pulse_response_db`] is the standard's pulse-response curve.
//! - [`predict`] turns a peak reading and the evidence about the emission into predicted QP and
//!   AV with an uncertainty.
//! - [`dwell_s`] and [`plan_sweep`] size a QP/AV re-measurement.
//!
//! Amplitudes are rms µV, impulse areas µV·s, readings dBµV (`20·log10` of µV).
//!
//! # Example
//! ```
//! use spurhound::detectors::{simulate, Band, ModelSettings, Signal};
//! // The band B reference impulse, 0.316 µV·s at 100 Hz, reads like a 66 dBµV sine on the
//! // quasi-peak detector (CISPR 16-1-1 calibration, METHODS.md §3 [from memory]).
//! let pulses = Signal::PulseTrain { area_uv_s: 0.316, prf_hz: 100.0, offset_hz: 0.0 };
//! let r = simulate(Band::B, &pulses, &ModelSettings::coarse())?;
//! assert!((r.quasi_peak_dbuv - 66.0).abs() < 0.3);
//! // Its peak is √2·IS·B_imp = 72.6 dBµV (derived, METHODS.md §3).
//! assert!((r.peak_dbuv - 72.63).abs() < 0.05);
//! # Ok::<(), spurhound::detectors::DetectorError>(())
//! ```

mod band;
mod dwell;
mod grid;
mod model;
mod predict;
mod signal;
mod table;
mod table_data;

pub use band::{Band, GAUSSIAN_IMPULSE_PER_6DB};
pub use dwell::{
    SweepPlan, SweepSegment, UNKNOWN_SIGNAL_DWELL_S, dwell_s, meter_settling_s, plan_sweep,
    qp_settling_s, sweep_points,
};
pub use model::{
    ChargeCalibration, ChargeLaw, ModelSettings, Readings, charge_calibration, simulate,
    simulate_dwell,
};
pub use predict::{Basis, Evidence, Prediction, predict};
pub use signal::{
    Gated, MAX_DITHER_RATE_PER_BIMP, MAX_GATED_PRF_PER_BIMP, MAX_TUNED_BURST_RATE_PER_BIMP,
    Profile, Signal,
};
pub use table::{
    DitherRelative, ImpulseRelative, dither_response, dither_table_axes, dither_tunings_hz,
    impulse_response, impulse_table_prfs, model_dither_response, model_impulse_response,
    standard_pulse_response_db, standard_tolerance_db,
};

/// Errors of the detector model and predictions.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
#[non_exhaustive]
pub enum DetectorError {
    #[error("{freq_hz} Hz is outside the CISPR 16-1-1 bands (9 kHz to 1 GHz)")]
    FrequencyOutsideBands { freq_hz: f64 },
    #[error("{what} must be positive and finite, got {value}")]
    NotPositive { what: &'static str, value: f64 },
    #[error("{what} must be finite, got {value}")]
    NotFinite { what: &'static str, value: f64 },
    #[error(
        "a burst on for {on_s} s cannot repeat every {period_s} s; give an on time up to the period"
    )]
    BurstTooLong { on_s: f64, period_s: f64 },
    #[error(
        "the bursts are off for {off_s} s, under the {min_s} s the filter needs to let one burst \
         die away before the next; model them as one longer burst or as a modulated CW"
    )]
    BurstGapTooShort { off_s: f64, min_s: f64 },
    #[error(
        "a gated pulse train at {prf_hz} Hz is above {max_hz} Hz, where its lines are resolved; \
         model the line nearest the tuning as a gated CW of rms √2·area·PRF"
    )]
    GatedPulsesTooDense { prf_hz: f64, max_hz: f64 },
    #[error(
        "a dither rate of {rate_hz} Hz is above {max_hz} Hz (a tenth of the impulse bandwidth), \
         outside the quasi-static envelope model"
    )]
    DitherTooFast { rate_hz: f64, max_hz: f64 },
    #[error(
        "a tuned burst repeating at {rate_hz} Hz is above {max_hz} Hz; the gating sidebands \
         lie outside the filter, model it as a CW of duty × amplitude"
    )]
    BurstRateTooHigh { rate_hz: f64, max_hz: f64 },
    #[error(
        "the signal's period needs more than {max_steps} integration steps; give a faster \
         repetition or a shorter burst"
    )]
    GridTooLarge { max_steps: usize },
    #[error("a dwell of {dwell_s} s is more than the model integrates ({max_s} s for this signal)")]
    DwellTooLong { dwell_s: f64, max_s: f64 },
    #[error("duty cycle must be in (0, 1), got {duty}")]
    DutyOutOfRange { duty: f64 },
    #[error("model setting {field} out of range: {value}")]
    Settings { field: &'static str, value: f64 },
    #[error("peak reading must be a finite level in dBµV, got {level_dbuv}")]
    LevelNotFinite { level_dbuv: f64 },
}

/// A voltage in µV as dBµV: `20·log10(x / 1 µV)` (METHODS.md §4).
pub(crate) fn dbuv(uv: f64) -> f64 {
    20.0 * uv.log10()
}
