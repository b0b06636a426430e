//! Every call into the operating system and the C allocator that Rust's
//! standard library does not offer: thread CPU priority, glibc's allocator
//! settings and trim, and the open-file limit. The one module of the
//! workspace with `unsafe` code: each call is a plain libc function whose
//! only precondition is a valid pointer to a struct we own, stated at the
//! call. Every other module and crate forbids `unsafe`.
#![allow(unsafe_code)]

use crate::settings::CustomizePriority;

/// Lowers the calling thread's CPU priority; true if it took effect.
#[cfg(target_os = "linux")]
pub fn lower_thread_priority(p: CustomizePriority) -> bool {
    match p {
        CustomizePriority::Normal => true,
        CustomizePriority::Idle => {
            let param = libc::sched_param { sched_priority: 0 };
            // SAFETY: pid 0 is the calling thread; `param` is a valid
            // sched_param for SCHED_IDLE (priority must be 0).
            let r = unsafe { libc::sched_setscheduler(0, libc::SCHED_IDLE, &param) };
            r == 0 || lower_thread_priority(CustomizePriority::Low)
        }
        CustomizePriority::Low => {
            // SAFETY: on Linux PRIO_PROCESS with who = gettid() sets the nice
            // value of that one thread; raising it needs no privilege.
            let r = unsafe {
                let tid = libc::syscall(libc::SYS_gettid) as libc::id_t;
                libc::setpriority(libc::PRIO_PROCESS, tid, 19)
            };
            r == 0
        }
    }
}

/// Lowers the calling thread's CPU priority; true if it took effect.
#[cfg(not(target_os = "linux"))]
pub fn lower_thread_priority(p: CustomizePriority) -> bool {
    p == CustomizePriority::Normal
}

/// The calling thread's scheduling policy (Linux `sched_getscheduler`).
#[cfg(target_os = "linux")]
pub fn thread_policy() -> i32 {
    // SAFETY: querying the calling thread's policy has no preconditions.
    unsafe { libc::sched_getscheduler(0) }
}

/// Returns free heap memory to the kernel (glibc `malloc_trim`; nothing
/// elsewhere). Called on the `updates` thread after a large upload: its
/// freed blocks lie below the heap top and between arenas, where glibc's
/// automatic trim (`M_TRIM_THRESHOLD`, set by [`tune_allocator`]) does not
/// reach.
pub fn trim_heap() {
    #[cfg(all(target_os = "linux", target_env = "gnu"))]
    // SAFETY: malloc_trim only releases free memory of the allocator's
    // arenas; it may be called from any thread at any time.
    unsafe {
        libc::malloc_trim(0);
    }
}

/// Makes glibc's allocator give memory back. By default glibc raises its
/// mmap threshold after a large block is freed (up to 32 MiB), so the
/// per-arc arrays of every later customization (tens of MB each) come from
/// arenas that are never returned to the OS, and each thread that allocates
/// may get an arena of its own. A fixed threshold keeps large arrays in
/// mmap (returned on free); two arenas bound the rest. Measured on NY in
/// BENCHMARKS.md. Skipped when GLIBC_TUNABLES is set (experiments). Call
/// before the runtime starts any thread.
pub fn tune_allocator() {
    #[cfg(all(target_os = "linux", target_env = "gnu"))]
    if std::env::var_os("GLIBC_TUNABLES").is_none() {
        // SAFETY: mallopt only changes allocator parameters; called before
        // the runtime starts any thread.
        unsafe {
            libc::mallopt(libc::M_MMAP_THRESHOLD, 256 * 1024);
            libc::mallopt(libc::M_TRIM_THRESHOLD, 1024 * 1024);
            libc::mallopt(libc::M_ARENA_MAX, 2);
        }
    }
}

fn nofile() -> std::io::Result<libc::rlimit> {
    let mut lim = libc::rlimit {
        rlim_cur: 0,
        rlim_max: 0,
    };
    // SAFETY: getrlimit writes into the struct we pass.
    if unsafe { libc::getrlimit(libc::RLIMIT_NOFILE, &mut lim) } != 0 {
        return Err(std::io::Error::last_os_error());
    }
    Ok(lim)
}

/// The soft limit on open file descriptors (`RLIMIT_NOFILE`), if known.
pub fn nofile_soft_limit() -> Option<u64> {
    // `rlim_t` is u64 on Linux but not on every target.
    #[allow(clippy::unnecessary_cast)]
    nofile().ok().map(|l| l.rlim_cur as u64)
}

/// Raises the soft limit on open file descriptors to the hard limit: each
/// connection is a descriptor, and the usual soft default (1,024, or 256 on
/// some systems) is far below what a busy listener holds. Logs both.
pub fn raise_nofile() {
    let mut lim = match nofile() {
        Ok(l) => l,
        Err(error) => {
            tracing::warn!(%error, "cannot read the file-descriptor limit");
            return;
        }
    };
    let before = lim.rlim_cur;
    if lim.rlim_cur < lim.rlim_max {
        lim.rlim_cur = lim.rlim_max;
        // SAFETY: setrlimit reads the struct we pass; raising the soft limit
        // up to the hard one needs no privilege.
        if unsafe { libc::setrlimit(libc::RLIMIT_NOFILE, &lim) } != 0 {
            tracing::warn!(soft = before, hard = lim.rlim_max, error = %std::io::Error::last_os_error(),
                "cannot raise the file-descriptor soft limit");
            return;
        }
    }
    tracing::info!(
        soft_was = before,
        soft = lim.rlim_cur,
        hard = lim.rlim_max,
        "file-descriptor limit"
    );
}
