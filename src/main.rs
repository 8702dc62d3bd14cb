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

// mimalloc's own option setter (mimalloc.h, version 3; linked from the allocator's
// static library).
extern "C" {
    fn mi_option_set(option: std::ffi::c_int, value: std::ffi::c_long);
}

/// `mi_option_purge_delay` in mimalloc 3's option list (`mi_option_e`).
const MI_OPTION_PURGE_DELAY: std::ffi::c_int = 15;

fn main() -> ExitCode {
    // No transparent huge pages: the allocator asks for them on its large regions, and
    // the kernel then zeroes 2 MiB for every region first touched, most of it never used
    // (a batch after a pause spent 0.75 s of system time on it instead of 0.2 s, and
    // peaked 70 MB higher; DEVELOPERS.md, "Throughput").
    #[cfg(target_os = "linux")]
    // SAFETY: PR_SET_THP_DISABLE only sets a flag of this process.
    unsafe {
        libc::prctl(libc::PR_SET_THP_DISABLE, 1, 0, 0, 0);
    }
    // Freed memory is kept for the next image instead of being handed back to the kernel
    // and zeroed again when it is touched; the peak is unchanged. A value the user set in
    // MIMALLOC_PURGE_DELAY stands.
    if std::env::var_os("MIMALLOC_PURGE_DELAY").is_none() {
        // SAFETY: sets one integer option of the allocator; any value is valid for it.
        unsafe { mi_option_set(MI_OPTION_PURGE_DELAY, -1) };
    }
    chromasift::cli::run(STDOUT_CLOSED_AT_START.load(Ordering::SeqCst))
}
