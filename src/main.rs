//! The `joulepath` command: parses the arguments, calls the library, maps the outcome to an exit
//! code (0 success, 1 invalid design or input file, 2 usage error).

mod cli;

use std::process::ExitCode;

fn main() -> ExitCode {
    let args = cli::parse();
    match cli::run(&args) {
        Ok(()) => ExitCode::SUCCESS,
        Err(failure) => {
            failure.report();
            ExitCode::from(failure.code())
        }
    }
}
