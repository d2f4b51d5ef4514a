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

fn fine_comb_scene(role: &str, seed: u64, comb: bool) -> String {
    let source = if comb {
        r#"
[[switching]]
name = "burst-mode converter, 4 kHz"
f0_hz = 4e3
duty = 0.2
edge_time_s = 50e-9
fundamental_dbuv = 60.0
"#
    } else {
        ""
    };
    format!(
        r#"
[scan]
start_hz = 150e3
stop_hz = 2e6
points = 2001
rbw_hz = 9e3
seed = {seed}
role = "{role}"
[floor]
level_dbuv = 0.0
{source}"#
    )
}

#[test]
fn a_comb_finer_than_the_rbw_stands_over_the_ambient_floor() {
    // source: METHODS §6 (a comb finer than the RBW shows as a continuum, not as lines) and
    // derived: the receiver floor is common to both scans; a 4 kHz comb under a 9 kHz RBW
    // fills every bucket, so the board's trace never dips to the ambient's floor
    let dut = render(&parse_scene(&fine_comb_scene("dut", 5, true), "dut.toml").unwrap()).unwrap();
    let ambient =
        render(&parse_scene(&fine_comb_scene("ambient", 6, false), "amb.toml").unwrap()).unwrap();
    let a = analyze(
        &dut,
        &Context {
            ambient: vec![ambient],
            ..Context::default()
        },
    )
    .unwrap();
    let hump = a
        .humps
        .iter()
        .find(|h| h.seen_as == spurhound::bandwidth::HumpBasis::OverAmbientFloor)
        .expect("a hump over the ambient floor");
    assert!(hump.start_hz < 300e3 && hump.stop_hz > 1e6, "{hump:?}");
    assert!(hump.rescan.is_some_and(|r| r.rbw_hz < 9e3), "{hump:?}");
    assert!(a.warnings.iter().any(|w| w.code == "raised-floor"));
}

/// A converter's comb whose lines lie 1.4 line widths apart (20 kHz under a 9 kHz RBW on a
/// 5 kHz grid: a line shows about 14 kHz wide) is resolved, and its fundamental is found.
/// Source: common practice, two equal CW signals at least a −6 dB bandwidth apart show as two
/// peaks with a dip between them (here, for a Gaussian filter, 24.08·(10/9)² ≈ 30 dB half-way,
/// METHODS §3).
#[test]
fn a_comb_a_little_over_a_line_width_apart_is_a_family() {
    let text = r#"
[scan]
start_hz = 1e6
stop_hz = 2e6
points = 201
rbw_hz = 9e3
seed = 7
[floor]
level_dbuv = 0.0
[[switching]]
name = "converter, 20 kHz"
f0_hz = 20e3
duty = 0.3
edge_time_s = 50e-9
fundamental_dbuv = 90.0
"#;
    let scan = render(&parse_scene(text, "comb.toml").unwrap()).unwrap();
    let a = analyze(&scan, &Context::default()).unwrap();
    let f0: Vec<f64> = a.families.iter().map(|f| f.fundamental_hz).collect();
    assert!(
        f0.iter().any(|f| (f / 20e3 - 1.0).abs() < 1e-3),
        "families at {f0:?}"
    );
}

/// A radiated scene of `carriers` unrelated narrow carriers (30-300 MHz, 120 kHz RBW), drawn from a
/// fixed linear congruential sequence so that no two sets of them form a comb by design, with
/// an optional 40 MHz clock whose three odd harmonics (40, 120, 200 MHz) stand among them.
fn cluttered_scene(carriers: usize, clock: bool) -> String {
    cluttered_scene_from(12_345, carriers, clock)
}

fn cluttered_scene_from(start: u64, carriers: usize, clock: bool) -> String {
    let mut text = String::from(
        r#"
[scan]
start_hz = 30e6
stop_hz = 300e6
points = 2701
rbw_hz = 120e3
seed = 11
[floor]
level_dbuv = 10.0
"#,
    );
    let mut state: u64 = start;
    for _ in 0..carriers {
        // the multiplier and increment of Knuth's MMIX generator
        state = state
            .wrapping_mul(6_364_136_223_846_793_005)
            .wrapping_add(1_442_695_040_888_963_407);
        let u = (state >> 11) as f64 / (1u64 << 53) as f64;
        let v = ((state >> 3) & 0xff) as f64 / 255.0;
        text.push_str(&format!(
            "[[carrier]]\nfreq_hz = {:.0}\nlevel_dbuv = {:.1}\nam_depth = 0.0\n",
            32e6 + u * 266e6,
            30.0 + 12.0 * v
        ));
    }
    if clock {
        text.push_str(
            "[[clock]]\nname = \"clock, 40 MHz\"\nf0_hz = 40.001e6\nedge_time_s = 1e-9\n\
             fundamental_dbuv = 45.0\nmax_harmonic = 5\n",
        );
    }
    text
}

/// Three harmonics of a clock among a hundred other lines are too few for a fundamental found
/// anywhere, but enough for one at a standard crystal value named beforehand. Source: the
/// crystal values of METHODS §10 (40 MHz) with a ±25 ppm oscillator error (common practice: a
/// crystal within ±50 ppm); a 50 % clock has odd harmonics only, |sin(π·n/2)|/n (METHODS §5).
#[test]
fn three_harmonics_at_a_crystal_value_are_a_clock() {
    let text = cluttered_scene(100, true);
    let scan = render(&parse_scene(&text, "clock.toml").unwrap()).unwrap();
    let a = analyze(&scan, &Context::default()).unwrap();
    let f0: Vec<f64> = a.families.iter().map(|f| f.fundamental_hz).collect();
    assert!(
        f0.iter().any(|f| (f / 40e6 - 1.0).abs() < 2e-4),
        "families at {f0:?}"
    );
}

/// Unrelated lines seldom make a family: over forty scenes of a hundred lines each, short
/// runs of them far above a free fundamental (lines 16 to 24 of an 8 MHz comb) would pass
/// dozens of times if their chance were that of one comb; a search over f0 tries many shifted
/// combs on the same lines, and the searched chance counts them. Source: Bonferroni's
/// inequality (the look-elsewhere effect of a search over a free parameter); measured here,
/// 7 families from the forty scenes, 50 with the chance of one comb, 16 with combs at crystal
/// values taken whatever their chance.
#[test]
fn unrelated_lines_seldom_make_a_family() {
    let families: usize = (0..40u64)
        .map(|k| {
            let text = cluttered_scene_from(1000 + 7919 * k, 100, false);
            let scan = render(&parse_scene(&text, "lines.toml").unwrap()).unwrap();
            analyze(&scan, &Context::default()).unwrap().families.len()
        })
        .sum();
    assert!(families <= 12, "{families} families from unrelated lines");
}
