//! The numeric-table reader shared by scan, limit and transducer files.
//!
//! It finds the data as the final run of rows whose first chosen cell is a number; every line
//! before that run is preamble: `# key = value` comments, instrument `key,value` settings, a
//! marker line, a header line. It handles `,` `;` tab or blank delimiters, a decimal comma with
//! `;` or tab, CRLF line ends, a UTF-8 byte-order mark and preamble text that is not UTF-8.

use super::ScanError;
use std::borrow::Cow;

/// The delimiter between cells.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Delimiter {
    Comma,
    Semicolon,
    Tab,
    /// One or more blanks.
    Whitespace,
}

impl Delimiter {
    /// The name used in notes.
    pub fn name(self) -> &'static str {
        match self {
            Delimiter::Comma => "comma",
            Delimiter::Semicolon => "semicolon",
            Delimiter::Tab => "tab",
            Delimiter::Whitespace => "blanks",
        }
    }

    /// Cells `columns.0` and `columns.1` of a line, cleaned, in one pass over it and without
    /// allocation (the hot path of long scans).
    fn two_cells(self, line: &str, columns: (usize, usize)) -> (Option<&str>, Option<&str>) {
        fn pick<'l>(
            cells: impl Iterator<Item = &'l str>,
            (a, b): (usize, usize),
        ) -> (Option<&'l str>, Option<&'l str>) {
            let mut out = (None, None);
            for (k, cell) in cells.enumerate().take(a.max(b) + 1) {
                if k == a {
                    out.0 = Some(clean_cell(cell));
                }
                if k == b {
                    out.1 = Some(clean_cell(cell));
                }
            }
            out
        }
        match self {
            Delimiter::Comma => pick(line.split(','), columns),
            Delimiter::Semicolon => pick(line.split(';'), columns),
            Delimiter::Tab => pick(line.split('\t'), columns),
            Delimiter::Whitespace => pick(line.split_whitespace(), columns),
        }
    }

    fn split(self, line: &str) -> Vec<&str> {
        let cells: Vec<&str> = match self {
            Delimiter::Comma => line.split(',').collect(),
            Delimiter::Semicolon => line.split(';').collect(),
            Delimiter::Tab => line.split('\t').collect(),
            Delimiter::Whitespace => line.split_whitespace().collect(),
        };
        cells.into_iter().map(clean_cell).collect()
    }
}

/// One data row: its 1-based line number and the two chosen numbers.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Row {
    pub line: usize,
    pub a: f64,
    pub b: f64,
}

/// A preamble line read as `key = value` (comment) or `key,value` (instrument setting).
#[derive(Debug, Clone, PartialEq)]
pub struct Setting {
    pub line: usize,
    pub key: String,
    /// The value cell; for instrument lines, later cells are joined with a blank
    /// (`RBW,9,kHz` gives `9 kHz`).
    pub value: String,
    /// True for `# key = value` comment lines, false for instrument lines.
    pub comment: bool,
}

/// What the reader found in a file.
#[derive(Debug, Clone, PartialEq)]
pub struct Table {
    pub rows: Vec<Row>,
    /// The header line just before the data, if it is text: line number and cells.
    pub header: Option<(usize, Vec<String>)>,
    pub settings: Vec<Setting>,
    /// Preamble lines that were neither a setting nor the header: line number and text.
    pub skipped: Vec<(usize, String)>,
    pub delimiter: Delimiter,
    pub decimal_comma: bool,
}

/// The bytes of a file, or [`ScanError::Io`] naming it: the one place the readers open files.
pub fn read_bytes(path: &std::path::Path) -> Result<(Vec<u8>, String), ScanError> {
    let file = path.display().to_string();
    match std::fs::read(path) {
        Ok(bytes) => Ok((bytes, file)),
        Err(e) => Err(ScanError::Io {
            file,
            reason: e.to_string(),
        }),
    }
}

impl Table {
    /// Cell `i` of the header line, when there is one.
    pub fn header_cell(&self, i: usize) -> Option<&str> {
        self.header
            .as_ref()
            .and_then(|h| h.1.get(i))
            .map(String::as_str)
    }

    /// The frequency unit the header's first cell names, with the header's line number.
    pub fn header_freq_unit(&self) -> Option<(usize, crate::units::FreqUnit)> {
        let line = self.header.as_ref()?.0;
        Some((line, crate::units::FreqUnit::find_in(self.header_cell(0)?)?))
    }
}

/// Reads a table. `columns` are the 0-based columns of the two numbers.
///
/// # Errors
/// [`ScanError::Empty`], [`ScanError::NoData`], [`ScanError::BadNumber`],
/// [`ScanError::NotFinite`] or [`ScanError::MissingColumn`], naming `file` and the line.
pub fn read_table(bytes: &[u8], file: &str, columns: (usize, usize)) -> Result<Table, ScanError> {
    let lines = split_lines(bytes);
    if lines.iter().all(|l| l.trim().is_empty()) {
        return Err(ScanError::Empty {
            file: file.to_string(),
        });
    }
    let delimiter = detect_delimiter(&lines);
    let decimal_comma = delimiter != Delimiter::Comma && data_uses_decimal_comma(&lines, delimiter);
    let need = columns.0.max(columns.1) + 1;

    // The final run, read backwards: blank and comment lines are passed over, data-like lines
    // are read; the first line that is neither ends the preamble. A bad cell in the run is
    // reported at its earliest line, after a text line interrupting the rows (as the file reads).
    let mut start = lines.len();
    let mut rows = Vec::new();
    let mut bad: Option<ScanError> = None;
    for (i, line) in lines.iter().enumerate().rev() {
        let t = line.trim();
        if t.is_empty() || t.starts_with('#') {
            continue;
        }
        let (ca, cb) = delimiter.two_cells(t, columns);
        if !ca.is_some_and(looks_numeric) {
            break;
        }
        start = i;
        let row = match (ca, cb) {
            (Some(ca), Some(cb)) => {
                number_in(ca, columns.0, i + 1, decimal_comma, file).and_then(|a| {
                    let b = number_in(cb, columns.1, i + 1, decimal_comma, file)?;
                    Ok(Row { line: i + 1, a, b })
                })
            }
            _ => Err(ScanError::MissingColumn {
                file: file.to_string(),
                line: i + 1,
                expected: need,
                found: delimiter.split(t).len(),
            }),
        };
        match row {
            Ok(r) => rows.push(r),
            Err(e) => bad = Some(e),
        }
    }
    rows.reverse();
    let preamble_end = start;
    check_interruption(
        &lines,
        preamble_end,
        delimiter,
        columns,
        decimal_comma,
        file,
    )?;
    if let Some(e) = bad {
        return Err(e);
    }
    if rows.is_empty() {
        return Err(ScanError::NoData {
            file: file.to_string(),
        });
    }
    let (header, settings, skipped) = read_preamble(&lines[..preamble_end], delimiter);
    Ok(Table {
        rows,
        header,
        settings,
        skipped,
        delimiter,
        decimal_comma,
    })
}

/// A text line between numeric rows is a bad cell in the data, not a preamble: rows of numbers,
/// then one line that is not, then the final run.
fn check_interruption(
    lines: &[Cow<'_, str>],
    preamble_end: usize,
    delimiter: Delimiter,
    columns: (usize, usize),
    decimal_comma: bool,
    file: &str,
) -> Result<(), ScanError> {
    let content: Vec<usize> = (0..preamble_end)
        .filter(|&i| {
            let t = lines[i].trim();
            !t.is_empty() && !t.starts_with('#')
        })
        .collect();
    let [.., before, last] = content[..] else {
        return Ok(());
    };
    let numeric_row = |i: usize| {
        let cells = delimiter.split(lines[i].trim());
        [columns.0, columns.1].iter().all(|&c| {
            cells
                .get(c)
                .is_some_and(|x| parse_number(x, decimal_comma).is_some())
        })
    };
    if numeric_row(before) && !numeric_row(last) {
        let cells = delimiter.split(lines[last].trim());
        let (column, text) = [columns.0, columns.1]
            .iter()
            .find_map(|&c| match cells.get(c) {
                Some(x) if parse_number(x, decimal_comma).is_some() => None,
                other => Some((c + 1, other.map_or(String::new(), |s| s.to_string()))),
            })
            .unwrap_or((columns.0 + 1, lines[last].trim().to_string()));
        return Err(ScanError::BadNumber {
            file: file.to_string(),
            line: last + 1,
            column,
            text,
        });
    }
    Ok(())
}

fn number_in(
    text: &str,
    col: usize,
    line: usize,
    decimal_comma: bool,
    file: &str,
) -> Result<f64, ScanError> {
    match parse_number(text, decimal_comma) {
        Some(v) if v.is_finite() => Ok(v),
        Some(_) => Err(ScanError::NotFinite {
            file: file.to_string(),
            line,
            text: text.to_string(),
        }),
        None => Err(ScanError::BadNumber {
            file: file.to_string(),
            line,
            column: col + 1,
            text: text.to_string(),
        }),
    }
}

/// Lines without their ends; the byte-order mark removed; bytes that are not UTF-8 replaced
/// (borrowed from the buffer when it is valid UTF-8, the usual case).
fn split_lines(bytes: &[u8]) -> Vec<Cow<'_, str>> {
    let bytes = bytes.strip_prefix(b"\xEF\xBB\xBF").unwrap_or(bytes);
    let strip = |l: &[u8]| -> usize {
        if l.ends_with(b"\r") {
            l.len() - 1
        } else {
            l.len()
        }
    };
    match std::str::from_utf8(bytes) {
        Ok(text) => text
            .split('\n')
            .map(|l| Cow::Borrowed(l.strip_suffix('\r').unwrap_or(l)))
            .collect(),
        Err(_) => bytes
            .split(|&b| b == b'\n')
            .map(|l| String::from_utf8_lossy(&l[..strip(l)]))
            .collect(),
    }
}

/// The delimiter most of the last content lines share; `;` and tab before `,` (a `;` file may
/// carry decimal commas), blanks when none is shared.
fn detect_delimiter(lines: &[Cow<'_, str>]) -> Delimiter {
    let tail: Vec<&str> = lines
        .iter()
        .rev()
        .map(|l| l.trim())
        .filter(|t| !t.is_empty() && !t.starts_with('#'))
        .take(50)
        .collect();
    let share = |c: char| tail.iter().filter(|t| t.contains(c)).count() * 5 >= tail.len() * 4;
    if share('\t') {
        Delimiter::Tab
    } else if share(';') {
        Delimiter::Semicolon
    } else if share(',') {
        Delimiter::Comma
    } else {
        Delimiter::Whitespace
    }
}

fn data_uses_decimal_comma(lines: &[Cow<'_, str>], delimiter: Delimiter) -> bool {
    lines
        .iter()
        .rev()
        .map(|l| l.trim())
        .filter(|t| !t.is_empty() && !t.starts_with('#'))
        .take(50)
        .any(|t| {
            delimiter
                .split(t)
                .iter()
                .any(|c| c.contains(',') && !c.contains('.'))
        })
}

/// Whether a cell starts like a number (or is NaN or infinity, refused later): the cheap test
/// that finds the final run of data rows; the rows themselves are parsed once, afterwards.
fn looks_numeric(cell: &str) -> bool {
    match cell.as_bytes().first() {
        Some(b'0'..=b'9' | b'+' | b'-' | b'.') => true,
        Some(_) => matches!(
            cell.to_ascii_lowercase().as_str(),
            "nan" | "inf" | "infinity"
        ),
        None => false,
    }
}

/// A number from a cell; with a decimal comma `42,1` reads 42.1. `None` when not a number.
pub(crate) fn parse_number(cell: &str, decimal_comma: bool) -> Option<f64> {
    let cell = cell.trim();
    if cell.is_empty() {
        return None;
    }
    let first = cell.chars().next()?;
    // Rust also reads words such as "inf" and "NaN"; accept them only as whole cells so that a
    // word like "Info" stays text. They are refused later as not finite.
    if !(first.is_ascii_digit() || matches!(first, '+' | '-' | '.')) {
        let lower = cell.to_ascii_lowercase();
        return matches!(lower.as_str(), "nan" | "inf" | "infinity").then_some(f64::NAN);
    }
    if decimal_comma {
        if cell.contains('.') && cell.contains(',') {
            return None;
        }
        cell.replace(',', ".").parse().ok()
    } else {
        cell.parse().ok()
    }
}

fn clean_cell(cell: &str) -> &str {
    let c = cell.trim();
    c.strip_prefix('"')
        .and_then(|x| x.strip_suffix('"'))
        .unwrap_or(c)
        .trim()
}

type Preamble = (
    Option<(usize, Vec<String>)>,
    Vec<Setting>,
    Vec<(usize, String)>,
);

/// Sorts the preamble into a header (the last text line, when it has as many cells as a data
/// row would), settings and skipped lines.
fn read_preamble(lines: &[Cow<'_, str>], delimiter: Delimiter) -> Preamble {
    let mut settings = Vec::new();
    let mut skipped = Vec::new();
    let last_content = lines.iter().rposition(|l| {
        let t = l.trim();
        !t.is_empty() && !t.starts_with('#')
    });
    let mut header = None;
    for (i, line) in lines.iter().enumerate() {
        let t = line.trim();
        if t.is_empty() {
            continue;
        }
        if let Some(body) = t.strip_prefix('#') {
            match split_key_value(body) {
                Some((key, value)) => settings.push(Setting {
                    line: i + 1,
                    key,
                    value,
                    comment: true,
                }),
                None => skipped.push((i + 1, t.to_string())),
            }
            continue;
        }
        let cells = delimiter.split(t);
        if Some(i) == last_content && looks_like_header(&cells) {
            header = Some((i + 1, cells.iter().map(|c| c.to_string()).collect()));
        } else if cells.len() >= 2 && !cells[0].is_empty() {
            let value = cells[1..]
                .iter()
                .filter(|c| !c.is_empty())
                .copied()
                .collect::<Vec<_>>()
                .join(" ");
            settings.push(Setting {
                line: i + 1,
                key: cells[0].to_string(),
                value,
                comment: false,
            });
        } else {
            skipped.push((i + 1, t.to_string()));
        }
    }
    (header, settings, skipped)
}

/// A header has at least two cells and no cell that is only a number.
fn looks_like_header(cells: &[&str]) -> bool {
    cells.len() >= 2
        && cells
            .iter()
            .all(|c| parse_number(c, false).is_none() && parse_number(c, true).is_none())
}

/// `key = value` or `key: value` from a comment body; the key is at most four words.
fn split_key_value(body: &str) -> Option<(String, String)> {
    let at = body.find(['=', ':'])?;
    let key = body[..at].trim();
    let value = body[at + 1..].trim();
    (!key.is_empty() && key.split_whitespace().count() <= 4)
        .then(|| (key.to_string(), value.to_string()))
}

#[cfg(test)]
mod tests {
    use super::*;

    fn read(text: &str) -> Result<Table, ScanError> {
        read_table(text.as_bytes(), "t.csv", (0, 1))
    }

    #[test]
    fn columns_in_either_order() {
        let t = read_table(b"1,2,3\n4,5,6\n", "t.csv", (2, 0)).unwrap();
        assert_eq!((t.rows[1].a, t.rows[1].b), (6.0, 4.0));
        let t = read_table(b"1;2;3\n4;5;6\n", "t.csv", (1, 1)).unwrap();
        assert_eq!((t.rows[0].a, t.rows[0].b), (2.0, 2.0));
        let err = read_table(b"1,2\n4,5\n", "t.csv", (0, 2)).unwrap_err();
        assert!(
            matches!(
                err,
                ScanError::MissingColumn {
                    line: 1,
                    expected: 3,
                    found: 2,
                    ..
                }
            ),
            "{err:?}"
        );
    }

    #[test]
    fn plain_two_columns() {
        let t = read("1,2\n3,4\n").unwrap();
        assert_eq!(t.rows.len(), 2);
        assert_eq!((t.rows[1].a, t.rows[1].b), (3.0, 4.0));
        assert_eq!(t.delimiter, Delimiter::Comma);
    }

    #[test]
    fn semicolon_with_decimal_comma() {
        let t = read("1,5E+05;42,1\n2,0E+05;40\n").unwrap();
        assert_eq!(t.delimiter, Delimiter::Semicolon);
        assert!(t.decimal_comma);
        assert_eq!((t.rows[0].a, t.rows[0].b), (1.5e5, 42.1));
    }

    #[test]
    fn instrument_preamble_is_skipped_and_read() {
        let text = "Type,Analyzer\nStart,150000,Hz\nRBW,9,kHz\nMarker 1,1.2e6,55.1\n\nFrequency,Level\n1,2\n3,4\n";
        let t = read(text).unwrap();
        assert_eq!(t.rows.len(), 2);
        assert_eq!(t.header.as_ref().map(|h| h.0), Some(6));
        assert!(
            t.settings
                .iter()
                .any(|s| s.key == "RBW" && s.value == "9 kHz")
        );
    }

    #[test]
    fn bom_crlf_and_latin1_preamble() {
        let mut bytes = b"\xEF\xBB\xBF# title = Pr\xFCfling\r\nf,l\r\n".to_vec();
        bytes.extend_from_slice(b"10,1\r\n20,2\r\n");
        let t = read_table(&bytes, "t.csv", (0, 1)).unwrap();
        assert_eq!(t.rows.len(), 2);
        assert!(t.settings[0].value.starts_with("Pr"));
    }

    #[test]
    fn a_text_cell_between_numbers_is_an_error() {
        let err = read("1,2\n2,3\nabc,4\n5,6\n").unwrap_err();
        assert!(
            matches!(
                err,
                ScanError::BadNumber {
                    line: 3,
                    column: 1,
                    ..
                }
            ),
            "{err:?}"
        );
        // several bad cells: the earliest is reported, as the file reads
        let err = read("1,2\n2,x\n3,4\n4,y\n5,6\n").unwrap_err();
        assert!(
            matches!(err, ScanError::BadNumber { line: 2, .. }),
            "{err:?}"
        );
        let err = read("1,2\n2,x\n5,6\n").unwrap_err();
        assert!(
            matches!(
                err,
                ScanError::BadNumber {
                    line: 2,
                    column: 2,
                    ..
                }
            ),
            "{err:?}"
        );
    }

    #[test]
    fn nan_and_inf_are_refused() {
        assert!(matches!(
            read("1,2\n2,NaN\n").unwrap_err(),
            ScanError::NotFinite { line: 2, .. }
        ));
        assert!(matches!(
            read("1,2\ninf,3\n").unwrap_err(),
            ScanError::NotFinite { line: 2, .. }
        ));
    }

    #[test]
    fn empty_and_header_only() {
        assert!(matches!(read("").unwrap_err(), ScanError::Empty { .. }));
        assert!(matches!(
            read("\n \n").unwrap_err(),
            ScanError::Empty { .. }
        ));
        assert!(matches!(
            read("freq_hz,level_dbuv\n").unwrap_err(),
            ScanError::NoData { .. }
        ));
    }

    #[test]
    fn tabs_and_blanks() {
        assert_eq!(read("1\t2,5\n3\t4\n").unwrap().rows[0].b, 2.5);
        assert_eq!(
            read("1  2\n3 4\n").unwrap().delimiter,
            Delimiter::Whitespace
        );
    }
}
