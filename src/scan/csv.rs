//! Scan CSV files: units from the header or preamble, `# key = value` metadata, instrument
//! settings lines, flags that fill in (or, for units, must agree with) what the file says.

use super::table::{Delimiter, Setting, Table, read_table};
use super::{Detector, Role, Scan, ScanError, ScanMeta};
use crate::units::{FreqUnit, LevelUnit};
use ndarray::Array1;
use std::fmt::Write as _;

/// What the caller tells the reader; `None` fields are read from the file.
#[derive(Debug, Clone, PartialEq)]
pub struct ReadOptions {
    /// 0-based columns of frequency and level.
    pub columns: (usize, usize),
    /// Sort rows by frequency instead of refusing a file that does not ascend.
    pub sort: bool,
    pub freq_unit: Option<FreqUnit>,
    pub level_unit: Option<LevelUnit>,
    /// Overrides the file's RBW.
    pub rbw_hz: Option<f64>,
    /// Overrides the file's detector.
    pub detector: Option<Detector>,
    /// Overrides the file's role.
    pub role: Option<Role>,
}

impl Default for ReadOptions {
    fn default() -> Self {
        ReadOptions {
            columns: (0, 1),
            sort: false,
            freq_unit: None,
            level_unit: None,
            rbw_hz: None,
            detector: None,
            role: None,
        }
    }
}

impl ReadOptions {
    /// Reads `--columns A,B` (1-based).
    ///
    /// # Errors
    /// [`ScanError::BadColumns`] unless the text is two different positive integers.
    pub fn parse_columns(text: &str) -> Result<(usize, usize), ScanError> {
        let bad = || ScanError::BadColumns {
            given: text.to_string(),
        };
        let (a, b) = text.split_once(',').ok_or_else(bad)?;
        let a: usize = a.trim().parse().map_err(|_| bad())?;
        let b: usize = b.trim().parse().map_err(|_| bad())?;
        if a == 0 || b == 0 || a == b {
            return Err(bad());
        }
        Ok((a - 1, b - 1))
    }
}

/// What the reader did, for `--verbose` and for warnings the user should always see.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct IngestNotes {
    pub delimiter: String,
    pub decimal_comma: bool,
    pub header_line: Option<usize>,
    pub first_data_line: usize,
    /// Facts read from the file or taken from flags, one sentence each.
    pub read: Vec<String>,
    /// Preamble lines not used: line number and text.
    pub skipped: Vec<(usize, String)>,
    /// Things the user should check.
    pub warnings: Vec<String>,
}

/// A scan and the notes of its reading.
#[derive(Debug, Clone, PartialEq)]
pub struct ReadOutcome {
    pub scan: Scan,
    pub notes: IngestNotes,
}

/// Reads a scan file.
///
/// # Errors
/// [`ScanError::Io`] when the file cannot be read, else as [`read_scan_bytes`].
pub fn read_scan_file(
    path: &std::path::Path,
    opts: &ReadOptions,
) -> Result<ReadOutcome, ScanError> {
    let (bytes, file) = super::table::read_bytes(path)?;
    read_scan_bytes(&bytes, &file, opts)
}

/// Reads a scan from text; `file` names it in messages.
///
/// # Errors
/// As [`read_scan_bytes`].
pub fn read_scan_str(text: &str, file: &str, opts: &ReadOptions) -> Result<ReadOutcome, ScanError> {
    read_scan_bytes(text.as_bytes(), file, opts)
}

/// Reads a scan from the bytes of a file.
///
/// # Errors
/// Every [`ScanError`] about content: empty file, no numeric rows, fewer than 2 points, a bad
/// or non-finite number, frequencies not ascending or repeated, contradicting units.
pub fn read_scan_bytes(
    bytes: &[u8],
    file: &str,
    opts: &ReadOptions,
) -> Result<ReadOutcome, ScanError> {
    let table = read_table(bytes, file, opts.columns)?;
    let mut notes = IngestNotes {
        delimiter: table.delimiter.name().to_string(),
        decimal_comma: table.decimal_comma,
        header_line: table.header.as_ref().map(|h| h.0),
        first_data_line: table.rows.first().map_or(0, |r| r.line),
        skipped: table.skipped.clone(),
        ..IngestNotes::default()
    };
    let freq_unit = resolve_freq_unit(&table, file, opts, &mut notes)?;
    let level_unit = resolve_level_unit(&table, file, opts, &mut notes)?;
    let meta = read_meta(&table, file, opts, level_unit, &mut notes)?;

    let stated = freq_unit_stated(&table, opts);
    let mut rows = table.rows;
    for row in &rows {
        let freq_hz = freq_unit.to_hz(row.a);
        if freq_hz <= 0.0 {
            return Err(ScanError::FrequencyNotPositive {
                file: file.to_string(),
                line: row.line,
                freq_hz,
            });
        }
    }
    if rows.len() < 2 {
        return Err(ScanError::TooFewPoints {
            file: file.to_string(),
            found: rows.len(),
        });
    }
    if opts.sort {
        rows.sort_by(|x, y| freq_unit.to_hz(x.a).total_cmp(&freq_unit.to_hz(y.a)));
    }
    let freq_hz: Vec<f64> = rows.iter().map(|r| freq_unit.to_hz(r.a)).collect();
    check_ascending(file, &freq_hz, |i| rows[i].line)?;
    warn_on_unit_guess(&freq_hz, stated, &mut notes);
    notes.read.push(format!(
        "{} points, {} to {} Hz, from line {}",
        rows.len(),
        freq_hz[0],
        freq_hz[freq_hz.len() - 1],
        notes.first_data_line
    ));
    let scan = Scan {
        freq_hz: Array1::from(freq_hz),
        level_dbuv: rows.iter().map(|r| level_unit.to_canonical(r.b)).collect(),
        meta,
    };
    Ok(ReadOutcome { scan, notes })
}

/// Refuses frequencies that repeat or fall; `line_of(i)` gives the line of point `i`.
pub(crate) fn check_ascending(
    file: &str,
    freq_hz: &[f64],
    line_of: impl Fn(usize) -> usize,
) -> Result<(), ScanError> {
    for i in 1..freq_hz.len() {
        let (prev, cur) = (freq_hz[i - 1], freq_hz[i]);
        if cur == prev {
            let (line, first_line) = (line_of(i), line_of(i - 1));
            return Err(ScanError::DuplicateFrequency {
                file: file.to_string(),
                line,
                first_line,
                freq_hz: cur,
            });
        }
        if cur < prev {
            return Err(ScanError::NotAscending {
                file: file.to_string(),
                line: line_of(i),
                freq_hz: cur,
                previous_hz: prev,
            });
        }
    }
    Ok(())
}

/// The key of a setting with case, blanks and punctuation removed: `Res BW [kHz]` -> `resbwkhz`.
fn norm_key(key: &str) -> String {
    key.chars()
        .filter(|c| c.is_ascii_alphanumeric())
        .collect::<String>()
        .to_ascii_lowercase()
}

#[derive(Debug, Clone, Copy, PartialEq)]
enum Field {
    Rbw,
    Vbw,
    Detector,
    LevelUnit,
    FreqUnit,
    Role,
    Title,
}

/// Which scan field a preamble key plainly names.
fn field_of(key: &str) -> Option<Field> {
    let k = norm_key(key);
    let starts = |prefixes: &[&str]| prefixes.iter().any(|p| k.starts_with(p));
    if starts(&[
        "rbw",
        "resbw",
        "resolutionb",
        "resbandwidth",
        "ifbw",
        "ifbandwidth",
    ]) {
        Some(Field::Rbw)
    } else if starts(&["vbw", "videobw", "videoband"]) {
        Some(Field::Vbw)
    } else if k == "det" || k.ends_with("detector") || k.starts_with("detector") {
        Some(Field::Detector)
    } else if matches!(
        k.as_str(),
        "unit"
            | "units"
            | "yunit"
            | "yunits"
            | "yaxisunit"
            | "yaxisunits"
            | "levelunit"
            | "levelunits"
            | "amplitudeunit"
            | "amplitudeunits"
    ) {
        Some(Field::LevelUnit)
    } else if matches!(
        k.as_str(),
        "frequnit"
            | "frequencyunit"
            | "frequencyunits"
            | "xunit"
            | "xunits"
            | "xaxisunit"
            | "xaxisunits"
    ) {
        Some(Field::FreqUnit)
    } else if k == "role" {
        Some(Field::Role)
    } else if k == "title" {
        Some(Field::Title)
    } else {
        None
    }
}

/// A frequency in Hz from a value like `9 kHz`, `9kHz` or `9000`; the unit may sit in the key
/// (`RBW [kHz]`, `rbw_hz`). A bare number is in Hz.
pub(crate) fn parse_freq_value(key: &str, value: &str) -> Option<f64> {
    let v = value.trim();
    let split = v
        .find(|c: char| c.is_ascii_alphabetic() && c != 'e' && c != 'E')
        .unwrap_or(v.len());
    let (num, unit) = v.split_at(split);
    let num = super::table::parse_number(num.trim(), num.contains(',') && !num.contains('.'))?;
    if !num.is_finite() {
        return None;
    }
    let unit = FreqUnit::find_in(unit)
        .or_else(|| FreqUnit::find_in(key))
        .unwrap_or(FreqUnit::Hz);
    Some(unit.to_hz(num))
}

fn settings_for(table: &Table, field: Field) -> impl Iterator<Item = &Setting> {
    table
        .settings
        .iter()
        .filter(move |s| field_of(&s.key) == Some(field))
}

fn freq_unit_stated(table: &Table, opts: &ReadOptions) -> bool {
    opts.freq_unit.is_some()
        || table.header_freq_unit().is_some()
        || settings_for(table, Field::FreqUnit).next().is_some()
}

/// Picks one unit from the file's statements and the flag; contradictions are errors.
fn agree<U: Copy + PartialEq + std::fmt::Display>(
    file: &str,
    stated: &[(usize, U)],
    flag: Option<U>,
    flag_name: &str,
) -> Result<Option<U>, ScanError> {
    if let Some(&(line_a, a)) = stated.first() {
        if let Some(&(line_b, b)) = stated.iter().find(|(_, u)| *u != a) {
            return Err(ScanError::UnitConflict {
                file: file.to_string(),
                line_a,
                unit_a: a.to_string(),
                line_b,
                unit_b: b.to_string(),
            });
        }
        if let Some(f) = flag.filter(|f| *f != a) {
            return Err(ScanError::UnitContradictsFlag {
                file: file.to_string(),
                line: line_a,
                file_unit: a.to_string(),
                flag: flag_name.to_string(),
                flag_unit: f.to_string(),
            });
        }
        return Ok(Some(a));
    }
    Ok(flag)
}

fn resolve_freq_unit(
    table: &Table,
    file: &str,
    opts: &ReadOptions,
    notes: &mut IngestNotes,
) -> Result<FreqUnit, ScanError> {
    let mut stated: Vec<(usize, FreqUnit)> = table.header_freq_unit().into_iter().collect();
    stated.extend(
        settings_for(table, Field::FreqUnit)
            .filter_map(|s| Some((s.line, FreqUnit::find_in(&s.value)?))),
    );
    let unit = agree(file, &stated, opts.freq_unit, "--freq-unit")?;
    match (unit, stated.first()) {
        (Some(u), Some((line, _))) => notes.read.push(format!("frequency unit {u} (line {line})")),
        (Some(u), None) => notes
            .read
            .push(format!("frequency unit {u} (from the flag)")),
        (None, _) => notes
            .read
            .push("frequency unit not stated: read as Hz".to_string()),
    }
    Ok(unit.unwrap_or(FreqUnit::Hz))
}

fn resolve_level_unit(
    table: &Table,
    file: &str,
    opts: &ReadOptions,
    notes: &mut IngestNotes,
) -> Result<LevelUnit, ScanError> {
    let mut stated: Vec<(usize, LevelUnit)> = Vec::new();
    if let Some((line, cells)) = &table.header {
        let level_cell = cells.get(opts.columns.1).or(cells.last());
        if let Some(u) = level_cell.and_then(|c| LevelUnit::find_in(c)) {
            stated.push((*line, u));
        }
    }
    stated.extend(
        settings_for(table, Field::LevelUnit)
            .filter_map(|s| Some((s.line, LevelUnit::find_in(&s.value)?))),
    );
    let unit = agree(file, &stated, opts.level_unit, "--level-unit")?;
    match (unit, stated.first()) {
        (Some(u), Some((line, _))) => notes.read.push(format!("level unit {u} (line {line})")),
        (Some(u), None) => notes.read.push(format!("level unit {u} (from the flag)")),
        (None, _) => notes
            .read
            .push("level unit not stated: read as dBuV".to_string()),
    }
    Ok(unit.unwrap_or(LevelUnit::DbUv))
}

fn bad_meta(file: &str, s: &Setting, what: &str, expected: &str) -> ScanError {
    ScanError::BadMetadata {
        file: file.to_string(),
        line: s.line,
        what: what.to_string(),
        text: s.value.clone(),
        expected: expected.to_string(),
    }
}

fn read_meta(
    table: &Table,
    file: &str,
    opts: &ReadOptions,
    level_unit: LevelUnit,
    notes: &mut IngestNotes,
) -> Result<ScanMeta, ScanError> {
    let mut meta = ScanMeta {
        source: Some(file.to_string()),
        quantity: level_unit.quantity(),
        ..ScanMeta::default()
    };
    for s in &table.settings {
        let Some(field) = field_of(&s.key) else {
            if s.comment {
                meta.extra.push((s.key.clone(), s.value.clone()));
            } else {
                notes
                    .skipped
                    .push((s.line, format!("{},{}", s.key, s.value)));
            }
            continue;
        };
        match field {
            Field::Rbw | Field::Vbw => {
                let hz = parse_freq_value(&s.key, &s.value)
                    .filter(|v| *v > 0.0)
                    .ok_or_else(|| {
                        bad_meta(
                            file,
                            s,
                            "bandwidth",
                            "a positive frequency such as `9 kHz` or `9000`",
                        )
                    })?;
                let slot = if field == Field::Rbw {
                    &mut meta.rbw_hz
                } else {
                    &mut meta.vbw_hz
                };
                *slot = Some(hz);
                let name = if field == Field::Rbw { "RBW" } else { "VBW" };
                notes.read.push(format!("{name} {hz} Hz (line {})", s.line));
            }
            Field::Detector => {
                let det = Detector::parse(&s.value).ok_or_else(|| {
                    bad_meta(
                        file,
                        s,
                        "detector",
                        "peak, quasi-peak, average, rms or sample",
                    )
                })?;
                meta.detector = Some(det);
                notes.read.push(format!("detector {det} (line {})", s.line));
            }
            Field::Role => {
                meta.role = Role::parse(&s.value)
                    .ok_or_else(|| bad_meta(file, s, "role", "dut, ambient or floor"))?;
            }
            Field::Title => meta.title = Some(s.value.clone()),
            Field::LevelUnit | Field::FreqUnit => {}
        }
    }
    apply_flags(&mut meta, opts, notes);
    Ok(meta)
}

fn apply_flags(meta: &mut ScanMeta, opts: &ReadOptions, notes: &mut IngestNotes) {
    if let Some(rbw) = opts.rbw_hz {
        if meta.rbw_hz.is_some_and(|r| r != rbw) {
            notes.read.push(format!(
                "RBW {rbw} Hz from --rbw replaces the file's {} Hz",
                meta.rbw_hz.unwrap_or(0.0)
            ));
        }
        meta.rbw_hz = Some(rbw);
    }
    if let Some(det) = opts.detector {
        if meta.detector.is_some_and(|d| d != det) {
            notes.read.push(format!(
                "detector {det} from --detector replaces the file's"
            ));
        }
        meta.detector = Some(det);
    }
    if let Some(role) = opts.role {
        meta.role = role;
    }
}

/// A scan whose frequencies were read as Hz without any unit stated and which would be a
/// plausible MHz scan gets a warning; the reader never guesses a unit.
fn warn_on_unit_guess(freq_hz: &[f64], stated: bool, notes: &mut IngestNotes) {
    let last = freq_hz.last().copied().unwrap_or(0.0);
    if !stated && last < 10_000.0 {
        notes.warnings.push(format!(
            "no frequency unit is stated and the frequencies, read as Hz, end at {last} Hz; if they are MHz pass --freq-unit mhz"
        ));
    }
}

/// How [`write_scan_csv`] lays out a file; the variety is what the readers must accept.
#[derive(Debug, Clone, PartialEq)]
pub struct WriteOptions {
    pub freq_unit: FreqUnit,
    pub level_unit: LevelUnit,
    pub delimiter: Delimiter,
    /// Write `42,1` instead of `42.1` (needs a `;` or tab delimiter).
    pub decimal_comma: bool,
    /// Write the metadata as instrument `key,value` lines instead of `# key = value` comments.
    pub instrument_preamble: bool,
    /// Write a header line naming the units.
    pub header: bool,
}

impl Default for WriteOptions {
    fn default() -> Self {
        WriteOptions {
            freq_unit: FreqUnit::Hz,
            level_unit: LevelUnit::DbUv,
            delimiter: Delimiter::Comma,
            decimal_comma: false,
            instrument_preamble: false,
            header: true,
        }
    }
}

/// Writes a scan as CSV text that [`read_scan_str`] reads back.
pub fn write_scan_csv(scan: &Scan, opts: &WriteOptions) -> String {
    let sep = match opts.delimiter {
        Delimiter::Comma => ",",
        Delimiter::Semicolon => ";",
        Delimiter::Tab => "\t",
        Delimiter::Whitespace => " ",
    };
    let comma = opts.decimal_comma && opts.delimiter != Delimiter::Comma;
    let num = |x: String| if comma { x.replace('.', ",") } else { x };
    let mut out = String::new();
    let mut meta: Vec<(String, String)> = Vec::new();
    if let Some(t) = &scan.meta.title {
        meta.push(("title".into(), t.clone()));
    }
    let role = match scan.meta.role {
        Role::Dut => "dut",
        Role::Ambient => "ambient",
        Role::Floor => "floor",
    };
    meta.push(("role".into(), role.into()));
    if let Some(r) = scan.meta.rbw_hz {
        meta.push(("rbw_hz".into(), format!("{r}")));
    }
    if let Some(v) = scan.meta.vbw_hz {
        meta.push(("vbw_hz".into(), format!("{v}")));
    }
    if let Some(d) = scan.meta.detector {
        meta.push(("detector".into(), d.name().into()));
    }
    meta.extend(scan.meta.extra.iter().cloned());
    for (k, v) in &meta {
        if opts.instrument_preamble {
            let _ = writeln!(out, "{k}{sep}{v}");
        } else {
            let _ = writeln!(out, "# {k} = {v}");
        }
    }
    if opts.header {
        let _ = writeln!(
            out,
            "Frequency [{}]{sep}Level [{}]",
            opts.freq_unit, opts.level_unit
        );
    }
    let scale = opts.freq_unit.scale();
    for (f, l) in scan.freq_hz.iter().zip(scan.level_dbuv.iter()) {
        let f = num(format!("{}", f / scale));
        let l = num(format!("{:.3}", opts.level_unit.from_canonical(*l)));
        let _ = writeln!(out, "{f}{sep}{l}");
    }
    out
}

/// Reads an `--rbw` value: `9000`, `9k`, `9kHz`, `120 kHz`, `1M`.
pub fn parse_rbw_flag(text: &str) -> Option<f64> {
    let t = text.trim();
    let lower = t.to_ascii_lowercase();
    let expanded = match lower
        .strip_suffix('k')
        .or_else(|| lower.strip_suffix("khz"))
    {
        Some(n) => format!("{n} kHz"),
        None => match lower
            .strip_suffix('m')
            .or_else(|| lower.strip_suffix("mhz"))
        {
            Some(n) => format!("{n} MHz"),
            None => lower,
        },
    };
    parse_freq_value("", &expanded).filter(|v| *v > 0.0)
}

#[cfg(test)]
mod tests {
    use super::*;

    fn read(text: &str) -> Result<ReadOutcome, ScanError> {
        read_scan_str(text, "t.csv", &ReadOptions::default())
    }

    #[test]
    fn header_units_are_applied() {
        let r = read("Frequency (MHz),Level (dBm)\n0.15,-40\n0.2,-50\n").unwrap();
        assert_eq!(r.scan.freq_hz[0], 150e3);
        // source: derived, dBµV = dBm + 106.99 (50 Ω)
        assert!((r.scan.level_dbuv[0] - 66.99).abs() < 0.01);
    }

    #[test]
    fn flag_contradicting_header_is_an_error() {
        let opts = ReadOptions {
            level_unit: Some(LevelUnit::DbUv),
            ..ReadOptions::default()
        };
        let err = read_scan_str("f_hz,l_dbm\n1,2\n3,4\n", "t.csv", &opts).unwrap_err();
        assert!(
            matches!(err, ScanError::UnitContradictsFlag { line: 1, .. }),
            "{err}"
        );
        assert!(err.to_string().contains("--level-unit"));
    }

    #[test]
    fn flag_fills_in_when_file_is_silent() {
        let opts = ReadOptions {
            freq_unit: Some(FreqUnit::KHz),
            level_unit: Some(LevelUnit::DbMv),
            ..ReadOptions::default()
        };
        let r = read_scan_str("150,0\n200,1\n", "t.csv", &opts).unwrap();
        assert_eq!(r.scan.freq_hz[0], 150e3);
        assert_eq!(r.scan.level_dbuv[0], 60.0); // source: common practice, 0 dBmV = 60 dBµV
    }

    #[test]
    fn instrument_settings_give_rbw_unit_and_detector() {
        let text = "Instrument,Bench analyzer\nStart Frequency,150000\nStop Frequency,30000000\nRes BW,9,kHz\n\
                    VBW [kHz],30\nDetector,Pos Peak\nY-Axis Units,dBm\nMarker,1.2E+06,-51.2\nFrequency,Trace 1\n150000,-60\n160000,-61\n";
        let r = read(text).unwrap();
        assert_eq!(r.scan.meta.rbw_hz, Some(9000.0));
        assert_eq!(r.scan.meta.vbw_hz, Some(30000.0));
        assert_eq!(r.scan.meta.detector, Some(Detector::Peak));
        assert!((r.scan.level_dbuv[0] - 46.99).abs() < 0.01);
        assert!(r.notes.skipped.iter().any(|(line, _)| *line == 2));
    }

    #[test]
    fn comment_metadata() {
        let text = "# rbw = 120 kHz\n# detector = quasi-peak\n# role = ambient\n# title = Bench 2\n# seed = 7\n1e6,20\n2e6,21\n";
        let m = read(text).unwrap().scan.meta;
        assert_eq!(m.rbw_hz, Some(120e3));
        assert_eq!(m.detector, Some(Detector::QuasiPeak));
        assert_eq!(m.role, Role::Ambient);
        assert_eq!(m.title.as_deref(), Some("Bench 2"));
        assert_eq!(m.extra, vec![("seed".to_string(), "7".to_string())]);
    }

    #[test]
    fn order_and_duplicates() {
        let err = read("1,2\n3,4\n2,5\n").unwrap_err();
        assert!(
            matches!(err, ScanError::NotAscending { line: 3, .. }),
            "{err}"
        );
        let err = read("1,2\n3,4\n3,5\n").unwrap_err();
        assert!(
            matches!(
                err,
                ScanError::DuplicateFrequency {
                    line: 3,
                    first_line: 2,
                    ..
                }
            ),
            "{err}"
        );
        let opts = ReadOptions {
            sort: true,
            ..ReadOptions::default()
        };
        let r = read_scan_str("1,2\n3,4\n2,5\n", "t.csv", &opts).unwrap();
        assert_eq!(r.scan.freq_hz.to_vec(), vec![1.0, 2.0, 3.0]);
        assert_eq!(r.scan.level_dbuv.to_vec(), vec![2.0, 5.0, 4.0]);
    }

    #[test]
    fn one_point_is_too_few() {
        assert!(matches!(
            read("1,2\n").unwrap_err(),
            ScanError::TooFewPoints { found: 1, .. }
        ));
    }

    #[test]
    fn write_then_read_is_identity() {
        let scan = read("# rbw_hz = 9000\n150000,40.5\n160000,41.25\n")
            .unwrap()
            .scan;
        for (delimiter, decimal_comma) in [
            (Delimiter::Comma, false),
            (Delimiter::Semicolon, true),
            (Delimiter::Tab, true),
        ] {
            for instrument_preamble in [false, true] {
                let opts = WriteOptions {
                    freq_unit: FreqUnit::MHz,
                    level_unit: LevelUnit::DbM,
                    delimiter,
                    decimal_comma,
                    instrument_preamble,
                    header: true,
                };
                let text = write_scan_csv(&scan, &opts);
                let back = read_scan_str(&text, "t.csv", &ReadOptions::default())
                    .unwrap()
                    .scan;
                for (a, b) in back.level_dbuv.iter().zip(scan.level_dbuv.iter()) {
                    assert!((a - b).abs() < 1e-3, "{text}");
                }
                for (a, b) in back.freq_hz.iter().zip(scan.freq_hz.iter()) {
                    assert!((a - b).abs() < 1e-6 * b, "{text}");
                }
                assert_eq!(back.meta.rbw_hz, Some(9000.0), "{text}");
            }
        }
    }

    #[test]
    fn freq_values_with_units() {
        assert_eq!(parse_freq_value("RBW", "9 kHz"), Some(9000.0));
        assert_eq!(parse_freq_value("RBW", "9kHz"), Some(9000.0));
        assert_eq!(parse_freq_value("RBW [kHz]", "120"), Some(120e3));
        assert_eq!(parse_freq_value("rbw_hz", "9E+03"), Some(9000.0));
        assert_eq!(parse_freq_value("rbw", "1 MHz"), Some(1e6));
    }
}
