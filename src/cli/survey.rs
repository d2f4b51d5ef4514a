//! `spurhound survey`: reads the sweeps (files, folders, globs), runs the library's survey with
//! a progress line on a terminal, writes the report and the plot, and returns the exit status.

use super::args::{FormatArg, SurveyArgs};
use super::{CliError, FAIL, PASS, emit, read_options, report_reading};
use spurhound::correct::{Transducer, TransducerChain};
use spurhound::limits;
use spurhound::report::survey::{SurveyFormat, render_survey};
use spurhound::report::survey_svg::render_survey_svg;
use spurhound::scan::{self, ReadOptions, Role};
use spurhound::survey::{SurveyParams, survey_with_progress};
use std::io::IsTerminal as _;
use std::path::{Path, PathBuf};

/// File name endings read from a folder.
const SWEEP_EXTENSIONS: [&str; 3] = ["csv", "tsv", "txt"];
/// Surveys of at least this many sweeps show a progress line (on a terminal).
const PROGRESS_FROM: usize = 20;

pub(super) fn run_survey(a: &SurveyArgs, verbose: bool) -> Result<u8, CliError> {
    let format = match a.format {
        FormatArg::Text => SurveyFormat::Text,
        FormatArg::Json => SurveyFormat::Json,
        FormatArg::Csv | FormatArg::Remeasure => {
            return Err(CliError(
                "--format csv and remeasure are formats of `analyze`; a survey is written as text or json".into(),
            ));
        }
    };
    let files = expand(&a.inputs)?;
    let opts = ReadOptions {
        role: Some(Role::Ambient),
        ..read_options(&a.read)?
    };
    let progress = Progress::new(files.len());
    let mut sweeps = Vec::with_capacity(files.len());
    for (k, path) in files.iter().enumerate() {
        let read = scan::read_scan_file(path, &opts)?;
        sweeps.push(report_reading(path, read, verbose));
        progress.show("reading", k + 1, files.len());
    }
    let limit = a.limit.as_deref().map(limits::resolve).transpose()?;
    let items = a
        .transducer
        .iter()
        .map(|p| Transducer::read_file(p))
        .collect::<Result<Vec<_>, _>>()?;
    let params = SurveyParams {
        transducers: TransducerChain { items },
        headroom_db: a.headroom_db,
        min_usable_fraction: a.usable,
        ..SurveyParams::default()
    };
    let show = |done: usize, total: usize| progress.show("surveying", done, total);
    let result = survey_with_progress(&sweeps, &params, limit.as_ref(), &show);
    progress.clear();
    let s = result?;
    let text = render_survey(&s, format)?;
    match &a.out {
        Some(path) => std::fs::write(path, text)
            .map_err(|e| CliError(format!("{}: cannot write the report: {e}", path.display())))?,
        None => emit(&text),
    }
    if let Some(path) = &a.plot {
        let svg = render_survey_svg(&s)?;
        std::fs::write(path, svg)
            .map_err(|e| CliError(format!("{}: cannot write the plot: {e}", path.display())))?;
    }
    Ok(if s.usable == Some(false) { FAIL } else { PASS })
}

/// A `\r` progress line on standard error, only when it is a terminal and the survey is long.
struct Progress {
    on: bool,
}

impl Progress {
    fn new(total: usize) -> Progress {
        Progress {
            on: total >= PROGRESS_FROM && std::io::stderr().is_terminal(),
        }
    }

    fn show(&self, what: &str, done: usize, total: usize) {
        if self.on {
            eprint!("\r{what} {done}/{total} sweeps ");
        }
    }

    fn clear(&self) {
        if self.on {
            eprint!("\r{:40}\r", "");
        }
    }
}

/// The sweep files named by `inputs`: a folder gives its sweep files in name order, a pattern
/// with `*` or `?` in its file name the matching files of its folder in name order, anything
/// else is a file. A file named twice is read once.
fn expand(inputs: &[String]) -> Result<Vec<PathBuf>, CliError> {
    let mut out: Vec<PathBuf> = Vec::new();
    for input in inputs {
        let path = Path::new(input);
        let found = if path.is_dir() {
            let files = list_dir(path, |name| {
                Path::new(name)
                    .extension()
                    .and_then(|e| e.to_str())
                    .is_some_and(|e| SWEEP_EXTENSIONS.contains(&e.to_ascii_lowercase().as_str()))
            })?;
            if files.is_empty() {
                return Err(CliError(format!(
                    "{input}: the folder holds no sweep files (.csv, .tsv or .txt)"
                )));
            }
            files
        } else if input.contains(['*', '?']) {
            glob(input)?
        } else {
            vec![path.to_path_buf()]
        };
        for f in found {
            if !out.contains(&f) {
                out.push(f);
            }
        }
    }
    Ok(out)
}

fn list_dir(dir: &Path, keep: impl Fn(&str) -> bool) -> Result<Vec<PathBuf>, CliError> {
    let entries = std::fs::read_dir(dir)
        .map_err(|e| CliError(format!("{}: cannot read the folder: {e}", dir.display())))?;
    let mut files: Vec<PathBuf> = entries
        .filter_map(Result::ok)
        .map(|e| e.path())
        .filter(|p| p.is_file())
        .filter(|p| p.file_name().and_then(|n| n.to_str()).is_some_and(&keep))
        .collect();
    files.sort();
    Ok(files)
}

/// Files matching a pattern whose wildcards are in the file name only.
fn glob(pattern: &str) -> Result<Vec<PathBuf>, CliError> {
    let path = Path::new(pattern);
    let name = path.file_name().and_then(|n| n.to_str()).unwrap_or("");
    let dir = match path.parent() {
        Some(p) if !p.as_os_str().is_empty() => p.to_path_buf(),
        _ => PathBuf::from("."),
    };
    if dir.to_string_lossy().contains(['*', '?']) {
        return Err(CliError(format!(
            "{pattern}: wildcards are read in the file name only; name the folder plainly"
        )));
    }
    let files = list_dir(&dir, |n| wildcard(name, n))?;
    if files.is_empty() {
        return Err(CliError(format!("{pattern}: no file matches")));
    }
    Ok(files)
}

/// Whether `text` matches `pattern` (`*` any run of characters, `?` one character).
fn wildcard(pattern: &str, text: &str) -> bool {
    let p: Vec<char> = pattern.chars().collect();
    let t: Vec<char> = text.chars().collect();
    // the classic two-pointer match with one backtrack point for the last `*`
    let (mut i, mut j) = (0usize, 0usize);
    let mut star: Option<(usize, usize)> = None;
    while j < t.len() {
        if i < p.len() && (p[i] == '?' || p[i] == t[j]) {
            i += 1;
            j += 1;
        } else if i < p.len() && p[i] == '*' {
            star = Some((i, j));
            i += 1;
        } else if let Some((si, sj)) = star {
            i = si + 1;
            j = sj + 1;
            star = Some((si, sj + 1));
        } else {
            return false;
        }
    }
    while i < p.len() && p[i] == '*' {
        i += 1;
    }
    i == p.len()
}

#[cfg(test)]
mod tests {
    use super::wildcard;

    #[test]
    fn wildcards_match_file_names() {
        assert!(wildcard("*.csv", "sweep-001.csv"));
        assert!(wildcard("sweep-0??.csv", "sweep-012.csv"));
        assert!(!wildcard("sweep-0??.csv", "sweep-1234.csv"));
        assert!(wildcard("*", "x"));
        assert!(!wildcard("*.csv", "notes.txt"));
        assert!(wildcard("a*b*c", "aXXbYYc"));
    }
}
