//! A short invented shift of the tug run through cairn-core's filters: the
//! covariance stays positive definite and the errors stay consistent with it.

extern crate std;

use std::vec::Vec;

use cairn_core::nalgebra::{Cholesky, SMatrix, SVector};
use cairn_core::{Joseph, Kalman, Outcome, Scalar, UdKalman, wrap_angle};

use crate::{GYRO_BIAS, HEADING, HeadingFix, ImuSample, RadioFix, SPEED, TugMotion, WheelSpeed};

/// SplitMix64 (Steele, Lea and Flood, OOPSLA 2014) with Box-Muller normals:
/// a small seeded generator so the test needs no crate.
struct Rng(u64);

impl Rng {
    fn uniform(&mut self) -> f64 {
        self.0 = self.0.wrapping_add(0x9e37_79b9_7f4a_7c15);
        let mut z = self.0;
        z = (z ^ (z >> 30)).wrapping_mul(0xbf58_476d_1ce4_e5b9);
        z = (z ^ (z >> 27)).wrapping_mul(0x94d0_49bb_1331_11eb);
        z ^= z >> 31;
        ((z >> 11) as f64 + 0.5) / (1u64 << 53) as f64
    }
    fn normal(&mut self) -> f64 {
        let (u1, u2) = (self.uniform(), self.uniform());
        (-2.0 * u1.ln()).sqrt() * (core::f64::consts::TAU * u2).cos()
    }
}

/// The noise figures of the invented tug's sensors.
const GYRO_ARW: f64 = 2.9e-4;
const ACCEL_VRW: f64 = 4.0e-3;
const BIAS_RW: f64 = 2.0e-5;
const WHEEL_SIGMA: f64 = 0.03;
const RADIO_SIGMA: f64 = 0.10;
const HEADING_SIGMA: f64 = 0.02;

/// One step of the invented run: the input, its dt, and what was measured
/// after it, with the true state at its end.
struct Step {
    dt: f64,
    imu: ImuSample<f64>,
    wheel: Option<f64>,
    radio: Option<(f64, f64)>,
    heading: Option<f64>,
    truth: SVector<f64, 5>,
}

/// Two minutes of a tug driving an aisle loop, simulated in 1 ms sub-steps
/// (independently of the model's Euler step), with jittered 100 Hz input,
/// a 1.5 s input gap, and wheel (10 Hz), radio (1 Hz) and heading (0.2 Hz)
/// fixes.
fn scenario(seed: u64) -> Vec<Step> {
    let mut rng = Rng(seed);
    let mut truth: [f64; 5] = [0.0, 0.0, 0.3, 0.0, 0.003];
    let mut t = 0.0_f64;
    let mut steps = Vec::new();
    let mut k = 0usize;
    while t < 120.0 {
        let mut dt = 0.01 + 0.001 * (2.0 * rng.uniform() - 1.0);
        if k == 3000 {
            dt = 1.5;
        }
        let subs = (dt / 0.001).round() as usize;
        let h = dt / subs as f64;
        let (mut rate_sum, mut acc_sum) = (0.0, 0.0);
        for _ in 0..subs {
            let tau = t % 40.0;
            // Accelerate, cruise, turn through about 90 degrees, brake.
            let accel = if tau < 3.0 {
                0.4
            } else if tau > 36.0 {
                -0.3
            } else {
                0.0
            };
            let rate = if (20.0..26.0).contains(&tau) {
                0.26
            } else {
                0.0
            };
            truth[0] += truth[3] * truth[2].cos() * h;
            truth[1] += truth[3] * truth[2].sin() * h;
            truth[2] += rate * h;
            truth[3] += accel * h;
            rate_sum += rate * h;
            acc_sum += accel * h;
            t += h;
        }
        // The bias walks; the sensors report the step's averages plus
        // white noise of variance N^2 / dt (IEEE Std 952-1997).
        truth[4] += BIAS_RW * dt.sqrt() * rng.normal();
        let imu = ImuSample {
            gyro: rate_sum / dt + truth[4] + GYRO_ARW / dt.sqrt() * rng.normal(),
            accel: acc_sum / dt + ACCEL_VRW / dt.sqrt() * rng.normal(),
        };
        let wheel = k
            .is_multiple_of(10)
            .then(|| truth[3] + WHEEL_SIGMA * rng.normal());
        let radio = (k % 100 == 50).then(|| {
            (
                truth[0] + RADIO_SIGMA * rng.normal(),
                truth[1] + RADIO_SIGMA * rng.normal(),
            )
        });
        let heading = (k % 500 == 250).then(|| wrap_angle(truth[2] + HEADING_SIGMA * rng.normal()));
        let mut tr = SVector::<f64, 5>::from(truth);
        tr[HEADING] = wrap_angle(tr[HEADING]);
        steps.push(Step {
            dt,
            imu,
            wheel,
            radio,
            heading,
            truth: tr,
        });
        k += 1;
    }
    steps
}

fn start() -> (SVector<f64, 5>, SMatrix<f64, 5, 5>) {
    let x0 = SVector::<f64, 5>::from([0.0, 0.0, 0.3, 0.0, 0.0]);
    let p0 = SMatrix::<f64, 5, 5>::from_diagonal(&SVector::from([0.01, 0.01, 1e-4, 1e-4, 2.5e-5]));
    (x0, p0)
}

fn gate<T: Scalar>(dof: usize) -> Option<T> {
    // Chi-square 0.9999 quantiles (from memory): a gross outlier only.
    Some(T::of(if dof == 1 { 15.13 } else { 18.42 }))
}

/// Runs the scenario in scalar T through a Joseph-form filter; returns the
/// NEES at each radio epoch, checking P positive definite after every
/// operation (nalgebra's Cholesky, a general-purpose reference).
fn run<T: Scalar>(steps: &[Step]) -> Vec<f64> {
    let of = |v: f64| T::of(v);
    let (x0, p0) = start();
    let mut filter: Kalman<T, 5, Joseph> = Kalman::try_new(x0.map(of), p0.map(of)).unwrap();
    let motion = TugMotion::new(of(GYRO_ARW), of(ACCEL_VRW), of(BIAS_RW));
    let wheel = WheelSpeed::new(of(WHEEL_SIGMA));
    let radio = RadioFix::new(of(RADIO_SIGMA));
    let heading = HeadingFix::new(of(HEADING_SIGMA));
    let pd = |f: &Kalman<T, 5, Joseph>| {
        let p = f.covariance().map(|v| v.to_f64());
        assert!(
            Cholesky::new(p).is_some(),
            "P lost positive definiteness: {p}"
        );
    };
    let mut nees = Vec::new();
    for s in steps {
        let u = ImuSample {
            gyro: of(s.imu.gyro),
            accel: of(s.imu.accel),
        };
        filter.predict_with(&motion, &u, of(s.dt)).unwrap();
        pd(&filter);
        if let Some(v) = s.wheel {
            let o = filter
                .update_with(&wheel, &SVector::<T, 1>::new(of(v)), gate(1))
                .unwrap();
            assert!(matches!(o, Outcome::Applied { .. }));
            pd(&filter);
        }
        if let Some(h) = s.heading {
            let o = filter
                .update_with(&heading, &SVector::<T, 1>::new(of(h)), gate(1))
                .unwrap();
            assert!(matches!(o, Outcome::Applied { .. }));
            pd(&filter);
        }
        if let Some((x, y)) = s.radio {
            let o = filter
                .update_with(&radio, &SVector::<T, 2>::new(of(x), of(y)), gate(2))
                .unwrap();
            assert!(matches!(o, Outcome::Applied { .. }));
            pd(&filter);
            let est = filter.state().map(|v| v.to_f64());
            let p = filter.covariance().map(|v| v.to_f64());
            let mut e = est - s.truth;
            e[HEADING] = wrap_angle(e[HEADING]);
            let chol = Cholesky::new(p).unwrap();
            nees.push(e.dot(&chol.solve(&e)));
        }
        let x = filter.state();
        assert!(x[HEADING] > -T::pi() && x[HEADING] <= T::pi());
    }
    nees
}

#[test]
fn a_short_shift_stays_positive_definite_and_consistent() {
    let steps = scenario(20_240_611);
    assert!(steps.iter().any(|s| s.dt > 1.0), "the scenario has its gap");
    for nees in [run::<f64>(&steps), run::<f32>(&steps)] {
        assert!(nees.len() >= 100);
        // NEES ~ chi-square(5) for a consistent filter (Bar-Shalom, Li and
        // Kirubarajan 2001). One run's epochs are correlated, so the time
        // average is loosely bounded: [1, 12] holds a consistent run, and a
        // model with a sign error lands far outside it.
        let mean = nees.iter().sum::<f64>() / nees.len() as f64;
        std::eprintln!("mean NEES {mean} over {}", nees.len());
        assert!((1.0..12.0).contains(&mean), "time-averaged NEES {mean}");
    }
}

#[test]
fn the_factored_filter_agrees_with_the_joseph_filter() {
    // The same model through the U-D filter, which takes the noise as the
    // model's sources (Bierman 1977): the two forms are algebraically equal,
    // so in f64 they agree to rounding.
    let steps = scenario(7);
    let (x0, p0) = start();
    let mut joseph: Kalman<f64, 5, Joseph> = Kalman::try_new(x0, p0).unwrap();
    let mut ud: UdKalman<f64, 5> = UdKalman::try_new(x0, p0).unwrap();
    let motion = TugMotion::new(GYRO_ARW, ACCEL_VRW, BIAS_RW);
    let radio = RadioFix::new(RADIO_SIGMA);
    for s in &steps[..3000] {
        joseph.predict_with(&motion, &s.imu, s.dt).unwrap();
        ud.predict_with(&motion, &s.imu, s.dt).unwrap();
        if let Some((x, y)) = s.radio {
            let z = SVector::<f64, 2>::new(x, y);
            let a = joseph.update_with(&radio, &z, None).unwrap();
            let b = ud.update_with(&radio, &z, None).unwrap();
            assert!(matches!(a, Outcome::Applied { .. }) && matches!(b, Outcome::Applied { .. }));
        }
    }
    let dp = (joseph.covariance() - ud.rebuild_covariance()).abs().max();
    let dx = (joseph.state() - ud.state()).abs().max();
    assert!(
        dp < 1e-12 * joseph.covariance().abs().max(),
        "P differs by {dp}"
    );
    assert!(dx < 1e-9, "x differs by {dx}");
    assert!(joseph.covariance()[(GYRO_BIAS, GYRO_BIAS)] < 2.5e-5);
    assert!(joseph.covariance()[(SPEED, SPEED)] > 0.0);
}

/// The recorded invented shift, `data/bramble-shift.csv`, read with the
/// rules of `docs/log-format.md` and run in scalar T; returns the NEES at
/// every truth row and the number of rows of each channel applied.
fn replay<T: Scalar>(text: &str) -> (Vec<f64>, [usize; 3]) {
    let of = |v: f64| T::of(v);
    let x0 = SVector::<f64, 5>::from([6.0, 4.0, core::f64::consts::FRAC_PI_2, 0.0, 0.0]);
    let p0 = SMatrix::<f64, 5, 5>::from_diagonal(&SVector::from([0.01, 0.01, 1e-4, 1e-4, 1e-5]));
    let mut filter: Kalman<T, 5, Joseph> = Kalman::try_new(x0.map(of), p0.map(of)).unwrap();
    let motion = TugMotion::new(of(GYRO_ARW), of(ACCEL_VRW), of(BIAS_RW));
    let mut last_input: Option<f64> = None;
    let mut last_time = f64::NEG_INFINITY;
    let mut nees = Vec::new();
    let mut applied = [0usize; 3];
    let mut lines = text
        .lines()
        .enumerate()
        .filter(|(_, l)| !l.starts_with('#'));
    assert_eq!(lines.next().map(|(_, l)| l), Some("time_s,stream,values"));
    for (i, line) in lines {
        let cells: Vec<&str> = line.split(',').collect();
        let t: f64 = cells[0].parse().unwrap();
        let v: Vec<f64> = cells[2..]
            .iter()
            .map(|c| c.parse::<f64>().unwrap())
            .collect();
        assert!(
            v.iter().all(|x| x.is_finite()) && t.is_finite(),
            "line {}",
            i + 1
        );
        assert!(t >= last_time, "line {}: time goes back", i + 1);
        last_time = t;
        if cells[1] != "input" {
            assert!(
                last_input.is_some(),
                "line {}: before the first input",
                i + 1
            );
        }
        match (cells[1], v.len()) {
            ("input", 2) => {
                if let Some(prev) = last_input {
                    assert!(t > prev, "line {}: input time not increasing", i + 1);
                    let u = ImuSample {
                        gyro: of(v[0]),
                        accel: of(v[1]),
                    };
                    filter.predict_with(&motion, &u, of(t - prev)).unwrap();
                }
                last_input = Some(t);
            }
            ("wheel", 1) => {
                let z = SVector::<T, 1>::new(of(v[0]));
                let o = filter.update_with(&WheelSpeed::new(of(WHEEL_SIGMA)), &z, gate(1));
                applied[0] += usize::from(matches!(o.unwrap(), Outcome::Applied { .. }));
            }
            ("radio", 2) => {
                let z = SVector::<T, 2>::new(of(v[0]), of(v[1]));
                let o = filter.update_with(&RadioFix::new(of(RADIO_SIGMA)), &z, gate(2));
                applied[1] += usize::from(matches!(o.unwrap(), Outcome::Applied { .. }));
            }
            ("heading", 1) => {
                let z = SVector::<T, 1>::new(of(v[0]));
                let o = filter.update_with(&HeadingFix::new(of(HEADING_SIGMA)), &z, gate(1));
                applied[2] += usize::from(matches!(o.unwrap(), Outcome::Applied { .. }));
            }
            ("truth", 5) => {
                let p = filter.covariance().map(|v| v.to_f64());
                let chol = Cholesky::new(p).expect("P positive definite");
                let mut e =
                    filter.state().map(|v| v.to_f64()) - SVector::<f64, 5>::from_column_slice(&v);
                e[HEADING] = wrap_angle(e[HEADING]);
                nees.push(e.dot(&chol.solve(&e)));
            }
            (s, n) => panic!("line {}: stream {s} with {n} values", i + 1),
        }
    }
    (nees, applied)
}

#[test]
fn the_recorded_shift_replays_consistently() {
    let path = concat!(env!("CARGO_MANIFEST_DIR"), "/data/bramble-shift.csv");
    let text = std::fs::read_to_string(path).expect("the recorded log is in the repository");
    for (nees, applied) in [replay::<f64>(&text), replay::<f32>(&text)] {
        // A consistent filter gates about one fix in 10^4 at the 0.9999
        // quantile: of the 6637 fixes (5978 wheel, 539 radio, 120 heading)
        // more than 3 gated is a 0.3% event (Poisson, mean 0.66).
        std::eprintln!("applied {applied:?}");
        let gated = 6637 - applied.iter().sum::<usize>();
        assert!(
            gated <= 3 && applied[1] >= 536 && applied[2] >= 117,
            "{applied:?}"
        );
        let mean = nees.iter().sum::<f64>() / nees.len() as f64;
        let max = nees.iter().copied().fold(0.0, f64::max);
        std::eprintln!("shift: mean NEES {mean}, max {max}, over {}", nees.len());
        // As above: chi-square(5) mean 5 (Bar-Shalom et al. 2001), loosely
        // bounded for one correlated run.
        assert!((1.0..12.0).contains(&mean), "time-averaged NEES {mean}");
    }
}
