//! Time grids on which the detector chain is integrated: fine where the envelope moves fast
//! (filtered pulses, burst edges, a dithered line's pass through the filter), coarse between.

use super::signal::{
    PULSE_CORE_HALF_SPAN, PULSE_HALF_SPAN, Profile, dither_offset, pulses_in_burst,
};
use super::{Band, DetectorError, Gated, ModelSettings, Signal};

/// Envelope samples on a non-uniform grid: `e[i]` at `t0 + h[0] + … + h[i−1]`, t0 the
/// grid's start.
#[derive(Debug, Clone)]
pub(crate) struct Grid {
    /// Step lengths, s.
    pub h: Vec<f64>,
    /// Envelope at the grid points (one more than steps), µV.
    pub e: Vec<f64>,
    /// Whether the grid is one period of a periodic envelope (else: from rest, once).
    pub periodic: bool,
}

/// Most steps a grid may hold (about 60 MB of working arrays); signals needing more (a
/// repetition of hours, a long burst of a dense comb) are refused.
pub(crate) const MAX_GRID_STEPS: usize = 2_000_000;

/// Builds grid times as steps from `t0`.
struct Steps {
    t0: f64,
    t: f64,
    h: Vec<f64>,
    /// Set when the grid would exceed [`MAX_GRID_STEPS`]; the steps are then incomplete.
    over: bool,
}

impl Steps {
    fn new(t0: f64) -> Self {
        Steps {
            t0,
            t: t0,
            h: Vec::new(),
            over: false,
        }
    }

    /// Uniform steps of at most `h_max` up to `to` (nothing if `to` is not ahead).
    fn fill(&mut self, to: f64, h_max: f64) {
        let span = to - self.t;
        if span <= 1e-12 * h_max {
            return;
        }
        let n = (span / h_max).ceil().max(1.0);
        if self.over || self.h.len() as f64 + n > MAX_GRID_STEPS as f64 {
            self.over = true;
            self.t = to;
            return;
        }
        let h = span / n;
        self.h.extend(std::iter::repeat_n(h, n as usize));
        self.t = to;
    }

    /// Steps growing geometrically from `h_start` by `GROWTH` up to `h_max`, ending at `to`.
    fn grow(&mut self, to: f64, h_start: f64, h_max: f64) {
        let mut h = h_start;
        while to - self.t > h_max {
            if to - self.t < 2.0 * h || self.over {
                break;
            }
            self.push(h);
            h = (h * GROWTH).min(h_max);
        }
        self.fill(to, h.max(h_start));
    }

    /// One filtered pulse centred on `c`: coarser tails, a fine core, `c` itself a grid point.
    fn pulse(&mut self, c: f64, b: f64, s: &ModelSettings) {
        let (core, tail) = (PULSE_CORE_HALF_SPAN / b, PULSE_HALF_SPAN / b);
        let h_core = 2.0 * core / s.pulse_core_steps as f64;
        let h_tail = (tail - core) / (s.pulse_core_steps as f64 / 16.0).max(2.0);
        self.fill(c - core, h_tail);
        self.fill(c, h_core);
        self.fill(c + core, h_core);
        self.fill(c + tail, h_tail);
    }

    /// One step of `h` (or the overflow flag).
    fn push(&mut self, h: f64) {
        if self.h.len() >= MAX_GRID_STEPS {
            self.over = true;
        } else {
            self.h.push(h);
        }
        self.t += h;
    }

    fn times(&self) -> Vec<f64> {
        let mut t = self.t0;
        let mut out = Vec::with_capacity(self.h.len() + 1);
        out.push(t);
        for h in &self.h {
            t += h;
            out.push(t);
        }
        out
    }
}

/// Growth factor of the steps after an edge: the step stays under a tenth of the time since
/// the edge, so the charge stage's exponential approach is followed closely.
const GROWTH: f64 = 1.1;

/// Coarse step: a fortieth of the shortest meter or discharge time constant.
///
/// # Source
/// Error bound of the integration (derived): the meters see their input as piecewise linear,
/// whose error on an exponential of time constant τ is `(h/τ)²/8` relative
/// (8·10⁻⁵ at h = τ/40); a maximum sampled at step h and refined from the slopes at both ends
/// is off by less than that. Both are far below 0.01 dB.
pub(crate) fn coarse_step(band: Band, s: &ModelSettings) -> f64 {
    band.qp_meter_s()
        .min(band.average_meter_s())
        .min(band.qp_discharge_s())
        / s.coarse_divisor
}

/// The grid for `signal` (checked) in `band`.
///
/// # Errors
/// [`DetectorError::GridTooLarge`] when it would need more than [`MAX_GRID_STEPS`] steps.
pub(crate) fn build(band: Band, signal: &Signal, s: &ModelSettings) -> Result<Grid, DetectorError> {
    let b = band.impulse_bandwidth_hz();
    let w = PULSE_HALF_SPAN / b;
    let h_c = coarse_step(band, s);
    let h_fine = 2.0 * PULSE_CORE_HALF_SPAN / b / s.pulse_core_steps as f64;
    let (steps, periodic) = match *signal {
        Signal::Cw { .. } => {
            let mut st = Steps::new(0.0);
            st.fill(h_c, h_c);
            (st, true)
        }
        Signal::Impulse { .. } => {
            let mut st = Steps::new(-w);
            st.pulse(0.0, b, s);
            let settle =
                10.0 * (band.qp_meter_s().max(band.average_meter_s()) + band.qp_discharge_s());
            st.grow(w + settle, h_fine, h_c);
            (st, false)
        }
        Signal::PulseTrain { prf_hz, .. } => (train_steps(prf_hz, b, h_fine, h_c, s), true),
        Signal::Burst {
            carrier,
            on_s,
            rate_hz,
        } => (burst_steps(carrier, on_s, rate_hz, b, h_fine, h_c, s), true),
        Signal::Dithered {
            deviation_hz,
            rate_hz,
            profile,
            offset_hz,
            ..
        } => {
            if deviation_hz == 0.0 {
                let mut st = Steps::new(0.0);
                st.fill(h_c, h_c);
                (st, true)
            } else {
                let d = Dither {
                    profile,
                    deviation_hz,
                    rate_hz,
                    offset_hz,
                };
                (dither_steps(&d, b, h_c, s), true)
            }
        }
    };
    if steps.over {
        return Err(DetectorError::GridTooLarge {
            max_steps: MAX_GRID_STEPS,
        });
    }
    let e = steps
        .times()
        .iter()
        .map(|&t| signal.envelope_at(band, t))
        .collect();
    Ok(Grid {
        h: steps.h,
        e,
        periodic,
    })
}

/// One period of a pulse train: the pulse at the period's centre of attention (t = 0) with
/// its fine core and a coarse gap, or a uniform grid where the filtered pulses overlap.
fn train_steps(prf_hz: f64, b: f64, h_fine: f64, h_c: f64, s: &ModelSettings) -> Steps {
    let period = 1.0 / prf_hz;
    let w = PULSE_HALF_SPAN / b;
    if period >= 2.0 * w {
        let mut st = Steps::new(-w);
        st.pulse(0.0, b, s);
        st.grow(period - w, h_fine * 4.0, h_c);
        st
    } else {
        // overlapping pulses: uniform, with t = 0 (a pulse centre) and the period end on it
        let n = (period / (2.0 * h_fine)).ceil().max(32.0);
        let mut st = Steps::new(0.0);
        st.fill(period, period / n);
        st
    }
}

/// One period of a burst, from `−w` (before the first edge) to `period − w`.
fn burst_steps(
    carrier: Gated,
    on_s: f64,
    rate_hz: f64,
    b: f64,
    h_fine: f64,
    h_c: f64,
    s: &ModelSettings,
) -> Steps {
    let period = 1.0 / rate_hz;
    let w = PULSE_HALF_SPAN / b;
    let mut st = Steps::new(-w);
    match carrier {
        Gated::Cw { .. } => {
            // fine around the rising edge (±w about 0) and the falling edge (±w about on_s),
            // merged when they overlap and clipped to the period (the next rise is this one)
            let end = period - w;
            st.fill(w.min(end), h_fine);
            let fall_lo = (on_s - w).max(st.t);
            let fall_hi = (on_s + w).min(end);
            if fall_lo > st.t {
                st.grow(fall_lo, h_fine, h_c);
            }
            st.fill(fall_hi, h_fine);
        }
        Gated::Pulses { prf_hz, .. } => {
            let n = pulses_in_burst(prf_hz, on_s);
            let spacing = 1.0 / prf_hz;
            if spacing >= 2.0 * w {
                for k in 0..n {
                    let c = k as f64 * spacing;
                    st.fill(c - w, h_c);
                    st.pulse(c, b, s);
                    if st.over {
                        return st;
                    }
                }
            } else {
                let last = (n - 1) as f64 * spacing;
                let h = (2.0 * h_fine).min(spacing / 16.0);
                // uniform through the pulses, each centre k·spacing on the grid
                for k in 0..n {
                    st.fill(k as f64 * spacing, h);
                    if st.over {
                        return st;
                    }
                }
                st.fill(last + w, h);
            }
        }
    }
    st.grow(period - w, h_fine * 4.0, h_c);
    st
}

/// A dithered line's parameters (deviation peak to peak, Hz; rate Hz; centre offset Hz).
struct Dither {
    profile: Profile,
    deviation_hz: f64,
    rate_hz: f64,
    offset_hz: f64,
}

impl Dither {
    /// Fastest sweep rate over the period, Hz/s.
    fn max_rate(&self) -> f64 {
        match self.profile {
            Profile::Triangular => 2.0 * self.deviation_hz * self.rate_hz,
            Profile::Sinusoidal => std::f64::consts::PI * self.deviation_hz * self.rate_hz,
        }
    }

    /// Largest second derivative of the line's frequency away from the breakpoints, Hz/s².
    fn max_curvature(&self) -> f64 {
        match self.profile {
            Profile::Triangular => 0.0,
            Profile::Sinusoidal => {
                let w = 2.0 * std::f64::consts::PI * self.rate_hz;
                0.5 * self.deviation_hz * w * w
            }
        }
    }

    /// Phases (in periods, within [0, 1]) the grid must hold: turning points and the passes
    /// through the tuned frequency, where the envelope has its maxima.
    fn breakpoints(&self) -> Vec<f64> {
        let half = 0.5 * self.deviation_hz;
        let mut out = vec![0.0, 1.0];
        let r = -self.offset_hz / half; // p(φ) that puts the line on the tuning
        match self.profile {
            Profile::Triangular => {
                out.push(0.5);
                if r.abs() <= 1.0 {
                    out.push((r + 1.0) / 4.0);
                    out.push((3.0 - r) / 4.0);
                }
            }
            Profile::Sinusoidal => {
                out.extend([0.25, 0.75]);
                if r.abs() <= 1.0 {
                    let a = r.asin() / (2.0 * std::f64::consts::PI);
                    out.push(a.rem_euclid(1.0));
                    out.push((0.5 - a).rem_euclid(1.0));
                }
            }
        }
        out.sort_by(f64::total_cmp);
        out.dedup_by(|a, b| (*a - *b).abs() < 1e-12);
        out
    }
}

/// One modulation period of a dithered line. Inside the zone where the line is within
/// `4·B_eff` of the tuning (`B_eff = B_imp·√(1 + κ²)`) a step moves the line by at most
/// `B_eff/n` (n = `sweep_steps_per_bimp`); outside it, a step cannot bring the line into
/// the zone, and is never longer than the coarse step.
fn dither_steps(d: &Dither, b: f64, h_c: f64, s: &ModelSettings) -> Steps {
    let period = 1.0 / d.rate_hz;
    let max_rate = d.max_rate();
    let kappa_max = max_rate / (b * b);
    let zone = 4.0 * b * (1.0 + kappa_max * kappa_max).sqrt();
    let h_cap = h_c.min(period / 16.0);
    let marks: Vec<f64> = d.breakpoints().iter().map(|p| p * period).collect();
    let mut st = Steps::new(0.0);
    for pair in marks.windows(2) {
        let end = pair[1];
        while end - st.t > 1e-12 * period {
            let (df, rate) = dither_offset(
                d.profile,
                d.deviation_hz,
                d.rate_hz,
                d.offset_hz,
                st.t * d.rate_hz,
            );
            let kappa = rate / (b * b);
            let b_eff = b * (1.0 + kappa * kappa).sqrt();
            let df_step = b_eff / s.sweep_steps_per_bimp;
            let by_rate = df_step / rate.abs().max(1e-300);
            let by_curve = (2.0 * df_step / d.max_curvature().max(1e-300)).sqrt();
            let h_in = by_rate.min(by_curve);
            let h = if df.abs() <= zone {
                h_in
            } else {
                ((df.abs() - zone) / max_rate).max(h_in.min(h_cap))
            }
            .min(h_cap);
            let left = end - st.t;
            // land on the breakpoint rather than leave a sliver before it (halving the rest:
            // a longer step than h could enter the zone unresolved)
            let h = if left <= h {
                left
            } else if left < 1.5 * h {
                0.5 * left
            } else {
                h
            };
            st.push(h);
            if st.over {
                return st;
            }
        }
        st.t = end;
    }
    st
}
