//! What the filters see, step by step: a seeded truth simulated in f64 from
//! the models' own noise, or the rows of a recorded log.

use cairn_core::ProcessModel;
use nalgebra::{DMatrix, SMatrix, SVector};

use super::channel::Channel;
use super::log::{Layout, LogError, LogReader, Row};
use super::system::System;
use crate::engine::plan::ChannelPlan;
use crate::engine::synth::Noise;

/// The true input against time, for a simulated run.
pub trait InputProfile: Sync {
    /// Writes the true input at time `t` (s) into `out`.
    fn at(&self, t: f64, out: &mut [f64]);
}

impl<F: Fn(f64, &mut [f64]) + Sync> InputProfile for F {
    fn at(&self, t: f64, out: &mut [f64]) {
        self(t, out);
    }
}

/// Where a check's inputs and measurements come from.
pub enum Source<'a> {
    /// A truth simulated in f64: x(k+1) = f(x, u, dt) + w with w drawn from
    /// the model's own Q (its noise sources when it gives them), z = h(x) + v
    /// with v from the channel's own R; the filters get the true input.
    Simulated {
        /// The true input.
        inputs: &'a dyn InputProfile,
    },
    /// A recorded log: each input row is one step.
    Log {
        /// The log file.
        path: std::path::PathBuf,
    },
}

/// One step's worth of what the filters see.
#[derive(Debug, Clone)]
pub struct StepInput<const N: usize> {
    /// Time at the end of the step, s.
    pub t: f64,
    /// Step length, s.
    pub dt: f64,
    /// The input row the filters get.
    pub input: Vec<f64>,
    /// Measurements due after this step's predict: (channel, z).
    pub measurements: Vec<(usize, Vec<f64>)>,
    /// The true state after the step, when known.
    pub truth: Option<SVector<f64, N>>,
}

/// A square-root factor L (L L' = C) of a symmetric positive semidefinite
/// matrix, by an LDL' without pivoting that drops pivots at rounding level
/// (allocation-free; the semidefinite noise of fewer sources than states).
pub fn psd_factor<const N: usize>(c: &SMatrix<f64, N, N>) -> SMatrix<f64, N, N> {
    let scale = (0..N).map(|i| c[(i, i)].abs()).fold(0.0_f64, f64::max);
    let tol = 64.0 * f64::EPSILON * scale;
    let mut l = SMatrix::<f64, N, N>::zeros();
    for j in 0..N {
        let mut d = c[(j, j)];
        for k in 0..j {
            d -= l[(j, k)] * l[(j, k)];
        }
        if d.is_nan() || d <= tol {
            continue;
        }
        let s = d.sqrt();
        l[(j, j)] = s;
        for i in (j + 1)..N {
            let mut v = c[(i, j)];
            for k in 0..j {
                v -= l[(i, k)] * l[(j, k)];
            }
            l[(i, j)] = v / s;
        }
    }
    l
}

fn dynamic_factor(c: &DMatrix<f64>) -> DMatrix<f64> {
    crate::engine::synth::sqrt_factor(c)
}

/// The stream of steps.
pub struct World<'a, const N: usize, S: System<N>> {
    system: &'a S,
    process: S::Process<f64>,
    channels: &'a [&'a dyn Channel<N>],
    schedule: &'a [ChannelPlan],
    step_hz: f64,
    steps: u64,
    k: u64,
    kind: Kind<'a, N>,
}

enum Kind<'a, const N: usize> {
    Simulated {
        inputs: &'a dyn InputProfile,
        truth: SVector<f64, N>,
        noise: Noise,
        q_cache: Option<(SMatrix<f64, N, N>, SMatrix<f64, N, N>)>,
    },
    Log {
        reader: Box<LogReader>,
        pending: Option<(f64, Row)>,
        last_t: f64,
    },
}

/// Why the world cannot go on.
#[derive(Debug, Clone)]
pub enum WorldError {
    /// A bad log row.
    Log(LogError),
    /// The model returned a non-finite value while simulating the truth.
    Model(String),
}

impl<'a, const N: usize, S: System<N>> World<'a, N, S> {
    /// A world for `steps` steps at `step_hz` (a simulated run), or for the
    /// log's input rows.
    ///
    /// # Errors
    /// The log cannot be opened or its first rows are bad.
    #[allow(clippy::too_many_arguments)]
    pub fn new(
        system: &'a S,
        channels: &'a [&'a dyn Channel<N>],
        schedule: &'a [ChannelPlan],
        source: &Source<'a>,
        x0: &SVector<f64, N>,
        p0: &SMatrix<f64, N, N>,
        seed: u64,
        step_hz: f64,
        steps: u64,
    ) -> Result<Self, WorldError> {
        let kind = match source {
            Source::Simulated { inputs } => {
                let mut noise = Noise::new(seed);
                let l0 = psd_factor(p0);
                let w = SVector::<f64, N>::from_fn(|_, _| noise.normal());
                let mut truth = x0 + l0 * w;
                system.process::<f64>().normalize(&mut truth);
                Kind::Simulated {
                    inputs: *inputs,
                    truth,
                    noise,
                    q_cache: None,
                }
            }
            Source::Log { path } => {
                let layout = Layout {
                    input_len: system.input_len(),
                    channels: schedule.iter().map(|c| (c.name.clone(), c.m)).collect(),
                    states: N,
                };
                let mut reader = Box::new(LogReader::open(path, layout).map_err(WorldError::Log)?);
                // The first input row sets the start.
                let mut first = None;
                while first.is_none() {
                    match reader.next_row().map_err(WorldError::Log)? {
                        Some((t, Row::Input(_))) => first = Some(t),
                        Some(_) => {}
                        None => break,
                    }
                }
                let pending = reader.next_row().map_err(WorldError::Log)?;
                Kind::Log {
                    reader,
                    pending,
                    last_t: first.unwrap_or(0.0),
                }
            }
        };
        Ok(Self {
            system,
            process: system.process::<f64>(),
            channels,
            schedule,
            step_hz,
            steps,
            k: 0,
            kind,
        })
    }

    /// Fills `out` with the next step; `false` at the end.
    ///
    /// # Errors
    /// A bad log row, or a model that returned non-finite values.
    pub fn next(&mut self, out: &mut StepInput<N>) -> Result<bool, WorldError> {
        out.measurements.clear();
        out.truth = None;
        match &mut self.kind {
            Kind::Simulated {
                inputs,
                truth,
                noise,
                q_cache,
            } => {
                if self.k >= self.steps {
                    return Ok(false);
                }
                self.k += 1;
                let k = self.k;
                let dt = 1.0 / self.step_hz;
                out.dt = dt;
                out.t = k as f64 * dt;
                out.input.resize(self.system.input_len(), 0.0);
                inputs.at(out.t - dt, &mut out.input);
                let u = self.system.input::<f64>(&out.input);
                let lin = self.process.linearize(truth, &u, dt);
                let mut next = lin.next;
                match &lin.sources {
                    Some((g, q)) => {
                        let w = SVector::<f64, N>::from_fn(|i, _| {
                            q[i].max(0.0).sqrt() * noise.normal()
                        });
                        next += g * w;
                    }
                    None => {
                        let fresh = !matches!(q_cache, Some((q, _)) if *q == lin.noise);
                        if fresh {
                            *q_cache = Some((lin.noise, psd_factor(&lin.noise)));
                        }
                        if let Some((_, l)) = q_cache {
                            let w = SVector::<f64, N>::from_fn(|_, _| noise.normal());
                            next += *l * w;
                        }
                    }
                }
                self.process.normalize(&mut next);
                if !next.iter().all(|v| v.is_finite()) {
                    return Err(WorldError::Model(format!(
                        "the simulated truth left the finite numbers at step {k} (t = {} s): the process model's transition or noise returned NaN or infinity",
                        out.t
                    )));
                }
                *truth = next;
                for (i, c) in self.channels.iter().enumerate() {
                    if !self.schedule[i].due(k, self.step_hz) {
                        continue;
                    }
                    let ev = c.evaluate(truth);
                    let l = dynamic_factor(&ev.noise);
                    let v = DMatrix::from_fn(c.dim(), 1, |_, _| noise.normal());
                    let lv = l * v;
                    let z: Vec<f64> = (0..c.dim()).map(|j| ev.predicted[j] + lv[j]).collect();
                    if !z.iter().all(|v| v.is_finite()) {
                        return Err(WorldError::Model(format!(
                            "channel `{}` at step {k}: the measurement model returned NaN or infinity at the simulated truth",
                            self.schedule[i].name
                        )));
                    }
                    out.measurements.push((i, z));
                }
                out.truth = Some(*truth);
                Ok(true)
            }
            Kind::Log {
                reader,
                pending,
                last_t,
            } => {
                // Skip to the next input row (truth rows before it are kept).
                loop {
                    match pending.take() {
                        None => return Ok(false),
                        Some((t, Row::Input(values))) => {
                            out.dt = t - *last_t;
                            out.t = t;
                            *last_t = t;
                            out.input.clear();
                            out.input.extend_from_slice(&values);
                            break;
                        }
                        Some((_, Row::Truth(v))) => {
                            out.truth = Some(SVector::from_fn(|i, _| v[i]));
                            *pending = reader.next_row().map_err(WorldError::Log)?;
                        }
                        Some((_, Row::Measurement(..))) => {
                            *pending = reader.next_row().map_err(WorldError::Log)?;
                        }
                    }
                }
                self.k += 1;
                // The rows up to the next input row belong to this step.
                loop {
                    *pending = reader.next_row().map_err(WorldError::Log)?;
                    match pending {
                        Some((_, Row::Measurement(i, z))) => {
                            out.measurements.push((*i, std::mem::take(z)));
                        }
                        Some((_, Row::Truth(v))) => {
                            out.truth = Some(SVector::from_fn(|i, _| v[i]));
                        }
                        _ => break,
                    }
                }
                Ok(true)
            }
        }
    }
}
