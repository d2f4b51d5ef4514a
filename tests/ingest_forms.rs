//! Every accepted file form reads back the same five points (fixtures made once by
//! fixtures/make_forms.py; the conversions there are dBm = dBµV − 106.9897 and dBmV = dBµV − 60).

mod common;
use common::{fixture, tol};
use spurhound::scan::{Detector, ReadOptions, read_scan_file};

/// source: fixtures/make_forms.py POINTS (Hz, dBµV)
const POINTS: [(f64, f64); 5] = [
    (150e3, 52.3),
    (500e3, 48.1),
    (1e6, 44.0),
    (5e6, 39.5),
    (30e6, 35.25),
];

fn check(name: &str, opts: &ReadOptions) -> spurhound::Scan {
    let scan = read_scan_file(&fixture(&format!("scans/forms/{name}")), opts)
        .unwrap_or_else(|e| panic!("{name}: {e}"))
        .scan;
    assert_eq!(scan.len(), POINTS.len(), "{name}");
    for (i, (f, l)) in POINTS.iter().enumerate() {
        assert!(
            (scan.freq_hz[i] - f).abs() <= tol::FREQ_REL * f,
            "{name}: freq {i}: {}",
            scan.freq_hz[i]
        );
        assert!(
            (scan.level_dbuv[i] - l).abs() <= tol::LEVEL_DB,
            "{name}: level {i}: {}",
            scan.level_dbuv[i]
        );
    }
    scan
}

#[test]
fn plain_two_columns() {
    check("plain.csv", &ReadOptions::default());
}

#[test]
fn header_in_mhz_and_dbm() {
    check("header_mhz_dbm.csv", &ReadOptions::default());
}

#[test]
fn semicolon_with_decimal_comma_and_micro_sign() {
    check("semicolon_decimal_comma.csv", &ReadOptions::default());
}

#[test]
fn tab_separated_in_dbmv() {
    check("tab.tsv", &ReadOptions::default());
}

#[test]
fn crlf_line_ends_and_byte_order_mark() {
    check("crlf_bom.csv", &ReadOptions::default());
}

#[test]
fn preamble_that_is_not_utf8() {
    let s = check("latin1_preamble.csv", &ReadOptions::default());
    assert_eq!(s.meta.rbw_hz, Some(9000.0));
    assert!(
        s.meta
            .title
            .as_deref()
            .is_some_and(|t| t.ends_with("Netzleitung L1"))
    );
}

#[test]
fn instrument_settings_preamble() {
    let s = check("instrument.csv", &ReadOptions::default());
    assert_eq!(s.meta.rbw_hz, Some(9000.0));
    assert_eq!(s.meta.vbw_hz, Some(30000.0));
    assert_eq!(s.meta.detector, Some(Detector::Peak));
}

#[test]
fn blank_separated_with_metadata() {
    let s = check("blanks.txt", &ReadOptions::default());
    assert_eq!(s.meta.detector, Some(Detector::QuasiPeak));
    assert_eq!(s.meta.rbw_hz, Some(9000.0));
}

#[test]
fn third_column_picked_by_columns() {
    let opts = ReadOptions {
        columns: ReadOptions::parse_columns("1,3").unwrap(),
        ..ReadOptions::default()
    };
    check("three_columns.csv", &opts);
}
