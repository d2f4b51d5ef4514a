//! `analyze`: every stage, in order, on one screen.
//!
//! 1. correct the DUT scan and each ambient scan with the transducer chain;
//! 2. margins of the corrected DUT trace to every limit, and of each ambient trace;
//! 3. set-up checks ([`crate::setup`]: detector, RBW, display step, noise floor, overload,
//!    quantity, ambient near the limit) as warnings;
//! 4. peaks, families and their attribution (filled by the attribution stages; empty for now);
//! 5. the verdict.

use crate::ambient::{self, AmbientScan, PeakAmbient};
use crate::attribution::{self, remedies};
use crate::bandwidth;
use crate::correct::TransducerChain;
use crate::families::{self, FamilyFit, FamilyParams, fingerprint, sieve::Pattern};
use crate::floor::{Floor, FloorParams, estimate_floor};
use crate::limits::{Limit, Margins, margins};
use crate::peaks::{FoundPeak, PeakParams, find_peaks};
use crate::scan::{Detector, Scan};
use crate::units::Quantity;
use serde::Serialize;

pub use crate::setup::{AMBIENT_HEADROOM_DB, CISPR_BANDS, Warning};

/// Everything besides the DUT scan that an analysis needs.
#[derive(Debug, Clone, Default)]
pub struct Context {
    /// Limits to judge against; the first is the report's main limit.
    pub limits: Vec<Limit>,
    /// Ambient scans (DUT off), uncorrected; the chain is applied to them too.
    pub ambient: Vec<Scan>,
    /// Corrections added to every scan.
    pub transducers: TransducerChain,
    /// Further scans of the DUT with another RBW or detector, for the classic narrowband /
    /// broadband discrimination (the first one is used).
    pub also: Vec<Scan>,
    /// The board's declared oscillators (`--sources`): families are matched to them.
    pub sources: Option<crate::sources::Inventory>,
    /// Settings of the remedy sizing (design margin and model constants); the RBW is taken
    /// from the scan when it states one.
    pub sizing: crate::attribution::sizing::SizingParams,
}

/// Whether a peak is narrowband (a line) or broadband (wider than the RBW allows).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum Bandwidth {
    Narrowband,
    Broadband,
}

/// Where an emission comes from.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum Origin {
    Dut,
    Ambient,
    Mixed,
    /// No ambient scan was given.
    Unknown,
}

/// What kind of oscillator made a family.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum Kind {
    Switching,
    Clock,
    Lighting,
    Broadcast,
    Other,
}

/// One emission found in the DUT trace.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Peak {
    pub freq_hz: f64,
    pub level_dbuv: f64,
    pub limit_dbuv: Option<f64>,
    pub margin_db: Option<f64>,
    pub bandwidth: Bandwidth,
    pub origin: Origin,
    /// The `id` of its family in [`Analysis::families`].
    pub family: Option<usize>,
    /// Harmonic number in its family.
    pub harmonic: Option<u32>,
    pub prominence_db: f64,
    /// −6 dB width (Hz).
    pub width_hz: f64,
    /// Level over the detection threshold (dB).
    pub significance_db: f64,
    /// Level over the median noise floor (dB).
    pub over_floor_db: f64,
    /// Highest ambient level at the peak, when the ambient shows an emission there.
    pub ambient_dbuv: Option<f64>,
    /// Index of the display point at the top.
    pub point: usize,
    /// What a scan given with `--also` says, when one was given.
    pub discrimination: Option<bandwidth::Discrimination>,
    /// Predicted (or measured) quasi-peak and average readings and their margins.
    pub prediction: Option<crate::prediction::PeakPrediction>,
}

/// A harmonic family: one oscillator's lines.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Family {
    pub id: usize,
    pub fundamental_hz: f64,
    pub fundamental_sigma_hz: f64,
    pub harmonics: Vec<u32>,
    pub kind: Kind,
    pub origin: Origin,
    /// Smallest margin of its harmonics over every given limit.
    pub worst_margin_db: Option<f64>,
    /// 1 = first to fix.
    pub rank: usize,
    pub remedies: Vec<String>,
    /// Harmonics over a limit.
    pub points_over: usize,
    /// 0 to 1, see [`crate::attribution::rank::confidence`].
    pub confidence: f64,
    /// Expected harmonics that are clearly absent.
    pub misses: usize,
    /// True when only odd harmonics are predicted (a duty cycle of 50 %).
    pub odd_only: bool,
    pub envelope: Option<crate::families::envelope::Envelope>,
    /// Why the kind was chosen.
    pub kind_reasons: Vec<String>,
    /// Its harmonics over a limit: frequency and level minus limit (dB), worst limit each.
    pub exceedances: Vec<crate::attribution::sizing::Exceedance>,
    /// The declared source it matches (with `--sources`); `None` with an inventory: not on it.
    pub declared_source: Option<crate::sources::SourceMatch>,
    /// Remedies sized for its exceedances (DUT families that fail).
    pub sized: Option<crate::attribution::sizing::SizedRemedies>,
    /// The prediction of its member with the smallest predicted QP/AV margin.
    pub predicted_worst: Option<crate::prediction::PeakPrediction>,
    /// Duty, edge time, dither and DM/CM of a switching family with enough harmonics.
    pub fingerprint: Option<crate::families::fingerprint::Fingerprint>,
}

impl Default for Family {
    fn default() -> Self {
        Family {
            id: 0,
            fundamental_hz: 0.0,
            fundamental_sigma_hz: 0.0,
            harmonics: Vec::new(),
            kind: Kind::Other,
            origin: Origin::Dut,
            worst_margin_db: None,
            rank: 0,
            remedies: Vec::new(),
            points_over: 0,
            confidence: 0.0,
            misses: 0,
            odd_only: false,
            envelope: None,
            kind_reasons: Vec::new(),
            exceedances: Vec::new(),
            declared_source: None,
            sized: None,
            predicted_worst: None,
            fingerprint: None,
        }
    }
}

/// The trace judged against one limit.
#[derive(Debug, Clone, PartialEq)]
pub struct LimitResult {
    pub limit: Limit,
    pub margins: Margins,
}

/// The overall verdict of the measured trace against every given limit.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Verdict {
    /// `None` when no limit was given or no point lies in a limit's range.
    pub pass: Option<bool>,
    pub worst_margin_db: Option<f64>,
    pub worst_freq_hz: Option<f64>,
    /// The limit that gave the worst margin.
    pub worst_limit: Option<String>,
}

/// An ambient scan after correction, with its margins to the main limit.
#[derive(Debug, Clone, PartialEq)]
pub struct AmbientResult {
    pub scan: Scan,
    pub margins: Option<Margins>,
    /// Frequency ranges where the ambient is within [`AMBIENT_HEADROOM_DB`] of the main limit:
    /// `(start_hz, stop_hz, smallest margin)`.
    pub near_limit: Vec<(f64, f64, f64)>,
}

/// The result of [`analyze`].
#[derive(Debug, Clone, PartialEq)]
pub struct Analysis {
    /// The DUT scan after correction.
    pub scan: Scan,
    pub ambient: Vec<AmbientResult>,
    pub limits: Vec<LimitResult>,
    pub peaks: Vec<Peak>,
    pub families: Vec<Family>,
    pub humps: Vec<crate::bandwidth::Hump>,
    pub floor: FloorSummary,
    pub verdict: Verdict,
    pub warnings: Vec<Warning>,
    /// How the families met the declared sources, when an inventory was given.
    pub inventory: Option<crate::attribution::plan::InventoryUse>,
    /// Predicted QP/AV verdict, the re-measure list and checks against measured QP/AV scans.
    pub detectors: crate::prediction::Detectors,
}

/// What the floor stage measured.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct FloorSummary {
    /// Median noise floor over the trace (dBµV).
    pub median_dbuv: f64,
    /// Effective independent envelope samples per display point.
    pub samples_per_point: f64,
    /// Interquartile range of a noise point (dB).
    pub spread_db: f64,
}

/// What can be wrong with the settings of an analysis.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
#[non_exhaustive]
pub enum SettingsError {
    #[error("RBW must be positive, got {given_hz} Hz")]
    RbwNotPositive { given_hz: f64 },
    #[error(
        "ambient scan {ambient} measures {ambient_unit} but the DUT scan measures {dut_unit}; give both the same transducers"
    )]
    AmbientQuantityDiffers {
        ambient: String,
        ambient_unit: String,
        dut_unit: String,
    },
}

/// Runs every stage on `scan` with `ctx`.
///
/// # Errors
/// [`crate::Error::Correct`] when a transducer does not cover a scan,
/// [`crate::Error::Settings`] when an ambient scan measures another quantity.
pub fn analyze(scan: &Scan, ctx: &Context) -> Result<Analysis, crate::Error> {
    let dut = ctx.transducers.apply(scan)?;
    let ambient = correct_ambient(&dut, ctx)?;
    // the ambient floors (and the DUT's trace against them) and the DUT's margins are
    // independent of the DUT's floor, peaks and humps: they are found alongside
    let other_side = || {
        let amb: Vec<AmbientScan> = ambient.iter().map(|a| AmbientScan::new(&a.scan)).collect();
        let raised = ambient::raised_floor(&dut, &amb);
        let limits: Vec<LimitResult> = ctx
            .limits
            .iter()
            .map(|l| LimitResult {
                limit: l.clone(),
                margins: margins(&dut, l),
            })
            .collect();
        (amb, raised, limits)
    };
    let (other, (floor, found, bandwidth, humps)) = std::thread::scope(|s| {
        let other = s.spawn(other_side);
        let floor = estimate_floor(&dut, &FloorParams::default());
        let found = find_peaks(&dut, &floor, &PeakParams::default());
        let bandwidth = bandwidth::classify(&dut, &found);
        let humps = bandwidth::find_humps(&dut, &floor, &found);
        let other = other.join().unwrap_or_else(|_| other_side());
        (other, (floor, found, bandwidth, humps))
    });
    let (ambient_scans, raised, limits) = other;
    let evidence: Vec<PeakAmbient> = found
        .iter()
        .map(|p| {
            let half = 0.5 * bandwidth::line_width_hz(&dut, &found, p.index)
                + bandwidth::local_step(&dut, p.index);
            ambient::peak_origin(p, &ambient_scans, half)
        })
        .collect();
    let in_ambient: Vec<bool> = evidence.iter().map(|e| e.ambient_dbuv.is_some()).collect();
    let fits = families::find_families(
        &dut,
        &floor,
        &found,
        &humps,
        &in_ambient,
        &FamilyParams::default(),
    );
    let also = match ctx.also.first() {
        Some(s) => Some(ctx.transducers.apply(s)?),
        None => None,
    };
    let mut peaks = build_peaks(&found, &bandwidth, &evidence, &limits);
    let also_silent = also.as_ref().is_some_and(|also| {
        discriminate_peaks(&mut peaks, &found, &dut, also);
        !peaks.is_empty() && peaks.iter().all(|p| p.discrimination.is_none())
    });
    let mut families = build_families(
        &fits,
        &mut peaks,
        &limits,
        (&dut, &floor),
        ambient.is_empty(),
    );
    let inventory = ctx
        .sources
        .as_ref()
        .map(|inv| attribution::plan::declare(&mut families, inv));
    let conducted = is_conducted(&dut);
    let mut sizing = ctx.sizing;
    if let Some(rbw) = dut.meta.rbw_hz.filter(|r| *r > 0.0) {
        sizing.rbw_hz = rbw;
    }
    attribution::plan::size(&mut families, ctx.sources.as_ref(), conducted, &sizing)?;
    let mut humps = explain_humps(humps, &peaks, &found, &dut);
    let also_all = ctx
        .also
        .iter()
        .map(|s| ctx.transducers.apply(s))
        .collect::<Result<Vec<_>, _>>()?;
    let detectors = crate::prediction::predict_peaks(
        &dut,
        &mut peaks,
        &mut families,
        &humps,
        &limits,
        &also_all,
        ctx.sources.as_ref(),
    );
    let mut warnings = Vec::new();
    if let Some(h) = steady_background(&dut, &floor) {
        warnings.push(Warning {
            code: "floor-is-signal",
            message: format!(
                "the trace never falls to a receiver floor: its lowest level fluctuates like {:.0} independent samples per point, far steadier than noise on this grid, so a steady broadband emission (a comb finer than the RBW) fills it; lines under it cannot be seen",
                floor.samples_per_point
            ),
        });
        humps.push(h);
    }
    for h in raised {
        if humps
            .iter()
            .any(|k| k.start_hz <= h.start_hz && k.stop_hz >= h.stop_hz)
        {
            continue;
        }
        warnings.push(Warning {
            code: "raised-floor",
            message: format!(
                "from {} to {} the board's trace stands {:.0} dB over the ambient's receiver floor and never dips to it: a comb finer than the RBW or the display step, merged dithered harmonics or broadband noise fills it; lines under it cannot be seen (see the humps for a rescan)",
                fmt_hz(h.start_hz),
                fmt_hz(h.stop_hz),
                h.over_floor_db
            ),
        });
        humps.push(h);
    }
    let verdict = verdict(&limits);
    if also_silent {
        warnings.push(Warning {
            code: "also-unused",
            message: "the --also scan told nothing: it needs a stated RBW in both scans and another RBW (or peak against average with the same RBW)".into(),
        });
    }
    let checks = crate::setup::ScanChecks {
        scan: &dut,
        raw: scan,
        limits: &ctx.limits,
        floor: Some(&floor),
    };
    crate::setup::check_scan(&checks, &mut warnings);
    crate::setup::check_ambient(&dut, &ambient, &mut warnings);
    let floor = summarise(&floor);
    Ok(Analysis {
        scan: dut,
        ambient,
        limits,
        peaks,
        families,
        humps,
        floor,
        verdict,
        warnings,
        inventory,
        detectors,
    })
}

fn summarise(floor: &Floor) -> FloorSummary {
    let mut f = floor.floor_dbuv.clone();
    FloorSummary {
        median_dbuv: crate::floor::quantile_in_place(&mut f, 0.5),
        samples_per_point: floor.samples_per_point,
        spread_db: floor.spread_db,
    }
}

/// Noise in a positive-peak bucket is the maximum of about k·step/RBW independent envelope
/// samples (k ≈ 2.5, the sweep-time factor; at least one). A floor whose fitted law is more
/// than ten times steadier than that, and steadier than 30 samples, is not noise but a steady
/// emission filling the trace: reported as one hump over the whole scan (traces of 200 points
/// or more; fewer cannot fit the law).
fn steady_background(dut: &Scan, floor: &Floor) -> Option<bandwidth::Hump> {
    // the law needs points to be fitted at all
    const MIN_POINTS: usize = 200;
    if dut.len() < MIN_POINTS {
        return None;
    }
    let rbw = dut.meta.rbw_hz?;
    let step = bandwidth::local_step(dut, dut.len() / 2);
    let expected = (2.5 * step / rbw).max(1.0);
    if floor.samples_per_point < (10.0 * expected).max(30.0) {
        return None;
    }
    let (start_hz, stop_hz) = dut.span_hz();
    let top = (0..dut.len()).max_by(|&a, &b| dut.level_dbuv[a].total_cmp(&dut.level_dbuv[b]))?;
    let mut h = bandwidth::Hump {
        start_hz,
        stop_hz,
        freq_hz: dut.freq_hz[top],
        level_dbuv: dut.level_dbuv[top],
        over_floor_db: 0.0,
        family: None,
        likely_source: Some("a steady broadband emission over the whole scan (a comb finer than the RBW or the step, a PWM or burst-mode converter); a rescan with a narrower RBW shows a comb as lines".into()),
        rescan: None,
        seen_as: bandwidth::HumpBasis::SteadyTrace,
    };
    h.rescan = Some(bandwidth::rescan_for(&h, rbw));
    Some(h)
}

/// Per peak, the evidence of a second scan; where it speaks, it decides the bandwidth.
fn discriminate_peaks(peaks: &mut [Peak], found: &[FoundPeak], dut: &Scan, also: &Scan) {
    for (p, f) in peaks.iter_mut().zip(found) {
        p.discrimination = bandwidth::discriminate(dut, f, also);
        if let Some(d) = p.discrimination {
            p.bandwidth = if d.nature == bandwidth::Nature::Narrowband {
                Bandwidth::Narrowband
            } else {
                Bandwidth::Broadband
            };
        }
    }
}

/// Each hump: the family whose harmonic it is (the family of the peak that stands for its
/// plateau, [`families::hump_parts`]; a steady line standing out of it is another
/// oscillator's), else the likely source and the rescan that would resolve a comb hidden in it.
/// `peaks` are made from `found`, one for one.
fn explain_humps(
    mut humps: Vec<bandwidth::Hump>,
    peaks: &[Peak],
    found: &[FoundPeak],
    dut: &Scan,
) -> Vec<bandwidth::Hump> {
    for h in &mut humps {
        h.family = families::hump_parts(dut, found, h)
            .plateau
            .and_then(|i| peaks.get(i))
            .and_then(|p| p.family);
        if h.family.is_none() {
            h.likely_source = Some(
                "a comb finer than the RBW or the display step (a converter in burst mode or at a low switching frequency, a PWM), or broadband noise; a rescan with a narrower RBW shows a comb as lines".into(),
            );
            h.rescan = dut.meta.rbw_hz.map(|rbw| bandwidth::rescan_for(h, rbw));
        }
    }
    humps
}

/// Smallest margin of point `index` over every limit.
fn worst_margin_at(limits: &[LimitResult], index: usize) -> Option<f64> {
    limits
        .iter()
        .filter_map(|r| r.margins.margin_db.get(index).copied().flatten())
        .reduce(f64::min)
}

fn build_peaks(
    found: &[FoundPeak],
    bandwidth: &[Bandwidth],
    evidence: &[PeakAmbient],
    limits: &[LimitResult],
) -> Vec<Peak> {
    let main = limits.first();
    found
        .iter()
        .enumerate()
        .map(|(k, p)| {
            let limit_dbuv =
                main.and_then(|r| r.margins.limit_dbuv.get(p.index).copied().flatten());
            Peak {
                freq_hz: p.freq_hz,
                level_dbuv: p.level_dbuv,
                limit_dbuv,
                margin_db: limit_dbuv.map(|l| l - p.level_dbuv),
                bandwidth: bandwidth[k],
                origin: evidence[k].origin,
                family: None,
                harmonic: None,
                prominence_db: p.prominence_db,
                width_hz: p.width_hz,
                significance_db: p.significance_db,
                over_floor_db: p.over_floor_db,
                ambient_dbuv: evidence[k].ambient_dbuv,
                point: p.index,
                discrimination: None,
                prediction: None,
            }
        })
        .collect()
}

/// A voltage scan that ends by 30 MHz is a conducted (LISN) scan.
fn is_conducted(dut: &Scan) -> bool {
    dut.meta.quantity == Quantity::Voltage && dut.span_hz().1 <= 30e6 * 1.001
}

/// Families from the fits: origin from their members, kind from the evidence, margins over
/// every limit, remedies; then ranked. Marks each member peak with its family.
fn build_families(
    fits: &[FamilyFit],
    peaks: &mut [Peak],
    limits: &[LimitResult],
    (dut, floor): (&Scan, &Floor),
    no_ambient: bool,
) -> Vec<Family> {
    let conducted = is_conducted(dut);
    let mut out: Vec<Family> = Vec::with_capacity(fits.len());
    for (k, fit) in fits.iter().enumerate() {
        let id = k + 1;
        let member_origins: Vec<Origin> =
            fit.members.iter().map(|&(i, _)| peaks[i].origin).collect();
        // a broadcast set is the lab's by allocation and by its members in the ambient scans;
        // a station missing from the ambient scans faded or came on later
        let origin = if fit.raster.is_some() {
            Origin::Ambient
        } else if no_ambient {
            Origin::Dut
        } else {
            ambient::family_origin(&member_origins)
        };
        let (kind, kind_reasons) = attribution::kind::classify(fit, origin);
        let margins: Vec<(f64, Option<f64>)> = fit
            .members
            .iter()
            .map(|&(i, _)| {
                (
                    peaks[i].freq_hz,
                    worst_margin_at(limits, found_index(peaks, i)),
                )
            })
            .collect();
        let worst_margin_db = margins.iter().filter_map(|m| m.1).reduce(f64::min);
        let failing: Vec<f64> = margins
            .iter()
            .filter(|m| m.1.is_some_and(|x| x < 0.0))
            .map(|m| m.0)
            .collect();
        let need = remedies::Need {
            kind,
            origin,
            fundamental_hz: fit.fundamental_hz,
            failing_hz: &failing,
            dithered: fit.envelope.spread_pct.is_some(),
            conducted,
        };
        for &(i, n) in &fit.members {
            peaks[i].family = Some(id);
            peaks[i].harmonic = Some(n);
        }
        out.push(Family {
            id,
            fundamental_hz: fit.fundamental_hz,
            fundamental_sigma_hz: fit.sigma_hz,
            harmonics: fit.members.iter().map(|m| m.1).collect(),
            kind,
            origin,
            worst_margin_db,
            rank: 0,
            remedies: remedies::remedies(&need),
            points_over: failing.len(),
            confidence: attribution::rank::confidence(fit.members.len(), fit.misses),
            misses: fit.misses,
            odd_only: fit.pattern == Pattern::OddOnly,
            envelope: Some(fit.envelope.clone()),
            kind_reasons,
            exceedances: margins
                .iter()
                .filter_map(|&(freq_hz, m)| {
                    m.filter(|x| *x < 0.0)
                        .map(|x| attribution::sizing::Exceedance {
                            freq_hz,
                            over_db: -x,
                        })
                })
                .collect(),
            declared_source: None,
            sized: None,
            predicted_worst: None,
            fingerprint: (kind == Kind::Switching)
                .then(|| fingerprint_of(fit, origin, peaks, (dut, floor), conducted))
                .flatten(),
        });
    }
    attribution::rank::rank(&mut out);
    out
}

/// The fingerprint of a switching family with at least [`fingerprint::MIN_HARMONICS`]
/// harmonics (not a broadcast set). Members of another origin than the family's (a board
/// line the ambient also shows carries the lab's level too) are left out while enough remain.
fn fingerprint_of(
    fit: &FamilyFit,
    origin: Origin,
    peaks: &[Peak],
    (dut, floor): (&Scan, &Floor),
    conducted: bool,
) -> Option<fingerprint::Fingerprint> {
    if fit.raster.is_some() || fit.members.len() < fingerprint::MIN_HARMONICS {
        return None;
    }
    let own = |p: &Peak| match origin {
        Origin::Dut => matches!(p.origin, Origin::Dut | Origin::Unknown),
        Origin::Ambient => p.origin == Origin::Ambient,
        Origin::Mixed | Origin::Unknown => true,
    };
    let members: Vec<(&Peak, u32)> = fit
        .members
        .iter()
        .filter_map(|&(i, n)| peaks.get(i).map(|p| (p, n)))
        .collect();
    let clean = members.iter().filter(|(p, _)| own(p)).count() >= fingerprint::MIN_HARMONICS;
    // a scan that does not say is taken as peak-detected
    let peak_detector = matches!(dut.meta.detector, None | Some(Detector::Peak));
    let harmonics: Vec<fingerprint::HarmonicLevel> = members
        .iter()
        .filter(|(p, _)| !clean || own(p))
        .map(|(p, n)| {
            let reading = (p.level_dbuv, p.over_floor_db, p.significance_db);
            fingerprint::seen_harmonic(*n, reading, peak_detector)
        })
        .collect();
    let member_n: Vec<u32> = fit.members.iter().map(|m| m.1).collect();
    let spread = fit.envelope.spread_pct;
    let absent = fingerprint::absent_harmonics(dut, floor, fit.fundamental_hz, &member_n, spread);
    let levels = fingerprint::FamilyLevels {
        fundamental_hz: fit.fundamental_hz,
        harmonics: &harmonics,
        absent: &absent,
        envelope: Some(&fit.envelope),
        rbw_hz: dut.meta.rbw_hz,
        conducted,
    };
    fingerprint::fingerprint(&levels, &fingerprint::FitParams::default()).ok()
}

/// The display point of peak `i` (peaks keep the order of the found peaks).
fn found_index(peaks: &[Peak], i: usize) -> usize {
    peaks.get(i).map_or(0, |p| p.point)
}

fn correct_ambient(dut: &Scan, ctx: &Context) -> Result<Vec<AmbientResult>, crate::Error> {
    let main = ctx.limits.first();
    let mut out = Vec::with_capacity(ctx.ambient.len());
    for a in &ctx.ambient {
        let scan = ctx.transducers.apply(a)?;
        if scan.meta.quantity != dut.meta.quantity {
            return Err(SettingsError::AmbientQuantityDiffers {
                ambient: scan.label(),
                ambient_unit: scan.meta.quantity.unit().to_string(),
                dut_unit: dut.meta.quantity.unit().to_string(),
            }
            .into());
        }
        let m = main.map(|l| margins(&scan, l));
        let near_limit = m.as_ref().map(|m| near_limit(&scan, m)).unwrap_or_default();
        out.push(AmbientResult {
            scan,
            margins: m,
            near_limit,
        });
    }
    Ok(out)
}

/// Runs of points whose margin is below [`AMBIENT_HEADROOM_DB`].
fn near_limit(scan: &Scan, m: &Margins) -> Vec<(f64, f64, f64)> {
    let mut runs: Vec<(f64, f64, f64)> = Vec::new();
    let mut open = false;
    for (i, margin) in m.margin_db.iter().enumerate() {
        match margin {
            Some(x) if *x < AMBIENT_HEADROOM_DB => {
                let f = scan.freq_hz[i];
                match runs.last_mut() {
                    Some(run) if open => {
                        run.1 = f;
                        run.2 = run.2.min(*x);
                    }
                    _ => runs.push((f, f, *x)),
                }
                open = true;
            }
            _ => open = false,
        }
    }
    runs
}

fn verdict(limits: &[LimitResult]) -> Verdict {
    let mut v = Verdict {
        pass: None,
        worst_margin_db: None,
        worst_freq_hz: None,
        worst_limit: None,
    };
    for r in limits {
        let Some(w) = r.margins.worst else { continue };
        v.pass = Some(v.pass.unwrap_or(true) && w.margin_db >= 0.0);
        if v.worst_margin_db.is_none_or(|m| w.margin_db < m) {
            v.worst_margin_db = Some(w.margin_db);
            v.worst_freq_hz = Some(w.freq_hz);
            v.worst_limit = Some(r.limit.name.clone());
        }
    }
    v
}

/// A frequency for people: `150 kHz`, `1.234 MHz`.
pub fn fmt_hz(freq_hz: f64) -> String {
    let (v, unit) = if freq_hz >= 1e9 {
        (freq_hz / 1e9, "GHz")
    } else if freq_hz >= 1e6 {
        (freq_hz / 1e6, "MHz")
    } else if freq_hz >= 1e3 {
        (freq_hz / 1e3, "kHz")
    } else {
        (freq_hz, "Hz")
    };
    // six significant digits, trailing zeros dropped: 325.482 kHz, 1.10394 MHz, 30 MHz
    let decimals = if v >= 100.0 {
        3
    } else if v >= 10.0 {
        4
    } else {
        5
    };
    let s = format!("{v:.decimals$}");
    let s = s.trim_end_matches('0').trim_end_matches('.');
    format!("{s} {unit}")
}

impl Analysis {
    /// The quantity of the corrected DUT trace.
    pub fn quantity(&self) -> Quantity {
        self.scan.meta.quantity
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::scan::{Detector, ScanMeta};

    fn scan(levels: &[f64], det: Option<Detector>) -> Scan {
        let f: Vec<f64> = (0..levels.len())
            .map(|i| 150e3 * 2f64.powi(i as i32))
            .collect();
        let meta = ScanMeta {
            detector: det,
            rbw_hz: Some(9e3),
            ..ScanMeta::default()
        };
        Scan::new(f, levels.to_vec(), meta).unwrap()
    }

    #[test]
    fn verdict_takes_the_worst_limit() {
        let qp = crate::limits::builtin("cispr32-b-qp").unwrap();
        let av = crate::limits::builtin("cispr32-b-av").unwrap();
        let ctx = Context {
            limits: vec![qp, av],
            ..Context::default()
        };
        // 60 dBµV at 150 kHz: QP margin +6, AV margin −4 (source: CISPR 32 Class B, 66/56 dBµV at 150 kHz)
        let a = analyze(&scan(&[60.0, 30.0], Some(Detector::Peak)), &ctx).unwrap();
        assert_eq!(a.verdict.pass, Some(false));
        assert_eq!(a.verdict.worst_margin_db, Some(-4.0));
        assert_eq!(a.verdict.worst_limit.as_deref(), Some("cispr32-b-av"));
    }

    #[test]
    fn no_limit_gives_no_verdict() {
        let a = analyze(
            &scan(&[60.0, 30.0], Some(Detector::Peak)),
            &Context::default(),
        )
        .unwrap();
        assert_eq!(a.verdict.pass, None);
        assert!(a.warnings.iter().any(|w| w.code == "no-limit"));
        assert!(a.warnings.iter().any(|w| w.code == "no-ambient"));
    }

    #[test]
    fn average_scan_against_qp_limit_is_flagged() {
        let qp = crate::limits::builtin("cispr32-b-qp").unwrap();
        let ctx = Context {
            limits: vec![qp],
            ..Context::default()
        };
        let a = analyze(&scan(&[40.0, 30.0], Some(Detector::Average)), &ctx).unwrap();
        assert!(a.warnings.iter().any(|w| w.code == "detector-below-limit"));
        let a = analyze(&scan(&[40.0, 30.0], Some(Detector::QuasiPeak)), &ctx).unwrap();
        assert!(
            !a.warnings
                .iter()
                .any(|w| w.code.starts_with("detector") || w.code == "peak-vs-weighted")
        );
    }

    #[test]
    fn ambient_near_the_limit_is_reported() {
        let qp = crate::limits::builtin("cispr32-b-qp").unwrap();
        let mut amb = scan(&[62.0, 30.0, 30.0], Some(Detector::Peak));
        amb.meta.role = crate::scan::Role::Ambient;
        let ctx = Context {
            limits: vec![qp],
            ambient: vec![amb],
            ..Context::default()
        };
        let a = analyze(&scan(&[40.0, 30.0, 30.0], Some(Detector::Peak)), &ctx).unwrap();
        // 62 dBµV at 150 kHz is 4 dB under the 66 dBµV limit: inside the 6 dB headroom
        assert_eq!(a.ambient[0].near_limit, vec![(150e3, 150e3, 4.0)]);
        assert!(a.warnings.iter().any(|w| w.code == "ambient-near-limit"));
    }

    #[test]
    fn rbw_outside_cispr_is_flagged() {
        let mut s = scan(&[40.0, 30.0], Some(Detector::Peak));
        s.meta.rbw_hz = Some(100e3);
        let a = analyze(&s, &Context::default()).unwrap();
        assert!(a.warnings.iter().any(|w| w.code == "rbw-not-cispr"));
    }

    #[test]
    fn analyze_runs_the_shared_set_up_checks() {
        // 9 points from 150 kHz to 38 MHz: steps far over RBW/2 (METHODS §9)
        let a = analyze(
            &scan(&[40.0, 30.0], Some(Detector::Peak)),
            &Context::default(),
        )
        .unwrap();
        assert!(a.warnings.iter().any(|w| w.code == "step-coarse"));
        let mut hot = scan(&[110.0, 30.0], Some(Detector::Peak));
        hot.meta.rbw_hz = Some(9e3);
        let a = analyze(&hot, &Context::default()).unwrap();
        // source: derived, 110 dBµV is above 0 dBm (106.99 dBµV) at the input
        assert!(a.warnings.iter().any(|w| w.code == "possible-overload"));
    }

    fn grid(levels: Vec<f64>) -> Scan {
        let f: Vec<f64> = (0..levels.len())
            .map(|i| 150e3 + i as f64 * 4.5e3)
            .collect();
        let meta = ScanMeta {
            rbw_hz: Some(9e3),
            detector: Some(Detector::Peak),
            ..ScanMeta::default()
        };
        Scan::new(f, levels, meta).unwrap()
    }

    #[test]
    fn a_steady_trace_is_a_broadband_emission_not_a_floor() {
        // a comb finer than the RBW fills every bucket: within ±0.05 dB everywhere
        let steady: Vec<f64> = (0..2000)
            .map(|i| 40.0 + 0.05 * ((i * 7919) % 11) as f64 / 11.0)
            .collect();
        let a = analyze(&grid(steady), &Context::default()).unwrap();
        assert!(a.warnings.iter().any(|w| w.code == "floor-is-signal"));
        assert!(
            a.humps
                .iter()
                .any(|h| h.rescan.is_some() && h.likely_source.is_some())
        );
        // noise: the maximum of two Rayleigh samples per point (deterministic draws)
        use rand::{Rng, SeedableRng};
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(5);
        let noise: Vec<f64> = (0..2000)
            .map(|_| {
                let x = (0..2)
                    .map(|_| (-2.0 * rng.random::<f64>().max(1e-300).ln()).sqrt())
                    .fold(0.0, f64::max);
                20.0 * f64::log10(x)
            })
            .collect();
        let a = analyze(&grid(noise), &Context::default()).unwrap();
        assert!(!a.warnings.iter().any(|w| w.code == "floor-is-signal"));
    }

    #[test]
    fn frequencies_print_for_people() {
        assert_eq!(fmt_hz(150e3), "150 kHz");
        assert_eq!(fmt_hz(1.2345e6), "1.2345 MHz");
        assert_eq!(fmt_hz(325_482.4), "325.482 kHz");
        assert_eq!(fmt_hz(1_103_940.2), "1.10394 MHz");
        assert_eq!(fmt_hz(30e6), "30 MHz");
    }
}
