//! Runs one filter variant (scalar, covariance form) over one simulated run
//! through cairn-core's `Estimator` trait, recording NEES and NIS; a small
//! dispatch over the const sizes N and M turns run-time sizes into types.

use cairn_core::pose::{HeadingFix, PositionFix};
use cairn_core::{
    Conventional, Estimator, FilterError, Joseph, Kalman, Scalar, UdKalman, wrap_angle,
};
use nalgebra::{DMatrix, SMatrix, SVector};
use serde::Serialize;

use super::sim::{RunData, Sensor, Setup, World};
use crate::engine::lanes::recentre_offset;
use crate::spec::Precision;

/// Largest state dimension the dispatch covers.
pub const MAX_STATES: usize = 9;
/// Largest measurement dimension per channel the dispatch covers.
pub const MAX_COMPONENTS: usize = 3;

/// A covariance form of cairn-core.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum Form {
    /// `Kalman<T, N, Joseph>`.
    Joseph,
    /// `Kalman<T, N, Conventional>`.
    Conventional,
    /// `UdKalman<T, N>` (Bierman / Thornton).
    Ud,
}

impl Form {
    /// The name used on the command line and in reports.
    pub fn name(self) -> &'static str {
        match self {
            Form::Joseph => "joseph",
            Form::Conventional => "conventional",
            Form::Ud => "u-d",
        }
    }

    /// Parses a name as written by [`Form::name`] (also `ud`).
    pub fn parse(s: &str) -> Option<Self> {
        match s.to_ascii_lowercase().as_str() {
            "joseph" => Some(Form::Joseph),
            "conventional" => Some(Form::Conventional),
            "u-d" | "ud" => Some(Form::Ud),
            _ => None,
        }
    }
}

/// A filter variant: scalar type and covariance form.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
pub struct Variant {
    /// Scalar type.
    pub precision: Precision,
    /// Covariance form.
    pub form: Form,
}

impl Variant {
    /// All six variants, f64 first.
    pub fn all() -> Vec<Variant> {
        let mut v = Vec::with_capacity(6);
        for precision in [Precision::F64, Precision::F32] {
            for form in [Form::Joseph, Form::Conventional, Form::Ud] {
                v.push(Variant { precision, form });
            }
        }
        v
    }

    /// "f32 joseph" and so on.
    pub fn label(&self) -> String {
        format!("{} {}", self.precision.name(), self.form.name())
    }
}

/// What one variant did in one run.
#[derive(Debug, Clone)]
pub struct Trace {
    /// NEES after each step (index k - 1); NaN after a failure.
    pub nees: Vec<f64>,
    /// NIS of each measurement, per channel, in order (stops at a failure).
    pub nis: Vec<Vec<f64>>,
    /// The step and the core's error, when the filter refused to go on.
    pub failure: Option<(usize, FilterError)>,
    /// Times the filter moved its origin (pose model with re-centring; a
    /// start beyond the distance counts once).
    pub recentres: u64,
}

impl Trace {
    fn new(steps: usize, channels: usize) -> Self {
        Self {
            nees: vec![f64::NAN; steps],
            nis: vec![Vec::new(); channels],
            failure: None,
            recentres: 0,
        }
    }
}

fn to_s<T: Scalar, const R: usize, const C: usize>(m: &DMatrix<f64>) -> SMatrix<T, R, C> {
    SMatrix::from_fn(|i, j| T::of(m[(i, j)]))
}

/// NEES e' P^-1 e in f64 from the variant's estimate, expressed in a frame
/// whose origin (x, y, in f64) is `origin`: e = truth - (origin + x), all in
/// f64; `wrap` wraps the heading error. Infinity when P is not positive
/// definite.
fn nees<T: Scalar, const N: usize>(
    x: &SVector<T, N>,
    p: &SMatrix<T, N, N>,
    truth: &[f64],
    origin: [f64; 2],
    wrap: bool,
) -> f64 {
    let shift = |i: usize| origin.get(i).copied().unwrap_or(0.0);
    let mut e = SVector::<f64, N>::from_fn(|i, _| truth[i] - (shift(i) + x[i].to_f64()));
    if wrap && N >= 3 {
        e[2] = wrap_angle(e[2]);
    }
    let p = SMatrix::<f64, N, N>::from_fn(|i, j| p[(i, j)].to_f64());
    match p.cholesky() {
        Some(ch) => e.dot(&ch.solve(&e)),
        None => f64::INFINITY,
    }
}

/// A linear channel's matrices in the variant's scalar, typed by M.
enum Chan<T: Scalar, const N: usize> {
    M1(SMatrix<T, 1, N>, SMatrix<T, 1, 1>),
    M2(SMatrix<T, 2, N>, SMatrix<T, 2, 2>),
    M3(SMatrix<T, 3, N>, SMatrix<T, 3, 3>),
}

impl<T: Scalar, const N: usize> Chan<T, N> {
    fn new(h: &DMatrix<f64>, r: &DMatrix<f64>) -> Option<Self> {
        match h.nrows() {
            1 => Some(Chan::M1(to_s(h), to_s(r))),
            2 => Some(Chan::M2(to_s(h), to_s(r))),
            3 => Some(Chan::M3(to_s(h), to_s(r))),
            _ => None,
        }
    }

    fn update<E: Estimator<T, N>>(
        &self,
        filter: &mut E,
        z: &[f64],
        gate: Option<T>,
    ) -> Result<f64, FilterError> {
        fn zv<T: Scalar, const M: usize>(z: &[f64]) -> SVector<T, M> {
            SVector::from_fn(|i, _| T::of(z[i]))
        }
        let outcome = match self {
            Chan::M1(h, r) => filter.update(&zv::<T, 1>(z), h, r, gate)?,
            Chan::M2(h, r) => filter.update(&zv::<T, 2>(z), h, r, gate)?,
            Chan::M3(h, r) => filter.update(&zv::<T, 3>(z), h, r, gate)?,
        };
        Ok(outcome.nis().to_f64())
    }
}

fn initial<T: Scalar, E: Estimator<T, N>, const N: usize>(s: &Setup) -> Result<E, FilterError> {
    E::try_new(SVector::from_fn(|i, _| T::of(s.x0[i])), to_s(&s.p0))
}

/// Runs a linear model's filter of form `E` over one run.
fn run_linear<T: Scalar, E: Estimator<T, N>, const N: usize>(s: &Setup, d: &RunData) -> Trace {
    let mut trace = Trace::new(s.steps, s.channels.len());
    let World::Linear { f, q_filter, .. } = &s.world else {
        trace.failure = Some((0, FilterError::InvalidTimeStep));
        return trace;
    };
    let f = to_s::<T, N, N>(f);
    let q = to_s::<T, N, N>(q_filter);
    let Some(chans) = s
        .channels
        .iter()
        .map(|c| Chan::<T, N>::new(&c.h, &c.r))
        .collect::<Option<Vec<_>>>()
    else {
        trace.failure = Some((
            0,
            FilterError::NonFinite(cairn_core::Operand::MeasurementMatrix),
        ));
        return trace;
    };
    let mut filter = match initial::<T, E, N>(s) {
        Ok(filter) => filter,
        Err(e) => {
            trace.failure = Some((0, e));
            return trace;
        }
    };
    let mut cursor = 0;
    for k in 1..=s.steps {
        if let Err(e) = filter.predict(&f, &q) {
            trace.failure = Some((k, e));
            return trace;
        }
        for c in s.each_due(s.due[k - 1]) {
            let m = s.channels[c].m;
            let z = &d.measurements[cursor..cursor + m];
            cursor += m;
            match chans[c].update(&mut filter, z, s.channels[c].gate.map(T::of)) {
                Ok(nis) => trace.nis[c].push(nis),
                Err(e) => {
                    trace.failure = Some((k, e));
                    return trace;
                }
            }
        }
        let truth = &d.truth[(k - 1) * N..k * N];
        trace.nees[k - 1] = nees(
            filter.state(),
            &filter.covariance_matrix(),
            truth,
            [0.0; 2],
            false,
        );
    }
    trace
}

/// Runs the planar pose model's filter of form `E` over one run. With
/// re-centring the filter keeps its own frame as `cairn check`'s
/// end-to-end lanes do: it starts at x0 minus the origin (formed in f64),
/// shifts before each step's predict whenever [`recentre_offset`] says so,
/// reads position fixes minus the origin (in f64) and is judged on origin +
/// local state.
fn run_pose<T: Scalar, E: Estimator<T, 3>>(s: &Setup, d: &RunData) -> Trace {
    let mut trace = Trace::new(s.steps, s.channels.len());
    let World::Pose { filter: model, .. } = &s.world else {
        trace.failure = Some((0, FilterError::InvalidTimeStep));
        return trace;
    };
    let model = cairn_core::pose::PlanarOdometry {
        speed_var: T::of(model.speed_var),
        yaw_rate_var: T::of(model.yaw_rate_var),
        heading_drift_var: T::of(model.heading_drift_var),
    };
    let dt = T::of(s.dt);
    let mut origin = [0.0_f64; 2];
    let mut x0 = s.x0.clone();
    if let Some(o) = s.recentre_m.and_then(|m| recentre_offset(x0[0], x0[1], m)) {
        x0[0] -= o[0];
        x0[1] -= o[1];
        origin = o;
        trace.recentres = 1;
    }
    let mut filter = match E::try_new(SVector::from_fn(|i, _| T::of(x0[i])), to_s(&s.p0)) {
        Ok(filter) => filter,
        Err(e) => {
            trace.failure = Some((0, e));
            return trace;
        }
    };
    let mut cursor = 0;
    for k in 1..=s.steps {
        if let Some(m) = s.recentre_m {
            let x = filter.state();
            if let Some(o) = recentre_offset(x[0].to_f64(), x[1].to_f64(), m) {
                let offset = SVector::<T, 3>::new(T::of(o[0]), T::of(o[1]), T::of(0.0));
                if let Err(e) = filter.shift_origin_mut(&offset) {
                    trace.failure = Some((k, e));
                    return trace;
                }
                origin[0] += o[0];
                origin[1] += o[1];
                trace.recentres += 1;
            }
        }
        let u = d.odometry[k - 1];
        let u = cairn_core::pose::Odometry {
            speed: T::of(u.speed),
            yaw_rate: T::of(u.yaw_rate),
        };
        if let Err(e) = filter.predict_with(&model, &u, dt) {
            trace.failure = Some((k, e));
            return trace;
        }
        for c in s.each_due(s.due[k - 1]) {
            let ch = &s.channels[c];
            let z = &d.measurements[cursor..cursor + ch.m];
            cursor += ch.m;
            let gate = ch.gate.map(T::of);
            let outcome = match ch.sensor {
                Sensor::Position => {
                    let fix = PositionFix {
                        r: to_s::<T, 2, 2>(&ch.r),
                    };
                    // The fix in the filter's frame, formed in f64.
                    let z = SVector::<T, 2>::new(T::of(z[0] - origin[0]), T::of(z[1] - origin[1]));
                    filter.update_with(&fix, &z, gate)
                }
                Sensor::Heading => {
                    let fix = HeadingFix {
                        var: T::of(ch.r[(0, 0)]),
                    };
                    filter.update_with(&fix, &SVector::<T, 1>::new(T::of(z[0])), gate)
                }
                Sensor::Linear => match Chan::<T, 3>::new(&ch.h, &ch.r) {
                    Some(chan) => chan
                        .update(&mut filter, &local(&ch.h, z, origin), gate)
                        .map(|nis| cairn_core::Outcome::Applied { nis: T::of(nis) }),
                    None => Err(FilterError::NonFinite(
                        cairn_core::Operand::MeasurementMatrix,
                    )),
                },
            };
            match outcome {
                Ok(o) => trace.nis[c].push(o.nis().to_f64()),
                Err(e) => {
                    trace.failure = Some((k, e));
                    return trace;
                }
            }
        }
        let truth = &d.truth[(k - 1) * 3..k * 3];
        trace.nees[k - 1] = nees(
            filter.state(),
            &filter.covariance_matrix(),
            truth,
            origin,
            true,
        );
    }
    trace
}

/// A linear measurement z = H x + v in a frame whose origin is (x, y) =
/// `origin`: z - H (origin, 0), in f64.
fn local(h: &DMatrix<f64>, z: &[f64], origin: [f64; 2]) -> Vec<f64> {
    z.iter()
        .enumerate()
        .map(|(i, &zi)| zi - h[(i, 0)] * origin[0] - h[(i, 1)] * origin[1])
        .collect()
}

fn run_sized<const N: usize>(v: Variant, s: &Setup, d: &RunData) -> Trace {
    use Form::{Conventional as C, Joseph as J, Ud as U};
    use Precision::{F32, F64};
    match (v.precision, v.form) {
        (F64, J) => run_linear::<f64, Kalman<f64, N, Joseph>, N>(s, d),
        (F64, C) => run_linear::<f64, Kalman<f64, N, Conventional>, N>(s, d),
        (F64, U) => run_linear::<f64, UdKalman<f64, N>, N>(s, d),
        (F32, J) => run_linear::<f32, Kalman<f32, N, Joseph>, N>(s, d),
        (F32, C) => run_linear::<f32, Kalman<f32, N, Conventional>, N>(s, d),
        (F32, U) => run_linear::<f32, UdKalman<f32, N>, N>(s, d),
    }
}

fn run_pose_variant(v: Variant, s: &Setup, d: &RunData) -> Trace {
    use Form::{Conventional as C, Joseph as J, Ud as U};
    use Precision::{F32, F64};
    match (v.precision, v.form) {
        (F64, J) => run_pose::<f64, Kalman<f64, 3, Joseph>>(s, d),
        (F64, C) => run_pose::<f64, Kalman<f64, 3, Conventional>>(s, d),
        (F64, U) => run_pose::<f64, UdKalman<f64, 3>>(s, d),
        (F32, J) => run_pose::<f32, Kalman<f32, 3, Joseph>>(s, d),
        (F32, C) => run_pose::<f32, Kalman<f32, 3, Conventional>>(s, d),
        (F32, U) => run_pose::<f32, UdKalman<f32, 3>>(s, d),
    }
}

/// Turns the run-time state count into the const generic `N`.
macro_rules! with_states {
    ($n:expr, $f:ident($($arg:expr),*)) => {
        match $n {
            1 => $f::<1>($($arg),*),
            2 => $f::<2>($($arg),*),
            3 => $f::<3>($($arg),*),
            4 => $f::<4>($($arg),*),
            5 => $f::<5>($($arg),*),
            6 => $f::<6>($($arg),*),
            7 => $f::<7>($($arg),*),
            8 => $f::<8>($($arg),*),
            9 => $f::<9>($($arg),*),
            _ => None,
        }
    };
}

fn some_sized<const N: usize>(v: Variant, s: &Setup, d: &RunData) -> Option<Trace> {
    Some(run_sized::<N>(v, s, d))
}

/// Runs variant `v` over one run's data; `None` for an unsupported size
/// (the setup refuses those before any run).
pub fn run(v: Variant, s: &Setup, d: &RunData) -> Option<Trace> {
    match s.world {
        World::Pose { .. } => Some(run_pose_variant(v, s, d)),
        World::Linear { .. } => with_states!(s.n, some_sized(v, s, d)),
    }
}
