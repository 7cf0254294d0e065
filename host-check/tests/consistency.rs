//! Monte Carlo consistency checks: the chi-square intervals against the
//! published values, and the verdicts on a tuned and a mistuned filter.

use cairn_host_check::consistency::{
    self, ConsistencyError, Form, Options, Variant, Verdict, average_interval,
};
use cairn_host_check::spec::{
    ChannelKind, ChannelPlan, Flash, Mode, ModelPlan, Plan, Precision, Profile, Segment, StateInfo,
    Thresholds,
};
use nalgebra::DMatrix;

/// A nearly-constant-velocity track (position, velocity) with a position
/// sensor: an invented demo cart, not a published case.
fn cart(steps: u64, seed: u64) -> Plan {
    let dt = 0.1;
    let q = 0.5;
    Plan {
        title: "cart on a rail".into(),
        file: "<test>".into(),
        states: vec![
            StateInfo {
                name: "position".into(),
                unit: "m".into(),
            },
            StateInfo {
                name: "velocity".into(),
                unit: "m/s".into(),
            },
        ],
        step_hz: 1.0 / dt,
        steps,
        x0: vec![0.0, 1.0],
        p0: DMatrix::from_row_slice(2, 2, &[1.0, 0.0, 0.0, 0.25]),
        model: ModelPlan::Linear {
            f: DMatrix::from_row_slice(2, 2, &[1.0, dt, 0.0, 1.0]),
            // White-noise-acceleration Q = q [[T^3/3, T^2/2], [T^2/2, T]]
            // (Bar-Shalom, Li & Kirubarajan 2001, from memory).
            q: DMatrix::from_row_slice(
                2,
                2,
                &[
                    q * dt * dt * dt / 3.0,
                    q * dt * dt / 2.0,
                    q * dt * dt / 2.0,
                    q * dt,
                ],
            ),
            discretised: false,
        },
        channels: vec![ChannelPlan {
            name: "rail encoder".into(),
            m: 1,
            kind: ChannelKind::Linear(DMatrix::from_row_slice(1, 2, &[1.0, 0.0])),
            r: DMatrix::from_element(1, 1, 0.04),
            rate_hz: 10.0,
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
        seed,
    }
}

/// An invented lawn robot on the core's planar pose model.
fn rover(steps: u64) -> Plan {
    Plan {
        title: "lawn rover".into(),
        file: "<test>".into(),
        states: vec![
            StateInfo {
                name: "x".into(),
                unit: "m".into(),
            },
            StateInfo {
                name: "y".into(),
                unit: "m".into(),
            },
            StateInfo {
                name: "heading".into(),
                unit: "rad".into(),
            },
        ],
        step_hz: 50.0,
        steps,
        x0: vec![0.0, 0.0, 0.3],
        p0: DMatrix::from_diagonal(&nalgebra::DVector::from_column_slice(&[0.04, 0.04, 0.01])),
        model: ModelPlan::Pose {
            speed_var: 4e-3,
            yaw_rate_var: 1e-3,
            heading_drift_var: 1e-7,
            profile_csv: None,
            profile: Profile::Segments(vec![
                Segment {
                    seconds: 4.0,
                    speed: 0.8,
                    yaw_rate: 0.0,
                },
                Segment {
                    seconds: 2.0,
                    speed: 0.5,
                    yaw_rate: 0.6,
                },
            ]),
        },
        channels: vec![
            ChannelPlan {
                name: "beacon fix".into(),
                m: 2,
                kind: ChannelKind::Position,
                r: DMatrix::from_row_slice(2, 2, &[0.01, 0.0, 0.0, 0.01]),
                rate_hz: 5.0,
                dropouts: vec![],
                gate: None,
                line: 0,
            },
            ChannelPlan {
                name: "compass".into(),
                m: 1,
                kind: ChannelKind::Heading,
                r: DMatrix::from_element(1, 1, 4e-3),
                rate_hz: 10.0,
                dropouts: vec![],
                gate: None,
                line: 0,
            },
        ],
        thresholds: Thresholds::default(),
        flash: Flash {
            precision: Precision::F32,
            form: "joseph".into(),
        },
        mode: Mode::EndToEnd,
        recentre_m: None,
        external: None,
        conversions: vec![],
        seed: 7,
    }
}

/// The double-precision Joseph form and the single-precision U-D form.
fn two() -> Vec<Variant> {
    vec![
        Variant::of(Precision::F64, Form::Joseph),
        Variant::of(Precision::F32, Form::Ud),
    ]
}

fn options(runs: usize, steps: u64, scale: f64) -> Options {
    Options {
        runs,
        steps: Some(steps),
        filter_q_scale: scale,
        ..Options::default()
    }
}

#[test]
fn statrs_quantiles_reproduce_the_published_intervals() {
    // Bar-Shalom, Li & Kirubarajan 2001, two-sided 95% intervals for the
    // N-run average of an n-dof chi-square statistic (values as listed in
    // docs/references.md, computed).
    let cases: [(usize, u64, f64, f64, f64); 6] = [
        (3, 50, 2.3597, 3.7160, 5e-5),
        (2, 50, 1.484, 2.591, 5e-4),
        (1, 50, 0.647, 1.428, 5e-4),
        (4, 50, 3.255, 4.821, 5e-4),
        (3, 100, 2.539, 3.499, 5e-4),
        (3, 1, 0.216, 9.348, 5e-4),
    ];
    for (n, runs, lo, hi, tol) in cases {
        let i = average_interval(n, runs, 0.95).unwrap();
        assert!(
            (i.lower - lo).abs() <= tol,
            "n = {n}, N = {runs}: lower {} vs {lo}",
            i.lower
        );
        assert!(
            (i.upper - hi).abs() <= tol,
            "n = {n}, N = {runs}: upper {} vs {hi}",
            i.upper
        );
    }
}

#[test]
fn a_tuned_linear_filter_is_consistent_in_every_variant() {
    // A filter told the truth's own Q and R has NEES ~ chi2(n) and
    // NIS ~ chi2(m) (Bar-Shalom, Li & Kirubarajan 2001).
    let report = consistency::run(&cart(200, 11), &options(50, 200, 1.0)).unwrap();
    assert_eq!(report.variants.len(), 6);
    for v in &report.variants {
        assert_eq!(v.verdict, Verdict::Consistent, "{}", report.text());
        let nees = v.nees.as_ref().unwrap();
        // 50 runs x 200 steps pool 10 000 NEES values: the 95% interval for
        // independent ones is 2 +- 0.04 (chi2(20 000) / 10 000), but the
        // estimation error is correlated from step to step, so fewer values
        // are independent; 0.1 allows for that (measured: 1.971).
        assert!(
            (nees.time_average - 2.0).abs() < 0.1,
            "{}: {}",
            v.label,
            nees.time_average
        );
        // The innovations of the optimal filter are white (Bar-Shalom, Li &
        // Kirubarajan 2001, the innovation sequence), so the pooled NIS
        // values are independent and the chi-square interval for their
        // average applies as it stands (measured: 0.9994 in
        // [0.9725, 1.0279]).
        let nis = v.nis[0].nis.as_ref().unwrap();
        let band = nis.time_average_interval;
        assert!(
            band.lower <= nis.time_average && nis.time_average <= band.upper,
            "{}: {} outside {:?}",
            v.label,
            nis.time_average,
            nis.time_average_interval
        );
    }
}

#[test]
fn a_filter_with_q_ten_times_too_small_is_optimistic() {
    // Q too small makes P too small: NEES above its interval
    // (Bar-Shalom, Li & Kirubarajan 2001; common practice).
    let report = consistency::run(
        &cart(200, 11),
        &Options {
            variants: two(),
            ..options(50, 200, 0.1)
        },
    )
    .unwrap();
    for v in &report.variants {
        assert_eq!(v.verdict, Verdict::Optimistic, "{}", report.text());
        assert!(v.nees.as_ref().unwrap().above > 0.5, "{}", report.text());
    }
}

#[test]
fn a_filter_with_q_ten_times_too_large_is_pessimistic() {
    // Common practice: Q too large makes P too large, NEES below its interval.
    let report = consistency::run(
        &cart(200, 11),
        &Options {
            variants: two(),
            ..options(50, 200, 10.0)
        },
    )
    .unwrap();
    for v in &report.variants {
        assert_eq!(v.verdict, Verdict::Pessimistic, "{}", report.text());
    }
}

#[test]
fn the_report_does_not_depend_on_the_thread_count() {
    let plan = cart(120, 5);
    let opts = Options {
        variants: vec![Variant::of(Precision::F32, Form::Ud)],
        ..options(20, 120, 1.0)
    };
    let one = rayon::ThreadPoolBuilder::new()
        .num_threads(1)
        .build()
        .unwrap();
    let two = rayon::ThreadPoolBuilder::new()
        .num_threads(2)
        .build()
        .unwrap();
    let a = one.install(|| consistency::run(&plan, &opts)).unwrap();
    let b = two.install(|| consistency::run(&plan, &opts)).unwrap();
    let ja = serde_json::to_string(&a).unwrap();
    let jb = serde_json::to_string(&b).unwrap();
    assert_eq!(ja, jb);
    // A different seed gives a different study.
    let c = consistency::run(&cart(120, 6), &opts).unwrap();
    assert_ne!(ja, serde_json::to_string(&c).unwrap());
    // The same with pose filters that re-centre.
    let mut rover = rover(120);
    rover.recentre_m = Some(1.0);
    let opts = Options {
        variants: crate::two(),
        ..options(20, 120, 1.0)
    };
    let a = one.install(|| consistency::run(&rover, &opts)).unwrap();
    let b = two.install(|| consistency::run(&rover, &opts)).unwrap();
    assert!(a.variants.iter().all(|v| v.recentres_per_run > 0.0));
    assert_eq!(
        serde_json::to_string(&a).unwrap(),
        serde_json::to_string(&b).unwrap()
    );
}

#[test]
fn the_pose_model_is_judged_with_wrapped_headings() {
    // An extended filter told the truth's noise stays close to consistent
    // over a short horizon; with Q ten times too small it is optimistic
    // (Bar-Shalom, Li & Kirubarajan 2001).
    let variants = vec![Variant::of(Precision::F32, Form::Joseph)];
    let tuned = consistency::run(
        &rover(500),
        &Options {
            variants: variants.clone(),
            ..options(40, 500, 1.0)
        },
    )
    .unwrap();
    let v = &tuned.variants[0];
    assert_eq!(v.failed_runs, 0, "{}", tuned.text());
    let nees = v.nees.as_ref().unwrap();
    // Linearisation makes an extended filter slightly optimistic; it must
    // still sit near chi2(3) on average and inside the band most of the time.
    assert!((nees.time_average - 3.0).abs() < 0.5, "{}", tuned.text());
    assert!(nees.inside > 0.8, "{}", tuned.text());
    for c in &v.nis {
        assert_eq!(
            c.nis.as_ref().unwrap().verdict,
            Verdict::Consistent,
            "{}",
            tuned.text()
        );
    }
    let mistuned = consistency::run(
        &rover(500),
        &Options {
            variants,
            ..options(40, 500, 0.1)
        },
    )
    .unwrap();
    assert_eq!(
        mistuned.variants[0].verdict,
        Verdict::Optimistic,
        "{}",
        mistuned.text()
    );
}

#[test]
fn bad_options_are_refused_with_a_reason() {
    let plan = cart(10, 1);
    let cases = [
        options(0, 10, 1.0),
        options(5, 0, 1.0),
        options(5, 10, 0.0),
        options(5, 10, f64::NAN),
        Options {
            confidence: 1.5,
            ..options(5, 10, 1.0)
        },
        Options {
            variants: vec![],
            ..options(5, 10, 1.0)
        },
    ];
    for o in cases {
        match consistency::run(&plan, &o) {
            Err(ConsistencyError::Option(msg)) => assert!(!msg.is_empty()),
            other => panic!("expected an option error for {o:?}, got {other:?}"),
        }
    }
    // A covariance that is not one: P0 with a negative eigenvalue.
    let mut bad = cart(10, 1);
    bad.p0 = DMatrix::from_row_slice(2, 2, &[1.0, 2.0, 2.0, 1.0]);
    assert!(matches!(
        consistency::run(&bad, &options(5, 10, 1.0)),
        Err(ConsistencyError::Model(_))
    ));
}

fn cairn(args: &[&str]) -> std::process::Output {
    std::process::Command::new(env!("CARGO_BIN_EXE_cairn"))
        .args(args)
        .output()
        .unwrap()
}

#[test]
fn the_trials_subcommand_gates_on_consistency() {
    let spec = concat!(env!("CARGO_MANIFEST_DIR"), "/specs/wna-tracker.toml");
    let json = std::env::temp_dir().join(format!("cairn-trials-{}.json", std::process::id()));
    let json_arg = json.to_str().unwrap();
    let common = [
        "trials",
        spec,
        "--runs",
        "30",
        "--steps",
        "150",
        "--variant",
        "f32-joseph",
    ];
    let tuned = cairn(&[&common[..], &["--json", json_arg]].concat());
    assert_eq!(
        tuned.status.code(),
        Some(0),
        "{}",
        String::from_utf8_lossy(&tuned.stdout)
    );
    let report: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(&json).unwrap()).unwrap();
    let _ = std::fs::remove_file(&json);
    assert_eq!(report["variants"][0]["verdict"], "consistent");
    assert_eq!(report["variants"][0]["nees"]["dof"], 2);
    // Q ten times too small: exit 1 and the word "optimistic".
    let mistuned = cairn(&[&common[..], &["--filter-q-scale", "0.1"]].concat());
    assert_eq!(mistuned.status.code(), Some(1));
    assert!(String::from_utf8_lossy(&mistuned.stdout).contains("optimistic"));
    // Bad input: exit 2 with a reason.
    for bad in [
        &[&common[..], &["--filter-q-scale", "-1"]].concat()[..],
        &["trials", spec, "--variant", "f16-joseph"],
        &["trials", spec, "--runs", "0"],
        &["trials", "/nonexistent/spec.toml"],
    ] {
        let out = cairn(bad);
        assert_eq!(out.status.code(), Some(2), "{bad:?}");
        assert!(!out.stderr.is_empty());
    }
}

#[test]
fn the_ill_conditioned_update_fails_in_f32_but_not_in_u_d() {
    // Dyer & McReynolds 1969 (reproduced by Grewal & Andrews): at d = 1e-4,
    // near the square root of f32's epsilon, the conventional and Joseph f32
    // updates lose the answer while the factored U-D form survives; f64 is
    // fine (docs/references.md).
    let plan = cairn_host_check::spec::load(std::path::Path::new(concat!(
        env!("CARGO_MANIFEST_DIR"),
        "/specs/dyer-mcreynolds-1e-4.toml"
    )))
    .unwrap();
    let report = consistency::run(&plan, &options(30, 1, 1.0)).unwrap();
    for v in &report.variants {
        let broken = v.variant.precision == Precision::F32 && v.variant.form != Form::Ud;
        if broken {
            assert_ne!(v.verdict, Verdict::Consistent, "{}", report.text());
        } else {
            assert_eq!(v.verdict, Verdict::Consistent, "{}", report.text());
        }
    }
}

#[test]
fn one_step_far_outside_is_judged_even_alone() {
    // With a single step the binomial guard alone would excuse any miss; a
    // point beyond the 99.9% interval is improbable on its own
    // (Bar-Shalom, Li & Kirubarajan 2001 intervals; binomial tail).
    // The start is known almost exactly, so the first step's error is the
    // process noise alone, which the mistuned filter believes 100 times smaller.
    let mut plan = cart(1, 3);
    plan.p0 = DMatrix::from_row_slice(2, 2, &[1e-8, 0.0, 0.0, 1e-8]);
    let report = consistency::run(
        &plan,
        &Options {
            variants: two(),
            ..options(50, 1, 1e-2)
        },
    )
    .unwrap();
    let tuned = consistency::run(
        &plan,
        &Options {
            variants: two(),
            ..options(50, 1, 1.0)
        },
    )
    .unwrap();
    for (bad, good) in report.variants.iter().zip(&tuned.variants) {
        assert_eq!(good.verdict, Verdict::Consistent, "{}", tuned.text());
        let nees = bad.nees.as_ref().unwrap();
        assert_eq!((nees.points, nees.far_outside), (1, 1), "{}", report.text());
        assert_eq!(bad.verdict, Verdict::Optimistic, "{}", report.text());
    }
}

fn far_rover() -> Plan {
    cairn_host_check::spec::load(std::path::Path::new(concat!(
        env!("CARGO_MANIFEST_DIR"),
        "/tests/data/far-rover.toml"
    )))
    .unwrap()
}

/// f64 Joseph and f32 Joseph.
fn joseph_pair() -> Vec<Variant> {
    [Precision::F64, Precision::F32]
        .into_iter()
        .map(|precision| Variant::of(precision, Form::Joseph))
        .collect()
}

#[test]
fn re_centring_makes_the_far_rover_consistent_in_f32() {
    // 20 km out IEEE 754 binary32 spaces coordinates 2^-9 m apart while a
    // 5 ms step adds about 4 mm, so the f32 state drifts from the truth by
    // more than its covariance admits: average NEES far above the two-sided
    // 95% chi-square interval of Bar-Shalom, Li & Kirubarajan 2001. Moved
    // to a local origin (whole metres, exact in f32) the same filter is
    // consistent and its NEES, taken on origin + local state in f64, matches
    // the f64 filter's.
    // 40 runs: dead reckoning keeps each run's error for the whole run, so
    // the time average over few runs is dominated by their start errors.
    let opts = Options {
        variants: joseph_pair(),
        ..options(40, 600, 1.0)
    };
    let far = consistency::run(&far_rover(), &opts).unwrap();
    assert_eq!(far.recentre_m, None);
    let (f64_far, f32_far) = (&far.variants[0], &far.variants[1]);
    assert_eq!(f64_far.verdict, Verdict::Consistent, "{}", far.text());
    assert_eq!(f32_far.verdict, Verdict::Optimistic, "{}", far.text());
    let nees = f32_far.nees.as_ref().unwrap();
    assert!(
        nees.time_average > 3.0 * nees.interval.upper && nees.above > 0.5,
        "{}",
        far.text()
    );
    assert_eq!(f32_far.recentres_per_run, 0.0);

    let mut plan = far_rover();
    plan.recentre_m = Some(10.0);
    let local = consistency::run(&plan, &opts).unwrap();
    assert_eq!(local.recentre_m, Some(10.0));
    for v in &local.variants {
        assert_eq!(v.verdict, Verdict::Consistent, "{}", local.text());
        // The start (20 km out) moves the origin once; 3 s at 0.8 m/s stays
        // within 10 m of it.
        assert_eq!(v.recentres_per_run, 1.0, "{}", local.text());
    }
    let (a, b) = (
        local.variants[0].nees.as_ref().unwrap().time_average,
        local.variants[1].nees.as_ref().unwrap().time_average,
    );
    assert!((a - b).abs() <= 1e-3 * a, "f64 {a} vs f32 {b}");
    // The f64 filter gains nothing from the shift: whole metres are exact.
    let before = f64_far.nees.as_ref().unwrap().time_average;
    assert!((a - before).abs() <= 1e-9 * a, "{before} vs {a}");
    assert!(local.text().contains("1.0 origin shifts per run"));
}

#[test]
fn re_centring_leaves_the_innovations_unchanged() {
    // The innovation z - H x is the same whatever the frame: the fix and
    // the state move by the same offset, and the pose model's Jacobians
    // depend on heading only (common practice). In f64 the average NIS of
    // every channel, and the NEES taken on origin + local state, must agree
    // with the unshifted run to rounding, while the lawn rover does move
    // its origin (1 m).
    let variants = vec![Variant::of(Precision::F64, Form::Ud)];
    let opts = Options {
        variants,
        ..options(10, 300, 1.0)
    };
    let plain = consistency::run(&rover(300), &opts).unwrap();
    let mut plan = rover(300);
    plan.recentre_m = Some(1.0);
    let moved = consistency::run(&plan, &opts).unwrap();
    let (p, m) = (&plain.variants[0], &moved.variants[0]);
    assert!(m.recentres_per_run >= 3.0, "{}", moved.text());
    let close = |a: f64, b: f64| (a - b).abs() <= 1e-9 * a.abs().max(b.abs());
    for (cp, cm) in p.nis.iter().zip(&m.nis) {
        let (sp, sm) = (cp.nis.as_ref().unwrap(), cm.nis.as_ref().unwrap());
        assert_eq!(sp.points, sm.points);
        assert!(
            close(sp.time_average, sm.time_average),
            "NIS {}: {} vs {}",
            cp.channel,
            sp.time_average,
            sm.time_average
        );
        for ((i, a), (j, b)) in sp.series.iter().zip(&sm.series) {
            assert_eq!(i, j);
            assert!(close(*a, *b), "NIS {} at {i}: {a} vs {b}", cp.channel);
        }
    }
    let (np, nm) = (p.nees.as_ref().unwrap(), m.nees.as_ref().unwrap());
    assert!(close(np.time_average, nm.time_average));
}

#[test]
fn the_trials_subcommand_re_centres_on_request() {
    let far = concat!(env!("CARGO_MANIFEST_DIR"), "/tests/data/far-rover.toml");
    let json = std::env::temp_dir().join(format!("cairn-trials-rc-{}.json", std::process::id()));
    let json_arg = json.to_str().unwrap();
    let common = [
        "trials",
        far,
        "--runs",
        "40",
        "--seconds",
        "2",
        "--variant",
        "f32-joseph",
    ];
    // 20 km out, f32 is optimistic (exit 1); with --recentre 10 it is
    // consistent (exit 0) and the report says the lanes re-centre.
    assert_eq!(cairn(&common).status.code(), Some(1));
    let out = cairn(&[&common[..], &["--origin-shift", "10", "--json", json_arg]].concat());
    let text = String::from_utf8_lossy(&out.stdout).into_owned();
    assert_eq!(out.status.code(), Some(0), "{text}");
    assert!(text.contains("Origin shift: each variant") && text.contains("passes 10 m"));
    let report: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(&json).unwrap()).unwrap();
    let _ = std::fs::remove_file(&json);
    assert_eq!(report["origin_shift_m"], 10.0);
    assert_eq!(report["variants"][0]["origin_shifts_per_run"], 1.0);
    // The same validation as `cairn check --recentre`.
    let linear = concat!(env!("CARGO_MANIFEST_DIR"), "/specs/wna-tracker.toml");
    for (args, word) in [
        (vec!["trials", far, "--origin-shift", "0.5"], "at least 1 m"),
        (vec!["trials", far, "--origin-shift", "inf"], "finite"),
        (
            vec!["trials", linear, "--origin-shift", "10"],
            "planar-pose",
        ),
    ] {
        let out = cairn(&args);
        assert_eq!(out.status.code(), Some(2), "{args:?}");
        let err = String::from_utf8_lossy(&out.stderr);
        assert!(err.contains(word), "{args:?}: {err}");
    }
}

/// `cairn trials SPEC --runs N --json ...` on the one-state random walk
/// (20 steps, one channel); returns the report.
#[test]
fn trials_list_variants_in_the_checks_order_and_say_which_test_decided() {
    // The demo's first 2000 steps, 50 runs: the time average of NEES sits
    // just below its interval (2.90 against [2.98, 3.02]; that interval
    // treats the time-correlated NEES samples as independent) while every
    // point is inside its own: the verdict is the per-point test's, and the
    // row says so. Variants asked for out of order come in the check's order.
    let out = cairn(&[
        "trials",
        "--no-progress",
        "--variant",
        "f64-joseph",
        "--variant",
        "f32-conventional",
        "--json",
        std::env::temp_dir()
            .join(format!("cairn-trials-order-{}.json", std::process::id()))
            .to_str()
            .unwrap(),
    ]);
    let text = String::from_utf8_lossy(&out.stdout);
    assert_eq!(out.status.code(), Some(0), "{text}");
    let first = text
        .find("\nf32 conventional\n")
        .expect("f32 conventional listed");
    let second = text.find("\nf64 joseph\n").expect("f64 joseph listed");
    assert!(first < second, "{text}");
    let nees = text
        .lines()
        .find(|l| l.trim_start().starts_with("NEES"))
        .expect("a NEES row");
    assert!(
        nees.ends_with("consistent (per-point test; time avg outside its interval)"),
        "{nees}"
    );
    assert!(text.contains("(per-point test: "), "{text}");
    let json = std::env::temp_dir().join(format!("cairn-trials-order-{}.json", std::process::id()));
    let report: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(&json).unwrap()).unwrap();
    let _ = std::fs::remove_file(&json);
    // The run is named as in the check's JSON: `name` + `spec`.
    assert_eq!(report["variants"][0]["name"], "f32 conventional");
    assert!(report["spec"].as_str().is_some_and(|s| s.contains("demo")));
    assert!(report.get("label").is_none() && report.get("file").is_none());
}

fn trials_json(runs: &str, tag: &str) -> serde_json::Value {
    let spec = concat!(env!("CARGO_MANIFEST_DIR"), "/tests/data/random-walk.toml");
    let json = std::env::temp_dir().join(format!("cairn-trials-{tag}-{}.json", std::process::id()));
    let out = cairn(&[
        "trials",
        spec,
        "--runs",
        runs,
        "--variant",
        "f64-joseph",
        "-q",
        "--json",
        json.to_str().unwrap(),
    ]);
    assert!(
        matches!(out.status.code(), Some(0 | 1)),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let report = serde_json::from_str(&std::fs::read_to_string(&json).unwrap()).unwrap();
    let _ = std::fs::remove_file(&json);
    report
}

fn figure(v: &serde_json::Value) -> f64 {
    v.as_f64()
        .unwrap_or_else(|| panic!("expected a number in the report, found {v}"))
}

#[test]
fn trial_intervals_match_published_chi_square_quantiles() {
    // 5 runs x 20 steps of a 1-dof NEES: the per-step average of 5 runs is
    // chi2(5)/5 and the time average over all 100 values is chi2(100)/100
    // (Bar-Shalom, Li & Kirubarajan 2001). The 95% two-sided quantiles from
    // the NIST/SEMATECH e-Handbook of Statistical Methods, table 1.3.6.7.4
    // (from memory): chi2(5): 0.831, 12.833; chi2(100): 74.222, 129.561.
    // The table's 3 decimals allow 5e-4 on each quantile.
    let r = trials_json("5", "nist");
    for stat in [
        &r["variants"][0]["nees"],
        &r["variants"][0]["nis"][0]["nis"],
    ] {
        assert_eq!(stat["dof"], 1);
        let step = &stat["interval"];
        assert!(
            (figure(&step["lower"]) * 5.0 - 0.831).abs() <= 5e-4,
            "{step}"
        );
        assert!(
            (figure(&step["upper"]) * 5.0 - 12.833).abs() <= 5e-4,
            "{step}"
        );
        let whole = &stat["time_average_interval"];
        assert!(
            (figure(&whole["lower"]) * 100.0 - 74.222).abs() <= 5e-4,
            "{whole}"
        );
        assert!(
            (figure(&whole["upper"]) * 100.0 - 129.561).abs() <= 5e-4,
            "{whole}"
        );
    }
}

#[test]
fn trial_time_average_interval_counts_every_sample() {
    // 37 runs x 20 steps: the time average pools 740 one-dof values, so its
    // interval is the 2.5% and 97.5% quantiles of chi2(740) over 740, here
    // from statrs directly (a general-purpose statistics library) to full
    // precision: a wrong count (runs, steps or dof) moves it by far more.
    use statrs::distribution::{ChiSquared, ContinuousCDF};
    let r = trials_json("37", "count");
    let chi = ChiSquared::new(740.0).unwrap();
    let (lo, hi) = (
        chi.inverse_cdf(0.025) / 740.0,
        chi.inverse_cdf(0.975) / 740.0,
    );
    let whole = &r["variants"][0]["nees"]["time_average_interval"];
    assert!(
        (figure(&whole["lower"]) / lo - 1.0).abs() < 1e-12,
        "{whole} vs {lo}"
    );
    assert!(
        (figure(&whole["upper"]) / hi - 1.0).abs() < 1e-12,
        "{whole} vs {hi}"
    );
    // A cross-check that does not use statrs: the Wilson-Hilferty cube-root
    // approximation (Wilson & Hilferty, PNAS 17, 1931): at 740 degrees of
    // freedom its relative error here is 2.7e-6 (lower) and 1.7e-6 (upper)
    // as measured against statrs; 1e-5 leaves room for nothing more.
    let k = 740.0_f64;
    let z = 1.959_963_984_540_054; // the 97.5% normal quantile (from memory)
    let wh = |z: f64| (1.0 - 2.0 / (9.0 * k) + z * (2.0 / (9.0 * k)).sqrt()).powi(3);
    assert!((wh(-z) / lo - 1.0).abs() < 1e-5, "{} vs {lo}", wh(-z));
    assert!((wh(z) / hi - 1.0).abs() < 1e-5, "{} vs {hi}", wh(z));
}
