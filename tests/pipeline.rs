//! The library end to end on rendered scenes.

use spurhound::bandwidth::Nature;
use spurhound::synth::{parse_scene, render};
use spurhound::{Context, analyze};

fn scene(rbw_hz: f64, points: usize) -> String {
    format!(
        r#"
[scan]
start_hz = 500e3
stop_hz = 1.5e6
points = {points}
rbw_hz = {rbw_hz}
seed = 4
[floor]
level_dbuv = 0.0
[[carrier]]
freq_hz = 909e3
level_dbuv = 50.0
am_depth = 0.0
"#
    )
}

#[test]
fn a_second_rbw_marks_a_carrier_narrowband() {
    // source: METHODS §6, a line reads the same at any RBW (9 kHz and 1 kHz here)
    let main = render(&parse_scene(&scene(9e3, 2001), "nine.toml").unwrap()).unwrap();
    let also = render(&parse_scene(&scene(1e3, 4001), "one.toml").unwrap()).unwrap();
    let ctx = Context {
        also: vec![also],
        ..Context::default()
    };
    let a = analyze(&main, &ctx).unwrap();
    let carrier = a
        .peaks
        .iter()
        .find(|p| (p.freq_hz - 909e3).abs() < 3e3)
        .expect("the carrier is a peak");
    let d = carrier.discrimination.expect("the second scan speaks");
    assert_eq!(d.nature, Nature::Narrowband, "{d:?}");
    assert!(d.delta_db.abs() < 1.5, "{d:?}");
}

#[test]
fn a_second_scan_with_the_same_settings_is_flagged() {
    let main = render(&parse_scene(&scene(9e3, 2001), "nine.toml").unwrap()).unwrap();
    let same = render(&parse_scene(&scene(9e3, 2001), "again.toml").unwrap()).unwrap();
    let a = analyze(
        &main,
        &Context {
            also: vec![same],
            ..Context::default()
        },
    )
    .unwrap();
    assert!(a.warnings.iter().any(|w| w.code == "also-unused"));
}

#[test]
fn without_a_second_scan_there_is_no_discrimination() {
    let main = render(&parse_scene(&scene(9e3, 2001), "nine.toml").unwrap()).unwrap();
    let a = analyze(&main, &Context::default()).unwrap();
    assert!(a.peaks.iter().all(|p| p.discrimination.is_none()));
}
