//! The command line: the only place that knows clap, prints or exits.

mod args;
mod survey;

use args::{
    AnalyzeArgs, Cli, Command, CompareArgs, DetectorArg, FormatArg, FreqUnitArg, LevelUnitArg,
    LimitsArgs, ReadArgs, SynthArgs,
};
use clap::Parser;
use spurhound::analysis::fmt_hz;
use spurhound::correct::{Transducer, TransducerChain};
use spurhound::report::compare::Step;
use spurhound::report::{self, Format};
use spurhound::scan::{self, Detector, ReadOptions, Role};
use spurhound::units::{FreqUnit, LevelUnit};
use spurhound::{Context, analyze, limits};
use std::process::ExitCode;

/// Exit status: analysis done, within every limit (or no limit given).
const PASS: u8 = 0;
/// Exit status: analysis done, a limit is exceeded.
const FAIL: u8 = 1;
/// Exit status: bad input or usage.
const BAD_INPUT: u8 = 2;

/// An error for the user: the message and its causes, printed once.
struct CliError(String);

impl<E: std::error::Error> From<E> for CliError {
    fn from(e: E) -> Self {
        let mut msg = e.to_string();
        let mut src = e.source();
        while let Some(s) = src {
            let text = s.to_string();
            if !msg.contains(&text) {
                msg.push_str(": ");
                msg.push_str(&text);
            }
            src = s.source();
        }
        CliError(msg)
    }
}

/// `writeln!` into a `String`, which cannot fail.
macro_rules! outln {
    ($out:expr) => {
        $out.push('\n')
    };
    ($out:expr, $($arg:tt)*) => {{
        use std::fmt::Write as _;
        let _ = writeln!($out, $($arg)*);
    }};
}

/// Writes to standard output; a closed pipe (`| head`) is not an error.
fn emit(text: &str) {
    use std::io::Write as _;
    let mut stdout = std::io::stdout().lock();
    let _ = stdout
        .write_all(text.as_bytes())
        .and_then(|()| stdout.flush());
}

/// Parses the command line, runs it and returns the exit status.
pub fn run() -> ExitCode {
    let cli = Cli::parse();
    let result = match &cli.command {
        Command::Analyze(a) => run_analyze(a, cli.verbose),
        Command::Compare(c) => run_compare(c, cli.verbose),
        Command::Survey(s) => survey::run_survey(s, cli.verbose),
        Command::Limits(l) => run_limits(l),
        Command::Synth(s) => run_synth(s, cli.verbose),
    };
    match result {
        Ok(code) => ExitCode::from(code),
        Err(CliError(msg)) => {
            eprintln!("spurhound: error: {msg}");
            ExitCode::from(BAD_INPUT)
        }
    }
}

fn detector_of(d: DetectorArg) -> Detector {
    match d {
        DetectorArg::Peak => Detector::Peak,
        DetectorArg::QuasiPeak => Detector::QuasiPeak,
        DetectorArg::Average => Detector::Average,
        DetectorArg::Rms => Detector::Rms,
        DetectorArg::Sample => Detector::Sample,
    }
}

fn read_options(r: &ReadArgs) -> Result<ReadOptions, CliError> {
    let mut opts = ReadOptions {
        sort: r.sort,
        ..ReadOptions::default()
    };
    if let Some(c) = &r.columns {
        opts.columns = ReadOptions::parse_columns(c)?;
    }
    if let Some(text) = &r.rbw {
        let hz = scan::csv::parse_rbw_flag(text).ok_or_else(|| {
            CliError(format!(
                "--rbw {text}: expected a positive frequency such as 9000, 9k or 9kHz"
            ))
        })?;
        opts.rbw_hz = Some(hz);
    }
    opts.detector = r.detector.map(detector_of);
    opts.freq_unit = r.freq_unit.map(|u| match u {
        FreqUnitArg::Hz => FreqUnit::Hz,
        FreqUnitArg::Khz => FreqUnit::KHz,
        FreqUnitArg::Mhz => FreqUnit::MHz,
        FreqUnitArg::Ghz => FreqUnit::GHz,
    });
    opts.level_unit = r.level_unit.map(|u| match u {
        LevelUnitArg::Dbuv => LevelUnit::DbUv,
        LevelUnitArg::Dbm => LevelUnit::DbM,
        LevelUnitArg::Dbmv => LevelUnit::DbMv,
        LevelUnitArg::Dbua => LevelUnit::DbUa,
        LevelUnitArg::DbuvPerM => LevelUnit::DbUvPerM,
    });
    Ok(opts)
}

/// Prints what reading a scan found (warnings always, the rest with `--verbose`).
fn report_reading(path: &std::path::Path, out: scan::ReadOutcome, verbose: bool) -> scan::Scan {
    let notes = &out.notes;
    if verbose {
        eprintln!(
            "{}: {} delimiter{}",
            path.display(),
            notes.delimiter,
            if notes.decimal_comma {
                ", decimal comma"
            } else {
                ""
            }
        );
        if let Some(h) = notes.header_line {
            eprintln!("  header on line {h}");
        }
        for r in &notes.read {
            eprintln!("  read: {r}");
        }
        for (line, text) in &notes.skipped {
            eprintln!("  skipped line {line}: {text}");
        }
    }
    for w in &notes.warnings {
        eprintln!("spurhound: warning: {}: {w}", path.display());
    }
    out.scan
}

/// Reads the DUT scan and the ambient scans, the ambient ones on a second thread (long scans
/// are parsed in parallel on a two-core machine); messages come out in argument order.
fn read_scans(
    dut: &std::path::Path,
    ambient: &[std::path::PathBuf],
    opts: &ReadOptions,
    ambient_opts: &ReadOptions,
    verbose: bool,
) -> Result<(scan::Scan, Vec<scan::Scan>), CliError> {
    let (d, a) = std::thread::scope(|s| {
        let amb = s.spawn(|| {
            ambient
                .iter()
                .map(|p| scan::read_scan_file(p, ambient_opts))
                .collect::<Vec<_>>()
        });
        let d = scan::read_scan_file(dut, opts);
        let a = amb.join().unwrap_or_else(|_| {
            ambient
                .iter()
                .map(|p| scan::read_scan_file(p, ambient_opts))
                .collect()
        });
        (d, a)
    });
    let dut_scan = report_reading(dut, d?, verbose);
    let mut scans = Vec::with_capacity(a.len());
    for (path, r) in ambient.iter().zip(a) {
        scans.push(report_reading(path, r?, verbose));
    }
    Ok((dut_scan, scans))
}

fn run_analyze(a: &AnalyzeArgs, verbose: bool) -> Result<u8, CliError> {
    let opts = read_options(&a.read)?;
    let ambient_opts = ReadOptions {
        role: Some(Role::Ambient),
        ..opts.clone()
    };
    let (dut, ambient) = read_scans(&a.scan, &a.ambient, &opts, &ambient_opts, verbose)?;
    let also_opts = ReadOptions {
        rbw_hz: None,
        detector: a.also_detector.map(detector_of),
        ..opts.clone()
    };
    let also = a
        .also
        .iter()
        .map(|p| scan::read_scan_file(p, &also_opts).map(|r| report_reading(p, r, verbose)))
        .collect::<Result<Vec<_>, _>>()?;
    let limits = a
        .limit
        .iter()
        .map(|l| limits::resolve(l))
        .collect::<Result<Vec<_>, _>>()?;
    let items = a
        .transducer
        .iter()
        .map(|p| Transducer::read_file(p))
        .collect::<Result<Vec<_>, _>>()?;
    let sources = a
        .sources
        .as_deref()
        .map(spurhound::sources::read_inventory_file)
        .transpose()?;
    if !(a.margin_db.is_finite() && a.margin_db >= 0.0) {
        return Err(CliError(format!(
            "--margin-db {}: expected a design margin of 0 dB or more",
            a.margin_db
        )));
    }
    let sizing = spurhound::attribution::sizing::SizingParams {
        design_margin_db: a.margin_db,
        ..Default::default()
    };
    let ctx = Context {
        limits,
        ambient,
        transducers: TransducerChain { items },
        also,
        sources,
        sizing,
    };
    let analysis = analyze(&dut, &ctx)?;
    let format = match a.format {
        FormatArg::Text => Format::Text,
        FormatArg::Json => Format::Json,
        FormatArg::Csv => Format::Csv,
        FormatArg::Remeasure => Format::Remeasure,
    };
    let text = report::render(&analysis, format)?;
    match &a.out {
        Some(path) => std::fs::write(path, text)
            .map_err(|e| CliError(format!("{}: cannot write the report: {e}", path.display())))?,
        None => emit(&text),
    }
    if let Some(path) = &a.plot {
        let svg = report::svg::render_svg(&analysis)?;
        std::fs::write(path, svg)
            .map_err(|e| CliError(format!("{}: cannot write the plot: {e}", path.display())))?;
    }
    Ok(if analysis.verdict.pass == Some(false) {
        FAIL
    } else {
        PASS
    })
}

fn run_compare(c: &CompareArgs, verbose: bool) -> Result<u8, CliError> {
    if !(c.repeat_db.is_finite() && c.repeat_db > 0.0) {
        return Err(CliError(format!(
            "--repeat-db {}: expected a positive number of dB",
            c.repeat_db
        )));
    }
    if matches!(c.format, FormatArg::Csv | FormatArg::Remeasure) {
        return Err(CliError(
            "compare writes text or json (--format csv and remeasure are analyze's tables)".into(),
        ));
    }
    let opts = read_options(&c.read)?;
    let ambient_opts = ReadOptions {
        role: Some(Role::Ambient),
        ..opts.clone()
    };
    let (first, ambient) = read_scans(&c.scans[0], &c.ambient, &opts, &ambient_opts, verbose)?;
    let mut scans = vec![first];
    for p in &c.scans[1..] {
        scans.push(report_reading(p, scan::read_scan_file(p, &opts)?, verbose));
    }
    let limits = c
        .limit
        .iter()
        .map(|l| limits::resolve(l))
        .collect::<Result<Vec<_>, _>>()?;
    let items = c
        .transducer
        .iter()
        .map(|p| Transducer::read_file(p))
        .collect::<Result<Vec<_>, _>>()?;
    let ctx = Context {
        limits,
        ambient,
        transducers: TransducerChain { items },
        ..Context::default()
    };
    let analyses = scans
        .iter()
        .map(|s| analyze(s, &ctx))
        .collect::<Result<Vec<_>, _>>()?;
    // a change is only a change between readings of one quantity
    let first_unit = analyses[0].scan.meta.quantity.unit();
    for (a, path) in analyses.iter().zip(&c.scans).skip(1) {
        let unit = a.scan.meta.quantity.unit();
        if unit != first_unit {
            return Err(CliError(format!(
                "{}: measures {unit} but {} measures {first_unit}; compare scans of one quantity (give both the same transducers)",
                path.display(),
                c.scans[0].display()
            )));
        }
    }
    let params = spurhound::compare::CompareParams {
        setup_repeat_db: c.repeat_db,
    };
    let name = |i: usize| c.scans[i].display().to_string();
    let steps: Vec<Step> = (1..analyses.len())
        .map(|i| Step {
            before: name(i - 1),
            after: name(i),
            comparison: spurhound::compare::compare(&analyses[i - 1], &analyses[i], &params),
        })
        .collect();
    let last = analyses.len() - 1;
    let overall = Step {
        before: name(0),
        after: name(last),
        comparison: spurhound::compare::compare(&analyses[0], &analyses[last], &params),
    };
    let text = match c.format {
        FormatArg::Json => report::compare::render_json(&overall, &steps)?,
        _ => report::compare::render_text(&overall, &steps),
    };
    match &c.out {
        Some(path) => std::fs::write(path, text)
            .map_err(|e| CliError(format!("{}: cannot write the report: {e}", path.display())))?,
        None => emit(&text),
    }
    Ok(if overall.comparison.pass == Some(false) {
        FAIL
    } else {
        PASS
    })
}

fn run_limits(l: &LimitsArgs) -> Result<u8, CliError> {
    let mut out = String::new();
    let Some(name) = &l.name else {
        outln!(out, "{:<17} {:<14} title", "name", "range");
        for lim in limits::all_builtin() {
            let (a, b) = lim.range_hz();
            let range = format!("{}-{}", fmt_hz(a), fmt_hz(b));
            outln!(out, "{:<17} {:<14} {}", lim.name, range, lim.title);
        }
        outln!(out);
        outln!(out, "`spurhound limits NAME` shows a table and its source.");
        emit(&out);
        return Ok(PASS);
    };
    let lim = limits::builtin(name).ok_or_else(|| {
        let known: Vec<String> = limits::all_builtin().into_iter().map(|l| l.name).collect();
        CliError(format!(
            "`{name}` is not a built-in limit; built-in limits: {}",
            known.join(", ")
        ))
    })?;
    outln!(out, "{}  ({})", lim.name, lim.title);
    outln!(
        out,
        "detector {}, unit {}",
        lim.detector,
        lim.quantity.unit()
    );
    outln!(out);
    outln!(
        out,
        "  {:>12} {:>12} {:>15} {:>15}",
        "from",
        "to",
        "limit at start",
        "limit at stop"
    );
    for w in lim.vertices.windows(2) {
        let (a, b) = (w[0], w[1]);
        if b.0 > a.0 {
            let unit = lim.quantity.unit();
            let (l0, l1) = (format!("{:.2} {unit}", a.1), format!("{:.2} {unit}", b.1));
            outln!(
                out,
                "  {:>12} {:>12} {l0:>15} {l1:>15}",
                fmt_hz(a.0),
                fmt_hz(b.0)
            );
        }
    }
    outln!(out);
    outln!(
        out,
        "Between rows the limit is linear in log10(f); at a transition the lower value applies."
    );
    let mut source = String::new();
    spurhound::report::text::wrap_into(&mut source, &lim.source, "source: ", "        ");
    out.push_str(&source);
    emit(&out);
    Ok(PASS)
}

fn run_synth(s: &SynthArgs, verbose: bool) -> Result<u8, CliError> {
    let mut scene = spurhound::synth::read_scene_file(&s.scene)?;
    if let Some(seed) = s.seed {
        scene.scan.seed = seed;
    }
    let scan = spurhound::synth::render(&scene)?;
    let text = scan::write_scan_csv(&scan, &scene.write_options());
    std::fs::write(&s.output, text).map_err(|e| {
        CliError(format!(
            "{}: cannot write the scan: {e}",
            s.output.display()
        ))
    })?;
    if verbose {
        let (a, b) = scan.span_hz();
        eprintln!(
            "{}: {} points, {} to {}, seed {}",
            s.output.display(),
            scan.len(),
            fmt_hz(a),
            fmt_hz(b),
            scene.scan.seed
        );
    }
    Ok(PASS)
}
