//! The simulated world of one Monte Carlo run: truth drawn from the model's
//! own noise, the measurements the sensors would give, and (for the pose
//! model) the noisy odometry the filter sees. Everything is f64.

use cairn_core::ProcessModel;
use cairn_core::pose::{Odometry, PlanarOdometry};
use cairn_core::wrap_angle;
use nalgebra::{DMatrix, DVector};
use rand::SeedableRng;
use rand_distr::{Distribution, StandardNormal};
use rand_pcg::Pcg64Mcg;

use super::ConsistencyError;
use crate::spec::{ChannelKind, ModelPlan, Plan, Profile};

/// Largest number of measurement channels (the due mask is a `u32`).
pub const MAX_CHANNELS: usize = 32;

/// The process model as the simulation and the filters see it.
pub enum World {
    /// x(k+1) = F x(k) + w.
    Linear {
        /// Transition matrix.
        f: DMatrix<f64>,
        /// A square root of the true Q (Q = L L').
        q_root: DMatrix<f64>,
        /// The Q the filters are told (the true Q times the scale).
        q_filter: DMatrix<f64>,
    },
    /// The planar pose model.
    Pose {
        /// True odometry noise and heading drift.
        truth: PlanarOdometry<f64>,
        /// The noise the filters are told (scaled).
        filter: PlanarOdometry<f64>,
        /// True speed and yaw rate against time.
        profile: Profile,
    },
}

/// What a channel measures, for the simulation.
#[derive(Clone, Copy, PartialEq, Eq)]
pub enum Sensor {
    /// z = H x + v.
    Linear,
    /// The pose model's position fix.
    Position,
    /// The pose model's heading fix (wrapped).
    Heading,
}

/// One measurement channel, ready to simulate and to feed the filters.
pub struct Channel {
    /// Components.
    pub m: usize,
    /// What it measures.
    pub sensor: Sensor,
    /// Measurement matrix (m x n).
    pub h: DMatrix<f64>,
    /// Noise covariance R (m x m).
    pub r: DMatrix<f64>,
    /// A square root of R.
    pub r_root: DMatrix<f64>,
    /// Chi-square gate, if any.
    pub gate: Option<f64>,
}

/// Everything shared by the runs: models, channels and the schedule.
pub struct Setup {
    /// States.
    pub n: usize,
    /// Steps per run.
    pub steps: usize,
    /// Step length, s.
    pub dt: f64,
    /// Initial estimate.
    pub x0: DVector<f64>,
    /// Initial covariance.
    pub p0: DMatrix<f64>,
    /// A square root of P0 (the truth starts at x0 + L w).
    pub p0_root: DMatrix<f64>,
    /// The process model.
    pub world: World,
    /// The channels.
    pub channels: Vec<Channel>,
    /// For each step k = 1..=steps (index k - 1), a bit per channel due.
    pub due: Vec<u32>,
    /// Seed of the whole study.
    pub seed: u64,
    /// Pose model: each variant moves its origin to its x, y (whole
    /// metres, origin kept in f64) whenever |x| or |y| passes this many
    /// metres, as `cairn check`'s end-to-end lanes do (`None`: never).
    pub recentre_m: Option<f64>,
}

/// One run's simulated data.
pub struct RunData {
    /// True states after each step (index k - 1 for step k), n per step.
    pub truth: Vec<f64>,
    /// The odometry the filter reads at each step (pose model only).
    pub odometry: Vec<Odometry<f64>>,
    /// All measurements in schedule order (step, then channel), m each.
    pub measurements: Vec<f64>,
}

/// A square root L of a symmetric positive semidefinite matrix (A = L L'),
/// from its eigen-decomposition so a singular Q is fine.
///
/// # Errors
/// [`ConsistencyError::Model`] for a clearly negative eigenvalue.
fn root(a: &DMatrix<f64>, what: &str) -> Result<DMatrix<f64>, ConsistencyError> {
    let sym = (a + a.transpose()) * 0.5;
    let scale = sym.diagonal().iter().fold(0.0_f64, |m, v| m.max(v.abs()));
    let eig = sym.symmetric_eigen();
    let mut l = eig.eigenvectors.clone();
    for (j, &lam) in eig.eigenvalues.iter().enumerate() {
        if lam < -1e-9 * scale.max(f64::MIN_POSITIVE) {
            return Err(ConsistencyError::Model(format!(
                "{what} is not positive semidefinite (eigenvalue {lam:e})"
            )));
        }
        let s = lam.max(0.0).sqrt();
        l.column_mut(j).scale_mut(s);
    }
    Ok(l)
}

/// The seed of run `index`: a SplitMix64 scramble of the study seed and the
/// index, so each run's noise depends on nothing but those two numbers.
pub fn run_seed(seed: u64, index: usize) -> u64 {
    let mut z = seed ^ (index as u64 + 1).wrapping_mul(0x9E37_79B9_7F4A_7C15);
    z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
    z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
    z ^ (z >> 31)
}

impl Setup {
    /// Builds the shared setup from a plan.
    ///
    /// # Errors
    /// [`ConsistencyError`] for an unsupported size, too many channels, a
    /// bad scale or a covariance that is not one.
    pub fn new(plan: &Plan, steps: usize, q_scale: f64) -> Result<Self, ConsistencyError> {
        if !(q_scale.is_finite() && q_scale > 0.0) {
            return Err(ConsistencyError::Option(format!(
                "the filter's Q scale must be a positive number, got {q_scale}"
            )));
        }
        let n = plan.n();
        if n == 0 || n > super::lanes::MAX_STATES {
            return Err(ConsistencyError::Model(format!(
                "{n} states: trials support 1 to {} states",
                super::lanes::MAX_STATES
            )));
        }
        if plan.channels.len() > MAX_CHANNELS {
            return Err(ConsistencyError::Model(format!(
                "{} channels: trials support at most {MAX_CHANNELS}",
                plan.channels.len()
            )));
        }
        if plan.x0.len() != n || plan.p0.shape() != (n, n) {
            return Err(ConsistencyError::Model(
                "x0 or P0 does not match the states".into(),
            ));
        }
        let world = match &plan.model {
            ModelPlan::User { .. } => {
                return Err(ConsistencyError::Model(
                    "a user's own model runs its trials through the library (cairn_host_check::scenario)".into(),
                ));
            }
            ModelPlan::Linear { f, q, .. } => World::Linear {
                f: f.clone(),
                q_root: root(q, "Q")?,
                q_filter: q * q_scale,
            },
            ModelPlan::Pose {
                speed_var,
                yaw_rate_var,
                heading_drift_var,
                profile,
                ..
            } => {
                if n != 3 {
                    return Err(ConsistencyError::Model(
                        "the pose model has 3 states".into(),
                    ));
                }
                let truth = PlanarOdometry {
                    speed_var: *speed_var,
                    yaw_rate_var: *yaw_rate_var,
                    heading_drift_var: *heading_drift_var,
                };
                World::Pose {
                    truth,
                    filter: PlanarOdometry {
                        speed_var: speed_var * q_scale,
                        yaw_rate_var: yaw_rate_var * q_scale,
                        heading_drift_var: heading_drift_var * q_scale,
                    },
                    profile: profile.clone(),
                }
            }
        };
        let mut channels = Vec::with_capacity(plan.channels.len());
        for c in &plan.channels {
            if c.m == 0 || c.m > super::lanes::MAX_COMPONENTS {
                return Err(ConsistencyError::Model(format!(
                    "channel `{}` has {} components: trials support 1 to {}",
                    c.name,
                    c.m,
                    super::lanes::MAX_COMPONENTS
                )));
            }
            let sensor = match c.kind {
                ChannelKind::Linear(_) => Sensor::Linear,
                ChannelKind::Position => Sensor::Position,
                ChannelKind::Heading => Sensor::Heading,
                ChannelKind::User => {
                    return Err(ConsistencyError::Model(
                        "a user's own channel runs through the library".into(),
                    ));
                }
            };
            let h = c.h(n);
            if h.shape() != (c.m, n) || c.r.shape() != (c.m, c.m) {
                return Err(ConsistencyError::Model(format!(
                    "channel `{}`: H or R does not match its {} components",
                    c.name, c.m
                )));
            }
            channels.push(Channel {
                m: c.m,
                sensor,
                h,
                r: c.r.clone(),
                r_root: root(&c.r, &format!("R of channel `{}`", c.name))?,
                gate: c.gate,
            });
        }
        let due = (1..=steps as u64)
            .map(|k| {
                plan.channels
                    .iter()
                    .enumerate()
                    .filter(|(_, c)| c.due(k, plan.step_hz))
                    .fold(0_u32, |mask, (i, _)| mask | (1 << i))
            })
            .collect();
        Ok(Self {
            n,
            steps,
            dt: plan.dt(),
            x0: DVector::from_column_slice(&plan.x0),
            p0: plan.p0.clone(),
            p0_root: root(&plan.p0, "P0")?,
            world,
            channels,
            due,
            seed: plan.seed,
            recentre_m: plan.recentre_m.filter(|_| !plan.is_linear()),
        })
    }

    /// Simulates run `index`.
    pub fn simulate(&self, index: usize) -> RunData {
        let mut rng = Pcg64Mcg::seed_from_u64(run_seed(self.seed, index));
        let mut normal = |len: usize| -> DVector<f64> {
            DVector::from_fn(len, |_, _| StandardNormal.sample(&mut rng))
        };
        let n = self.n;
        let mut x = &self.x0 + &self.p0_root * normal(n);
        let mut truth = Vec::with_capacity(self.steps * n);
        let mut odometry = Vec::new();
        let total: usize = self
            .due
            .iter()
            .map(|&mask| {
                self.each_due(mask)
                    .map(|c| self.channels[c].m)
                    .sum::<usize>()
            })
            .sum();
        let mut measurements = Vec::with_capacity(total);
        for k in 1..=self.steps {
            match &self.world {
                World::Linear { f, q_root, .. } => {
                    x = f * &x + q_root * normal(n);
                }
                World::Pose {
                    truth: model,
                    profile,
                    ..
                } => {
                    let t = (k - 1) as f64 * self.dt;
                    let (speed, yaw_rate) = profile.at(t);
                    let u = Odometry { speed, yaw_rate };
                    let x3 = nalgebra::Vector3::new(x[0], x[1], x[2]);
                    let next = model.transition(&x3, &u, self.dt);
                    let w = normal(3);
                    x = DVector::from_column_slice(next.as_slice());
                    x[2] = wrap_angle(x[2] + model.heading_drift_var.sqrt() * w[2]);
                    odometry.push(Odometry {
                        speed: speed + model.speed_var.sqrt() * w[0],
                        yaw_rate: yaw_rate + model.yaw_rate_var.sqrt() * w[1],
                    });
                }
            }
            truth.extend(x.iter());
            for c in self.each_due(self.due[k - 1]) {
                let ch = &self.channels[c];
                let v = &ch.r_root * normal(ch.m);
                let mut z = &ch.h * &x + v;
                if ch.sensor == Sensor::Heading {
                    z[0] = wrap_angle(z[0]);
                }
                measurements.extend(z.iter());
            }
        }
        RunData {
            truth,
            odometry,
            measurements,
        }
    }

    /// The channels set in a due mask, in order.
    pub fn each_due(&self, mask: u32) -> impl Iterator<Item = usize> + '_ {
        (0..self.channels.len()).filter(move |i| mask & (1 << i) != 0)
    }
}
