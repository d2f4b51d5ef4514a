//! Command-line arguments (clap derive).

use clap::{Args, Parser, Subcommand, ValueEnum};
use std::path::PathBuf;

#[derive(Debug, Parser)]
#[command(
    name = "spurhound",
    version,
    about = "Attributes the peaks of EMC pre-compliance emission scans and judges them against limits",
    long_about = "spurhound reads exported emission scans, corrects them (LISN factor, cable, antenna factor), \
                  judges them against published or user limit lines and says where they fail. Results are \
                  pre-compliance estimates, not a certified measurement.\n\nExit status: 0 within every limit \
                  (or no limit given), 1 a limit is exceeded (survey: a band cannot be judged), 2 bad input or usage."
)]
pub struct Cli {
    /// Say what each file reader skipped and read.
    #[arg(long, short, global = true)]
    pub verbose: bool,
    #[command(subcommand)]
    pub command: Command,
}

#[derive(Debug, Subcommand)]
pub enum Command {
    /// Analyse a scan: corrections, margins to limits, verdict.
    Analyze(AnalyzeArgs),
    /// Compare scans of one board before and after a change: which families and failing
    /// frequencies improved.
    Compare(CompareArgs),
    /// Survey the bench's ambient over many sweeps: emitters, headroom under a limit, the
    /// quietest time.
    Survey(SurveyArgs),
    /// List the built-in limits, or show one (table and source).
    Limits(LimitsArgs),
    /// Render an analyzer trace from a scene file of declared sources.
    Synth(SynthArgs),
}

/// How scan files are read; applies to the DUT scan and every ambient scan.
#[derive(Debug, Args)]
pub struct ReadArgs {
    /// RBW in Hz (`9000`, `9k`, `9kHz`); replaces what the file says.
    #[arg(long, value_name = "HZ")]
    pub rbw: Option<String>,
    /// Detector of the scan; replaces what the file says.
    #[arg(long, value_enum)]
    pub detector: Option<DetectorArg>,
    /// Frequency unit of the files that do not state one.
    #[arg(long, value_enum)]
    pub freq_unit: Option<FreqUnitArg>,
    /// Level unit of the files that do not state one.
    #[arg(long, value_enum)]
    pub level_unit: Option<LevelUnitArg>,
    /// Columns of frequency and level, 1-based (`1,3`).
    #[arg(long, value_name = "A,B")]
    pub columns: Option<String>,
    /// Sort rows by frequency instead of refusing a file that does not ascend.
    #[arg(long)]
    pub sort: bool,
}

#[derive(Debug, Args)]
pub struct AnalyzeArgs {
    /// The DUT scan (CSV).
    pub scan: PathBuf,
    /// An ambient scan taken with the DUT off; repeatable.
    #[arg(long, value_name = "FILE")]
    pub ambient: Vec<PathBuf>,
    /// A built-in limit name (see `spurhound limits`) or a limit file; repeatable.
    #[arg(long, value_name = "NAME|FILE")]
    pub limit: Vec<String>,
    /// A correction table added to every reading (LISN factor, limiter, cable, antenna factor); repeatable, applied in order.
    #[arg(long, value_name = "FILE")]
    pub transducer: Vec<PathBuf>,
    /// Another scan of the DUT with a different RBW or detector: narrowband and broadband are
    /// told apart by how each peak changes.
    #[arg(long, value_name = "FILE")]
    pub also: Vec<PathBuf>,
    /// Detector of the `--also` scans (replaces what their files say); a quasi-peak or average
    /// scan replaces the predicted readings.
    #[arg(long, value_enum)]
    pub also_detector: Option<DetectorArg>,
    /// The board's oscillator inventory (TOML, one `[[source]]` table per oscillator):
    /// families are matched to the declared sources, and their edges, duty and spread size the
    /// remedies.
    #[arg(long, value_name = "FILE")]
    pub sources: Option<PathBuf>,
    /// Attenuation asked beyond each exceedance when sizing remedies, dB.
    #[arg(long, value_name = "DB", default_value_t = spurhound::attribution::sizing::DESIGN_MARGIN_DB)]
    pub margin_db: f64,
    #[command(flatten)]
    pub read: ReadArgs,
    /// Report format.
    #[arg(long, value_enum, default_value_t = FormatArg::Text)]
    pub format: FormatArg,
    /// Write the report to this file instead of standard output.
    #[arg(long, value_name = "FILE")]
    pub out: Option<PathBuf>,
    /// Also draw the scan, ambient and limits as an SVG plot.
    #[arg(long, value_name = "FILE.svg")]
    pub plot: Option<PathBuf>,
}

#[derive(Debug, Args)]
pub struct CompareArgs {
    /// The scan before the change, then the scan(s) after it, in order (a fix story: each scan
    /// is compared with the one before it, and the last with the first).
    #[arg(required = true, num_args = 2.., value_name = "SCAN")]
    pub scans: Vec<PathBuf>,
    /// An ambient scan taken with the DUT off (used for every scan); repeatable.
    #[arg(long, value_name = "FILE")]
    pub ambient: Vec<PathBuf>,
    /// A built-in limit name (see `spurhound limits`) or a limit file; repeatable.
    #[arg(long, value_name = "NAME|FILE")]
    pub limit: Vec<String>,
    /// A correction table added to every reading; repeatable, applied in order.
    #[arg(long, value_name = "FILE")]
    pub transducer: Vec<PathBuf>,
    /// Set-up repeatability of one reading, dB (changes are judged against it).
    #[arg(long, value_name = "DB", default_value_t = spurhound::compare::SETUP_REPEAT_DB)]
    pub repeat_db: f64,
    #[command(flatten)]
    pub read: ReadArgs,
    /// Report format (csv is not offered: the JSON has every table).
    #[arg(long, value_enum, default_value_t = FormatArg::Text)]
    pub format: FormatArg,
    /// Write the report to this file instead of standard output.
    #[arg(long, value_name = "FILE")]
    pub out: Option<PathBuf>,
}

#[derive(Debug, Args)]
#[command(
    long_about = "Reads repeated ambient sweeps (DUT off), puts them in time order when they state a \
                  `# time = ...`, associates their emissions into emitters (persistent, intermittent, \
                  one-off; broadcast, ISM, lighting hump, comb, other) and measures the headroom under \
                  the limit per band.\n\nExit status: 0 every band can be judged (or no limit given), \
                  1 some band cannot be judged, 2 bad input or usage."
)]
pub struct SurveyArgs {
    /// Ambient sweeps: files, folders (their .csv, .tsv and .txt files, by name) or globs such
    /// as `bench/*.csv` (quoted, so that spurhound expands them).
    #[arg(required = true, value_name = "FILE|DIR|GLOB")]
    pub inputs: Vec<String>,
    /// A built-in limit name (see `spurhound limits`) or a limit file.
    #[arg(long, value_name = "NAME|FILE")]
    pub limit: Option<String>,
    /// A correction table added to every reading; repeatable, applied in order.
    #[arg(long, value_name = "FILE")]
    pub transducer: Vec<PathBuf>,
    /// Headroom asked of the ambient's 95th percentile under the limit, dB.
    #[arg(long, value_name = "DB", default_value_t = spurhound::setup::AMBIENT_HEADROOM_DB)]
    pub headroom_db: f64,
    /// Share of a band's points that must have that headroom for the band to be judged.
    #[arg(long, value_name = "SHARE", default_value_t = spurhound::survey::MIN_USABLE_FRACTION)]
    pub usable: f64,
    #[command(flatten)]
    pub read: ReadArgs,
    /// Report format (text or json).
    #[arg(long, value_enum, default_value_t = FormatArg::Text)]
    pub format: FormatArg,
    /// Write the report to this file instead of standard output.
    #[arg(long, value_name = "FILE")]
    pub out: Option<PathBuf>,
    /// Also draw the ambient median and 95th percentile, the limit and the emitters as SVG.
    #[arg(long, value_name = "FILE.svg")]
    pub plot: Option<PathBuf>,
}

#[derive(Debug, Args)]
pub struct LimitsArgs {
    /// A built-in limit to show.
    pub name: Option<String>,
}

#[derive(Debug, Args)]
pub struct SynthArgs {
    /// The scene (TOML).
    pub scene: PathBuf,
    /// Where to write the scan CSV.
    #[arg(long, short, value_name = "FILE")]
    pub output: PathBuf,
    /// Override the scene's seed.
    #[arg(long)]
    pub seed: Option<u64>,
}

#[derive(Debug, Clone, Copy, ValueEnum)]
pub enum FormatArg {
    Text,
    Json,
    /// The peak table (with predicted QP/AV and a re-measure flag), for a spreadsheet.
    Csv,
    /// The re-measure list as CSV, for a measurement script (analyze only).
    Remeasure,
}

#[derive(Debug, Clone, Copy, ValueEnum)]
pub enum DetectorArg {
    Peak,
    QuasiPeak,
    Average,
    Rms,
    Sample,
}

#[derive(Debug, Clone, Copy, ValueEnum)]
pub enum FreqUnitArg {
    Hz,
    Khz,
    Mhz,
    Ghz,
}

#[derive(Debug, Clone, Copy, ValueEnum)]
pub enum LevelUnitArg {
    Dbuv,
    Dbm,
    Dbmv,
    Dbua,
    #[value(name = "dbuv/m")]
    DbuvPerM,
}
