//! The `provisio` command line: parses arguments, calls the library, turns
//! errors into messages and exit codes (0 ok, 1 refused input, 2 usage).

mod cli;

fn main() {
    std::process::exit(cli::run());
}
