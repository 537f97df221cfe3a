//! The `caravan` command: a thin front end over the library.

mod cli;

fn main() {
    restore_default_sigpipe();
    keep_freed_memory_for_reuse();
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

/// Every frame needs a few buffers of several MB; glibc returns such blocks to the kernel at
/// once (mmap/munmap) and faults them in again for the next frame, which costs time and makes
/// worker threads queue on the process's memory-map lock. Serving them from the heap instead
/// keeps the freed buffers for the next frame (measured in benches/versus_python.sh: 100
/// frames of 1024² px, 4.1 s → 3.6 s on 2 cores, peak memory +12 MB).
#[cfg(all(target_os = "linux", target_env = "gnu"))]
fn keep_freed_memory_for_reuse() {
    extern "C" {
        fn mallopt(param: i32, value: i32) -> i32;
    }
    const M_TRIM_THRESHOLD: i32 = -1; // glibc malloc.h
    const M_MMAP_THRESHOLD: i32 = -3;
    // SAFETY: mallopt(3) with documented parameters, before any allocation-heavy work or thread.
    unsafe {
        mallopt(M_MMAP_THRESHOLD, 256 << 20);
        mallopt(M_TRIM_THRESHOLD, 512 << 20);
    }
}

#[cfg(not(all(target_os = "linux", target_env = "gnu")))]
fn keep_freed_memory_for_reuse() {}
