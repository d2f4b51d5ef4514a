//! Fingerprints recovered from traces the project's own `synth` renders: the scene declares a
//! converter's duty and 10-90 % edge time, the real renderer draws the analyzer trace (noise,
//! Gaussian RBW, peak detector), `analyze` finds the family and fits it, and the fitted 95 %
//! intervals must cover the declared values. Every check value's source is the scene itself.

use spurhound::analysis::{Family, Kind};
use spurhound::families::fingerprint::{Fingerprint, Quality, Status};
use spurhound::synth::{parse_scene, render};
use spurhound::{Context, analyze};

/// A conducted scan (150 kHz to `stop_hz`, 4.5 kHz steps, 9 kHz RBW, peak detector) with one
/// converter.
fn scene(stop_hz: f64, seed: u64, source: &str) -> String {
    let points = ((stop_hz - 150e3) / 4.5e3).round() as usize + 1;
    format!(
        "[scan]\nstart_hz = 150e3\nstop_hz = {stop_hz}\npoints = {points}\nrbw_hz = 9e3\n\
         detector = \"peak\"\nseed = {seed}\n[floor]\nlevel_dbuv = -2.0\n\
         slope_db_per_decade = -3.0\n[[switching]]\n{source}"
    )
}

/// The fingerprint of the switching family at `f0_hz` (within 0.1 %).
fn fingerprint_of(text: &str, f0_hz: f64) -> Fingerprint {
    let scene = parse_scene(text, "inline.toml").unwrap();
    let scan = render(&scene).unwrap();
    let analysis = analyze(&scan, &Context::default()).unwrap();
    let family: &Family = analysis
        .families
        .iter()
        .find(|f| f.kind == Kind::Switching && (f.fundamental_hz / f0_hz - 1.0).abs() < 1e-3)
        .unwrap_or_else(|| panic!("no switching family at {f0_hz} Hz"));
    family
        .fingerprint
        .clone()
        .expect("a switching family with enough harmonics")
}

/// The duty interval covers `duty` folded to ≤ 0.5 (D and 1 − D give the same spectrum), the
/// edge interval covers `edge_s`, and neither is wider than `max_rel` of its value.
fn check_covers(fp: &Fingerprint, duty: f64, edge_s: f64, max_rel: f64) {
    let d = duty.min(1.0 - duty);
    assert_eq!(fp.fit_quality, Quality::Good, "{fp:#?}");
    assert_eq!(fp.duty_status, Status::Estimated, "{fp:#?}");
    let (lo, hi) = (fp.duty_ci.0.unwrap(), fp.duty_ci.1.unwrap());
    assert!(lo <= d && d <= hi, "duty {d} outside {lo}-{hi}: {fp:#?}");
    assert!(hi - lo <= max_rel * d, "duty interval {lo}-{hi} too wide");
    assert_eq!(fp.edge_time_status, Status::Estimated, "{fp:#?}");
    let (lo, hi) = (fp.edge_time_ci_s.0.unwrap(), fp.edge_time_ci_s.1.unwrap());
    assert!(
        lo <= edge_s && edge_s <= hi,
        "edge {edge_s} outside {lo}-{hi}: {fp:#?}"
    );
    assert!(
        hi - lo <= max_rel * edge_s,
        "edge interval {lo}-{hi} too wide"
    );
}

#[test]
fn flyback_duty_and_edges_are_recovered() {
    // source: the scene, duty 0.32, 80 ns 10-90 % edges (edge corner 1/(π·100 ns) = 3.18 MHz,
    // inside the 150 kHz-10 MHz scan)
    let text = scene(
        10e6,
        11,
        "f0_hz = 65e3\nduty = 0.32\nedge_time_s = 80e-9\nfundamental_dbuv = 70.0\n",
    );
    let fp = fingerprint_of(&text, 65e3);
    check_covers(&fp, 0.32, 80e-9, 0.2);
    let mode = fp.mode.as_ref().unwrap();
    // source: METHODS.md §9 rule of thumb, the flyback's power lies below 5 MHz
    assert_eq!(mode.verdict, "mostly differential mode");
    assert_eq!(mode.basis, "rule of thumb");
}

#[test]
fn buck_duty_edges_and_coupling_tilt_are_recovered() {
    // source: the scene, duty 0.42, 12 ns edges (corner 21 MHz), +4 dB/decade coupling
    let text = scene(
        30e6,
        12,
        "f0_hz = 400e3\nduty = 0.42\nedge_time_s = 12e-9\nfundamental_dbuv = 62.0\n\
         coupling_db_per_decade = 4.0\n",
    );
    let fp = fingerprint_of(&text, 400e3);
    check_covers(&fp, 0.42, 12e-9, 0.4);
    let (lo, hi) = fp.tilt_ci_db_per_decade.unwrap();
    assert!(lo <= 4.0 && 4.0 <= hi, "tilt {lo}-{hi}");
}

#[test]
fn boost_duty_above_half_is_reported_folded() {
    // source: the scene, duty 0.62 (reported as 1 − 0.62 = 0.38), 40 ns edges, −6 dB/decade
    let text = scene(
        15e6,
        13,
        "f0_hz = 100e3\nduty = 0.62\nedge_time_s = 40e-9\nfundamental_dbuv = 80.0\n\
         coupling_db_per_decade = -6.0\n",
    );
    let fp = fingerprint_of(&text, 100e3);
    check_covers(&fp, 0.62, 40e-9, 0.2);
    assert!(fp.duty.unwrap() < 0.5);
    assert!(fp.notes.iter().any(|n| n.contains("1 − D")));
}

#[test]
fn edges_faster_than_the_scan_can_show_give_a_bound_not_a_number() {
    // source: the scene, 5 ns edges: the corner 1/(π·6.25 ns) = 51 MHz lies above the 30 MHz
    // scan, so the harmonics bound the edge time from above only
    let text = scene(
        30e6,
        14,
        "f0_hz = 2.1e6\nduty = 0.2\nedge_time_s = 5e-9\nfundamental_dbuv = 60.0\n",
    );
    let fp = fingerprint_of(&text, 2.1e6);
    assert_eq!(fp.edge_time_status, Status::UpperBound, "{fp:#?}");
    assert_eq!(fp.edge_time_s, None);
    assert_eq!(fp.edge_corner_hz, None);
    let bound = fp.edge_time_ci_s.1.unwrap();
    assert!(fp.edge_time_ci_s.0.is_none() && bound >= 5e-9, "{fp:#?}");
    assert!(fp.notes.iter().any(|n| n.contains("upper bound")));
    // the duty is still told by the nulls of the first sinc
    let (lo, hi) = (fp.duty_ci.0.unwrap(), fp.duty_ci.1.unwrap());
    assert!(lo <= 0.2 && 0.2 <= hi, "{lo}-{hi}");
}
