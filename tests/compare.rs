//! `spurhound compare` on the fix story (fixtures/scenes/story-*.toml, rendered by `synth`):
//! the board fails, a ferrite goes on the mains cable, then an input filter in front of the
//! flyback. The scenes declare what each change does; the comparison must find it.

mod common;
use common::{spurhound, stderr, stdout};

const STORY: [&str; 3] = [
    "fixtures/story/1-before.csv",
    "fixtures/story/2-ferrite.csv",
    "fixtures/story/3-filter.csv",
];

fn compare_json(scans: &[&str]) -> (Option<i32>, serde_json::Value) {
    let mut args = vec!["compare"];
    args.extend_from_slice(scans);
    args.extend_from_slice(&["--limit", "cispr32-b-qp", "--format", "json"]);
    let out = spurhound(&args);
    let doc = serde_json::from_str(&stdout(&out)).unwrap_or_else(|e| {
        panic!("{e}: {}", stderr(&out));
    });
    (out.status.code(), doc)
}

fn family(doc: &serde_json::Value, f0: f64) -> &serde_json::Value {
    doc["families"]
        .as_array()
        .unwrap()
        .iter()
        .find(|f| (f["fundamental_hz"].as_f64().unwrap() / f0 - 1.0).abs() < 0.01)
        .unwrap_or_else(|| panic!("no family near {f0} Hz in {doc}"))
}

#[test]
fn the_ferrite_helps_the_clock_and_leaves_the_flyback() {
    let (code, doc) = compare_json(&STORY[..2]);
    assert_eq!(doc["schema"], "spurhound.compare/1");
    // source: story-2-ferrite.toml declares the clock 10 dB lower, the flyback unchanged
    let clock = family(&doc, 4e6);
    assert_eq!(clock["status"], "improved", "{clock}");
    let change = clock["change_db"].as_f64().unwrap();
    assert!((change + 10.0).abs() < 2.0, "{change}");
    assert_eq!(family(&doc, 100e3)["status"], "unchanged");
    // the flyback still fails the QP limit: exit 1
    assert_eq!(doc["verdict"]["pass"], false);
    assert_eq!(code, Some(1));
}

#[test]
fn the_whole_story_passes_with_each_step_reported() {
    let (code, doc) = compare_json(&STORY);
    assert_eq!(code, Some(0), "{doc}");
    assert_eq!(doc["verdict"]["pass"], true);
    assert_eq!(doc["steps"].as_array().unwrap().len(), 2);
    // source: story-3-filter.toml declares the flyback 22 dB lower than in scans 1 and 2
    let fly = family(&doc, 100e3);
    assert_eq!(fly["status"], "improved");
    assert!(
        (fly["change_db"].as_f64().unwrap() + 22.0).abs() < 2.0,
        "{fly}"
    );
    // every failing frequency of the before scan is accounted for, and none got worse
    for p in doc["peaks"].as_array().unwrap() {
        assert!(p["before_dbuv"].is_number() || p["status"] == "new", "{p}");
        assert_ne!(p["status"], "worse", "{p}");
    }
}

#[test]
fn a_scan_against_itself_is_unchanged() {
    let (_, doc) = compare_json(&[STORY[0], STORY[0]]);
    for f in doc["families"].as_array().unwrap() {
        assert_eq!(f["status"], "unchanged", "{f}");
        assert_eq!(f["change_db"].as_f64(), Some(0.0));
    }
}

#[test]
fn compare_needs_two_scans() {
    let out = spurhound(&["compare", STORY[0]]);
    assert_eq!(out.status.code(), Some(2));
}
