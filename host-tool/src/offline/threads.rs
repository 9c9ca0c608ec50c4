//! How many threads an offline pass uses: the processors available, or the number in the
//! `FROTHLINE_THREADS` environment variable when it is set (1 runs every pass on one
//! thread, as a machine with one processor would; results never depend on the number).

use std::sync::Arc;

/// The environment variable that sets the thread count of offline passes.
pub const THREADS_ENV: &str = "FROTHLINE_THREADS";

/// Threads for an offline pass: `FROTHLINE_THREADS` when it holds a whole number of at
/// least 1, else the processors available (1 when that is not known).
pub fn offline_threads() -> usize {
    from_setting(std::env::var(THREADS_ENV).ok().as_deref())
        .unwrap_or_else(|| std::thread::available_parallelism().map_or(1, |n| n.get()))
}

/// The thread count a setting asks for (`None`: unset, empty, not a number, or 0).
fn from_setting(value: Option<&str>) -> Option<usize> {
    value
        .and_then(|v| v.trim().parse::<usize>().ok())
        .filter(|&n| n >= 1)
}

/// The blocks a reader hands to worker threads, each read into again once every worker has
/// let it go (the reader then holds its only reference), so the blocks in flight are
/// allocated once.
#[derive(Default)]
pub struct BlockPool<T> {
    held: Vec<Arc<T>>,
}

impl<T: Default + Clone> BlockPool<T> {
    /// A block no worker holds (a new one when all are out): fill it through
    /// [`Arc::make_mut`], which copies nothing since the reader holds its only reference.
    pub fn free_block(&mut self) -> Arc<T> {
        self.held
            .iter()
            .position(|b| Arc::strong_count(b) == 1)
            .map(|i| self.held.swap_remove(i))
            .unwrap_or_default()
    }

    /// Keep `block`, shared with the workers, for reuse once they let it go.
    pub fn keep(&mut self, block: Arc<T>) {
        self.held.push(block);
    }
}

/// `f` of every item, in the items' order, worked out on up to `threads` threads (in
/// contiguous chunks; on this thread alone for one).
pub fn map_on_threads<T: Sync, R: Send>(
    items: &[T],
    threads: usize,
    f: impl Fn(&T) -> R + Sync,
) -> Vec<R> {
    let threads = threads.clamp(1, items.len().max(1));
    if threads == 1 {
        return items.iter().map(f).collect();
    }
    let f = &f;
    std::thread::scope(|scope| {
        let handles: Vec<_> = items
            .chunks(items.len().div_ceil(threads))
            .map(|chunk| scope.spawn(move || chunk.iter().map(f).collect::<Vec<R>>()))
            .collect();
        handles
            .into_iter()
            .flat_map(|h| h.join().unwrap_or_else(|e| std::panic::resume_unwind(e)))
            .collect()
    })
}

#[cfg(test)]
mod tests {
    use super::{from_setting, map_on_threads};

    #[test]
    fn a_map_on_threads_keeps_the_order() {
        let items: Vec<u32> = (0..37).collect();
        let want: Vec<u64> = items.iter().map(|&x| u64::from(x) * 3 + 1).collect();
        for threads in [1, 2, 3, 8, 100] {
            let got = map_on_threads(&items, threads, |&x| u64::from(x) * 3 + 1);
            assert_eq!(got, want, "{threads} threads");
        }
        assert!(map_on_threads(&[] as &[u32], 4, |&x| x).is_empty());
    }

    #[test]
    fn a_setting_is_a_whole_number_of_at_least_one() {
        assert_eq!(from_setting(Some("2")), Some(2));
        assert_eq!(from_setting(Some(" 1 ")), Some(1));
        assert_eq!(from_setting(Some("0")), None);
        assert_eq!(from_setting(Some("two")), None);
        assert_eq!(from_setting(Some("")), None);
        assert_eq!(from_setting(None), None);
    }
}
