//! The `edgetherm` binary: parse the command line, run the command, exit with its status
//! (0 success, 2 invalid input, 3 alarm, 1 internal error; README, exit status). All the work is in
//! [`cli`] and the library.

mod cli;

fn main() {
    std::process::exit(cli::run());
}
