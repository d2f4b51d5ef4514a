//! Local maxima and topographic prominences against a general-purpose reference library:
//! fixtures/golden/prominence/*.csv were written once by make_prominence.py with
//! scipy.signal.find_peaks and scipy.signal.peak_prominences on the same traces.

mod common;
use common::fixture;
use spurhound::peaks::{local_maxima, prominences};
use spurhound::scan::{ReadOptions, read_scan_file};

fn check(trace: &str, golden: &str) {
    let scan = read_scan_file(&fixture(trace), &ReadOptions::default())
        .unwrap()
        .scan;
    let x = scan.level_dbuv.to_vec();
    let text = std::fs::read_to_string(fixture(golden)).unwrap();
    let want: Vec<(usize, f64, usize, usize)> = text
        .lines()
        .skip(1)
        .map(|l| {
            let c: Vec<&str> = l.split(',').collect();
            (
                c[0].parse().unwrap(),
                c[1].parse().unwrap(),
                c[2].parse().unwrap(),
                c[3].parse().unwrap(),
            )
        })
        .collect();
    let maxima = local_maxima(&x);
    assert_eq!(maxima.len(), want.len(), "{trace}: number of local maxima");
    let prom = prominences(&x, &maxima);
    for (k, w) in want.iter().enumerate() {
        assert_eq!(maxima[k], w.0, "{trace}: maximum {k}");
        assert!(
            (prom[k].0 - w.1).abs() < 1e-9,
            "{trace}: prominence at {}: {} vs {}",
            w.0,
            prom[k].0,
            w.1
        );
        assert_eq!(
            (prom[k].1, prom[k].2),
            (w.2, w.3),
            "{trace}: bases at {}",
            w.0
        );
    }
}

#[test]
fn demo_dut_trace_matches_the_reference() {
    check("demo/dut.csv", "golden/prominence/demo-dut.csv");
}

#[test]
fn demo_ambient_trace_matches_the_reference() {
    check("demo/ambient.csv", "golden/prominence/demo-ambient.csv");
}
