//! The `baserate` command: parses arguments, calls the library, and turns the
//! outcome into an exit code (see the command-line contract).

mod cli;

fn main() -> std::process::ExitCode {
    cli::main()
}
