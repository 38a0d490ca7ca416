//! Memory: advice for large buffers (statevectors, the IR of large files), the
//! default budget (what the process may really use), and the [`Pool`] that the
//! comparisons of several jobs share.

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

/// Under an address-space limit (`ulimit -v`), keeps the C allocator to one arena.
/// glibc reserves 64 MiB of address space for each thread's arena, so with a few
/// threads a limit of 150 MiB was used up by reservations before any work (the
/// compile then stopped on a failed allocation). One arena costs some contention
/// between threads, so it is asked for only when a limit is set. Nothing changes
/// off glibc.
pub fn fit_allocator_to_limit() {
    #[cfg(all(target_os = "linux", target_env = "gnu"))]
    {
        let mut lim = libc::rlimit {
            rlim_cur: 0,
            rlim_max: 0,
        };
        // SAFETY: getrlimit writes into the struct it is given; mallopt only sets an
        // allocator parameter, before any thread has started.
        unsafe {
            if libc::getrlimit(libc::RLIMIT_AS, &mut lim) == 0
                && lim.rlim_cur != libc::RLIM_INFINITY
            {
                libc::mallopt(libc::M_ARENA_MAX, 1);
            }
        }
    }
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

/// One memory budget shared by every comparison of a run (`tutti batch`): each
/// state or unitary is reserved before it is allocated and released when it is
/// freed, so N jobs together never ask for more than the budget, rather than N
/// budgets. A reservation larger than the whole budget is refused at once (the
/// caller says so, with the figures); a smaller one waits until the others have
/// released enough.
///
/// Waiting is safe only on a thread that holds no other reservation and is not a
/// worker of the rayon pool (a worker that blocks could be the one the holders need
/// to finish): on a rayon worker, a reservation that does not fit at once is refused
/// instead of waiting. The checker reserves on the caller's thread only.
#[derive(Debug)]
pub struct Pool {
    total: usize,
    used: std::sync::Mutex<usize>,
    freed: std::sync::Condvar,
}

/// Bytes reserved from a [`Pool`], given back when dropped.
#[derive(Debug)]
pub struct Grant<'a> {
    pool: &'a Pool,
    bytes: usize,
}

/// Why a reservation was not granted.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Refusal {
    /// More than the whole budget.
    Exceeds { total: usize },
    /// On a rayon worker, where waiting could deadlock, and the budget was in use.
    Busy { free: usize },
}

impl Pool {
    pub fn new(total: usize) -> Pool {
        Pool {
            total,
            used: std::sync::Mutex::new(0),
            freed: std::sync::Condvar::new(),
        }
    }

    /// The whole budget, in bytes.
    pub fn total(&self) -> usize {
        self.total
    }

    /// Bytes reserved now.
    pub fn in_use(&self) -> usize {
        *self.used.lock().unwrap_or_else(|e| e.into_inner())
    }

    /// Reserves `bytes`, waiting while the others hold too much (see the type's
    /// documentation for when it refuses instead).
    pub fn reserve(&self, bytes: usize) -> Result<Grant<'_>, Refusal> {
        if bytes > self.total {
            return Err(Refusal::Exceeds { total: self.total });
        }
        let on_worker = rayon::current_thread_index().is_some();
        let mut used = self.used.lock().unwrap_or_else(|e| e.into_inner());
        while *used + bytes > self.total {
            if on_worker {
                return Err(Refusal::Busy {
                    free: self.total - *used,
                });
            }
            used = self.freed.wait(used).unwrap_or_else(|e| e.into_inner());
        }
        *used += bytes;
        Ok(Grant { pool: self, bytes })
    }
}

impl Grant<'_> {
    pub fn bytes(&self) -> usize {
        self.bytes
    }
}

impl Drop for Grant<'_> {
    fn drop(&mut self) {
        let mut used = self.pool.used.lock().unwrap_or_else(|e| e.into_inner());
        *used -= self.bytes;
        self.pool.freed.notify_all();
    }
}

/// A [`Pool`] shared between configurations; equal when it is the same pool.
#[derive(Debug, Clone)]
pub struct SharedPool(pub std::sync::Arc<Pool>);

impl PartialEq for SharedPool {
    fn eq(&self, other: &SharedPool) -> bool {
        std::sync::Arc::ptr_eq(&self.0, &other.0)
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use std::sync::Arc;

    #[test]
    fn a_reservation_waits_for_the_others_and_never_exceeds_the_total() {
        let pool = Arc::new(Pool::new(100));
        assert_eq!(
            pool.reserve(101).unwrap_err(),
            Refusal::Exceeds { total: 100 }
        );
        let first = pool.reserve(70).unwrap();
        let peak = Arc::new(std::sync::atomic::AtomicUsize::new(0));
        std::thread::scope(|s| {
            for _ in 0..4 {
                let (pool, peak) = (Arc::clone(&pool), Arc::clone(&peak));
                s.spawn(move || {
                    let g = pool.reserve(50).unwrap();
                    peak.fetch_max(pool.in_use(), std::sync::atomic::Ordering::SeqCst);
                    std::thread::sleep(std::time::Duration::from_millis(5));
                    drop(g);
                });
            }
            std::thread::sleep(std::time::Duration::from_millis(20));
            // Nobody got 50 while 70 were held.
            assert_eq!(pool.in_use(), 70);
            drop(first);
        });
        assert!(peak.load(std::sync::atomic::Ordering::SeqCst) <= 100);
        assert_eq!(pool.in_use(), 0);
    }

    #[test]
    fn on_a_rayon_worker_a_reservation_that_does_not_fit_is_refused_not_awaited() {
        let pool = Pool::new(100);
        let held = pool.reserve(60).unwrap();
        let worker = rayon::ThreadPoolBuilder::new()
            .num_threads(1)
            .build()
            .unwrap();
        let r = worker.install(|| pool.reserve(50).map(|g| g.bytes()));
        assert_eq!(r, Err(Refusal::Busy { free: 40 }));
        assert_eq!(
            worker.install(|| pool.reserve(40).map(|g| g.bytes())),
            Ok(40)
        );
        drop(held);
    }
}
