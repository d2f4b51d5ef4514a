//! The source inventory: the oscillators a board declares (converters, clocks, others), read
//! from TOML, and the match of each harmonic family to at most one of them.
//!
//! ```
//! use spurhound::sources::{match_sources, parse_inventory, FamilyObservation};
//! let text = r#"
//! [[source]]
//! name = "pfc"
//! kind = "switching"
//! frequency_hz = 65e3
//!
//! [[source]]
//! name = "eth-ref"
//! kind = "clock"
//! frequency_hz = 25e6
//! tolerance_ppm = 50
//! "#;
//! let inventory = parse_inventory(text, "board.toml")?;
//! let families = [FamilyObservation { fundamental_hz: 66.1e3, sigma_hz: 40.0, kind: None }];
//! let m = match_sources(&families, &inventory);
//! assert_eq!(m.families[0].matched.as_ref().map(|s| s.source.as_str()), Some("pfc"));
//! assert_eq!(m.unused_sources, vec!["eth-ref".to_string()]);
//! # Ok::<(), spurhound::sources::SourceError>(())
//! ```
//!
//! # File format
//! One `[[source]]` table per oscillator. Required: `name` (unique), `kind` (`"switching"`,
//! `"clock"` or `"other"`), `frequency_hz` (> 0). Optional: `tolerance_pct` or `tolerance_ppm`
//! (not both; defaults in [`default_tolerance`]), `duty` (0 < duty < 1), `edge_time_s` (10-90 %
//! rise time, > 0), `spread_pct` (≥ 0, total peak-to-peak dither as % of the frequency),
//! `burst_rate_hz` (> 0), `burst_duty` (0 < burst_duty ≤ 1) and `rail` (free text: the supply
//! rail or net it sits on). Any other key is an error that lists the allowed ones.
//!
//! # Matching
//! Only the fundamental itself is compared with the declared frequency: a family whose
//! fundamental is a multiple or sub-multiple of a declared source is not matched to it (the
//! family search guards against octave errors; guessing them again here would hide a wrong
//! fundamental). See [`match_sources`] for the likelihood.

use crate::analysis::{Family, Kind, fmt_hz};
use serde::{Deserialize, Serialize};
use statrs::function::erf::erfc;
use std::path::Path;
use toml::Spanned;

/// Keys allowed in a `[[source]]` table.
pub const SOURCE_KEYS: [&str; 11] = [
    "name",
    "kind",
    "frequency_hz",
    "tolerance_pct",
    "tolerance_ppm",
    "duty",
    "edge_time_s",
    "spread_pct",
    "burst_rate_hz",
    "burst_duty",
    "rail",
];

/// Keys allowed at the top level of an inventory file.
pub const TOP_KEYS: [&str; 1] = ["source"];

/// What can be wrong with an inventory file. Every variant names the file; where the TOML
/// parser or a value's position gives it, the 1-based line too.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
#[non_exhaustive]
pub enum SourceError {
    /// The file cannot be read.
    #[error("{file}: cannot read the source inventory: {reason}")]
    Io { file: String, reason: String },
    /// TOML syntax, a missing key or a value of the wrong type.
    #[error("{file}{}: not a valid source inventory: {message}", at_line(*line))]
    Toml {
        file: String,
        line: Option<usize>,
        message: String,
    },
    /// A key that the format does not have (often a typo).
    #[error("{file}{}: unknown key `{key}`; allowed keys are {allowed}", at_line(*line))]
    UnknownKey {
        file: String,
        line: Option<usize>,
        key: String,
        allowed: String,
    },
    /// No `[[source]]` table.
    #[error(
        "{file}: no sources declared; add one `[[source]]` table per oscillator (name, kind, frequency_hz)"
    )]
    Empty { file: String },
    /// `tolerance_pct` and `tolerance_ppm` in one table.
    #[error(
        "{file}:{line}: source `{name}` gives both tolerance_pct and tolerance_ppm; keep one of them"
    )]
    BothTolerances {
        file: String,
        line: usize,
        name: String,
    },
    /// Two sources with one name.
    #[error(
        "{file}:{line}: source name `{name}` is already used on line {first_line}; names must be unique"
    )]
    DuplicateName {
        file: String,
        line: usize,
        name: String,
        first_line: usize,
    },
    /// A value out of its range.
    #[error("{file}:{line}: `{field}` = {value} of source `{name}`: expected {expected}")]
    OutOfRange {
        file: String,
        line: usize,
        name: String,
        field: &'static str,
        value: String,
        expected: &'static str,
    },
}

fn at_line(line: Option<usize>) -> String {
    line.map(|l| format!(":{l}")).unwrap_or_default()
}

/// The kind of a declared oscillator.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "lowercase")]
pub enum SourceKind {
    Switching,
    Clock,
    Other,
}

/// A frequency tolerance, as declared (or defaulted).
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum Tolerance {
    Percent(f64),
    Ppm(f64),
}

impl Tolerance {
    /// The tolerance as a fraction of the nominal frequency (10 % → 0.1, 100 ppm → 1e-4).
    pub fn fraction(self) -> f64 {
        match self {
            Tolerance::Percent(p) => p / 100.0,
            Tolerance::Ppm(p) => p / 1e6,
        }
    }
}

impl std::fmt::Display for Tolerance {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        match self {
            Tolerance::Percent(p) => write!(f, "±{p} %"),
            Tolerance::Ppm(p) => write!(f, "±{p} ppm"),
        }
    }
}

/// The tolerance of a source that does not state one (common practice, no single published
/// source):
/// - switching: ±10 %: the oscillator of a converter controller is commonly specified to about
///   ±5 to ±10 %, and its frequency also moves with load in some modes;
/// - clock: ±100 ppm: a crystal or crystal oscillator's initial tolerance, temperature drift and
///   ageing together are commonly within ±50 to ±100 ppm;
/// - other: ±5 %, a middle value for RC oscillators and everything else.
pub fn default_tolerance(kind: SourceKind) -> Tolerance {
    match kind {
        SourceKind::Switching => Tolerance::Percent(10.0),
        SourceKind::Clock => Tolerance::Ppm(100.0),
        SourceKind::Other => Tolerance::Percent(5.0),
    }
}

/// One declared oscillator, checked.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Source {
    pub name: String,
    pub kind: SourceKind,
    pub frequency_hz: f64,
    pub tolerance: Tolerance,
    /// False when the tolerance is [`default_tolerance`].
    pub tolerance_stated: bool,
    pub duty: Option<f64>,
    /// 10-90 % rise time, s.
    pub edge_time_s: Option<f64>,
    /// Total peak-to-peak dither, % of `frequency_hz`.
    pub spread_pct: Option<f64>,
    pub burst_rate_hz: Option<f64>,
    pub burst_duty: Option<f64>,
    pub rail: Option<String>,
    /// Line of its `[[source]]` header in the file (1-based).
    pub line: usize,
}

/// A checked inventory file.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Inventory {
    pub file: String,
    pub sources: Vec<Source>,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct RawFile {
    #[serde(default)]
    source: Vec<Spanned<RawSource>>,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct RawSource {
    name: String,
    kind: SourceKind,
    frequency_hz: Spanned<f64>,
    tolerance_pct: Option<Spanned<f64>>,
    tolerance_ppm: Option<Spanned<f64>>,
    duty: Option<Spanned<f64>>,
    edge_time_s: Option<Spanned<f64>>,
    spread_pct: Option<Spanned<f64>>,
    burst_rate_hz: Option<Spanned<f64>>,
    burst_duty: Option<Spanned<f64>>,
    rail: Option<String>,
}

/// 1-based line of byte `offset` in `text`.
fn line_of(text: &str, offset: usize) -> usize {
    let end = offset.min(text.len());
    text.as_bytes()[..end]
        .iter()
        .filter(|&&b| b == b'\n')
        .count()
        + 1
}

/// Reads and checks an inventory file.
///
/// # Errors
/// [`SourceError::Io`] when the file cannot be read, else as [`parse_inventory`].
pub fn read_inventory_file(path: &Path) -> Result<Inventory, SourceError> {
    let file = path.display().to_string();
    let text = std::fs::read_to_string(path).map_err(|e| SourceError::Io {
        file: file.clone(),
        reason: e.to_string(),
    })?;
    parse_inventory(&text, &file)
}

/// Parses inventory TOML and checks every value; `file` names it in messages.
///
/// # Errors
/// [`SourceError::Toml`] (syntax, missing key, wrong type or unknown kind),
/// [`SourceError::UnknownKey`], [`SourceError::Empty`], [`SourceError::BothTolerances`],
/// [`SourceError::DuplicateName`], [`SourceError::OutOfRange`].
pub fn parse_inventory(text: &str, file: &str) -> Result<Inventory, SourceError> {
    let raw: RawFile = toml::from_str(text).map_err(|e| toml_error(text, file, &e))?;
    if raw.source.is_empty() {
        return Err(SourceError::Empty { file: file.into() });
    }
    let mut sources: Vec<Source> = Vec::with_capacity(raw.source.len());
    for spanned in raw.source {
        let line = line_of(text, spanned.span().start);
        let source = check_source(spanned.into_inner(), text, file, line)?;
        if let Some(first) = sources.iter().find(|s| s.name == source.name) {
            return Err(SourceError::DuplicateName {
                file: file.into(),
                line,
                name: source.name,
                first_line: first.line,
            });
        }
        sources.push(source);
    }
    Ok(Inventory {
        file: file.into(),
        sources,
    })
}

/// Turns a TOML error into [`SourceError::UnknownKey`] (serde's "unknown field `x`" message)
/// or [`SourceError::Toml`], with the line of its span.
fn toml_error(text: &str, file: &str, e: &toml::de::Error) -> SourceError {
    let line = e.span().map(|s| line_of(text, s.start));
    let message = e
        .message()
        .trim_end()
        .replace("expected f64", "expected a number");
    if let Some(key) = message
        .strip_prefix("unknown field `")
        .and_then(|rest| rest.split('`').next())
    {
        let in_source = message.contains("`frequency_hz`");
        let allowed: &[&str] = if in_source { &SOURCE_KEYS } else { &TOP_KEYS };
        let scope = if in_source {
            " (in a [[source]] table)"
        } else {
            " (at the top level)"
        };
        return SourceError::UnknownKey {
            file: file.into(),
            line,
            key: key.into(),
            allowed: format!("{}{scope}", allowed.join(", ")),
        };
    }
    SourceError::Toml {
        file: file.into(),
        line,
        message,
    }
}

/// One optional value's range check.
struct Field<'a> {
    text: &'a str,
    file: &'a str,
    name: &'a str,
}

impl Field<'_> {
    fn check(
        &self,
        field: &'static str,
        value: Option<&Spanned<f64>>,
        ok: impl Fn(f64) -> bool,
        expected: &'static str,
    ) -> Result<Option<f64>, SourceError> {
        let Some(v) = value else { return Ok(None) };
        let x = *v.get_ref();
        if x.is_finite() && ok(x) {
            return Ok(Some(x));
        }
        Err(SourceError::OutOfRange {
            file: self.file.into(),
            line: line_of(self.text, v.span().start),
            name: self.name.into(),
            field,
            value: x.to_string(),
            expected,
        })
    }
}

fn check_source(r: RawSource, text: &str, file: &str, line: usize) -> Result<Source, SourceError> {
    let name = r.name.trim().to_string();
    if name.is_empty() {
        return Err(SourceError::OutOfRange {
            file: file.into(),
            line,
            name,
            field: "name",
            value: "\"\"".into(),
            expected: "a non-empty name",
        });
    }
    let f = Field {
        text,
        file,
        name: &name,
    };
    let positive = |x: f64| x > 0.0;
    let open_unit = |x: f64| x > 0.0 && x < 1.0;
    let frequency_hz = f
        .check(
            "frequency_hz",
            Some(&r.frequency_hz),
            positive,
            "a positive frequency in Hz",
        )?
        .unwrap_or(0.0);
    let pct = f.check(
        "tolerance_pct",
        r.tolerance_pct.as_ref(),
        |x| x > 0.0 && x < 100.0,
        "a tolerance above 0 and below 100 %",
    )?;
    let ppm = f.check(
        "tolerance_ppm",
        r.tolerance_ppm.as_ref(),
        |x| x > 0.0 && x < 1e6,
        "a tolerance above 0 and below 1000000 ppm",
    )?;
    let (tolerance, tolerance_stated) = match (pct, ppm) {
        (Some(_), Some(_)) => {
            return Err(SourceError::BothTolerances {
                file: file.into(),
                line,
                name,
            });
        }
        (Some(p), None) => (Tolerance::Percent(p), true),
        (None, Some(p)) => (Tolerance::Ppm(p), true),
        (None, None) => (default_tolerance(r.kind), false),
    };
    Ok(Source {
        duty: f.check(
            "duty",
            r.duty.as_ref(),
            open_unit,
            "a duty cycle between 0 and 1 (exclusive)",
        )?,
        edge_time_s: f.check(
            "edge_time_s",
            r.edge_time_s.as_ref(),
            positive,
            "a positive 10-90 % rise time in s",
        )?,
        spread_pct: f.check(
            "spread_pct",
            r.spread_pct.as_ref(),
            |x| (0.0..100.0).contains(&x),
            "a spread from 0 to below 100 % (total, peak to peak)",
        )?,
        burst_rate_hz: f.check(
            "burst_rate_hz",
            r.burst_rate_hz.as_ref(),
            positive,
            "a positive burst repetition rate in Hz",
        )?,
        burst_duty: f.check(
            "burst_duty",
            r.burst_duty.as_ref(),
            |x| x > 0.0 && x <= 1.0,
            "a burst duty above 0 and at most 1",
        )?,
        name,
        kind: r.kind,
        frequency_hz,
        tolerance,
        tolerance_stated,
        rail: r.rail,
        line,
    })
}

/// What the matcher needs of a family.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct FamilyObservation {
    pub fundamental_hz: f64,
    /// Standard uncertainty of the fundamental (Hz); 0 means exact.
    pub sigma_hz: f64,
    /// The kind attribution gave it, if any.
    pub kind: Option<Kind>,
}

impl From<&Family> for FamilyObservation {
    fn from(f: &Family) -> Self {
        FamilyObservation {
            fundamental_hz: f.fundamental_hz,
            sigma_hz: f.fundamental_sigma_hz,
            kind: Some(f.kind),
        }
    }
}

/// A family's declared source.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct SourceMatch {
    pub source: String,
    /// Index into [`Inventory::sources`].
    pub source_index: usize,
    /// Likelihood ratio of "this source" against "an undeclared oscillator", see
    /// [`likelihood_ratio`].
    pub likelihood_ratio: f64,
    /// Fundamental over nominal, minus one, in ppm and in %.
    pub offset_ppm: f64,
    pub offset_pct: f64,
    /// Whether the fundamental lies within the declared tolerance (and spread) of nominal.
    pub within_tolerance: bool,
    /// Whether the family's kind agrees with the declared kind (`None`: no kind to compare).
    pub kind_agrees: Option<bool>,
}

/// The answer for one family.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct FamilyAssignment {
    /// Index into the families given to [`match_sources`].
    pub family: usize,
    /// `None`: not on the inventory.
    pub matched: Option<SourceMatch>,
    /// One sentence for people.
    pub note: String,
}

/// The result of [`match_sources`].
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Matching {
    /// One entry per family, in the order given.
    pub families: Vec<FamilyAssignment>,
    /// Declared sources that no family matched, in file order.
    pub unused_sources: Vec<String>,
}

/// A match needs at least this likelihood ratio: with even prior odds, the declared source is
/// then at least as likely as an undeclared oscillator (our choice, see [`likelihood_ratio`]).
pub const MIN_LIKELIHOOD_RATIO: f64 = 1.0;

/// A family whose attributed kind contradicts the declared kind (switching against clock)
/// keeps this share of its likelihood ratio. Attribution's kind is itself a judgement from priors,
/// so a contradiction weighs against the match without forbidding it (our choice, no
/// published value).
pub const KIND_MISMATCH_FACTOR: f64 = 0.25;

/// Half-width of the interval in which a source's fundamental may lie (Hz): the tolerance, plus
/// half the total spread for a dithered source (its centre may sit anywhere from the nominal
/// frequency, for a down- or up-spread, to the middle of the spread, for a centre spread).
pub fn acceptance_half_width_hz(source: &Source) -> f64 {
    let spread = source.spread_pct.unwrap_or(0.0) / 100.0;
    source.frequency_hz * (source.tolerance.fraction() + spread / 2.0)
}

/// Probability that a standard normal variable lies in `lo..hi` (`lo <= hi`), computed from
/// the tail on the side away from the mean so that far tails keep their precision.
fn normal_mass(lo: f64, hi: f64) -> f64 {
    let q = |x: f64| 0.5 * erfc(x / std::f64::consts::SQRT_2); // upper tail P(Z > x)
    if lo > 0.0 {
        q(lo) - q(hi)
    } else if hi < 0.0 {
        q(-hi) - q(-lo)
    } else {
        1.0 - q(hi) - q(-lo)
    }
}

/// Likelihood density (1/Hz) of observing the fundamental `f_hz` ± `sigma_hz` from `source`.
///
/// # Formula
/// ```text
/// p(f) = [Φ((f − a)/σ) − Φ((f − b)/σ)] / (b − a),   a, b = f_nom ∓ w
/// ```
/// the source's true frequency uniform on `a..b` (w from [`acceptance_half_width_hz`]),
/// convolved with the Gaussian error N(0, σ²) of the fitted fundamental; for σ = 0 it is
/// 1/(b − a) inside and 0 outside.
/// # Source
/// Derived: convolution of a uniform and a normal density (any probability text).
pub fn likelihood_density(f_hz: f64, sigma_hz: f64, source: &Source) -> f64 {
    let w = acceptance_half_width_hz(source);
    let (a, b) = (source.frequency_hz - w, source.frequency_hz + w);
    if !(w > 0.0 && f_hz.is_finite()) {
        return 0.0;
    }
    if sigma_hz.is_nan() || sigma_hz <= 0.0 {
        return if (a..=b).contains(&f_hz) {
            1.0 / (b - a)
        } else {
            0.0
        };
    }
    normal_mass((f_hz - b) / sigma_hz, (f_hz - a) / sigma_hz) / (b - a)
}

/// Likelihood ratio of "the family comes from `source`" against "it comes from an oscillator not
/// on the inventory".
///
/// # Formula
/// ```text
/// B = p(f | source) / p_u(f),   p_u(f) = 1 / (f · ln 10)
/// ```
/// p from [`likelihood_density`]; p_u spreads an undeclared oscillator evenly in log-frequency
/// over one decade (a log-uniform density). A ±10 % converter then gives at most B ≈ 11.5, a
/// ±100 ppm clock B ≈ 11 500: a tight declaration that fits is strong evidence, a loose one is
/// weak. A family whose kind contradicts the declared one is multiplied by
/// [`KIND_MISMATCH_FACTOR`].
/// # Source
/// Derived: ratio of marginal likelihoods; the one-decade log-uniform alternative is our
/// choice.
pub fn likelihood_ratio(obs: &FamilyObservation, source: &Source) -> f64 {
    let f = obs.fundamental_hz;
    if f.is_nan() || f <= 0.0 {
        return 0.0;
    }
    let b = likelihood_density(f, obs.sigma_hz, source) * f * std::f64::consts::LN_10;
    match kind_agrees(obs.kind, source.kind) {
        Some(false) => b * KIND_MISMATCH_FACTOR,
        _ => b,
    }
}

/// Whether an attributed kind agrees with a declared one; `None` when either says nothing
/// (no attribution, "other", lighting).
fn kind_agrees(family: Option<Kind>, declared: SourceKind) -> Option<bool> {
    let family = match family? {
        Kind::Switching => SourceKind::Switching,
        Kind::Clock => SourceKind::Clock,
        _ => return None,
    };
    (declared != SourceKind::Other).then_some(family == declared)
}

/// Matches each family to at most one declared source, and each source to at most one family.
///
/// Every (family, source) pair gets its [`likelihood_ratio`]; pairs below
/// [`MIN_LIKELIHOOD_RATIO`] are dropped; the rest are taken best first (greedy), skipping a
/// pair whose family or source is already taken. Greedy is not the best one-to-one assignment in
/// every case: when one family fits two sources and takes the one a second family needed, the
/// second stays unmatched. With declared tolerances such crossings are rare; the note of an
/// unmatched family then names the taken source it would have fitted. Broadcast families (a
/// raster of carriers) are never matched: they are not the board's.
pub fn match_sources(families: &[FamilyObservation], inventory: &Inventory) -> Matching {
    let mut pairs: Vec<(f64, usize, usize)> = Vec::new();
    for (i, obs) in families.iter().enumerate() {
        if obs.kind == Some(Kind::Broadcast) {
            continue;
        }
        for (j, s) in inventory.sources.iter().enumerate() {
            let b = likelihood_ratio(obs, s);
            if b >= MIN_LIKELIHOOD_RATIO {
                pairs.push((b, i, j));
            }
        }
    }
    pairs.sort_by(|x, y| y.0.total_cmp(&x.0).then(x.1.cmp(&y.1)).then(x.2.cmp(&y.2)));
    let mut by_family: Vec<Option<usize>> = vec![None; families.len()];
    let mut used = vec![false; inventory.sources.len()];
    for &(_, i, j) in &pairs {
        if by_family[i].is_none() && !used[j] {
            by_family[i] = Some(j);
            used[j] = true;
        }
    }
    let assignments = families
        .iter()
        .enumerate()
        .map(|(i, obs)| assignment(i, obs, by_family[i], &pairs, inventory))
        .collect();
    Matching {
        families: assignments,
        unused_sources: inventory
            .sources
            .iter()
            .zip(&used)
            .filter(|(_, u)| !**u)
            .map(|(s, _)| s.name.clone())
            .collect(),
    }
}

fn assignment(
    i: usize,
    obs: &FamilyObservation,
    chosen: Option<usize>,
    pairs: &[(f64, usize, usize)],
    inventory: &Inventory,
) -> FamilyAssignment {
    let f = obs.fundamental_hz;
    let Some(s) = chosen.and_then(|j| inventory.sources.get(j).map(|s| (j, s))) else {
        let taken = pairs
            .iter()
            .find(|p| p.1 == i)
            .and_then(|p| inventory.sources.get(p.2));
        let note = match (obs.kind, taken) {
            (Some(Kind::Broadcast), _) => format!(
                "{}: a broadcast raster, not matched to the board's sources",
                fmt_hz(f)
            ),
            (_, Some(t)) => format!(
                "{}: not on the inventory; it fits `{}`, which a better-fitting family took",
                fmt_hz(f),
                t.name
            ),
            _ => format!(
                "{}: not on the inventory (no declared source within its tolerance)",
                fmt_hz(f)
            ),
        };
        return FamilyAssignment {
            family: i,
            matched: None,
            note,
        };
    };
    let (j, source) = s;
    let m = source_match(obs, j, source);
    let offset = match source.tolerance {
        Tolerance::Ppm(_) => format!("{:+.0} ppm", m.offset_ppm),
        Tolerance::Percent(_) => format!("{:+.2} %", m.offset_pct),
    };
    let note = format!(
        "{}: declared source `{}` ({} {}), {} from nominal, likelihood ratio {:.1}",
        fmt_hz(f),
        source.name,
        fmt_hz(source.frequency_hz),
        source.tolerance,
        offset,
        m.likelihood_ratio
    );
    FamilyAssignment {
        family: i,
        matched: Some(m),
        note,
    }
}

fn source_match(obs: &FamilyObservation, j: usize, source: &Source) -> SourceMatch {
    let rel = obs.fundamental_hz / source.frequency_hz - 1.0;
    let w = acceptance_half_width_hz(source);
    SourceMatch {
        source: source.name.clone(),
        source_index: j,
        likelihood_ratio: likelihood_ratio(obs, source),
        offset_ppm: rel * 1e6,
        offset_pct: rel * 100.0,
        within_tolerance: (obs.fundamental_hz - source.frequency_hz).abs() <= w,
        kind_agrees: kind_agrees(obs.kind, source.kind),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn parse(text: &str) -> Result<Inventory, SourceError> {
        parse_inventory(text, "inv.toml")
    }

    const TWO: &str = r#"
[[source]]
name = "buck"
kind = "switching"
frequency_hz = 400000
duty = 0.3
edge_time_s = 10e-9
rail = "5V"

[[source]]
name = "mcu"
kind = "clock"
frequency_hz = 8e6
tolerance_ppm = 30
spread_pct = 1.0
"#;

    #[test]
    fn reads_sources_with_defaults_and_lines() {
        let inv = parse(TWO).unwrap();
        assert_eq!(inv.sources.len(), 2);
        let buck = &inv.sources[0];
        // integer frequency accepted; default switching tolerance 10 % (documented default)
        assert_eq!(buck.frequency_hz, 400e3);
        assert_eq!(buck.tolerance, Tolerance::Percent(10.0));
        assert!(!buck.tolerance_stated);
        assert_eq!(buck.rail.as_deref(), Some("5V"));
        assert_eq!(buck.line, 2);
        let mcu = &inv.sources[1];
        assert_eq!(mcu.tolerance, Tolerance::Ppm(30.0));
        assert!(mcu.tolerance_stated);
        assert_eq!(mcu.line, 10);
        assert_eq!(
            default_tolerance(SourceKind::Clock).fraction(),
            100e-6,
            "documented default"
        );
        assert_eq!(default_tolerance(SourceKind::Other).fraction(), 0.05);
    }

    #[test]
    fn unknown_key_is_named_with_its_line_and_the_allowed_keys() {
        let text =
            "[[source]]\nname = \"a\"\nkind = \"clock\"\nfrequency_hz = 1e6\nfreqency_tol = 3\n";
        let e = parse(text).unwrap_err();
        let SourceError::UnknownKey {
            line, key, allowed, ..
        } = &e
        else {
            panic!("{e:?}")
        };
        assert_eq!(key, "freqency_tol");
        assert_eq!(*line, Some(5));
        assert!(allowed.contains("tolerance_ppm") && allowed.contains("burst_duty"));
        assert!(
            e.to_string()
                .starts_with("inv.toml:5: unknown key `freqency_tol`"),
            "{e}"
        );
    }

    #[test]
    fn unknown_top_level_key_lists_the_top_level_keys() {
        let e = parse(
            "title = \"board\"\n[[source]]\nname = \"a\"\nkind = \"clock\"\nfrequency_hz = 1e6\n",
        )
        .unwrap_err();
        let SourceError::UnknownKey { key, allowed, .. } = &e else {
            panic!("{e:?}")
        };
        assert_eq!(key, "title");
        assert!(allowed.starts_with("source"), "{allowed}");
    }

    #[test]
    fn a_file_without_sources_is_an_error() {
        assert!(matches!(parse(""), Err(SourceError::Empty { .. })));
        assert!(matches!(
            parse("# nothing\n"),
            Err(SourceError::Empty { .. })
        ));
    }

    #[test]
    fn both_tolerances_are_an_error() {
        let text = "[[source]]\nname = \"x\"\nkind = \"clock\"\nfrequency_hz = 1e6\ntolerance_pct = 1\ntolerance_ppm = 50\n";
        let e = parse(text).unwrap_err();
        assert_eq!(
            e,
            SourceError::BothTolerances {
                file: "inv.toml".into(),
                line: 1,
                name: "x".into()
            }
        );
    }

    #[test]
    fn out_of_range_values_name_field_line_and_expectation() {
        let cases = [
            ("frequency_hz = -5", "frequency_hz", 4),
            ("frequency_hz = 1e6\nduty = 1.0", "duty", 5),
            ("frequency_hz = 1e6\nspread_pct = -1", "spread_pct", 5),
            ("frequency_hz = 1e6\nedge_time_s = 0", "edge_time_s", 5),
            ("frequency_hz = 1e6\nburst_rate_hz = 0", "burst_rate_hz", 5),
            ("frequency_hz = 1e6\nburst_duty = 1.5", "burst_duty", 5),
            ("frequency_hz = 1e6\ntolerance_pct = 0", "tolerance_pct", 5),
            (
                "frequency_hz = 1e6\ntolerance_ppm = 2e6",
                "tolerance_ppm",
                5,
            ),
            ("frequency_hz = nan", "frequency_hz", 4),
        ];
        for (body, want, want_line) in cases {
            let text = format!("[[source]]\nname = \"s\"\nkind = \"other\"\n{body}\n");
            match parse(&text) {
                Err(SourceError::OutOfRange {
                    field,
                    line,
                    expected,
                    ..
                }) => {
                    assert_eq!(field, want, "{body}");
                    assert_eq!(line, want_line, "{body}");
                    assert!(!expected.is_empty());
                }
                other => panic!("{body}: {other:?}"),
            }
        }
    }

    #[test]
    fn missing_key_bad_kind_and_syntax_are_toml_errors_with_a_line() {
        let missing = parse("[[source]]\nname = \"s\"\nkind = \"clock\"\n").unwrap_err();
        assert!(
            matches!(&missing, SourceError::Toml { message, line: Some(_), .. } if message.contains("frequency_hz")),
            "{missing:?}"
        );
        let kind = parse("[[source]]\nname = \"s\"\nkind = \"crystal\"\nfrequency_hz = 1e6\n")
            .unwrap_err();
        assert!(
            matches!(&kind, SourceError::Toml { line: Some(3), message, .. } if message.contains("crystal")),
            "{kind:?}"
        );
        let syntax = parse("[[source]\nname = 1\n").unwrap_err();
        assert!(
            matches!(syntax, SourceError::Toml { line: Some(1), .. }),
            "{syntax:?}"
        );
    }

    #[test]
    fn duplicate_and_empty_names_are_errors() {
        let text = "[[source]]\nname = \"a\"\nkind = \"clock\"\nfrequency_hz = 1e6\n[[source]]\nname = \"a\"\nkind = \"clock\"\nfrequency_hz = 2e6\n";
        assert!(matches!(
            parse(text),
            Err(SourceError::DuplicateName {
                line: 5,
                first_line: 1,
                ..
            })
        ));
        let empty = "[[source]]\nname = \" \"\nkind = \"clock\"\nfrequency_hz = 1e6\n";
        assert!(matches!(
            parse(empty),
            Err(SourceError::OutOfRange { field: "name", .. })
        ));
    }

    #[test]
    fn the_demo_board_inventory_matches_its_scene() {
        // ground truth: fixtures/scenes/demo-board.toml renders 65 kHz, 400 kHz, 1.15 MHz
        // (±2 % spread), 3.579545 MHz and 25 MHz; the inventory declares them and a 25 kHz fan
        let path = Path::new(env!("CARGO_MANIFEST_DIR")).join("fixtures/sources/demo-board.toml");
        let inv = read_inventory_file(&path).unwrap();
        assert_eq!(inv.sources.len(), 6);
        let fams = [
            obs(65.02e3, 30.0),
            obs(400.1e3, 80.0),
            obs(1.149e6, 2e3),
            obs(3.5797e6, 40.0),
            obs(25.0005e6, 100.0),
            obs(42e3, 20.0), // the bench lights' ballast: not on the board
        ];
        let m = match_sources(&fams, &inv);
        let got: Vec<Option<&str>> = m
            .families
            .iter()
            .map(|a| a.matched.as_ref().map(|s| s.source.as_str()))
            .collect();
        assert_eq!(
            got,
            vec![
                Some("flyback"),
                Some("buck-5v"),
                Some("buck-3v3"),
                Some("mcu-xtal"),
                Some("eth-ref"),
                None
            ]
        );
        assert_eq!(m.unused_sources, vec!["fan-pwm".to_string()]);
    }

    #[test]
    fn an_unreadable_file_names_the_file() {
        let e = read_inventory_file(Path::new("/nonexistent/inv.toml")).unwrap_err();
        assert!(matches!(e, SourceError::Io { ref file, .. } if file == "/nonexistent/inv.toml"));
    }

    fn source(name: &str, kind: SourceKind, f: f64, tol: Tolerance) -> Source {
        Source {
            name: name.into(),
            kind,
            frequency_hz: f,
            tolerance: tol,
            tolerance_stated: true,
            duty: None,
            edge_time_s: None,
            spread_pct: None,
            burst_rate_hz: None,
            burst_duty: None,
            rail: None,
            line: 1,
        }
    }

    fn inventory(sources: Vec<Source>) -> Inventory {
        Inventory {
            file: "inv.toml".into(),
            sources,
        }
    }

    fn obs(f: f64, sigma: f64) -> FamilyObservation {
        FamilyObservation {
            fundamental_hz: f,
            sigma_hz: sigma,
            kind: None,
        }
    }

    #[test]
    fn likelihood_is_the_uniform_density_inside_and_half_at_the_edge() {
        let s = source("c", SourceKind::Clock, 25e6, Tolerance::Ppm(100.0));
        // source: derived, uniform on 25 MHz ± 2.5 kHz: density 1/(5 kHz) = 2e-4 per Hz well
        // inside; at the edge the Gaussian straddles it: half of that.
        assert!((likelihood_density(25e6, 10.0, &s) - 2e-4).abs() < 1e-12);
        assert!((likelihood_density(25e6 + 2.5e3, 10.0, &s) - 1e-4).abs() < 1e-9);
        // Likelihood ratio at the centre: f·ln10/(2w) = 25e6·2.302585/5e3 = 11512.9 (derived)
        assert!((likelihood_ratio(&obs(25e6, 10.0), &s) - 11_512.925).abs() < 0.01);
        // exact σ = 0: indicator
        assert_eq!(likelihood_density(25e6 + 2.6e3, 0.0, &s), 0.0);
    }

    #[test]
    fn inside_tolerance_matches_outside_does_not() {
        let inv = inventory(vec![source(
            "pfc",
            SourceKind::Switching,
            65e3,
            Tolerance::Percent(10.0),
        )]);
        // 70 kHz is +7.7 %: inside ±10 %
        let m = match_sources(&[obs(70e3, 50.0)], &inv);
        let got = m.families[0].matched.as_ref().unwrap();
        assert_eq!(got.source, "pfc");
        assert!(got.within_tolerance);
        assert!((got.offset_pct - (70.0 / 65.0 - 1.0) * 100.0).abs() < 1e-9);
        assert!(m.unused_sources.is_empty());
        // 75 kHz is +15.4 %, 3.5 kHz beyond the edge at σ = 50 Hz: 70 σ out
        let m = match_sources(&[obs(75e3, 50.0)], &inv);
        assert!(m.families[0].matched.is_none());
        assert!(
            m.families[0].note.contains("not on the inventory"),
            "{}",
            m.families[0].note
        );
        assert_eq!(m.unused_sources, vec!["pfc".to_string()]);
    }

    #[test]
    fn a_wide_sigma_reaches_just_past_the_edge() {
        let inv = inventory(vec![source(
            "c",
            SourceKind::Clock,
            8e6,
            Tolerance::Ppm(50.0),
        )]);
        // edge at 8e6 + 400 Hz; observed 8e6 + 450 Hz: 50 Hz past the edge
        assert!(
            match_sources(&[obs(8e6 + 450.0, 100.0)], &inv).families[0]
                .matched
                .as_ref()
                .is_some_and(|m| !m.within_tolerance)
        );
        assert!(
            match_sources(&[obs(8e6 + 450.0, 5.0)], &inv).families[0]
                .matched
                .is_none()
        );
    }

    #[test]
    fn two_sources_close_together_each_get_their_own_family() {
        // 24.000 MHz and 24.003 MHz (125 ppm apart), both ±100 ppm: their intervals overlap
        // from 24.0006 to 24.0024 MHz.
        let inv = inventory(vec![
            source("a", SourceKind::Clock, 24.000e6, Tolerance::Ppm(100.0)),
            source("b", SourceKind::Clock, 24.003e6, Tolerance::Ppm(100.0)),
        ]);
        let fams = [obs(24.0031e6, 20.0), obs(23.9995e6, 20.0)];
        let m = match_sources(&fams, &inv);
        let names: Vec<_> = m
            .families
            .iter()
            .map(|a| a.matched.as_ref().map(|s| s.source.clone()))
            .collect();
        assert_eq!(names, vec![Some("b".to_string()), Some("a".to_string())]);
        // one family in the overlap: it takes one of them (the tighter density is equal, so
        // the first in file order), and the other is listed as unused
        let m = match_sources(&[obs(24.0015e6, 20.0)], &inv);
        assert_eq!(m.families[0].matched.as_ref().unwrap().source, "a");
        assert_eq!(m.unused_sources, vec!["b".to_string()]);
    }

    #[test]
    fn the_tighter_declaration_wins_where_both_fit() {
        // a 10 MHz ±5 % "other" and a 10 MHz ±50 ppm clock both contain 10.0002 MHz; the clock's
        // density is 1000 times higher (derived: 1/(1 kHz) against 1/(1 MHz)).
        let inv = inventory(vec![
            source("rc", SourceKind::Other, 10e6, Tolerance::Percent(5.0)),
            source("xo", SourceKind::Clock, 10e6, Tolerance::Ppm(50.0)),
        ]);
        let m = match_sources(&[obs(10.0002e6, 10.0)], &inv);
        assert_eq!(m.families[0].matched.as_ref().unwrap().source, "xo");
        assert_eq!(m.unused_sources, vec!["rc".to_string()]);
    }

    #[test]
    fn a_spread_source_accepts_its_centre_within_the_spread() {
        let mut s = source("ssc", SourceKind::Clock, 100e6, Tolerance::Ppm(100.0));
        // down-spread by 2 %: the family's fundamental sits near 99 MHz, 1 % below nominal
        let fam = [obs(99.0e6, 2e3)];
        assert!(
            match_sources(&fam, &inventory(vec![s.clone()])).families[0]
                .matched
                .is_none()
        );
        s.spread_pct = Some(2.0);
        // half-width 100 MHz · (100 ppm + 1 %) = 1.01 MHz
        assert!((acceptance_half_width_hz(&s) - 1.01e6).abs() < 1e-3);
        let m = match_sources(&fam, &inventory(vec![s]));
        let got = m.families[0].matched.as_ref().unwrap();
        assert!(got.within_tolerance);
        assert!((got.offset_pct + 1.0).abs() < 1e-9);
    }

    #[test]
    fn one_to_one_and_broadcast_never_matches() {
        let inv = inventory(vec![source(
            "buck",
            SourceKind::Switching,
            400e3,
            Tolerance::Percent(10.0),
        )]);
        let fams = [
            obs(402e3, 100.0),
            obs(399e3, 100.0),
            FamilyObservation {
                fundamental_hz: 400e3,
                sigma_hz: 0.0,
                kind: Some(Kind::Broadcast),
            },
        ];
        let m = match_sources(&fams, &inv);
        let n = m.families.iter().filter(|a| a.matched.is_some()).count();
        assert_eq!(n, 1);
        assert!(
            m.families[1].note.contains("better-fitting family took"),
            "{}",
            m.families[1].note
        );
        assert!(m.families[2].note.contains("broadcast"));
    }

    #[test]
    fn a_contradicting_kind_lowers_the_factor() {
        let s = source(
            "buck",
            SourceKind::Switching,
            400e3,
            Tolerance::Percent(10.0),
        );
        let mut o = obs(400e3, 100.0);
        let plain = likelihood_ratio(&o, &s);
        o.kind = Some(Kind::Clock);
        assert!((likelihood_ratio(&o, &s) - plain * KIND_MISMATCH_FACTOR).abs() < 1e-12);
        o.kind = Some(Kind::Switching);
        assert_eq!(likelihood_ratio(&o, &s), plain);
    }
}
