//! Firmware constants: the generated file compiles for the Cortex-M4F
//! together with cairn-core, and its literals read back to the spec's
//! numbers exactly.

use std::path::{Path, PathBuf};
use std::process::Command;

use cairn_host_check::constants::{self, Generated};
use cairn_host_check::spec::{self, ModelPlan, Plan, Precision};
use nalgebra::DMatrix;

fn repo() -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR"))
        .parent()
        .unwrap()
        .to_path_buf()
}

fn tracker() -> Plan {
    spec::load(&repo().join("host-check/specs/wna-tracker.toml")).unwrap()
}

/// Every `pub const NAME: <float type> = <literal>;` line of a generated
/// file, with its numbers in the order written (column-major for matrices).
fn read_back(source: &str) -> Vec<(String, Vec<String>)> {
    let mut out = Vec::new();
    for line in source.lines() {
        let Some(stmt) = line.strip_prefix("pub const ") else {
            continue;
        };
        let Some((name, rest)) = stmt.split_once(':') else {
            continue;
        };
        let Some((ty, value)) = rest.split_once(" = ") else {
            continue;
        };
        if !(ty.contains("f32") || ty.contains("f64")) {
            continue;
        }
        let numbers = value
            .trim_end_matches(';')
            .split(|c: char| c == '[' || c == ']' || c == ',' || c.is_whitespace())
            .filter(|t| !t.is_empty())
            .map(str::to_string)
            .collect();
        out.push((name.trim().to_string(), numbers));
    }
    out
}

fn find<'a>(consts: &'a [(String, Vec<String>)], name: &str) -> &'a [String] {
    &consts
        .iter()
        .find(|(n, _)| n == name)
        .unwrap_or_else(|| panic!("{name} missing"))
        .1
}

fn assert_f32_exact(consts: &[(String, Vec<String>)], name: &str, expected: &[f64]) {
    let got = find(consts, name);
    assert_eq!(got.len(), expected.len(), "{name}");
    for (g, &e) in got.iter().zip(expected) {
        let g: f32 = g
            .parse()
            .unwrap_or_else(|_| panic!("{name}: `{g}` is not an f32 literal"));
        assert_eq!(g.to_bits(), (e as f32).to_bits(), "{name}: {g} against {e}");
        // At most 9 significant digits round-trip any f32 (IEEE 754-2008, 5.12.2).
    }
}

fn col_major(m: &DMatrix<f64>) -> Vec<f64> {
    m.as_slice().to_vec()
}

#[test]
fn f32_literals_read_back_to_the_specs_numbers_exactly() {
    let plan = tracker();
    let generated = constants::generate(&plan, Precision::F32).unwrap();
    let consts = read_back(&generated.source);
    let ModelPlan::Linear { f, q, .. } = &plan.model else {
        panic!("linear spec expected")
    };
    assert_f32_exact(&consts, "F", &col_major(f));
    assert_f32_exact(&consts, "Q", &col_major(q));
    assert_f32_exact(&consts, "P0", &col_major(&plan.p0));
    assert_f32_exact(&consts, "X0", &plan.x0);
    assert_f32_exact(&consts, "STEP_S", &[plan.dt()]);
    let ch = &plan.channels[0];
    assert_f32_exact(&consts, "MAGNETIC_STRIP_H", &col_major(&ch.h(plan.n())));
    assert_f32_exact(&consts, "MAGNETIC_STRIP_R", &col_major(&ch.r));
    // Every constant the generator reports is in the file, exactly.
    for c in &generated.constants {
        assert_f32_exact(&consts, &c.name, &c.values);
    }
}

#[test]
fn f64_literals_read_back_exactly_too() {
    let plan = tracker();
    let generated = constants::generate(&plan, Precision::F64).unwrap();
    assert!(generated.source.contains("[[f64; 2]; 2]"));
    let consts = read_back(&generated.source);
    for c in &generated.constants {
        let got = find(&consts, &c.name);
        for (g, &e) in got.iter().zip(&c.values) {
            assert_eq!(
                g.parse::<f64>().unwrap().to_bits(),
                e.to_bits(),
                "{}",
                c.name
            );
        }
    }
}

#[test]
fn the_steady_gain_satisfies_the_alpha_beta_relation() {
    // Continuous white-noise-acceleration model: the steady gain K = [alpha,
    // beta/T]' satisfies beta^2 / (1 - alpha) = T^2 Qd22 / R (Kalata 1984,
    // IEEE Trans. AES-20(2), relation from memory; values computed in
    // docs/references.md).
    let plan = tracker();
    let generated = constants::generate(&plan, Precision::F32).unwrap();
    assert!(
        generated.steady_note.is_none(),
        "{:?}",
        generated.steady_note
    );
    let consts = read_back(&generated.source);
    let k: Vec<f64> = find(&consts, "STEADY_GAIN")
        .iter()
        .map(|s| f64::from(s.parse::<f32>().unwrap()))
        .collect();
    let ModelPlan::Linear { q, .. } = &plan.model else {
        panic!()
    };
    let t = plan.dt();
    let r = plan.channels[0].r[(0, 0)];
    let (alpha, beta) = (k[0], k[1] * t);
    let lhs = beta * beta / (1.0 - alpha);
    let rhs = t * t * q[(1, 1)] / r;
    assert!(((lhs - rhs) / rhs).abs() < 1e-5, "{lhs} against {rhs}");
    // S = H P- H' + R: for H = [1, 0] the gain's first entry is P-11 / S.
    let s = f64::from(
        find(&consts, "STEADY_INNOVATION")[0]
            .parse::<f32>()
            .unwrap(),
    );
    let p11 = f64::from(find(&consts, "STEADY_PRIOR")[0].parse::<f32>().unwrap());
    assert!((alpha - p11 / s).abs() < 1e-6);
}

#[test]
fn the_pose_model_has_no_steady_gain_and_says_why() {
    let plan = spec::load(&repo().join("host-check/specs/demo.toml")).unwrap();
    let generated = constants::generate(&plan, Precision::F32).unwrap();
    let why = generated.steady_note.unwrap();
    assert!(why.contains("nonlinear"), "{why}");
    assert!(generated.source.contains("SPEED_VAR"));
    assert!(!generated.source.contains("STEADY_GAIN"));
    // The conversion chain of every noise figure is in the comments.
    for c in &plan.conversions {
        assert!(generated.source.contains(&c.field), "{}", c.field);
    }
}

/// A tiny no_std crate that includes the generated file and builds the
/// core's filters from it, in `const` context where the core allows.
fn fixture_lib() -> &'static str {
    r#"#![no_std]
//! Built by host-check's constants test: the generated file, included.

mod model {
    include!("../consts.rs");
}

use cairn_core::{Joseph, Kalman, SteadyGain};
use nalgebra::{ArrayStorage, SMatrix, SVector};

/// A filter in a static, built from the constants at compile time.
pub static START: Kalman<f32, { model::STATES }, Joseph> = Kalman::new_unchecked(
    SVector::from_array_storage(ArrayStorage([model::X0])),
    SMatrix::from_array_storage(ArrayStorage(model::P0)),
);

const F: SMatrix<f32, { model::STATES }, { model::STATES }> = SMatrix::from_array_storage(ArrayStorage(model::F));
const Q: SMatrix<f32, { model::STATES }, { model::STATES }> = SMatrix::from_array_storage(ArrayStorage(model::Q));
const H: SMatrix<f32, { model::MAGNETIC_STRIP_M }, { model::STATES }> =
    SMatrix::from_array_storage(ArrayStorage(model::MAGNETIC_STRIP_H));
const R: SMatrix<f32, { model::MAGNETIC_STRIP_M }, { model::MAGNETIC_STRIP_M }> =
    SMatrix::from_array_storage(ArrayStorage(model::MAGNETIC_STRIP_R));

/// One predict and update of the full filter; NaN when refused.
#[unsafe(no_mangle)]
pub extern "C" fn full_step(z: f32) -> f32 {
    let mut filter = START;
    if filter.predict(&F, &Q).is_err() {
        return f32::NAN;
    }
    match filter.update(&SVector::<f32, 1>::new(z), &H, &R, Some(9.0)) {
        Ok(_) => filter.state()[0],
        Err(_) => f32::NAN,
    }
}

/// One predict and update of the steady-gain filter; NaN when refused.
#[unsafe(no_mangle)]
pub extern "C" fn steady_step(z: f32) -> f32 {
    let Ok(mut filter) = SteadyGain::<f32, { model::STATES }, { model::STEADY_M }>::try_new(
        SVector::from_array_storage(ArrayStorage([model::X0])),
        F,
        SMatrix::from_array_storage(ArrayStorage(model::STEADY_H)),
        SMatrix::from_array_storage(ArrayStorage(model::STEADY_GAIN)),
        &SMatrix::from_array_storage(ArrayStorage(model::STEADY_INNOVATION)),
    ) else {
        return f32::NAN;
    };
    if filter.predict().is_err() || filter.update(&SVector::<f32, 1>::new(z), None).is_err() {
        return f32::NAN;
    }
    filter.state()[0]
}
"#
}

fn write_fixture(dir: &Path, generated: &Generated) {
    std::fs::create_dir_all(dir.join("src")).unwrap();
    let core = repo().join("firmware-core");
    let manifest = format!(
        r#"[package]
name = "cairn-constants-fixture"
version = "0.0.0"
edition = "2024"
publish = false

[lib]
path = "src/lib.rs"

[dependencies]
cairn-core = {{ path = {core:?}, default-features = false }}
nalgebra = {{ version = "0.34", default-features = false, features = ["libm"] }}

[profile.release]
codegen-units = 1

# Its own workspace: it lives inside the repository's target folder.
[workspace]
"#,
        core = core.display().to_string()
    );
    std::fs::write(dir.join("Cargo.toml"), manifest).unwrap();
    std::fs::write(dir.join("src/lib.rs"), fixture_lib()).unwrap();
    std::fs::write(dir.join("consts.rs"), &generated.source).unwrap();
    // Start from the repository's lock so the versions match and nothing
    // new has to be fetched; cargo drops the entries it does not need.
    if !dir.join("Cargo.lock").exists() {
        std::fs::copy(repo().join("Cargo.lock"), dir.join("Cargo.lock")).unwrap();
    }
}

#[test]
fn the_generated_file_compiles_for_the_cortex_m4f_with_the_core() {
    let generated = constants::generate(&tracker(), Precision::F32).unwrap();
    let base = repo().join("target/fixture");
    let dir = base.join("constants-crate");
    write_fixture(&dir, &generated);
    let cargo = std::env::var("CARGO").unwrap_or_else(|_| "cargo".into());
    let out = Command::new(cargo)
        .current_dir(&dir)
        .env("CARGO_TARGET_DIR", base.join("target"))
        .env_remove("RUSTFLAGS")
        .env_remove("CARGO_ENCODED_RUSTFLAGS")
        .args(["build", "--release", "--target", "thumbv7em-none-eabihf"])
        .output()
        .unwrap();
    assert!(
        out.status.success(),
        "the fixture crate did not build:\n{}",
        String::from_utf8_lossy(&out.stderr)
    );
}

#[test]
fn the_constants_subcommand_writes_the_file() {
    let spec = repo().join("host-check/specs/wna-tracker.toml");
    let path = std::env::temp_dir().join(format!("cairn-consts-{}.rs", std::process::id()));
    let out = Command::new(env!("CARGO_BIN_EXE_cairn"))
        .args([
            "constants",
            spec.to_str().unwrap(),
            "-o",
            path.to_str().unwrap(),
            "--precision",
            "f64",
        ])
        .output()
        .unwrap();
    assert_eq!(
        out.status.code(),
        Some(0),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let text = std::fs::read_to_string(&path).unwrap();
    let _ = std::fs::remove_file(&path);
    assert_eq!(
        text,
        constants::generate(&tracker(), Precision::F64)
            .unwrap()
            .source
    );
    let missing = Command::new(env!("CARGO_BIN_EXE_cairn"))
        .args(["constants", "/nonexistent/spec.toml"])
        .output()
        .unwrap();
    assert_eq!(missing.status.code(), Some(2));
}

/// A random walk stepped at 100 Hz with q per step, read at `meas_hz`
/// with variance r: an invented level gauge.
fn gauge(q: f64, r: f64, meas_hz: f64) -> Plan {
    use cairn_host_check::spec::{ChannelKind, ChannelPlan, Flash, Mode, StateInfo, Thresholds};
    Plan {
        title: "tank level gauge".into(),
        file: "<test>".into(),
        states: vec![StateInfo {
            name: "level".into(),
            unit: "m".into(),
        }],
        step_hz: 100.0,
        steps: 1000,
        x0: vec![0.0],
        p0: DMatrix::from_element(1, 1, 1.0),
        model: ModelPlan::Linear {
            f: DMatrix::from_element(1, 1, 1.0),
            q: DMatrix::from_element(1, 1, q),
            discretised: false,
        },
        channels: vec![ChannelPlan {
            name: "float".into(),
            m: 1,
            kind: ChannelKind::Linear(DMatrix::from_element(1, 1, 1.0)),
            r: DMatrix::from_element(1, 1, r),
            rate_hz: meas_hz,
            dropouts: vec![],
            gate: None,
            line: 0,
        }],
        thresholds: Thresholds::default(),
        flash: Flash {
            precision: Precision::F32,
            form: "joseph".into(),
        },
        mode: Mode::Covariance,
        recentre_m: None,
        external: None,
        conversions: vec![],
        seed: 1,
    }
}

fn value(consts: &[(String, Vec<String>)], name: &str) -> f64 {
    f64::from(find(consts, name)[0].parse::<f32>().unwrap())
}

#[test]
fn a_slower_sensor_gets_the_lifted_steady_state() {
    // Random walk in white noise, steady prior P = (q + sqrt(q^2 + 4 q r)) / 2
    // and gain K = P / (P + r) (closed form, docs/references.md). Read every 4th
    // step, the walk gathers 4 q between measurements: with 4 q = r = 1,
    // P = 1.6180340 and K = 0.6180340.
    let generated = constants::generate(&gauge(0.25, 1.0, 25.0), Precision::F32).unwrap();
    assert!(
        generated.steady_note.is_none(),
        "{:?}",
        generated.steady_note
    );
    let consts = read_back(&generated.source);
    assert!(
        generated
            .source
            .contains("pub const STEADY_EVERY: usize = 4;")
    );
    assert!((value(&consts, "STEADY_PRIOR") - 1.618_034_0).abs() < 1e-6);
    assert!((value(&consts, "STEADY_GAIN") - 0.618_034_0).abs() < 1e-6);
    // Every step (q = 0.01, r = 1): P = 0.1051249, K = 0.0951249.
    let every = read_back(
        &constants::generate(&gauge(0.01, 1.0, 100.0), Precision::F32)
            .unwrap()
            .source,
    );
    assert!((value(&every, "STEADY_PRIOR") - 0.105_124_9).abs() < 1e-6);
    assert!((value(&every, "STEADY_GAIN") - 0.095_124_9).abs() < 1e-6);
    // A rate that is not a whole fraction of the step: no steady gain, and why.
    let odd = constants::generate(&gauge(0.01, 1.0, 30.0), Precision::F32).unwrap();
    assert!(odd.steady_note.unwrap().contains("whole fraction"));
    assert!(!odd.source.contains("STEADY_GAIN"));
}
