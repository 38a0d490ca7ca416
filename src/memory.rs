//! Memory advice for large buffers (statevectors, the IR of large files).

/// Asks the kernel to back the capacity of `v` with transparent huge pages, before
/// it is first touched. Large passes over memory otherwise spend much of their time
/// on page faults and page-table walks for 4 KiB pages. Only advice: without
/// transparent huge pages (or off Linux) nothing changes.
pub fn advise_huge_pages<T>(v: &mut Vec<T>) {
    #[cfg(target_os = "linux")]
    {
        let bytes = v.capacity() * std::mem::size_of::<T>();
        if bytes < 4 << 20 {
            return;
        }
        let huge = 2usize << 20;
        let start = v.as_mut_ptr() as usize;
        let aligned = start.div_ceil(huge) * huge;
        let end = start + bytes;
        if end > aligned + huge {
            let length = (end - aligned) / huge * huge;
            // SAFETY: the range lies inside the allocation of `v` and is page aligned;
            // the advice only changes how the kernel backs those pages.
            unsafe {
                libc::madvise(aligned as *mut libc::c_void, length, libc::MADV_HUGEPAGE);
            }
        }
    }
    #[cfg(not(target_os = "linux"))]
    let _ = v;
}

/// What the process may really use for large buffers, in bytes: three quarters of
/// the smaller of the room left under the address-space limit (`ulimit -v`) and the
/// memory the system reports available. 8 GiB where neither can be read.
pub fn default_budget() -> usize {
    let mut room = usize::MAX;
    #[cfg(target_os = "linux")]
    {
        let mut lim = libc::rlimit {
            rlim_cur: 0,
            rlim_max: 0,
        };
        // SAFETY: getrlimit writes into the struct it is given.
        if unsafe { libc::getrlimit(libc::RLIMIT_AS, &mut lim) } == 0
            && lim.rlim_cur != libc::RLIM_INFINITY
        {
            let used = address_space_used().unwrap_or(0);
            room = room.min((lim.rlim_cur as usize).saturating_sub(used));
        }
        if let Some(avail) = meminfo_available() {
            room = room.min(avail);
        }
    }
    if room == usize::MAX {
        return 8 << 30;
    }
    room / 4 * 3
}

/// The bytes of address space the process maps now (`/proc/self/statm`).
#[cfg(target_os = "linux")]
fn address_space_used() -> Option<usize> {
    let statm = std::fs::read_to_string("/proc/self/statm").ok()?;
    let pages: usize = statm.split_whitespace().next()?.parse().ok()?;
    // SAFETY: sysconf has no preconditions.
    let page = unsafe { libc::sysconf(libc::_SC_PAGESIZE) };
    Some(pages * page.max(4096) as usize)
}

/// `MemAvailable` of `/proc/meminfo`, in bytes.
#[cfg(target_os = "linux")]
fn meminfo_available() -> Option<usize> {
    let info = std::fs::read_to_string("/proc/meminfo").ok()?;
    let line = info.lines().find(|l| l.starts_with("MemAvailable:"))?;
    let kib: usize = line.split_whitespace().nth(1)?.parse().ok()?;
    Some(kib * 1024)
}
