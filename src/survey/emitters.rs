//! Emitters: the detections of all sweeps associated into sources, with their presence, level
//! statistics, kind and margin.
//!
//! 1. Lines of every sweep are clustered on the warped axis ([`super::cluster`]); a cluster seen
//!    rarely (in one or two sweeps, or in less than [`WEAK_PRESENCE`] of them) whose detections
//!    are not, in the median, [`ONE_OFF_MIN_DB`] over their sweeps' thresholds is noise.
//! 2. Combs: the harmonic families each sweep's family search found are grouped by fundamental
//!    (DBSCAN in ln f0, radius [`COMB_F0_SHARE`]); a line cluster is a line of the comb whose
//!    families it was a member of in at least [`COMB_MEMBER_SHARE`] of the sweeps where both
//!    were seen; a comb needs three lines, and to be found in at least [`COMB_FOUND_SHARE`] of
//!    the sweeps that show its lines (a chance alignment of steady carriers is found rarely).
//! 3. Humps are associated by overlap of their extents.
//! 4. The lines left are broadcast (a set on a channel raster, or a lone line on the raster of
//!    a broadcasting band), ISM (inside an ISM band) or other. Allocations are priors: a line in
//!    a band and on its raster, never the band alone.

use super::SurveyParams;
use super::cluster::{Axis, associate, overlapping};
use super::detect::SweepFindings;
use super::stats::{presence_interval, quantile, spread};
use crate::analysis::{Kind, Origin, fmt_hz};
use crate::families::FamilyFit;
use crate::families::raster::{self, FM_100K, HF_5K, LF_MF_9K, MF_10K, Offered, Service};
use crate::families::sieve::Pattern;
use crate::limits::Limit;
use serde::Serialize;
use std::collections::{BTreeMap, BTreeSet};

/// A cluster seen in at most the one-off number of sweeps must reach, in the median of its
/// detections, this far over their sweeps' detection thresholds, dB: noise crosses the
/// threshold (set at 0.05 false alarms per sweep) by a fraction of a dB, an emitter by more
/// (the max-of-M Rayleigh tail falls by orders of magnitude per dB; derived from the floor law
/// of `floor.rs`).
pub const ONE_OFF_MIN_DB: f64 = 3.0;
/// A cluster whose median detection does not reach [`ONE_OFF_MIN_DB`] and that is seen in
/// fewer than this share of the sweeps is noise too: false alarms at one place in a few sweeps chain into a cluster over
/// many sweeps, at a share that does not grow with their number; a weak steady line is seen
/// far more often.
pub const WEAK_PRESENCE: f64 = 0.2;
/// Families of different sweeps whose fundamentals agree within this share are one comb.
pub const COMB_F0_SHARE: f64 = 0.01;
/// A line belongs to a comb when it was a member of the comb's family in at least this share of
/// the sweeps where both were seen.
pub const COMB_MEMBER_SHARE: f64 = 0.5;
/// A comb must be found in at least this share of the sweeps that show its lines.
pub const COMB_FOUND_SHARE: f64 = 0.5;
/// Fewest lines of a comb.
pub const COMB_MIN_LINES: usize = 3;
/// Hump fragments within this relative gap are one hump.
pub const HUMP_GAP_SHARE: f64 = 0.03;

/// ISM bands inside the conducted and low radiated range (ITU RR 5.138 and 5.150; METHODS §7):
/// (start Hz, stop Hz, centre name).
pub const ISM_BANDS: [(f64, f64, &str); 4] = [
    (6.765e6, 6.795e6, "6.78 MHz"),
    (13.553e6, 13.567e6, "13.56 MHz"),
    (26.957e6, 27.283e6, "27.12 MHz"),
    (40.66e6, 40.70e6, "40.68 MHz"),
];

/// How often an emitter is there.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum Presence {
    Persistent,
    Intermittent,
    OneOff,
}

impl Presence {
    /// The name used in reports and JSON.
    pub fn name(self) -> &'static str {
        match self {
            Presence::Persistent => "persistent",
            Presence::Intermittent => "intermittent",
            Presence::OneOff => "one-off",
        }
    }
}

/// What an emitter is.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum EmitterKind {
    /// A carrier on a broadcasting raster (a set of stations, or one line on a band's raster).
    Broadcast,
    /// A line inside an ISM band.
    Ism,
    /// A broadband hump in the conducted range (lamp dimmers and drivers are the usual cause).
    LightingHump,
    /// A harmonic comb with its fundamental.
    Comb,
    Other,
}

impl EmitterKind {
    /// The name used in reports and JSON.
    pub fn name(self) -> &'static str {
        match self {
            EmitterKind::Broadcast => "broadcast",
            EmitterKind::Ism => "ism",
            EmitterKind::LightingHump => "lighting-hump",
            EmitterKind::Comb => "comb",
            EmitterKind::Other => "other",
        }
    }
}

/// One line of a comb.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct CombLine {
    pub freq_hz: f64,
    pub harmonic: u32,
    pub presence: f64,
    pub median_dbuv: f64,
    pub p95_dbuv: f64,
    pub margin_db: Option<f64>,
}

/// A source of the ambient, over all sweeps.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Emitter {
    /// 1-based, in order of frequency.
    pub id: usize,
    /// A line: its frequency; a comb: the line that sets its margin (the highest without a
    /// limit); a hump: its maximum.
    pub freq_hz: f64,
    pub fundamental_hz: Option<f64>,
    /// A hump's extent.
    pub start_hz: Option<f64>,
    pub stop_hz: Option<f64>,
    /// Share of the sweeps it is seen in.
    pub presence: f64,
    /// Confidence interval of the presence (exact binomial, see [`presence_interval`]).
    pub presence_low: f64,
    pub presence_high: f64,
    pub sweeps_present: usize,
    pub class: Presence,
    pub kind: EmitterKind,
    /// Why the kind was chosen.
    pub kind_detail: String,
    /// For a comb: what kind of oscillator its pattern suggests.
    pub comb_kind: Option<Kind>,
    pub narrowband: bool,
    /// Levels over the sweeps it is seen in (of its margin-setting line for a comb, of its top
    /// for a hump), dBµV.
    pub median_dbuv: f64,
    pub p95_dbuv: f64,
    /// Standard deviation of those levels, dB.
    pub spread_db: f64,
    pub limit_dbuv: Option<f64>,
    /// Limit minus the 95th percentile (a hump: the smallest over its extent), dB.
    pub margin_db: Option<f64>,
    /// A comb's lines.
    pub lines: Vec<CombLine>,
    /// The sweeps it is seen in (survey order, 0-based).
    pub seen_in: Vec<usize>,
}

/// What building the emitters needs.
#[derive(Debug, Clone, Copy)]
pub struct Context<'a> {
    pub findings: &'a [SweepFindings],
    /// Levels per sweep on the reference grid.
    pub levels: &'a [Vec<f64>],
    pub grid: &'a [f64],
    pub axis: &'a Axis,
    pub limit: Option<&'a Limit>,
    pub params: &'a SurveyParams,
    /// A conducted (LISN) survey: voltage up to 30 MHz.
    pub conducted: bool,
    pub rbw_hz: Option<f64>,
}

impl Context<'_> {
    fn sweeps(&self) -> usize {
        self.findings.len()
    }

    /// The standard uncertainty of a line's frequency on this grid, Hz: 0.15 of the step on a
    /// grid of RBW/2 steps, growing to step/√12 (a line anywhere in its bucket) on a grid
    /// coarser than twice the RBW; the same share as the family search uses
    /// (`families::peak_sigma_hz`). Without an RBW, step/√12.
    fn grid_sigma_hz(&self, freq_hz: f64) -> f64 {
        let step = self.step_at(freq_hz);
        let coarse = self
            .rbw_hz
            .filter(|r| *r > 0.0)
            .map_or(1.0, |r| ((step / r - 0.5) / 1.5).clamp(0.0, 1.0));
        (0.15 + coarse * (1.0 / 12f64.sqrt() - 0.15)) * step
    }

    fn step_at(&self, freq_hz: f64) -> f64 {
        let g = self.grid;
        if g.len() < 2 {
            return 1.0;
        }
        let i = g.partition_point(|&x| x < freq_hz).clamp(1, g.len() - 1);
        g[i] - g[i - 1]
    }
}

/// A line cluster: its detections and what they say.
#[derive(Debug, Clone)]
struct LineCluster {
    /// Highest level per sweep, dBµV.
    levels: BTreeMap<usize, f64>,
    freq_hz: f64,
    sigma_hz: f64,
    narrow: bool,
}

impl LineCluster {
    fn sweeps(&self) -> BTreeSet<usize> {
        self.levels.keys().copied().collect()
    }
}

/// Every emitter of the survey, sorted by frequency, numbered from 1.
pub fn build(ctx: &Context) -> Vec<Emitter> {
    let (clusters, cluster_of) = line_clusters(ctx);
    let mut combs = comb_groups(ctx, &clusters, &cluster_of);
    absorb_lines(ctx, &clusters, &mut combs);
    let in_comb: BTreeSet<usize> = combs.iter().flat_map(|c| c.lines.iter().copied()).collect();
    let mut out: Vec<Emitter> = combs
        .iter()
        .map(|c| comb_emitter(ctx, &clusters, c))
        .collect();
    let lone: Vec<usize> = (0..clusters.len())
        .filter(|&c| !in_comb.contains(&c) && !clusters[c].levels.is_empty())
        .collect();
    out.extend(lone_lines(ctx, &clusters, &lone));
    out.extend(humps(ctx));
    out.sort_by(|a, b| a.freq_hz.total_cmp(&b.freq_hz));
    for (k, e) in out.iter_mut().enumerate() {
        e.id = k + 1;
    }
    out
}

/// Clusters of the lines of all sweeps, the noise ones emptied; and the cluster of each line of
/// each sweep (`None` for noise).
fn line_clusters(ctx: &Context) -> (Vec<LineCluster>, Vec<Vec<Option<usize>>>) {
    let dets: Vec<(usize, usize)> = ctx
        .findings
        .iter()
        .enumerate()
        .flat_map(|(s, f)| (0..f.lines.len()).map(move |l| (s, l)))
        .collect();
    let line = |&(s, l): &(usize, usize)| &ctx.findings[s].lines[l];
    let coords: Vec<f64> = dets.iter().map(|d| ctx.axis.at(line(d).freq_hz)).collect();
    let mut cluster_of: Vec<Vec<Option<usize>>> = ctx
        .findings
        .iter()
        .map(|f| vec![None; f.lines.len()])
        .collect();
    let mut clusters = Vec::new();
    for group in associate(&coords) {
        let members: Vec<(usize, usize)> = group.iter().map(|&i| dets[i]).collect();
        let mut levels: BTreeMap<usize, f64> = BTreeMap::new();
        for d in &members {
            let e = levels.entry(d.0).or_insert(f64::NEG_INFINITY);
            *e = e.max(line(d).level_dbuv);
        }
        let sig: Vec<f64> = members.iter().map(|d| line(d).significance_db).collect();
        let rare = levels.len() <= ctx.params.one_off_sweeps
            || (levels.len() as f64) < WEAK_PRESENCE * ctx.sweeps() as f64;
        if rare && quantile(&sig, 0.5).is_none_or(|m| m < ONE_OFF_MIN_DB) {
            continue;
        }
        let freqs: Vec<f64> = members.iter().map(|d| line(d).freq_hz).collect();
        let freq_hz = quantile(&freqs, 0.5).unwrap_or(0.0);
        let narrow = 2 * members.iter().filter(|d| line(d).narrow).count() >= members.len();
        let id = clusters.len();
        for &(s, l) in &members {
            cluster_of[s][l] = Some(id);
        }
        clusters.push(LineCluster {
            levels,
            freq_hz,
            sigma_hz: spread(&freqs).max(ctx.grid_sigma_hz(freq_hz)),
            narrow,
        });
    }
    (clusters, cluster_of)
}

/// One sweep's family, in clusters.
struct Instance<'a> {
    sweep: usize,
    f0: f64,
    clusters: BTreeSet<usize>,
    fit: &'a FamilyFit,
}

/// A comb over the survey.
struct Comb<'a> {
    f0: f64,
    lines: Vec<usize>,
    /// Sweeps that show enough of its lines.
    present: BTreeSet<usize>,
    /// The instance with the most members (for its kind).
    fit: &'a FamilyFit,
}

fn instances<'a>(ctx: &Context<'a>, cluster_of: &[Vec<Option<usize>>]) -> Vec<Instance<'a>> {
    let mut out = Vec::new();
    for (s, f) in ctx.findings.iter().enumerate() {
        for fam in &f.families {
            let clusters: BTreeSet<usize> = fam
                .members
                .iter()
                .filter_map(|&(l, _)| cluster_of[s].get(l).copied().flatten())
                .collect();
            if clusters.len() >= COMB_MIN_LINES {
                out.push(Instance {
                    sweep: s,
                    f0: fam.fit.fundamental_hz,
                    clusters,
                    fit: &fam.fit,
                });
            }
        }
    }
    out
}

/// The combs: instances grouped by fundamental, lines assigned by membership share, groups
/// without three lines or found too rarely dissolved (their lines go back to the others).
fn comb_groups<'a>(
    ctx: &Context<'a>,
    clusters: &[LineCluster],
    cluster_of: &[Vec<Option<usize>>],
) -> Vec<Comb<'a>> {
    let inst = instances(ctx, cluster_of);
    let coords: Vec<f64> = inst
        .iter()
        .map(|i| i.f0.max(1e-3).ln() / COMB_F0_SHARE)
        .collect();
    let groups: Vec<Vec<usize>> = associate(&coords);
    let found: Vec<BTreeSet<usize>> = groups
        .iter()
        .map(|g| g.iter().map(|&i| inst[i].sweep).collect())
        .collect();
    let seen: Vec<BTreeSet<usize>> = clusters.iter().map(LineCluster::sweeps).collect();
    let mut alive = vec![true; groups.len()];
    for _ in 0..=groups.len() {
        let lines = assign_lines(&inst, &groups, &found, &seen, &alive);
        let mut changed = false;
        for g in 0..groups.len() {
            if alive[g] && !comb_holds(&lines[g], &found[g], &seen) {
                alive[g] = false;
                changed = true;
            }
        }
        if !changed {
            return (0..groups.len())
                .filter(|&g| alive[g])
                .filter_map(|g| {
                    let fits: Vec<&Instance> = groups[g].iter().map(|&i| &inst[i]).collect();
                    let f0s: Vec<f64> = fits.iter().map(|i| i.f0).collect();
                    let best = fits.iter().max_by_key(|i| i.clusters.len())?;
                    Some(Comb {
                        f0: quantile(&f0s, 0.5)?,
                        present: present_sweeps(&lines[g], &seen),
                        lines: lines[g].clone(),
                        fit: best.fit,
                    })
                })
                .collect();
        }
    }
    Vec::new()
}

/// Each line cluster to the live group it was a member of most often, when that is at least
/// [`COMB_MEMBER_SHARE`] of the sweeps where both were seen.
fn assign_lines(
    inst: &[Instance],
    groups: &[Vec<usize>],
    found: &[BTreeSet<usize>],
    seen: &[BTreeSet<usize>],
    alive: &[bool],
) -> Vec<Vec<usize>> {
    let mut best: BTreeMap<usize, (usize, usize)> = BTreeMap::new();
    for (g, members) in groups.iter().enumerate() {
        if !alive[g] {
            continue;
        }
        let mut count: BTreeMap<usize, usize> = BTreeMap::new();
        for &i in members {
            for &c in &inst[i].clusters {
                *count.entry(c).or_insert(0) += 1;
            }
        }
        for (c, n) in count {
            let both = seen[c].intersection(&found[g]).count().max(1);
            if n as f64 >= COMB_MEMBER_SHARE * both as f64
                && best.get(&c).is_none_or(|&(_, m)| n > m)
            {
                best.insert(c, (g, n));
            }
        }
    }
    let mut lines = vec![Vec::new(); groups.len()];
    for (c, (g, _)) in best {
        lines[g].push(c);
    }
    lines
}

/// Sweeps that show at least a third of a comb's lines, and two.
fn present_sweeps(lines: &[usize], seen: &[BTreeSet<usize>]) -> BTreeSet<usize> {
    let need = lines.len().div_ceil(3).max(2);
    let mut count: BTreeMap<usize, usize> = BTreeMap::new();
    for &c in lines {
        for &s in &seen[c] {
            *count.entry(s).or_insert(0) += 1;
        }
    }
    count
        .into_iter()
        .filter(|&(_, n)| n >= need)
        .map(|(s, _)| s)
        .collect()
}

/// A comb holds with [`COMB_MIN_LINES`] lines, found in at least [`COMB_FOUND_SHARE`] of the
/// sweeps that show them.
fn comb_holds(lines: &[usize], found: &BTreeSet<usize>, seen: &[BTreeSet<usize>]) -> bool {
    if lines.len() < COMB_MIN_LINES {
        return false;
    }
    let present = present_sweeps(lines, seen);
    !present.is_empty()
        && present.intersection(found).count() as f64 >= COMB_FOUND_SHARE * present.len() as f64
}

/// A lone line on a harmonic of a comb (within the association radius) that is seen only when
/// the comb is: at least this share of its sweeps are the comb's.
pub const ABSORB_SHARE: f64 = 0.8;

/// Gives each comb the lone lines that sit on its harmonics (odd ones only for an odd-only
/// comb) and come and go with it: seen mostly when the comb is, and in at least
/// [`COMB_MEMBER_SHARE`] of the comb's sweeps (its weak far harmonics, which the family search
/// of a single sweep does not always reach). A steady carrier on a harmonic of an intermittent
/// comb stays a line of its own: it is there when the comb is not; so does a one-off that
/// happens to fall on a harmonic.
fn absorb_lines(ctx: &Context, clusters: &[LineCluster], combs: &mut [Comb]) {
    let taken: BTreeSet<usize> = combs.iter().flat_map(|c| c.lines.iter().copied()).collect();
    for (c, cl) in clusters.iter().enumerate() {
        if taken.contains(&c) || cl.levels.is_empty() {
            continue;
        }
        let seen = cl.sweeps();
        let best = combs
            .iter()
            .enumerate()
            .filter(|(_, g)| {
                let n = (cl.freq_hz / g.f0).round().max(1.0);
                let odd_ok = g.fit.pattern != Pattern::OddOnly || n % 2.0 == 1.0;
                odd_ok && (ctx.axis.at(cl.freq_hz) - ctx.axis.at(n * g.f0)).abs() <= 1.0
            })
            .map(|(k, g)| (k, seen.intersection(&g.present).count(), g.present.len()))
            .filter(|&(_, both, on)| {
                both as f64 >= ABSORB_SHARE * seen.len() as f64
                    && both as f64 >= COMB_MEMBER_SHARE * on as f64
            })
            .map(|(k, both, _)| (k, both))
            .max_by_key(|&(_, both)| both);
        if let Some((k, _)) = best {
            combs[k].lines.push(c);
        }
    }
}

/// Median, `tau` quantile and spread of levels.
fn level_stats(levels: &[f64], tau: f64) -> (f64, f64, f64) {
    (
        quantile(levels, 0.5).unwrap_or(f64::NAN),
        quantile(levels, tau).unwrap_or(f64::NAN),
        spread(levels),
    )
}

/// An emitter with its presence fields filled from the sweeps it is seen in.
fn base(ctx: &Context, freq_hz: f64, seen: &BTreeSet<usize>, kind: EmitterKind) -> Emitter {
    let n = ctx.sweeps();
    let k = seen.len();
    let (presence_low, presence_high) = presence_interval(k, n, ctx.params.confidence);
    Emitter {
        id: 0,
        freq_hz,
        fundamental_hz: None,
        start_hz: None,
        stop_hz: None,
        presence: k as f64 / n.max(1) as f64,
        presence_low,
        presence_high,
        sweeps_present: k,
        class: ctx.params.class_of(k, n),
        kind,
        kind_detail: String::new(),
        comb_kind: None,
        narrowband: true,
        median_dbuv: f64::NAN,
        p95_dbuv: f64::NAN,
        spread_db: 0.0,
        limit_dbuv: ctx.limit.and_then(|l| l.at(freq_hz)),
        margin_db: None,
        lines: Vec::new(),
        seen_in: seen.iter().copied().collect(),
    }
}

fn with_levels(mut e: Emitter, levels: &[f64], tau: f64) -> Emitter {
    let (m, p, s) = level_stats(levels, tau);
    e.median_dbuv = m;
    e.p95_dbuv = p;
    e.spread_db = s;
    e.margin_db = e.limit_dbuv.map(|l| l - p).filter(|x| x.is_finite());
    e
}

fn comb_emitter(ctx: &Context, clusters: &[LineCluster], comb: &Comb) -> Emitter {
    let tau = ctx.params.level_quantile;
    let n = ctx.sweeps().max(1) as f64;
    let mut lines: Vec<CombLine> = comb
        .lines
        .iter()
        .map(|&c| {
            let cl = &clusters[c];
            let lv: Vec<f64> = cl.levels.values().copied().collect();
            let (median_dbuv, p95_dbuv, _) = level_stats(&lv, tau);
            CombLine {
                freq_hz: cl.freq_hz,
                harmonic: (cl.freq_hz / comb.f0).round().max(1.0) as u32,
                presence: cl.levels.len() as f64 / n,
                median_dbuv,
                p95_dbuv,
                margin_db: ctx
                    .limit
                    .and_then(|l| l.at(cl.freq_hz))
                    .map(|l| l - p95_dbuv),
            }
        })
        .collect();
    lines.sort_by(|a, b| a.freq_hz.total_cmp(&b.freq_hz));
    let worst = comb
        .lines
        .iter()
        .copied()
        .min_by(|&a, &b| {
            let key = |c: usize| {
                let cl = &clusters[c];
                let lv: Vec<f64> = cl.levels.values().copied().collect();
                let p = quantile(&lv, tau).unwrap_or(f64::NEG_INFINITY);
                ctx.limit
                    .and_then(|l| l.at(cl.freq_hz))
                    .map_or(-p, |l| l - p)
            };
            key(a).total_cmp(&key(b))
        })
        .map(|c| &clusters[c]);
    let freq_hz = worst.map_or(comb.f0, |c| c.freq_hz);
    let levels: Vec<f64> = worst.map_or_else(Vec::new, |c| c.levels.values().copied().collect());
    let mut e = with_levels(
        base(ctx, freq_hz, &comb.present, EmitterKind::Comb),
        &levels,
        tau,
    );
    let (kind, reasons) = crate::attribution::kind::classify(comb.fit, Origin::Ambient);
    let (first, last) = (
        lines.first().map_or(0.0, |l| l.freq_hz),
        lines.last().map_or(0.0, |l| l.freq_hz),
    );
    e.fundamental_hz = Some(comb.f0);
    e.comb_kind = Some(kind);
    e.kind_detail = format!(
        "harmonic comb of {}: {} lines, {} to {}; pattern of a {} source ({})",
        fmt_hz(comb.f0),
        lines.len(),
        fmt_hz(first),
        fmt_hz(last),
        crate::report::text::kind_name(kind),
        reasons.join("; ")
    );
    e.lines = lines;
    e
}

/// Lone lines: broadcast sets on their rasters first, then ISM bands, then a band's raster.
fn lone_lines(ctx: &Context, clusters: &[LineCluster], lone: &[usize]) -> Vec<Emitter> {
    let offered: Vec<Offered> = lone
        .iter()
        .map(|&c| Offered {
            freq_hz: clusters[c].freq_hz,
            sigma_hz: clusters[c].sigma_hz,
            narrow: clusters[c].narrow,
            // every line of an ambient survey is the lab's
            in_ambient: true,
        })
        .collect();
    let mut set_of: BTreeMap<usize, String> = BTreeMap::new();
    for m in raster::broadcast_sets(&offered) {
        for &(k, _) in &m.members {
            set_of.insert(
                k,
                format!(
                    "one of {} stations on the {}",
                    m.members.len(),
                    m.service.name
                ),
            );
        }
    }
    lone.iter()
        .enumerate()
        .map(|(k, &c)| {
            let cl = &clusters[c];
            let lv: Vec<f64> = cl.levels.values().copied().collect();
            let mut e = with_levels(
                base(ctx, cl.freq_hz, &cl.sweeps(), EmitterKind::Other),
                &lv,
                ctx.params.level_quantile,
            );
            e.narrowband = cl.narrow;
            let (kind, detail) = match set_of.get(&k) {
                Some(d) => (EmitterKind::Broadcast, d.clone()),
                None => lone_kind(cl, ctx.step_at(cl.freq_hz)),
            };
            e.kind = kind;
            e.kind_detail = detail;
            e
        })
        .collect()
}

/// The kind of a line that is neither a comb's nor in a broadcast set.
fn lone_kind(cl: &LineCluster, step_hz: f64) -> (EmitterKind, String) {
    let f = cl.freq_hz;
    // the line lies within min(3σ, step/2) of its estimate
    let tol = (3.0 * cl.sigma_hz).min(0.5 * step_hz);
    if let Some(&(a, b, name)) = ISM_BANDS
        .iter()
        .find(|&&(a, b, _)| f + tol >= a && f - tol <= b)
    {
        return (
            EmitterKind::Ism,
            format!(
                "inside the {name} ISM band ({} to {})",
                fmt_hz(a),
                fmt_hz(b)
            ),
        );
    }
    if cl.narrow {
        for s in [LF_MF_9K, MF_10K, HF_5K, FM_100K] {
            if let Some(((a, b), tested)) = on_band_raster(&s, f, cl.sigma_hz) {
                let raster = if tested {
                    format!("on its {} raster", fmt_hz(s.step_hz))
                } else {
                    format!(
                        "its {} raster not testable at this display step (by allocation only)",
                        fmt_hz(s.step_hz)
                    )
                };
                return (
                    EmitterKind::Broadcast,
                    format!(
                        "in the {} band {} to {}, {raster}",
                        s.name.split(',').next().unwrap_or(s.name),
                        fmt_hz(a),
                        fmt_hz(b)
                    ),
                );
            }
        }
    }
    let what = if cl.narrow {
        "a narrowband line outside the broadcast and ISM allocations (or off their rasters)"
    } else {
        "a broadband peak outside the broadcast and ISM allocations"
    };
    (EmitterKind::Other, what.to_string())
}

/// The band of `s` holding `freq_hz` when the line lies on the service's raster within
/// min(3σ, step/4) (the tolerance of the raster test of `families::raster`), and whether the
/// raster could be tested at all: with 3σ of half the channel step or more, every frequency is
/// on the raster and only the allocation speaks (a weaker call, said so in the report).
fn on_band_raster(s: &Service, freq_hz: f64, sigma_hz: f64) -> Option<((f64, f64), bool)> {
    let &(a, b) = s
        .bands
        .iter()
        .find(|&&(a, b)| freq_hz >= a && freq_hz <= b)?;
    if 3.0 * sigma_hz >= 0.5 * s.step_hz {
        return Some(((a, b), false));
    }
    let tol = (3.0 * sigma_hz).min(0.25 * s.step_hz);
    let k = (freq_hz / s.step_hz).round();
    ((freq_hz - k * s.step_hz).abs() <= tol).then_some(((a, b), true))
}

/// Humps: fragments associated by overlap; per sweep its extent; the emitter's extent the
/// median of those, its maximum where the median level over its sweeps is highest, its levels
/// each sweep's top, its margin the smallest of limit minus the 95th percentile over the extent.
fn humps(ctx: &Context) -> Vec<Emitter> {
    let dets: Vec<(usize, usize)> = ctx
        .findings
        .iter()
        .enumerate()
        .flat_map(|(s, f)| (0..f.humps.len()).map(move |h| (s, h)))
        .collect();
    let intervals: Vec<(f64, f64)> = dets
        .iter()
        .map(|&(s, h)| {
            let x = &ctx.findings[s].humps[h];
            (x.start_hz, x.stop_hz)
        })
        .collect();
    overlapping(&intervals, HUMP_GAP_SHARE)
        .into_iter()
        .filter_map(|g| {
            hump_emitter(
                ctx,
                &g.iter()
                    .map(|&i| (dets[i], intervals[i]))
                    .collect::<Vec<_>>(),
            )
        })
        .collect()
}

#[allow(clippy::type_complexity)]
fn hump_emitter(ctx: &Context, members: &[((usize, usize), (f64, f64))]) -> Option<Emitter> {
    let mut extent: BTreeMap<usize, (f64, f64)> = BTreeMap::new();
    for &((s, _), (a, b)) in members {
        let e = extent.entry(s).or_insert((a, b));
        *e = (e.0.min(a), e.1.max(b));
    }
    let starts: Vec<f64> = extent.values().map(|e| e.0).collect();
    let stops: Vec<f64> = extent.values().map(|e| e.1).collect();
    let (start, stop) = (quantile(&starts, 0.5)?, quantile(&stops, 0.5)?);
    let points: Vec<usize> = (0..ctx.grid.len())
        .filter(|&i| ctx.grid[i] >= start && ctx.grid[i] <= stop)
        .collect();
    let sweeps: BTreeSet<usize> = extent.keys().copied().collect();
    let tau = ctx.params.level_quantile;
    let column = |i: usize| -> Vec<f64> {
        sweeps
            .iter()
            .filter_map(|&s| ctx.levels.get(s).and_then(|l| l.get(i)).copied())
            .collect()
    };
    let top = points.iter().copied().max_by(|&a, &b| {
        let m = |i| quantile(&column(i), 0.5).unwrap_or(f64::NEG_INFINITY);
        m(a).total_cmp(&m(b))
    })?;
    let tops: Vec<f64> = sweeps
        .iter()
        .filter_map(|&s| {
            let l = ctx.levels.get(s)?;
            points
                .iter()
                .filter_map(|&i| l.get(i).copied())
                .reduce(f64::max)
        })
        .collect();
    let mut e = with_levels(
        base(ctx, ctx.grid[top], &sweeps, EmitterKind::LightingHump),
        &tops,
        tau,
    );
    e.start_hz = Some(start);
    e.stop_hz = Some(stop);
    e.narrowband = false;
    e.margin_db = ctx.limit.and_then(|l| {
        points
            .iter()
            .filter_map(|&i| Some(l.at(ctx.grid[i])? - quantile(&column(i), tau)?))
            .reduce(f64::min)
    });
    if ctx.conducted {
        e.kind_detail = format!(
            "broadband hump {} to {} in the conducted range: phase-cut dimmers and lamp drivers are the usual ambient cause (a prior, common practice)",
            fmt_hz(start),
            fmt_hz(stop)
        );
    } else {
        e.kind = EmitterKind::Other;
        e.kind_detail = format!("broadband hump {} to {}", fmt_hz(start), fmt_hz(stop));
    }
    Some(e)
}

/// Ids of the emitters that lie in `[start_hz, stop_hz]`, give or take one association
/// radius: a line or one of a comb's lines inside, or a hump overlapping.
pub fn inside(emitters: &[Emitter], axis: &Axis, start_hz: f64, stop_hz: f64) -> Vec<usize> {
    let (a, b) = (axis.at(start_hz) - 1.0, axis.at(stop_hz) + 1.0);
    let near = |f: f64| {
        let u = axis.at(f);
        u >= a && u <= b
    };
    emitters
        .iter()
        .filter(|e| match (e.start_hz, e.stop_hz) {
            (Some(s), Some(t)) => s <= stop_hz && t >= start_hz,
            _ if e.lines.is_empty() => near(e.freq_hz),
            _ => e.lines.iter().any(|l| near(l.freq_hz)),
        })
        .map(|e| e.id)
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    fn cluster(freq_hz: f64, narrow: bool) -> LineCluster {
        LineCluster {
            levels: BTreeMap::new(),
            freq_hz,
            sigma_hz: 450.0,
            narrow,
        }
    }

    #[test]
    fn lone_lines_by_allocation_and_raster() {
        // source: ITU RR 5.150, 13.553-13.567 MHz ISM (METHODS §7)
        let step = 4.5e3;
        assert_eq!(lone_kind(&cluster(13.56e6, true), step).0, EmitterKind::Ism);
        // source: METHODS §7, HF broadcasting 5900-6200 kHz, 5 kHz channels
        assert_eq!(
            lone_kind(&cluster(6.07e6, true), step).0,
            EmitterKind::Broadcast
        );
        // in the band but 2.5 kHz off its raster: not a station
        assert_eq!(
            lone_kind(&cluster(6.0725e6, true), step).0,
            EmitterKind::Other
        );
        // on a 26 kHz step (σ = step/√12 = 7.5 kHz) the 5 kHz raster cannot be tested
        let coarse = LineCluster {
            sigma_hz: 7.5e3,
            ..cluster(6.0725e6, true)
        };
        let (kind, why) = lone_kind(&coarse, 26e3);
        assert_eq!(kind, EmitterKind::Broadcast);
        assert!(why.contains("allocation only"), "{why}");
        // between the bands
        assert_eq!(lone_kind(&cluster(6.5e6, true), step).0, EmitterKind::Other);
        // on a 60 kHz step (σ = step/√12 = 17 kHz) a line read 9 kHz under the band may still be
        // in it
        let wide = LineCluster {
            sigma_hz: 17e3,
            ..cluster(13.544e6, true)
        };
        assert_eq!(lone_kind(&wide, 60e3).0, EmitterKind::Ism);
        assert_eq!(
            lone_kind(&cluster(13.544e6, true), step).0,
            EmitterKind::Other
        );
        // broadband: the allocation alone does not make a carrier
        assert_eq!(
            lone_kind(&cluster(6.07e6, false), step).0,
            EmitterKind::Other
        );
    }

    #[test]
    fn far_harmonics_that_come_and_go_with_a_comb_join_it() {
        let grid: Vec<f64> = (0..1000).map(|i| 150e3 + i as f64 * 4.5e3).collect();
        let axis = Axis::new(&grid, Some(9e3), 0.5, 200e-6);
        let params = SurveyParams::default();
        let findings: Vec<SweepFindings> = Vec::new();
        let ctx = Context {
            findings: &findings,
            levels: &[],
            grid: &grid,
            axis: &axis,
            limit: None,
            params: &params,
            conducted: true,
            rbw_hz: Some(9e3),
        };
        let with = |f: f64, sweeps: std::ops::Range<usize>| LineCluster {
            levels: sweeps.map(|s| (s, 10.0)).collect(),
            ..cluster(f, true)
        };
        // a 42 kHz odd-only comb on in sweeps 0-49; its 55th harmonic (2.31 MHz) seen in 40 of
        // them, a steady carrier on its 57th (2.394 MHz) in all 100, a line off its harmonics,
        // a one-off on its 59th, a line on its (absent) 86th
        let clusters = vec![
            with(42e3 * 55.0 + 300.0, 5..45),
            with(42e3 * 57.0, 0..100),
            with(42e3 * 56.5, 0..50),
            with(42e3 * 59.0, 20..22),
            with(42e3 * 86.0, 0..50),
        ];
        let fit = crate::families::FamilyFit {
            fundamental_hz: 42e3,
            sigma_hz: 1.0,
            pattern: crate::families::sieve::Pattern::OddOnly,
            members: Vec::new(),
            misses: 0,
            envelope: crate::families::envelope::describe(&[], 42e3, 13.5e3),
            raster: None,
        };
        let mut combs = vec![Comb {
            f0: 42e3,
            lines: Vec::new(),
            present: (0..50).collect(),
            fit: &fit,
        }];
        absorb_lines(&ctx, &clusters, &mut combs);
        assert_eq!(combs[0].lines, vec![0]);
    }

    fn findings(lines: Vec<Vec<(f64, f64)>>) -> Vec<SweepFindings> {
        lines
            .into_iter()
            .map(|ls| SweepFindings {
                lines: ls
                    .into_iter()
                    .map(
                        |(freq_hz, significance_db)| crate::survey::detect::LineDetection {
                            freq_hz,
                            level_dbuv: 20.0 + significance_db,
                            significance_db,
                            narrow: true,
                            point: 0,
                        },
                    )
                    .collect(),
                humps: Vec::new(),
                families: Vec::new(),
                floor: crate::floor::Floor {
                    floor_dbuv: Vec::new(),
                    threshold_dbuv: Vec::new(),
                    samples_per_point: 1.0,
                    spread_db: 1.0,
                    false_alarm_per_point: 1e-6,
                },
            })
            .collect()
    }

    /// Noise crossing the threshold by a fraction of a dB at one place in a few of 100 sweeps
    /// is no emitter; a one-off well over the threshold is; so is a weak line seen often.
    #[test]
    fn rare_weak_clusters_are_noise() {
        let sweeps: Vec<Vec<(f64, f64)>> = (0..100)
            .map(|k| {
                let mut l = vec![(1e6, 10.0)];
                if k % 25 == 0 {
                    l.push((200e3 + k as f64 * 40.0, 1.2)); // 4 sweeps, 1.2 dB over
                }
                if k == 50 {
                    l.push((3.62e6, 25.0)); // one sweep, 25 dB over
                }
                if k % 2 == 0 {
                    l.push((5e6, 1.5)); // half the sweeps, weak
                }
                l
            })
            .collect();
        let f = findings(sweeps);
        let grid: Vec<f64> = (0..6635).map(|i| 150e3 + i as f64 * 4.5e3).collect();
        let axis = Axis::new(&grid, Some(9e3), 0.5, 200e-6);
        let params = SurveyParams::default();
        let ctx = Context {
            findings: &f,
            levels: &[],
            grid: &grid,
            axis: &axis,
            limit: None,
            params: &params,
            conducted: true,
            rbw_hz: Some(9e3),
        };
        let (clusters, _) = line_clusters(&ctx);
        let freqs: Vec<f64> = clusters.iter().map(|c| c.freq_hz.round()).collect();
        assert_eq!(freqs, vec![1e6, 3.62e6, 5e6]);
    }

    #[test]
    fn a_line_joins_a_comb_only_when_it_is_usually_a_member() {
        let fit = crate::families::FamilyFit {
            fundamental_hz: 42e3,
            sigma_hz: 1.0,
            pattern: Pattern::All,
            members: Vec::new(),
            misses: 0,
            envelope: crate::families::envelope::describe(&[], 42e3, 13.5e3),
            raster: None,
        };
        // a comb found in sweeps 0-9 with lines 0, 1, 2; line 3 (a steady carrier seen in all
        // ten) was taken into the family once
        let inst: Vec<Instance> = (0..10)
            .map(|s| Instance {
                sweep: s,
                f0: 42e3,
                clusters: if s == 0 {
                    [0, 1, 2, 3].into()
                } else {
                    [0, 1, 2].into()
                },
                fit: &fit,
            })
            .collect();
        let groups = vec![(0..10).collect::<Vec<usize>>()];
        let found = vec![(0..10).collect::<BTreeSet<usize>>()];
        let seen: Vec<BTreeSet<usize>> = (0..4).map(|_| (0..10).collect()).collect();
        let lines = assign_lines(&inst, &groups, &found, &seen, &[true]);
        assert_eq!(lines[0], vec![0, 1, 2]);
    }

    /// A hump in a conducted survey is a lighting hump (the prior); in a radiated one, other.
    #[test]
    fn humps_are_lighting_humps_only_in_the_conducted_range() {
        let mut f = findings(vec![Vec::new(); 4]);
        for x in &mut f {
            x.humps.push(crate::survey::detect::HumpDetection {
                start_hz: 2e6,
                stop_hz: 6e6,
                freq_hz: 3e6,
                level_dbuv: 30.0,
            });
        }
        let grid: Vec<f64> = (0..2000).map(|i| 150e3 + i as f64 * 4.5e3).collect();
        let levels: Vec<Vec<f64>> = vec![vec![10.0; grid.len()]; 4];
        let axis = Axis::new(&grid, Some(9e3), 0.5, 200e-6);
        let params = SurveyParams::default();
        let mut ctx = Context {
            findings: &f,
            levels: &levels,
            grid: &grid,
            axis: &axis,
            limit: None,
            params: &params,
            conducted: true,
            rbw_hz: Some(9e3),
        };
        let h = humps(&ctx);
        assert_eq!(h.len(), 1);
        assert_eq!(h[0].kind, EmitterKind::LightingHump);
        assert_eq!((h[0].start_hz, h[0].stop_hz), (Some(2e6), Some(6e6)));
        ctx.conducted = false;
        assert_eq!(humps(&ctx)[0].kind, EmitterKind::Other);
    }

    #[test]
    fn a_comb_needs_three_lines_found_often_enough() {
        let seen = |s: std::ops::Range<usize>| s.collect::<BTreeSet<usize>>();
        let lines_seen = vec![seen(0..10), seen(0..10), seen(0..10)];
        // found in 6 of the 10 sweeps that show its lines: holds
        assert!(comb_holds(&[0, 1, 2], &seen(0..6), &lines_seen));
        // three steady carriers that once lined up: found in 1 of 10
        assert!(!comb_holds(&[0, 1, 2], &seen(0..1), &lines_seen));
        // two lines are no comb
        assert!(!comb_holds(&[0, 1], &seen(0..10), &lines_seen));
    }
}
