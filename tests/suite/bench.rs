//! The benchmark harness: its synthetic problems, its reference script and its table. Timings are not
//! asserted (they are figures, not tests); what is asserted is that the problems it times are the right
//! ones — the same optimum from tailpack, from the direct and cutting-plane LPs, and from scipy.

use crate::common::Fixture;
use tailpack::bench::{self, Reference};
use tailpack::models::{Family, Method};

fn repo() -> std::path::PathBuf {
    std::path::PathBuf::from(env!("CARGO_MANIFEST_DIR"))
}

fn rel(a: f64, b: f64) -> f64 {
    (a - b).abs() / b.abs().max(1e-12)
}

/// The bench's problems solved by the reference script (scipy.optimize.linprog, method "highs", with an
/// LP built there independently from the raw data) give tailpack's optimum to 1e-7 relative.
#[test]
fn bench_problems_match_scipy_highs() {
    let dir = tempfile::tempdir().unwrap();
    let sy = bench::synthetic(16, 400, 7);
    let file = bench::write_problem(&sy, dir.path(), 1, 60.0).unwrap();
    let reference = Reference {
        program: "python3".into(),
        script: repo().join("tests/reference/bench_reference.py"),
    };
    let got = bench::run_reference(&reference, &file)
        .expect("python3 with scipy (tests/reference/requirements.txt)");
    assert_eq!(got.len(), Family::ALL.len(), "one line per model");
    let measured = bench::measure(&sy, Method::Direct, 1);
    for (model, r) in got {
        assert_eq!(r.status, "optimal", "{model}");
        let (_, ours) = measured
            .iter()
            .find(|(f, _)| f.name() == model)
            .unwrap_or_else(|| panic!("the reference names an unknown model `{model}`"));
        let ours = ours.objective.unwrap();
        let theirs = r.objective.unwrap();
        assert!(
            rel(ours, theirs) < 1e-7,
            "{model}: tailpack {ours} vs scipy {theirs}"
        );
    }
}

/// The cutting-plane method (Künzi-Bay & Mayer 2006) with the warm-started HiGHS model reaches the direct
/// Rockafellar–Uryasev LP's optimum to 1e-7 relative on a bench problem with every kind of row (bounds,
/// group caps, turnover), for all three models, and its portfolio satisfies the constraints.
#[test]
fn cutting_planes_match_the_direct_lp_on_a_bench_problem() {
    let sy = bench::synthetic(60, 4_000, 11);
    let p = sy.problem();
    let direct = bench::measure(&sy, Method::Direct, 1);
    let cuts = bench::measure(&sy, Method::Cuts, 1);
    for ((model, direct), (_, cuts)) in direct.iter().zip(&cuts) {
        let (d, c) = (direct.objective.unwrap(), cuts.objective.unwrap());
        assert!(rel(c, d) < 1e-7, "{model:?}: cuts {c} vs direct {d}");
        assert!(
            cuts.rounds > 1,
            "{model:?}: the cut loop ran more than one LP"
        );
    }
    let w = p.max_return_by(Some(sy.cap), Method::Cuts).unwrap().weights;
    let v = tailpack::models::verify(&p, &w, Some(sy.cap), None);
    assert!(v < 1e-7, "cut solution violates its constraints by {v}");
}

/// The synthetic problems are deterministic: the same size and seed give the same matrix.
#[test]
fn synthetic_problems_are_reproducible() {
    let a = bench::synthetic(9, 50, 3);
    let b = bench::synthetic(9, 50, 3);
    assert_eq!(a.set.returns, b.set.returns);
    assert_ne!(a.set.returns, bench::synthetic(9, 50, 4).set.returns);
}

/// `tailpack bench` prints one table row per model and size, and refuses a malformed size.
#[test]
fn bench_command_prints_a_row_per_model() {
    let f = Fixture::new();
    let r = f.run(&[
        "bench",
        "--sizes",
        "8x60,12x90",
        "--runs",
        "1",
        "--work",
        "scratch",
    ]);
    assert_eq!(r.code, 0, "{}", r.stderr);
    let rows: Vec<&str> = r
        .stdout
        .lines()
        .filter(|l| l.starts_with("| 8 |") || l.starts_with("| 12 |"))
        .collect();
    assert_eq!(rows.len(), 6, "{}", r.stdout);
    for m in Family::ALL {
        assert_eq!(
            rows.iter()
                .filter(|l| l.contains(&format!("| {} |", m.name())))
                .count(),
            2
        );
    }
    // A malformed size is a command-line error (exit 2), refused before anything is timed.
    let bad = f.run(&["bench", "--sizes", "12by90"]);
    assert_eq!(bad.code, 2);
    assert!(
        bad.stderr.contains("`12by90` is not ASSETSxSCENARIOS"),
        "{}",
        bad.stderr
    );
}

/// Above `scenarios::PARALLEL_FROM` entries the portfolio losses and the cut sums run on several threads.
/// Same inputs, same bytes: the results must be bit for bit those of one thread, and each portfolio return
/// must equal the plain dot product r_k · x computed here.
#[test]
fn parallel_losses_and_cuts_do_not_depend_on_the_thread_count() {
    use tailpack::models::lp::{self, Lp};
    let sy = bench::synthetic(600, 2_000, 5);
    assert!(sy.set.returns.len() >= tailpack::scenarios::PARALLEL_FROM);
    let n = sy.set.width();
    let x: Vec<f64> = (0..n)
        .map(|i| 1.0 / n as f64 + 1e-4 * (i % 7) as f64)
        .collect();
    let in_pool = |threads: usize| {
        let pool = rayon::ThreadPoolBuilder::new()
            .num_threads(threads)
            .build()
            .unwrap();
        pool.install(|| {
            let r = sy.set.portfolio_returns(&x);
            let mut l = Lp::new(&sy.feasible, false);
            let (_, cc) = l.cvar_cuts(sy.confidence, 1);
            let tail: Vec<usize> = (0..sy.set.len()).filter(|k| r[*k] < 0.0).collect();
            let cut: Vec<f64> = lp::cut_terms(&sy.set, &tail, &l.weights, cc, 0)
                .iter()
                .map(|t| t.1)
                .collect();
            (r, cut)
        })
    };
    let (one, cut_one) = in_pool(1);
    let (two, cut_two) = in_pool(2);
    assert_eq!(
        one.iter().map(|v| v.to_bits()).collect::<Vec<_>>(),
        two.iter().map(|v| v.to_bits()).collect::<Vec<_>>()
    );
    assert_eq!(
        cut_one.iter().map(|v| v.to_bits()).collect::<Vec<_>>(),
        cut_two.iter().map(|v| v.to_bits()).collect::<Vec<_>>()
    );
    // Each entry is its row's own dot product: the eight-lane sum exactly, and the plain sum up to the
    // rounding of a different order of additions.
    for k in [0, 777, sy.set.len() - 1] {
        let row = sy.set.row(k);
        assert_eq!(
            one[k],
            tailpack::scenarios::dot_lanes(row, &x),
            "scenario {k}"
        );
        let plain: f64 = row.iter().zip(&x).map(|(r, w)| r * w).sum();
        let size: f64 = row.iter().zip(&x).map(|(r, w)| (r * w).abs()).sum();
        assert!((one[k] - plain).abs() <= 1e-14 * size, "scenario {k}");
    }
}
