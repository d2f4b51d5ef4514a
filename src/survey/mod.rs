//! The ambient survey: is this bench quiet enough to judge a DUT, where, and when?
//!
//! [`survey`] takes repeated ambient sweeps (DUT off), puts them in time order when their
//! metadata says when they were taken ([`time`]), finds the emissions of each sweep with the
//! stages of `analyze` ([`detect`]), associates them across sweeps ([`cluster`]: DBSCAN on a
//! warped log-frequency axis, overlap for humps) into emitters with their presence ratio, class
//! (persistent, intermittent, one-off), level statistics, kind (broadcast, ISM, lighting hump,
//! comb, other) and margin to the limit ([`emitters`]), and measures the headroom: per band the
//! share of the points where the ambient's 95th percentile is at least 6 dB under the limit,
//! the ranges where a DUT cannot be judged, and the quietest sweep ([`headroom`]). The set-up
//! checks of `analyze` ([`crate::setup`]) run on every sweep.
//!
//! ```
//! use spurhound::survey::{survey, Presence, SurveyParams};
//! use spurhound::synth::{parse_scene, render_sweeps};
//! let scene = parse_scene(
//!     "[scan]\nstart_hz = 150e3\nstop_hz = 2e6\npoints = 412\nrbw_hz = 9e3\nseed = 3\n\
//!      role = \"ambient\"\n[floor]\nlevel_dbuv = 0.0\n\
//!      [[carrier]]\nfreq_hz = 909e3\nlevel_dbuv = 50.0\nam_depth = 0.0\n",
//!     "bench.toml",
//! )?;
//! let sweeps = render_sweeps(&scene, 5)?;
//! let limit = spurhound::limits::builtin("cispr32-b-av").unwrap();
//! let s = survey(&sweeps, &SurveyParams::default(), Some(&limit))?;
//! assert_eq!(s.emitters.len(), 1);
//! assert_eq!(s.emitters[0].class, Presence::Persistent);
//! // 50 dBµV at 909 kHz is 4 dB over the 46 dBµV average limit (CISPR 32 Class B, 0.5-5 MHz)
//! assert!((s.emitters[0].margin_db.unwrap() + 4.0).abs() < 1.0);
//! # Ok::<(), Box<dyn std::error::Error>>(())
//! ```

pub mod cluster;
pub mod detect;
pub mod emitters;
pub mod headroom;
pub mod stats;
pub mod time;

pub use emitters::{CombLine, Emitter, EmitterKind, Presence};
pub use headroom::{BlockedRange, HeadroomBand, Profile};

use crate::analysis::fmt_hz;
use crate::correct::TransducerChain;
use crate::limits::Limit;
use crate::scan::{Detector, Scan};
use crate::setup::{self, AMBIENT_HEADROOM_DB, ScanChecks, Warning};
use crate::units::Quantity;
use detect::{DetectParams, SweepFindings};
use serde::Serialize;
use std::sync::atomic::{AtomicUsize, Ordering};

/// Share of the sweeps an emitter must be seen in to be persistent (common practice).
pub const PERSISTENT_SHARE: f64 = 0.8;
/// An emitter seen in at most this many sweeps is a one-off (common practice).
pub const ONE_OFF_SWEEPS: usize = 2;
/// Share of a band's points that must be usable for the band to be judged: our choice, so that
/// no more than a tenth of a band hides under the ambient; the blocked ranges say where.
pub const MIN_USABLE_FRACTION: f64 = 0.9;
/// Fewer sweeps than this give presence classes too coarse to trust (a warning says so).
pub const FEW_SWEEPS: usize = 10;

/// Settings of a survey; [`SurveyParams::check`] is called by [`survey`].
#[derive(Debug, Clone, PartialEq)]
pub struct SurveyParams {
    /// Settings of the per-sweep stages (floor, peaks, families).
    pub detect: DetectParams,
    /// Corrections added to every sweep (LISN factor, limiter, cable, antenna factor).
    pub transducers: TransducerChain,
    /// Association radius as a share of the RBW (or of the step, where coarser).
    pub radius_rbw: f64,
    /// Relative frequency drift allowed between sweeps (2e-4 = 200 ppm).
    pub drift: f64,
    /// Presence ratio from which an emitter is persistent.
    pub persistent_share: f64,
    /// Most sweeps of a one-off emitter.
    pub one_off_sweeps: usize,
    /// Quantile of the levels reported and judged (0.95).
    pub level_quantile: f64,
    /// Headroom asked of the ambient under the limit, dB.
    pub headroom_db: f64,
    /// Usable share a band needs to be judged.
    pub min_usable_fraction: f64,
    /// Confidence of the presence interval.
    pub confidence: f64,
}

impl Default for SurveyParams {
    fn default() -> Self {
        SurveyParams {
            detect: DetectParams::default(),
            transducers: TransducerChain::default(),
            radius_rbw: 0.5,
            drift: 200e-6,
            persistent_share: PERSISTENT_SHARE,
            one_off_sweeps: ONE_OFF_SWEEPS,
            level_quantile: 0.95,
            headroom_db: AMBIENT_HEADROOM_DB,
            min_usable_fraction: MIN_USABLE_FRACTION,
            confidence: 0.95,
        }
    }
}

impl SurveyParams {
    /// Checks every field.
    ///
    /// # Errors
    /// [`SurveyError::BadSetting`] naming the first field out of range.
    pub fn check(&self) -> Result<(), SurveyError> {
        let share = |x: f64| x > 0.0 && x <= 1.0;
        let open = |x: f64| x > 0.0 && x < 1.0;
        let fields = [
            (
                "radius_rbw",
                self.radius_rbw,
                self.radius_rbw > 0.0,
                "a positive share of the RBW",
            ),
            (
                "drift",
                self.drift,
                (0.0..0.1).contains(&self.drift),
                "a relative drift from 0 to 0.1",
            ),
            (
                "persistent_share",
                self.persistent_share,
                share(self.persistent_share),
                "a share above 0, at most 1",
            ),
            (
                "level_quantile",
                self.level_quantile,
                open(self.level_quantile),
                "a quantile between 0 and 1",
            ),
            (
                "headroom_db",
                self.headroom_db,
                self.headroom_db >= 0.0,
                "0 dB or more",
            ),
            (
                "min_usable_fraction",
                self.min_usable_fraction,
                share(self.min_usable_fraction),
                "a share above 0, at most 1",
            ),
            (
                "confidence",
                self.confidence,
                open(self.confidence),
                "a confidence between 0 and 1",
            ),
        ];
        for (field, value, ok, expected) in fields {
            if !ok || !value.is_finite() {
                return Err(SurveyError::BadSetting {
                    field,
                    value: value.to_string(),
                    expected,
                });
            }
        }
        Ok(())
    }

    /// The presence class of an emitter seen in `seen` of `sweeps` sweeps: persistent from
    /// [`SurveyParams::persistent_share`], else one-off up to [`SurveyParams::one_off_sweeps`],
    /// else intermittent (common practice).
    pub fn class_of(&self, seen: usize, sweeps: usize) -> Presence {
        let ratio = seen as f64 / sweeps.max(1) as f64;
        if ratio >= self.persistent_share {
            Presence::Persistent
        } else if seen <= self.one_off_sweeps {
            Presence::OneOff
        } else {
            Presence::Intermittent
        }
    }
}

/// What can be wrong with the sweeps or the settings of a survey.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
#[non_exhaustive]
pub enum SurveyError {
    #[error("no sweeps to survey: give ambient scan files, a folder of them, or a glob")]
    NoSweeps,
    #[error("survey setting `{field}` = {value}: expected {expected}")]
    BadSetting {
        field: &'static str,
        value: String,
        expected: &'static str,
    },
    #[error(
        "{file} measures {unit} but {first} measures {first_unit}; survey sweeps of one quantity (give them the same transducers)"
    )]
    QuantityDiffers {
        file: String,
        unit: String,
        first: String,
        first_unit: String,
    },
    #[error("{file} ({span}) does not overlap {first} ({first_span}); survey sweeps of one span")]
    NoOverlap {
        file: String,
        span: String,
        first: String,
        first_span: String,
    },
    #[error(
        "{file}: `# {key} = {text}` is not a time; expected a date and time like 2031-05-14T06:00:00 (optionally with Z or +02:00), a time of day like 06:00:00, or seconds"
    )]
    BadTime {
        file: String,
        key: String,
        text: String,
    },
}

/// One sweep of the survey, in survey order.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct SweepSummary {
    /// Position in the survey (0-based, time order when the sweeps state their times).
    pub index: usize,
    /// The file (or title) of the sweep.
    pub label: String,
    /// Its time stamp as written, when it has one.
    pub time: Option<String>,
    /// Lines detected.
    pub lines: usize,
    /// Humps detected.
    pub humps: usize,
    /// Emitters of the survey seen in it.
    pub emitters_present: usize,
    /// Share of its own points at least the headroom under the limit.
    pub usable_fraction: Option<f64>,
    /// That share in its worst segment of the limit.
    pub worst_band_usable: Option<f64>,
    /// Emitters seen in it that are not persistent.
    pub transient_present: usize,
    /// Its mean ambient power relative to limit − headroom, dB (see
    /// [`headroom::sweep_power_db`]).
    pub ambient_power_db: Option<f64>,
}

/// The quietest sweep.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Quietest {
    pub sweep: usize,
    pub label: String,
    pub time: Option<String>,
    pub usable_fraction: f64,
    pub worst_band_usable: Option<f64>,
    pub ambient_power_db: Option<f64>,
    pub emitters_present: usize,
    /// Of those, the ones that are not persistent.
    pub transient_present: usize,
}

/// The result of [`survey`].
#[derive(Debug, Clone, PartialEq)]
pub struct Survey {
    pub sweeps: Vec<SweepSummary>,
    /// True when the sweeps were put in the order of their time stamps.
    pub ordered_by_time: bool,
    pub emitters: Vec<Emitter>,
    pub headroom: Vec<HeadroomBand>,
    pub blocked: Vec<BlockedRange>,
    pub quietest: Option<Quietest>,
    /// Median and 95th percentile per point of the reference grid (the first sweep's).
    pub profile: Profile,
    pub limit: Option<Limit>,
    /// `Some(true)` when every headroom band is judged; `None` without a limit covering the scan.
    pub usable: Option<bool>,
    pub rbw_hz: Option<f64>,
    pub detector: Option<Detector>,
    pub quantity: Quantity,
    /// The settings used (classes and headroom are reported with the results).
    pub params: SurveyParams,
    pub warnings: Vec<Warning>,
}

/// Runs the survey of `sweeps` against `limit`; see the module docs.
///
/// # Errors
/// [`SurveyError`] for no sweeps, a bad setting, sweeps of different quantities or spans, an
/// unreadable time stamp; [`crate::Error::Correct`] when a transducer does not cover a sweep.
pub fn survey(
    sweeps: &[Scan],
    params: &SurveyParams,
    limit: Option<&Limit>,
) -> Result<Survey, crate::Error> {
    survey_with_progress(sweeps, params, limit, &|_, _| {})
}

/// [`survey`], calling `progress(done, total)` after each sweep's detections (from any of the
/// worker threads).
///
/// # Errors
/// As [`survey`].
pub fn survey_with_progress(
    sweeps: &[Scan],
    params: &SurveyParams,
    limit: Option<&Limit>,
    progress: &(dyn Fn(usize, usize) + Sync),
) -> Result<Survey, crate::Error> {
    params.check()?;
    if sweeps.is_empty() {
        return Err(SurveyError::NoSweeps.into());
    }
    let (order, ordered_by_time, stamps, mut warnings) = time_order(sweeps)?;
    let raw: Vec<&Scan> = order.iter().map(|&i| &sweeps[i]).collect();
    let corrected = raw
        .iter()
        .map(|s| params.transducers.apply(s))
        .collect::<Result<Vec<_>, _>>()?;
    check_sweeps(&corrected, &mut warnings)?;
    let findings = detect_all(&corrected, &params.detect, progress);
    let grid = corrected[0].freq_hz.to_vec();
    let levels: Vec<Vec<f64>> = corrected
        .iter()
        .map(|s| headroom::resample(s, &grid))
        .collect();
    let rbw_hz = corrected[0].meta.rbw_hz;
    let axis = cluster::Axis::new(&grid, rbw_hz, params.radius_rbw, params.drift);
    let quantity = corrected[0].meta.quantity;
    let ctx = emitters::Context {
        findings: &findings,
        levels: &levels,
        grid: &grid,
        axis: &axis,
        limit,
        params,
        conducted: quantity == Quantity::Voltage && grid.last().is_some_and(|&f| f <= 30e6 * 1.001),
        rbw_hz,
    };
    let emitters = emitters::build(&ctx);
    let profile = headroom::profile(&grid, &levels, params.level_quantile, limit);
    let (headroom, mut blocked) = match limit {
        Some(l) => (
            headroom::bands(&profile, l, params.headroom_db, params.min_usable_fraction),
            headroom::blocked(&profile, params.headroom_db),
        ),
        None => (Vec::new(), Vec::new()),
    };
    for b in &mut blocked {
        b.emitters = emitters::inside(&emitters, &axis, b.start_hz, b.stop_hz);
    }
    let mut headroom = headroom;
    for band in &mut headroom {
        let mut ids: Vec<usize> = blocked
            .iter()
            .filter(|r| r.stop_hz >= band.start_hz && r.start_hz <= band.stop_hz)
            .flat_map(|r| r.emitters.iter().copied())
            .collect();
        ids.sort_unstable();
        ids.dedup();
        band.blocking = ids;
    }
    let summaries = summaries(
        &raw, &stamps, &findings, &levels, &profile, &emitters, limit, params,
    );
    let quietest = quietest(&summaries);
    let limits: Vec<Limit> = limit.cloned().into_iter().collect();
    let mut per_sweep = Vec::new();
    for (k, (s, r)) in corrected.iter().zip(&raw).enumerate() {
        let checks = ScanChecks {
            scan: s,
            raw: r,
            limits: &limits,
            floor: findings.get(k).map(|f| &f.floor),
        };
        let mut w = Vec::new();
        setup::check_scan(&checks, &mut w);
        merge_warnings(&mut per_sweep, w);
    }
    warnings.extend(per_sweep.into_iter().map(|w| counted(w, corrected.len())));
    if corrected.len() < FEW_SWEEPS {
        warnings.push(Warning {
            code: "few-sweeps",
            message: format!(
                "{} sweep(s): presence classes need about {FEW_SWEEPS} or more (persistent at {:.0} % of the sweeps, one-off at {} or fewer); take more sweeps over the hours the DUT will be measured",
                corrected.len(),
                100.0 * params.persistent_share,
                params.one_off_sweeps
            ),
        });
    }
    let usable = (!headroom.is_empty()).then(|| headroom.iter().all(|b| b.judged));
    Ok(Survey {
        sweeps: summaries,
        ordered_by_time,
        emitters,
        headroom,
        blocked,
        quietest,
        profile,
        limit: limit.cloned(),
        usable,
        rbw_hz,
        detector: corrected[0].meta.detector,
        quantity,
        params: params.clone(),
        warnings,
    })
}

/// The survey order: by time stamp when every sweep has one of the same form, else the given
/// order (with a warning when only some have one). Returns the order, whether it is by time,
/// each ordered sweep's stamp text, and the warnings.
#[allow(clippy::type_complexity)]
fn time_order(
    sweeps: &[Scan],
) -> Result<(Vec<usize>, bool, Vec<Option<String>>, Vec<Warning>), SurveyError> {
    let mut stamps = Vec::with_capacity(sweeps.len());
    for s in sweeps {
        let stamp = match time::time_entry(s) {
            Some((key, text)) => {
                Some(time::parse_stamp(text).ok_or_else(|| SurveyError::BadTime {
                    file: s.label(),
                    key: key.to_string(),
                    text: text.to_string(),
                })?)
            }
            None => None,
        };
        stamps.push(stamp);
    }
    let mut warnings = Vec::new();
    let mut order: Vec<usize> = (0..sweeps.len()).collect();
    let with = stamps.iter().flatten().count();
    let one_form = stamps.iter().flatten().all(|s| {
        stamps
            .iter()
            .flatten()
            .next()
            .is_some_and(|f| f.form == s.form)
    });
    let by_time = with == sweeps.len() && one_form;
    if by_time {
        order.sort_by(|&a, &b| {
            let t = |i: usize| stamps[i].as_ref().map_or(0.0, |s| s.seconds);
            t(a).total_cmp(&t(b))
        });
    } else if with > 0 {
        warnings.push(Warning {
            code: "time-partial",
            message: format!(
                "{with} of {} sweeps state a time{}: the survey keeps the file order and cannot say when the bench is quietest by the clock; give every sweep a `# time = 2031-05-14T06:00:00` line",
                sweeps.len(),
                if one_form { "" } else { ", in different forms" }
            ),
        });
    }
    let texts = order
        .iter()
        .map(|&i| stamps[i].as_ref().map(|s| s.text.clone()))
        .collect();
    Ok((order, by_time, texts, warnings))
}

/// One quantity, overlapping spans; warnings for other grids or RBWs.
fn check_sweeps(sweeps: &[Scan], warnings: &mut Vec<Warning>) -> Result<(), SurveyError> {
    let Some(first) = sweeps.first() else {
        return Err(SurveyError::NoSweeps);
    };
    let (fa, fb) = first.span_hz();
    let mut other_grid = 0;
    let mut other_rbw = 0;
    for s in &sweeps[1..] {
        if s.meta.quantity != first.meta.quantity {
            return Err(SurveyError::QuantityDiffers {
                file: s.label(),
                unit: s.meta.quantity.unit().to_string(),
                first: first.label(),
                first_unit: first.meta.quantity.unit().to_string(),
            });
        }
        let (a, b) = s.span_hz();
        if a >= fb || b <= fa {
            return Err(SurveyError::NoOverlap {
                file: s.label(),
                span: format!("{} to {}", fmt_hz(a), fmt_hz(b)),
                first: first.label(),
                first_span: format!("{} to {}", fmt_hz(fa), fmt_hz(fb)),
            });
        }
        other_grid += usize::from(s.freq_hz != first.freq_hz);
        other_rbw += usize::from(s.meta.rbw_hz != first.meta.rbw_hz);
    }
    if other_grid > 0 {
        warnings.push(Warning {
            code: "grid-differs",
            message: format!(
                "{other_grid} sweep(s) use other display points than {}: their levels are taken as the highest within each point's bucket; survey sweeps of one setting",
                first.label()
            ),
        });
    }
    if other_rbw > 0 {
        warnings.push(Warning {
            code: "rbw-differs",
            message: format!(
                "{other_rbw} sweep(s) state another RBW than {}: broadband levels differ between them; survey sweeps of one setting",
                first.label()
            ),
        });
    }
    Ok(())
}

/// The detections of every sweep, on as many threads as there are cores (in order).
fn detect_all(
    sweeps: &[Scan],
    p: &DetectParams,
    progress: &(dyn Fn(usize, usize) + Sync),
) -> Vec<SweepFindings> {
    let n = sweeps.len();
    let threads = std::thread::available_parallelism()
        .map_or(1, |t| t.get())
        .clamp(1, n.max(1));
    let done = AtomicUsize::new(0);
    let one = |s: &Scan| {
        let f = detect::detect(s, p);
        progress(done.fetch_add(1, Ordering::Relaxed) + 1, n);
        f
    };
    let chunk = n.div_ceil(threads).max(1);
    std::thread::scope(|scope| {
        let handles: Vec<_> = sweeps
            .chunks(chunk)
            .map(|c| (c, scope.spawn(|| c.iter().map(one).collect::<Vec<_>>())))
            .collect();
        handles
            .into_iter()
            .flat_map(|(c, h)| h.join().unwrap_or_else(|_| c.iter().map(one).collect()))
            .collect()
    })
}

/// Per sweep: detections, emitters present, own usable shares and power.
#[allow(clippy::too_many_arguments)]
fn summaries(
    raw: &[&Scan],
    stamps: &[Option<String>],
    findings: &[SweepFindings],
    levels: &[Vec<f64>],
    profile: &Profile,
    emitters: &[Emitter],
    limit: Option<&Limit>,
    params: &SurveyParams,
) -> Vec<SweepSummary> {
    (0..raw.len())
        .map(|k| SweepSummary {
            index: k,
            label: raw[k].meta.source.clone().unwrap_or_else(|| raw[k].label()),
            time: stamps.get(k).cloned().flatten(),
            lines: findings.get(k).map_or(0, |f| f.lines.len()),
            humps: findings.get(k).map_or(0, |f| f.humps.len()),
            emitters_present: emitters.iter().filter(|e| e.seen_in.contains(&k)).count(),
            usable_fraction: levels
                .get(k)
                .and_then(|l| headroom::sweep_usable(l, &profile.limit_dbuv, params.headroom_db)),
            worst_band_usable: levels.get(k).zip(limit).and_then(|(l, lim)| {
                headroom::sweep_worst_band(&profile.freq_hz, l, lim, params.headroom_db)
            }),
            transient_present: emitters
                .iter()
                .filter(|e| e.class != Presence::Persistent && e.seen_in.contains(&k))
                .count(),
            ambient_power_db: levels
                .get(k)
                .and_then(|l| headroom::sweep_power_db(l, &profile.limit_dbuv, params.headroom_db)),
        })
        .collect()
}

/// Worst-band usable shares this close to the best count as equal when the quietest sweep is
/// chosen: the fading of steady carriers moves a share by a point or two from sweep to sweep,
/// which says nothing about the time of day (our choice, half a percent).
pub const QUIET_SHARE_TOLERANCE: f64 = 0.005;

/// The quietest sweep: among those whose worst-band usable share is within
/// [`QUIET_SHARE_TOLERANCE`] of the best, the one with the fewest emitters that come and go
/// (intermittent and one-off), then the lowest ambient power (see [`headroom::sweep_power_db`]),
/// then the earlier. Steady carriers are there at every hour; what the time of day changes is
/// which of the others are on.
fn quietest(sweeps: &[SweepSummary]) -> Option<Quietest> {
    let power = |s: &SweepSummary| s.ambient_power_db.unwrap_or(f64::INFINITY);
    let share = |s: &SweepSummary| s.worst_band_usable.or(s.usable_fraction);
    let best = sweeps.iter().filter_map(share).reduce(f64::max)?;
    let key = |s: &SweepSummary| (s.transient_present, power(s));
    sweeps
        .iter()
        .filter(|s| share(s).is_some_and(|u| u >= best - QUIET_SHARE_TOLERANCE))
        .filter_map(|s| s.usable_fraction.map(|u| (s, u)))
        .reduce(|a, x| {
            let (kx, ka) = (key(x.0), key(a.0));
            if kx.0 < ka.0 || (kx.0 == ka.0 && kx.1 < ka.1) {
                x
            } else {
                a
            }
        })
        .map(|(s, u)| Quietest {
            sweep: s.index,
            label: s.label.clone(),
            time: s.time.clone(),
            usable_fraction: u,
            worst_band_usable: s.worst_band_usable,
            ambient_power_db: s.ambient_power_db,
            emitters_present: s.emitters_present,
            transient_present: s.transient_present,
        })
}

/// Adds the warnings of one sweep to `all`, once per code (the first sweep's message), counting
/// the sweeps that gave each code.
fn merge_warnings(all: &mut Vec<(Warning, usize)>, new: Vec<Warning>) {
    for w in new {
        match all.iter_mut().find(|x| x.0.code == w.code) {
            Some(x) => x.1 += 1,
            None => all.push((w, 1)),
        }
    }
}

/// A merged warning with its sweep count in words: "(in 12 of 100 sweeps)", "(in every sweep)".
fn counted((w, n): (Warning, usize), sweeps: usize) -> Warning {
    let message = if sweeps < 2 {
        w.message
    } else if n < sweeps {
        format!("{} (in {n} of {sweeps} sweeps)", w.message)
    } else {
        format!("{} (in every sweep)", w.message)
    };
    Warning {
        code: w.code,
        message,
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::scan::ScanMeta;

    fn flat(points: usize, time: Option<&str>, name: &str) -> Scan {
        let f: Vec<f64> = (0..points).map(|i| 150e3 + i as f64 * 4.5e3).collect();
        let l: Vec<f64> = (0..points).map(|i| (i as f64 * 0.7).sin()).collect();
        let mut meta = ScanMeta {
            rbw_hz: Some(9e3),
            detector: Some(Detector::Peak),
            source: Some(name.into()),
            ..ScanMeta::default()
        };
        if let Some(t) = time {
            meta.extra.push(("time".into(), t.into()));
        }
        Scan::new(f, l, meta).unwrap()
    }

    #[test]
    fn classes_follow_the_common_practice_thresholds() {
        let p = SurveyParams::default();
        // persistent in at least 80 % of the sweeps, one-off in at most 2, intermittent between
        // (common practice)
        assert_eq!(p.class_of(80, 100), Presence::Persistent);
        assert_eq!(p.class_of(79, 100), Presence::Intermittent);
        assert_eq!(p.class_of(3, 100), Presence::Intermittent);
        assert_eq!(p.class_of(2, 100), Presence::OneOff);
        assert_eq!(p.class_of(3, 3), Presence::Persistent);
    }

    #[test]
    fn sweeps_are_put_in_time_order() {
        let sweeps = [
            flat(50, Some("2031-05-14T10:00:00"), "b.csv"),
            flat(50, Some("2031-05-14T08:00:00"), "a.csv"),
        ];
        let (order, by_time, texts, w) = time_order(&sweeps).unwrap();
        assert_eq!(order, vec![1, 0]);
        assert!(by_time && w.is_empty());
        assert_eq!(texts[0].as_deref(), Some("2031-05-14T08:00:00"));
        let partial = [flat(50, Some("08:00"), "a.csv"), flat(50, None, "b.csv")];
        let (order, by_time, _, w) = time_order(&partial).unwrap();
        assert_eq!((order, by_time), (vec![0, 1], false));
        assert_eq!(w[0].code, "time-partial");
        let bad = [flat(50, Some("teatime"), "a.csv")];
        let err = time_order(&bad).unwrap_err();
        assert!(err.to_string().contains("a.csv") && err.to_string().contains("teatime"));
    }

    #[test]
    fn bad_input_is_an_error_not_a_panic() {
        assert!(matches!(
            survey(&[], &SurveyParams::default(), None),
            Err(crate::Error::Survey(SurveyError::NoSweeps))
        ));
        let p = SurveyParams {
            persistent_share: 1.5,
            ..SurveyParams::default()
        };
        let err = survey(&[flat(50, None, "a.csv")], &p, None).unwrap_err();
        assert!(err.to_string().contains("persistent_share"), "{err}");
        let mut other = flat(50, None, "b.csv");
        other.freq_hz.mapv_inplace(|f| f + 10e6);
        let err = survey(
            &[flat(50, None, "a.csv"), other],
            &SurveyParams::default(),
            None,
        )
        .unwrap_err();
        assert!(err.to_string().contains("does not overlap"), "{err}");
    }

    #[test]
    fn the_quietest_of_equals_is_the_least_loud() {
        let sweep = |index, usable: f64, transient: usize, power: f64| SweepSummary {
            index,
            label: format!("s{index}"),
            time: None,
            lines: 0,
            humps: 0,
            emitters_present: 5,
            usable_fraction: Some(usable),
            worst_band_usable: Some(usable),
            transient_present: transient,
            ambient_power_db: Some(power),
        };
        // shares within half a percent are equal: the one with the fewest emitters that come
        // and go wins, then the least loud
        let q = quietest(&[
            sweep(0, 0.98, 0, -20.0),
            sweep(1, 0.99, 1, -16.0),
            sweep(2, 0.987, 0, -14.0),
            sweep(3, 0.99, 0, -12.0),
        ]);
        assert_eq!(q.unwrap().sweep, 2);
    }

    #[test]
    fn set_up_checks_run_on_every_sweep() {
        // 9 kHz steps with a 9 kHz RBW: more than RBW/2 in each of the three sweeps
        let sweeps: Vec<Scan> = (0..3)
            .map(|k| {
                let f: Vec<f64> = (0..300).map(|i| 150e3 + i as f64 * 9e3).collect();
                let l: Vec<f64> = (0..300).map(|i| ((i + k) as f64 * 0.7).sin()).collect();
                let meta = ScanMeta {
                    rbw_hz: Some(9e3),
                    detector: Some(Detector::Peak),
                    ..ScanMeta::default()
                };
                Scan::new(f, l, meta).unwrap()
            })
            .collect();
        let s = survey(&sweeps, &SurveyParams::default(), None).unwrap();
        let step = s.warnings.iter().find(|w| w.code == "step-coarse").unwrap();
        assert!(
            step.message.ends_with("(in every sweep)"),
            "{}",
            step.message
        );
        assert!(s.warnings.iter().any(|w| w.code == "few-sweeps"));
    }

    #[test]
    fn warnings_of_many_sweeps_are_counted_once() {
        let mut all = Vec::new();
        let w = |c| Warning {
            code: c,
            message: "m".into(),
        };
        merge_warnings(&mut all, vec![w("a"), w("b")]);
        merge_warnings(&mut all, vec![w("a")]);
        merge_warnings(&mut all, vec![w("a")]);
        let out: Vec<Warning> = all.into_iter().map(|x| counted(x, 3)).collect();
        assert_eq!(out[0].message, "m (in every sweep)");
        assert_eq!(out[1].message, "m (in 1 of 3 sweeps)");
    }
}
