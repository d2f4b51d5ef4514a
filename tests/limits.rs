//! Built-in limit tables against their published values.

use spurhound::limits::builtin;

fn at(name: &str, freq_hz: f64) -> f64 {
    builtin(name)
        .unwrap_or_else(|| panic!("{name} is built in"))
        .at(freq_hz)
        .unwrap_or_else(|| panic!("{name} covers {freq_hz}"))
}

fn close(a: f64, b: f64, tol: f64) -> bool {
    (a - b).abs() <= tol
}

/// source: EN 55022 / CISPR 22 Class B mains table (66→56, 56, 60 QP; 56→46, 46, 50 AV),
/// log-linear between 0.15 and 0.5 MHz; check values derived in METHODS.md §1 (0.01 dB).
#[test]
fn class_b_conducted_check_values() {
    let mhz = [0.15, 0.20, 0.25, 0.30, 0.40, 0.45, 0.50, 5.0, 5.0001];
    let qp = [66.00, 63.61, 61.76, 60.24, 57.85, 56.88, 56.00, 56.0, 60.0];
    let av = [56.00, 53.61, 51.76, 50.24, 47.85, 46.88, 46.00, 46.0, 50.0];
    for (i, f) in mhz.iter().enumerate() {
        for (name, want) in [
            ("cispr32-b-qp", qp[i]),
            ("fcc15-b-qp", qp[i]),
            ("cispr32-b-av", av[i]),
            ("fcc15-b-av", av[i]),
        ] {
            let got = at(name, f * 1e6);
            assert!(
                close(got, want, 0.006),
                "{name} at {f} MHz: {got} (want {want})"
            );
        }
    }
}

/// source: derived, the slope of 66→56 dBµV over 0.15-0.5 MHz is −10/log10(0.5/0.15) = −19.125 dB/decade.
#[test]
fn class_b_slope_per_decade() {
    let slope = (at("cispr32-b-qp", 0.5e6) - at("cispr32-b-qp", 0.15e6)) / (0.5f64 / 0.15).log10();
    assert!(close(slope, -19.125, 0.001), "{slope}");
}

/// source: EN 55022 / CISPR 22 Class A mains table and 47 CFR 15.107(b): 79/66 dBµV for
/// 0.15-0.5 MHz, 73/60 dBµV for 0.5-30 MHz; the lower value at 0.5 MHz.
#[test]
fn class_a_conducted() {
    for prefix in ["cispr32-a", "fcc15-a"] {
        assert_eq!(at(&format!("{prefix}-qp"), 150e3), 79.0);
        assert_eq!(at(&format!("{prefix}-qp"), 499e3), 79.0);
        assert_eq!(at(&format!("{prefix}-qp"), 500e3), 73.0);
        assert_eq!(at(&format!("{prefix}-qp"), 30e6), 73.0);
        assert_eq!(at(&format!("{prefix}-av"), 150e3), 66.0);
        assert_eq!(at(&format!("{prefix}-av"), 500e3), 60.0);
    }
}

/// source: CISPR 32:2012 Table A.4 (Class B: 30/37 dBµV/m at 10 m, 40/47 at 3 m, QP 120 kHz)
/// and a test-report table citing CISPR 32 Class A (40/47 at 10 m, 50/57 at 3 m); the lower
/// limit at 230 MHz.
#[test]
fn cispr32_radiated() {
    for (name, low, high) in [
        ("cispr32-b-rad-10m", 30.0, 37.0),
        ("cispr32-b-rad-3m", 40.0, 47.0),
        ("cispr32-a-rad-10m", 40.0, 47.0),
        ("cispr32-a-rad-3m", 50.0, 57.0),
    ] {
        assert_eq!(at(name, 30e6), low, "{name}");
        assert_eq!(at(name, 230e6), low, "{name} at the transition");
        assert_eq!(at(name, 230.001e6), high, "{name}");
        assert_eq!(at(name, 1e9), high, "{name}");
    }
}

/// source: 47 CFR 15.109(a) (3 m: 100, 150, 200, 500 µV/m) and (b) (Class A, 10 m: 90, 150,
/// 210, 300 µV/m); dBµV/m = 20·log10(µV/m); the tighter limit at the band edges (15.109(c)).
#[test]
fn fcc_radiated() {
    let db = |uv: f64| 20.0 * f64::log10(uv);
    assert!(close(at("fcc15-b-rad-3m", 50e6), 40.0, 1e-9));
    assert!(close(at("fcc15-b-rad-3m", 88e6), 40.0, 1e-9));
    assert!(close(at("fcc15-b-rad-3m", 100e6), 43.52, 0.005));
    assert!(close(at("fcc15-b-rad-3m", 216e6), db(150.0), 1e-9));
    assert!(close(at("fcc15-b-rad-3m", 500e6), 46.02, 0.005));
    assert!(close(at("fcc15-b-rad-3m", 980e6), 53.98, 0.005));
    assert!(close(at("fcc15-a-rad-10m", 50e6), 39.08, 0.005));
    assert!(close(at("fcc15-a-rad-10m", 500e6), 46.44, 0.005));
    assert!(close(at("fcc15-a-rad-10m", 980e6), 49.54, 0.005));
}

#[test]
fn outside_the_table_there_is_no_limit() {
    let l = builtin("cispr32-b-qp").unwrap();
    assert_eq!(l.at(149e3), None);
    assert_eq!(l.at(31e6), None);
}
