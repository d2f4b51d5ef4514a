//! The transducer chain: LISN voltage-division factor, limiter or attenuator, cable loss and
//! antenna factor, each a table of `freq_hz,correction_db` added to the reading and
//! interpolated linearly in log10(f). A scan point outside a table's range is an error, never an
//! extrapolation.
//!
//! ```
//! use spurhound::correct::{Transducer, TransducerChain};
//! use spurhound::scan::{read_scan_str, ReadOptions};
//! let cable = Transducer::parse(b"freq_hz,correction_db\n1e5,0.2\n1e8,1.2\n", "cable.csv")?;
//! let scan = read_scan_str("1e6,40\n1e7,41\n", "s.csv", &ReadOptions::default())?.scan;
//! let chain = TransducerChain { items: vec![cable] };
//! let corrected = chain.apply(&scan)?;
//! assert!((corrected.level_dbuv[0] - 40.533).abs() < 0.001); // 0.2 + 1.0·(1/3) dB
//! # Ok::<(), spurhound::Error>(())
//! ```

use crate::limits::interpolate::{log_interp, log_interp_all};
use crate::scan::table::read_table;
use crate::scan::{Scan, ScanError};
use crate::units::{FreqUnit, LevelUnit, Quantity};

/// One correction table.
#[derive(Debug, Clone, PartialEq)]
pub struct Transducer {
    /// The file it came from.
    pub name: String,
    /// `(freq_hz, correction_db)`, strictly ascending.
    pub points: Vec<(f64, f64)>,
    /// The quantity the corrected reading measures, when the table changes it (an antenna
    /// factor in dB/m turns dBµV into dBµV/m). Stated by `# result_unit = dBuV/m` or by a
    /// correction column headed `dB/m` / `dB(1/m)`.
    pub result_quantity: Option<Quantity>,
}

/// What can go wrong applying corrections.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
#[non_exhaustive]
pub enum CorrectError {
    #[error(transparent)]
    File(#[from] ScanError),
    #[error(
        "{scan}: point at {freq_hz} Hz lies outside transducer {transducer} ({min_hz} to {max_hz} Hz); \
         corrections are not extrapolated: extend the table or trim the scan"
    )]
    OutOfRange {
        scan: String,
        transducer: String,
        freq_hz: f64,
        min_hz: f64,
        max_hz: f64,
    },
}

impl Transducer {
    /// Reads a transducer file.
    ///
    /// # Errors
    /// [`CorrectError::File`] for unreadable files, bad rows and rows that do not ascend.
    pub fn read_file(path: &std::path::Path) -> Result<Transducer, CorrectError> {
        let (bytes, file) = crate::scan::table::read_bytes(path)?;
        Transducer::parse(&bytes, &file)
    }

    /// Reads a transducer from the bytes of a file.
    ///
    /// # Errors
    /// As [`Transducer::read_file`].
    pub fn parse(bytes: &[u8], file: &str) -> Result<Transducer, CorrectError> {
        let table = read_table(bytes, file, (0, 1))?;
        let freq_unit = table.header_freq_unit().map_or(FreqUnit::Hz, |h| h.1);
        let mut result_quantity = table
            .header_cell(1)
            .filter(|c| names_per_metre(c))
            .map(|_| Quantity::FieldStrength);
        for s in table
            .settings
            .iter()
            .filter(|s| s.key.eq_ignore_ascii_case("result_unit"))
        {
            result_quantity = LevelUnit::find_in(&s.value).map(|u| u.quantity());
        }
        if table.rows.len() < 2 {
            return Err(ScanError::TooFewPoints {
                file: file.to_string(),
                found: table.rows.len(),
            }
            .into());
        }
        let points: Vec<(f64, f64)> = table
            .rows
            .iter()
            .map(|r| (freq_unit.to_hz(r.a), r.b))
            .collect();
        let freqs: Vec<f64> = points.iter().map(|p| p.0).collect();
        crate::scan::csv::check_ascending(file, &freqs, |i| table.rows[i].line)?;
        Ok(Transducer {
            name: file.to_string(),
            points,
            result_quantity,
        })
    }

    /// The correction in dB at `freq_hz`, `None` outside the table.
    pub fn correction_at(&self, freq_hz: f64) -> Option<f64> {
        log_interp(&self.points, freq_hz)
    }
}

/// `dB/m`, `dB(1/m)`, `dB1/m`: an antenna factor's unit.
fn names_per_metre(cell: &str) -> bool {
    let c: String = cell
        .to_ascii_lowercase()
        .chars()
        .filter(|c| !c.is_whitespace())
        .collect();
    c.contains("db/m") || c.contains("db(1/m)") || c.contains("db1/m") || c.contains("db(m-1)")
}

/// Corrections applied in order; the sum is added to every reading.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct TransducerChain {
    pub items: Vec<Transducer>,
}

impl TransducerChain {
    /// The scan with every correction added.
    ///
    /// # Errors
    /// [`CorrectError::OutOfRange`] for the first point outside a table.
    pub fn apply(&self, scan: &Scan) -> Result<Scan, CorrectError> {
        let mut out = scan.clone();
        for t in &self.items {
            let corrections = log_interp_all(&t.points, &scan.freq_hz);
            for ((level, &f), c) in out
                .level_dbuv
                .iter_mut()
                .zip(&scan.freq_hz)
                .zip(corrections)
            {
                let c = c.ok_or_else(|| {
                    let (min_hz, max_hz) = (t.points[0].0, t.points[t.points.len() - 1].0);
                    CorrectError::OutOfRange {
                        scan: scan.label(),
                        transducer: t.name.clone(),
                        freq_hz: f,
                        min_hz,
                        max_hz,
                    }
                })?;
                *level += c;
            }
            if let Some(q) = t.result_quantity {
                out.meta.quantity = q;
            }
        }
        Ok(out)
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::scan::ScanMeta;

    fn scan(f: &[f64]) -> Scan {
        Scan::new(f.to_vec(), vec![40.0; f.len()], ScanMeta::default()).unwrap()
    }

    #[test]
    fn interpolates_in_log_frequency() {
        let t = Transducer::parse(b"1e5,10\n1e7,30\n", "t.csv").unwrap();
        // source: derived, 1 MHz is halfway in log10 between 0.1 and 10 MHz: 10 + 20·0.5 = 20 dB
        assert!((t.correction_at(1e6).unwrap() - 20.0).abs() < 1e-12);
    }

    #[test]
    fn out_of_range_is_an_error() {
        let t = Transducer::parse(b"1e5,10\n1e7,30\n", "t.csv").unwrap();
        let chain = TransducerChain { items: vec![t] };
        let err = chain.apply(&scan(&[1e6, 2e7])).unwrap_err();
        assert!(
            matches!(err, CorrectError::OutOfRange { freq_hz, .. } if freq_hz == 2e7),
            "{err}"
        );
    }

    #[test]
    fn chain_adds_and_antenna_factor_changes_quantity() {
        let lisn = Transducer::parse(b"1e5,0.5\n1e9,0.5\n", "lisn.csv").unwrap();
        let af = Transducer::parse(b"freq_mhz,af_db/m\n30,18\n1000,24\n", "af.csv").unwrap();
        let out = TransducerChain {
            items: vec![lisn, af],
        }
        .apply(&scan(&[30e6, 1e9]))
        .unwrap();
        assert_eq!(out.level_dbuv.to_vec(), vec![58.5, 64.5]);
        assert_eq!(out.meta.quantity, Quantity::FieldStrength);
    }

    #[test]
    fn not_ascending_is_an_error() {
        let err = Transducer::parse(b"1e6,1\n1e5,2\n", "t.csv").unwrap_err();
        assert!(
            matches!(
                err,
                CorrectError::File(ScanError::NotAscending { line: 2, .. })
            ),
            "{err}"
        );
    }
}
