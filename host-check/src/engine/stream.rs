//! The reference stage: steps the world and the double-double reference,
//! and records, block by block, everything the variants need for the same
//! steps (the shared linearisation, the measurements, the reference's
//! decisions and covariance).

use cairn_core::ProcessModel;
use nalgebra::{DMatrix, DVector, SMatrix, SVector};

use super::channel::Channel;
use super::jacobian::JacobianCheck;
use super::result::RunError;
use super::system::System;
use super::world::{StepInput, World, WorldError};
use crate::engine::external::ExternalStream;
use crate::engine::metrics::{self, BUCKETS};
use crate::engine::plan::ChannelPlan;
use crate::numeric::ReferenceFilter;

/// One measurement as the reference handled it.
#[derive(Debug, Clone)]
pub struct UpdateRecord {
    /// Channel index.
    pub channel: usize,
    /// The measurement.
    pub z: Vec<f64>,
    /// H at the reference's prior state.
    pub h: DMatrix<f64>,
    /// R at the reference's prior state.
    pub r: DMatrix<f64>,
    /// The reference's innovation.
    pub innovation: Vec<f64>,
    /// `true` when the reference applied it (it passed the gate, computed
    /// on the double-double S).
    pub applied: bool,
    /// The reference gain, when applied.
    pub gain: Option<DMatrix<f64>>,
}

/// One step as the reference saw it.
#[derive(Debug, Clone)]
pub struct Record<const N: usize> {
    /// Step, 1-based.
    pub k: u64,
    /// Time at the end of the step, s.
    pub t: f64,
    /// Step length, s.
    pub dt: f64,
    /// Plot bucket.
    pub bucket: usize,
    /// The input row.
    pub input: Vec<f64>,
    /// The Jacobian of f at the reference's prior state.
    pub f: SMatrix<f64, N, N>,
    /// Q there.
    pub q: SMatrix<f64, N, N>,
    /// Q's sources there, when the model gives them.
    pub sources: Option<(SMatrix<f64, N, N>, SVector<f64, N>)>,
    /// The step's measurements.
    pub updates: Vec<UpdateRecord>,
    /// The reference covariance after the step.
    pub p: DMatrix<f64>,
    /// Its Frobenius norm.
    pub p_norm: f64,
    /// Its standard deviations.
    pub sd: SVector<f64, N>,
    /// `true` at the steps where eigenvalues are computed.
    pub eig_now: bool,
    /// The external reference's covariance at this step, if it has one.
    pub external: Option<DMatrix<f64>>,
    /// The true state, when known.
    pub truth: Option<SVector<f64, N>>,
}

/// What the reference stage found over the run.
#[derive(Debug, Clone, Default)]
pub struct ReferenceFigures {
    /// Largest cond(S).
    pub max_cond: f64,
    /// Smallest eigenvalue at the plot points.
    pub min_eig: f64,
    /// Updates applied.
    pub updates: u64,
    /// Updates gated out by the reference.
    pub gated: u64,
    /// The last posterior.
    pub last_posterior: Option<DMatrix<f64>>,
    /// Largest |x_i| reached by the reference state (and the truth when
    /// simulated), per state.
    pub reach: Vec<f64>,
    /// External rows compared.
    pub external_rows: u64,
    /// Largest relative difference from the external reference.
    pub external_max: f64,
    /// End time of each plot bucket, s.
    pub bucket_end: Vec<f64>,
}

/// The reference stage.
pub struct ReferenceStage<'a, const N: usize, S: System<N>> {
    world: World<'a, N, S>,
    system: &'a S,
    process: S::Process<f64>,
    channels: &'a [&'a dyn Channel<N>],
    schedule: &'a [ChannelPlan],
    reference: ReferenceFilter,
    x: SVector<f64, N>,
    external: Option<ExternalStream>,
    jacobians: JacobianCheck,
    steps: u64,
    eig_every: u64,
    done: u64,
    step: StepInput<N>,
    /// Figures so far.
    pub figures: ReferenceFigures,
}

fn located(e: WorldError) -> RunError {
    match e {
        WorldError::Log(l) => RunError(l.to_string()),
        WorldError::Model(m) => RunError(m),
    }
}

impl<'a, const N: usize, S: System<N>> ReferenceStage<'a, N, S> {
    /// A stage over `world`.
    #[allow(clippy::too_many_arguments)]
    pub fn new(
        world: World<'a, N, S>,
        system: &'a S,
        channels: &'a [&'a dyn Channel<N>],
        schedule: &'a [ChannelPlan],
        x0: &SVector<f64, N>,
        p0: &SMatrix<f64, N, N>,
        external: Option<ExternalStream>,
        jacobians: JacobianCheck,
        steps: u64,
    ) -> Result<Self, RunError> {
        let reference = ReferenceFilter::try_new(
            &DVector::from_column_slice(x0.as_slice()),
            &DMatrix::from_fn(N, N, |i, j| p0[(i, j)]),
        )
        .map_err(|e| RunError(format!("the reference refused the initial state: {e}")))?;
        Ok(Self {
            world,
            system,
            process: system.process::<f64>(),
            channels,
            schedule,
            reference,
            x: *x0,
            external,
            jacobians,
            steps,
            eig_every: (steps / BUCKETS as u64).max(1),
            done: 0,
            step: StepInput {
                t: 0.0,
                dt: 0.0,
                input: Vec::new(),
                measurements: Vec::new(),
                truth: None,
            },
            figures: ReferenceFigures {
                max_cond: 0.0,
                min_eig: f64::INFINITY,
                reach: x0.iter().map(|v| v.abs()).collect(),
                bucket_end: vec![f64::NAN; BUCKETS],
                ..ReferenceFigures::default()
            },
        })
    }

    /// The Jacobian comparison so far.
    #[must_use]
    pub fn into_jacobians(self) -> (JacobianCheck, ReferenceFigures, ReferenceFilter) {
        (self.jacobians, self.figures, self.reference)
    }

    /// Records up to `len` further steps into `out` (cleared first); fewer
    /// at the end of the run.
    ///
    /// # Errors
    /// A bad log row, a model returning non-finite values, or a reference
    /// that refuses the schedule.
    pub fn advance(&mut self, out: &mut Vec<Record<N>>, len: usize) -> Result<(), RunError> {
        out.clear();
        for _ in 0..len {
            if !self.world.next(&mut self.step).map_err(located)? {
                break;
            }
            let k = out
                .last()
                .map_or(self.k_done() + 1, |r: &Record<N>| r.k + 1);
            let rec = self.one(k)?;
            out.push(rec);
        }
        if let Some(r) = out.last() {
            self.done = r.k;
        }
        Ok(())
    }

    fn k_done(&self) -> u64 {
        self.done
    }

    fn one(&mut self, k: u64) -> Result<Record<N>, RunError> {
        let st = &self.step;
        let (t, dt) = (st.t, st.dt);
        let u = self.system.input::<f64>(&st.input);
        self.jacobians
            .process(k, self.system, &self.process, &self.x, &st.input, dt);
        let lin = self.process.linearize(&self.x, &u, dt);
        let bad = |what: &str| {
            RunError(format!(
                "the process model's {what} returned NaN or infinity at step {k} (t = {t} s) at the reference state"
            ))
        };
        if !lin.next.iter().all(|v| v.is_finite()) {
            return Err(bad("transition"));
        }
        if !lin.jacobian.iter().all(|v| v.is_finite()) {
            return Err(bad("jacobian"));
        }
        if !lin.noise.iter().all(|v| v.is_finite()) {
            return Err(bad("noise"));
        }
        let fd = DMatrix::from_fn(N, N, |i, j| lin.jacobian[(i, j)]);
        let qd = DMatrix::from_fn(N, N, |i, j| lin.noise[(i, j)]);
        self.reference.try_predict(&fd, &qd).map_err(|e| {
            RunError(format!(
                "the reference refused the predict at step {k} (t = {t} s): {e}"
            ))
        })?;
        let mut next = lin.next;
        self.process.normalize(&mut next);
        self.x = next;
        self.reference
            .set_state(&DVector::from_column_slice(self.x.as_slice()));

        let mut updates = Vec::with_capacity(st.measurements.len());
        for (c, z) in &st.measurements {
            let (c, ch) = (*c, self.channels[*c]);
            let plan = &self.schedule[c];
            self.jacobians.channel(k, c, ch, &self.x);
            let ev = ch.evaluate(&self.x);
            if !(ev.predicted.iter().all(|v| v.is_finite())
                && ev.jacobian.iter().all(|v| v.is_finite())
                && ev.noise.iter().all(|v| v.is_finite()))
            {
                return Err(RunError(format!(
                    "channel `{}`: the measurement model returned NaN or infinity at step {k} (t = {t} s) at the reference state",
                    plan.name
                )));
            }
            let nu = ch.residual(z, &ev.predicted);
            let s = self
                .reference
                .innovation_covariance(&ev.jacobian, &ev.noise)
                .map_err(|e| RunError(format!("channel `{}` at step {k}: {e}", plan.name)))?;
            let cond = match metrics::eigen_range(&s) {
                Some((lo, hi)) if lo > 0.0 => hi / lo,
                _ => f64::INFINITY,
            };
            self.figures.max_cond = self.figures.max_cond.max(cond);
            let applied = match plan.gate {
                None => true,
                Some(g) => {
                    let nis = s.clone().cholesky().map(|c| {
                        let y = c
                            .l()
                            .solve_lower_triangular(&DVector::from_column_slice(&nu));
                        y.map_or(f64::INFINITY, |y| y.norm_squared())
                    });
                    nis.is_some_and(|nis| nis <= g)
                }
            };
            let gain = if applied {
                let ru = self
                    .reference
                    .update(&ev.jacobian, &ev.noise, &DVector::from_column_slice(&nu))
                    .map_err(|e| {
                        RunError(format!(
                            "the extended-precision reference refused the update of channel `{}` at step {k} (t = {t} s): {e}; the scenario's R or H is inconsistent",
                            plan.name
                        ))
                    })?;
                let xs = self.reference.state();
                self.x = SVector::from_fn(|i, _| xs[i]);
                ch.normalize(&mut self.x);
                self.reference
                    .set_state(&DVector::from_column_slice(self.x.as_slice()));
                self.figures.updates += 1;
                Some(ru.gain)
            } else {
                self.figures.gated += 1;
                None
            };
            updates.push(UpdateRecord {
                channel: c,
                z: z.clone(),
                h: ev.jacobian,
                r: ev.noise,
                innovation: nu,
                applied,
                gain,
            });
        }
        for i in 0..N {
            let a = self.x[i].abs();
            let b = st.truth.map_or(0.0, |x| x[i].abs());
            let m = &mut self.figures.reach[i];
            *m = m.max(a).max(b);
        }

        let p = self.reference.covariance();
        let p_norm = p.norm();
        let eig_now = k.is_multiple_of(self.eig_every) || k == self.steps || self.steps <= 5_000;
        if eig_now {
            // In double-double, from the reference's own covariance.
            let m = self.reference.smallest_eigenvalue();
            if !m.is_nan() {
                self.figures.min_eig = self.figures.min_eig.min(m);
            }
        }
        let external = match self.external.as_mut() {
            Some(e) => e.at(k).map_err(RunError)?,
            None => None,
        };
        if let Some(pe) = &external {
            self.figures.external_rows += 1;
            self.figures.external_max =
                self.figures
                    .external_max
                    .max(metrics::relative(&p, pe, pe.norm()));
        }
        if updates.iter().any(|u| u.applied) {
            self.figures.last_posterior = Some(p.clone());
        }
        let bucket = bucket_of(k, self.steps);
        self.figures.bucket_end[bucket] = t;
        let sd = SVector::from_fn(|i, _| p[(i, i)].max(0.0).sqrt());
        Ok(Record {
            k,
            t,
            dt,
            bucket,
            input: st.input.clone(),
            f: lin.jacobian,
            q: lin.noise,
            sources: lin.sources,
            updates,
            p,
            p_norm,
            sd,
            eig_now,
            external,
            truth: st.truth,
        })
    }
}

/// The plot bucket of step `k` (1-based) of `steps`.
#[must_use]
pub fn bucket_of(k: u64, steps: u64) -> usize {
    ((((k - 1) as u128) * BUCKETS as u128) / steps.max(1) as u128).min(BUCKETS as u128 - 1) as usize
}
