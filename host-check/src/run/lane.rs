//! One variant of the filter at run time: cairn-core's own code for a
//! (scalar, form, N) chosen when the spec is read, behind a dynamic trait.

use core::marker::PhantomData;

use cairn_core::pose::{HeadingFix, Odometry, PlanarOdometry, PositionFix};
use cairn_core::{Estimator, FilterError, Ldl, Linearized, MeasurementModel, ProcessModel, Scalar};
use nalgebra::{DMatrix, DVector, Matrix2, Matrix3, SMatrix, SVector, Vector2, Vector3};

/// What one update did in a lane.
#[derive(Debug, Clone)]
pub struct LaneUpdate {
    /// The gain K = P H' S^-1 formed from the lane's prior in its own
    /// precision (the same arithmetic as the core's covariance forms), or
    /// `None` when S could not be factored.
    pub gain: Option<DMatrix<f64>>,
    /// The smallest LDL' pivot of S relative to its diagonal entry, in the
    /// lane's precision (the core refuses below M eps).
    pub pivot_ratio: f64,
    /// `true` when the measurement was applied (not gated).
    pub applied: bool,
}

/// A filter variant being run: the operations the runner needs, in f64
/// at the boundary, in the variant's own precision inside.
pub trait Lane {
    /// Linear predict with F and Q.
    ///
    /// # Errors
    /// The core's error, unchanged.
    fn predict(&mut self, f: &DMatrix<f64>, q: &DMatrix<f64>) -> Result<(), FilterError>;

    /// Linear predict with Q also given as independent sources G diag(q) G'
    /// (the pose model's); factored forms use the sources, as on the target.
    ///
    /// # Errors
    /// The core's error, unchanged.
    fn predict_sources(
        &mut self,
        f: &DMatrix<f64>,
        q: &DMatrix<f64>,
        g: &DMatrix<f64>,
        q_sources: &[f64],
    ) -> Result<(), FilterError>;

    /// The planar pose model's extended predict (N = 3 only).
    ///
    /// # Errors
    /// The core's error; [`FilterError::InvalidTimeStep`] never happens here
    /// because the runner's step is positive.
    fn predict_pose(
        &mut self,
        model: &PlanarOdometry<f64>,
        u: Odometry<f64>,
        dt: f64,
    ) -> Result<(), FilterError>;

    /// Linear update with z = H x + v.
    ///
    /// # Errors
    /// The core's error, unchanged.
    fn update(
        &mut self,
        z: &[f64],
        h: &DMatrix<f64>,
        r: &DMatrix<f64>,
        gate: Option<f64>,
    ) -> Result<LaneUpdate, FilterError>;

    /// The pose model's extended update: a position fix (2 components) or
    /// a heading fix (1), N = 3 only.
    ///
    /// # Errors
    /// The core's error, unchanged.
    fn update_pose(
        &mut self,
        z: &[f64],
        r: &DMatrix<f64>,
        gate: Option<f64>,
    ) -> Result<LaneUpdate, FilterError>;

    /// Writes the covariance, widened to f64, into `out` (N x N).
    fn covariance(&self, out: &mut DMatrix<f64>);

    /// Writes the state, widened to f64, into `out`.
    fn state(&self, out: &mut DVector<f64>);

    /// Moves the origin the state is expressed in: x -= offset (rounded to
    /// the lane's precision), covariance unchanged; the core's
    /// `shift_origin_mut`.
    ///
    /// # Errors
    /// The core's error (a non-finite offset or result); nothing changes.
    fn shift_origin(&mut self, offset: &[f64]) -> Result<(), FilterError>;
}

/// The re-centring rule shared by `cairn check`'s end-to-end lanes and
/// `cairn trials`: once |x| or |y| (in the lane's own frame) passes
/// `distance`, the origin moves by x and y rounded to whole metres (exact
/// in f32 and f64, so the shift adds no rounding); `None` while both stay
/// within it (or either is NaN).
#[must_use]
pub fn recentre_offset(x: f64, y: f64, distance: f64) -> Option<[f64; 2]> {
    (x.abs() > distance || y.abs() > distance).then(|| [x.round(), y.round()])
}

/// A cairn-core estimator `E` over `N` states in scalar `T`, as a [`Lane`].
pub struct CoreLane<T: Scalar, const N: usize, E: Estimator<T, N>> {
    filter: E,
    scalar: PhantomData<T>,
}

fn to_s<T: Scalar, const R: usize, const C: usize>(m: &DMatrix<f64>) -> SMatrix<T, R, C> {
    SMatrix::from_fn(|i, j| T::of(m[(i, j)]))
}

fn to_d<T: Scalar, const R: usize, const C: usize>(m: &SMatrix<T, R, C>) -> DMatrix<f64> {
    DMatrix::from_fn(R, C, |i, j| m[(i, j)].to_f64())
}

impl<T: Scalar, const N: usize, E: Estimator<T, N> + 'static> CoreLane<T, N, E> {
    /// A boxed lane from x0 and P0 (rounded to `T`).
    ///
    /// # Errors
    /// The core's refusal of P0 in this precision.
    pub fn boxed(x0: &[f64], p0: &DMatrix<f64>) -> Result<Box<dyn Lane>, FilterError> {
        let x = SVector::<T, N>::from_fn(|i, _| T::of(x0[i]));
        let p = to_s::<T, N, N>(p0);
        Ok(Box::new(Self {
            filter: E::try_new(x, p)?,
            scalar: PhantomData,
        }))
    }

    /// The gain the core's own arithmetic forms from the current prior.
    fn gain<const M: usize>(
        &self,
        h: &SMatrix<T, M, N>,
        r: &SMatrix<T, M, M>,
    ) -> (Option<DMatrix<f64>>, f64) {
        let p = self.filter.covariance_matrix();
        let b = p * h.transpose();
        let mut s = h * b;
        for j in 0..M {
            for i in 0..M {
                s[(i, j)] += r[(i, j)];
            }
        }
        match Ldl::factor(&s) {
            Ok(ldl) => {
                let d = ldl.diagonal();
                let ratio = (0..M)
                    .map(|j| (d[j] / s[(j, j)].abs()).to_f64())
                    .fold(f64::INFINITY, f64::min);
                (Some(to_d(&ldl.right_divide(&b))), ratio)
            }
            Err(_) => (None, 0.0),
        }
    }

    fn update_m<const M: usize>(
        &mut self,
        z: &[f64],
        h: &DMatrix<f64>,
        r: &DMatrix<f64>,
        gate: Option<f64>,
    ) -> Result<LaneUpdate, FilterError> {
        let hs = to_s::<T, M, N>(h);
        let rs = to_s::<T, M, M>(r);
        let zs = SVector::<T, M>::from_fn(|i, _| T::of(z[i]));
        let (gain, pivot_ratio) = self.gain(&hs, &rs);
        let outcome = self.filter.update(&zs, &hs, &rs, gate.map(T::of))?;
        Ok(LaneUpdate {
            gain,
            pivot_ratio,
            applied: outcome.is_applied(),
        })
    }
}

/// The core's pose model seen as a model over N states. The runner only
/// uses it with N = 3 (the spec check enforces that), where every call is
/// the core's own arithmetic on exact copies; other sizes see zeros.
struct PoseProcess<T: Scalar>(PlanarOdometry<T>);
/// The core's position fix over N states (see [`PoseProcess`]).
struct PosePosition<T: Scalar>(PositionFix<T>);
/// The core's heading fix over N states (see [`PoseProcess`]).
struct PoseHeading<T: Scalar>(HeadingFix<T>);

fn down<T: Scalar, const N: usize>(x: &SVector<T, N>) -> Vector3<T> {
    Vector3::from_fn(|i, _| if i < N { x[i] } else { T::zero() })
}

fn up<T: Scalar, const N: usize>(v: &Vector3<T>) -> SVector<T, N> {
    SVector::from_fn(|i, _| if i < 3 { v[i] } else { T::zero() })
}

fn up_cols<T: Scalar, const R: usize, const N: usize>(m: &SMatrix<T, R, 3>) -> SMatrix<T, R, N> {
    SMatrix::from_fn(|i, j| if j < 3 { m[(i, j)] } else { T::zero() })
}

fn up_square<T: Scalar, const N: usize>(m: &Matrix3<T>) -> SMatrix<T, N, N> {
    SMatrix::from_fn(|i, j| if i < 3 && j < 3 { m[(i, j)] } else { T::zero() })
}

impl<T: Scalar, const N: usize> ProcessModel<T, N> for PoseProcess<T> {
    type Input = Odometry<T>;
    fn transition(&self, x: &SVector<T, N>, u: &Odometry<T>, dt: T) -> SVector<T, N> {
        up(&self.0.transition(&down(x), u, dt))
    }
    fn jacobian(&self, x: &SVector<T, N>, u: &Odometry<T>, dt: T) -> SMatrix<T, N, N> {
        up_square(&self.0.jacobian(&down(x), u, dt))
    }
    fn noise(&self, x: &SVector<T, N>, u: &Odometry<T>, dt: T) -> SMatrix<T, N, N> {
        up_square(&ProcessModel::noise(&self.0, &down(x), u, dt))
    }
    fn noise_input(
        &self,
        x: &SVector<T, N>,
        u: &Odometry<T>,
        dt: T,
    ) -> Option<(SMatrix<T, N, N>, SVector<T, N>)> {
        self.0
            .noise_input(&down(x), u, dt)
            .map(|(g, q)| (up_square(&g), up(&q)))
    }
    fn linearize(&self, x: &SVector<T, N>, u: &Odometry<T>, dt: T) -> Linearized<T, N> {
        // Forwarded, so the lanes take the very path the firmware takes
        // (the core's one-trig-evaluation linearisation).
        let l = self.0.linearize(&down(x), u, dt);
        Linearized {
            next: up(&l.next),
            jacobian: up_square(&l.jacobian),
            noise: up_square(&l.noise),
            sources: l.sources.map(|(g, q)| (up_square(&g), up(&q))),
        }
    }
    fn normalize(&self, x: &mut SVector<T, N>) {
        let mut v = down(x);
        self.0.normalize(&mut v);
        *x = up(&v);
    }
}

impl<T: Scalar, const N: usize> MeasurementModel<T, N, 2> for PosePosition<T> {
    fn predict(&self, x: &SVector<T, N>) -> Vector2<T> {
        self.0.predict(&down(x))
    }
    fn jacobian(&self, x: &SVector<T, N>) -> SMatrix<T, 2, N> {
        up_cols(&self.0.jacobian(&down(x)))
    }
    fn noise(&self, x: &SVector<T, N>) -> Matrix2<T> {
        MeasurementModel::noise(&self.0, &down(x))
    }
    fn normalize(&self, x: &mut SVector<T, N>) {
        let mut v = down(x);
        MeasurementModel::normalize(&self.0, &mut v);
        *x = up(&v);
    }
}

impl<T: Scalar, const N: usize> MeasurementModel<T, N, 1> for PoseHeading<T> {
    fn predict(&self, x: &SVector<T, N>) -> SVector<T, 1> {
        self.0.predict(&down(x))
    }
    fn jacobian(&self, x: &SVector<T, N>) -> SMatrix<T, 1, N> {
        up_cols(&self.0.jacobian(&down(x)))
    }
    fn noise(&self, x: &SVector<T, N>) -> SMatrix<T, 1, 1> {
        MeasurementModel::noise(&self.0, &down(x))
    }
    fn residual(&self, z: &SVector<T, 1>, predicted: &SVector<T, 1>) -> SVector<T, 1> {
        self.0.residual(z, predicted)
    }
    fn normalize(&self, x: &mut SVector<T, N>) {
        let mut v = down(x);
        MeasurementModel::normalize(&self.0, &mut v);
        *x = up(&v);
    }
}

impl<T: Scalar, const N: usize, E: Estimator<T, N> + 'static> Lane for CoreLane<T, N, E> {
    fn predict(&mut self, f: &DMatrix<f64>, q: &DMatrix<f64>) -> Result<(), FilterError> {
        self.filter.predict(&to_s(f), &to_s(q))
    }

    fn predict_sources(
        &mut self,
        f: &DMatrix<f64>,
        q: &DMatrix<f64>,
        g: &DMatrix<f64>,
        q_sources: &[f64],
    ) -> Result<(), FilterError> {
        let qs = SVector::<T, N>::from_fn(|i, _| T::of(q_sources.get(i).copied().unwrap_or(0.0)));
        self.filter
            .predict_with_sources(&to_s(f), &to_s(q), &to_s(g), &qs)
    }

    fn predict_pose(
        &mut self,
        model: &PlanarOdometry<f64>,
        u: Odometry<f64>,
        dt: f64,
    ) -> Result<(), FilterError> {
        let m = PoseProcess(PlanarOdometry {
            speed_var: T::of(model.speed_var),
            yaw_rate_var: T::of(model.yaw_rate_var),
            heading_drift_var: T::of(model.heading_drift_var),
        });
        let u = Odometry {
            speed: T::of(u.speed),
            yaw_rate: T::of(u.yaw_rate),
        };
        self.filter.predict_with(&m, &u, T::of(dt))
    }

    fn update(
        &mut self,
        z: &[f64],
        h: &DMatrix<f64>,
        r: &DMatrix<f64>,
        gate: Option<f64>,
    ) -> Result<LaneUpdate, FilterError> {
        match z.len() {
            1 => self.update_m::<1>(z, h, r, gate),
            2 => self.update_m::<2>(z, h, r, gate),
            3 => self.update_m::<3>(z, h, r, gate),
            _ => Err(FilterError::NonFinite(cairn_core::Operand::Measurement)),
        }
    }

    fn update_pose(
        &mut self,
        z: &[f64],
        r: &DMatrix<f64>,
        gate: Option<f64>,
    ) -> Result<LaneUpdate, FilterError> {
        let gate = gate.map(T::of);
        match z.len() {
            2 => {
                let model = PosePosition(PositionFix {
                    r: to_s::<T, 2, 2>(r),
                });
                let h = MeasurementModel::<T, N, 2>::jacobian(&model, self.filter.state());
                let (gain, pivot_ratio) = self.gain(&h, &model.0.r);
                let zs = SVector::<T, 2>::new(T::of(z[0]), T::of(z[1]));
                let outcome = self.filter.update_with(&model, &zs, gate)?;
                Ok(LaneUpdate {
                    gain,
                    pivot_ratio,
                    applied: outcome.is_applied(),
                })
            }
            1 => {
                let model = PoseHeading(HeadingFix {
                    var: T::of(r[(0, 0)]),
                });
                let h = MeasurementModel::<T, N, 1>::jacobian(&model, self.filter.state());
                let rs = SMatrix::<T, 1, 1>::new(model.0.var);
                let (gain, pivot_ratio) = self.gain(&h, &rs);
                let zs = SVector::<T, 1>::new(T::of(z[0]));
                let outcome = self.filter.update_with(&model, &zs, gate)?;
                Ok(LaneUpdate {
                    gain,
                    pivot_ratio,
                    applied: outcome.is_applied(),
                })
            }
            _ => Err(FilterError::NonFinite(cairn_core::Operand::Measurement)),
        }
    }

    fn covariance(&self, out: &mut DMatrix<f64>) {
        let p = self.filter.covariance_matrix();
        for j in 0..N {
            for i in 0..N {
                out[(i, j)] = p[(i, j)].to_f64();
            }
        }
    }

    fn state(&self, out: &mut DVector<f64>) {
        let x = self.filter.state();
        for i in 0..N {
            out[i] = x[i].to_f64();
        }
    }

    fn shift_origin(&mut self, offset: &[f64]) -> Result<(), FilterError> {
        let o = SVector::<T, N>::from_fn(|i, _| T::of(offset.get(i).copied().unwrap_or(0.0)));
        self.filter.shift_origin_mut(&o)
    }
}
