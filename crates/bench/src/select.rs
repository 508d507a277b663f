//! Benchmarks of best-subset search and cross-validation on seeded synthetic tables.
//!
//! The generator (the pruning of leaps and bounds depends on it): six "real" predictors
//! `z₁ … z₆` are independent standard normals; every other predictor belongs to the block of one
//! real predictor (round robin) and is `x = r·z_b + √(1 − r²)·e` with `e` fresh noise and `r`
//! cycling through 0.3, 0.45, 0.6, 0.7, 0.8, so it correlates with its block's real predictor at
//! about `r` and carries no effect of its own. The response is
//! `y = 1.0 z₁ + 0.8 z₂ + 0.6 z₃ + 0.5 z₄ + 0.4 z₅ + 0.3 z₆ + σε` with `σ² = 2.5·0.4/0.6`, so the
//! population R² is 0.6. Columns are interleaved so the real predictors are not first.

use std::sync::atomic::AtomicBool;
use std::time::{Duration, Instant};

use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;
use wardcast_engine::Matrix;
use wardcast_engine::linalg::{PivotedQr, QrOptions};
use wardcast_engine::selection::{
    CandidateTerm, Candidates, CvOptions, SearchMethod, SearchOptions, Statistics, SubsetSearch,
    best_subsets, cross_validate,
};

use crate::report::{Table, median_time, ms, peak_rss_mib};

struct Gauss(ChaCha8Rng);

impl Gauss {
    fn uniform(&mut self) -> f64 {
        ((self.0.next_u64() >> 11) as f64 + 0.5) / (1u64 << 53) as f64
    }
    fn next(&mut self) -> f64 {
        let (u, v) = (self.uniform(), self.uniform());
        (-2.0 * u.ln()).sqrt() * (2.0 * std::f64::consts::PI * v).cos()
    }
}

/// The seeded synthetic table described in the module notes.
fn synthetic(n: usize, p: usize, seed: u64) -> Candidates {
    let mut g = Gauss(ChaCha8Rng::seed_from_u64(seed));
    let beta = [1.0, 0.8, 0.6, 0.5, 0.4, 0.3];
    let rs = [0.3, 0.45, 0.6, 0.7, 0.8];
    let real: Vec<Vec<f64>> = (0..6).map(|_| (0..n).map(|_| g.next()).collect()).collect();
    let mut cols: Vec<(String, Vec<f64>)> = Vec::with_capacity(p);
    for j in 0..p.saturating_sub(6) {
        let b = j % 6;
        let r: f64 = rs[j % rs.len()];
        let s = (1.0 - r * r).sqrt();
        let c = (0..n).map(|i| r * real[b][i] + s * g.next()).collect();
        cols.push((format!("corr{j:02}_block{b}"), c));
    }
    for (k, z) in real.iter().enumerate() {
        // Interleave: real predictor k goes to position 3k + 1 when there is room.
        let pos = (3 * k + 1).min(cols.len());
        cols.insert(pos, (format!("real{k}"), z.clone()));
    }
    let sigma = (2.5_f64 * 0.4 / 0.6).sqrt();
    let y: Vec<f64> =
        (0..n).map(|i| 5.0 + (0..6).map(|k| beta[k] * real[k][i]).sum::<f64>() + sigma * g.next()).collect();
    let names: Vec<String> = cols.iter().map(|c| c.0.clone()).collect();
    let terms = names
        .iter()
        .enumerate()
        .map(|(j, l)| CandidateTerm { label: l.clone(), columns: j..j + 1 })
        .collect();
    let x = Matrix::from_columns(&cols.into_iter().map(|c| c.1).collect::<Vec<_>>());
    let keys = (0..n).map(|i| format!("a{i:05}")).collect();
    Candidates::new(x, y, None, true, terms, names, keys).expect("synthetic candidates")
}

/// The naive way: one pivoted-QR least-squares fit per subset, keeping the best `top` per size.
fn naive(c: &Candidates, top: usize) -> Vec<Vec<(f64, u64)>> {
    let p = c.terms().len();
    let n = c.nrows();
    let mut best: Vec<Vec<(f64, u64)>> = vec![Vec::new(); p + 1];
    let qr = QrOptions::default();
    for mask in 0u64..(1 << p) {
        let mut cols = vec![vec![1.0; n]];
        cols.extend((0..p).filter(|j| mask >> j & 1 == 1).map(|j| c.x().column(j).to_vec()));
        let x = Matrix::from_columns(&cols);
        let f = PivotedQr::factor(&x, &qr);
        let r = f.least_squares(c.y()).residuals;
        let sse: f64 = r.iter().map(|v| v * v).sum();
        let b = &mut best[mask.count_ones() as usize];
        b.push((sse, mask));
        b.sort_by(|a, b| a.0.total_cmp(&b.0));
        b.truncate(top);
    }
    best
}

/// CPU time of this (single-threaded) process so far, from `/proc/self/schedstat` (nanoseconds
/// on the CPU); `None` where it cannot be read. On a shared machine wall time includes waiting for
/// a core, so both are printed.
fn cpu_time() -> Option<Duration> {
    let s = std::fs::read_to_string("/proc/self/schedstat").ok()?;
    let ns: u64 = s.split_whitespace().next()?.parse().ok()?;
    Some(Duration::from_nanos(ns))
}

/// Runs `f` once and returns its result, wall time and CPU time.
fn timed<T>(f: impl FnOnce() -> T) -> (T, Duration, Option<Duration>) {
    let c0 = cpu_time();
    let t0 = Instant::now();
    let out = std::hint::black_box(f());
    let wall = t0.elapsed();
    let cpu = match (c0, cpu_time()) {
        (Some(a), Some(b)) => Some(b.saturating_sub(a)),
        _ => None,
    };
    (out, wall, cpu)
}

/// Formats wall and CPU time.
fn wall_cpu(wall: Duration, cpu: Option<Duration>) -> String {
    match cpu {
        Some(c) => format!("{} (cpu {})", ms(wall), ms(c)),
        None => ms(wall),
    }
}

fn describe(s: &SubsetSearch) -> String {
    let c = s.counts();
    format!("{} of {} subsets computed, {} pruned, {} refits", c.evaluated, c.subsets, c.pruned, c.refits)
}

/// Runs the selection benchmarks.
pub fn run(table: &mut Table) {
    // County-sized: 3,200 × 20, every subset.
    let county = synthetic(3200, 20, 20_240_604);
    let opts = SearchOptions { method: SearchMethod::Exhaustive, ..SearchOptions::default() };
    let t = median_time(3, || best_subsets(&county, &opts).map(|s| s.counts().evaluated).unwrap_or(0));
    let (s, wall, cpu) = timed(|| best_subsets(&county, &opts).expect("county search"));
    eprintln!("    county: {}", describe(&s));
    table.push(
        "select: county 3,200 x 20, all 1,048,576 subsets, best 5/size + PRESS",
        format!("{} median; last {}", ms(t), wall_cpu(wall, cpu)),
        "< 1 s",
    );
    let ll_opts = SearchOptions { method: SearchMethod::LeapsAndBounds, ..SearchOptions::default() };
    let t_ll = median_time(5, || best_subsets(&county, &ll_opts).map(|s| s.counts().evaluated).unwrap_or(0));
    table.push("select: county, same search by leaps and bounds (for comparison)", ms(t_ll), "-");

    // Speed-up on a 14-predictor slice: the naive QR per subset against the search.
    let cols: Vec<usize> = (0..14).collect();
    let slice = Candidates::new(
        county.x().select_columns(&cols),
        county.y().to_vec(),
        None,
        true,
        county.terms()[..14].to_vec(),
        county.column_names()[..14].to_vec(),
        county.keys().to_vec(),
    )
    .expect("slice");
    let (nb, t_naive, cpu_naive) = timed(|| naive(&slice, 5));
    let rank_opts = SearchOptions { statistics: Statistics::RankingOnly, ..opts.clone() };
    let mut fast = None;
    let t_rank = median_time(9, || {
        fast = Some(best_subsets(&slice, &rank_opts).expect("slice search"));
    });
    let fast = fast.expect("slice search ran");
    let same = fast.sizes().iter().all(|sb| {
        let want: Vec<u64> = nb[sb.size()].iter().map(|x| x.1).collect();
        let got: Vec<u64> =
            sb.models().iter().map(|m| m.terms().iter().fold(0u64, |acc, &t| acc | (1 << t))).collect();
        want == got
    });
    let t_full = median_time(9, || best_subsets(&slice, &opts).map(|s| s.counts().refits).unwrap_or(0));
    table.push(
        "select: naive pivoted QR per subset, 14 predictors (16,384 fits)",
        wall_cpu(t_naive, cpu_naive),
        "-",
    );
    table.push("select: search on the same slice, ranking only (QR-verified)", ms(t_rank), "-");
    table.push("select: search on the same slice, with data refits + PRESS", ms(t_full), "-");
    let lists = if same { "same top-5 lists" } else { "LISTS DIFFER" };
    table.push(
        format!("select: speed-up naive / ranking search ({lists})"),
        format!("{:.0}x", t_naive.as_secs_f64() / t_rank.as_secs_f64()),
        ">= 1000x",
    );
    table.push(
        "select: speed-up naive / search with all statistics",
        format!("{:.0}x", t_naive.as_secs_f64() / t_full.as_secs_f64()),
        "-",
    );

    // CV: 10-fold x 5 repeats on the county table for the 10 models with the smallest AIC.
    let mut ranked: Vec<_> = s.models().filter_map(|m| m.aic().map(|a| (a, m.terms().to_vec()))).collect();
    ranked.sort_by(|a, b| a.0.total_cmp(&b.0));
    let models: Vec<Vec<usize>> = ranked.into_iter().take(10).map(|x| x.1).collect();
    let cvo = CvOptions { folds: 10, repeats: 5, seed: 1, ..CvOptions::default() };
    let t = median_time(3, || cross_validate(&county, &models, &cvo).expect("cv").models().len());
    let (_, wall, cpu) = timed(|| cross_validate(&county, &models, &cvo).expect("cv").models().len());
    table.push(
        "select: CV 10-fold x 5 repeats, county table, top 10 models",
        format!("{} median; last {}", ms(t), wall_cpu(wall, cpu)),
        "< 1 s",
    );

    // Tract-sized: 85,000 × 30, leaps and bounds.
    let before = peak_rss_mib().unwrap_or(f64::NAN);
    let tract = synthetic(85_000, 30, 20_240_605);
    let cancel = AtomicBool::new(false);
    let opts = SearchOptions { cancel: Some(&cancel), ..SearchOptions::default() };
    let (s, wall, cpu) = timed(|| best_subsets(&tract, &opts).expect("tract search"));
    eprintln!("    tract: {}", describe(&s));
    table.push(
        "select: tract 85,000 x 30, best 5/size exact (leaps and bounds)",
        wall_cpu(wall, cpu),
        "< 10 s",
    );
    table.push(
        "select: tract subsets computed / all",
        format!("{} / {}", s.counts().evaluated, s.counts().subsets),
        "-",
    );
    table.push(
        "select: peak RSS after the tract case (MiB)",
        format!("{:.1} (before: {before:.1})", peak_rss_mib().unwrap_or(f64::NAN)),
        "< 200 MB",
    );
}
