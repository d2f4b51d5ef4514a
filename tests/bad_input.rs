//! One test per class of bad input: the message names the file, the line and what was expected,
//! and the command exits 2.

mod common;
use common::{spurhound, stderr};

fn fails_with(file: &str, extra: &[&str], wanted: &[&str]) {
    let path = format!("fixtures/scans/bad/{file}");
    let mut args = vec!["analyze", path.as_str(), "--limit", "cispr32-b-qp"];
    args.extend_from_slice(extra);
    let out = spurhound(&args);
    assert_eq!(out.status.code(), Some(2), "{file}: {}", stderr(&out));
    let err = stderr(&out);
    assert!(
        err.contains(&path),
        "{file}: message does not name the file: {err}"
    );
    for w in wanted {
        assert!(err.contains(w), "{file}: message lacks `{w}`: {err}");
    }
    assert!(!err.contains("panicked"), "{err}");
}

#[test]
fn empty_file() {
    fails_with("empty.csv", &[], &["the file is empty"]);
}

#[test]
fn header_only() {
    fails_with("header_only.csv", &[], &["no numeric rows"]);
}

#[test]
fn fewer_than_two_points() {
    fails_with("one_point.csv", &[], &["1 data point(s); at least 2"]);
}

#[test]
fn non_numeric_cell() {
    fails_with(
        "non_numeric.csv",
        &[],
        &[":4:", "expected a number in column 2", "`n/a`"],
    );
}

#[test]
fn nan_level() {
    fails_with("nan.csv", &[], &[":3:", "not a finite number"]);
}

#[test]
fn frequencies_not_ascending() {
    fails_with(
        "descending.csv",
        &[],
        &[
            ":4:",
            "160000 Hz is below the previous row's 170000 Hz",
            "--sort",
        ],
    );
}

#[test]
fn sort_accepts_and_sorts() {
    let out = spurhound(&[
        "analyze",
        "fixtures/scans/bad/descending.csv",
        "--sort",
        "--format",
        "json",
    ]);
    assert_eq!(out.status.code(), Some(0), "{}", stderr(&out));
}

#[test]
fn duplicated_frequency() {
    fails_with("duplicate.csv", &[], &[":4:", "repeats line 3"]);
}

#[test]
fn header_unit_contradicting_a_flag() {
    fails_with(
        "header_dbm.csv",
        &["--level-unit", "dbuv"],
        &[":1:", "dBm", "--level-unit"],
    );
}

#[test]
fn unknown_limit_name() {
    let out = spurhound(&[
        "analyze",
        "fixtures/scans/forms/plain.csv",
        "--limit",
        "class-z",
    ]);
    assert_eq!(out.status.code(), Some(2));
    assert!(
        stderr(&out).contains("spurhound limits"),
        "{}",
        stderr(&out)
    );
}

#[test]
fn transducer_not_covering_the_scan() {
    let out = spurhound(&[
        "analyze",
        "fixtures/scans/forms/plain.csv",
        "--transducer",
        "fixtures/transducers/short-range.csv",
    ]);
    assert_eq!(out.status.code(), Some(2));
    let err = stderr(&out);
    assert!(
        err.contains("outside transducer") && err.contains("not extrapolated"),
        "{err}"
    );
}

#[test]
fn missing_file() {
    let out = spurhound(&["analyze", "fixtures/scans/none.csv"]);
    assert_eq!(out.status.code(), Some(2));
    assert!(
        stderr(&out).contains("fixtures/scans/none.csv: cannot read the file"),
        "{}",
        stderr(&out)
    );
}

/// An inventory with a misspelt key is refused with the key, the line and the allowed keys.
#[test]
fn inventory_with_an_unknown_key_names_it() {
    let dir = std::env::temp_dir().join("spurhound-bad-inventory");
    std::fs::create_dir_all(&dir).unwrap();
    let path = dir.join("board.toml");
    std::fs::write(
        &path,
        "[[source]]\nname = \"buck\"\nkind = \"switching\"\nfrequency_hz = 4e5\nfrequncy_tol = 3\n",
    )
    .unwrap();
    let out = spurhound(&[
        "analyze",
        "fixtures/scans/small-fail.csv",
        "--sources",
        path.to_str().unwrap(),
    ]);
    assert_eq!(out.status.code(), Some(2));
    let err = stderr(&out);
    assert!(
        err.contains("frequncy_tol") && err.contains("board.toml:5:"),
        "{err}"
    );
    assert!(err.contains("tolerance_pct"), "{err}");
}

/// A negative design margin is refused by its flag's name.
#[test]
fn negative_margin_is_refused_by_name() {
    let out = spurhound(&["analyze", "fixtures/scans/small-fail.csv", "--margin-db=-3"]);
    assert_eq!(out.status.code(), Some(2));
    assert!(stderr(&out).contains("--margin-db -3"), "{}", stderr(&out));
}

/// Scans of different quantities (dBµV against dBµV/m) cannot be compared.
#[test]
fn compare_refuses_scans_of_different_quantities() {
    let text = std::fs::read_to_string("fixtures/scans/small-fail.csv").unwrap();
    let dir = std::env::temp_dir().join("spurhound-compare-units");
    std::fs::create_dir_all(&dir).unwrap();
    let field = dir.join("field.csv");
    std::fs::write(&field, text.replace("level_dbuv", "level_dbuv/m")).unwrap();
    let out = spurhound(&[
        "compare",
        "fixtures/scans/small-fail.csv",
        field.to_str().unwrap(),
    ]);
    assert_eq!(out.status.code(), Some(2), "{}", stderr(&out));
    let err = stderr(&out);
    assert!(err.contains("field.csv") && err.contains("dBuV/m"), "{err}");
}
