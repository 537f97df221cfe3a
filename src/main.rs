//! The `caravan` command: a thin front end over the library.

mod cli;

fn main() {
    restore_default_sigpipe();
    caravan::keep_freed_memory_for_reuse();
    std::process::exit(cli::run());
}

/// Rust ignores SIGPIPE, so printing into a closed pipe (`caravan score ... | head`) would
/// panic; with the default action the process ends quietly, as Unix tools do.
#[cfg(unix)]
fn restore_default_sigpipe() {
    extern "C" {
        fn signal(signum: i32, handler: usize) -> usize;
    }
    const SIGPIPE: i32 = 13; // POSIX signal number on Linux and the BSDs
    const SIG_DFL: usize = 0;
    // SAFETY: signal(2) with the default disposition, before any other thread exists.
    unsafe {
        signal(SIGPIPE, SIG_DFL);
    }
}

#[cfg(not(unix))]
fn restore_default_sigpipe() {}
