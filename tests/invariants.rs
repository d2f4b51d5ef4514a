//! Invariants on seeded random input: the readers never panic, writing and reading back is an
//! identity, a level offset moves every margin by the same amount, ambient order changes nothing.

use proptest::prelude::*;
use spurhound::scan::csv::{WriteOptions, read_scan_bytes};
use spurhound::scan::table::Delimiter;
use spurhound::scan::{ReadOptions, Scan, ScanMeta};
use spurhound::units::{FreqUnit, LevelUnit};
use spurhound::{Context, analyze, limits};

fn scan_from(levels: &[f64]) -> Scan {
    let n = levels.len();
    // log-spaced 150 kHz .. 30 MHz
    let f: Vec<f64> = (0..n)
        .map(|i| 150e3 * (200f64).powf(i as f64 / (n - 1) as f64))
        .collect();
    Scan::new(
        f,
        levels.to_vec(),
        ScanMeta {
            rbw_hz: Some(9e3),
            ..ScanMeta::default()
        },
    )
    .unwrap()
}

proptest! {
    #![proptest_config(ProptestConfig { cases: 200, ..ProptestConfig::default() })]

    #[test]
    fn reader_never_panics_on_bytes(bytes in proptest::collection::vec(any::<u8>(), 0..400)) {
        let _ = read_scan_bytes(&bytes, "fuzz.csv", &ReadOptions::default());
        let _ = spurhound::limits::parse_limit(&bytes, "fuzz.csv");
        let _ = spurhound::correct::Transducer::parse(&bytes, "fuzz.csv");
    }

    #[test]
    fn reader_never_panics_on_csv_like_text(
        lines in proptest::collection::vec("[0-9a-zA-Z#=,;.\\t +-]{0,24}", 0..30)
    ) {
        let text = lines.join("\n");
        let _ = read_scan_bytes(text.as_bytes(), "fuzz.csv", &ReadOptions::default());
    }

    #[test]
    fn write_then_read_is_identity(
        levels in proptest::collection::vec(-20.0f64..120.0, 2..60),
        unit in prop_oneof![Just(LevelUnit::DbUv), Just(LevelUnit::DbM), Just(LevelUnit::DbMv)],
        funit in prop_oneof![Just(FreqUnit::Hz), Just(FreqUnit::KHz), Just(FreqUnit::MHz)],
        form in 0usize..4,
    ) {
        let scan = scan_from(&levels);
        let (delimiter, decimal_comma) = [(Delimiter::Comma, false), (Delimiter::Semicolon, true), (Delimiter::Tab, false), (Delimiter::Semicolon, false)][form];
        let opts = WriteOptions { freq_unit: funit, level_unit: unit, delimiter, decimal_comma, instrument_preamble: form % 2 == 1, header: true };
        let text = spurhound::scan::write_scan_csv(&scan, &opts);
        let back = read_scan_bytes(text.as_bytes(), "rt.csv", &ReadOptions::default()).unwrap().scan;
        prop_assert_eq!(back.len(), scan.len());
        for i in 0..scan.len() {
            // the writer keeps 3 decimals of level
            prop_assert!((back.level_dbuv[i] - scan.level_dbuv[i]).abs() < 1e-3);
            prop_assert!((back.freq_hz[i] - scan.freq_hz[i]).abs() < 1e-9 * scan.freq_hz[i]);
        }
    }

    #[test]
    fn level_offset_moves_margins_by_the_same_amount(
        levels in proptest::collection::vec(20.0f64..80.0, 2..40),
        k in -20.0f64..20.0,
    ) {
        let qp = limits::builtin("cispr32-b-qp").unwrap();
        let ctx = Context { limits: vec![qp], ..Context::default() };
        let a = analyze(&scan_from(&levels), &ctx).unwrap();
        let shifted: Vec<f64> = levels.iter().map(|l| l + k).collect();
        let b = analyze(&scan_from(&shifted), &ctx).unwrap();
        let (ma, mb) = (a.verdict.worst_margin_db.unwrap(), b.verdict.worst_margin_db.unwrap());
        prop_assert!((ma - k - mb).abs() < 1e-9);
        prop_assert_eq!(b.verdict.pass, Some(mb >= 0.0));
    }

    #[test]
    fn ambient_order_changes_nothing(
        dut in proptest::collection::vec(20.0f64..80.0, 8),
        a1 in proptest::collection::vec(10.0f64..70.0, 8),
        a2 in proptest::collection::vec(10.0f64..70.0, 8),
    ) {
        let qp = limits::builtin("cispr32-b-qp").unwrap();
        let (s1, s2) = (scan_from(&a1), scan_from(&a2));
        let fwd = Context { limits: vec![qp.clone()], ambient: vec![s1.clone(), s2.clone()], ..Context::default() };
        let rev = Context { limits: vec![qp], ambient: vec![s2, s1], ..Context::default() };
        let x = analyze(&scan_from(&dut), &fwd).unwrap();
        let y = analyze(&scan_from(&dut), &rev).unwrap();
        prop_assert_eq!(x.verdict, y.verdict);
        let mut wx: Vec<_> = x.warnings.iter().map(|w| w.message.clone()).collect();
        let mut wy: Vec<_> = y.warnings.iter().map(|w| w.message.clone()).collect();
        wx.sort();
        wy.sort();
        prop_assert_eq!(wx, wy);
    }
}
