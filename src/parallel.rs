//! Order-preserving parallel map over a slice on the machine's cores (scoped std threads).

/// Worker threads to use: the cores the system reports, at least one.
pub fn threads() -> usize {
    std::thread::available_parallelism().map_or(1, |n| n.get())
}

/// `f` over `items` in contiguous shares, one per thread, each with its own state from
/// `init` (FFT buffers, say); results in the order of `items`. Runs inline for one item
/// or one core.
pub fn map_with<T, S, R>(
    items: &[T],
    init: impl Fn() -> S + Sync,
    f: impl Fn(&mut S, &T) -> R + Sync,
) -> Vec<R>
where
    T: Sync,
    R: Send,
{
    let n = threads().min(items.len());
    if n <= 1 {
        let mut state = init();
        return items.iter().map(|x| f(&mut state, x)).collect();
    }
    let share = items.len().div_ceil(n);
    std::thread::scope(|s| {
        let workers: Vec<_> = items
            .chunks(share)
            .map(|part| {
                let (init, f) = (&init, &f);
                s.spawn(move || {
                    let mut state = init();
                    part.iter().map(|x| f(&mut state, x)).collect::<Vec<R>>()
                })
            })
            .collect();
        workers
            .into_iter()
            .flat_map(|w| match w.join() {
                Ok(v) => v,
                // A worker only panics on a bug; carry the panic to the caller's thread.
                Err(e) => std::panic::resume_unwind(e),
            })
            .collect()
    })
}

/// `f` over `items` on the machine's cores, results in order.
pub fn map<T: Sync, R: Send>(items: &[T], f: impl Fn(&T) -> R + Sync) -> Vec<R> {
    map_with(items, || (), |_, x| f(x))
}

#[cfg(test)]
mod tests {
    #[test]
    fn keeps_order_and_state_per_thread() {
        let items: Vec<u64> = (0..1000).collect();
        let got = super::map_with(&items, || 0u64, |seen, x| {
            *seen += 1;
            x * x
        });
        assert_eq!(got, items.iter().map(|x| x * x).collect::<Vec<_>>());
        assert!(super::map(&[] as &[u8], |x| *x).is_empty());
    }
}
