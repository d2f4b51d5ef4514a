//! spurhound reads exported EMC emission scans, corrects them with a transducer chain, judges
//! them against published or user limit lines and (stage by stage) attributes what it sees to
//! the oscillators that made it.
//!
//! # Pipeline
//! `scan` reads a CSV export into a [`Scan`]; `correct` adds the transducer chain (LISN factor,
//! limiter, cable loss, antenna factor); `limits` supplies limit lines and per-point margins;
//! `floor` tracks the receiver floor and sets the detection threshold from its fluctuation;
//! `peaks` finds the emissions; `bandwidth` tells narrowband from broadband and finds humps;
//! `families` groups lines into harmonic families and broadcast sets; `ambient` says which are
//! the lab's; `attribution` names their kind, ranks them and suggests remedies. [`analyze`] runs
//! every stage in order and returns an [`Analysis`], which `report` renders as text, JSON, CSV or
//! SVG. [`setup`] holds the set-up checks (RBW, display step, noise floor, overload, detector,
//! ambient) that `analyze` and the survey both run. [`survey::survey`] takes many ambient sweeps,
//! associates their emissions into emitters (presence, class, kind, levels, margin) and measures
//! the headroom under a limit, per band and per sweep. `synth` renders analyzer traces from
//! declared sources, for demos and for ground truth (`synth::day`: a day of ambient sweeps).
//!
//! # Conventions
//! - Frequencies are in hertz (`freq_hz`), levels in dBµV (or dBµV/m, dBµA as the scan's
//!   [`Quantity`] says), level differences in dB.
//! - `margin_db = limit_dbuv - level_dbuv`; a margin of zero or more passes.
//! - dBm become dBµV by adding 106.99 dB (50 Ω): 20·log10(√(1 mW · 50 Ω) / 1 µV) = 106.9897.
//! - Detectors are named as in CISPR 16-1-1: peak, quasi-peak, average (and rms, sample).
//! - Results are pre-compliance estimates, not a certified measurement.
//!
//! # Example
//! ```
//! use spurhound::{analyze, limits, scan, Context};
//! let text = "freq_hz,level_dbuv\n150000,70\n200000,50\n1000000,40\n";
//! let scan = scan::read_scan_str(text, "inline.csv", &scan::ReadOptions::default())?.scan;
//! let limit = limits::resolve("cispr32-b-qp")?;
//! let ctx = Context { limits: vec![limit], ..Context::default() };
//! let analysis = analyze(&scan, &ctx)?;
//! // 70 dBµV at 150 kHz is 4 dB over the 66 dBµV Class B quasi-peak limit
//! // (source: CISPR 32 Class B conducted limits, 66 dBµV QP at 150 kHz).
//! assert_eq!(analysis.verdict.pass, Some(false));
//! assert_eq!(analysis.verdict.worst_margin_db, Some(-4.0));
//! # Ok::<(), Box<dyn std::error::Error>>(())
//! ```
#![cfg_attr(
    not(test),
    deny(clippy::unwrap_used, clippy::expect_used, clippy::panic)
)]

pub mod ambient;
pub mod analysis;
pub mod attribution;
pub mod bandwidth;
pub mod compare;
pub mod correct;
pub mod detectors;
pub mod families;
pub mod floor;
pub mod limits;
pub mod peaks;
pub mod prediction;
pub mod report;
pub mod scan;
pub mod setup;
pub mod sources;
pub mod survey;
pub mod synth;
pub mod units;

pub use analysis::{Analysis, Context, Verdict, analyze};
pub use scan::{Detector, Quantity, Role, Scan, ScanMeta};

/// Every error the library returns.
#[derive(Debug, thiserror::Error)]
#[non_exhaustive]
pub enum Error {
    #[error(transparent)]
    Scan(#[from] scan::ScanError),
    #[error(transparent)]
    Correct(#[from] correct::CorrectError),
    #[error(transparent)]
    Limit(#[from] limits::LimitError),
    #[error(transparent)]
    Scene(#[from] synth::SceneError),
    #[error(transparent)]
    Render(#[from] report::RenderError),
    #[error(transparent)]
    Settings(#[from] analysis::SettingsError),
    #[error(transparent)]
    Sources(#[from] sources::SourceError),
    #[error(transparent)]
    Sizing(#[from] attribution::sizing::SizingError),
    #[error(transparent)]
    Survey(#[from] survey::SurveyError),
}
