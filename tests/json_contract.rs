//! The fields of `spurhound.analysis/1` that other programs rely on: names, types and meanings.

mod common;
use common::{spurhound, stdout};
use serde_json::Value;

fn analysis(args: &[&str]) -> Value {
    let mut all = vec!["analyze"];
    all.extend_from_slice(args);
    all.extend_from_slice(&["--format", "json"]);
    serde_json::from_str(&stdout(&spurhound(&all))).expect("valid JSON")
}

fn is_num_or_null(v: &Value) -> bool {
    v.is_f64() || v.is_i64() || v.is_u64() || v.is_null()
}

fn check_contract(doc: &Value) {
    assert_eq!(doc["schema"], "spurhound.analysis/1");
    let limit = &doc["limit"];
    assert!(limit.is_null() || (limit["name"].is_string() && limit["detector"].is_string()));
    for p in doc["peaks"].as_array().expect("peaks is an array") {
        assert!(p["freq_hz"].is_number() && p["level_dbuv"].is_number());
        assert!(is_num_or_null(&p["limit_dbuv"]) && is_num_or_null(&p["margin_db"]));
        assert!(["narrowband", "broadband"].contains(&p["bandwidth"].as_str().unwrap()));
        assert!(["dut", "ambient", "mixed", "unknown"].contains(&p["origin"].as_str().unwrap()));
        assert!(p["family"].is_null() || p["family"].is_u64());
        if let (Some(l), Some(m)) = (p["limit_dbuv"].as_f64(), p["margin_db"].as_f64()) {
            assert!(
                (m - (l - p["level_dbuv"].as_f64().unwrap())).abs() < 1e-9,
                "margin = limit − level"
            );
        }
    }
    for f in doc["families"].as_array().expect("families is an array") {
        assert!(
            f["id"].is_u64()
                && f["fundamental_hz"].is_number()
                && f["fundamental_sigma_hz"].is_number()
        );
        assert!(
            f["harmonics"]
                .as_array()
                .unwrap()
                .iter()
                .all(|h| h.is_u64())
        );
        assert!(
            ["switching", "clock", "lighting", "broadcast", "other"]
                .contains(&f["kind"].as_str().unwrap())
        );
        assert!(["dut", "ambient", "mixed"].contains(&f["origin"].as_str().unwrap()));
        assert!(is_num_or_null(&f["worst_margin_db"]) && f["rank"].is_u64());
        assert!(
            f["remedies"]
                .as_array()
                .unwrap()
                .iter()
                .all(|r| r.is_string())
        );
        check_fingerprint(&f["fingerprint"]);
    }
    let v = &doc["verdict"];
    assert!(v["pass"].is_boolean() || v["pass"].is_null());
    assert!(is_num_or_null(&v["worst_margin_db"]));
}

/// `fingerprint`: null, or duty and edge time with two-element intervals (an end null when
/// open), a status per parameter, and the DM/CM score marked as a rule of thumb.
fn check_fingerprint(fp: &Value) {
    if fp.is_null() {
        return;
    }
    let status = [
        "estimated",
        "upper-bound",
        "lower-bound",
        "not-identifiable",
    ];
    for (value, ci, st) in [
        ("duty", "duty_ci", "duty_status"),
        ("edge_time_s", "edge_time_ci_s", "edge_time_status"),
    ] {
        assert!(is_num_or_null(&fp[value]), "{value}");
        let ci = fp[ci].as_array().expect("an interval is a pair");
        assert!(ci.len() == 2 && ci.iter().all(is_num_or_null));
        assert!(status.contains(&fp[st].as_str().unwrap()));
    }
    assert!(["good", "poor"].contains(&fp["fit_quality"].as_str().unwrap()));
    assert!(fp["amplitude_dbuv"].is_number() && fp["residual_rms_db"].is_number());
    assert!(
        fp["notes"]
            .as_array()
            .unwrap()
            .iter()
            .all(|n| n.is_string())
    );
    if !fp["mode"].is_null() {
        let dm = fp["mode"]["dm_likelihood"].as_f64().unwrap();
        assert!((0.0..=1.0).contains(&dm));
        assert_eq!(fp["mode"]["basis"], "rule of thumb");
    }
}

#[test]
fn failing_scan_follows_the_contract() {
    let doc = analysis(&["fixtures/scans/small-fail.csv", "--limit", "cispr32-b-qp"]);
    check_contract(&doc);
    assert_eq!(doc["limit"]["name"], "cispr32-b-qp");
    assert_eq!(doc["limit"]["detector"], "quasi-peak");
    assert_eq!(doc["verdict"]["pass"], false);
    // source: derived, CISPR 32 Class B QP at 180 kHz = 66 − 19.125·log10(1.2) = 64.486; 64.486 − 67.5
    let worst = doc["verdict"]["worst_margin_db"].as_f64().unwrap();
    assert!((worst - (-3.0143)).abs() < 1e-3, "{worst}");
}

#[test]
fn no_limit_gives_nulls() {
    let doc = analysis(&["fixtures/scans/small-fail.csv"]);
    check_contract(&doc);
    assert!(doc["limit"].is_null());
    assert!(doc["verdict"]["pass"].is_null());
    assert!(doc["verdict"]["worst_margin_db"].is_null());
}

#[test]
fn several_limits_are_judged_together() {
    let doc = analysis(&[
        "fixtures/scans/small-fail.csv",
        "--limit",
        "cispr32-b-qp",
        "--limit",
        "cispr32-b-av",
    ]);
    check_contract(&doc);
    let limits = doc["limits"].as_array().unwrap();
    assert_eq!(limits.len(), 2);
    assert_eq!(limits[1]["detector"], "average");
    // source: derived, CISPR 32 Class B AV at 180 kHz = 56 − 19.125·log10(1.2) = 54.486 dBµV;
    // 67.5 dBµV is 13.01 dB over, worse than 58.5 at 1 MHz (AV 46 dBµV, 12.5 dB over)
    assert_eq!(doc["verdict"]["worst_limit"], "cispr32-b-av");
    assert!((doc["verdict"]["worst_margin_db"].as_f64().unwrap() - (-13.0143)).abs() < 1e-3);
    assert_eq!(doc["verdict"]["worst_freq_hz"], 180e3);
}

#[test]
fn demo_scan_with_families_follows_the_contract() {
    let doc = analysis(&["fixtures/demo/dut.csv", "--limit", "cispr32-b-qp"]);
    check_contract(&doc);
    // source: scene demo-board.toml, its converters are switching families with fingerprints
    assert!(
        doc["families"]
            .as_array()
            .unwrap()
            .iter()
            .any(|f| f["kind"] == "switching" && f["fingerprint"].is_object())
    );
}
