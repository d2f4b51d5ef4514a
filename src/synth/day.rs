//! A synthetic day of ambient sweeps on our own conducted bench (DUT off), with known truth: the
//! ground truth of the ambient survey.
//!
//! Sweep k of N is taken at 24·k/N hours after midnight. The bench lights' electronic ballast
//! (a 42 kHz comb) is on from 07:00 to 19:00, a bench supply's 2.2 MHz converter from 08:00 to
//! 13:00, a phase-cut dimmer lamp (a 2-6 MHz hump) from 18:00 to 23:00; medium-wave stations on
//! the 9 kHz raster fade from sweep to sweep and one of them comes in by sky wave from 19:00 to
//! 06:00; three shortwave stations and an RFID reader at 13.56 MHz are always there; a hand-held
//! device shows once, in two consecutive sweeps. Levels are drawn per sweep from a seeded
//! generator and kept, so the truth knows every reading.
//!
//! [`Day::true_levels`] gives the reading each source makes at each display point of each sweep
//! (through the Gaussian RBW, at the best sub-sample of the point's bucket); [`Day::score`]
//! compares a [`Survey`] with it: emitters found, their classes and kinds, and the headroom
//! figures as an equivalent threshold error in dB.
//!
//! ```
//! use spurhound::synth::day::{synthetic_day, DayOptions};
//! let day = synthetic_day(&DayOptions { sweeps: 12, points: 1201, ..DayOptions::default() })?;
//! assert_eq!(day.scenes.len(), 12);
//! assert_eq!(day.times[6], "2031-05-14T12:00:00");
//! # Ok::<(), spurhound::synth::SceneError>(())
//! ```

use super::SceneError;
use super::render::{render, trapezoid_harmonic_peak};
use super::scene::{Carrier, Floor, Hump, Periodic, ScanSetting, Scene, Spacing};
use crate::limits::{Limit, builtin};
use crate::scan::{Detector, Quantity, Role, Scan};
use crate::survey::headroom::{self, Profile};
use crate::survey::stats::quantile;
use crate::survey::{EmitterKind, Presence, Survey};
use rand::SeedableRng;
use rand_chacha::ChaCha8Rng;
use rand_distr::{Distribution, Normal};
use serde::Serialize;

/// The limit the day is judged against: CISPR 32 Class B average on the mains port, the
/// tightest a DUT on this bench will meet.
pub const DAY_LIMIT: &str = "cispr32-b-av";
/// Receiver noise floor of the day's bench, rms dBµV in 9 kHz at 150 kHz.
pub const FLOOR_DBUV: f64 = 0.0;
/// Floor tilt, dB per decade.
pub const FLOOR_SLOPE_DB: f64 = -2.0;
/// A noise point on a positive-peak display reads about this far above the rms noise (the
/// median of the maximum of a few Rayleigh samples; an approximation used only where the truth
/// is noise, far under the limit).
pub const NOISE_PEAK_DB: f64 = 5.0;
/// The date of the day (an invented one).
pub const DATE: &str = "2031-05-14";

/// How the day is drawn.
#[derive(Debug, Clone, PartialEq)]
pub struct DayOptions {
    pub sweeps: usize,
    /// Display points of each sweep, 150 kHz to 30 MHz.
    pub points: usize,
    pub spacing: Spacing,
    pub seed: u64,
}

impl Default for DayOptions {
    /// 100 sweeps of 6635 linear points (4.5 kHz steps, RBW/2 for the 9 kHz of CISPR band B).
    fn default() -> Self {
        DayOptions {
            sweeps: 100,
            points: 6635,
            spacing: Spacing::Linear,
            seed: 1,
        }
    }
}

impl DayOptions {
    /// The options of the committed fixture set `fixtures/survey/` (written by
    /// `cargo run --release --example make_survey_fixtures`): 12 sweeps two hours apart, 1201
    /// log-spaced points (small files; above about 1 MHz the steps are coarser than RBW/2,
    /// which the survey reports), seed 7.
    pub fn fixture() -> DayOptions {
        DayOptions {
            sweeps: 12,
            points: 1201,
            spacing: Spacing::Log,
            seed: 7,
        }
    }
}

/// What a source of the day is, as a correct survey should report it.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct DaySource {
    pub name: String,
    pub kind: EmitterKind,
    pub class: Presence,
    /// A line's frequency, a comb's fundamental, a hump's centre (log middle), Hz.
    pub freq_hz: f64,
    pub fundamental_hz: Option<f64>,
    /// A hump's extent.
    pub extent_hz: Option<(f64, f64)>,
    /// On in each sweep.
    pub on: Vec<bool>,
    /// Per sweep: a line's rms level; a comb's harmonic-1 reading; a hump's rms at its centre.
    pub level_dbuv: Vec<f64>,
    #[serde(skip)]
    shape: Shape,
}

#[derive(Debug, Clone, PartialEq)]
enum Shape {
    Line,
    Comb(Periodic),
    Hump(f64, f64),
}

/// The day: one scene per sweep, the time stamps, and the truth.
#[derive(Debug, Clone, PartialEq)]
pub struct Day {
    pub options: DayOptions,
    pub scenes: Vec<Scene>,
    /// `2031-05-14T06:14:24`, one per sweep.
    pub times: Vec<String>,
    pub sources: Vec<DaySource>,
}

/// Hour of sweep `k` of `n`.
fn hour(k: usize, n: usize) -> f64 {
    24.0 * k as f64 / n.max(1) as f64
}

fn stamp(k: usize, n: usize) -> String {
    let s = (hour(k, n) * 3600.0).round() as u64;
    format!("{DATE}T{:02}:{:02}:{:02}", s / 3600, s / 60 % 60, s % 60)
}

/// Draws the day.
///
/// # Errors
/// [`SceneError::BadField`] when the options make an invalid scene (fewer than 2 points or
/// sweeps, too many points).
pub fn synthetic_day(o: &DayOptions) -> Result<Day, SceneError> {
    if o.sweeps < 2 {
        return Err(SceneError::BadField {
            file: "synthetic day".into(),
            field: "sweeps".into(),
            value: o.sweeps.to_string(),
            expected: "2 sweeps or more".into(),
        });
    }
    let sources = sources(o);
    let scenes = (0..o.sweeps)
        .map(|k| {
            let s = scene(o, k, &sources);
            s.validate().map(|()| s)
        })
        .collect::<Result<Vec<_>, _>>()?;
    Ok(Day {
        options: o.clone(),
        scenes,
        times: (0..o.sweeps).map(|k| stamp(k, o.sweeps)).collect(),
        sources,
    })
}

/// A source that follows a schedule of hours `[from, to)` (wrapping past midnight when
/// `from > to`).
fn scheduled(n: usize, from: f64, to: f64) -> Vec<bool> {
    (0..n)
        .map(|k| {
            let h = hour(k, n);
            if from <= to {
                h >= from && h < to
            } else {
                h >= from || h < to
            }
        })
        .collect()
}

fn levels(rng: &mut ChaCha8Rng, n: usize, mean: f64, sd: f64) -> Vec<f64> {
    let normal = Normal::new(0.0, sd.max(1e-9)).ok();
    (0..n)
        .map(|_| mean + normal.map_or(0.0, |d| d.sample(rng)))
        .collect()
}

#[allow(clippy::too_many_arguments)]
fn source(
    name: &str,
    kind: EmitterKind,
    class: Presence,
    freq_hz: f64,
    on: Vec<bool>,
    level_dbuv: Vec<f64>,
    shape: Shape,
) -> DaySource {
    let (fundamental_hz, extent_hz) = match &shape {
        Shape::Comb(p) => (Some(p.f0_hz), None),
        Shape::Hump(a, b) => (None, Some((*a, *b))),
        Shape::Line => (None, None),
    };
    DaySource {
        name: name.to_string(),
        kind,
        class,
        freq_hz,
        fundamental_hz,
        extent_hz,
        on,
        level_dbuv,
        shape,
    }
}

fn periodic(name: &str, f0_hz: f64, duty: f64, edge_time_s: f64, dbuv: f64, top: u32) -> Periodic {
    Periodic {
        name: Some(name.to_string()),
        f0_hz,
        duty: Some(duty),
        edge_time_s,
        fundamental_dbuv: dbuv,
        coupling_db_per_decade: 0.0,
        spread_pct: 0.0,
        spread_rate_hz: 0.0,
        max_harmonic: top,
    }
}

/// The day's sources with their schedules and per-sweep levels.
fn sources(o: &DayOptions) -> Vec<DaySource> {
    use EmitterKind::{Broadcast, Comb, Ism, LightingHump, Other};
    use Presence::{Intermittent, OneOff, Persistent};
    let n = o.sweeps;
    let mut rng = ChaCha8Rng::seed_from_u64(o.seed);
    let always = vec![true; n];
    let ballast = periodic(
        "bench lights, electronic ballast",
        42e3,
        0.5,
        400e-9,
        68.0,
        60,
    );
    let supply = periodic(
        "bench supply, 2.2 MHz converter",
        2.2e6,
        0.4,
        10e-9,
        50.0,
        0,
    );
    let mut out = vec![
        source(
            "bench lights, electronic ballast 42 kHz",
            Comb,
            Intermittent,
            42e3,
            scheduled(n, 7.0, 19.0),
            vec![68.0; n],
            Shape::Comb(ballast),
        ),
        source(
            "bench supply, converter 2.2 MHz",
            Comb,
            Intermittent,
            2.2e6,
            scheduled(n, 8.0, 13.0),
            vec![50.0; n],
            Shape::Comb(supply),
        ),
        source(
            "dimmer lamp, 2 to 6 MHz",
            LightingHump,
            Intermittent,
            (2e6f64 * 6e6).sqrt(),
            scheduled(n, 18.0, 23.0),
            vec![28.0; n],
            Shape::Hump(2e6, 6e6),
        ),
    ];
    // medium wave, 9 kHz raster (ITU Region 1): (kHz, dBµV, fade sd dB, night only)
    for (khz, dbuv, sd, night) in [
        (594.0, 38.0, 1.0, false),
        (693.0, 46.0, 2.0, false),
        (909.0, 54.0, 1.0, false),
        (1089.0, 44.0, 4.0, true),
        (1422.0, 34.0, 3.0, false),
    ] {
        let (on, class) = if night {
            (scheduled(n, 19.0, 6.0), Intermittent)
        } else {
            (always.clone(), Persistent)
        };
        let lv = levels(&mut rng, n, dbuv, sd);
        out.push(source(
            &format!("MW station {khz} kHz"),
            Broadcast,
            class,
            khz * 1e3,
            on,
            lv,
            Shape::Line,
        ));
    }
    // shortwave, 5 kHz raster, and an RFID reader in the 13.56 MHz ISM band
    for (khz, dbuv, sd, kind) in [
        (6070.0, 40.0, 3.0, Broadcast),
        (7325.0, 36.0, 3.0, Broadcast),
        (11780.0, 34.0, 3.0, Broadcast),
        (13560.0, 42.0, 0.5, Ism),
    ] {
        let lv = levels(&mut rng, n, dbuv, sd);
        out.push(source(
            &format!(
                "{} {khz} kHz",
                if kind == Ism {
                    "RFID reader"
                } else {
                    "SW station"
                }
            ),
            kind,
            Persistent,
            khz * 1e3,
            always.clone(),
            lv,
            Shape::Line,
        ));
    }
    let first = (0.6 * n as f64).round() as usize;
    let once: Vec<bool> = (0..n).map(|k| k == first || k == first + 1).collect();
    out.push(source(
        "hand-held device 3.62 MHz",
        Other,
        OneOff,
        3.62e6,
        once,
        vec![45.0; n],
        Shape::Line,
    ));
    out
}

/// The scene of sweep `k`: the sources on at that time, each at that sweep's level.
fn scene(o: &DayOptions, k: usize, sources: &[DaySource]) -> Scene {
    let mut s = Scene {
        title: Some(format!(
            "bench ambient, DUT off, conducted, L1, sweep {}",
            k + 1
        )),
        name: Some("synthetic-day".into()),
        scan: ScanSetting {
            start_hz: 150e3,
            stop_hz: 30e6,
            points: o.points,
            spacing: o.spacing,
            rbw_hz: 9e3,
            vbw_hz: Some(30e3),
            detector: Detector::Peak,
            sweeps: 1,
            seed: o.seed.wrapping_mul(1000).wrapping_add(k as u64),
            role: Role::Ambient,
            quantity: Quantity::Voltage,
            sweep_time_factor: 2.5,
        },
        floor: Some(Floor {
            level_dbuv: FLOOR_DBUV,
            slope_db_per_decade: FLOOR_SLOPE_DB,
        }),
        switching: Vec::new(),
        clock: Vec::new(),
        carrier: Vec::new(),
        hump: Vec::new(),
        output: None,
        file: "synthetic day".into(),
    };
    for src in sources.iter().filter(|x| x.on.get(k) == Some(&true)) {
        let level = src.level_dbuv.get(k).copied().unwrap_or(0.0);
        match &src.shape {
            Shape::Line => s.carrier.push(Carrier {
                name: Some(src.name.clone()),
                freq_hz: src.freq_hz,
                level_dbuv: level,
                am_depth: 0.0,
                fade_db: 0.0,
            }),
            Shape::Comb(p) => {
                let p = Periodic {
                    fundamental_dbuv: level,
                    ..p.clone()
                };
                // duty 0.5 is a clock entry (its duty default), the rest switching converters
                if p.duty == Some(0.5) {
                    s.clock.push(p);
                } else {
                    s.switching.push(p);
                }
            }
            Shape::Hump(a, b) => s.hump.push(Hump {
                name: Some(src.name.clone()),
                start_hz: *a,
                stop_hz: *b,
                level_dbuv: level,
            }),
        }
    }
    s
}

/// Lines of a source in sweep `k`: (Hz, rms dBµV).
fn lines_of(src: &DaySource, k: usize, stop_hz: f64) -> Vec<(f64, f64)> {
    if src.on.get(k) != Some(&true) {
        return Vec::new();
    }
    let level = src.level_dbuv.get(k).copied().unwrap_or(0.0);
    match &src.shape {
        Shape::Line => vec![(src.freq_hz, level)],
        Shape::Comb(p) => comb_lines(p, level, stop_hz),
        Shape::Hump(..) => Vec::new(),
    }
}

/// The harmonics of a comb up to `stop_hz`: harmonic n reads
/// L1 + 20·log10(c_n / c_1), c_n of the trapezoid with τr = t(10-90)/0.8 (METHODS §5).
fn comb_lines(p: &Periodic, level_dbuv: f64, stop_hz: f64) -> Vec<(f64, f64)> {
    let t = 1.0 / p.f0_hz;
    let duty = p.duty.unwrap_or(0.5);
    let ramp = p.edge_time_s / 0.8;
    let c1 = trapezoid_harmonic_peak(1, 1.0, t, duty, ramp);
    let top = (stop_hz / p.f0_hz).floor() as u32 + 1;
    let top = if p.max_harmonic > 0 {
        top.min(p.max_harmonic)
    } else {
        top
    };
    (1..=top)
        .filter_map(|n| {
            let c = trapezoid_harmonic_peak(n, 1.0, t, duty, ramp);
            (c > 0.0 && c1 > 0.0)
                .then(|| (f64::from(n) * p.f0_hz, level_dbuv + 20.0 * (c / c1).log10()))
        })
        .collect()
}

/// The rms level of a hump at `f` (raised cosine in log f, as the renderer draws it).
fn hump_rms(a: f64, b: f64, level_dbuv: f64, f: f64) -> Option<f64> {
    if f <= a || f >= b {
        return None;
    }
    let x = (f / a).ln() / (b / a).ln();
    let share = 0.5 * (1.0 - (std::f64::consts::TAU * x).cos());
    (share > 0.0).then(|| level_dbuv + 10.0 * share.log10())
}

/// Loss of a line at offset `df_hz` through the Gaussian RBW: 6.02·(2·Δf/B6)² dB (METHODS §6).
fn rbw_loss_db(df_hz: f64, rbw_hz: f64) -> f64 {
    20.0 * 2f64.log10() * (2.0 * df_hz / rbw_hz).powi(2)
}

/// Smallest distance from a line at `fc` to the sub-samples of the bucket of point `i`: the
/// bucket runs halfway to the neighbours and holds ⌈width/(B6/8)⌉ equally spaced sub-samples.
fn nearest_sub(grid: &[f64], i: usize, fc: f64, rbw_hz: f64) -> f64 {
    let n = grid.len();
    let f = grid[i];
    let lo = if i > 0 {
        0.5 * (grid[i - 1] + f)
    } else {
        f - 0.5 * (grid[1] - f)
    };
    let hi = if i + 1 < n {
        0.5 * (f + grid[i + 1])
    } else {
        f + 0.5 * (f - grid[n - 2])
    };
    let m = ((hi - lo) / (rbw_hz / 8.0)).ceil().max(1.0);
    let h = (hi - lo) / m;
    let j = ((fc - lo) / h - 0.5).round().clamp(0.0, m - 1.0);
    (lo + (j + 0.5) * h - fc).abs()
}

impl Day {
    /// Renders every sweep (on as many threads as there are cores), each with its `time` entry.
    ///
    /// # Errors
    /// As [`render`].
    pub fn render(&self) -> Result<Vec<Scan>, SceneError> {
        let n = self.scenes.len();
        let threads = std::thread::available_parallelism()
            .map_or(1, |t| t.get())
            .clamp(1, n.max(1));
        let chunk = n.div_ceil(threads).max(1);
        let one = |k: usize| -> Result<Scan, SceneError> {
            let mut s = render(&self.scenes[k])?;
            s.meta.extra.push(("time".into(), self.times[k].clone()));
            Ok(s)
        };
        let ks: Vec<usize> = (0..n).collect();
        std::thread::scope(|scope| {
            let handles: Vec<_> = ks
                .chunks(chunk)
                .map(|c| {
                    (
                        c,
                        scope.spawn(move || c.iter().map(|&k| one(k)).collect::<Vec<_>>()),
                    )
                })
                .collect();
            handles
                .into_iter()
                .flat_map(|(c, h)| {
                    h.join()
                        .unwrap_or_else(|_| c.iter().map(|&k| one(k)).collect())
                })
                .collect()
        })
    }

    /// The reading each sweep shows at each point of `grid`, dBµV: the strongest line through
    /// the RBW at the best sub-sample of the point's bucket, else the noise (floor and humps)
    /// read [`NOISE_PEAK_DB`] above its rms. The noise part is approximate; the day keeps it
    /// far under the headroom line, so the headroom figures rest on the lines.
    pub fn true_levels(&self, grid: &[f64]) -> Vec<Vec<f64>> {
        let (lines, noise) = self.true_parts(grid);
        lines
            .iter()
            .zip(&noise)
            .map(|(l, n)| l.iter().zip(n).map(|(a, b)| a.max(*b)).collect())
            .collect()
    }

    /// The two parts of [`Day::true_levels`]: lines alone (−∞ where none reaches) and noise
    /// alone, per sweep and point.
    pub fn true_parts(&self, grid: &[f64]) -> (Vec<Vec<f64>>, Vec<Vec<f64>>) {
        let rbw = 9e3;
        let stop = grid.last().copied().unwrap_or(30e6);
        let lines = (0..self.scenes.len())
            .map(|k| {
                let mut v = vec![f64::NEG_INFINITY; grid.len()];
                for src in &self.sources {
                    for (fc, l) in lines_of(src, k, stop) {
                        let a = grid.partition_point(|&x| x < fc - 3.0 * rbw);
                        let b = grid.partition_point(|&x| x <= fc + 3.0 * rbw);
                        if grid.len() > 1 {
                            for (i, x) in v.iter_mut().enumerate().take(b).skip(a) {
                                let r = l - rbw_loss_db(nearest_sub(grid, i, fc, rbw), rbw);
                                *x = x.max(r);
                            }
                        }
                    }
                }
                v
            })
            .collect();
        let noise = (0..self.scenes.len())
            .map(|k| grid.iter().map(|&f| self.noise_at(k, f)).collect())
            .collect();
        (lines, noise)
    }

    fn noise_at(&self, k: usize, f: f64) -> f64 {
        let floor = FLOOR_DBUV + FLOOR_SLOPE_DB * (f / 150e3).log10();
        let mut power = 10f64.powf(floor / 10.0);
        for src in &self.sources {
            if let (Shape::Hump(a, b), Some(true)) = (&src.shape, src.on.get(k)) {
                let l = src.level_dbuv.get(k).copied().unwrap_or(0.0);
                if let Some(h) = hump_rms(*a, *b, l, f) {
                    power += 10f64.powf(h / 10.0);
                }
            }
        }
        10.0 * power.log10() + NOISE_PEAK_DB
    }

    /// The day's limit.
    ///
    /// # Errors
    /// [`SceneError::BadField`] if the built-in table were missing.
    pub fn limit(&self) -> Result<Limit, SceneError> {
        builtin(DAY_LIMIT).ok_or_else(|| SceneError::BadField {
            file: "synthetic day".into(),
            field: "limit".into(),
            value: DAY_LIMIT.into(),
            expected: "a built-in limit".into(),
        })
    }

    /// Sweeps in which only the persistent sources are on: the truth of the quietest time.
    pub fn quiet_sweeps(&self) -> Vec<usize> {
        (0..self.scenes.len())
            .filter(|&k| {
                self.sources
                    .iter()
                    .all(|s| s.class == Presence::Persistent || s.on.get(k) != Some(&true))
            })
            .collect()
    }

    /// Scores a survey of the day's sweeps (in any order: the survey puts them in time order).
    pub fn score(&self, s: &Survey) -> DayScore {
        let grid = &s.profile.freq_hz;
        let mut used = vec![false; s.emitters.len()];
        let mut sc = DayScore::default();
        for src in &self.sources {
            sc.truth += 1;
            let m = match_source(src, s, grid, &used);
            let Some(i) = m else {
                sc.missed.push(src.name.clone());
                continue;
            };
            used[i] = true;
            sc.found += 1;
            let e = &s.emitters[i];
            let (class_ok, kind_ok) = (e.class == src.class, e.kind == src.kind);
            sc.class_right += usize::from(class_ok);
            sc.kind_right += usize::from(kind_ok);
            if !(class_ok && kind_ok) {
                sc.wrong.push(format!(
                    "{}: reported {} {} (presence {:.2}), truth {} {}",
                    src.name,
                    e.class.name(),
                    e.kind.name(),
                    e.presence,
                    src.class.name(),
                    src.kind.name()
                ));
            }
        }
        sc.extra = s
            .emitters
            .iter()
            .zip(&used)
            .filter(|(_, u)| !**u)
            .map(|(e, _)| {
                format!(
                    "{} {} {} at {} (presence {:.2})",
                    e.class.name(),
                    e.kind.name(),
                    e.id,
                    crate::analysis::fmt_hz(e.freq_hz),
                    e.presence
                )
            })
            .collect();
        self.score_headroom(s, &mut sc);
        sc
    }

    fn score_headroom(&self, s: &Survey, sc: &mut DayScore) {
        let Some(limit) = s.limit.as_ref() else {
            return;
        };
        let grid = &s.profile.freq_hz;
        let truth = self.true_levels(grid);
        let p = headroom::profile(grid, &truth, s.params.level_quantile, Some(limit));
        let at = |delta: f64| {
            headroom::bands(
                &p,
                limit,
                s.params.headroom_db + delta,
                s.params.min_usable_fraction,
            )
        };
        let zero = at(0.0);
        let deltas: Vec<f64> = (-600..=600).map(|j| f64::from(j) * 0.01).collect();
        let curves: Vec<Vec<f64>> = deltas
            .iter()
            .map(|&d| at(d).iter().map(|b| b.usable_fraction).collect())
            .collect();
        for (bi, m) in s.headroom.iter().enumerate() {
            let Some(t) = zero.get(bi) else { continue };
            let mut err = f64::INFINITY;
            for j in 0..deltas.len() {
                let g = curves[j].get(bi).copied().unwrap_or(f64::NAN);
                let before = if j > 0 {
                    curves[j - 1].get(bi).copied().unwrap_or(g)
                } else {
                    1.0
                };
                let hit = (g - m.usable_fraction).abs() < 1e-12
                    || (g <= m.usable_fraction && m.usable_fraction <= before);
                if hit {
                    err = err.min(deltas[j].abs());
                }
            }
            sc.headroom.push(BandScore {
                start_hz: m.start_hz,
                stop_hz: m.stop_hz,
                measured: m.usable_fraction,
                truth: t.usable_fraction,
                error_db: err,
            });
        }
        sc.max_headroom_error_db = sc.headroom.iter().map(|b| b.error_db).fold(0.0, f64::max);
        let (lines, noise) = self.true_parts(grid);
        let tau = s.params.level_quantile;
        let line_made: Vec<bool> = (0..grid.len())
            .map(|i| {
                let col = |m: &Vec<Vec<f64>>| -> Vec<f64> { m.iter().map(|l| l[i]).collect() };
                let l = quantile(&col(&lines), tau).unwrap_or(f64::NEG_INFINITY);
                let n = quantile(&col(&noise), tau).unwrap_or(f64::NEG_INFINITY);
                l >= n + 10.0
            })
            .collect();
        sc.p95_error_db = p95_error(&p, &s.profile, s.params.headroom_db, &line_made);
        // the reported quietest sweep is truly one of the quietest: its true worst-band usable
        // share is within the survey's tolerance (and one point of the smallest band) of the
        // day's best, and it lies in the hours when only the persistent sources are on
        let usable: Vec<f64> = truth
            .iter()
            .map(|l| {
                headroom::sweep_worst_band(grid, l, limit, s.params.headroom_db).unwrap_or(0.0)
            })
            .collect();
        let points = headroom::bands(&p, limit, s.params.headroom_db, 0.0)
            .iter()
            .map(|b| b.points)
            .min()
            .unwrap_or(1)
            .max(1) as f64;
        let best = usable.iter().copied().fold(0.0, f64::max);
        let slack = crate::survey::QUIET_SHARE_TOLERANCE + 1.0 / points + 1e-12;
        sc.quiet_sweeps = self.quiet_sweeps();
        sc.quietest_right = s.quietest.as_ref().map(|q| {
            usable.get(q.sweep).is_some_and(|&u| u >= best - slack)
                && sc.quiet_sweeps.contains(&q.sweep)
        });
    }
}

/// Median absolute difference of the measured and true 95th percentiles at the points where
/// the truth is made by lines (10 dB over the noise part) and within 10 dB of the headroom line
/// (limit − headroom), dB.
fn p95_error(truth: &Profile, measured: &Profile, headroom_db: f64, line_made: &[bool]) -> f64 {
    let diffs: Vec<f64> = (0..truth.freq_hz.len())
        .filter(|&i| line_made.get(i) == Some(&true))
        .filter_map(|i| {
            let l = truth.limit_dbuv.get(i).copied().flatten()?;
            let t = *truth.p95_dbuv.get(i)?;
            let m = *measured.p95_dbuv.get(i)?;
            ((t - (l - headroom_db)).abs() <= 10.0).then_some((m - t).abs())
        })
        .collect();
    quantile(&diffs, 0.5).unwrap_or(0.0)
}

/// The emitter a truth source is reported as: a comb by its fundamental (0.5 %), a hump by an
/// overlapping extent with its maximum inside, a line by the nearest unused emitter (or comb
/// line) within the association radius.
fn match_source(src: &DaySource, s: &Survey, grid: &[f64], used: &[bool]) -> Option<usize> {
    let free = |i: &usize| !used[*i];
    let all = 0..s.emitters.len();
    match (&src.shape, src.extent_hz) {
        (Shape::Comb(p), _) => all
            .clone()
            .filter(free)
            .find(|&i| {
                s.emitters[i]
                    .fundamental_hz
                    .is_some_and(|f| (f / p.f0_hz - 1.0).abs() <= 0.005)
            })
            .or_else(|| {
                // reported as loose lines: the strongest visible harmonic
                let top = comb_lines(p, src.level_dbuv.first().copied().unwrap_or(0.0), 30e6)
                    .into_iter()
                    .filter(|l| l.0 >= 150e3)
                    .max_by(|a, b| a.1.total_cmp(&b.1))?;
                nearest(s, grid, top.0, used)
            }),
        (_, Some((a, b))) => all.filter(free).find(|&i| {
            let e = &s.emitters[i];
            matches!((e.start_hz, e.stop_hz), (Some(x), Some(y)) if x <= b && y >= a)
                && e.freq_hz >= a
                && e.freq_hz <= b
        }),
        _ => nearest(s, grid, src.freq_hz, used),
    }
}

fn nearest(s: &Survey, grid: &[f64], freq_hz: f64, used: &[bool]) -> Option<usize> {
    let i = grid
        .partition_point(|&x| x < freq_hz)
        .clamp(1, grid.len().max(2) - 1);
    let step = grid
        .get(i)
        .zip(grid.get(i - 1))
        .map_or(4.5e3, |(a, b)| a - b);
    let tol = 0.5 * step.max(9e3) + 200e-6 * freq_hz;
    (0..s.emitters.len())
        .filter(|&k| !used[k])
        .filter_map(|k| {
            let e = &s.emitters[k];
            let d = std::iter::once(e.freq_hz)
                .chain(e.lines.iter().map(|l| l.freq_hz))
                .map(|f| (f - freq_hz).abs())
                .fold(f64::INFINITY, f64::min);
            (d <= tol).then_some((k, d))
        })
        .min_by(|a, b| a.1.total_cmp(&b.1))
        .map(|x| x.0)
}

/// How one headroom band compares with the truth.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct BandScore {
    pub start_hz: f64,
    pub stop_hz: f64,
    pub measured: f64,
    pub truth: f64,
    /// Smallest change of the headroom (dB) that makes the truth's usable share equal the
    /// measured one: the headroom figure's error expressed in dB.
    pub error_db: f64,
}

/// A survey scored against the day's truth.
#[derive(Debug, Clone, PartialEq, Default, Serialize)]
pub struct DayScore {
    pub truth: usize,
    pub found: usize,
    pub class_right: usize,
    pub kind_right: usize,
    pub missed: Vec<String>,
    /// Found with a wrong class or kind.
    pub wrong: Vec<String>,
    /// Emitters that match no source of the day.
    pub extra: Vec<String>,
    pub headroom: Vec<BandScore>,
    pub max_headroom_error_db: f64,
    /// Median |measured − true| 95th percentile near the headroom line, dB.
    pub p95_error_db: f64,
    /// The quietest sweep reported has the day's best true usable share (within the survey's
    /// tolerance) and lies in the hours when only the persistent sources are on.
    pub quietest_right: Option<bool>,
    /// The sweeps in which only the persistent sources are on.
    pub quiet_sweeps: Vec<usize>,
}

impl DayScore {
    /// Every source found with its class and kind, nothing extra, headroom within `db`, the
    /// quietest time right.
    pub fn all_right(&self, db: f64) -> bool {
        self.found == self.truth
            && self.class_right == self.truth
            && self.kind_right == self.truth
            && self.extra.is_empty()
            && self.max_headroom_error_db <= db
            && self.quietest_right != Some(false)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn schedules_follow_the_clock() {
        // 100 sweeps, 14.4 min apart: 07:00 is sweep 29.17, so the lights are on in 30-79
        let on = scheduled(100, 7.0, 19.0);
        assert_eq!(on.iter().filter(|x| **x).count(), 50);
        assert!(!on[29] && on[30] && on[79] && !on[80]);
        // over midnight: 19:00-06:00 is 11 hours
        let night = scheduled(100, 19.0, 6.0);
        assert!(night[0] && night[99] && !night[50]);
        assert_eq!(stamp(25, 100), "2031-05-14T06:00:00");
    }

    #[test]
    fn a_line_reads_its_level_in_its_bucket() {
        // source: derived, the best of 8 sub-samples per B6 lies within B6/16 of the line:
        // loss at most 6.02·(1/8)² = 0.094 dB
        let grid: Vec<f64> = (0..100).map(|i| 1e6 + i as f64 * 4.5e3).collect();
        let d = nearest_sub(&grid, 20, 1e6 + 20.3 * 4.5e3, 9e3);
        assert!(rbw_loss_db(d, 9e3) <= 0.095, "{d}");
        // a line 9 kHz off a point's bucket reads far below its level
        let d = nearest_sub(&grid, 20, 1e6 + 22.0 * 4.5e3, 9e3);
        assert!(rbw_loss_db(d, 9e3) > 10.0);
    }
}
