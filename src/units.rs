//! Frequency and level units, and the only place where they are converted.
//!
//! ```
//! use spurhound::units::{LevelUnit, FreqUnit};
//! assert_eq!(FreqUnit::MHz.to_hz(1.5), 1.5e6);
//! // 0 dBm in 50 Ω is 106.99 dBµV (derived: 20·log10(√(1 mW·50 Ω)/1 µV)).
//! assert!((LevelUnit::DbM.to_canonical(0.0) - 106.99).abs() < 0.01);
//! ```

use serde::{Deserialize, Serialize};
use std::fmt;

/// dBµV of 0 dBm in a 50 Ω system.
///
/// # Formula
/// ```text
/// 20·log10(√(1e-3 W · 50 Ω) / 1e-6 V) = 106.9897 dB
/// ```
/// # Source
/// Derived from P = V²/R; the rounded 107 dB is the trade's figure (dBµV = dBm + 107).
pub const DBM_TO_DBUV_50_OHM: f64 = 106.989_700_043_360_2;

/// dBµV of 0 dBmV: 20·log10(1 mV / 1 µV) = 60 dB (1 mV = 60 dBµV, common practice).
pub const DBMV_TO_DBUV: f64 = 60.0;

/// A frequency unit of a scan column.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
pub enum FreqUnit {
    Hz,
    KHz,
    MHz,
    GHz,
}

impl FreqUnit {
    /// Hertz per unit.
    pub fn scale(self) -> f64 {
        match self {
            FreqUnit::Hz => 1.0,
            FreqUnit::KHz => 1e3,
            FreqUnit::MHz => 1e6,
            FreqUnit::GHz => 1e9,
        }
    }

    /// A value in this unit, in hertz.
    pub fn to_hz(self, value: f64) -> f64 {
        value * self.scale()
    }

    /// Reads a unit name (`Hz`, `kHz`, `MHz`, `GHz`, any case).
    pub fn parse(text: &str) -> Option<FreqUnit> {
        match text.trim().to_ascii_lowercase().as_str() {
            "hz" => Some(FreqUnit::Hz),
            "khz" => Some(FreqUnit::KHz),
            "mhz" => Some(FreqUnit::MHz),
            "ghz" => Some(FreqUnit::GHz),
            _ => None,
        }
    }

    /// Finds a frequency unit named inside a header cell such as `Frequency (MHz)` or `freq_hz`.
    pub fn find_in(text: &str) -> Option<FreqUnit> {
        let words = unit_words(text);
        words.iter().find_map(|w| FreqUnit::parse(w))
    }
}

impl fmt::Display for FreqUnit {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(match self {
            FreqUnit::Hz => "Hz",
            FreqUnit::KHz => "kHz",
            FreqUnit::MHz => "MHz",
            FreqUnit::GHz => "GHz",
        })
    }
}

/// The physical quantity a level measures; it decides which limits apply.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "kebab-case")]
pub enum Quantity {
    /// Voltage at the receiver or LISN port, dBµV.
    Voltage,
    /// Field strength, dBµV/m (after an antenna factor).
    FieldStrength,
    /// Current, dBµA (current probe).
    Current,
}

impl Quantity {
    /// The canonical unit of the quantity.
    pub fn unit(self) -> &'static str {
        match self {
            Quantity::Voltage => "dBuV",
            Quantity::FieldStrength => "dBuV/m",
            Quantity::Current => "dBuA",
        }
    }
}

/// A level unit of a scan column.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
pub enum LevelUnit {
    DbUv,
    DbM,
    DbMv,
    DbUa,
    DbUvPerM,
}

impl LevelUnit {
    /// Reads a unit name: `dBuV`/`dBµV`, `dBm`, `dBmV`, `dBuA`, `dBuV/m` (any case).
    pub fn parse(text: &str) -> Option<LevelUnit> {
        let t = normalise_unit(text);
        match t.as_str() {
            "dbuv" => Some(LevelUnit::DbUv),
            "dbm" => Some(LevelUnit::DbM),
            "dbmv" => Some(LevelUnit::DbMv),
            "dbua" => Some(LevelUnit::DbUa),
            "dbuv/m" => Some(LevelUnit::DbUvPerM),
            _ => None,
        }
    }

    /// Finds a level unit named inside a header cell such as `Level [dBµV]` or `level_dbm`.
    pub fn find_in(text: &str) -> Option<LevelUnit> {
        let t = normalise_unit(text);
        // Longest names first: "dbuv/m" contains "dbuv", "dbmv" contains "dbm".
        const ORDER: [(&str, LevelUnit); 5] = [
            ("dbuv/m", LevelUnit::DbUvPerM),
            ("dbmv", LevelUnit::DbMv),
            ("dbuv", LevelUnit::DbUv),
            ("dbua", LevelUnit::DbUa),
            ("dbm", LevelUnit::DbM),
        ];
        ORDER
            .iter()
            .find(|(name, _)| t.contains(name))
            .map(|(_, u)| *u)
    }

    /// The quantity this unit measures.
    pub fn quantity(self) -> Quantity {
        match self {
            LevelUnit::DbUv | LevelUnit::DbM | LevelUnit::DbMv => Quantity::Voltage,
            LevelUnit::DbUa => Quantity::Current,
            LevelUnit::DbUvPerM => Quantity::FieldStrength,
        }
    }

    /// A level in this unit, in the canonical unit of its quantity (dBµV, dBµA or dBµV/m).
    ///
    /// # Formula
    /// ```text
    /// dBµV = dBm + 106.99 (50 Ω);  dBµV = dBmV + 60
    /// ```
    /// # Source
    /// Derived from the unit definitions (see [`DBM_TO_DBUV_50_OHM`]).
    pub fn to_canonical(self, value: f64) -> f64 {
        match self {
            LevelUnit::DbM => value + DBM_TO_DBUV_50_OHM,
            LevelUnit::DbMv => value + DBMV_TO_DBUV,
            LevelUnit::DbUv | LevelUnit::DbUa | LevelUnit::DbUvPerM => value,
        }
    }

    /// The inverse of [`LevelUnit::to_canonical`].
    pub fn from_canonical(self, value: f64) -> f64 {
        match self {
            LevelUnit::DbM => value - DBM_TO_DBUV_50_OHM,
            LevelUnit::DbMv => value - DBMV_TO_DBUV,
            LevelUnit::DbUv | LevelUnit::DbUa | LevelUnit::DbUvPerM => value,
        }
    }
}

impl fmt::Display for LevelUnit {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(match self {
            LevelUnit::DbUv => "dBuV",
            LevelUnit::DbM => "dBm",
            LevelUnit::DbMv => "dBmV",
            LevelUnit::DbUa => "dBuA",
            LevelUnit::DbUvPerM => "dBuV/m",
        })
    }
}

/// Lower-case, micro sign and Greek mu as `u`, brackets and blanks removed:
/// `dB(µV/m)` and `dBμV/m` both become `dbuv/m`.
fn normalise_unit(text: &str) -> String {
    text.chars()
        .filter(|c| !matches!(c, ' ' | '(' | ')' | '[' | ']' | '{' | '}'))
        .map(|c| match c {
            'µ' | 'μ' => 'u',
            c => c.to_ascii_lowercase(),
        })
        .collect()
}

/// Splits a header cell into unit-sized words: `Frequency (MHz)` gives `Frequency`, `MHz`;
/// `freq_hz` gives `freq`, `hz`.
fn unit_words(text: &str) -> Vec<&str> {
    text.split(|c: char| !c.is_alphanumeric())
        .filter(|w| !w.is_empty())
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn dbm_to_dbuv_is_the_50_ohm_relation() {
        // source: derived, 20·log10(√(1e-3 · 50) / 1e-6) = 106.99
        let derived = 20.0 * ((1e-3_f64 * 50.0).sqrt() / 1e-6).log10();
        assert!((DBM_TO_DBUV_50_OHM - derived).abs() < 1e-9);
        assert!((LevelUnit::DbM.to_canonical(-40.0) - 66.99).abs() < 0.005);
    }

    #[test]
    fn one_millivolt_is_sixty_dbuv() {
        // source: common practice, 1 mV = 60 dBµV = 0 dBmV
        assert_eq!(LevelUnit::DbMv.to_canonical(0.0), 60.0);
        assert!((20.0 * (1e-3_f64 / 1e-6).log10() - 60.0).abs() < 1e-12);
    }

    #[test]
    fn round_trips_are_identities() {
        for unit in [
            LevelUnit::DbUv,
            LevelUnit::DbM,
            LevelUnit::DbMv,
            LevelUnit::DbUvPerM,
        ] {
            let x = 37.25;
            assert!((unit.from_canonical(unit.to_canonical(x)) - x).abs() < 1e-12);
        }
    }

    #[test]
    fn units_are_found_in_header_cells() {
        assert_eq!(FreqUnit::find_in("Frequency (MHz)"), Some(FreqUnit::MHz));
        assert_eq!(FreqUnit::find_in("freq_hz"), Some(FreqUnit::Hz));
        assert_eq!(FreqUnit::find_in("Frequency"), None);
        assert_eq!(LevelUnit::find_in("Level [dBµV]"), Some(LevelUnit::DbUv));
        assert_eq!(
            LevelUnit::find_in("Level dBμV/m"),
            Some(LevelUnit::DbUvPerM)
        );
        assert_eq!(LevelUnit::find_in("dB(uV/m)"), Some(LevelUnit::DbUvPerM));
        assert_eq!(LevelUnit::find_in("level_dbmv"), Some(LevelUnit::DbMv));
        assert_eq!(LevelUnit::find_in("Amplitude (dBm)"), Some(LevelUnit::DbM));
        assert_eq!(LevelUnit::find_in("Amplitude"), None);
    }
}
