//! The README's first command on the bundled demo scans.

mod common;
use common::{spurhound, stderr, stdout};

const DEMO: [&str; 10] = [
    "analyze",
    "fixtures/demo/dut.csv",
    "--ambient",
    "fixtures/demo/ambient.csv",
    "--limit",
    "cispr32-b-qp",
    "--limit",
    "cispr32-b-av",
    "--transducer",
    "fixtures/transducers/limiter-10db.csv",
];

#[test]
fn demo_prints_a_failing_verdict_with_margins() {
    let out = spurhound(&DEMO);
    assert_eq!(out.status.code(), Some(1), "{}", stderr(&out));
    let text = stdout(&out);
    assert!(text.contains("Verdict   FAIL"), "{text}");
    assert!(
        text.contains("cispr32-b-qp") && text.contains("cispr32-b-av"),
        "{text}"
    );
    assert!(text.lines().all(|l| l.chars().count() <= 80), "{text}");
}

#[test]
fn demo_json_follows_the_contract_and_the_scene() {
    let mut args = DEMO.to_vec();
    args.extend_from_slice(&["--format", "json"]);
    let doc: serde_json::Value = serde_json::from_str(&stdout(&spurhound(&args))).unwrap();
    assert_eq!(doc["schema"], "spurhound.analysis/1");
    assert_eq!(doc["verdict"]["pass"], false);
    // source: scene demo-board.toml, the flyback's 5th harmonic (325 kHz) is the worst point
    // against the Class B QP limit (a 65 kHz flyback, duty 0.32)
    let qp = &doc["limits"][0];
    let f = qp["worst_freq_hz"].as_f64().unwrap();
    assert!((f - 5.0 * 65e3).abs() < 9e3, "{f}");
    // source: scene demo-ambient.toml, the 909 kHz carrier reads 41 dBµV + 10 dB limiter =
    // 51 dBµV against the 56 dBµV QP limit: inside the 6 dB ambient headroom
    assert!(
        doc["warnings"]
            .as_array()
            .unwrap()
            .iter()
            .any(|w| w["code"] == "ambient-near-limit")
    );
}

fn demo_json() -> serde_json::Value {
    let mut args = DEMO.to_vec();
    args.extend_from_slice(&["--format", "json"]);
    serde_json::from_str(&stdout(&spurhound(&args))).unwrap()
}

fn family_near(doc: &serde_json::Value, f0: f64, rel: f64) -> Option<&serde_json::Value> {
    doc["families"]
        .as_array()?
        .iter()
        .find(|f| (f["fundamental_hz"].as_f64().unwrap_or(0.0) / f0 - 1.0).abs() < rel)
}

#[test]
fn demo_names_the_converters_with_their_fundamentals() {
    let doc = demo_json();
    // source: scene demo-board.toml, flyback f0 = 65 kHz and buck f0 = 400 kHz (rendered
    // exactly); each estimate lies within three of its stated sigmas of the truth
    for (f0, kind) in [(65e3, "switching"), (400e3, "switching")] {
        let f = family_near(&doc, f0, 1e-3).unwrap_or_else(|| panic!("no family near {f0}"));
        let est = f["fundamental_hz"].as_f64().unwrap();
        let sigma = f["fundamental_sigma_hz"].as_f64().unwrap();
        assert!(
            (est - f0).abs() <= 3.0 * sigma.max(1.0),
            "{f0}: {est} ± {sigma}"
        );
        assert_eq!(f["kind"], kind);
        assert_eq!(f["origin"], "dut");
    }
    // the dithered 1.15 MHz buck: found, within 0.5 % (its plateaus blur the fundamental)
    assert!(
        family_near(&doc, 1.15e6, 5e-3).is_some(),
        "no family near 1.15 MHz"
    );
}

#[test]
fn demo_ranks_the_failing_flyback_first_and_marks_the_ambient() {
    let doc = demo_json();
    let first = doc["families"]
        .as_array()
        .unwrap()
        .iter()
        .find(|f| f["rank"] == 1)
        .unwrap();
    // source: scene demo-board.toml, the flyback's harmonics fail the QP limit by the most
    assert!(
        (first["fundamental_hz"].as_f64().unwrap() / 65e3 - 1.0).abs() < 1e-3,
        "{first}"
    );
    // source: scene demo-ambient.toml, medium-wave carriers on the 9 kHz raster
    let mw = family_near(&doc, 9e3, 1e-6).expect("the 9 kHz broadcast set");
    assert_eq!(mw["kind"], "broadcast");
    assert_eq!(mw["origin"], "ambient");
    let ambient_peaks = doc["peaks"]
        .as_array()
        .unwrap()
        .iter()
        .filter(|p| p["origin"] == "ambient")
        .count();
    assert!(ambient_peaks >= 3, "{ambient_peaks}");
}
