//! Speed of `cairn allan`'s analysis: ten million samples of one axis, from
//! the CSV file to the finished term fit, and the Allan accumulator alone.
//!
//! The log (invented white noise plus a bias random walk, about 250 MB) is
//! written once to the temporary directory outside the timed closure.
//! `cargo bench -p cairn-host-check --bench allan`.

use std::fmt::Write as _;
use std::fs::File;
use std::hint::black_box;
use std::io::{BufReader, Write as _};
use std::path::PathBuf;
use std::time::Duration;

use cairn_host_check::allan::{self, Options, variance};
use criterion::{Criterion, criterion_group, criterion_main};

const SAMPLES: usize = 10_000_000;

/// Deterministic samples: Knuth's 64-bit LCG with Box-Muller, white rate
/// noise of 2.9e-3 deg/s per sample at 100 Hz plus a bias random walk.
fn samples() -> Vec<f64> {
    let mut s = 0x2545_f491_4f6c_dd1du64;
    let mut uniform = || {
        s = s
            .wrapping_mul(6_364_136_223_846_793_005)
            .wrapping_add(1_442_695_040_888_963_407);
        ((s >> 11) as f64 + 0.5) / (1u64 << 53) as f64
    };
    let mut bias = 0.01;
    (0..SAMPLES)
        .map(|_| {
            let (u1, u2) = (uniform(), uniform());
            let r = (-2.0 * u1.ln()).sqrt();
            let (a, b) = (
                r * (2.0 * std::f64::consts::PI * u2).cos(),
                r * (2.0 * std::f64::consts::PI * u2).sin(),
            );
            bias += 2e-6 * b;
            bias + 2.9e-3 * a
        })
        .collect()
}

fn write_log(y: &[f64]) -> PathBuf {
    let path = std::env::temp_dir().join(format!("cairn-allan-bench-{}.csv", std::process::id()));
    let mut out = std::io::BufWriter::new(File::create(&path).unwrap());
    writeln!(out, "# invented bench log\ntime[s],gz[deg/s]").unwrap();
    let mut line = String::new();
    for (k, v) in y.iter().enumerate() {
        line.clear();
        let _ = writeln!(line, "{:.2},{v:.6e}", k as f64 * 0.01);
        out.write_all(line.as_bytes()).unwrap();
    }
    out.flush().unwrap();
    path
}

fn bench(c: &mut Criterion) {
    let y = samples();
    let path = write_log(&y);
    let mut g = c.benchmark_group("allan");
    g.sample_size(10).measurement_time(Duration::from_secs(60));
    g.bench_function("file_to_fit_1axis_10M", |b| {
        b.iter(|| {
            let f = File::open(&path).unwrap();
            let a = allan::analyse(
                "bench.csv",
                BufReader::with_capacity(1 << 20, f),
                &Options::default(),
            )
            .unwrap();
            black_box(a.axes[0].fit.clone())
        });
    });
    let sizes = variance::cluster_sizes(10, 1 << 50);
    g.bench_function("accumulate_only_1axis_10M", |b| {
        b.iter(|| {
            let mut acc = variance::AllanAccumulator::new(&sizes);
            for &v in &y {
                acc.push(v);
            }
            black_box(acc.points())
        });
    });
    g.finish();
    let _ = std::fs::remove_file(&path);
}

criterion_group!(benches, bench);
criterion_main!(benches);
