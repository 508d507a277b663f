//! The benchmark harness: prints speed and memory figures for the engine and store.

fn main() {}
