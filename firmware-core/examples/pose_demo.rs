//! Demo: the planar pose filter on an invented yard rover ("Kestrel"), with
//! 200 Hz wheel odometry, 5 Hz beacon position fixes and a 10 Hz compass.
//! Run with `cargo run --release -p cairn-core --example pose_demo`.

use cairn_core::pose::{HeadingFix, Odometry, PlanarOdometry, PositionFix};
use cairn_core::{HealthMonitor, Kalman, Outcome};
use nalgebra::{Matrix3, Vector1, Vector2, Vector3};

/// A small deterministic Gaussian source (xorshift64* with Box-Muller), so
/// the demo needs no extra crates and prints the same numbers every run.
struct Noise(u64);

impl Noise {
    fn uniform(&mut self) -> f64 {
        self.0 ^= self.0 >> 12;
        self.0 ^= self.0 << 25;
        self.0 ^= self.0 >> 27;
        ((self.0.wrapping_mul(0x2545_f491_4f6c_dd1d) >> 11) as f64 + 0.5) / (1u64 << 53) as f64
    }
    fn gauss(&mut self) -> f64 {
        let (u, v) = (self.uniform(), self.uniform());
        (-2.0 * u.ln()).sqrt() * (core::f64::consts::TAU * v).cos()
    }
}

fn main() {
    let dt = 0.005_f64; // 200 Hz odometry
    let seconds = 600.0;
    let steps = (seconds / dt) as usize;
    let (sv, sw) = (0.02_f64, 0.01_f64); // odometry noise per sample: m/s, rad/s
    let (sp, sh) = (0.05_f64, 0.02_f64); // beacon fix m, compass rad
    let motion = PlanarOdometry {
        speed_var: (sv * sv) as f32,
        yaw_rate_var: (sw * sw) as f32,
        heading_drift_var: 0.0,
    };
    let beacon = PositionFix {
        var: Vector2::repeat((sp * sp) as f32),
    };
    let compass = HeadingFix {
        var: (sh * sh) as f32,
    };
    let mut filter = Kalman::<f32, 3>::try_new(
        Vector3::zeros(),
        Matrix3::from_diagonal(&Vector3::new(0.01, 0.01, 0.001)),
    )
    .expect("initial covariance is positive definite");
    let mut health = HealthMonitor::<f32, 64>::new();
    let mut noise = Noise(0x5eed_cafe);
    let mut truth = Vector3::<f64>::zeros();
    let (mut fixes, mut gated, mut worst) = (0u32, 0u32, 0.0_f64);
    for k in 0..steps {
        let t = k as f64 * dt;
        // The rover drives slow figure-eights across the yard.
        let (v, w) = (0.8, 0.35 * (0.05 * t).sin());
        let heading = truth[2] + w * dt / 2.0;
        truth += Vector3::new(v * dt * heading.cos(), v * dt * heading.sin(), w * dt);
        let odo = Odometry {
            speed: (v + sv * noise.gauss()) as f32,
            yaw_rate: (w + sw * noise.gauss()) as f32,
        };
        filter
            .predict_with(&motion, &odo, dt as f32)
            .expect("predict");
        let mut record = |o: Outcome<f32>, dof: u8| {
            fixes += 1;
            gated += u32::from(!o.is_applied());
            health.record(&o, dof);
        };
        if k % 40 == 39 {
            let z = Vector2::new(
                (truth[0] + sp * noise.gauss()) as f32,
                (truth[1] + sp * noise.gauss()) as f32,
            );
            record(
                filter
                    .update_with(&beacon, &z, Some(13.8))
                    .expect("beacon update"),
                2,
            );
        }
        if k % 20 == 19 {
            let z = Vector1::new(cairn_core::wrap_angle(truth[2] + sh * noise.gauss()) as f32);
            record(
                filter
                    .update_with(&compass, &z, Some(10.8))
                    .expect("compass update"),
                1,
            );
        }
        let x = filter.state();
        worst =
            worst.max(((x[0] as f64 - truth[0]).powi(2) + (x[1] as f64 - truth[1]).powi(2)).sqrt());
    }
    let report = health.assess(filter.covariance());
    let p = filter.covariance();
    println!("Kestrel yard rover, {seconds} s at 200 Hz odometry, f32 Joseph form");
    println!(
        "  fixes applied {} of {fixes}, gated {gated}",
        fixes - gated
    );
    println!("  worst position error {:.3} m", worst);
    println!(
        "  final sigma x {:.4} m, y {:.4} m, heading {:.4} rad",
        p[(0, 0)].sqrt(),
        p[(1, 1)].sqrt(),
        p[(2, 2)].sqrt()
    );
    println!(
        "  health: mean NIS/dof {:.3} in [{:.3}, {:.3}] over {} fixes, correlation asymmetry {:.1e}, healthy {}",
        report.mean_nis_per_dof,
        report.lower,
        report.upper,
        report.samples,
        report.correlation_asymmetry,
        report.healthy
    );
}
