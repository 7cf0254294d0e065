//! Monte Carlo consistency runs: each variant runs its own filter on a
//! seeded simulated truth (the engine's one world) and records NEES after
//! every step and NIS of every measurement, for the chi-square tests.

use cairn_core::{FilterError, Linearized, ProcessModel, Scalar};
use nalgebra::{SMatrix, SVector};

use super::channel::Channel;
use super::filter::UpdateInput;
use super::filter::{Filter, Variant};
use super::system::System;
use super::world::{InputProfile, Source, StepInput, World, WorldError};
use crate::engine::plan::Plan;

/// What one variant did over one run.
#[derive(Debug, Clone)]
pub struct Trace {
    /// NEES after each step (index k - 1); NaN after a failure.
    pub nees: Vec<f64>,
    /// NIS of each measurement, per channel, in order (stops at a failure).
    pub nis: Vec<Vec<f64>>,
    /// The step and the core's error, when the filter refused to go on.
    pub failure: Option<(usize, FilterError)>,
    /// Times the filter moved its origin (a start beyond the distance
    /// counts once).
    pub recentres: u64,
}

/// A process model whose noise is scaled by a factor (the noise the
/// filters are told, against the truth's).
#[derive(Debug, Clone, Copy)]
pub struct ScaledProcess<T, P> {
    inner: P,
    scale: T,
}

impl<T: Scalar, const N: usize, P: ProcessModel<T, N>> ProcessModel<T, N> for ScaledProcess<T, P> {
    type Input = P::Input;

    fn transition(&self, x: &SVector<T, N>, u: &P::Input, dt: T) -> SVector<T, N> {
        self.inner.transition(x, u, dt)
    }

    fn jacobian(&self, x: &SVector<T, N>, u: &P::Input, dt: T) -> SMatrix<T, N, N> {
        self.inner.jacobian(x, u, dt)
    }

    fn noise(&self, x: &SVector<T, N>, u: &P::Input, dt: T) -> SMatrix<T, N, N> {
        self.inner.noise(x, u, dt) * self.scale
    }

    fn noise_sources(
        &self,
        x: &SVector<T, N>,
        u: &P::Input,
        dt: T,
    ) -> Option<(SMatrix<T, N, N>, SVector<T, N>)> {
        self.inner
            .noise_sources(x, u, dt)
            .map(|(g, q)| (g, q * self.scale))
    }

    fn linearize(&self, x: &SVector<T, N>, u: &P::Input, dt: T) -> Linearized<T, N> {
        let mut l = self.inner.linearize(x, u, dt);
        l.noise *= self.scale;
        if let Some((_, q)) = l.sources.as_mut() {
            *q *= self.scale;
        }
        l
    }

    fn normalize(&self, x: &mut SVector<T, N>) {
        self.inner.normalize(x);
    }
}

/// A system whose process noise is scaled by `scale`.
pub struct Scaled<'a, S> {
    /// The system.
    pub inner: &'a S,
    /// The factor.
    pub scale: f64,
}

impl<const N: usize, S: System<N>> System<N> for Scaled<'_, S> {
    type Process<T: Scalar> = ScaledProcess<T, S::Process<T>>;

    fn process<T: Scalar>(&self) -> Self::Process<T> {
        ScaledProcess {
            inner: self.inner.process::<T>(),
            scale: T::of(self.scale),
        }
    }

    fn input_len(&self) -> usize {
        self.inner.input_len()
    }

    fn input<T: Scalar>(&self, values: &[f64]) -> <S::Process<T> as ProcessModel<T, N>>::Input {
        self.inner.input::<T>(values)
    }

    fn angle_states(&self) -> &[usize] {
        self.inner.angle_states()
    }

    fn position_states(&self) -> &[usize] {
        self.inner.position_states()
    }

    fn is_linear(&self) -> bool {
        self.inner.is_linear()
    }
}

/// The seed of run `index`: a SplitMix64 scramble of the study seed and the
/// index, so each run's noise depends on nothing but those two numbers.
#[must_use]
pub fn run_seed(seed: u64, index: usize) -> u64 {
    let mut z = seed ^ (index as u64 + 1).wrapping_mul(0x9E37_79B9_7F4A_7C15);
    z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
    z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
    z ^ (z >> 31)
}

struct Running<const N: usize> {
    filter: Option<Filter<N>>,
    origin: SVector<f64, N>,
    trace: Trace,
}

/// One Monte Carlo run: every variant on the truth of run `index`, the
/// filters told the process noise times `q_scale`.
///
/// # Errors
/// A model that returns non-finite values while the truth is simulated.
#[allow(clippy::too_many_arguments)]
pub fn run_trial<const N: usize, S: System<N>>(
    plan: &Plan,
    system: &S,
    channels: &[&dyn Channel<N>],
    inputs: &dyn InputProfile,
    variants: &[Variant],
    steps: usize,
    q_scale: f64,
    index: usize,
) -> Result<Vec<Trace>, String> {
    let x0 = SVector::<f64, N>::from_column_slice(&plan.x0);
    let p0 = SMatrix::<f64, N, N>::from_fn(|i, j| plan.p0[(i, j)]);
    let told = Scaled {
        inner: system,
        scale: q_scale,
    };
    let source = Source::Simulated { inputs };
    let mut world = World::new(
        system,
        channels,
        &plan.channels,
        &source,
        &x0,
        &p0,
        run_seed(plan.seed, index),
        plan.step_hz,
        steps as u64,
    )
    .map_err(|e| match e {
        WorldError::Log(l) => l.to_string(),
        WorldError::Model(m) => m,
    })?;
    let pos = system.position_states();
    let recentre = plan
        .recentre_m
        .filter(|_| !pos.is_empty() && !system.is_linear());
    let mut start_origin = SVector::<f64, N>::zeros();
    let mut start_recentres = 0;
    if let Some(d) = recentre
        && pos.iter().any(|&i| x0[i].abs() > d)
    {
        for &i in pos {
            start_origin[i] = x0[i].round();
        }
        start_recentres = 1;
    }
    let mut runs: Vec<Running<N>> = variants
        .iter()
        .map(|&v| {
            let mut trace = Trace {
                nees: vec![f64::NAN; steps],
                nis: vec![Vec::new(); channels.len()],
                failure: None,
                recentres: start_recentres,
            };
            let filter = match Filter::start(v, &(x0 - start_origin), &p0) {
                Ok(f) => Some(f),
                Err(e) => {
                    trace.failure = Some((0, e));
                    None
                }
            };
            Running {
                filter,
                origin: start_origin,
                trace,
            }
        })
        .collect();
    let angles = system.angle_states();
    let mut step = StepInput {
        t: 0.0,
        dt: 0.0,
        input: Vec::new(),
        measurements: Vec::new(),
        truth: None,
    };
    let mut k = 0;
    while world.next(&mut step).map_err(|e| match e {
        WorldError::Log(l) => l.to_string(),
        WorldError::Model(m) => m,
    })? {
        k += 1;
        let Some(truth) = step.truth else {
            break;
        };
        for run in &mut runs {
            let Some(f) = run.filter.as_mut() else {
                continue;
            };
            let failed = (|| -> Result<(), FilterError> {
                if let Some(d) = recentre {
                    let x = f.state();
                    if pos.iter().any(|&i| x[i].abs() > d) {
                        let mut offset = SVector::<f64, N>::zeros();
                        for &i in pos {
                            offset[i] = x[i].round();
                        }
                        f.shift_origin(&offset)?;
                        run.origin += offset;
                        run.trace.recentres += 1;
                    }
                }
                f.predict_own(&told, &step.input, step.dt)?;
                for (c, z) in &step.measurements {
                    let ch = channels[*c];
                    let mut zl = z.clone();
                    ch.to_frame(&mut zl, &run.origin);
                    let gate = plan.channels[*c].gate;
                    // The filter's own gate decides, as in firmware.
                    let apply = match gate {
                        Some(_) => ch
                            .update(f, UpdateInput::Own { z: &zl }, false, gate)?
                            .own_decision
                            .unwrap_or(true),
                        None => true,
                    };
                    let vu = ch.update(f, UpdateInput::Own { z: &zl }, apply, gate)?;
                    run.trace.nis[*c].push(vu.nis);
                }
                Ok(())
            })();
            match failed {
                Ok(()) => {
                    run.trace.nees[k - 1] =
                        f.nees(&truth, &run.origin, angles).unwrap_or(f64::INFINITY);
                }
                Err(e) => {
                    run.trace.failure = Some((k, e));
                    run.filter = None;
                }
            }
        }
    }
    Ok(runs.into_iter().map(|l| l.trace).collect())
}
