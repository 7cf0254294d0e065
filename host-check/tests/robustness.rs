//! The `cairn` binary on hostile input and hostile output: values that
//! overflow, files that never end, a full disk, a closed pipe, outputs that
//! name inputs, and messages that must locate the problem without printing
//! raw terminal control sequences. Exit codes: 0 pass, 1 fail, 2 bad input,
//! never a panic (common practice for command-line tools; the codes are
//! documented in `cairn --help`).

use std::path::{Path, PathBuf};
use std::process::{Command, Output, Stdio};

fn cairn(args: &[&str]) -> Output {
    Command::new(env!("CARGO_BIN_EXE_cairn"))
        .args(args)
        .output()
        .expect("the cairn binary runs")
}

fn scratch(name: &str) -> PathBuf {
    let dir = Path::new(env!("CARGO_TARGET_TMPDIR")).join("robustness-tests");
    std::fs::create_dir_all(&dir).expect("scratch directory");
    dir.join(name)
}

fn data() -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/data")
}

fn stderr(out: &Output) -> String {
    String::from_utf8_lossy(&out.stderr).into_owned()
}

/// Exit 2 with an `error:` line containing every one of `wanted`, and no panic.
fn bad_input(out: &Output, wanted: &[&str]) {
    let err = stderr(out);
    assert_eq!(out.status.code(), Some(2), "{err}");
    assert!(!err.contains("panicked"), "{err}");
    assert!(err.starts_with("error: "), "{err}");
    for w in wanted {
        assert!(err.contains(w), "expected `{w}` in: {err}");
    }
}

/// A small linear spec (one state, 20 steps) with `extra` appended and
/// one replacement applied; returns its path.
fn linear_spec(tag: &str, from: &str, to: &str) -> PathBuf {
    let base = "title = \"one state\"\n\
[[state]]\nname = \"level\"\nunit = \"m\"\n\
[model]\nkind = \"discrete\"\nstep_hz = 10.0\nf = [[1.0]]\nq = [[1.0]]\n\
[[channel]]\nname = \"gauge\"\nrate_hz = 10.0\nh = [[1.0]]\nr = [[1.0]]\n\
[start]\nx = [0.0]\nstd = [1.0]\n\
[horizon]\nsteps = 20\n";
    assert!(base.contains(from), "{tag}: base lacks {from}");
    let path = scratch(&format!("{tag}.toml"));
    std::fs::write(&path, base.replacen(from, to, 1)).unwrap();
    path
}

fn line_of(path: &Path, needle: &str) -> usize {
    let text = std::fs::read_to_string(path).unwrap();
    1 + text[..text.find(needle).expect("needle in spec")]
        .matches('\n')
        .count()
}

// ---- Values that overflow or underflow ----------------------------------

#[test]
fn a_start_deviation_whose_square_overflows_is_bad_input() {
    // (1e200)^2 = 1e400 > f64::MAX = 1.8e308 (IEEE 754 binary64 range).
    let spec = linear_spec("std-overflow", "std = [1.0]", "std = [1e200]");
    let out = cairn(&["check", spec.to_str().unwrap(), "-q"]);
    let at = format!("std-overflow.toml:{}:", line_of(&spec, "std ="));
    bad_input(
        &out,
        &[&at, "`start.std`", "squares to more than f64 holds"],
    );
}

#[test]
fn a_variance_that_underflows_to_zero_is_bad_input_naming_the_field() {
    // (1e-200)^2 = 1e-400 rounds to 0 in binary64 (smallest subnormal
    // 4.9e-324); 1e-160 squares to the subnormal 1e-320.
    for (tag, std) in [("std-zero", "1e-200"), ("std-subnormal", "1e-160")] {
        let spec = linear_spec(tag, "std = [1.0]", &format!("std = [{std}]"));
        let out = cairn(&["check", spec.to_str().unwrap(), "-q"]);
        bad_input(&out, &["`start.std`", std]);
    }
    // A noise figure that converts to zero: (1e-170 m)^2 underflows.
    let spec = linear_spec(
        "noise-zero",
        "r = [[1.0]]",
        "noise = [{ std = 1e-170, unit = \"m\" }]",
    );
    let out = cairn(&["check", spec.to_str().unwrap(), "-q"]);
    bad_input(&out, &["`channel[0].noise[0].std`", "underflows"]);
}

#[test]
fn a_correlated_pose_position_fix_is_bad_input_at_its_line() {
    // The planar pose model's position fix declares independent x and y
    // errors (a diagonal R the update never reads off the diagonal): a
    // correlated `r` is refused, not silently dropped.
    let demo = Path::new(env!("CARGO_MANIFEST_DIR")).join("specs/demo.toml");
    let text = std::fs::read_to_string(demo).unwrap();
    let noise = "noise = [\n  { std = 0.08, unit = \"m\" },\n  { std = 0.08, unit = \"m\" },\n]";
    assert!(text.contains(noise), "the demo's beacon noise moved");
    let spec = scratch("correlated-fix.toml");
    std::fs::write(
        &spec,
        text.replacen(noise, "r = [[0.0064, 0.003], [0.003, 0.0064]]", 1),
    )
    .unwrap();
    let out = cairn(&["check", spec.to_str().unwrap(), "-q"]);
    let at = format!("correlated-fix.toml:{}:", line_of(&spec, "r = [[0.0064"));
    bad_input(&out, &[&at, "`channel[0].r`", "independent x and y errors"]);
    // The same figures on the diagonal only are accepted.
    std::fs::write(
        &spec,
        text.replacen(noise, "r = [[0.0064, 0.0], [0.0, 0.0064]]", 1),
    )
    .unwrap();
    let out = cairn(&["check", spec.to_str().unwrap(), "-q", "--seconds", "10"]);
    assert_eq!(out.status.code(), Some(0), "{}", stderr(&out));
}

#[test]
fn a_reference_refusal_names_the_file_line_and_channel() {
    // F = 1e100 multiplies P by 1e200 per step: P overflows by the second
    // step and the reference refuses the update (arithmetic).
    let spec = linear_spec("grows", "f = [[1.0]]", "f = [[1e100]]");
    let out = cairn(&["check", spec.to_str().unwrap(), "-q"]);
    let at = format!("grows.toml:{}:1:", line_of(&spec, "[[channel]]"));
    bad_input(&out, &[&at, "field `channel[0]`", "channel `gauge`"]);
}

#[test]
fn a_unit_nested_thousands_deep_is_refused_not_a_stack_overflow() {
    let unit = format!("{}m{}", "(".repeat(20_000), ")".repeat(20_000));
    let out = cairn(&["noise", "std=1", "--unit", &unit]);
    bad_input(&out, &["nested more than"]);
    // In a spec, the same unit names its field.
    let spec = linear_spec(
        "deep-unit",
        "r = [[1.0]]",
        &format!("noise = [{{ std = 1.0, unit = \"{unit}\" }}]"),
    );
    let out = cairn(&["check", spec.to_str().unwrap(), "-q"]);
    bad_input(&out, &["`channel[0].noise[0].unit`", "nested more than"]);
}

#[test]
fn f32_constants_refuse_a_value_that_would_be_written_as_zero() {
    // 1e-300 is below the smallest f32 subnormal (1.4e-45): as f32 it is 0.
    let spec = linear_spec("tiny-q", "q = [[1.0]]", "q = [[1e-300]]");
    let out = cairn(&["constants", spec.to_str().unwrap(), "--precision", "f32"]);
    bad_input(&out, &["Q entry (0, 0)", "1e-300", "written as 0.0"]);
    // f64 holds it exactly: written, exit 0.
    let out = cairn(&["constants", spec.to_str().unwrap(), "--precision", "f64"]);
    assert_eq!(out.status.code(), Some(0), "{}", stderr(&out));
    assert!(String::from_utf8_lossy(&out.stdout).contains("1e-300"));
}

// ---- Inputs without an end ----------------------------------------------

#[test]
fn a_spec_that_never_ends_is_capped() {
    // /dev/zero never ends: the read stops at the documented 16 MiB.
    let out = cairn(&["check", "/dev/zero"]);
    bad_input(&out, &["/dev/zero: ", "larger than 16 MiB"]);
    let out = cairn(&["trials", "/dev/zero"]);
    bad_input(&out, &["larger than 16 MiB"]);
}

#[test]
fn a_recorded_log_that_never_ends_is_capped() {
    let text = std::fs::read_to_string(data().join("recorded-rover.toml")).unwrap();
    let spec = scratch("zero-log.toml");
    std::fs::write(
        &spec,
        text.replace("\"recorded-odometry.csv\"", "\"/dev/zero\""),
    )
    .unwrap();
    let out = cairn(&["check", spec.to_str().unwrap(), "-q"]);
    bad_input(&out, &["`model.profile_csv`", "larger than 256 MiB"]);
}

#[test]
fn an_external_reference_line_without_end_is_capped() {
    // 3 MiB without a line break, after a header.
    let text = std::fs::read_to_string(data().join("random-walk.toml")).unwrap();
    let csv = scratch("endless-line.csv");
    let mut rows = String::from("step,time_s,P\n1,0.1,");
    rows.push_str(&"7".repeat(3 << 20));
    std::fs::write(&csv, rows).unwrap();
    let spec = scratch("endless-line.toml");
    std::fs::write(
        &spec,
        text.replace("random-walk-reference.csv", csv.to_str().unwrap()),
    )
    .unwrap();
    let out = cairn(&["check", spec.to_str().unwrap(), "-q"]);
    bad_input(&out, &["endless-line.csv:2", "longer than 1024 KiB"]);
}

// ---- Output that cannot be written --------------------------------------

#[test]
fn a_full_disk_is_exit_two_with_a_message() {
    // /dev/full fails every write with ENOSPC (Linux, documented in the
    // kernel's admin-guide/devices.txt: "1 char 7 = /dev/full"; from memory).
    let full = || {
        std::fs::OpenOptions::new()
            .write(true)
            .open("/dev/full")
            .expect("/dev/full is present on Linux")
    };
    for args in [
        vec!["demo", "--print-spec"],
        vec!["noise", "std=1", "--unit", "m", "--at-hz", "10"],
        vec!["constants"],
        vec!["--help"],
        vec!["check", "--help"],
        vec!["--version"],
    ] {
        let out = Command::new(env!("CARGO_BIN_EXE_cairn"))
            .args(&args)
            .stdout(full())
            .output()
            .expect("runs");
        bad_input(&out, &["cannot write to standard output"]);
    }
    // A report file on the full device.
    let spec = data().join("random-walk.toml");
    for opt in ["--json", "--plot"] {
        let out = cairn(&["check", spec.to_str().unwrap(), "-q", opt, "/dev/full"]);
        bad_input(&out, &["cannot write /dev/full"]);
    }
    let out = cairn(&["constants", "-o", "/dev/full"]);
    bad_input(&out, &["cannot write /dev/full"]);
}

#[test]
fn a_closed_pipe_ends_quietly_with_the_commands_own_exit_code() {
    // The reader is gone before cairn writes a byte (as in `cairn demo |
    // head -c 1` once head has exited): every write fails with EPIPE.
    let spec = data().join("random-walk.toml");
    let spec = spec.to_str().unwrap();
    for (args, code) in [
        (vec!["demo", "--print-spec"], 0),
        (vec!["--help"], 0),
        (vec!["constants"], 0),
        (vec!["noise", "std=1", "--unit", "m", "--at-hz", "10"], 0),
        (vec!["check", spec], 0),
        (vec!["trials", spec, "--runs", "4"], 0),
    ] {
        let (reader, writer) = std::io::pipe().expect("a pipe");
        drop(reader);
        let out = Command::new(env!("CARGO_BIN_EXE_cairn"))
            .args(&args)
            .stdout(Stdio::from(writer))
            .stderr(Stdio::piped())
            .output()
            .expect("runs");
        assert_eq!(out.status.code(), Some(code), "{args:?}: {}", stderr(&out));
        assert_eq!(stderr(&out), "", "{args:?}: a closed pipe is not reported");
    }
}

#[test]
fn a_reader_that_leaves_early_is_not_an_error() {
    // The shell pipeline itself: head takes one byte and exits while the
    // report is still being written (whether a write then meets the closed
    // pipe depends on timing; either way the run must end cleanly).
    let out = Command::new("bash")
        .arg("-c")
        .arg("set -o pipefail; \"$0\" demo --seconds 5 | head -c 1 >/dev/null")
        .arg(env!("CARGO_BIN_EXE_cairn"))
        .output()
        .expect("bash runs");
    assert_eq!(out.status.code(), Some(0), "{}", stderr(&out));
    assert_eq!(stderr(&out), "");
}

#[test]
fn report_files_are_replaced_whole() {
    // A longer earlier file must not leave its tail behind, and no
    // temporary file is left next to it.
    let dir = scratch("whole");
    std::fs::create_dir_all(&dir).unwrap();
    let json = dir.join("report.json");
    std::fs::write(&json, "x".repeat(10 << 20)).unwrap();
    let spec = data().join("random-walk.toml");
    let out = cairn(&[
        "check",
        spec.to_str().unwrap(),
        "-q",
        "--json",
        json.to_str().unwrap(),
    ]);
    assert_eq!(out.status.code(), Some(0), "{}", stderr(&out));
    let text = std::fs::read_to_string(&json).unwrap();
    serde_json::from_str::<serde_json::Value>(&text).expect("the whole file is the JSON report");
    let names: Vec<String> = std::fs::read_dir(&dir)
        .unwrap()
        .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
        .collect();
    assert_eq!(names, vec!["report.json".to_string()]);
    // A directory that does not exist: exit 2 naming the path, nothing made.
    let missing = dir.join("no-such-dir").join("r.json");
    let out = cairn(&[
        "check",
        spec.to_str().unwrap(),
        "-q",
        "--json",
        missing.to_str().unwrap(),
    ]);
    bad_input(&out, &["no-such-dir"]);
}

#[test]
fn outputs_that_name_an_input_or_each_other_are_refused() {
    let original = std::fs::read_to_string(data().join("random-walk.toml")).unwrap();
    let dir = scratch("clash");
    std::fs::create_dir_all(&dir).unwrap();
    std::fs::copy(
        data().join("random-walk-reference.csv"),
        dir.join("random-walk-reference.csv"),
    )
    .unwrap();
    let spec = dir.join("spec.toml");
    std::fs::write(&spec, &original).unwrap();
    let s = spec.to_str().unwrap();
    // The same file spelled another way (through `.`) still clashes.
    let dotted = dir.join(".").join("spec.toml");
    let d = dotted.to_str().unwrap();
    let csv = dir.join("random-walk-reference.csv");
    let fresh = dir.join("new.out");
    let fresh_dotted = dir.join(".").join("new.out");
    // A symbolic link to the spec is the spec.
    let link = dir.join("link.toml");
    let _ = std::fs::remove_file(&link);
    std::os::unix::fs::symlink(&spec, &link).expect("a symbolic link");
    let l = link.to_str().unwrap();
    for args in [
        vec!["check", s, "--json", d],
        vec!["check", s, "--plot", s],
        vec!["check", s, "--json", csv.to_str().unwrap()],
        vec![
            "check",
            s,
            "--json",
            fresh.to_str().unwrap(),
            "--plot",
            fresh_dotted.to_str().unwrap(),
        ],
        vec!["constants", s, "-o", d],
        vec!["check", s, "--json", l],
        vec!["constants", l, "-o", s],
        vec!["trials", s, "--json", s],
    ] {
        let out = cairn(&args);
        bad_input(&out, &[]);
        let err = stderr(&out);
        assert!(
            err.contains("itself") || err.contains("the same file"),
            "{args:?}: {err}"
        );
        assert_eq!(std::fs::read_to_string(&spec).unwrap(), original);
        assert!(!fresh.exists(), "{args:?} wrote before refusing");
    }
}

#[test]
fn a_report_naming_the_recorded_profile_is_refused() {
    let dir = scratch("clash-profile");
    std::fs::create_dir_all(&dir).unwrap();
    for f in ["recorded-rover.toml", "recorded-odometry.csv"] {
        std::fs::copy(data().join(f), dir.join(f)).unwrap();
    }
    let csv = dir.join("recorded-odometry.csv");
    let before = std::fs::read(&csv).unwrap();
    let spec = dir.join("recorded-rover.toml");
    let out = cairn(&[
        "check",
        spec.to_str().unwrap(),
        "--plot",
        csv.to_str().unwrap(),
    ]);
    bad_input(&out, &["--plot", "recorded profile itself"]);
    assert_eq!(std::fs::read(&csv).unwrap(), before);
}

// ---- The external reference ---------------------------------------------

/// The random-walk spec against a CSV with `rows`; returns the output and
/// the JSON report.
fn with_external(tag: &str, rows: &str) -> (Output, serde_json::Value) {
    let text = std::fs::read_to_string(data().join("random-walk.toml")).unwrap();
    let csv = scratch(&format!("{tag}.csv"));
    std::fs::write(&csv, rows).unwrap();
    let spec = scratch(&format!("{tag}.toml"));
    std::fs::write(
        &spec,
        text.replace("random-walk-reference.csv", csv.to_str().unwrap()),
    )
    .unwrap();
    let json = scratch(&format!("{tag}.json"));
    let out = cairn(&[
        "check",
        spec.to_str().unwrap(),
        "--json",
        json.to_str().unwrap(),
    ]);
    let report = std::fs::read_to_string(&json).expect("a JSON report");
    (out, serde_json::from_str(&report).expect("parses"))
}

#[test]
fn an_external_reference_that_disagrees_fails_the_verdict() {
    // The steady posterior of a random walk with q = r = 1 is
    // (sqrt(5) - 1) / 2 = 0.6180340 (closed form, docs/references.md);
    // a file holding 0.7 disagrees by 13%.
    let mut rows = String::from("step,time_s,P\n");
    for k in 1..=20 {
        rows.push_str(&format!("{k},{},0.7\n", f64::from(k) / 10.0));
    }
    let (out, r) = with_external("ext-wrong", &rows);
    assert_eq!(out.status.code(), Some(1), "{}", stderr(&out));
    let text = String::from_utf8_lossy(&out.stdout);
    assert!(text.contains("DISAGREES"), "{text}");
    assert!(
        text.contains("Spec's choice ([flash]): f32 joseph FAIL"),
        "{text}"
    );
    assert_eq!(r["run"]["flash_passes"], false);
    let reasons = r["run"]["variants"][0]["verdict"]["reasons"].to_string();
    assert!(
        reasons.contains("external reference disagrees"),
        "{reasons}"
    );
}

#[test]
fn an_external_reference_without_usable_rows_fails_the_verdict() {
    // Rows only after the horizon (20 steps): nothing is compared.
    let rows = "step,time_s,P\n100,10.0,0.6180340\n";
    let (out, r) = with_external("ext-none", rows);
    assert_eq!(out.status.code(), Some(1), "{}", stderr(&out));
    assert_eq!(r["run"]["external"]["rows"], 0);
    let reasons = r["run"]["variants"][0]["verdict"]["reasons"].to_string();
    assert!(reasons.contains("no row"), "{reasons}");
}

// ---- Messages ------------------------------------------------------------

#[test]
fn a_missing_model_is_named_without_a_position() {
    let spec = linear_spec(
        "no-model",
        "[model]\nkind = \"discrete\"\nstep_hz = 10.0\nf = [[1.0]]\nq = [[1.0]]\n",
        "",
    );
    let out = cairn(&["check", spec.to_str().unwrap()]);
    bad_input(
        &out,
        &["no-model.toml: field `model`: missing field `model`"],
    );
    assert!(!stderr(&out).contains("title"), "{}", stderr(&out));
    // A field missing inside a table is named inside it, at the table.
    let spec = linear_spec("no-step", "step_hz = 10.0\n", "");
    let out = cairn(&["check", spec.to_str().unwrap()]);
    let at = format!("no-step.toml:{}:1:", line_of(&spec, "[model]"));
    bad_input(&out, &[&at, "field `model.step_hz`"]);
}

#[test]
fn file_level_errors_print_no_position() {
    let out = cairn(&["check", "/no/such/spec.toml"]);
    bad_input(&out, &["/no/such/spec.toml: cannot read the spec file"]);
    assert!(!stderr(&out).contains(":0:0"), "{}", stderr(&out));
}

#[test]
fn control_characters_in_names_are_escaped_when_printed() {
    let spec = linear_spec(
        "escapes",
        "title = \"one state\"",
        "title = \"red \\u001b[31m title\\r\"",
    );
    let text = std::fs::read_to_string(&spec)
        .unwrap()
        .replace("name = \"gauge\"", "name = \"g\\u001b[2Jauge\"");
    std::fs::write(&spec, text).unwrap();
    for args in [
        vec!["check", "-q"],
        vec!["check"],
        vec!["trials", "--runs", "2"],
    ] {
        let mut a = args.clone();
        a.insert(1, spec.to_str().unwrap());
        let out = cairn(&a);
        let stdout = String::from_utf8_lossy(&out.stdout);
        assert!(
            !stdout.contains('\u{1b}') && !stdout.contains('\r'),
            "{a:?}"
        );
        assert!(
            stdout.contains("red \\u{1b}[31m title\\r"),
            "{a:?}: {stdout}"
        );
    }
    let out = cairn(&["check", spec.to_str().unwrap()]);
    assert!(String::from_utf8_lossy(&out.stdout).contains("g\\u{1b}[2Jauge"));
    // In an error message too: an unknown kind quoted from the spec.
    let bad = linear_spec(
        "escapes-kind",
        "kind = \"discrete\"",
        "kind = \"\\u001b[2J\"",
    );
    let out = cairn(&["check", bad.to_str().unwrap()]);
    bad_input(&out, &["\\u{1b}[2J"]);
    assert!(!stderr(&out).contains('\u{1b}'));
}

#[test]
fn a_dropout_beyond_the_horizon_is_refused() {
    // The horizon is 20 steps at 10 Hz: 2 s.
    let spec = linear_spec(
        "late-dropout",
        "r = [[1.0]]",
        "r = [[1.0]]\ndropouts = [[5.0, 6.0]]",
    );
    let out = cairn(&["check", spec.to_str().unwrap()]);
    let at = format!("late-dropout.toml:{}:", line_of(&spec, "dropouts"));
    bad_input(&out, &[&at, "`channel[0].dropouts`", "end of the horizon"]);
    // Inside the horizon it is accepted.
    let spec = linear_spec(
        "early-dropout",
        "r = [[1.0]]",
        "r = [[1.0]]\ndropouts = [[0.5, 6.0]]",
    );
    let out = cairn(&["check", spec.to_str().unwrap(), "-q"]);
    assert!(matches!(out.status.code(), Some(0 | 1)), "{}", stderr(&out));
}

#[test]
fn mode_on_a_linear_model_is_refused() {
    let spec = data().join("random-walk.toml");
    let out = cairn(&["check", spec.to_str().unwrap(), "--mode", "end-to-end"]);
    bad_input(&out, &["--mode applies to the planar-pose model only"]);
}

/// A folder holding only links to the named programs found on PATH, to
/// run `cairn` as on a machine that lacks the others.
fn path_with(name: &str, programs: &[&str]) -> PathBuf {
    let dir = scratch(name);
    let _ = std::fs::remove_dir_all(&dir);
    std::fs::create_dir_all(&dir).expect("tool folder");
    let path = std::env::var_os("PATH").unwrap_or_default();
    for p in programs {
        let found = std::env::split_paths(&path)
            .map(|d| d.join(p))
            .find(|f| f.is_file())
            .unwrap_or_else(|| panic!("{p} is needed for this test"));
        std::os::unix::fs::symlink(found, dir.join(p)).expect("link");
    }
    dir
}

/// The first llvm-objdump on PATH (Debian ships it as llvm-objdump-14).
fn objdump_name() -> &'static str {
    ["llvm-objdump", "llvm-objdump-14"]
        .into_iter()
        .find(|n| {
            Command::new(n)
                .arg("--version")
                .output()
                .is_ok_and(|o| o.status.success())
        })
        .expect("llvm-objdump is needed for this test")
}

#[test]
fn cost_without_objdump_or_qemu_is_bad_input_naming_the_tool() {
    let elf = env!("CARGO_BIN_EXE_cairn");
    let nothing = path_with("no-tools", &[]);
    let out = Command::new(elf)
        .args(["cost", "--elf", elf])
        .env("PATH", &nothing)
        .output()
        .expect("runs");
    bad_input(&out, &["llvm-objdump", "is not installed"]);
    let objdump_only = path_with("objdump-only", &[objdump_name()]);
    let out = Command::new(elf)
        .args(["cost", "--elf", elf])
        .env("PATH", &objdump_only)
        .output()
        .expect("runs");
    bad_input(&out, &["qemu-system-arm", "is not installed"]);
}

#[test]
fn cost_of_an_elf_without_probe_symbols_is_bad_input_naming_the_contract() {
    // The cairn binary itself: a real ELF with no probe functions.
    let elf = env!("CARGO_BIN_EXE_cairn");
    let out = cairn(&["cost", "--elf", elf]);
    bad_input(
        &out,
        &[
            "holds no probe functions",
            "cairn_probe__NAME",
            "docs/target-probes.md",
        ],
    );
    let out = cairn(&["cost", "--elf", "/nonexistent/probe.elf"]);
    bad_input(&out, &["no such ELF"]);
}

#[test]
fn cost_of_a_probe_crate_that_does_not_build_is_bad_input_with_the_compiler_message() {
    let dir = scratch("broken-probe");
    std::fs::create_dir_all(dir.join("src")).expect("crate folder");
    std::fs::write(
        dir.join("Cargo.toml"),
        "[package]\nname = \"broken-probe\"\nversion = \"0.1.0\"\nedition = \"2024\"\n\n\
         [workspace]\n",
    )
    .expect("manifest");
    std::fs::write(
        dir.join("src/main.rs"),
        "fn main() {\n    let n: u32 = \"not a number\";\n}\n",
    )
    .expect("source");
    let out = cairn(&["cost", "--probe", dir.to_str().expect("utf-8 path")]);
    bad_input(
        &out,
        &["building the cost probe failed", "mismatched types"],
    );
    // A folder with no crate, and --bin without --probe, are refused too.
    let out = cairn(&["cost", "--probe", "/nonexistent/probe-crate"]);
    bad_input(&out, &["no Cargo.toml"]);
    let out = cairn(&["cost", "--bin", "tug_cost"]);
    assert_eq!(out.status.code(), Some(2), "{}", stderr(&out));
}
