//! Limit lines: published tables ([`builtin`], [`all_builtin`]), user files ([`read_limit_file`])
//! and per-point margins ([`margins`]).
//!
//! ```
//! use spurhound::limits::builtin;
//! let b = builtin("cispr32-b-qp").unwrap();
//! assert_eq!(b.at(150e3), Some(66.0));
//! assert_eq!(b.at(5e6), Some(56.0)); // the lower limit at the transition frequency
//! ```

pub mod file;
pub mod interpolate;
pub mod margins;
pub mod tables;

pub use file::{parse_limit, read_limit_file};
pub use margins::{Exceedance, Margins, WorstPoint, margins};

use crate::scan::{Detector, ScanError};
use crate::units::Quantity;

/// A limit line.
#[derive(Debug, Clone, PartialEq)]
pub struct Limit {
    /// Short name (`cispr32-b-qp`) or the file it was read from.
    pub name: String,
    /// Human title.
    pub title: String,
    /// The detector the limit applies to.
    pub detector: Detector,
    /// What the limit bounds: dBµV at a port, dBµV/m in a field.
    pub quantity: Quantity,
    /// Where the values come from and their status.
    pub source: String,
    /// `(freq_hz, limit_dbuv)` in ascending frequency; a step is two vertices at one frequency.
    pub vertices: Vec<(f64, f64)>,
}

impl Limit {
    /// The limit at `freq_hz`, or `None` outside the line's range (see
    /// [`interpolate::log_interp`] for the rule at steps).
    pub fn at(&self, freq_hz: f64) -> Option<f64> {
        interpolate::log_interp(&self.vertices, freq_hz)
    }

    /// [`Limit::at`] at each frequency of a trace (one pass; see
    /// [`interpolate::log_interp_all`]).
    pub fn at_all<'a>(&self, freqs_hz: impl IntoIterator<Item = &'a f64>) -> Vec<Option<f64>> {
        interpolate::log_interp_all(&self.vertices, freqs_hz)
    }

    /// First and last frequency of the line in Hz.
    pub fn range_hz(&self) -> (f64, f64) {
        match (self.vertices.first(), self.vertices.last()) {
            (Some(a), Some(b)) => (a.0, b.0),
            _ => (0.0, 0.0),
        }
    }
}

/// A built-in limit by name (case-insensitive).
pub fn builtin(name: &str) -> Option<Limit> {
    tables::all()
        .into_iter()
        .find(|l| l.name.eq_ignore_ascii_case(name.trim()))
}

/// Every built-in limit.
pub fn all_builtin() -> Vec<Limit> {
    tables::all()
}

/// A built-in name or else a limit file.
///
/// # Errors
/// [`LimitError::Unknown`] when `name_or_path` is neither a built-in name nor an existing file;
/// else the file's errors.
pub fn resolve(name_or_path: &str) -> Result<Limit, LimitError> {
    if let Some(l) = builtin(name_or_path) {
        return Ok(l);
    }
    let path = std::path::Path::new(name_or_path);
    if path.exists() {
        return read_limit_file(path);
    }
    let known = tables::all()
        .iter()
        .map(|l| l.name.clone())
        .collect::<Vec<_>>()
        .join(", ");
    Err(LimitError::Unknown {
        name: name_or_path.to_string(),
        known,
    })
}

/// What can be wrong with a limit.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
#[non_exhaustive]
pub enum LimitError {
    #[error(
        "`{name}` is neither a built-in limit nor a file; built-in limits: {known} (see `spurhound limits`)"
    )]
    Unknown { name: String, known: String },
    #[error(transparent)]
    File(#[from] ScanError),
    #[error(
        "{file}:{line}: a third row at {freq_hz} Hz; a step is exactly two rows at one frequency"
    )]
    StepTooLong {
        file: String,
        line: usize,
        freq_hz: f64,
    },
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn every_builtin_is_ascending_and_named_uniquely() {
        let all = all_builtin();
        for l in &all {
            assert!(
                l.vertices.windows(2).all(|w| w[0].0 <= w[1].0),
                "{}",
                l.name
            );
            assert_eq!(all.iter().filter(|m| m.name == l.name).count(), 1);
        }
    }

    #[test]
    fn unknown_name_lists_the_known_ones() {
        let err = resolve("cispr99-z").unwrap_err();
        assert!(err.to_string().contains("cispr32-b-qp"), "{err}");
    }
}
