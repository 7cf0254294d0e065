//! The user's own filter on the Cortex-M4F, for both example crates: the
//! probes built with the cairn-probe harness (`on-target/user/`) link with no
//! panic path, run under QEMU with the host's f32 bits at every step, and
//! are priced by `cairn cost --probe`.

use std::path::{Path, PathBuf};
use std::process::Command;
use std::sync::OnceLock;
use std::time::Duration;

use super::target::{have_qemu, run_qemu};

// Each run brings its own copy of on-target/user/common.rs, as each probe
// crate does on the target.
#[path = "../on-target/user/bramble-tug/src/run.rs"]
#[allow(dead_code, clippy::duplicate_mod)]
mod tug;

#[path = "../on-target/user/bramble-tug/src/log_rows.rs"]
#[allow(dead_code)]
mod tug_log;

#[path = "../on-target/user/skerry-sled/src/run.rs"]
#[allow(dead_code, clippy::duplicate_mod)]
mod sled;

fn on_target_dir() -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join("on-target")
}

/// `cargo build --release` in on-target with its own target settings
/// (variables that would override `.cargo/config.toml` removed).
fn on_target_cargo(args: &[&str]) -> std::process::Output {
    Command::new("cargo")
        .args(args)
        .current_dir(on_target_dir())
        .env_remove("RUSTFLAGS")
        .env_remove("CARGO_ENCODED_RUSTFLAGS")
        .env_remove("CARGO_TARGET_DIR")
        .env_remove("CARGO_BUILD_TARGET")
        .env_remove("CARGO_BUILD_RUSTFLAGS")
        .output()
        .expect("cargo runs")
}

/// Builds both examples' probes once per test run and returns the folder
/// of the ELFs. A release build that links is the no-panic proof: the
/// harness's panic handler calls a symbol no object defines
/// (on-target/probe-kit/src/lib.rs).
fn build_user_probes() -> &'static Path {
    static BUILT: OnceLock<Result<PathBuf, String>> = OnceLock::new();
    let built = BUILT.get_or_init(|| {
        let out = on_target_cargo(&[
            "build",
            "--release",
            "--locked",
            "-p",
            "bramble-tug-probe",
            "-p",
            "skerry-sled-probe",
            "--bins",
        ]);
        if !out.status.success() {
            return Err(format!(
                "the user probes did not build (a panic path shows as an undefined \
                 `cairn_a_panic_path_survived`):\n{}",
                String::from_utf8_lossy(&out.stderr)
            ));
        }
        Ok(on_target_dir().join("target/thumbv7em-none-eabihf/release"))
    });
    match built {
        Ok(p) => p,
        Err(e) => panic!("{e}"),
    }
}

fn need_qemu() {
    // A missing emulator fails: the comparison must not pass unchecked
    // (scripts/test-all.sh installs qemu-system-arm).
    assert!(
        have_qemu(),
        "qemu-system-arm is needed (scripts/test-all.sh installs it)"
    );
}

fn words(output: &str, key: &str) -> Vec<Vec<u32>> {
    output
        .lines()
        .filter(|l| l.split_whitespace().next() == Some(key))
        .map(|l| {
            l.split_whitespace()
                .skip(1)
                .map(|w| u32::from_str_radix(w, 16).expect("hex word"))
                .collect()
        })
        .collect()
}

/// The `chk <step> <hash>` lines: (step, hash).
fn checkpoints(output: &str) -> Vec<(usize, u32)> {
    output
        .lines()
        .filter_map(|l| l.strip_prefix("chk "))
        .map(|rest| {
            let (step, hash) = rest.split_once(' ').expect("chk step hash");
            (
                step.parse().expect("step"),
                u32::from_str_radix(hash, 16).expect("hash"),
            )
        })
        .collect()
}

/// Compares the target's printed bits with the host's: every checkpoint's
/// hash (the first that differs names the window), then each column of P
/// (printed as `P <column> <bits>`) and of x, then the whole-run hash.
fn compare<const N: usize>(
    output: &str,
    host_chk: &[(usize, u32)],
    p: &[f32],
    x: &[f32],
    trace: u32,
) {
    let target_chk = checkpoints(output);
    assert_eq!(target_chk.len(), host_chk.len(), "{output}");
    let mut previous = 0;
    for (t, h) in target_chk.iter().zip(host_chk) {
        assert_eq!(
            t, h,
            "the bits first differ between steps {previous} and {} (hash of P and x after \
             every step)",
            h.0
        );
        previous = h.0;
    }
    let columns = |v: &[f32]| -> Vec<Vec<u32>> {
        v.chunks(N)
            .enumerate()
            .map(|(j, c)| {
                std::iter::once(j as u32)
                    .chain(c.iter().map(|f| f.to_bits()))
                    .collect()
            })
            .collect()
    };
    // Each line starts with its column index: compare the bits after it.
    let bits = |rows: Vec<Vec<u32>>| -> Vec<Vec<u32>> {
        rows.into_iter().map(|r| r[1..].to_vec()).collect()
    };
    assert_eq!(
        bits(words(output, "P")),
        bits(columns(p)),
        "final covariance bits"
    );
    assert_eq!(
        bits(words(output, "x")),
        bits(columns(x)),
        "final state bits"
    );
    assert_eq!(words(output, "trace"), vec![vec![trace]], "whole-run hash");
}

#[test]
fn the_tugs_recorded_shift_runs_with_the_hosts_bits_on_the_target() {
    // QEMU's emulation of the Cortex-M4F's FPv4-SP unit is IEEE 754-2008
    // binary32 with round to nearest (Arm Cortex-M4 TRM, DDI 0439, FPU
    // chapter); the host's f32 is the same arithmetic, and Rust never fuses
    // a*b+c, so the same source in the same order gives the same bits.
    need_qemu();
    let elf = build_user_probes().join("tug_bits");
    let output = run_qemu(&elf, &[], Duration::from_secs(120));

    // The host reads the same log prefix with the same reader the probe's
    // build script used, and replays it through the same source.
    let log =
        Path::new(env!("CARGO_MANIFEST_DIR")).join("examples/bramble-tug/data/bramble-shift.csv");
    let text = std::fs::read_to_string(&log).expect("the recorded shift");
    let rows = tug_log::read(&text, tug_log::SHIFT_INPUTS).expect("the shift reads");
    let mut host_chk = Vec::new();
    let (tally, filter) = tug::run(&rows, 500, |row, hash| host_chk.push((row, hash)));
    assert!(
        output.contains(&format!("tug-bits rows {}", rows.len())),
        "{output}"
    );
    compare::<{ bramble_tug::STATES }>(
        &output,
        &host_chk,
        filter.covariance().as_slice(),
        filter.state().as_slice(),
        tally.trace,
    );
    let outcomes = format!(
        "outcomes applied {} gated {} refused {}",
        tally.applied, tally.gated, tally.refused
    );
    assert!(
        output.contains(&outcomes),
        "target: {output}host: {outcomes}"
    );
    // The run exercises the filter: 9000 predicts and every fix in them
    // (the shift's first 90 s: radio at 1 Hz, wheel at 10 Hz, heading every
    // 5 s; its header), none refused.
    let predicts = rows.iter().filter(|r| r[0] == tug_log::INPUT).count();
    assert_eq!(predicts, tug_log::SHIFT_INPUTS);
    assert_eq!(tally.refused, 0);
    assert!(tally.applied + tally.gated > 900, "{tally:?}");
    // The comparison discriminates: one row fewer changes the hash.
    let (shorter, _) = tug::run(&rows[..rows.len() - 1], 0, |_, _| {});
    assert_ne!(shorter.trace, tally.trace);
}

#[test]
fn the_sleds_fifteen_state_tow_runs_with_the_hosts_bits_on_the_target() {
    // As the tug's test: IEEE 754-2008 binary32 on both machines (Arm
    // Cortex-M4 TRM, DDI 0439). At n = 15 the core's kernels take the
    // column shape on this host and the dot shape on the M4
    // (firmware-core/src/kernel.rs): equal bits also check that the two
    // shapes do the same operations in the same order.
    need_qemu();
    let elf = build_user_probes().join("sled_bits");
    let output = run_qemu(&elf, &[], Duration::from_secs(120));
    let mut host_chk = Vec::new();
    let (tally, filter) = sled::run(sled::STEPS, 250, |k, hash| {
        host_chk.push((k as usize, hash));
    });
    compare::<{ skerry_sled::STATES }>(
        &output,
        &host_chk,
        filter.covariance().as_slice(),
        filter.state().as_slice(),
        tally.trace,
    );
    let outcomes = format!(
        "outcomes applied {} gated {} refused {}",
        tally.applied, tally.gated, tally.refused
    );
    assert!(
        output.contains(&outcomes),
        "target: {output}host: {outcomes}"
    );
    // Every fix of the 30 s tow is taken: velocity 5 Hz, yaw 2 Hz, position
    // 1 Hz (the run's own schedule), none refused.
    assert_eq!(tally.refused, 0);
    assert_eq!(tally.applied + tally.gated, 150 + 60 + 30);
    let (shorter, _) = sled::run(sled::STEPS - 1, 0, |_, _| {});
    assert_ne!(shorter.trace, tally.trace);
}

#[test]
fn a_probe_with_a_panic_path_fails_to_link() {
    // The proof discriminates: the same harness with one unprovable bounds
    // check (on-target/user/bramble-tug/src/bin/panic_path.rs) must not link.
    let out = on_target_cargo(&[
        "build",
        "--release",
        "--locked",
        "-p",
        "bramble-tug-probe",
        "--bin",
        "panic_path",
        "--features",
        "panic-path",
    ]);
    let err = String::from_utf8_lossy(&out.stderr);
    assert!(!out.status.success(), "{err}");
    assert!(err.contains("cairn_a_panic_path_survived"), "{err}");
    // And the real probes link (the proof holds for them).
    let dir = build_user_probes();
    for bin in ["tug_cost", "tug_bits", "sled_cost", "sled_bits"] {
        assert!(dir.join(bin).is_file(), "{bin}");
    }
}

fn price(bin: &str, crate_dir: &str, rates: &[(&str, f64)]) -> cairn_host_check::cost::CostReport {
    use cairn_host_check::cost::{CostConfig, estimate, user::ProbeCrate};
    need_qemu();
    // Built by cost's own cargo call; after build_user_probes it is a no-op.
    build_user_probes();
    let config = CostConfig {
        probe: Some(ProbeCrate {
            dir: on_target_dir().join(crate_dir),
            bin: Some(bin.to_string()),
        }),
        rates: rates.iter().map(|(n, hz)| (n.to_string(), *hz)).collect(),
        ..CostConfig::default()
    };
    let report = estimate(&config).expect("estimate");
    println!("{}", report.render());
    report
}

/// Checks every operation of a user probe against bounds that hold for any
/// code: at least one cycle per instruction, at most the table's dearest
/// common instruction (VDIV, 14 cycles; TI SWCU192 Table 3-27) per
/// instruction, above the arithmetic lower bound, 16 calls each.
fn sane(report: &cairn_host_check::cost::CostReport, names: &[&str]) {
    let got: Vec<&str> = report.operations.iter().map(|o| o.name.as_str()).collect();
    assert_eq!(got, names, "the probe's operations in its announced order");
    for o in &report.operations {
        assert_eq!(o.calls, 16, "{}", o.name);
        assert!(o.m4_cycles >= o.instructions, "{}", o.name);
        assert!(o.m4_cycles <= 14.0 * o.instructions, "{}", o.name);
        assert!(o.bound > 0.0 && o.m4_cycles > o.bound, "{}", o.name);
        assert!(o.rate_hz.is_some(), "{}", o.name);
        // No f64 in software and no square root in the covariance path.
        assert_eq!(o.fp_total.soft_add + o.fp_total.soft_mul, 0, "{}", o.name);
        assert_eq!(o.fp_total.sqrt + o.fp_total.soft_sqrt, 0, "{}", o.name);
    }
    assert!(report.warnings.is_empty(), "{:?}", report.warnings);
    assert!(report.cpu_share() > 0.0);
}

#[test]
fn the_tugs_own_operations_are_priced_on_the_cortex_m4f() {
    let report = price(
        "tug_cost",
        "user/bramble-tug",
        &[
            ("predict", 100.0),
            ("wheel_update", 10.0),
            ("radio_update", 1.0),
            ("heading_update", 0.2),
        ],
    );
    sane(
        &report,
        &["predict", "wheel_update", "radio_update", "heading_update"],
    );
    let op = |n: &str| report.operation(n).expect("priced");
    // Operation counts the source fixes: the predict divides two noise
    // figures by dt (N^2 / dt, examples/bramble-tug/src/motion.rs); an
    // update divides at least once per LDL' pivot of S (m = 1, 2, 1). The
    // multiplies are not bounded by n^3: the compiler drops products with
    // the constant ones of F (x * 1 = x exactly).
    let div = |n: &str| op(n).per_call(op(n).fp_total.div);
    assert!(div("predict") >= 2.0, "{}", div("predict"));
    assert!(div("radio_update") >= 2.0);
    assert!(div("wheel_update") >= 1.0);
    assert!(div("heading_update") >= 1.0);
    // The two-component fix costs more than a one-component one.
    assert!(op("radio_update").m4_cycles > op("wheel_update").m4_cycles);
}

#[test]
fn the_sleds_own_operations_are_priced_on_the_cortex_m4f() {
    let report = price(
        "sled_cost",
        "user/skerry-sled",
        &[
            ("predict", 100.0),
            ("position_update", 1.0),
            ("velocity_update", 5.0),
            ("mag_yaw_update", 2.0),
            ("dense_predict", 100.0),
            ("dense_position_update", 1.0),
        ],
    );
    sane(
        &report,
        &[
            "predict",
            "position_update",
            "velocity_update",
            "mag_yaw_update",
            "dense_predict",
            "dense_position_update",
        ],
    );
    let op = |n: &str| report.operation(n).expect("priced");
    // The predict divides by cos(pitch) in E and two noise figures by dt
    // (examples/skerry-sled/src/strapdown.rs): at least 3 divides; each
    // update at least m LDL' pivot divides (m = 3, 3, 1).
    let div = |n: &str| op(n).per_call(op(n).fp_total.div);
    assert!(div("predict") >= 3.0, "{}", div("predict"));
    assert!(div("position_update") >= 3.0);
    assert!(div("velocity_update") >= 3.0);
    assert!(div("mag_yaw_update") >= 1.0);
    // The 100 Hz predict dominates the share at these rates.
    let share = |n: &str| op(n).cpu_share(report.clock_mhz);
    assert!(share("predict") > share("velocity_update") + share("position_update"));
    // The patterns skip products: F has 48 of 225 entries not structurally
    // zero and G 24 (examples/skerry-sled/src/strapdown.rs), so the dense
    // twin executes far more multiplies (measured 8958 against 1292), and
    // the patterned predict costs at most half the dense one's cycles (the
    // target set for the patterns; measured in docs/performance.md).
    let mul = |n: &str| op(n).per_call(op(n).fp_total.mul);
    assert!(
        mul("dense_predict") > 5.0 * mul("predict"),
        "{} {}",
        mul("dense_predict"),
        mul("predict")
    );
    assert!(mul("dense_position_update") > mul("position_update"));
    let cycles = |n: &str| op(n).m4_cycles;
    assert!(
        2.0 * cycles("predict") <= cycles("dense_predict"),
        "{} against {}",
        cycles("predict"),
        cycles("dense_predict")
    );
}

#[test]
fn a_rate_for_an_operation_the_probe_lacks_is_refused_naming_the_operations() {
    use cairn_host_check::cost::{CostConfig, CostError, estimate, user::ProbeCrate};
    need_qemu();
    build_user_probes();
    let config = CostConfig {
        probe: Some(ProbeCrate {
            dir: on_target_dir().join("user/bramble-tug"),
            bin: Some("tug_cost".to_string()),
        }),
        rates: vec![("odometry".to_string(), 100.0)],
        ..CostConfig::default()
    };
    match estimate(&config) {
        Err(CostError::Config(m)) => {
            assert!(m.contains("no probe named odometry"), "{m}");
            assert!(m.contains("radio_update"), "{m}");
        }
        other => panic!("expected a refused rate, got {other:?}"),
    }
}
