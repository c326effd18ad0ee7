//! Work over `0..n` shared among the machine's cores in fixed, contiguous
//! chunks, each chunk's result returned in chunk order — so that anything
//! summed from them afterwards is the same from run to run.

/// Threads worth using on this machine.
pub fn available_threads() -> usize {
    std::thread::available_parallelism().map_or(1, |n| n.get())
}

/// Runs `work` on the chunks of `0..n` (one per thread, contiguous, in order)
/// and returns their results in chunk order. A panic in a worker is a bug in
/// the caller's `work` and is re-raised here.
pub fn over_chunks<T: Send>(n: usize, work: impl Fn(std::ops::Range<usize>) -> T + Sync) -> Vec<T> {
    let threads = available_threads().clamp(1, n.max(1));
    let chunk = n.div_ceil(threads).max(1);
    if threads == 1 {
        return vec![work(0..n)];
    }
    std::thread::scope(|scope| {
        let work = &work;
        let handles: Vec<_> = (0..threads)
            .map(|t| {
                let range = (t * chunk).min(n)..((t + 1) * chunk).min(n);
                scope.spawn(move || work(range))
            })
            .collect();
        handles.into_iter().map(|h| h.join().unwrap_or_else(|e| std::panic::resume_unwind(e))).collect()
    })
}
