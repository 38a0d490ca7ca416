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
