//! The wardcast binary: hands the arguments to the command line in [`wardcast::cli`].

fn main() -> std::process::ExitCode {
    wardcast::cli::main()
}
