//! The `potclim` binary: parse the command line, run, map errors to exit codes.
//! All the work lives in the library (`potclim::cli` and below).

fn main() {
    std::process::exit(potclim::cli::main_entry());
}
