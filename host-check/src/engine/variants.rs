//! The variants' stage: each variant runs cairn-core's own code over a
//! block of recorded steps and gathers its figures against the reference.

use nalgebra::{DMatrix, SVector};

use super::channel::Channel;
use super::filter::UpdateInput;
use super::filter::{Filter, Variant};
use super::stream::Record;
use super::system::System;
use crate::engine::metrics::{self, Failure, Tracker};
use crate::engine::plan::ChannelPlan;

/// How the variants are driven.
#[derive(Debug, Clone, Copy)]
pub struct Drive {
    /// Predicts take the reference's F and Q (covariance mode).
    pub shared_predict: bool,
    /// Updates go through each variant's own model at its own state.
    pub own_updates: bool,
    /// States are compared with the baseline variant's.
    pub compare_states: bool,
    /// Re-centring distance, m.
    pub recentre_m: Option<f64>,
    /// Steps in the run.
    pub steps: u64,
}

/// The shared, read-only context of a block.
pub struct Context<'a, const N: usize, S: System<N>> {
    /// The models.
    pub system: &'a S,
    /// The channels.
    pub channels: &'a [&'a dyn Channel<N>],
    /// Their schedules (names, gates).
    pub schedule: &'a [ChannelPlan],
    /// How to drive.
    pub drive: Drive,
}

/// One variant being run.
pub struct VariantRun<const N: usize> {
    /// Which.
    pub variant: Variant,
    /// The filter (`None` once it stopped).
    pub filter: Option<Filter<N>>,
    /// Its figures.
    pub tracker: Tracker,
    /// Its origin in the scenario's frame (re-centring).
    pub origin: SVector<f64, N>,
    /// Times it moved its origin.
    pub recentres: u64,
    /// Its gate decisions that differ from the reference's.
    pub gate_differences: u64,
    /// The first step of such a difference.
    pub first_gate_difference: Option<u64>,
    /// The largest NEES against a known truth, and how many steps had one.
    pub nees: (f64, u64),
    /// Its states (scenario frame) over the block, NaN once stopped.
    pub states: Vec<SVector<f64, N>>,
    p: DMatrix<f64>,
}

impl<const N: usize> VariantRun<N> {
    /// A variant's run; a filter the core refused to start is recorded as a failure
    /// at step 0.
    #[must_use]
    pub fn new(
        variant: Variant,
        filter: Result<Filter<N>, cairn_core::FilterError>,
        origin: SVector<f64, N>,
        recentres: u64,
    ) -> Self {
        let mut tracker = Tracker::new(N);
        let filter = match filter {
            Ok(f) => Some(f),
            Err(e) => {
                tracker.failure = Some(Failure {
                    step: 0,
                    time_s: 0.0,
                    operation: "start".into(),
                    error: e.to_string(),
                });
                None
            }
        };
        Self {
            variant,
            filter,
            tracker,
            origin,
            recentres,
            gate_differences: 0,
            first_gate_difference: None,
            nees: (0.0, 0),
            states: Vec::new(),
            p: DMatrix::zeros(N, N),
        }
    }

    fn stop(&mut self, k: u64, t: f64, op: &str, err: &str) {
        self.tracker.failure = Some(Failure {
            step: k,
            time_s: t,
            operation: op.to_string(),
            error: err.to_string(),
        });
    }

    fn recentre<S: System<N>>(&mut self, system: &S, distance: f64, k: u64, t: f64) {
        let Some(f) = self.filter.as_mut() else {
            return;
        };
        let x = f.state();
        let pos = system.position_states();
        if !pos.iter().any(|&i| x[i].abs() > distance) {
            return;
        }
        let mut offset = SVector::<f64, N>::zeros();
        for &i in pos {
            offset[i] = x[i].round();
        }
        match f.shift_origin(&offset) {
            Ok(()) => {
                self.origin += offset;
                self.recentres += 1;
            }
            Err(e) => self.stop(k, t, "origin shift", &e.to_string()),
        }
    }

    /// Runs the block.
    pub fn run_block<S: System<N>>(&mut self, cx: &Context<'_, N, S>, block: &[Record<N>]) {
        self.states.clear();
        for rec in block {
            self.step(cx, rec);
        }
    }

    fn step<S: System<N>>(&mut self, cx: &Context<'_, N, S>, rec: &Record<N>) {
        let (k, t) = (rec.k, rec.t);
        if self.filter.is_none() {
            self.states.push(SVector::repeat(f64::NAN));
            return;
        }
        if let Some(d) = cx.drive.recentre_m {
            self.recentre(cx.system, d, k, t);
        }
        let mut updated = false;
        if let Some(f) = self.filter.as_mut() {
            let res = if cx.drive.shared_predict {
                f.predict_shared(&rec.f, &rec.q, rec.sources.as_ref())
            } else {
                f.predict_own(cx.system, &rec.input, rec.dt)
            };
            if let Err(e) = res {
                self.stop(k, t, "predict", &e.to_string());
            }
        }
        for u in &rec.updates {
            if self.tracker.stopped() {
                break;
            }
            let Some(f) = self.filter.as_mut() else {
                break;
            };
            let ch = cx.channels[u.channel];
            let plan = &cx.schedule[u.channel];
            let mut zl;
            let input = if cx.drive.own_updates {
                zl = u.z.clone();
                ch.to_frame(&mut zl, &self.origin);
                UpdateInput::Own { z: &zl }
            } else {
                UpdateInput::Shared {
                    h: &u.h,
                    r: &u.r,
                    innovation: &u.innovation,
                }
            };
            match ch.update(f, input, u.applied, plan.gate) {
                Ok(vu) => {
                    updated |= vu.applied;
                    if vu.applied {
                        self.tracker.updates_applied += 1;
                    } else {
                        self.tracker.updates_gated += 1;
                    }
                    if let Some(own) = vu.own_decision
                        && own != u.applied
                    {
                        self.gate_differences += 1;
                        self.first_gate_difference.get_or_insert(k);
                    }
                    if u.applied {
                        self.tracker.min_innovation_pivot_ratio =
                            self.tracker.min_innovation_pivot_ratio.min(vu.pivot_ratio);
                        if let (Some(g), Some(rg)) = (&vu.gain, &u.gain) {
                            self.tracker.gain(k, g, rg);
                        }
                    }
                }
                Err(e) => {
                    let op = format!("update `{}`", plan.name);
                    self.stop(k, t, &op, &e.to_string());
                }
            }
        }
        // Figures: a refused operation left P as it was; it is measured at
        // the step of the refusal, and the run stops there.
        let Some(f) = self.filter.as_ref() else {
            return;
        };
        let p = f.covariance();
        for j in 0..N {
            for i in 0..N {
                self.p[(i, j)] = p[(i, j)];
            }
        }
        self.tracker
            .covariance(k, rec.bucket, &self.p, &rec.p, rec.p_norm);
        if rec.eig_now || updated && cx.drive.steps <= 5_000 {
            self.tracker.eigen(k, &self.p);
        }
        if updated && !self.tracker.stopped() {
            match self.tracker.last_posterior.as_mut() {
                Some(lp) => lp.copy_from(&self.p),
                None => self.tracker.last_posterior = Some(self.p.clone()),
            }
        }
        if let Some(pe) = &rec.external {
            let e = metrics::relative(&self.p, pe, pe.norm());
            let m = self.tracker.max_external_error.get_or_insert(0.0);
            *m = m.max(e);
        }
        let x = f.state() + self.origin;
        if let Some(truth) = &rec.truth
            && cx.drive.own_updates
            && let Some(e) = f.nees(truth, &self.origin, cx.system.angle_states())
        {
            self.nees.0 = self.nees.0.max(e);
            self.nees.1 += 1;
        }
        self.states.push(x);
        if self.tracker.stopped() {
            self.tracker.eigen(k, &self.p);
            self.filter = None;
        }
    }
}

/// The re-centring rule for a planar position, shared with the trials:
/// once |x| or |y| passes `distance`, the origin moves by x and y rounded to
/// whole metres (exact in f32 and f64, so the shift adds no rounding);
/// `None` while both stay within it (or either is NaN).
#[must_use]
pub fn recentre_offset(x: f64, y: f64, distance: f64) -> Option<[f64; 2]> {
    (x.abs() > distance || y.abs() > distance).then(|| [x.round(), y.round()])
}

/// Compares every run's states over the block with the baseline's.
pub fn compare_states<const N: usize>(
    runs: &mut [VariantRun<N>],
    baseline: usize,
    block: &[Record<N>],
    angles: &[usize],
) {
    let base: Vec<SVector<f64, N>> = runs[baseline].states.clone();
    for run in runs.iter_mut() {
        for (i, rec) in block.iter().enumerate() {
            let (Some(b), Some(x)) = (base.get(i), run.states.get(i)) else {
                continue;
            };
            if b[0].is_nan() || x[0].is_nan() {
                continue;
            }
            run.tracker.states_compared = true;
            let mut step_sigma = 0.0_f64;
            for s in 0..N {
                let mut d = x[s] - b[s];
                if angles.contains(&s) {
                    d = cairn_core::wrap_angle(d);
                }
                let d = d.abs();
                let t = &mut run.tracker;
                if d > t.max_state_difference[s] || d.is_nan() {
                    t.max_state_difference[s] = if d.is_nan() { f64::INFINITY } else { d };
                }
                let sd = rec.sd[s];
                if sd > 0.0 {
                    step_sigma = step_sigma.max(d / sd);
                }
                if d.is_nan() {
                    step_sigma = f64::NAN;
                }
            }
            run.tracker.state_difference(rec.bucket, step_sigma);
        }
    }
}
