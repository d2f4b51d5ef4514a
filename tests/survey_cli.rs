//! `spurhound survey` on the committed fixture day: exit status, the text report, the
//! `spurhound.survey/1` JSON contract, folders and globs, and bad input.

mod common;
use common::{spurhound, stderr, stdout};

const DIR: &str = "fixtures/survey/";

#[test]
fn exit_status_says_whether_the_bench_can_judge_a_dut() {
    // source: the fixture day (synth::day, DayOptions::fixture): with the bench lights on half
    // the day, the 0.15-0.5 MHz band has less than 90 % of its points 6 dB under the CISPR 32
    // Class B average limit, so a DUT cannot be judged there
    let out = spurhound(&["survey", DIR, "--limit", "cispr32-b-av"]);
    assert_eq!(out.status.code(), Some(1), "{}", stderr(&out));
    let text = stdout(&out);
    assert!(text.contains("pre-compliance estimate"), "{text}");
    assert!(text.contains("NOT USABLE"), "{text}");
    assert!(text.contains("common practice"), "{text}");
    assert!(text.contains("2031-05-14T06:00:00"), "{text}");
    // the lights' comb blocks it and is off at night: measure then
    assert!(text.contains("measure while it is off"), "{text}");
    assert!(text.lines().all(|l| l.chars().count() <= 80), "{text}");
    // asking for 80 % instead of 90 % of the points makes every band usable
    let lenient = spurhound(&["survey", DIR, "--limit", "cispr32-b-av", "--usable", "0.8"]);
    assert_eq!(lenient.status.code(), Some(0), "{}", stderr(&lenient));
    // no limit: no headroom to judge, the survey is done
    let none = spurhound(&["survey", DIR]);
    assert_eq!(none.status.code(), Some(0), "{}", stderr(&none));
}

#[test]
fn json_keeps_the_survey_contract() {
    let out = spurhound(&["survey", DIR, "--limit", "cispr32-b-av", "--format", "json"]);
    assert_eq!(out.status.code(), Some(1), "{}", stderr(&out));
    let doc: serde_json::Value = serde_json::from_str(&stdout(&out)).unwrap();
    assert_eq!(doc["schema"], "spurhound.survey/1");
    assert_eq!(doc["sweeps"], 12);
    let emitters = doc["emitters"].as_array().unwrap();
    assert_eq!(emitters.len(), 13, "source: the fixture day's 13 sources");
    for e in emitters {
        assert!(e["freq_hz"].is_f64(), "{e}");
        assert!(
            e["fundamental_hz"].is_null() || e["fundamental_hz"].is_f64(),
            "{e}"
        );
        assert!(
            e["presence"]
                .as_f64()
                .is_some_and(|p| (0.0..=1.0).contains(&p))
        );
        let class = e["class"].as_str().unwrap();
        assert!(
            ["persistent", "intermittent", "one-off"].contains(&class),
            "{class}"
        );
        let kind = e["kind"].as_str().unwrap();
        assert!(
            ["broadcast", "ism", "lighting-hump", "comb", "other"].contains(&kind),
            "{kind}"
        );
        assert!(e["median_dbuv"].is_f64() && e["p95_dbuv"].is_f64(), "{e}");
        assert!(e["margin_db"].is_null() || e["margin_db"].is_f64(), "{e}");
        if kind == "comb" {
            assert!(e["fundamental_hz"].is_f64() && !e["lines"].as_array().unwrap().is_empty());
        }
        if kind == "lighting-hump" {
            assert!(e["start_hz"].is_f64() && e["stop_hz"].is_f64());
        }
    }
    let headroom = doc["headroom"].as_array().unwrap();
    // source: CISPR 32 Class B AV segments 0.15-0.5, 0.5-5, 5-30 MHz, then the whole span
    assert_eq!(headroom.len(), 4);
    for b in headroom {
        assert!(b["start_hz"].is_f64() && b["stop_hz"].is_f64());
        assert!(
            b["usable_fraction"]
                .as_f64()
                .is_some_and(|u| (0.0..=1.0).contains(&u))
        );
    }
    assert_eq!(headroom[0]["start_hz"], 150e3);
    assert_eq!(headroom[0]["judged"], false);
    let blocker = headroom[0]["blocking"][0].as_u64().unwrap() as usize;
    assert_eq!(emitters[blocker - 1]["kind"], "comb");
    assert_eq!(headroom[3]["stop_hz"], 30e6);
    assert_eq!(doc["classes"]["persistent_share"], 0.8);
    assert_eq!(doc["classes"]["one_off_max_sweeps"], 2);
}

#[test]
fn globs_and_plots() {
    let dir = std::env::temp_dir().join(format!("spurhound-survey-{}", std::process::id()));
    std::fs::create_dir_all(&dir).unwrap();
    let svg = dir.join("s.svg");
    let json = dir.join("s.json");
    // the five sweeps from midnight to 08:00
    let out = spurhound(&[
        "survey",
        "fixtures/survey/ambient-0*.csv",
        "--limit",
        "cispr32-b-av",
        "--format",
        "json",
        "--out",
        json.to_str().unwrap(),
        "--plot",
        svg.to_str().unwrap(),
    ]);
    assert!(out.status.code() != Some(2), "{}", stderr(&out));
    assert!(stdout(&out).is_empty());
    let doc: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(&json).unwrap()).unwrap();
    assert_eq!(doc["sweeps"], 5);
    let plot = std::fs::read_to_string(&svg).unwrap();
    assert!(plot.starts_with("<svg") && plot.contains("cispr32-b-av"));
    std::fs::remove_dir_all(&dir).ok();
}

#[test]
fn bad_input_exits_2_naming_the_problem() {
    let dir = std::env::temp_dir().join(format!("spurhound-survey-bad-{}", std::process::id()));
    std::fs::create_dir_all(&dir).unwrap();
    let empty = spurhound(&["survey", dir.to_str().unwrap()]);
    assert_eq!(empty.status.code(), Some(2));
    assert!(
        stderr(&empty).contains("holds no sweep files"),
        "{}",
        stderr(&empty)
    );
    let bad = dir.join("bad-time.csv");
    std::fs::write(&bad, "# time = teatime\n150000,10\n200000,12\n").unwrap();
    let out = spurhound(&["survey", bad.to_str().unwrap()]);
    assert_eq!(out.status.code(), Some(2));
    let msg = stderr(&out);
    assert!(
        msg.contains("bad-time.csv") && msg.contains("teatime"),
        "{msg}"
    );
    let none = spurhound(&["survey", "fixtures/survey/nothing-*.csv"]);
    assert_eq!(none.status.code(), Some(2));
    assert!(stderr(&none).contains("no file matches"));
    let csv = spurhound(&["survey", DIR, "--format", "csv"]);
    assert_eq!(csv.status.code(), Some(2));
    let missing = spurhound(&["survey", "fixtures/survey/missing.csv"]);
    assert_eq!(missing.status.code(), Some(2));
    assert!(stderr(&missing).contains("missing.csv"));
    std::fs::remove_dir_all(&dir).ok();
}
