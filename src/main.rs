//! The `retake` command: argument parsing and printing only; the work is in the library.

mod cli;

fn main() -> std::process::ExitCode {
    cli::main()
}
