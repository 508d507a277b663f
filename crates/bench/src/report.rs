//! The printed figures table shared by every benchmark section, plus timing and memory helpers.

use std::time::{Duration, Instant};

/// One printed figure: what was measured, the value, and the goal it is compared with.
#[derive(Debug)]
pub struct Row {
    pub case: String,
    pub figure: String,
    pub goal: String,
}

/// The figures collected by all sections, printed at the end.
#[derive(Debug, Default)]
pub struct Table {
    rows: Vec<Row>,
}

impl Table {
    /// Adds a figure and echoes it at once so long runs show progress.
    pub fn push(&mut self, case: impl Into<String>, figure: impl Into<String>, goal: impl Into<String>) {
        let row = Row { case: case.into(), figure: figure.into(), goal: goal.into() };
        eprintln!("  {:<58} {:>16}   goal {}", row.case, row.figure, row.goal);
        self.rows.push(row);
    }

    /// Prints every figure as an aligned table on standard output.
    pub fn print(&self) {
        println!("{:<60} {:>18}   goal", "case", "figure");
        for r in &self.rows {
            println!("{:<60} {:>18}   {}", r.case, r.figure, r.goal);
        }
    }
}

/// Runs `f` `reps` times and returns the median wall time.
pub fn median_time<T>(reps: usize, mut f: impl FnMut() -> T) -> Duration {
    let mut times: Vec<Duration> = (0..reps.max(1))
        .map(|_| {
            let t = Instant::now();
            std::hint::black_box(f());
            t.elapsed()
        })
        .collect();
    times.sort();
    times[times.len() / 2]
}

/// Formats a duration in milliseconds with three significant decimals.
pub fn ms(d: Duration) -> String {
    format!("{:.3} ms", d.as_secs_f64() * 1e3)
}

/// Peak resident set size of this process so far, in MiB (Linux `VmHWM`), if readable.
pub fn peak_rss_mib() -> Option<f64> {
    let status = std::fs::read_to_string("/proc/self/status").ok()?;
    let line = status.lines().find(|l| l.starts_with("VmHWM:"))?;
    let kib: f64 = line.split_whitespace().nth(1)?.parse().ok()?;
    Some(kib / 1024.0)
}
