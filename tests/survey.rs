//! The ambient survey against the synthetic day's truth (`synth::day`), the committed fixture
//! set against the same truth, order independence, and robustness on random cases.

mod common;
use common::fixture;
use spurhound::report::survey::{SurveyFormat, render_survey};
use spurhound::scan::{ReadOptions, read_scan_file};
use spurhound::survey::{Presence, SurveyParams, survey};
use spurhound::synth::day::{DayOptions, synthetic_day};
use spurhound::synth::scene::Spacing;

/// The headroom figures must match the truth within this many dB (the task's tolerance).
const HEADROOM_DB: f64 = 1.0;

fn check_day(opts: &DayOptions) {
    let day = synthetic_day(opts).unwrap();
    let mut scans = day.render().unwrap();
    // the survey puts them back in time order from their `time` entries
    scans.reverse();
    scans.rotate_left(opts.sweeps / 3);
    let limit = day.limit().unwrap();
    let t = std::time::Instant::now();
    let s = survey(&scans, &SurveyParams::default(), Some(&limit)).unwrap();
    let elapsed = t.elapsed().as_secs_f64();
    let score = day.score(&s);
    assert!(s.ordered_by_time);
    assert!(
        score.all_right(HEADROOM_DB),
        "{score:#?}\n{}",
        render_survey(&s, SurveyFormat::Text).unwrap()
    );
    // source: the day's scene, 13 sources (2 combs, 1 hump, 5 MW, 3 SW, 1 ISM, 1 one-off)
    assert_eq!(score.truth, 13);
    eprintln!(
        "day of {} sweeps x {} points: survey {elapsed:.2} s, headroom error {:.2} dB, p95 error {:.2} dB",
        opts.sweeps, opts.points, score.max_headroom_error_db, score.p95_error_db
    );
}

/// 100 sweeps of 1201 points: every emitter with its class and kind, the headroom within 1 dB
/// of the truth, the quietest time right (a few seconds in debug).
#[test]
fn synthetic_day_of_100_small_sweeps() {
    check_day(&DayOptions {
        sweeps: 100,
        points: 1201,
        spacing: Spacing::Log,
        seed: 1,
    });
}

/// The full day: 100 sweeps of 6635 points (4.5 kHz steps), three seeds (release, CI).
#[test]
#[ignore]
fn synthetic_day_of_100_full_sweeps() {
    for seed in 1..=3 {
        check_day(&DayOptions {
            seed,
            ..DayOptions::default()
        });
    }
}

fn fixture_sweeps() -> Vec<spurhound::Scan> {
    let dir = fixture("survey");
    let mut files: Vec<_> = std::fs::read_dir(&dir)
        .unwrap()
        .map(|e| e.unwrap().path())
        .filter(|p| p.extension().is_some_and(|e| e == "csv"))
        .collect();
    files.sort();
    files
        .iter()
        .map(|p| read_scan_file(p, &ReadOptions::default()).unwrap().scan)
        .collect()
}

/// The committed fixtures are the fixture day of the generator: scored against its truth (a
/// stale fixture set fails here).
#[test]
fn fixture_set_matches_its_generator_truth() {
    let day = synthetic_day(&DayOptions::fixture()).unwrap();
    let scans = fixture_sweeps();
    assert_eq!(scans.len(), 12);
    let limit = day.limit().unwrap();
    let s = survey(&scans, &SurveyParams::default(), Some(&limit)).unwrap();
    let score = day.score(&s);
    assert!(score.all_right(HEADROOM_DB), "{score:#?}");
    // source: the fixture day's lights (07:00-19:00) put the 0.15-0.5 MHz band over the
    // headroom at more than a tenth of its points; the quietest sweep is 06:00 (sweep 4)
    assert_eq!(s.usable, Some(false));
    assert!(!s.headroom[0].judged && s.headroom[1].judged);
    let q = s.quietest.as_ref().unwrap();
    assert_eq!(q.time.as_deref(), Some("2031-05-14T06:00:00"));
}

#[test]
fn file_order_does_not_change_the_result() {
    let limit = spurhound::limits::builtin("cispr32-b-av").unwrap();
    let scans = fixture_sweeps();
    let a = survey(&scans, &SurveyParams::default(), Some(&limit)).unwrap();
    let mut shuffled = scans.clone();
    shuffled.reverse();
    shuffled.swap(2, 7);
    let b = survey(&shuffled, &SurveyParams::default(), Some(&limit)).unwrap();
    let key = |s: &spurhound::survey::Survey| -> Vec<(u64, Presence, &'static str, usize)> {
        s.emitters
            .iter()
            .map(|e| {
                (
                    e.freq_hz.round() as u64,
                    e.class,
                    e.kind.name(),
                    e.sweeps_present,
                )
            })
            .collect()
    };
    assert_eq!(key(&a), key(&b));
    assert_eq!(a.headroom, b.headroom);
    assert_eq!(a.quietest, b.quietest);
}

/// Without time stamps the file order stands and the report says so; the emitters are the same.
#[test]
fn sweeps_without_times_keep_the_file_order() {
    let mut scans = fixture_sweeps();
    for s in &mut scans {
        s.meta.extra.retain(|(k, _)| k != "time");
    }
    let s = survey(&scans, &SurveyParams::default(), None).unwrap();
    assert!(!s.ordered_by_time && s.usable.is_none() && s.headroom.is_empty());
    assert!(s.warnings.iter().any(|w| w.code == "no-limit"));
    let text = render_survey(&s, SurveyFormat::Text).unwrap();
    assert!(text.contains("in file order"), "{text}");
    assert_eq!(s.emitters.len(), 13);
}

/// Sweeps of the random cases (1-3 ambient sweeps and the DUT scan, every grid and span): the
/// survey never panics, and its text keeps to 80 columns.
#[test]
fn random_cases_survey_without_panics() {
    use spurhound::synth::random::{CaseOptions, random_case};
    for seed in [3u64, 8, 21] {
        let opts = CaseOptions {
            conducted: seed != 21,
            max_points: Some(2001),
            ..CaseOptions::default()
        };
        let case = random_case(seed, &opts).unwrap();
        let mut scans = case.ambient_scans().unwrap();
        scans.push(case.dut_scan().unwrap());
        let limit = case.limit().unwrap();
        let s = survey(&scans, &SurveyParams::default(), Some(&limit)).unwrap();
        let text = render_survey(&s, SurveyFormat::Text).unwrap();
        assert!(text.lines().all(|l| l.chars().count() <= 80), "{text}");
        assert!(s.warnings.iter().any(|w| w.code == "few-sweeps"));
        spurhound::report::survey_svg::render_survey_svg(&s).unwrap();
    }
}
