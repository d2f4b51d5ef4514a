//! CISPR 16-1-1 measuring-receiver bands: bandwidth and detector time constants.

use super::DetectorError;
use serde::Serialize;
use std::fmt;

/// A CISPR 16-1-1 frequency band of the measuring receiver.
///
/// | Band | Range | 6 dB RBW | QP charge | QP discharge | QP meter | AV meter |
/// |---|---|---|---|---|---|---|
/// | A | 9-150 kHz | 200 Hz | 45 ms | 500 ms | 160 ms | 160 ms |
/// | B | 0.15-30 MHz | 9 kHz | 1 ms | 160 ms | 160 ms | 160 ms |
/// | CD | 30-1000 MHz | 120 kHz | 1 ms | 550 ms | 100 ms | 100 ms |
///
/// # Source
/// CISPR 16-1-1 receiver parameters as listed in METHODS.md §2 (bandwidths and QP time
/// constants confirmed there; the average-meter time constants are marked from memory).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum Band {
    /// 9 kHz to 150 kHz.
    A,
    /// 150 kHz to 30 MHz.
    B,
    /// 30 MHz to 1 GHz (CISPR bands C and D share their settings).
    CD,
}

/// √(π / (4·ln 2)): the impulse bandwidth of a Gaussian filter in units of its 6 dB bandwidth.
///
/// # Formula
/// ```text
/// |H(f)| = exp(−a·f²), a = 4·ln2 / B6²    (|H(±B6/2)| = 1/2, i.e. −6 dB)
/// B_imp = ∫|H(f)| df / |H(0)| = √(π/a) = B6·√(π/(4·ln2)) = 1.0645·B6
/// ```
/// # Source
/// Derived (METHODS.md §6: B_imp = 1.0645·B6); the impulse bandwidth is the constant relating
/// an impulse's area to the filter's peak response (IEEE Std 376-1975, METHODS.md §6).
pub const GAUSSIAN_IMPULSE_PER_6DB: f64 = 1.064_467_019_431_226;

impl Band {
    /// The three bands, lowest first.
    pub const ALL: [Band; 3] = [Band::A, Band::B, Band::CD];

    /// The band whose receiver settings apply at `freq_hz`.
    ///
    /// The ranges are [9 kHz, 150 kHz), [150 kHz, 30 MHz] and (30 MHz, 1 GHz]: exactly
    /// 150 kHz is the first point of a conducted scan (band B), exactly 30 MHz its last
    /// point (band B too). A radiated scan starting at 30 MHz should name [`Band::CD`].
    ///
    /// # Errors
    /// [`DetectorError::FrequencyOutsideBands`] below 9 kHz, above 1 GHz or not finite.
    pub fn for_freq(freq_hz: f64) -> Result<Band, DetectorError> {
        match freq_hz {
            f if (9e3..150e3).contains(&f) => Ok(Band::A),
            f if (150e3..=30e6).contains(&f) => Ok(Band::B),
            f if f > 30e6 && f <= 1e9 => Ok(Band::CD),
            _ => Err(DetectorError::FrequencyOutsideBands { freq_hz }),
        }
    }

    /// Lowest and highest frequency of the band, Hz.
    pub fn range_hz(self) -> (f64, f64) {
        match self {
            Band::A => (9e3, 150e3),
            Band::B => (150e3, 30e6),
            Band::CD => (30e6, 1e9),
        }
    }

    /// 6 dB resolution bandwidth B6, Hz.
    pub fn rbw_6db_hz(self) -> f64 {
        match self {
            Band::A => 200.0,
            Band::B => 9e3,
            Band::CD => 120e3,
        }
    }

    /// Impulse bandwidth of the Gaussian model filter, Hz: `B_imp = 1.0645·B6`
    /// (see [`GAUSSIAN_IMPULSE_PER_6DB`]). Band B: 9.58 kHz (METHODS.md §6).
    pub fn impulse_bandwidth_hz(self) -> f64 {
        GAUSSIAN_IMPULSE_PER_6DB * self.rbw_6db_hz()
    }

    /// Quasi-peak charge time constant τc, s.
    pub fn qp_charge_s(self) -> f64 {
        match self {
            Band::A => 45e-3,
            Band::B | Band::CD => 1e-3,
        }
    }

    /// Quasi-peak discharge time constant τd, s.
    pub fn qp_discharge_s(self) -> f64 {
        match self {
            Band::A => 500e-3,
            Band::B => 160e-3,
            Band::CD => 550e-3,
        }
    }

    /// Time constant T_L of the quasi-peak meter (critically damped), s.
    pub fn qp_meter_s(self) -> f64 {
        match self {
            Band::A | Band::B => 160e-3,
            Band::CD => 100e-3,
        }
    }

    /// Time constant of the average detector's meter (critically damped), s.
    pub fn average_meter_s(self) -> f64 {
        match self {
            Band::A | Band::B => 160e-3,
            Band::CD => 100e-3,
        }
    }

    /// Magnitude of the model filter's response at `offset_hz` from the tuned frequency.
    ///
    /// # Formula
    /// ```text
    /// |H(f)| = exp(−a·f²) = exp(−π·(f / B_imp)²),  a = 4·ln2 / B6² = π / B_imp²
    /// ```
    /// # Source
    /// The Gaussian IF of the idealised model, METHODS.md §3.
    pub fn filter_gain(self, offset_hz: f64) -> f64 {
        let x = offset_hz / self.impulse_bandwidth_hz();
        (-std::f64::consts::PI * x * x).exp()
    }

    /// Short name: `A`, `B`, `C/D`.
    pub fn name(self) -> &'static str {
        match self {
            Band::A => "A",
            Band::B => "B",
            Band::CD => "C/D",
        }
    }
}

impl fmt::Display for Band {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(f, "band {}", self.name())
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn bands_follow_the_frequency() {
        // source: CISPR 16-1-1 band ranges, METHODS.md §2
        assert_eq!(Band::for_freq(9e3), Ok(Band::A));
        assert_eq!(Band::for_freq(149_999.0), Ok(Band::A));
        assert_eq!(Band::for_freq(150e3), Ok(Band::B));
        assert_eq!(Band::for_freq(30e6), Ok(Band::B));
        assert_eq!(Band::for_freq(30.000_001e6), Ok(Band::CD));
        assert_eq!(Band::for_freq(1e9), Ok(Band::CD));
        assert!(Band::for_freq(8e3).is_err());
        assert!(Band::for_freq(1.1e9).is_err());
        assert!(Band::for_freq(f64::NAN).is_err());
    }

    #[test]
    fn impulse_bandwidth_is_that_of_the_gaussian() {
        // source: derived, METHODS.md §6: B_imp = √(π/(4 ln2))·B6 = 1.0645·B6; band B 9.58 kHz
        let derived = (std::f64::consts::PI / (4.0 * 2f64.ln())).sqrt();
        assert!((GAUSSIAN_IMPULSE_PER_6DB - derived).abs() < 1e-12);
        assert!((Band::B.impulse_bandwidth_hz() - 9580.2).abs() < 0.1);
        // the integral of |H| over frequency equals B_imp (trapezoid over ±5 B_imp)
        let b = Band::B.impulse_bandwidth_hz();
        let n = 4000;
        let h = 10.0 * b / n as f64;
        let area: f64 = (0..=n)
            .map(|i| Band::B.filter_gain(-5.0 * b + i as f64 * h) * h)
            .sum();
        assert!((area / b - 1.0).abs() < 1e-9);
    }

    #[test]
    fn filter_is_6_db_down_at_half_the_rbw() {
        // source: definition of the 6 dB bandwidth, |H(B6/2)| = 1/2
        for band in Band::ALL {
            let g = band.filter_gain(band.rbw_6db_hz() / 2.0);
            assert!((g - 0.5).abs() < 1e-12, "{band}");
        }
    }
}
