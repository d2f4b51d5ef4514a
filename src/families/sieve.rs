//! A harmonic sieve: candidate fundamentals from the strongest lines (each line's frequency
//! over small integers, and spacings between neighbouring lines), each scored by the lines that
//! fall on its harmonics minus a penalty for harmonics that are expected but clearly absent.
//!
//! Scoring costs O(lines + harmonic slots) per candidate, never a loop over the trace's points.

use super::refine::{Member, fit};

/// A line offered to the sieve.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Line {
    pub freq_hz: f64,
    /// Standard uncertainty of the line's frequency (Hz).
    pub sigma_hz: f64,
    /// Evidence weight of a hit on this line, 1 to 2 (stronger lines weigh more).
    pub weight: f64,
    /// Significance over the detection threshold (dB): the strongest lines seed candidates.
    pub strength_db: f64,
    /// Width of the emission (Hz): a line wider than [`MAX_WIDTH_SHARE`] of a fundamental
    /// cannot be one harmonic of it (its neighbours would overlap it).
    pub width_hz: f64,
}

/// The chance test counts as trials only the lines at least this close (dB) to the strength of
/// the candidate's weakest member: a crowd of weak lines cannot stand in for a few strong ones.
pub const STRENGTH_SLACK_DB: f64 = 3.0;

/// Free lines on each side of a seed whose spacings from it are candidate fundamentals.
const NEIGHBOURS: usize = 2;

/// Largest divisor k of a found fundamental whose f0/k is tried as the true fundamental
/// ([`Sieve::best_sub_multiple`]), and largest multiple tried as one of a pair of combs
/// ([`Sieve::split_common_divisor`]).
pub const MAX_SUB_MULTIPLE: u32 = 6;

/// Share of a candidate's lines that its sub-multiple must keep to compete with it.
pub const SUB_MULTIPLE_KEEPS: f64 = 0.8;

/// Fewest candidates whose rough scores are shared out between two threads (fewer are not
/// worth a thread's start).
const PARALLEL_CANDIDATES: usize = 256;

/// Widest emission, as a share of the fundamental, that can be one harmonic.
pub const MAX_WIDTH_SHARE: f64 = 0.7;

/// Which harmonics a candidate predicts.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Pattern {
    /// Every harmonic.
    All,
    /// Odd harmonics only (a 50 % duty square wave has no even harmonics).
    OddOnly,
}

/// Whether frequencies, asked in ascending order, lie in one of the sorted, disjoint occupied
/// intervals: a pointer that only moves forward, so a run of slots costs O(slots + intervals)
/// rather than a binary search per slot.
struct OccupiedCursor<'a> {
    intervals: &'a [(f64, f64)],
    /// Index of the first interval that starts above the last frequency asked.
    next: usize,
}

impl OccupiedCursor<'_> {
    fn covers(&mut self, freq_hz: f64) -> bool {
        while self
            .intervals
            .get(self.next)
            .is_some_and(|iv| iv.0 <= freq_hz)
        {
            self.next += 1;
        }
        self.next > 0 && freq_hz <= self.intervals[self.next - 1].1
    }
}

/// A scored candidate.
#[derive(Debug, Clone, PartialEq)]
pub struct Candidate {
    pub fundamental_hz: f64,
    pub sigma_hz: f64,
    pub pattern: Pattern,
    /// `(line index, harmonic number)`, ascending in harmonic number.
    pub hits: Vec<(usize, u32)>,
    /// Harmonic slots between the first and last hit where nothing at all shows.
    pub misses: usize,
    pub value: f64,
    /// `value` less the gain that lines at random would give it ([`Sieve::chance_gain`]): what
    /// candidates are ranked by.
    pub excess: f64,
    /// Uncertainty of the fundamental from the members' scatter (reported); equals
    /// `sigma_hz` before refinement.
    pub reported_sigma_hz: f64,
}

/// Settings of the sieve.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct SieveParams {
    /// Lines used to make candidates.
    pub seeds: usize,
    /// Largest divisor of a seed frequency.
    pub max_divisor: u32,
    /// Penalty per missing harmonic, against 1 to 2 per hit.
    pub miss_penalty: f64,
    /// A hit lies within this many standard uncertainties of its harmonic.
    pub tolerance_sigmas: f64,
    /// More clearly absent harmonics in a row than this end a family's run.
    pub max_gap: usize,
    /// A family must be less likely than this to arise from lines at random (see
    /// [`Sieve::searched_chance`]); a few thousand candidates are tried, so it is small.
    pub max_chance: f64,
    /// Candidates refined after the first, rough scoring.
    pub refined: usize,
}

impl Default for SieveParams {
    fn default() -> Self {
        SieveParams {
            seeds: 40,
            max_divisor: 40,
            miss_penalty: 0.6,
            tolerance_sigmas: 3.0,
            max_gap: 3,
            // measured on seeds 1-600 with the searched chance (and the crystal search at its
            // first setting, a bare chance under 1e-3), recall / precision / top-1: 1e-5
            // 0.740 / 0.918 / 0.738, 2e-5 0.746 / 0.909 / 0.738, 3e-5 0.748 / 0.900 / 0.745,
            // 1e-4 0.756 / 0.870 / 0.740; the crystal search's present setting gives 2e-5 the
            // same figures
            max_chance: 2e-5,
            refined: 32,
        }
    }
}

/// What the sieve works on: the lines still free, the lowest fundamental that shows as lines,
/// and where the trace shows anything at all (a harmonic there may be hidden, not absent).
pub struct Sieve<'a> {
    pub lines: &'a [Line],
    pub free: Vec<bool>,
    pub min_fundamental_hz: f64,
    /// Sorted, disjoint frequency intervals where the trace is over its detection threshold.
    pub occupied: &'a [(f64, f64)],
    pub params: SieveParams,
}

impl Sieve<'_> {
    /// Candidate fundamentals (Hz) with their uncertainties, from the strongest free lines.
    pub fn candidates(&self) -> Vec<(f64, f64)> {
        let mut seeds: Vec<usize> = (0..self.lines.len()).filter(|&i| self.free[i]).collect();
        seeds.sort_by(|&a, &b| {
            self.lines[b]
                .strength_db
                .total_cmp(&self.lines[a].strength_db)
        });
        seeds.truncate(self.params.seeds);
        let mut out: Vec<(f64, f64)> = Vec::new();
        for &s in &seeds {
            let l = self.lines[s];
            for n in 1..=self.params.max_divisor {
                let f0 = l.freq_hz / f64::from(n);
                if f0 < self.min_fundamental_hz {
                    break;
                }
                out.push((f0, l.sigma_hz / f64::from(n)));
            }
        }
        seeds.sort_by(|&a, &b| self.lines[a].freq_hz.total_cmp(&self.lines[b].freq_hz));
        let mut spacing = |a: usize, b: usize| {
            let (la, lb) = (self.lines[a], self.lines[b]);
            let d = (lb.freq_hz - la.freq_hz).abs();
            if d >= self.min_fundamental_hz {
                out.push((d, la.sigma_hz.hypot(lb.sigma_hz)));
            }
        };
        for (k, &a) in seeds.iter().enumerate() {
            for &b in seeds.iter().skip(k + 1).take(3) {
                spacing(a, b);
            }
        }
        // each seed and its nearest free neighbours on either side, strong or not: adjacent
        // harmonics of a comb seen only far above its fundamental (n > max_divisor) are spaced
        // by the fundamental itself
        let free: Vec<usize> = (0..self.lines.len()).filter(|&i| self.free[i]).collect();
        for &a in &seeds {
            let f = self.lines[a].freq_hz;
            let at = free.partition_point(|&i| self.lines[i].freq_hz < f);
            let below = free[..at].iter().rev().take(NEIGHBOURS);
            let above = free[at..].iter().filter(|&&i| i != a).take(NEIGHBOURS);
            for &b in below.chain(above) {
                spacing(a, b);
            }
        }
        out.sort_by(|a, b| a.0.total_cmp(&b.0));
        out.dedup_by(|a, b| (a.0 - b.0).abs() <= 1e-6 * b.0);
        out
    }

    /// Scores a fundamental with the given uncertainty and pattern.
    pub fn score(&self, f0: f64, sigma_f0: f64, pattern: Pattern) -> Candidate {
        let hits = self.harmonic_hits(f0, sigma_f0);
        self.score_hits(f0, sigma_f0, pattern, &hits)
    }

    /// [`Sieve::score`] for both patterns, `[All, OddOnly]`, from one pass over the lines (the
    /// odd-only hits are the every-harmonic hits at odd numbers).
    pub fn score_both(&self, f0: f64, sigma_f0: f64) -> [Candidate; 2] {
        let hits = self.harmonic_hits(f0, sigma_f0);
        [Pattern::All, Pattern::OddOnly].map(|p| self.score_hits(f0, sigma_f0, p, &hits))
    }

    /// The free lines within tolerance of a harmonic of `f0`, as `(line, harmonic number)`
    /// ascending in number, one per harmonic (the closest).
    fn harmonic_hits(&self, f0: f64, sigma_f0: f64) -> Vec<(usize, u32)> {
        let mut best: Vec<(u32, usize, f64)> = Vec::new(); // (n, line, normalised residual)
        for (i, l) in self.lines.iter().enumerate() {
            if !self.free[i] || l.width_hz > MAX_WIDTH_SHARE * f0 {
                continue;
            }
            let n = (l.freq_hz / f0).round();
            // the tolerance never exceeds a tenth of f0: most lines are out before it is computed
            let d = (l.freq_hz - n * f0).abs();
            if n < 1.0 || d > 0.1 * f0 {
                continue;
            }
            let r = d / self.tolerance(l, n, f0, sigma_f0);
            if r <= 1.0 {
                best.push((n as u32, i, r));
            }
        }
        best.sort_by(|a, b| a.0.cmp(&b.0).then(a.2.total_cmp(&b.2)));
        best.dedup_by_key(|h| h.0);
        best.iter().map(|&(n, i, _)| (i, n)).collect()
    }

    /// The candidate `hits` make under `pattern` (odd-only keeps the odd harmonics): its alive
    /// run, value and excess.
    fn score_hits(
        &self,
        f0: f64,
        sigma_f0: f64,
        pattern: Pattern,
        hits: &[(usize, u32)],
    ) -> Candidate {
        let odd: Vec<(usize, u32)>;
        let hits = if pattern == Pattern::OddOnly {
            odd = hits.iter().copied().filter(|h| h.1 % 2 == 1).collect();
            &odd[..]
        } else {
            hits
        };
        let (hits, misses) = self.alive_run(f0, pattern, hits);
        self.valued(hits, misses, f0, sigma_f0, sigma_f0, pattern)
    }

    /// A candidate with its value (hits weighted, misses charged) and its excess over chance.
    fn valued(
        &self,
        hits: Vec<(usize, u32)>,
        misses: usize,
        f0: f64,
        sigma_f0: f64,
        reported_sigma_hz: f64,
        pattern: Pattern,
    ) -> Candidate {
        let gain: f64 = hits.iter().map(|&(i, _)| self.lines[i].weight).sum();
        let value = gain - self.params.miss_penalty * misses as f64;
        let mut c = Candidate {
            fundamental_hz: f0,
            sigma_hz: sigma_f0,
            pattern,
            hits,
            misses,
            value,
            excess: value,
            reported_sigma_hz,
        };
        c.excess = value - self.chance_gain(&c);
        c
    }

    /// A candidate made of given hits (line, harmonic number) at a fundamental already fitted,
    /// over the whole span of its hits (not cut into runs: the hits are taken as one family),
    /// with its misses (clearly absent harmonics between its first and last hit), value and
    /// excess as [`Sieve::score`] gives them (the lines need not be free).
    pub fn candidate_of(
        &self,
        mut hits: Vec<(usize, u32)>,
        f0: f64,
        sigma_f0: f64,
        reported_sigma_hz: f64,
        pattern: Pattern,
    ) -> Candidate {
        hits.sort_by_key(|h| h.1);
        hits.dedup_by_key(|h| h.1);
        let step = if pattern == Pattern::OddOnly { 2 } else { 1 };
        let misses = match (hits.first(), hits.last()) {
            (Some(a), Some(b)) => self.slots(&hits, f0, (a.1..=b.1).step_by(step)).1,
            _ => 0,
        };
        self.valued(hits, misses, f0, sigma_f0, reported_sigma_hz, pattern)
    }

    /// Tolerance of a hit on line `l` at harmonic `n` of a fundamental `f0 ± sigma_f0`.
    fn tolerance(&self, l: &Line, n: f64, f0: f64, sigma_f0: f64) -> f64 {
        // a hit must name its harmonic without doubt: never wider than a tenth of f0
        // sqrt of the sum of squares: no overflow at frequencies in Hz, and far cheaper than hypot
        let s = n * sigma_f0;
        (self.params.tolerance_sigmas * (l.sigma_hz * l.sigma_hz + s * s).sqrt()).min(0.1 * f0)
    }

    /// The chance that lines at random give this many hits: each free line within the run's
    /// span, and at least about as strong as the weakest hit ([`STRENGTH_SLACK_DB`]), lands
    /// within tolerance of a predicted harmonic with its own probability
    /// p_i = 2·tol_i/f0 (halved when only odd harmonics are predicted); the number of hits then
    /// follows the Poisson-binomial law of those trials, whose upper tail is summed exactly.
    ///
    /// # Formula
    /// ```text
    /// P(k hits after i trials) = P_{i−1}(k)·(1 − p_i) + P_{i−1}(k − 1)·p_i;  chance = Σ_{k ≥ h} P_T(k)
    /// ```
    /// # Source
    /// The Poisson-binomial distribution (sum of independent Bernoulli trials with unequal
    /// probabilities), computed by its standard recursion.
    pub fn chance(&self, c: &Candidate) -> f64 {
        // only lines about as strong as the family's weakest member could stand in for them
        let weakest = c
            .hits
            .iter()
            .map(|&(i, _)| self.lines[i].strength_db)
            .fold(f64::INFINITY, f64::min);
        let probs: Vec<f64> = self
            .trials(c, weakest - STRENGTH_SLACK_DB)
            .map(|(_, p)| p)
            .collect();
        // no hits: P(at least none) = 1
        poisson_binomial_tail(&probs, c.hits.len())
    }

    /// The chance of a candidate the search found ([`Sieve::chance`]) times the number of
    /// combs it could have fitted to the same stretch of trace instead. Harmonic numbers pin a
    /// comb that starts at its first harmonics; a run that starts at harmonic n_a of a free
    /// fundamental slides by a whole harmonic spacing when f0 moves by f0/n_a, so a search
    /// over f0 tries about n_a combs on those lines, each shifted, up to the
    /// 1/p̄ = f0/(2·tol) shifts that are told apart. Runs far above their fundamental (a
    /// radiated scan's harmonics 80 to 95 of a converter, a dense trace's lines 15 to 25 of
    /// an 8 MHz "clock") otherwise pass far more often than the chance of one comb says.
    ///
    /// # Formula
    /// ```text
    /// chance_searched = chance · max(1, min(n_first, 1/p̄)),   p̄ = mean p_i over the trials
    /// ```
    /// # Source
    /// Bonferroni's inequality over the distinguishable shifts (the look-elsewhere effect of
    /// a search over a free parameter).
    pub fn searched_chance(&self, c: &Candidate) -> f64 {
        let first = c.hits.first().map_or(1, |h| h.1);
        let (sum, count) = self
            .trials(c, f64::NEG_INFINITY)
            .fold((0.0, 0usize), |(s, k), (_, p)| (s + p, k + 1));
        let shifts = if count == 0 || sum <= 0.0 {
            f64::from(first)
        } else {
            f64::from(first).min(count as f64 / sum)
        };
        self.chance(c) * shifts.max(1.0)
    }

    /// The gain that lines at random would give a candidate over the span of its run: the sum
    /// over the free lines there of their weight times the chance `p_i` that they fall within
    /// tolerance of a predicted harmonic (as in [`Sieve::chance`]). A loose or low candidate
    /// collects many hits in a dense trace by chance alone; its value over this expectation is
    /// what the lines say for it.
    pub fn chance_gain(&self, c: &Candidate) -> f64 {
        self.trials(c, f64::NEG_INFINITY)
            .map(|(l, p)| p * l.weight)
            .sum()
    }

    /// The trials of the chance test: each free line within the span of the candidate's run
    /// (half a harmonic beyond its first and last hit), narrow enough to be one harmonic and at
    /// least `min_strength_db` strong, with the chance `p_i = 2·tol_i/f0` (halved when only odd
    /// harmonics are predicted) that it lands within tolerance of a predicted harmonic.
    fn trials<'s>(
        &'s self,
        c: &'s Candidate,
        min_strength_db: f64,
    ) -> impl Iterator<Item = (&'s Line, f64)> + 's {
        let f0 = c.fundamental_hz;
        let (lo, hi) = match (c.hits.first(), c.hits.last()) {
            (Some(first), Some(last)) => (
                (f64::from(first.1) - 0.5) * f0,
                (f64::from(last.1) + 0.5) * f0,
            ),
            _ => (f64::INFINITY, f64::NEG_INFINITY),
        };
        let share = if c.pattern == Pattern::OddOnly {
            0.5
        } else {
            1.0
        };
        self.lines
            .iter()
            .enumerate()
            .filter(move |&(i, l)| {
                self.free[i]
                    && l.freq_hz >= lo
                    && l.freq_hz <= hi
                    && l.width_hz <= MAX_WIDTH_SHARE * f0
                    && l.strength_db >= min_strength_db
            })
            .map(move |(_, l)| {
                let n = (l.freq_hz / f0).round().max(1.0);
                let p = (2.0 * self.tolerance(l, n, f0, c.sigma_hz) / f0 * share).min(1.0);
                (l, p)
            })
    }

    /// The run of harmonic slots where the family is alive: slots from the first to the last
    /// hit are split wherever more than `max_gap` harmonics in a row are clearly absent (the
    /// envelope has sunk into the floor; a sinc null leaves a gap of one or two); the run with
    /// the best value wins. Returns its hits and its misses (clearly absent harmonics; a slot
    /// where the trace shows something else is neither hit nor miss).
    fn alive_run(
        &self,
        f0: f64,
        pattern: Pattern,
        hits: &[(usize, u32)],
    ) -> (Vec<(usize, u32)>, usize) {
        let (Some(first), Some(last)) = (hits.first(), hits.last()) else {
            return (Vec::new(), 0);
        };
        let step = if pattern == Pattern::OddOnly { 2 } else { 1 };
        let lambda = self.params.miss_penalty;
        // (first hit index, last hit index, misses, value) of each run
        let mut runs: Vec<(usize, usize, usize, f64)> = Vec::new();
        let mut cur: Option<(usize, usize, usize, f64)> = None;
        let (mut k, mut gap) = (0usize, 0usize);
        let mut occupied = self.occupied_cursor();
        let mut n = first.1;
        while n <= last.1 {
            if hits.get(k).is_some_and(|h| h.1 == n) {
                let w = self.lines[hits[k].0].weight;
                cur = Some(match cur {
                    Some((a, _, m, v)) => (a, k, m + gap, v + w - lambda * gap as f64),
                    None => (k, k, 0, w),
                });
                k += 1;
                gap = 0;
            } else if !occupied.covers(f64::from(n) * f0) {
                gap += 1;
                if gap > self.params.max_gap {
                    runs.extend(cur.take());
                }
            }
            n += step;
        }
        runs.extend(cur);
        let Some(best) = runs.into_iter().max_by(|a, b| a.3.total_cmp(&b.3)) else {
            return (Vec::new(), 0);
        };
        (hits[best.0..=best.1].to_vec(), best.2)
    }

    /// Hits and clearly absent harmonics among the odd slots of an every-harmonic candidate's
    /// span (from its first to its last hit).
    pub fn odd_slots(&self, c: &Candidate) -> (usize, usize) {
        let (Some(first), Some(last)) = (c.hits.first(), c.hits.last()) else {
            return (0, 0);
        };
        let odd = (first.1..=last.1).filter(|n| n % 2 == 1);
        self.slots(&c.hits, c.fundamental_hz, odd)
    }

    /// Of the harmonic numbers `numbers` of `f0`, those hit (in `hits`, sorted by number) and
    /// those clearly absent (neither hit nor anything over the threshold there).
    fn slots(
        &self,
        hits: &[(usize, u32)],
        f0: f64,
        numbers: impl Iterator<Item = u32>,
    ) -> (usize, usize) {
        let (mut seen, mut absent) = (0, 0);
        let mut occupied = self.occupied_cursor();
        for n in numbers {
            if hits.binary_search_by_key(&n, |h| h.1).is_ok() {
                seen += 1;
            } else if !occupied.covers(f64::from(n) * f0) {
                absent += 1;
            }
        }
        (seen, absent)
    }

    /// The harmonic numbers from a candidate's first to its last hit, each with whether it is
    /// hit (`Some(true)`), clearly absent (`Some(false)`: nothing over the threshold there) or
    /// covered by something else (`None`).
    pub fn slot_states(&self, c: &Candidate) -> Vec<(u32, Option<bool>)> {
        let (Some(first), Some(last)) = (c.hits.first(), c.hits.last()) else {
            return Vec::new();
        };
        let step = if c.pattern == Pattern::OddOnly { 2 } else { 1 };
        let mut occupied = self.occupied_cursor();
        (first.1..=last.1)
            .step_by(step)
            .map(|n| {
                let state = if c.hits.binary_search_by_key(&n, |h| h.1).is_ok() {
                    Some(true)
                } else if !occupied.covers(f64::from(n) * c.fundamental_hz) {
                    Some(false)
                } else {
                    None
                };
                (n, state)
            })
            .collect()
    }

    /// A walk over the occupied intervals for frequencies asked in ascending order.
    fn occupied_cursor(&self) -> OccupiedCursor<'_> {
        OccupiedCursor {
            intervals: self.occupied,
            next: 0,
        }
    }

    /// A candidate scored and refined by weighted least squares, growing outwards: first on
    /// the hits up to twice the lowest harmonic, then four times, and so on, each time keeping
    /// only the hits that agree with the fit so far within three of their uncertainties. A
    /// fundamental taken from one line is rough; its far harmonics only fall into place once the
    /// near ones have fixed it, and a far line that happens to lie close to a rough harmonic
    /// must not steer the fit.
    pub fn refined(&self, f0: f64, sigma_f0: f64, pattern: Pattern) -> Candidate {
        let mut c = self.score(f0, sigma_f0, pattern);
        let Some(lowest) = c.hits.first().map(|h| h.1) else {
            return c;
        };
        let top = c.hits.last().map_or(lowest, |h| h.1);
        let mut reach = lowest.saturating_mul(2).max(lowest + 2);
        let mut best = c.clone();
        while let Some(f) = self.refit(&c, reach) {
            let mut next = self.score(f.fundamental_hz, f.stated_sigma_hz, c.pattern);
            next.reported_sigma_hz = f.sigma_hz;
            c = next;
            if c.excess > best.excess {
                best = c.clone();
            }
            if reach >= top.max(c.hits.last().map_or(0, |h| h.1)) {
                break;
            }
            reach = reach.saturating_mul(2);
        }
        // a step that lost its way (a dense trace offers a rough fit many wrong lines) does not
        // undo a better step before it
        let mut c = best;
        if let Some(f) = self.refit(&c, u32::MAX) {
            let mut last = self.score(f.fundamental_hz, f.stated_sigma_hz, c.pattern);
            last.reported_sigma_hz = f.sigma_hz;
            if last.excess >= c.excess {
                return last;
            }
            // keep the members (and the tolerance they were taken with), report their
            // least-squares fundamental
            c.fundamental_hz = f.fundamental_hz;
            c.reported_sigma_hz = f.sigma_hz;
        }
        c
    }

    /// Weighted least squares on the hits up to harmonic `reach` that agree with the candidate
    /// within three of their uncertainties (its own and the candidate's, scaled by n).
    fn refit(&self, c: &Candidate, reach: u32) -> Option<super::refine::Fit> {
        let members: Vec<Member> = c
            .hits
            .iter()
            .filter(|&&(i, n)| {
                let l = &self.lines[i];
                let nf = f64::from(n);
                n <= reach
                    && (l.freq_hz - nf * c.fundamental_hz).abs()
                        <= 3.0 * l.sigma_hz.hypot(nf * c.sigma_hz)
            })
            .map(|&(i, n)| Member {
                n,
                freq_hz: self.lines[i].freq_hz,
                sigma_hz: self.lines[i].sigma_hz,
            })
            .collect();
        fit(&members)
    }

    /// The best refined candidate that chance cannot explain. A candidate whose far hits
    /// drown it in lines that fall near its harmonics by chance is cut back to the run of its
    /// lowest harmonics that chance explains least.
    pub fn best(&self) -> Option<Candidate> {
        // a first, unrefined score of every candidate; only the most promising are refined
        let rough_of = |part: &[(f64, f64)]| -> Vec<(f64, f64, Pattern, f64)> {
            part.iter()
                .flat_map(|&(f0, s)| self.score_both(f0, s).map(|c| (f0, s, c.pattern, c.excess)))
                .collect()
        };
        let candidates = self.candidates();
        let mut rough = if candidates.len() >= PARALLEL_CANDIDATES {
            // the two halves on two threads; the result is the same, in the same order
            let (a, b) = candidates.split_at(candidates.len() / 2);
            std::thread::scope(|scope| {
                let second = scope.spawn(|| rough_of(b));
                let mut rough = rough_of(a);
                rough.extend(second.join().unwrap_or_else(|_| rough_of(b)));
                rough
            })
        } else {
            rough_of(&candidates)
        };
        rough.sort_by(|a, b| b.3.total_cmp(&a.3));
        rough.truncate(self.params.refined);
        let mut best: Option<Candidate> = None;
        for (f0, s, pattern, _) in rough {
            {
                let c = self.refined(f0, s, pattern);
                if !best.as_ref().is_none_or(|b| better(&c, b)) {
                    continue;
                }
                if self.searched_chance(&c) < self.params.max_chance {
                    best = Some(c);
                } else if let Some(cut) = self.least_chance_prefix(&c) {
                    if best.as_ref().is_none_or(|b| better(&cut, b)) {
                        best = Some(cut);
                    }
                }
            }
        }
        best
    }

    /// The candidate or one of its sub-multiples f0/k (k = 2 … [`MAX_SUB_MULTIPLE`]), whichever
    /// has the larger excess over chance. A fundamental taken from a strong line over a small
    /// divisor is rough, and on a coarse grid the rough score of the true fundamental (many
    /// harmonics, each within a wide tolerance) can rank it out of the refined few; the
    /// candidate found at k·f0 then explains only every k-th harmonic. Each f0/k is refined
    /// from the candidate's own refined fundamental (uncertainty σ/k), so it is judged by the
    /// lines it explains, the harmonics it predicts that are clearly absent (each costs the
    /// miss penalty) and the gain chance would give its denser grid: the likelihood comparison
    /// of the two hypotheses that the sieve's score stands for.
    ///
    /// The two hypotheses must be about the same lines: f0/k replaces the candidate only when
    /// it keeps at least [`SUB_MULTIPLE_KEEPS`] of the candidate's lines, passes the chance test,
    /// and sees at least `min_hit_ratio` of the harmonics it predicts (the acceptance of a
    /// family; a lower fundamental that gathers a crowd of lines around the candidate's with
    /// absent harmonics between them is no family). The odd comb an every-harmonic candidate
    /// may stand for ([`Sieve::odd_comb_seeds`]) competes the same way.
    ///
    /// # Formula
    /// ```text
    /// E = Σ w_hits − λ·misses − Σ_lines w_i·p_i   (the candidate's `excess`; larger wins)
    /// ```
    /// # Source
    /// The sub-multiple (octave) check of harmonic-sieve pitch estimation: every divisor of the
    /// best fundamental is a competing hypothesis, scored by the same measure.
    pub fn best_sub_multiple(&self, c: Candidate, min_hit_ratio: f64) -> Candidate {
        let mut best = c.clone();
        for k in 2..=MAX_SUB_MULTIPLE {
            let kf = f64::from(k);
            let f0 = c.fundamental_hz / kf;
            if f0 < self.min_fundamental_hz {
                break;
            }
            let sigma = c.reported_sigma_hz.max(c.sigma_hz * 1e-3) / kf;
            for pattern in [Pattern::All, Pattern::OddOnly] {
                let sub = self.refined(f0, sigma, pattern);
                if better(&sub, &best) && self.explains(&sub, &c, min_hit_ratio) {
                    best = sub;
                }
            }
        }
        for (f0, sigma) in self.odd_comb_seeds(&c) {
            let sub = self.refined(f0, sigma, Pattern::OddOnly);
            if better(&sub, &best) && self.explains(&sub, &c, min_hit_ratio) {
                best = sub;
            }
        }
        best
    }

    /// Fundamentals of an odd-only comb that a candidate for every harmonic may stand for.
    /// The odd harmonics (2m + 1)·f of a square-ish clock lie 2·f apart; seen far above the
    /// fundamental (a clock's 60th to 80th harmonics on a radiated scan) they fit a comb
    /// through the origin at F ≈ 2·f·(1 + 1/(2m)) with consecutive numbers, and F/2 is no
    /// harmonic of theirs. The candidate's middle member (frequency g, number n) then is
    /// harmonic 2n − 1 or 2n + 1 of the odd comb.
    ///
    /// # Formula
    /// ```text
    /// f = g / (2n ± 1),  σ(f) = σ(g) / (2n ± 1)
    /// ```
    fn odd_comb_seeds(&self, c: &Candidate) -> Vec<(f64, f64)> {
        if c.pattern != Pattern::All {
            return Vec::new();
        }
        let Some(&(i, n)) = c.hits.get(c.hits.len() / 2) else {
            return Vec::new();
        };
        let Some(l) = self.lines.get(i) else {
            return Vec::new();
        };
        let n = f64::from(n);
        [2.0 * n - 1.0, 2.0 * n + 1.0]
            .into_iter()
            .map(|m| (l.freq_hz / m, l.sigma_hz / m))
            .filter(|&(f0, _)| f0 >= self.min_fundamental_hz)
            .collect()
    }

    /// Two oscillators at a·F and b·F (a, b coprime, 2 … [`MAX_SUB_MULTIPLE`]) that a
    /// candidate at their common divisor F explains as one: two clocks at 32 and 48 MHz fill
    /// the even harmonics and the multiples of three of 16 MHz, and the harmonics of F that are
    /// neither (16·5, 16·7, …) are clearly absent. Both hypotheses explain about the same lines;
    /// they differ in the harmonics they predict, so in the misses they are charged. The pair
    /// replaces F when each of the two passes the chance test and the family's hit ratio,
    /// together they keep [`SUB_MULTIPLE_KEEPS`] of the candidate's lines, and their summed
    /// excess over chance beats the candidate's by more than `family_cost` (the least value a
    /// family must reach: the price of the second oscillator). Returns the stronger of the two;
    /// the other's lines stay free for the next round.
    ///
    /// # Formula
    /// ```text
    /// split  ⇔  E(a·F) + E(b·F) > E(F) + v_min,   E = Σ w_hits − λ·misses − chance gain
    /// ```
    /// # Source
    /// A likelihood-ratio comparison of nested hypotheses with a fixed price per added
    /// component (the sieve's score is its log-likelihood proxy); the price is the acceptance
    /// value of one family, not a tuned constant.
    pub fn split_common_divisor(
        &self,
        c: &Candidate,
        min_hit_ratio: f64,
        family_cost: f64,
    ) -> Option<Candidate> {
        if c.pattern != Pattern::All || c.hits.len() < 6 {
            return None;
        }
        let sigma = c.reported_sigma_hz.max(c.sigma_hz * 1e-3);
        let multiples: Vec<Option<Candidate>> = (2..=MAX_SUB_MULTIPLE)
            .map(|a| {
                let af = f64::from(a);
                let m = self.refined(af * c.fundamental_hz, af * sigma, Pattern::All);
                let seen = m.hits.len() as f64;
                (m.hits.len() >= 3
                    && seen >= min_hit_ratio * (seen + m.misses as f64)
                    && self.searched_chance(&m) < self.params.max_chance)
                    .then_some(m)
            })
            .collect();
        let mut best: Option<(f64, Candidate)> = None;
        for a in 2..=MAX_SUB_MULTIPLE {
            for b in a + 1..=MAX_SUB_MULTIPLE {
                if gcd(a, b) != 1 {
                    continue;
                }
                let (Some(Some(ma)), Some(Some(mb))) = (
                    multiples.get((a - 2) as usize),
                    multiples.get((b - 2) as usize),
                ) else {
                    continue;
                };
                let kept = c
                    .hits
                    .iter()
                    .filter(|h| ma.hits.iter().chain(&mb.hits).any(|s| s.0 == h.0))
                    .count();
                let gain = ma.excess + mb.excess - c.excess - family_cost;
                if (kept as f64) < SUB_MULTIPLE_KEEPS * c.hits.len() as f64 || gain <= 0.0 {
                    continue;
                }
                if best.as_ref().is_none_or(|b| gain > b.0) {
                    let stronger = if better(ma, mb) { ma } else { mb };
                    best = Some((gain, stronger.clone()));
                }
            }
        }
        best.map(|b| b.1)
    }

    /// Whether `sub` (a sub-multiple of `c`) keeps at least [`SUB_MULTIPLE_KEEPS`] of the lines
    /// of `c`, sees at least `min_hit_ratio` of its predicted harmonics and passes the chance
    /// test.
    fn explains(&self, sub: &Candidate, c: &Candidate, min_hit_ratio: f64) -> bool {
        let kept = c
            .hits
            .iter()
            .filter(|h| sub.hits.iter().any(|s| s.0 == h.0))
            .count();
        let seen = sub.hits.len() as f64;
        kept as f64 >= SUB_MULTIPLE_KEEPS * c.hits.len() as f64
            && seen >= min_hit_ratio * (seen + sub.misses as f64)
            && self.searched_chance(sub) < self.params.max_chance
    }

    /// The prefix of the hits (at least three) with the smallest chance, when that chance is
    /// below the limit; `None` otherwise or for long runs (a long run that fails is no family).
    fn least_chance_prefix(&self, c: &Candidate) -> Option<Candidate> {
        const LONGEST: usize = 40;
        if c.hits.len() > LONGEST || c.hits.len() < 4 {
            return None;
        }
        let mut best: Option<(f64, Candidate)> = None;
        for k in 3..c.hits.len() {
            let (hits, misses) = self.alive_run(c.fundamental_hz, c.pattern, &c.hits[..k]);
            let gain: f64 = hits.iter().map(|&(i, _)| self.lines[i].weight).sum();
            let mut cut = Candidate {
                hits,
                misses,
                value: gain - self.params.miss_penalty * misses as f64,
                ..c.clone()
            };
            cut.excess = cut.value - self.chance_gain(&cut);
            let p = self.searched_chance(&cut);
            if best.as_ref().is_none_or(|b| p < b.0) {
                best = Some((p, cut));
            }
        }
        best.filter(|b| b.0 < self.params.max_chance).map(|b| b.1)
    }
}

/// Greatest common divisor (Euclid).
fn gcd(a: u32, b: u32) -> u32 {
    if b == 0 { a } else { gcd(b, a % b) }
}

/// P(at least `h` successes) for independent trials with success probabilities `probs`.
pub fn poisson_binomial_tail(probs: &[f64], h: usize) -> f64 {
    if h == 0 {
        return 1.0;
    }
    if h > probs.len() {
        return 0.0;
    }
    // dist[k] = P(k successes so far), k < h; the mass at h or more collects in `tail`
    let mut dist = vec![0.0; h];
    dist[0] = 1.0;
    let mut tail = 0.0;
    for &p in probs {
        tail += dist[h - 1] * p;
        for k in (1..h).rev() {
            dist[k] = dist[k] * (1.0 - p) + dist[k - 1] * p;
        }
        dist[0] *= 1.0 - p;
    }
    tail.clamp(0.0, 1.0)
}

/// Higher excess over chance wins; on a tie, every-harmonic beats odd-only and the higher fundamental wins
/// (fewer predicted harmonics: guards against sub-multiples).
fn better(a: &Candidate, b: &Candidate) -> bool {
    const EPS: f64 = 1e-9;
    if (a.excess - b.excess).abs() > EPS {
        return a.excess > b.excess;
    }
    if a.pattern != b.pattern {
        return a.pattern == Pattern::All;
    }
    a.fundamental_hz > b.fundamental_hz
}

#[cfg(test)]
mod tests {
    use super::*;

    fn lines(freqs: &[f64]) -> Vec<Line> {
        freqs
            .iter()
            .map(|&f| Line {
                freq_hz: f,
                sigma_hz: 300.0,
                weight: 1.5,
                strength_db: 20.0,
                width_hz: 10e3,
            })
            .collect()
    }

    fn sieve<'a>(l: &'a [Line], occupied: &'a [(f64, f64)]) -> Sieve<'a> {
        Sieve {
            lines: l,
            free: vec![true; l.len()],
            min_fundamental_hz: 15e3,
            occupied,
            params: SieveParams::default(),
        }
    }

    /// The slow oracle: every fundamental on a fine grid, scored the same way.
    fn brute_best(s: &Sieve, lo: f64, hi: f64) -> f64 {
        let mut best = (f64::NEG_INFINITY, 0.0);
        let mut f = lo;
        while f < hi {
            let c = s.score(f, 20.0, Pattern::All);
            if c.value > best.0 + 1e-9 {
                best = (c.value, f);
            }
            f *= 1.0 + 2e-5;
        }
        best.1
    }

    #[test]
    fn the_occupied_cursor_agrees_with_a_search() {
        let intervals = [(1.0, 2.0), (3.0, 3.0), (5.0, 8.0), (9.5, 10.0)];
        let mut cursor = OccupiedCursor {
            intervals: &intervals,
            next: 0,
        };
        for k in 0..=230 {
            let f = 0.05 * f64::from(k);
            let inside = intervals.iter().any(|iv| iv.0 <= f && f <= iv.1);
            assert_eq!(cursor.covers(f), inside, "at {f}");
        }
    }

    #[test]
    fn both_patterns_from_one_pass_score_as_each_alone() {
        let l = lines(&[300e3, 500e3, 700e3, 900e3, 1000e3, 1100e3, 1300e3, 1400e3]);
        let s = sieve(&l, &[]);
        let [all, odd] = s.score_both(100e3, 50.0);
        assert_eq!(all, s.score(100e3, 50.0, Pattern::All));
        assert_eq!(odd, s.score(100e3, 50.0, Pattern::OddOnly));
        assert!(odd.hits.iter().all(|h| h.1 % 2 == 1));
        assert!(all.hits.iter().any(|h| h.1 % 2 == 0));
    }

    #[test]
    fn finds_a_fundamental_below_the_scan_start() {
        // a 65 kHz converter seen from its 3rd harmonic (195 kHz) upwards
        let f: Vec<f64> = (3..=20).map(|n| 65_012.0 * f64::from(n)).collect();
        let l = lines(&f);
        let c = sieve(&l, &[]).best().unwrap();
        assert!(
            (c.fundamental_hz - 65_012.0).abs() < 30.0,
            "{}",
            c.fundamental_hz
        );
        assert_eq!(c.hits.first().map(|h| h.1), Some(3));
        assert_eq!(c.misses, 0);
    }

    #[test]
    fn a_comb_seen_only_far_above_its_fundamental_is_found_from_line_spacings() {
        // a 50 kHz converter seen from its 200th to its 260th harmonic (10 to 13 MHz, a zoomed
        // span): every 7th line stands out, so the strong lines are 350 kHz apart and no seed
        // over a divisor up to 40 comes near 50 kHz; only the spacing of a strong line to its
        // weaker neighbours names the fundamental
        let f0 = 50_003.0;
        let l: Vec<Line> = (200..=260)
            .map(|n| {
                let strong = n % 7 == 0;
                Line {
                    freq_hz: f0 * f64::from(n),
                    sigma_hz: 300.0,
                    weight: if strong { 2.0 } else { 1.3 },
                    strength_db: if strong { 20.0 } else { 6.0 },
                    width_hz: 10e3,
                }
            })
            .collect();
        let mut s = sieve(&l, &[]);
        s.params.seeds = 8;
        let c = s.best().unwrap();
        assert!(
            (c.fundamental_hz / f0 - 1.0).abs() < 1e-4,
            "{}",
            c.fundamental_hz
        );
        assert!(c.hits.len() >= 55, "{} hits", c.hits.len());
    }

    #[test]
    fn no_octave_or_sub_multiple_error() {
        let f: Vec<f64> = (1..=12).map(|n| 400e3 * f64::from(n)).collect();
        let l = lines(&f);
        let s = sieve(&l, &[]);
        let c = s.best().unwrap();
        assert!(
            (c.fundamental_hz / 400e3 - 1.0).abs() < 1e-4,
            "{}",
            c.fundamental_hz
        );
        // half the fundamental scores worse: it predicts a harmonic between every pair
        assert!(s.score(200e3, 10.0, Pattern::All).value < c.value);
        // the brute-force search agrees
        assert!((brute_best(&s, 150e3, 900e3) / 400e3 - 1.0).abs() < 1e-3);
    }

    #[test]
    fn square_wave_family_is_odd_only() {
        let f: Vec<f64> = (0..8).map(|k| 8e6 * f64::from(2 * k + 1)).collect();
        let l = lines(&f);
        let c = sieve(&l, &[]).best().unwrap();
        assert_eq!(c.pattern, Pattern::OddOnly);
        assert!((c.fundamental_hz / 8e6 - 1.0).abs() < 1e-5);
    }

    #[test]
    fn a_sparse_raster_is_not_a_family() {
        // medium-wave carriers on the 9 kHz raster (source: ITU RR Region 1, 9 kHz channels)
        let f = [594e3, 693e3, 909e3, 1089e3, 1422e3];
        let l = lines(&f);
        let s = sieve(&l, &[]);
        // each station is a run of its own: dozens of empty channels lie between them
        assert!(s.score(9e3, 1.0, Pattern::All).hits.len() < 3);
    }

    #[test]
    fn poisson_binomial_tail_matches_the_binomial_and_brute_force() {
        use statrs::distribution::{Binomial, DiscreteCDF};
        // equal probabilities: the binomial law (statrs as the reference)
        let b = Binomial::new(0.1, 30).unwrap();
        assert!((poisson_binomial_tail(&[0.1; 30], 5) - b.sf(4)).abs() < 1e-12);
        // unequal probabilities: enumerate all 2^4 outcomes
        let p = [0.1, 0.5, 0.3, 0.9];
        let mut want = 0.0;
        for mask in 0u32..16 {
            let prob: f64 = (0..4)
                .map(|i| if mask >> i & 1 == 1 { p[i] } else { 1.0 - p[i] })
                .product();
            if mask.count_ones() >= 2 {
                want += prob;
            }
        }
        assert!((poisson_binomial_tail(&p, 2) - want).abs() < 1e-12);
    }

    /// Lines from a 385 kHz converter (harmonics 1-30) among a dense crowd of unrelated lines
    /// (a pseudo-random set, about one per 10 kHz over 2-8 MHz, as a trace full of other combs
    /// shows): a low fundamental with a loose tolerance collects many crowd lines by chance and
    /// must not outrank the converter.
    #[test]
    fn chance_hits_do_not_outrank_a_real_family() {
        let mut f: Vec<f64> = (1..=30).map(|n| 385_144.0 * f64::from(n)).collect();
        let mut x: u64 = 12345;
        let mut g = 2.0e6;
        while g < 8.0e6 {
            x = x
                .wrapping_mul(6364136223846793005)
                .wrapping_add(1442695040888963407);
            g += 4e3 + (x >> 33) as f64 / f64::from(u32::MAX) * 24e3;
            f.push(g);
        }
        f.sort_by(f64::total_cmp);
        let mut l = lines(&f);
        for line in &mut l {
            line.sigma_hz = 900.0;
        }
        let s = sieve(&l, &[]);
        let c = s.best().unwrap();
        assert!(
            (c.fundamental_hz / 385_144.0 - 1.0).abs() < 1e-3,
            "{} with {} hits",
            c.fundamental_hz,
            c.hits.len()
        );
        assert!(c.excess < c.value);
    }

    /// Three strong odd harmonics of a 3.579545 MHz crystal (a standard value, METHODS.md §10)
    /// among 60 weak unrelated lines: the weak crowd cannot stand in for the strong lines, so
    /// chance does not explain the family; were the crowd as strong, it would.
    #[test]
    fn weak_lines_do_not_explain_strong_ones() {
        let f0 = 3_579_545.0;
        let mut l = lines(&[3.0 * f0, 5.0 * f0, 7.0 * f0]);
        for line in &mut l {
            line.strength_db = 15.0;
        }
        let mut x: u64 = 99;
        for _ in 0..60 {
            x = x
                .wrapping_mul(6364136223846793005)
                .wrapping_add(1442695040888963407);
            let f = 8.9e6 + (x >> 11) as f64 / (1u64 << 53) as f64 * 18e6;
            l.push(Line {
                strength_db: 2.0,
                ..lines(&[f])[0]
            });
        }
        l.sort_by(|a, b| a.freq_hz.total_cmp(&b.freq_hz));
        // a 4.5 kHz display step: a line is placed within ±step/2, σ = step/√12 ≈ 1.3 kHz
        for line in &mut l {
            line.sigma_hz = 1300.0;
        }
        let s = sieve(&l, &[]);
        let c = s.refined(f0, 150.0, Pattern::OddOnly);
        assert_eq!(c.hits.len(), 3);
        assert!(
            s.chance(&c) < SieveParams::default().max_chance,
            "{}",
            s.chance(&c)
        );
        let mut crowd = l.clone();
        for line in &mut crowd {
            line.strength_db = 15.0;
        }
        let s = sieve(&crowd, &[]);
        assert!(s.chance(&c) > SieveParams::default().max_chance);
    }

    /// A refinement step that loses its way (rescored with a loose tolerance in a crowd) never
    /// returns a candidate worse than the one it started from.
    #[test]
    fn refinement_keeps_its_best_step() {
        let f: Vec<f64> = (3..=60).map(|n| 115_674.4 * f64::from(n)).collect();
        let l = lines(&f);
        let s = sieve(&l, &[]);
        let start = s.score(115_674.4, 5.0, Pattern::All);
        let refined = s.refined(115_674.4, 5.0, Pattern::All);
        assert!(refined.excess >= start.excess - 1e-9);
        assert!((refined.fundamental_hz / 115_674.4 - 1.0).abs() < 1e-5);
    }

    /// A 4 MHz clock (a standard crystal value, METHODS.md §10) seen on a 1001-point
    /// 30 MHz-1 GHz grid (step 970 kHz: a line is placed within ±step/2, σ = step/√12 ≈
    /// 280 kHz), every harmonic 8-240 present. A candidate found at 8 MHz explains every other
    /// line only; its sub-multiple 4 MHz explains them all and wins. A true 8 MHz comb keeps its
    /// fundamental: 4 MHz would predict an absent harmonic between every pair of its lines.
    #[test]
    fn a_fundamental_found_at_a_multiple_falls_to_the_true_one() {
        let f0 = 4_000_039.0;
        let f: Vec<f64> = (8..=240).map(|n| f0 * f64::from(n)).collect();
        let mut l = lines(&f);
        for line in &mut l {
            line.sigma_hz = 280e3;
            line.width_hz = 1.2e6;
        }
        let s = sieve(&l, &[]);
        let at_8 = s.refined(2.0 * f0, 50.0, Pattern::All);
        assert!((at_8.fundamental_hz / (2.0 * f0) - 1.0).abs() < 1e-4);
        let c = s.best_sub_multiple(at_8, 0.6);
        assert!(
            (c.fundamental_hz / f0 - 1.0).abs() < 1e-4,
            "{}",
            c.fundamental_hz
        );
        assert_eq!(c.pattern, Pattern::All);

        let f: Vec<f64> = (4..=120).map(|n| 2.0 * f0 * f64::from(n)).collect();
        let mut l = lines(&f);
        for line in &mut l {
            line.sigma_hz = 280e3;
            line.width_hz = 1.2e6;
        }
        let s = sieve(&l, &[]);
        let c = s.best_sub_multiple(s.refined(2.0 * f0, 50.0, Pattern::All), 0.6);
        assert!(
            (c.fundamental_hz / (2.0 * f0) - 1.0).abs() < 1e-4,
            "{}",
            c.fundamental_hz
        );
    }

    /// The odd harmonics 59-83 of a 12 MHz clock (a standard crystal value, METHODS.md §10;
    /// a 50 % duty has no even harmonics, METHODS.md §5) on a 601-point 30 MHz-1 GHz grid
    /// (step 1.62 MHz, σ = step/√12 ≈ 467 kHz). Through the origin they fit a comb at
    /// 2·12 MHz·(1 + 1/70) ≈ 24.34 MHz with consecutive numbers 29-41 (harmonic 2m + 1 of
    /// 12 MHz taken for harmonic m), whose half is no harmonic of theirs; the odd comb at
    /// 12 MHz explains the same lines and wins.
    #[test]
    fn an_odd_comb_seen_far_up_is_not_a_comb_at_twice_its_fundamental() {
        let f0 = 11_999_718.9;
        let f: Vec<f64> = (29..=41).map(|m| f0 * f64::from(2 * m + 1)).collect();
        let mut l = lines(&f);
        for line in &mut l {
            line.sigma_hz = 467e3;
            line.width_hz = 1.8e6;
        }
        let s = sieve(&l, &[]);
        let shifted = s.refined(24.34e6, 20e3, Pattern::All);
        assert!(shifted.hits.len() >= 10, "{:?}", shifted.hits);
        assert!((shifted.fundamental_hz / (2.0 * f0) - 1.0).abs() > 3e-3);
        let c = s.best_sub_multiple(shifted, 0.6);
        assert_eq!(c.pattern, Pattern::OddOnly);
        assert!(
            (c.fundamental_hz / f0 - 1.0).abs() < 1e-4,
            "{}",
            c.fundamental_hz
        );
        assert_eq!(c.hits.len(), 13);
    }

    /// Clocks at 32 and 48 MHz (standard crystal values, METHODS.md §10), harmonics up to
    /// 1 GHz (a radiated scan), σ = 280 kHz: a candidate at their common divisor 16 MHz
    /// explains every line, but predicts the harmonics 5, 7, 11, … of 16 MHz, which are clearly
    /// absent; the pair explains the same lines without them and replaces it. A 16 MHz clock
    /// with every harmonic present stays one family.
    #[test]
    fn two_clocks_are_not_one_at_their_common_divisor() {
        let mut f: Vec<f64> = (1..=31).map(|n| 32e6 * f64::from(n)).collect();
        f.extend((1..=20).map(|n| 48e6 * f64::from(n)));
        f.retain(|&x| x > 30e6 && x < 1e9);
        f.sort_by(f64::total_cmp);
        f.dedup();
        let mut l = lines(&f);
        for line in &mut l {
            line.sigma_hz = 280e3;
            line.width_hz = 1.2e6;
        }
        let s = sieve(&l, &[]);
        let common = s.refined(16e6, 50.0, Pattern::All);
        assert!(common.hits.len() >= f.len() - 1, "{:?}", common.hits);
        let (v_min, ratio) = (2.5, 0.6); // FamilyParams::default()
        let part = s.split_common_divisor(&common, ratio, v_min).unwrap();
        assert!(
            (part.fundamental_hz / 32e6 - 1.0).abs() < 1e-4
                || (part.fundamental_hz / 48e6 - 1.0).abs() < 1e-4,
            "{}",
            part.fundamental_hz
        );

        let f: Vec<f64> = (2..=62).map(|n| 16e6 * f64::from(n)).collect();
        let mut l = lines(&f);
        for line in &mut l {
            line.sigma_hz = 280e3;
            line.width_hz = 1.2e6;
        }
        let s = sieve(&l, &[]);
        let one = s.refined(16e6, 50.0, Pattern::All);
        assert!(s.split_common_divisor(&one, ratio, v_min).is_none());
    }

    #[test]
    fn hidden_harmonics_are_not_penalised() {
        let f = [100e3, 200e3, 400e3, 500e3];
        let l = lines(&f);
        let occupied = [(290e3, 310e3)]; // something else covers the 3rd harmonic
        let c = sieve(&l, &occupied).score(100e3, 10.0, Pattern::All);
        assert_eq!(c.misses, 0);
        let c = sieve(&l, &[]).score(100e3, 10.0, Pattern::All);
        assert_eq!(c.misses, 1);
    }
}
