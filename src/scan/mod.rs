//! Scans: a trace of (frequency, level) points with the metadata that says how it was taken.
//!
//! Readers live in [`table`] (the numeric-table reader shared by scans, limit files and
//! transducer files) and [`csv`] (units, metadata and checks that make a [`Scan`]).
//!
//! ```
//! use spurhound::scan::{read_scan_str, ReadOptions};
//! let text = "# rbw_hz = 9000\nFrequency (MHz);Level (dBm)\n0,15;-40,5\n0,2;-45\n";
//! let read = read_scan_str(text, "bench.csv", &ReadOptions::default())?;
//! assert_eq!(read.scan.freq_hz[0], 150_000.0);
//! assert!((read.scan.level_dbuv[0] - 66.49).abs() < 0.01); // -40.5 dBm + 106.99
//! assert_eq!(read.scan.meta.rbw_hz, Some(9000.0));
//! # Ok::<(), spurhound::scan::ScanError>(())
//! ```

pub mod csv;
pub mod table;

pub use self::csv::{
    IngestNotes, ReadOptions, ReadOutcome, read_scan_file, read_scan_str, write_scan_csv,
};
pub use crate::units::Quantity;

use ndarray::Array1;
use serde::{Deserialize, Serialize};
use std::fmt;

/// A measured or rendered trace.
#[derive(Debug, Clone, PartialEq)]
pub struct Scan {
    /// Frequencies in Hz, strictly ascending, all positive.
    pub freq_hz: Array1<f64>,
    /// Levels in dBµV (or dBµV/m, dBµA as `meta.quantity` says), one per frequency.
    pub level_dbuv: Array1<f64>,
    /// How the trace was taken.
    pub meta: ScanMeta,
}

impl Scan {
    /// A scan from two equally long vectors; checks lengths, finiteness and order.
    ///
    /// # Errors
    /// [`ScanError::TooFewPoints`], [`ScanError::NotFinite`], [`ScanError::NotAscending`] or
    /// [`ScanError::DuplicateFrequency`] (line numbers are point indices + 1 here).
    pub fn new(freq_hz: Vec<f64>, level_dbuv: Vec<f64>, meta: ScanMeta) -> Result<Scan, ScanError> {
        let file = meta
            .source
            .clone()
            .unwrap_or_else(|| "<memory>".to_string());
        if freq_hz.len() != level_dbuv.len() || freq_hz.len() < 2 {
            return Err(ScanError::TooFewPoints {
                file,
                found: freq_hz.len().min(level_dbuv.len()),
            });
        }
        for (i, (&f, &l)) in freq_hz.iter().zip(&level_dbuv).enumerate() {
            if !f.is_finite() || !l.is_finite() {
                let text = format!("{f}, {l}");
                return Err(ScanError::NotFinite {
                    file,
                    line: i + 1,
                    text,
                });
            }
            if f <= 0.0 {
                return Err(ScanError::FrequencyNotPositive {
                    file,
                    line: i + 1,
                    freq_hz: f,
                });
            }
        }
        csv::check_ascending(&file, &freq_hz, |i| i + 1)?;
        Ok(Scan {
            freq_hz: Array1::from(freq_hz),
            level_dbuv: Array1::from(level_dbuv),
            meta,
        })
    }

    /// Number of points.
    pub fn len(&self) -> usize {
        self.freq_hz.len()
    }

    /// Always false for a checked scan (at least two points); here for clippy's sake.
    pub fn is_empty(&self) -> bool {
        self.freq_hz.is_empty()
    }

    /// First and last frequency in Hz.
    pub fn span_hz(&self) -> (f64, f64) {
        let n = self.freq_hz.len();
        if n == 0 {
            (0.0, 0.0)
        } else {
            (self.freq_hz[0], self.freq_hz[n - 1])
        }
    }

    /// A name for messages: the title, else the source file, else "scan".
    pub fn label(&self) -> String {
        self.meta
            .title
            .clone()
            .or_else(|| self.meta.source.clone())
            .unwrap_or_else(|| "scan".to_string())
    }
}

/// Metadata of a scan. Fields a file does not state stay `None`.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct ScanMeta {
    /// Resolution bandwidth in Hz (CISPR receivers state it at -6 dB).
    pub rbw_hz: Option<f64>,
    /// Video bandwidth in Hz.
    pub vbw_hz: Option<f64>,
    /// Detector the trace was taken with.
    pub detector: Option<Detector>,
    /// What the scan shows: the device under test, the lab's ambient, or the receiver's floor.
    pub role: Role,
    /// Quantity of the levels (voltage, field strength, current).
    pub quantity: Quantity,
    /// A title from the file.
    pub title: Option<String>,
    /// The file the scan was read from.
    pub source: Option<String>,
    /// Other `key = value` metadata, in file order.
    pub extra: Vec<(String, String)>,
}

impl Default for ScanMeta {
    fn default() -> Self {
        ScanMeta {
            rbw_hz: None,
            vbw_hz: None,
            detector: None,
            role: Role::Dut,
            quantity: Quantity::Voltage,
            title: None,
            source: None,
            extra: Vec::new(),
        }
    }
}

/// Receiver detector (CISPR 16-1-1 names).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "kebab-case")]
pub enum Detector {
    Peak,
    QuasiPeak,
    Average,
    Rms,
    Sample,
}

impl Detector {
    /// Reads a detector name as files and instruments write it: `peak`, `pk`, `positive peak`,
    /// `quasi-peak`, `qp`, `average`, `avg`, `cispr average`, `rms`, `sample`.
    pub fn parse(text: &str) -> Option<Detector> {
        let t: String = text
            .chars()
            .filter(|c| c.is_ascii_alphanumeric())
            .collect::<String>()
            .to_ascii_lowercase();
        match t.as_str() {
            "peak" | "pk" | "pospeak" | "positivepeak" | "maxpeak" | "posp" => Some(Detector::Peak),
            "quasipeak" | "qp" | "qpeak" | "cisprqp" | "cisprquasipeak" => {
                Some(Detector::QuasiPeak)
            }
            "average" | "avg" | "av" | "cispraverage" | "cispravg" | "ave" => {
                Some(Detector::Average)
            }
            "rms" | "cisprrms" => Some(Detector::Rms),
            "sample" | "smp" => Some(Detector::Sample),
            _ => None,
        }
    }

    /// The kebab-case name used in files and JSON.
    pub fn name(self) -> &'static str {
        match self {
            Detector::Peak => "peak",
            Detector::QuasiPeak => "quasi-peak",
            Detector::Average => "average",
            Detector::Rms => "rms",
            Detector::Sample => "sample",
        }
    }
}

impl fmt::Display for Detector {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(self.name())
    }
}

/// What a scan shows.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "kebab-case")]
pub enum Role {
    /// The device under test is powered and running.
    Dut,
    /// The device is off: the lab's ambient.
    Ambient,
    /// The receiver's own noise floor (input terminated).
    Floor,
}

impl Role {
    /// Reads `dut`, `ambient` or `floor`.
    pub fn parse(text: &str) -> Option<Role> {
        match text.trim().to_ascii_lowercase().as_str() {
            "dut" | "eut" => Some(Role::Dut),
            "ambient" => Some(Role::Ambient),
            "floor" | "noise-floor" | "noise floor" => Some(Role::Floor),
            _ => None,
        }
    }
}

/// What can be wrong with a scan, limit or transducer file. Every variant names the file and,
/// where there is one, the line.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
#[non_exhaustive]
pub enum ScanError {
    #[error("{file}: cannot read the file: {reason}")]
    Io { file: String, reason: String },
    #[error("{file}: the file is empty; expected rows like `150000,42.1` (frequency, level)")]
    Empty { file: String },
    #[error("{file}: no numeric rows found; expected rows like `150000,42.1` (frequency, level)")]
    NoData { file: String },
    #[error("{file}: {found} data point(s); at least 2 are needed")]
    TooFewPoints { file: String, found: usize },
    #[error("{file}:{line}: expected a number in column {column}, found `{text}`")]
    BadNumber {
        file: String,
        line: usize,
        column: usize,
        text: String,
    },
    #[error("{file}:{line}: `{text}` is not a finite number (NaN or infinity)")]
    NotFinite {
        file: String,
        line: usize,
        text: String,
    },
    #[error("{file}:{line}: expected at least {expected} columns, found {found}")]
    MissingColumn {
        file: String,
        line: usize,
        expected: usize,
        found: usize,
    },
    #[error("{file}:{line}: frequency {freq_hz} Hz is not positive")]
    FrequencyNotPositive {
        file: String,
        line: usize,
        freq_hz: f64,
    },
    #[error(
        "{file}:{line}: frequency {freq_hz} Hz is below the previous row's {previous_hz} Hz; \
         frequencies must ascend (pass --sort to sort the rows)"
    )]
    NotAscending {
        file: String,
        line: usize,
        freq_hz: f64,
        previous_hz: f64,
    },
    #[error(
        "{file}:{line}: frequency {freq_hz} Hz repeats line {first_line}; each frequency may appear once"
    )]
    DuplicateFrequency {
        file: String,
        line: usize,
        first_line: usize,
        freq_hz: f64,
    },
    #[error(
        "{file}:{line}: the file says {file_unit} but {flag} says {flag_unit}; remove the flag or correct the file"
    )]
    UnitContradictsFlag {
        file: String,
        line: usize,
        file_unit: String,
        flag: String,
        flag_unit: String,
    },
    #[error(
        "{file}: line {line_a} says {unit_a} but line {line_b} says {unit_b}; correct one of them"
    )]
    UnitConflict {
        file: String,
        line_a: usize,
        unit_a: String,
        line_b: usize,
        unit_b: String,
    },
    #[error("{file}:{line}: `{text}` is not a known {what}; expected {expected}")]
    BadMetadata {
        file: String,
        line: usize,
        what: String,
        text: String,
        expected: String,
    },
    #[error("--columns {given}: expected two different 1-based column numbers like `1,3`")]
    BadColumns { given: String },
}
