//! Accuracy against the NIST StRD linear least-squares datasets, scored by the log relative error.
//!
//! Source of the data and certified values: NIST Statistical Reference Datasets, linear
//! least-squares regression (https://www.itl.nist.gov/div898/strd/lls/lls.shtml), read from the
//! folder named by `WARDCAST_NIST_DIR` (default `../shared/reference/nist-strd` relative to the
//! workspace root); the files are never copied into the repository.
//! The score is the log relative error of McCullough (1998), "Assessing the reliability of
//! statistical software: Part I", The American Statistician 52(4), 358–366:
//! `LRE = −log10(|x − c| / |c|)`, or `−log10|x − c|` where the certified value `c` is 0, capped at
//! 15 (the certified values carry 15 significant digits).

use std::path::PathBuf;

use wardcast_engine::{Design, Fit, FitOptions, Matrix};

/// The variable naming the NIST folder.
const VAR: &str = "WARDCAST_NIST_DIR";

/// Certified values parsed from one `.dat` file.
struct Certified {
    estimates: Vec<f64>,
    std_devs: Vec<f64>,
    residual_sd: f64,
    r_squared: f64,
    /// Rows of data: response first, then the predictor(s).
    data: Vec<Vec<f64>>,
}

/// How the model of a dataset is built from its data columns.
#[derive(Clone, Copy)]
enum Model {
    /// Polynomial of this degree in the single predictor, with intercept.
    Poly(u32),
    /// Straight line through the origin.
    NoIntercept,
    /// All predictor columns as given, with intercept.
    Linear,
}

/// The eleven datasets, their models and LRE targets (issue: ≥ 9, Filip ≥ 7).
const DATASETS: [(&str, Model, f64); 11] = [
    ("Norris", Model::Poly(1), 9.0),
    ("Pontius", Model::Poly(2), 9.0),
    ("NoInt1", Model::NoIntercept, 9.0),
    ("NoInt2", Model::NoIntercept, 9.0),
    ("Filip", Model::Poly(10), 7.0),
    ("Longley", Model::Linear, 9.0),
    ("Wampler1", Model::Poly(5), 9.0),
    ("Wampler2", Model::Poly(5), 9.0),
    ("Wampler3", Model::Poly(5), 9.0),
    ("Wampler4", Model::Poly(5), 9.0),
    ("Wampler5", Model::Poly(5), 9.0),
];

/// The NIST folder, or a panic that says how to provide it.
fn nist_dir() -> PathBuf {
    let dir = match std::env::var_os(VAR) {
        Some(v) => PathBuf::from(v),
        None => PathBuf::from(env!("CARGO_MANIFEST_DIR")).join("../../../shared/reference/nist-strd"),
    };
    assert!(
        dir.join("Norris.dat").is_file(),
        "the NIST StRD folder was not found at {}: set {VAR} to the folder holding Norris.dat … Wampler5.dat",
        dir.display()
    );
    dir
}

/// Parses a `.dat` file: certified block (lines `Bk estimate sd`, the residual standard deviation
/// and R-squared) and the data, which start on line 61 in every file (README of the folder).
fn parse(text: &str) -> Certified {
    let lines: Vec<&str> = text.lines().map(|l| l.trim_end_matches('\r')).collect();
    let num = |s: &str| s.parse::<f64>().unwrap_or_else(|_| panic!("not a number in a NIST file: {s:?}"));
    let mut estimates = Vec::new();
    let mut std_devs = Vec::new();
    let mut residual_sd = None;
    let mut r_squared = None;
    for line in &lines[..60] {
        let tok: Vec<&str> = line.split_whitespace().collect();
        if tok.len() == 3
            && tok[0].len() > 1
            && tok[0].starts_with('B')
            && tok[0][1..].chars().all(|c| c.is_ascii_digit())
            && tok[1].parse::<f64>().is_ok()
        {
            estimates.push(num(tok[1]));
            std_devs.push(num(tok[2]));
        } else if line.trim_start().starts_with("Standard Deviation") && tok.len() == 3 {
            residual_sd = Some(num(tok[2]));
        } else if line.trim_start().starts_with("R-Squared") && tok.len() == 2 {
            r_squared = Some(num(tok[1]));
        }
    }
    let data: Vec<Vec<f64>> = lines[60..]
        .iter()
        .filter(|l| !l.trim().is_empty())
        .map(|l| l.split_whitespace().map(num).collect())
        .collect();
    Certified {
        estimates,
        std_devs,
        residual_sd: residual_sd.expect("residual standard deviation line"),
        r_squared: r_squared.expect("R-squared line"),
        data,
    }
}

/// McCullough's log relative error, capped at 15.
fn lre(x: f64, c: f64) -> f64 {
    let err = if c == 0.0 { (x - c).abs() } else { ((x - c) / c).abs() };
    if err == 0.0 { 15.0 } else { (-err.log10()).min(15.0) }
}

/// Builds the design of a dataset; powers of x are formed by repeated multiplication.
fn design(name: &str, model: Model, cert: &Certified) -> Design {
    let y: Vec<f64> = cert.data.iter().map(|r| r[0]).collect();
    let n = y.len();
    let keys: Vec<String> = (1..=n).map(|i| format!("{name}-{i}")).collect();
    let (cols, names, intercept): (Vec<Vec<f64>>, Vec<String>, bool) = match model {
        Model::Poly(d) => {
            let x: Vec<f64> = cert.data.iter().map(|r| r[1]).collect();
            let cols = (1..=d).map(|k| x.iter().map(|v| v.powi(k as i32)).collect()).collect();
            (cols, (1..=d).map(|k| format!("x^{k}")).collect(), true)
        }
        Model::NoIntercept => (vec![cert.data.iter().map(|r| r[1]).collect()], vec!["x".to_owned()], false),
        Model::Linear => {
            let k = cert.data[0].len() - 1;
            let cols = (1..=k).map(|j| cert.data.iter().map(|r| r[j]).collect()).collect();
            (cols, (1..=k).map(|j| format!("x{j}")).collect(), true)
        }
    };
    Design::from_matrix(Matrix::from_columns(&cols), y, None, names, keys, intercept)
        .unwrap_or_else(|e| panic!("{name}: design rejected: {e}"))
}

#[test]
#[ignore = "needs the NIST StRD folder: set WARDCAST_NIST_DIR"]
fn nist_strd_log_relative_errors() {
    let dir = nist_dir();
    let mut failures = Vec::new();
    println!("{:<10} {:<14} {:>6} {:>7}", "dataset", "quantity", "LRE", "target");
    for (name, model, target) in DATASETS {
        let path = dir.join(format!("{name}.dat"));
        let text =
            std::fs::read_to_string(&path).unwrap_or_else(|e| panic!("cannot read {}: {e}", path.display()));
        let cert = parse(&text);
        let d = design(name, model, &cert);
        let fit = Fit::new(&d, &FitOptions::default()).unwrap_or_else(|e| panic!("{name}: fit failed: {e}"));
        assert_eq!(fit.coefficients().len(), cert.estimates.len(), "{name}: parameter count");
        let mut rows: Vec<(String, f64)> = Vec::new();
        for (k, (&b, &c)) in fit.coefficients().iter().zip(&cert.estimates).enumerate() {
            rows.push((format!("B{k}"), lre(b, c)));
        }
        for (k, (&s, &c)) in fit.std_errors().iter().zip(&cert.std_devs).enumerate() {
            rows.push((format!("se(B{k})"), lre(s, c)));
        }
        rows.push(("residual SD".to_owned(), lre(fit.sigma(), cert.residual_sd)));
        rows.push(("R-squared".to_owned(), lre(fit.r_squared(), cert.r_squared)));
        let min = rows.iter().map(|r| r.1).fold(f64::INFINITY, f64::min);
        for (q, v) in &rows {
            let flag = if *v < target { "  below target" } else { "" };
            println!("{name:<10} {q:<14} {v:>6.2} {target:>7.1}{flag}");
            if *v < target {
                failures.push(format!("{name} {q}: LRE {v:.2} < {target}"));
            }
        }
        println!("{name:<10} {:<14} {min:>6.2} {target:>7.1}   (minimum)", "min");
    }
    assert!(failures.is_empty(), "LRE under target:\n{}", failures.join("\n"));
}
