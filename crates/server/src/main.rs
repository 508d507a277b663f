//! The wardcast binary: command line and local web server.

fn main() {}
