//! The `chromasift` binary: records how it was started, then parses and dispatches
//! (everything else is in the library's `cli` part).

use std::process::ExitCode;
use std::sync::atomic::{AtomicBool, Ordering};

/// mimalloc keeps freed pages for reuse, so a batch of images does not pay the kernel
/// again for every large buffer (measured in DEVELOPERS.md).
#[global_allocator]
static ALLOCATOR: mimalloc::MiMalloc = mimalloc::MiMalloc;

/// Whether standard output was closed when the process started (`>&-`). The Rust runtime
/// puts /dev/null in place of a closed descriptor before `main`, so this is recorded by a
/// constructor that runs before it (ELF `.init_array`, on Linux).
static STDOUT_CLOSED_AT_START: AtomicBool = AtomicBool::new(false);

#[cfg(target_os = "linux")]
#[used]
#[link_section = ".init_array"]
static RECORD_CLOSED_STDOUT: extern "C" fn() = {
    extern "C" fn record() {
        // SAFETY: F_GETFD only queries the descriptor's flags.
        if unsafe { libc::fcntl(1, libc::F_GETFD) } == -1 {
            STDOUT_CLOSED_AT_START.store(true, Ordering::SeqCst);
        }
    }
    record
};

fn main() -> ExitCode {
    chromasift::cli::run(STDOUT_CLOSED_AT_START.load(Ordering::SeqCst))
}
