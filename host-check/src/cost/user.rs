//! A user's own probe crate (built with the `cairn-probe` harness): building
//! it for the Cortex-M4F and reading the operation order it announces.
//!
//! The contract, also in docs/target-probes.md: every function symbol named
//! `cairn_probe__NAME` is the probe of operation NAME; the binary calls each
//! probe the same number of times, prints `cairn probe: calls N failures F`
//! and `cairn probe: operations NAME ...` over semihosting, and exits with
//! success.

use std::path::{Path, PathBuf};
use std::process::Command;

use super::CostError;

/// A user's probe crate and the binary in it to trace.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct ProbeCrate {
    /// The crate's folder (its `Cargo.toml`); cargo reads the
    /// `.cargo/config.toml` above it, which sets the target, the linker
    /// script and `-C target-cpu=cortex-m4`.
    pub dir: PathBuf,
    /// The binary; `None` takes the crate's only one.
    pub bin: Option<String>,
}

/// Builds the probe crate in release and returns the ELF of its binary,
/// found from cargo's own artifact messages. Variables that would override
/// the crate's target settings are removed.
///
/// # Errors
/// [`CostError::Config`] when the folder holds no `Cargo.toml`, the binary
/// is not there or the crate has several and none was named;
/// [`CostError::Build`] when cargo fails (its diagnostics are the message).
pub fn build_user_probe(probe: &ProbeCrate) -> Result<PathBuf, CostError> {
    if !probe.dir.join("Cargo.toml").is_file() {
        return Err(CostError::Config(format!(
            "{}: no Cargo.toml; --probe names the folder of a probe crate",
            probe.dir.display()
        )));
    }
    let mut cargo = Command::new("cargo");
    cargo
        .args([
            "build",
            "--release",
            "--message-format=json-render-diagnostics",
        ])
        .current_dir(&probe.dir)
        .env_remove("RUSTFLAGS")
        .env_remove("CARGO_ENCODED_RUSTFLAGS")
        .env_remove("CARGO_TARGET_DIR")
        .env_remove("CARGO_BUILD_TARGET")
        .env_remove("CARGO_BUILD_RUSTFLAGS");
    if let Some(bin) = &probe.bin {
        cargo.args(["--bin", bin]);
    } else {
        cargo.arg("--bins");
    }
    let out = cargo
        .output()
        .map_err(|e| CostError::Build(format!("cannot run cargo: {e}")))?;
    if !out.status.success() {
        return Err(CostError::Build(format!(
            "cargo build --release in {} failed:\n{}",
            probe.dir.display(),
            String::from_utf8_lossy(&out.stderr)
        )));
    }
    let built = executables(&String::from_utf8_lossy(&out.stdout));
    pick(&built, probe.bin.as_deref(), &probe.dir)
}

/// The (binary name, executable path) pairs of cargo's
/// `compiler-artifact` messages.
fn executables(messages: &str) -> Vec<(String, PathBuf)> {
    messages
        .lines()
        .filter_map(|l| serde_json::from_str::<serde_json::Value>(l).ok())
        .filter(|v| v["reason"] == "compiler-artifact")
        .filter_map(|v| {
            let exe = v["executable"].as_str()?;
            let name = v["target"]["name"].as_str()?;
            Some((name.to_string(), PathBuf::from(exe)))
        })
        .collect()
}

fn pick(built: &[(String, PathBuf)], bin: Option<&str>, dir: &Path) -> Result<PathBuf, CostError> {
    let names: Vec<&str> = built.iter().map(|b| b.0.as_str()).collect();
    match bin {
        Some(b) => built.iter().find(|(n, _)| n == b).map(|(_, p)| p.clone()),
        None if built.len() == 1 => Some(built[0].1.clone()),
        None => None,
    }
    .ok_or_else(|| {
        CostError::Config(format!(
            "{}: {} (built: {}); name one with --bin",
            dir.display(),
            match bin {
                Some(b) => format!("no binary named {b}"),
                None => "not exactly one binary".to_string(),
            },
            if names.is_empty() {
                "none".to_string()
            } else {
                names.join(", ")
            }
        ))
    })
}

/// The operation names a user probe announces (`cairn probe: operations
/// NAME ...`), in its order.
pub fn announced(stdout: &str) -> Vec<&str> {
    stdout
        .lines()
        .find_map(|l| l.trim().strip_prefix("cairn probe: operations"))
        .map(|rest| rest.split_whitespace().collect())
        .unwrap_or_default()
}

/// Puts the operations in the order the probe announced; operations it did
/// not name keep their place after those it did.
pub fn announced_order(operations: &mut [super::OperationCost], stdout: &str) {
    let order = announced(stdout);
    if order.is_empty() {
        return;
    }
    operations.sort_by_key(|o| {
        order
            .iter()
            .position(|n| *n == o.name)
            .unwrap_or(order.len())
    });
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn reads_cargo_artifact_messages() {
        // The shape of cargo's JSON messages (The Cargo Book, "External
        // tools", JSON messages).
        let messages = concat!(
            r#"{"reason":"compiler-artifact","target":{"name":"cairn_probe","kind":["lib"]},"executable":null}"#,
            "\n",
            r#"{"reason":"compiler-artifact","target":{"name":"tug_cost","kind":["bin"]},"executable":"/t/release/tug_cost"}"#,
            "\n",
            r#"{"reason":"build-finished","success":true}"#,
            "\n"
        );
        let built = executables(messages);
        assert_eq!(
            built,
            vec![("tug_cost".to_string(), PathBuf::from("/t/release/tug_cost"))]
        );
        let dir = Path::new("/p");
        assert_eq!(
            pick(&built, None, dir).expect("one binary"),
            PathBuf::from("/t/release/tug_cost")
        );
        assert!(matches!(
            pick(&built, Some("sled_cost"), dir),
            Err(CostError::Config(m)) if m.contains("no binary named sled_cost") && m.contains("tug_cost")
        ));
        assert!(matches!(pick(&[], None, dir), Err(CostError::Config(_))));
    }

    #[test]
    fn the_announced_order_wins() {
        let stdout = "cairn probe: calls 16 failures 0\n\
                      cairn probe: operations predict wheel radio\n";
        assert_eq!(announced(stdout), ["predict", "wheel", "radio"]);
        assert!(announced("cairn cost probe: calls 16 failures 0\n").is_empty());
    }

    #[test]
    fn refuses_a_folder_without_a_crate() {
        let probe = ProbeCrate {
            dir: PathBuf::from("/nonexistent/probe"),
            bin: None,
        };
        assert!(matches!(
            build_user_probe(&probe),
            Err(CostError::Config(m)) if m.contains("no Cargo.toml")
        ));
    }
}
