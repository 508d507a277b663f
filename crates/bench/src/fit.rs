//! Benchmarks of OLS/WLS fitting with full inference on seeded synthetic tables.
//!
//! Tables come from the ChaCha8 generator of `rand_chacha`, seeded with a fixed number per case
//! (printed in the case name), so every run fits the same data. Predictors are uniform on
//! [0, 10) with a shared component that makes neighbouring columns correlated (about 0.3), the
//! response is a linear combination plus normal noise (Box–Muller), and WLS weights are uniform
//! on [500, 20000) like district populations. The timed step is `Fit::new` followed by 95%
//! confidence intervals: QR with refinement, SEs, t and p values, the global F, the sequential
//! ANOVA, partial F tests, leverages and the log-likelihood. Building the design is timed apart.

use rand::{RngExt, SeedableRng};
use rand_chacha::ChaCha8Rng;
use wardcast_engine::{Design, Fit, FitOptions, Matrix};

use crate::report::{Table, median_time, ms, peak_rss_mib};

/// One benchmark case.
struct Case {
    rows: usize,
    predictors: usize,
    weighted: bool,
    seed: u64,
    reps: usize,
    goal: &'static str,
}

/// Builds a seeded synthetic design.
fn synthetic(c: &Case) -> Design {
    let mut rng = ChaCha8Rng::seed_from_u64(c.seed);
    let normal = move |rng: &mut ChaCha8Rng| {
        // Box–Muller: one standard normal from two uniforms.
        let u1: f64 = 1.0 - rng.random::<f64>();
        let u2: f64 = rng.random::<f64>();
        (-2.0 * u1.ln()).sqrt() * (std::f64::consts::TAU * u2).cos()
    };
    let n = c.rows;
    let k = c.predictors;
    let shared: Vec<f64> = (0..n).map(|_| rng.random::<f64>() * 10.0).collect();
    let cols: Vec<Vec<f64>> =
        (0..k).map(|_| shared.iter().map(|s| 0.4 * s + 0.6 * rng.random::<f64>() * 10.0).collect()).collect();
    let beta: Vec<f64> =
        (0..k).map(|j| (j as f64 + 1.0).recip() * if j % 2 == 0 { 1.0 } else { -1.0 }).collect();
    let y: Vec<f64> = (0..n)
        .map(|i| 5.0 + cols.iter().zip(&beta).map(|(c, b)| c[i] * b).sum::<f64>() + 2.0 * normal(&mut rng))
        .collect();
    let weights = c.weighted.then(|| (0..n).map(|_| 500.0 + rng.random::<f64>() * 19_500.0).collect());
    let names = (1..=k).map(|j| format!("x{j}")).collect();
    let keys = (0..n).map(|i| format!("R{i:06}")).collect();
    Design::from_matrix(Matrix::from_columns(&cols), y, weights, names, keys, true)
        .expect("synthetic design is valid")
}

/// CPU time this thread has run, in nanoseconds (Linux `schedstat`), if readable.
///
/// Wall time on a shared machine includes waiting for a core; CPU time does not, so both are
/// printed.
fn thread_cpu_ns() -> Option<u64> {
    let s = std::fs::read_to_string("/proc/thread-self/schedstat").ok()?;
    s.split_whitespace().next()?.parse().ok()
}

/// Mean CPU time of `reps` runs of `f`, in milliseconds, if the clock is readable. The kernel
/// updates the counter at scheduler ticks, so one batch is measured and divided, not each run.
fn mean_cpu_ms<T>(reps: usize, mut f: impl FnMut() -> T) -> Option<f64> {
    let reps = reps.max(1);
    let a = thread_cpu_ns()?;
    for _ in 0..reps {
        std::hint::black_box(f());
    }
    let b = thread_cpu_ns()?;
    Some((b - a) as f64 / 1e6 / reps as f64)
}

/// Runs the fit benchmarks.
pub fn run(table: &mut Table) {
    let cases = [
        Case { rows: 3_200, predictors: 12, weighted: false, seed: 320_012, reps: 101, goal: "< 5 ms" },
        Case {
            rows: 3_200,
            predictors: 12,
            weighted: true,
            seed: 320_013,
            reps: 101,
            goal: "(WLS, no goal)",
        },
        Case { rows: 85_000, predictors: 30, weighted: false, seed: 8_500_030, reps: 9, goal: "< 150 ms" },
        Case {
            rows: 85_000,
            predictors: 30,
            weighted: true,
            seed: 8_500_031,
            reps: 9,
            goal: "(WLS, no goal)",
        },
    ];
    let opts = FitOptions::default();
    for c in &cases {
        let kind = if c.weighted { "WLS" } else { "OLS" };
        let label = format!("fit {kind} {} rows x {} predictors, seed {}", c.rows, c.predictors, c.seed);
        let build = median_time(3, || synthetic(c));
        let design = synthetic(c);
        let t = median_time(c.reps, || {
            let f = Fit::new(&design, &opts).expect("fit");
            let ci = f.conf_int(0.95).expect("level");
            (f, ci)
        });
        table.push(format!("{label}: fit + inference (median of {})", c.reps), ms(t), c.goal);
        let fit_once = || {
            let f = Fit::new(&design, &opts).expect("fit");
            let ci = f.conf_int(0.95).expect("level");
            (f, ci)
        };
        if let Some(cpu) = mean_cpu_ms(c.reps, fit_once) {
            table.push(format!("{label}: same, mean CPU time of the thread"), format!("{cpu:.3} ms"), c.goal);
        }
        table.push(format!("{label}: generate + build design"), ms(build), "(setup, not timed above)");
    }
    if let Some(mib) = peak_rss_mib() {
        table.push("fit section: peak resident memory", format!("{mib:.1} MiB"), "(info)");
    }
}
