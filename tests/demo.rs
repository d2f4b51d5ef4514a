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
    // source: scene demo-board.toml, flyback f0 = 65 kHz, buck f0 = 400 kHz and the dithered
    // buck's centre 1.15 MHz (rendered exactly) and the MCU crystal 3.579545 MHz (a standard
    // crystal value, METHODS.md §10); each estimate lies within three of its stated sigmas of
    // the truth (the dithered buck's plateaus blur it to within 0.5 %)
    for (f0, kind, within) in [
        (65e3, "switching", 1e-3),
        (400e3, "switching", 1e-3),
        (1.15e6, "switching", 5e-3),
        (3.579545e6, "clock", 1e-3),
    ] {
        let f = family_near(&doc, f0, within).unwrap_or_else(|| panic!("no family near {f0}"));
        let est = f["fundamental_hz"].as_f64().unwrap();
        let sigma = f["fundamental_sigma_hz"].as_f64().unwrap();
        assert!(
            (est - f0).abs() <= 3.0 * sigma.max(1.0),
            "{f0}: {est} ± {sigma}"
        );
        assert_eq!(f["kind"], kind);
        assert_eq!(f["origin"], "dut");
    }
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

#[test]
fn demo_fingerprints_give_the_flyback_and_buck_duty_and_edges() {
    let doc = demo_json();
    // source: scene demo-board.toml, flyback duty 0.32, 80 ns edges; 5 V buck duty 0.42,
    // 12 ns edges, +4 dB/decade coupling; each 95 % interval covers the declared value
    for (f0, duty, edge_s) in [(65e3, 0.32, 80e-9), (400e3, 0.42, 12e-9)] {
        let f = family_near(&doc, f0, 1e-3).unwrap();
        let fp = &f["fingerprint"];
        assert_eq!(fp["fit_quality"], "good", "{fp}");
        let (lo, hi) = (
            fp["duty_ci"][0].as_f64().unwrap(),
            fp["duty_ci"][1].as_f64().unwrap(),
        );
        assert!(lo <= duty && duty <= hi, "{f0}: duty {lo}-{hi}");
        let ci = &fp["edge_time_ci_s"];
        let (lo, hi) = (ci[0].as_f64().unwrap(), ci[1].as_f64().unwrap());
        assert!(lo <= edge_s && edge_s <= hi, "{f0}: edges {lo}-{hi}");
        assert_eq!(fp["mode"]["basis"], "rule of thumb");
    }
    let text = stdout(&spurhound(&DEMO));
    let line = text
        .lines()
        .find(|l| l.trim_start().starts_with("fingerprint: duty 0.32"))
        .unwrap_or_else(|| panic!("no flyback fingerprint line\n{text}"));
    assert!(
        line.contains("rule of thumb") && line.chars().count() <= 80,
        "{line}"
    );
}

/// With the demo board's inventory (fixtures/sources/demo-board.toml, the designer's own
/// declaration of the scene's oscillators) every converter family names its declared source.
#[test]
fn demo_inventory_names_the_declared_source_of_each_family() {
    let mut args = DEMO.to_vec();
    args.extend_from_slice(&[
        "--sources",
        "fixtures/sources/demo-board.toml",
        "--format",
        "json",
    ]);
    let out = spurhound(&args);
    let doc: serde_json::Value = serde_json::from_str(&stdout(&out)).unwrap();
    let families = doc["families"].as_array().unwrap();
    // source: scene demo-board.toml (65 kHz flyback, 400 kHz and 1.15 MHz bucks)
    for (f0, name) in [(65e3, "flyback"), (400e3, "buck-5v"), (1.15e6, "buck-3v3")] {
        let fam = families
            .iter()
            .find(|f| (f["fundamental_hz"].as_f64().unwrap() / f0 - 1.0).abs() < 0.01)
            .unwrap_or_else(|| panic!("no family near {f0} Hz"));
        assert_eq!(fam["declared_source"], name, "{fam}");
    }
    // the ambient's broadcast set is not the board's
    for f in families.iter().filter(|f| f["kind"] == "broadcast") {
        assert!(f["declared_source"].is_null());
    }
    // the failing flyback gets sized remedies with their needs (exceedance + 6 dB margin)
    let fly = families
        .iter()
        .find(|f| f["declared_source"] == "flyback")
        .unwrap();
    let sized = &fly["sized_remedies"];
    assert!(
        sized["lc_filter"]["inductance_h"].as_f64().unwrap() > 0.0,
        "{sized}"
    );
    let over = fly["exceedances"][0]["over_db"].as_f64().unwrap();
    let needs = sized["needs"].as_array().unwrap();
    assert!(
        needs
            .iter()
            .any(|n| (n["needed_db"].as_f64().unwrap() - over - 6.0).abs() < 1e-9)
    );
    assert!(doc["inventory"]["unused_sources"].is_array());
}
