//! The README's firmware example, compiled and run as written there.

use cairn_core::nalgebra::{Matrix1, SMatrix, Vector1, Vector2};
use cairn_core::{Joseph, Kalman, MeasurementModel, ProcessModel, Scalar};

/// A cart on a rail: position and speed, driven by a measured acceleration.
pub struct Cart<T> {
    accel_var: T,
}
impl<T: Scalar> ProcessModel<T, 2> for Cart<T> {
    type Input = T;
    fn transition(&self, x: &Vector2<T>, a: &T, dt: T) -> Vector2<T> {
        Vector2::new(x[0] + x[1] * dt, x[1] + *a * dt)
    }
    fn jacobian(&self, _x: &Vector2<T>, _a: &T, dt: T) -> SMatrix<T, 2, 2> {
        SMatrix::<T, 2, 2>::new(T::one(), dt, T::zero(), T::one())
    }
    fn noise(&self, _x: &Vector2<T>, _a: &T, dt: T) -> SMatrix<T, 2, 2> {
        let g = Vector2::new(dt * dt * T::of(0.5), dt);
        g * g.transpose() * self.accel_var
    }
}
/// An encoder reading the position.
pub struct Encoder<T> {
    var: T,
}
impl<T: Scalar> MeasurementModel<T, 2, 1> for Encoder<T> {
    fn expected(&self, x: &Vector2<T>) -> Vector1<T> {
        Vector1::new(x[0])
    }
    fn jacobian(&self, _x: &Vector2<T>) -> SMatrix<T, 1, 2> {
        SMatrix::<T, 1, 2>::new(T::one(), T::zero())
    }
    fn noise(&self, _x: &Vector2<T>) -> Matrix1<T> {
        Matrix1::new(self.var)
    }
}

pub fn step(
    filter: &mut Kalman<f32, 2, Joseph>,
    accel: f32,
    position: Option<f32>,
) -> Result<(), cairn_core::FilterError> {
    filter.predict_with(&Cart { accel_var: 0.04 }, &accel, 0.01)?; // refused input changes nothing
    if let Some(z) = position {
        let _gated_or_applied =
            filter.update_with(&Encoder { var: 1e-6 }, &Vector1::new(z), Some(10.83))?;
    }
    Ok(())
}

#[test]
fn the_readme_cart_filter_runs_and_its_gate_refuses_an_outlier() {
    let mut filter: Kalman<f32, 2, Joseph> = Kalman::try_new(
        Vector2::new(0.0, 0.0),
        SMatrix::<f32, 2, 2>::identity() * 1e-2,
    )
    .unwrap();
    for k in 0..100 {
        let fix = (k % 10 == 9).then_some(0.0);
        step(&mut filter, 0.0, fix).unwrap();
    }
    // Position fixes at 1e-6 m^2 hold the position variance near R (a fix
    // every 10 steps: the prior grows only by the speed's share).
    let p = *filter.covariance();
    assert!(p[(0, 0)] < 1e-5, "{p}");
    // A 1 m outlier is ~1000 standard deviations: gated, nothing changes.
    let before = *filter.covariance();
    step(&mut filter, 0.0, None).unwrap();
    let predicted = *filter.covariance();
    let outcome = filter
        .update_with(&Encoder { var: 1e-6 }, &Vector1::new(1.0), Some(10.83))
        .unwrap();
    assert!(!outcome.is_applied());
    assert_eq!(*filter.covariance(), predicted);
    assert_ne!(before, predicted);
}
