//! The Bramble tug's own models checked by cairn, as a firmware project's
//! host tests would: every precision and covariance form against the
//! double-double reference, on a simulated shift and on the recorded log.

use bramble_tug::{HeadingFix, ImuSample, RadioFix, STATES, TugMotion, WheelSpeed};
use cairn_core::nalgebra::{SMatrix, SVector};
use cairn_core::{MeasurementModel, Pattern, ProcessModel, Scalar};
use cairn_host_check::engine::{Sensor, System};
use cairn_host_check::scenario::Scenario;
use cairn_host_check::spec::Mode;

/// The tug's noise figures (invented; the same as the recorded log's).
const GYRO_ARW: f64 = 2.9e-4;
const ACCEL_VRW: f64 = 4.0e-3;
const GYRO_BIAS_RW: f64 = 2.0e-5;

struct Tug;

impl System<STATES> for Tug {
    type Process<T: Scalar> = TugMotion<T>;
    fn process<T: Scalar>(&self) -> TugMotion<T> {
        TugMotion::new(T::of(GYRO_ARW), T::of(ACCEL_VRW), T::of(GYRO_BIAS_RW))
    }
    fn input_len(&self) -> usize {
        2
    }
    fn input<T: Scalar>(&self, v: &[f64]) -> ImuSample<T> {
        ImuSample {
            gyro: T::of(v[0]),
            accel: T::of(v[1]),
        }
    }
    fn angle_states(&self) -> &[usize] {
        &[bramble_tug::HEADING]
    }
    fn position_states(&self) -> &[usize] {
        &[bramble_tug::X, bramble_tug::Y]
    }
}

struct Wheel;
impl Sensor<STATES, 1> for Wheel {
    type Model<T: Scalar> = WheelSpeed<T>;
    fn model<T: Scalar>(&self) -> WheelSpeed<T> {
        WheelSpeed::new(T::of(0.03))
    }
}

struct Radio;
impl Sensor<STATES, 2> for Radio {
    type Model<T: Scalar> = RadioFix<T>;
    fn model<T: Scalar>(&self) -> RadioFix<T> {
        RadioFix::new(T::of(0.10))
    }
    fn to_frame(&self, z: &mut [f64], origin: &SVector<f64, STATES>) {
        z[0] -= origin[0];
        z[1] -= origin[1];
    }
}

struct Heading;
impl Sensor<STATES, 1> for Heading {
    type Model<T: Scalar> = HeadingFix<T>;
    fn model<T: Scalar>(&self) -> HeadingFix<T> {
        HeadingFix::new(T::of(0.02))
    }
}

/// A shift of driving: gentle turns and speed changes (invented).
fn shift(t: f64, out: &mut [f64]) {
    out[0] = 0.15 * (0.05 * t).sin();
    out[1] = 0.2 * (0.02 * t).cos();
}

fn scenario<S: System<STATES>>(system: S) -> Scenario<'static, STATES, S> {
    Scenario::new(
        "Bramble tug, simulated shift",
        system,
        [6.0, 4.0, std::f64::consts::FRAC_PI_2, 0.0, 0.0],
        [0.01, 0.01, 1e-4, 1e-4, 1e-5],
    )
    .states(&[
        ("x", "m"),
        ("y", "m"),
        ("heading", "rad"),
        ("speed", "m/s"),
        ("gyro bias", "rad/s"),
    ])
    .describe("Bramble tug (bramble-tug crate)")
    .step_hz(100.0)
    .horizon_s(300.0)
    .inputs(shift)
    .channel("wheel", Wheel, 10.0)
    .channel("radio", Radio, 1.0)
    .dropout(120.0, 180.0)
    .channel("heading", Heading, 0.2)
}

#[test]
fn the_tug_filter_passes_on_a_simulated_shift() {
    let report = scenario(Tug).check().expect("a consistent scenario");
    let text = report.text();
    assert!(report.passes(), "{text}");
    assert_eq!(report.exit_code(), 0);
    // The f64 forms track the double-double reference to rounding level
    // (common practice: some 1e-12 relative over 3e4 steps).
    let f64j = report.variant("f64 joseph").expect("f64 joseph ran");
    assert!(f64j.figures.max_relative_error < 1e-9, "{text}");
    // The tug's own Jacobians match central differences of its own f and h.
    let jac = report.run.jacobians.as_ref().expect("Jacobians compared");
    assert!(jac.passes, "{text}");
    assert!(jac.models.iter().all(|m| m.points > 0), "{text}");
    assert!(report.json().expect("json").contains("\"jacobians\""));
    assert!(report.svg().starts_with("<svg"));
}

#[test]
fn the_tug_filter_runs_end_to_end_on_the_recorded_log() {
    let log = std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("data/bramble-shift.csv");
    let report = scenario(Tug)
        .mode(Mode::EndToEnd)
        .recentre_m(10.0)
        .log(&log)
        .check()
        .expect("the recorded log is well formed");
    let text = report.text();
    // 59 778 input rows: the first sets the start, each other is a step.
    assert_eq!(report.run.steps, 59_777, "{text}");
    let f64j = report.variant("f64 joseph").expect("f64 joseph ran");
    // Against the log's truth rows (invented data, simulated independently
    // by scripts/make-tug-log.py): the f64 filter's NEES stays finite and
    // was computed at the truth rows.
    assert!(f64j.max_nees.is_some_and(f64::is_finite), "{text}");
    assert!(report.passes(), "{text}");
}

/// The tug's motion with one Jacobian entry's sign flipped, as a typing
/// slip would: d x / d heading = +v sin(heading) dt instead of -.
struct SlippedSign<T>(TugMotion<T>);

impl<T: Scalar> ProcessModel<T, STATES> for SlippedSign<T> {
    type Input = ImuSample<T>;
    fn transition(&self, x: &SVector<T, STATES>, u: &ImuSample<T>, dt: T) -> SVector<T, STATES> {
        self.0.transition(x, u, dt)
    }
    fn jacobian(
        &self,
        x: &SVector<T, STATES>,
        u: &ImuSample<T>,
        dt: T,
    ) -> SMatrix<T, STATES, STATES> {
        let mut f = self.0.jacobian(x, u, dt);
        f[(0, 2)] = -f[(0, 2)];
        f
    }
    fn noise(&self, x: &SVector<T, STATES>, u: &ImuSample<T>, dt: T) -> SMatrix<T, STATES, STATES> {
        self.0.noise(x, u, dt)
    }
    fn normalize(&self, x: &mut SVector<T, STATES>) {
        self.0.normalize(x);
    }
}

struct BrokenTug;

impl System<STATES> for BrokenTug {
    type Process<T: Scalar> = SlippedSign<T>;
    fn process<T: Scalar>(&self) -> SlippedSign<T> {
        SlippedSign(Tug.process::<T>())
    }
    fn input_len(&self) -> usize {
        2
    }
    fn input<T: Scalar>(&self, v: &[f64]) -> ImuSample<T> {
        Tug.input::<T>(v)
    }
    fn angle_states(&self) -> &[usize] {
        &[bramble_tug::HEADING]
    }
}

#[test]
fn a_jacobian_with_a_sign_error_is_caught_with_its_entry() {
    let report = scenario(BrokenTug).horizon_s(30.0).check().expect("runs");
    assert!(!report.passes());
    assert_eq!(report.exit_code(), 1);
    let why = report
        .variant("f32 joseph")
        .and_then(|v| v.why.clone())
        .unwrap_or_default();
    // The one-line reason names the entry: d x / d heading (central
    // differences of the model's own transition: common practice).
    assert!(why.contains("d x / d heading"), "{why}");
}

/// The tug's motion declaring a structural pattern its Jacobian breaks: the
/// identity (every coupling declared zero, d x / d heading among them).
struct Misdeclared<T>(TugMotion<T>);

impl<T: Scalar> ProcessModel<T, STATES> for Misdeclared<T> {
    type Input = ImuSample<T>;
    const JACOBIAN_PATTERN: Pattern<STATES, STATES> = Pattern::IDENTITY;
    fn transition(&self, x: &SVector<T, STATES>, u: &ImuSample<T>, dt: T) -> SVector<T, STATES> {
        self.0.transition(x, u, dt)
    }
    fn jacobian(
        &self,
        x: &SVector<T, STATES>,
        u: &ImuSample<T>,
        dt: T,
    ) -> SMatrix<T, STATES, STATES> {
        self.0.jacobian(x, u, dt)
    }
    fn noise(&self, x: &SVector<T, STATES>, u: &ImuSample<T>, dt: T) -> SMatrix<T, STATES, STATES> {
        self.0.noise(x, u, dt)
    }
    fn normalize(&self, x: &mut SVector<T, STATES>) {
        self.0.normalize(x);
    }
}

struct MisdeclaredTug;

impl System<STATES> for MisdeclaredTug {
    type Process<T: Scalar> = Misdeclared<T>;
    fn process<T: Scalar>(&self) -> Misdeclared<T> {
        Misdeclared(Tug.process::<T>())
    }
    fn input_len(&self) -> usize {
        2
    }
    fn input<T: Scalar>(&self, v: &[f64]) -> ImuSample<T> {
        Tug.input::<T>(v)
    }
    fn angle_states(&self) -> &[usize] {
        &[bramble_tug::HEADING]
    }
}

/// Checks `scenario` over 30 s, which must fail (exit 1), and returns why
/// its f32 Joseph variant failed.
fn failing_f32_joseph<S: System<STATES>>(scenario: Scenario<'static, STATES, S>) -> String {
    let report = scenario.horizon_s(30.0).check().expect("runs");
    assert!(!report.passes());
    assert_eq!(report.exit_code(), 1);
    report
        .variant("f32 joseph")
        .and_then(|v| v.why.clone())
        .unwrap_or_default()
}

#[test]
fn a_pattern_the_jacobian_breaks_fails_the_check_naming_the_entry() {
    let why = failing_f32_joseph(scenario(MisdeclaredTug));
    assert!(
        why.contains("F entry (") && why.contains("structurally zero"),
        "{why}"
    );
}

/// The tug's radio fix declaring its R structurally the identity: its
/// variance, 0.01 m^2, breaks the declared one.
struct MisdeclaredRadioFix<T>(RadioFix<T>);

impl<T: Scalar> MeasurementModel<T, STATES, 2> for MisdeclaredRadioFix<T> {
    const NOISE_PATTERN: Pattern<2, 2> = Pattern::IDENTITY;
    fn expected(&self, x: &SVector<T, STATES>) -> SVector<T, 2> {
        self.0.expected(x)
    }
    fn jacobian(&self, x: &SVector<T, STATES>) -> SMatrix<T, 2, STATES> {
        self.0.jacobian(x)
    }
    fn noise(&self, x: &SVector<T, STATES>) -> SMatrix<T, 2, 2> {
        self.0.noise(x)
    }
    fn normalize(&self, x: &mut SVector<T, STATES>) {
        self.0.normalize(x);
    }
}

struct MisdeclaredRadio;
impl Sensor<STATES, 2> for MisdeclaredRadio {
    type Model<T: Scalar> = MisdeclaredRadioFix<T>;
    fn model<T: Scalar>(&self) -> MisdeclaredRadioFix<T> {
        MisdeclaredRadioFix(Radio.model::<T>())
    }
    fn to_frame(&self, z: &mut [f64], origin: &SVector<f64, STATES>) {
        Radio.to_frame(z, origin);
    }
}

#[test]
fn a_noise_pattern_the_fix_breaks_fails_the_check_naming_the_entry() {
    let why = failing_f32_joseph(scenario(Tug).channel("misdeclared radio", MisdeclaredRadio, 1.0));
    assert!(
        why.contains("`misdeclared radio` measurement's R entry (0, 0)")
            && why.contains("structurally one"),
        "{why}"
    );
}

#[test]
fn the_tug_filter_is_consistent_in_monte_carlo_trials_and_a_mistuned_one_is_not() {
    use cairn_host_check::consistency::{Options, Variant, Verdict};
    use cairn_host_check::engine::Form;
    use cairn_host_check::spec::Precision;
    // Average NEES and NIS over the runs against their two-sided 95%
    // chi-square intervals (Bar-Shalom, Li & Kirubarajan 2001, section 5.4).
    let options = Options {
        runs: 24,
        steps: Some(3000),
        variants: vec![
            Variant::of(Precision::F64, Form::Joseph),
            Variant::of(Precision::F32, Form::Joseph),
        ],
        ..Options::default()
    };
    let tuned = scenario(Tug).trials(&options).expect("runs");
    for v in &tuned.variants {
        assert_eq!(v.verdict, Verdict::Consistent, "{}", tuned.text());
    }
    // Told a tenth of the process noise, the filter is too sure of itself.
    let told_less = Options {
        filter_q_scale: 0.1,
        ..options
    };
    let mistuned = scenario(Tug).trials(&told_less).expect("runs");
    assert!(
        mistuned
            .variants
            .iter()
            .all(|v| v.verdict == Verdict::Optimistic),
        "{}",
        mistuned.text()
    );
}

#[test]
fn the_same_scenario_from_a_spec_file_gives_the_same_check() {
    let spec = std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("tug.toml");
    let from_file = Scenario::from_spec(&spec, Tug)
        .and_then(|s| s.sensor("wheel", Wheel))
        .and_then(|s| s.sensor("radio", Radio))
        .and_then(|s| s.sensor("heading", Heading))
        .expect("the spec reads")
        .inputs(shift)
        .check()
        .expect("runs");
    let in_rust = scenario(Tug).check().expect("runs");
    assert!(from_file.passes(), "{}", from_file.text());
    // The same scenario, the same seed: the same figures, bit for bit.
    for (a, b) in from_file.run.variants.iter().zip(&in_rust.run.variants) {
        assert_eq!(
            a.figures.max_relative_error.to_bits(),
            b.figures.max_relative_error.to_bits(),
            "{}",
            a.name
        );
    }
    // A channel left without its model is refused before anything runs.
    let missing = Scenario::from_spec(&spec, Tug)
        .and_then(|s| s.sensor("wheel", Wheel))
        .expect("reads")
        .check();
    assert!(missing.is_err_and(|e| e.0.contains("radio")));
}

#[test]
fn gated_measurements_are_compared_on_the_reference_decisions() {
    // A tight gate on the radio (chi-square 2 dof at 0.5 passes only ~22%
    // of consistent fixes: Abramowitz & Stegun 26.4, P(chi2_2 < x) = 1 - e^(-x/2)).
    let report = Scenario::new(
        "Bramble tug, tight radio gate",
        Tug,
        [6.0, 4.0, std::f64::consts::FRAC_PI_2, 0.0, 0.0],
        [0.01, 0.01, 1e-4, 1e-4, 1e-5],
    )
    .step_hz(100.0)
    .horizon_s(120.0)
    .inputs(shift)
    .channel("radio", Radio, 1.0)
    .gate(0.5)
    .channel("wheel", Wheel, 10.0)
    .check()
    .expect("runs");
    let text = report.text();
    let r = &report.run.reference;
    assert!(r.gated > 20, "{text}");
    for v in &report.run.variants {
        // Every variant applied exactly what the reference applied ...
        assert_eq!(v.figures.updates_applied, r.updates, "{}: {text}", v.name);
        assert_eq!(v.figures.updates_gated, r.gated, "{}: {text}", v.name);
    }
    // ... so the f64 forms still agree with it to rounding level (common
    // practice), whatever their own gate would have decided.
    let f64j = report.variant("f64 joseph").expect("ran");
    assert!(f64j.figures.max_relative_error < 1e-9, "{text}");
    assert_eq!(f64j.gate_differences, 0, "{text}");
}

/// The tug's motion with a Jacobian that turns NaN after 30 s of driving
/// (a division by a speed that passes zero, as a slip would).
struct NanAfter<T>(TugMotion<T>);

impl<T: Scalar> ProcessModel<T, STATES> for NanAfter<T> {
    type Input = ImuSample<T>;
    fn transition(&self, x: &SVector<T, STATES>, u: &ImuSample<T>, dt: T) -> SVector<T, STATES> {
        self.0.transition(x, u, dt)
    }
    fn jacobian(
        &self,
        x: &SVector<T, STATES>,
        u: &ImuSample<T>,
        dt: T,
    ) -> SMatrix<T, STATES, STATES> {
        let mut f = self.0.jacobian(x, u, dt);
        if x[bramble_tug::SPEED] > T::of(1.0) {
            f[(0, 3)] = T::zero() / T::zero();
        }
        f
    }
    fn noise(&self, x: &SVector<T, STATES>, u: &ImuSample<T>, dt: T) -> SMatrix<T, STATES, STATES> {
        self.0.noise(x, u, dt)
    }
}

struct NanTug;

impl System<STATES> for NanTug {
    type Process<T: Scalar> = NanAfter<T>;
    fn process<T: Scalar>(&self) -> NanAfter<T> {
        NanAfter(Tug.process::<T>())
    }
    fn input_len(&self) -> usize {
        2
    }
    fn input<T: Scalar>(&self, v: &[f64]) -> ImuSample<T> {
        Tug.input::<T>(v)
    }
}

#[test]
fn a_model_returning_nan_is_named_with_its_step_not_a_panic() {
    // 1 m/s^2 forward: the speed passes 1 m/s after about a second.
    let err = Scenario::new("NaN tug", NanTug, [0.0; 5], [0.01, 0.01, 1e-4, 1e-4, 1e-5])
        .inputs(|_, u: &mut [f64]| {
            u[0] = 0.0;
            u[1] = 1.0;
        })
        .horizon_s(5.0)
        .check()
        .expect_err("refused");
    assert!(
        err.0.contains("jacobian") && err.0.contains("step"),
        "{err}"
    );
}
