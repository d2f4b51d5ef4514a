//! A harmonic sieve: candidate fundamentals from the strongest lines (each line's frequency
//! over small integers, and spacings between neighbouring lines), each scored by the lines that
//! fall on its harmonics minus a penalty for harmonics that are expected but clearly absent.
//!
//! Scoring costs O(lines + harmonic slots) per candidate, never a loop over the trace's points.

use super::refine::{Member, fit_fundamental};

/// A line offered to the sieve.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Line {
    pub freq_hz: f64,
    /// Standard uncertainty of the line's frequency (Hz).
    pub sigma_hz: f64,
    /// Evidence weight of a hit on this line, 1 to 2 (stronger lines weigh more).
    pub weight: f64,
}

/// Which harmonics a candidate predicts.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Pattern {
    /// Every harmonic.
    All,
    /// Odd harmonics only (a 50 % duty square wave has no even harmonics).
    OddOnly,
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
}

impl Default for SieveParams {
    fn default() -> Self {
        SieveParams { seeds: 40, max_divisor: 40, miss_penalty: 0.6, tolerance_sigmas: 3.0, max_gap: 3 }
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
        seeds.sort_by(|&a, &b| self.lines[b].weight.total_cmp(&self.lines[a].weight));
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
        for (k, &a) in seeds.iter().enumerate() {
            for &b in seeds.iter().skip(k + 1).take(3) {
                let (la, lb) = (self.lines[a], self.lines[b]);
                let d = lb.freq_hz - la.freq_hz;
                if d >= self.min_fundamental_hz {
                    out.push((d, la.sigma_hz.hypot(lb.sigma_hz)));
                }
            }
        }
        out.sort_by(|a, b| a.0.total_cmp(&b.0));
        out.dedup_by(|a, b| (a.0 - b.0).abs() <= 1e-6 * b.0);
        out
    }

    /// Scores a fundamental with the given uncertainty and pattern.
    pub fn score(&self, f0: f64, sigma_f0: f64, pattern: Pattern) -> Candidate {
        let mut best: Vec<(u32, usize, f64)> = Vec::new(); // (n, line, normalised residual)
        for (i, l) in self.lines.iter().enumerate() {
            if !self.free[i] {
                continue;
            }
            let n = (l.freq_hz / f0).round();
            if n < 1.0 || (pattern == Pattern::OddOnly && n % 2.0 == 0.0) {
                continue;
            }
            // a hit must name its harmonic without doubt: never wider than a tenth of f0
            let tol = (self.params.tolerance_sigmas * l.sigma_hz.hypot(n * sigma_f0)).min(0.1 * f0);
            let r = (l.freq_hz - n * f0).abs() / tol;
            if r <= 1.0 {
                best.push((n as u32, i, r));
            }
        }
        // one line per harmonic: the closest
        best.sort_by(|a, b| a.0.cmp(&b.0).then(a.2.total_cmp(&b.2)));
        best.dedup_by_key(|h| h.0);
        let hits: Vec<(usize, u32)> = best.iter().map(|&(n, i, _)| (i, n)).collect();
        let (hits, misses) = self.alive_run(f0, pattern, &hits);
        let gain: f64 = hits.iter().map(|&(i, _)| self.lines[i].weight).sum();
        let value = gain - self.params.miss_penalty * misses as f64;
        Candidate { fundamental_hz: f0, sigma_hz: sigma_f0, pattern, hits, misses, value }
    }

    /// The run of harmonic slots where the family is alive: slots from the first to the last
    /// hit are split wherever more than `max_gap` harmonics in a row are clearly absent (the
    /// envelope has sunk into the floor; a sinc null leaves a gap of one or two); the run with
    /// the best value wins. Returns its hits and its misses (clearly absent harmonics; a slot
    /// where the trace shows something else is neither hit nor miss).
    fn alive_run(&self, f0: f64, pattern: Pattern, hits: &[(usize, u32)]) -> (Vec<(usize, u32)>, usize) {
        let (Some(first), Some(last)) = (hits.first(), hits.last()) else { return (Vec::new(), 0) };
        let step = if pattern == Pattern::OddOnly { 2 } else { 1 };
        let lambda = self.params.miss_penalty;
        // (first hit index, last hit index, misses, value) of each run
        let mut runs: Vec<(usize, usize, usize, f64)> = Vec::new();
        let mut cur: Option<(usize, usize, usize, f64)> = None;
        let (mut k, mut gap) = (0usize, 0usize);
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
            } else if !self.is_occupied(f64::from(n) * f0) {
                gap += 1;
                if gap > self.params.max_gap {
                    runs.extend(cur.take());
                }
            }
            n += step;
        }
        runs.extend(cur);
        let Some(best) = runs.into_iter().max_by(|a, b| a.3.total_cmp(&b.3)) else { return (Vec::new(), 0) };
        (hits[best.0..=best.1].to_vec(), best.2)
    }

    fn is_occupied(&self, freq_hz: f64) -> bool {
        let k = self.occupied.partition_point(|iv| iv.0 <= freq_hz);
        k > 0 && freq_hz <= self.occupied[k - 1].1
    }

    /// A candidate scored, refined by weighted least squares on its hits and scored again,
    /// twice: a fundamental taken from one line is rough, and its far harmonics only fall into
    /// place once the near ones have fixed it.
    pub fn refined(&self, f0: f64, sigma_f0: f64, pattern: Pattern) -> Candidate {
        let mut c = self.score(f0, sigma_f0, pattern);
        for _ in 0..2 {
            let members: Vec<Member> = c
                .hits
                .iter()
                .map(|&(i, n)| Member { n, freq_hz: self.lines[i].freq_hz, sigma_hz: self.lines[i].sigma_hz })
                .collect();
            let Some((f, s)) = fit_fundamental(&members) else { break };
            let next = self.score(f, s, c.pattern);
            if next.value < c.value - 1e-9 {
                break;
            }
            c = next;
        }
        c
    }

    /// The best refined candidate among all.
    pub fn best(&self) -> Option<Candidate> {
        let mut best: Option<Candidate> = None;
        for (f0, s) in self.candidates() {
            for pattern in [Pattern::All, Pattern::OddOnly] {
                let c = self.refined(f0, s, pattern);
                if best.as_ref().is_none_or(|b| better(&c, b)) {
                    best = Some(c);
                }
            }
        }
        best
    }
}

/// Higher value wins; on a tie, every-harmonic beats odd-only and the higher fundamental wins
/// (fewer predicted harmonics: guards against sub-multiples).
fn better(a: &Candidate, b: &Candidate) -> bool {
    const EPS: f64 = 1e-9;
    if (a.value - b.value).abs() > EPS {
        return a.value > b.value;
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
        freqs.iter().map(|&f| Line { freq_hz: f, sigma_hz: 300.0, weight: 1.5 }).collect()
    }

    fn sieve<'a>(l: &'a [Line], occupied: &'a [(f64, f64)]) -> Sieve<'a> {
        Sieve { lines: l, free: vec![true; l.len()], min_fundamental_hz: 15e3, occupied, params: SieveParams::default() }
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
    fn finds_a_fundamental_below_the_scan_start() {
        // a 65 kHz converter seen from its 3rd harmonic (195 kHz) upwards
        let f: Vec<f64> = (3..=20).map(|n| 65_012.0 * f64::from(n)).collect();
        let l = lines(&f);
        let c = sieve(&l, &[]).best().unwrap();
        assert!((c.fundamental_hz - 65_012.0).abs() < 30.0, "{}", c.fundamental_hz);
        assert_eq!(c.hits.first().map(|h| h.1), Some(3));
        assert_eq!(c.misses, 0);
    }

    #[test]
    fn no_octave_or_sub_multiple_error() {
        let f: Vec<f64> = (1..=12).map(|n| 400e3 * f64::from(n)).collect();
        let l = lines(&f);
        let s = sieve(&l, &[]);
        let c = s.best().unwrap();
        assert!((c.fundamental_hz / 400e3 - 1.0).abs() < 1e-4, "{}", c.fundamental_hz);
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
