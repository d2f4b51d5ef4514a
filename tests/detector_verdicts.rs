//! Predicted quasi-peak and average verdicts from a peak scan (`analyze` with QP and AV limits).

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

fn json(args: &[&str]) -> serde_json::Value {
    let mut a = args.to_vec();
    a.extend_from_slice(&["--format", "json"]);
    let out = spurhound(&a);
    serde_json::from_str(&stdout(&out)).unwrap_or_else(|e| panic!("{e}: {}", stderr(&out)))
}

fn f(v: &serde_json::Value) -> f64 {
    v.as_f64().unwrap()
}

/// Peak ≥ QP ≥ AV for every emission (fact of the trade: the detectors' weighting, CISPR
/// 16-1-1); a narrow stable line reads the same on all three (METHODS.md §2, source S8).
#[test]
fn predictions_keep_the_detector_order_and_cw_reads_alike() {
    let doc = json(&DEMO);
    assert_eq!(doc["limits"][0]["detector"], "quasi-peak");
    assert_eq!(doc["limits"][1]["detector"], "average");
    assert!(doc["verdict"]["predicted_pass"].is_boolean());
    let mut cw = 0;
    for p in doc["peaks"].as_array().unwrap() {
        let (pk, qp, av) = (
            f(&p["level_dbuv"]),
            f(&p["predicted_qp_dbuv"]),
            f(&p["predicted_av_dbuv"]),
        );
        assert!(pk + 1e-9 >= qp && qp + 1e-9 >= av, "{p}");
        if p["prediction"]["basis"] == "cw" {
            cw += 1;
            assert!((pk - qp).abs() < 1e-9 && (pk - av).abs() < 1e-9, "{p}");
        }
        // margins are limit − predicted (CISPR 32 Class B, QP and AV tables)
        assert!(
            p["qp_margin_db"].is_number() && p["av_margin_db"].is_number(),
            "{p}"
        );
    }
    assert!(cw > 10);
    // the dithered 1.15 MHz buck (scene demo-board.toml, 4 % spread) reads below its peak on
    // QP and further below on AV
    let fam = doc["families"]
        .as_array()
        .unwrap()
        .iter()
        .find(|x| (f(&x["fundamental_hz"]) / 1.15e6 - 1.0).abs() < 0.01)
        .unwrap();
    let member = doc["peaks"]
        .as_array()
        .unwrap()
        .iter()
        .find(|p| p["family"] == fam["id"] && p["harmonic"] == 1)
        .unwrap();
    assert_eq!(member["prediction"]["basis"], "dither-table", "{member}");
    assert!(f(&member["predicted_av_dbuv"]) < f(&member["level_dbuv"]) - 3.0);
}

/// Without an AV limit the AV margins are null (the contract), the QP ones are numbers.
#[test]
fn margins_are_null_without_their_limit() {
    let doc = json(&[
        "analyze",
        "fixtures/demo/dut.csv",
        "--limit",
        "cispr32-b-qp",
        "--transducer",
        "fixtures/transducers/limiter-10db.csv",
    ]);
    for p in doc["peaks"].as_array().unwrap() {
        assert!(p["av_margin_db"].is_null(), "{p}");
        assert!(p["qp_margin_db"].is_number(), "{p}");
        assert!(p["predicted_av_dbuv"].is_number());
    }
}

/// The re-measure list holds every predicted failure, a dwell per point from the detector
/// time constants, and the time saved against a full slow sweep of band B (6635 points,
/// METHODS.md §9, at the model's settling dwell).
#[test]
fn remeasure_list_covers_the_predicted_failures() {
    let doc = json(&DEMO);
    let plan = &doc["remeasure"];
    let points = plan["points"].as_array().unwrap();
    assert!(!points.is_empty());
    for p in doc["peaks"].as_array().unwrap() {
        let fails = f(&p["qp_margin_db"]) < 0.0 || f(&p["av_margin_db"]) < 0.0;
        if fails && p["origin"] != "ambient" {
            assert!(
                points.iter().any(|r| r["freq_hz"] == p["freq_hz"]),
                "{p} not on the list"
            );
        }
    }
    for r in points {
        assert!(f(&r["dwell_s"]) >= 1.0, "{r}"); // ≥ 1 s for unknown signals (METHODS §9)
    }
    assert!(f(&plan["full_sweep_s"]) > 6635.0);
    assert!(f(&plan["saved_s"]) > 0.9 * f(&plan["full_sweep_s"]));
    // the CSV for a measurement script
    let mut args = DEMO.to_vec();
    args.extend_from_slice(&["--format", "remeasure"]);
    let csv = stdout(&spurhound(&args));
    assert!(csv.starts_with("freq_hz,detectors,dwell_s,"));
    assert_eq!(csv.lines().count(), points.len() + 1);
}

/// A measured QP scan given with `--also` wins over the prediction, and the report says how
/// far the prediction was: here the "QP scan" is the peak scan 2 dB lower, so every CW
/// prediction (QP = peak) is 2 dB high.
#[test]
fn a_measured_qp_scan_wins() {
    let text = std::fs::read_to_string("fixtures/demo/dut.csv").unwrap();
    let mut qp = String::new();
    for line in text.lines() {
        if line.starts_with('#') {
            qp.push_str(&line.replace("detector = peak", "detector = quasi-peak"));
        } else if let Some((f, l)) = line.split_once(',') {
            match l.trim().parse::<f64>() {
                Ok(v) => qp.push_str(&format!("{f},{:.3}", v - 2.0)),
                Err(_) => qp.push_str(line),
            }
        } else {
            qp.push_str(line);
        }
        qp.push('\n');
    }
    let dir = std::env::temp_dir().join("spurhound-qp-scan");
    std::fs::create_dir_all(&dir).unwrap();
    let path = dir.join("dut-qp.csv");
    std::fs::write(&path, qp).unwrap();
    let mut args = DEMO.to_vec();
    args.extend_from_slice(&["--also", path.to_str().unwrap()]);
    let doc = json(&args);
    let check = &doc["detector_checks"][0];
    assert_eq!(check["detector"], "quasi-peak");
    assert!(
        (f(&check["median_abs_error_db"]) - 2.0).abs() < 0.3,
        "{check}"
    );
    let p = doc["peaks"]
        .as_array()
        .unwrap()
        .iter()
        .find(|p| p["prediction"]["basis"] == "cw" && p["qp_margin_db"].is_number())
        .unwrap();
    let measured = f(&p["prediction"]["measured_qp_dbuv"]);
    assert!((measured - (f(&p["level_dbuv"]) - 2.0)).abs() < 0.3, "{p}");
    // the same scan with its detector given by flag instead of metadata
    let text = std::fs::read_to_string(&path).unwrap();
    let flagged = dir.join("dut-qp-flag.csv");
    std::fs::write(
        &flagged,
        text.replace("detector = quasi-peak", "detector = peak"),
    )
    .unwrap();
    let mut args = DEMO.to_vec();
    args.extend_from_slice(&[
        "--also",
        flagged.to_str().unwrap(),
        "--also-detector",
        "quasi-peak",
    ]);
    assert_eq!(json(&args)["detector_checks"][0]["detector"], "quasi-peak");
}
