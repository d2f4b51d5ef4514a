//! User limit files: CSV `freq_hz,limit_dbuv`, header optional (a header's units are honoured:
//! `Frequency (MHz),Limit (dBuV/m)`), `# name = ...`, `# detector = ...` metadata.

use super::{Limit, LimitError};
use crate::scan::table::read_table;
use crate::scan::{Detector, ScanError};
use crate::units::{FreqUnit, LevelUnit, Quantity};

/// Reads a limit file.
///
/// # Errors
/// [`LimitError::File`] for unreadable files and bad rows, [`LimitError::StepTooLong`] for
/// three rows at one frequency.
pub fn read_limit_file(path: &std::path::Path) -> Result<Limit, LimitError> {
    let (bytes, file) = crate::scan::table::read_bytes(path)?;
    parse_limit(&bytes, &file)
}

/// Reads a limit from the bytes of a file; `file` names it in messages.
///
/// # Errors
/// As [`read_limit_file`].
pub fn parse_limit(bytes: &[u8], file: &str) -> Result<Limit, LimitError> {
    let table = read_table(bytes, file, (0, 1))?;
    let freq_unit = table.header_freq_unit().map_or(FreqUnit::Hz, |h| h.1);
    let mut quantity = table
        .header_cell(1)
        .and_then(LevelUnit::find_in)
        .map_or(Quantity::Voltage, |u| u.quantity());
    let mut detector = Detector::QuasiPeak;
    let mut name = file.to_string();
    let mut title = format!("limit file {file}");
    for s in &table.settings {
        match s.key.to_ascii_lowercase().as_str() {
            "detector" => {
                detector = Detector::parse(&s.value).ok_or_else(|| ScanError::BadMetadata {
                    file: file.to_string(),
                    line: s.line,
                    what: "detector".into(),
                    text: s.value.clone(),
                    expected: "peak, quasi-peak, average or rms".into(),
                })?;
            }
            "name" => name = s.value.clone(),
            "title" => title = s.value.clone(),
            "unit" | "level_unit" => {
                if let Some(u) = LevelUnit::find_in(&s.value) {
                    quantity = u.quantity();
                }
            }
            _ => {}
        }
    }
    let rows = &table.rows;
    if rows.len() < 2 {
        return Err(ScanError::TooFewPoints {
            file: file.to_string(),
            found: rows.len(),
        }
        .into());
    }
    let mut vertices = Vec::with_capacity(rows.len());
    for (i, r) in rows.iter().enumerate() {
        let freq_hz = freq_unit.to_hz(r.a);
        if freq_hz <= 0.0 {
            return Err(ScanError::FrequencyNotPositive {
                file: file.to_string(),
                line: r.line,
                freq_hz,
            }
            .into());
        }
        if let Some(&(prev, _)) = vertices.last() {
            if freq_hz < prev {
                return Err(ScanError::NotAscending {
                    file: file.to_string(),
                    line: r.line,
                    freq_hz,
                    previous_hz: prev,
                }
                .into());
            }
            let at_step = vertices
                .iter()
                .rev()
                .take_while(|v: &&(f64, f64)| v.0 == freq_hz)
                .count();
            if at_step >= 2 {
                return Err(LimitError::StepTooLong {
                    file: file.to_string(),
                    line: rows[i].line,
                    freq_hz,
                });
            }
        }
        vertices.push((freq_hz, r.b));
    }
    let source = format!("user file {file}");
    Ok(Limit {
        name,
        title,
        detector,
        quantity,
        source,
        vertices,
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn header_units_and_steps() {
        let text = "# detector = average\nFrequency (MHz),Limit (dBuV)\n0.15,56\n0.5,46\n5,46\n5,50\n30,50\n";
        let l = parse_limit(text.as_bytes(), "lim.csv").unwrap();
        assert_eq!(l.detector, Detector::Average);
        assert_eq!(l.at(5e6), Some(46.0));
        assert_eq!(l.at(6e6), Some(50.0));
        assert_eq!(l.at(31e6), None);
    }

    #[test]
    fn three_rows_at_one_frequency_are_refused() {
        let err = parse_limit(b"1,2\n2,3\n2,4\n2,5\n", "lim.csv").unwrap_err();
        assert!(
            matches!(err, LimitError::StepTooLong { line: 4, .. }),
            "{err}"
        );
    }

    #[test]
    fn descending_rows_are_refused() {
        let err = parse_limit(b"1,2\n3,3\n2,4\n", "lim.csv").unwrap_err();
        assert!(
            matches!(
                err,
                LimitError::File(ScanError::NotAscending { line: 3, .. })
            ),
            "{err}"
        );
    }

    #[test]
    fn field_strength_from_header() {
        let l = parse_limit(
            b"f_mhz,limit_dbuv/m\n30,30\n230,30\n230,37\n1000,37\n",
            "rad.csv",
        )
        .unwrap();
        assert_eq!(l.quantity, Quantity::FieldStrength);
        assert_eq!(l.at(230e6), Some(30.0));
    }
}
