//! The command line: exit status, report files, limit listing.

mod common;
use common::{spurhound, stderr, stdout};

#[test]
fn exit_status_follows_the_verdict() {
    // source: CISPR 32 Class B QP: 63.14 dBµV at 180 kHz (66 − 19.125·log10(1.2)), so 67.5 fails
    let fail = spurhound(&[
        "analyze",
        "fixtures/scans/small-fail.csv",
        "--limit",
        "cispr32-b-qp",
    ]);
    assert_eq!(fail.status.code(), Some(1), "{}", stderr(&fail));
    let pass = spurhound(&[
        "analyze",
        "fixtures/scans/small-pass.csv",
        "--limit",
        "cispr32-b-qp",
    ]);
    assert_eq!(pass.status.code(), Some(0), "{}", stderr(&pass));
    let none = spurhound(&["analyze", "fixtures/scans/small-fail.csv"]);
    assert_eq!(
        none.status.code(),
        Some(0),
        "no limit: analysis done, nothing exceeded"
    );
}

#[test]
fn text_report_names_verdict_and_worst_point() {
    let out = spurhound(&[
        "analyze",
        "fixtures/scans/small-fail.csv",
        "--limit",
        "cispr32-b-qp",
    ]);
    let text = stdout(&out);
    assert!(text.contains("pre-compliance estimate"), "{text}");
    assert!(text.contains("FAIL"), "{text}");
    // source: derived, 66 − 19.125·log10(180/150) = 64.486 dBµV; 64.486 − 67.5 = −3.01 dB
    assert!(text.contains("-3.0 dB at 180 kHz"), "{text}");
    assert!(text.lines().all(|l| l.chars().count() <= 80), "{text}");
}

#[test]
fn report_and_plot_go_to_files() {
    let dir = std::env::temp_dir().join(format!("spurhound-cli-{}", std::process::id()));
    std::fs::create_dir_all(&dir).unwrap();
    let json = dir.join("r.json");
    let svg = dir.join("p.svg");
    let out = spurhound(&[
        "analyze",
        "fixtures/scans/small-fail.csv",
        "--limit",
        "cispr32-b-qp",
        "--format",
        "json",
        "--out",
        json.to_str().unwrap(),
        "--plot",
        svg.to_str().unwrap(),
    ]);
    assert_eq!(out.status.code(), Some(1), "{}", stderr(&out));
    assert!(stdout(&out).is_empty());
    let doc: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(&json).unwrap()).unwrap();
    assert_eq!(doc["schema"], "spurhound.analysis/1");
    let plot = std::fs::read_to_string(&svg).unwrap();
    assert!(
        plot.starts_with("<svg") && plot.contains("cispr32-b-qp"),
        "{}",
        &plot[..200.min(plot.len())]
    );
    std::fs::remove_dir_all(&dir).ok();
}

#[test]
fn limits_are_listed_and_shown() {
    let list = stdout(&spurhound(&["limits"]));
    for name in [
        "cispr32-a-qp",
        "cispr32-a-av",
        "cispr32-b-qp",
        "cispr32-b-av",
        "cispr32-b-rad-10m",
        "cispr32-b-rad-3m",
        "fcc15-b-qp",
        "fcc15-a-rad-10m",
    ] {
        assert!(list.contains(name), "{name} missing from\n{list}");
    }
    let show = spurhound(&["limits", "cispr32-b-qp"]);
    assert_eq!(show.status.code(), Some(0));
    let text = stdout(&show);
    assert!(text.contains("66.00") && text.contains("source:"), "{text}");
    let unknown = spurhound(&["limits", "nope"]);
    assert_eq!(unknown.status.code(), Some(2));
}

#[test]
fn user_limit_file_and_transducers() {
    // bench-margin.csv is Class B QP minus 6 dB: 58.5 dBµV at 1 MHz is 8.5 dB over its 50 dBµV
    let out = spurhound(&[
        "analyze",
        "fixtures/scans/small-fail.csv",
        "--limit",
        "fixtures/limits/bench-margin.csv",
        "--format",
        "json",
    ]);
    let doc: serde_json::Value = serde_json::from_str(&stdout(&out)).unwrap();
    assert_eq!(doc["limit"]["name"], "bench-b-qp-6db");
    // the transducer adds 10 dB to every reading
    let out = spurhound(&[
        "analyze",
        "fixtures/scans/small-pass.csv",
        "--limit",
        "cispr32-b-qp",
        "--transducer",
        "fixtures/transducers/limiter-10db.csv",
        "--format",
        "json",
    ]);
    let doc: serde_json::Value = serde_json::from_str(&stdout(&out)).unwrap();
    // source: CISPR 32 Class B QP 56 dBµV at 1 MHz; 35 + 10 dB limiter = 45 dBµV → margin 11 dB
    let m = doc["limits"][0]["worst_margin_db"].as_f64().unwrap();
    assert!((m - 11.0).abs() < 1e-9, "{m}");
}

#[test]
fn verbose_says_what_was_read_and_skipped() {
    let out = spurhound(&[
        "--verbose",
        "analyze",
        "fixtures/scans/forms/instrument.csv",
    ]);
    let err = stderr(&out);
    assert!(err.contains("read: RBW 9000 Hz (line 16)"), "{err}");
    assert!(err.contains("skipped line 1"), "{err}");
}

#[test]
fn usage_errors_exit_2() {
    let out = spurhound(&["analyze"]);
    assert_eq!(out.status.code(), Some(2));
    let out = spurhound(&["analyze", "fixtures/scans/small-pass.csv", "--rbw", "fast"]);
    assert_eq!(out.status.code(), Some(2));
    assert!(stderr(&out).contains("--rbw fast"));
}
