//! The `caravan` command: a thin front end over the library.

mod cli;

fn main() {
    std::process::exit(cli::run());
}
