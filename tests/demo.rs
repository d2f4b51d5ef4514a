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
