//! Every rendered format of one analysis matches `fixtures/golden/` byte for byte.
//! Regenerate on purpose with `SPURHOUND_BLESS=1 cargo test --test golden` and review the diff.

mod common;
use common::fixture;
use spurhound::report::{self, Format};
use spurhound::scan::{ReadOptions, read_scan_str};
use spurhound::{Context, analyze, limits};

fn analysis() -> spurhound::Analysis {
    let name = "fixtures/scans/small-fail.csv";
    let text = std::fs::read_to_string(fixture("scans/small-fail.csv")).unwrap();
    let scan = read_scan_str(&text, name, &ReadOptions::default())
        .unwrap()
        .scan;
    let ctx = Context {
        limits: vec![
            limits::resolve("cispr32-b-qp").unwrap(),
            limits::resolve("cispr32-b-av").unwrap(),
        ],
        ..Context::default()
    };
    analyze(&scan, &ctx).unwrap()
}

fn check(rendered: &str, rel: &str) {
    let path = fixture(&format!("golden/{rel}"));
    if std::env::var_os("SPURHOUND_BLESS").is_some() {
        std::fs::create_dir_all(path.parent().unwrap()).unwrap();
        std::fs::write(&path, rendered).unwrap();
        return;
    }
    let want = std::fs::read_to_string(&path)
        .unwrap_or_else(|_| panic!("{rel} missing: run with SPURHOUND_BLESS=1"));
    assert!(
        rendered == want,
        "{rel} differs from the golden file; if the change is meant, bless it\n{rendered}"
    );
}

#[test]
fn text_report() {
    check(
        &report::render(&analysis(), Format::Text).unwrap(),
        "text/small-fail.txt",
    );
}

#[test]
fn json_report() {
    check(
        &report::render(&analysis(), Format::Json).unwrap(),
        "json/small-fail.json",
    );
}

#[test]
fn csv_peak_table() {
    check(
        &report::render(&analysis(), Format::Csv).unwrap(),
        "csv/small-fail.csv",
    );
}

#[test]
fn svg_plot() {
    check(
        &report::svg::render_svg(&analysis()).unwrap(),
        "svg/small-fail.svg",
    );
}
