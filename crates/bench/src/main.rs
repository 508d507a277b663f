//! The benchmark harness: prints speed and memory figures for the engine and store.
//!
//! Run `cargo run --release -p wardcast-bench -- [fit|select|store|all]`. Figures are printed
//! as a table; nothing here asserts on time (timing belongs to this harness, not to tests).

mod fit;
mod report;
mod select;
#[cfg(feature = "store")]
mod store;

fn main() {
    let which = std::env::args().nth(1).unwrap_or_else(|| "all".to_owned());
    let mut table = report::Table::default();
    let all = which == "all";
    if all || which == "fit" {
        fit::run(&mut table);
    }
    if all || which == "select" {
        select::run(&mut table);
    }
    #[cfg(feature = "store")]
    if all || which == "store" {
        store::run(&mut table);
    }
    table.print();
}
