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

/// `f` over `items` in place, in contiguous shares, one per element of `states` (each
/// share on its own thread with its own state: buffers kept between calls).
pub fn for_each_mut<T: Send, S: Send>(
    states: &mut [S],
    items: &mut [T],
    f: impl Fn(&mut S, &mut T) + Sync,
) {
    let n = states.len().min(items.len());
    if n == 0 {
        return;
    }
    if n == 1 {
        items.iter_mut().for_each(|x| f(&mut states[0], x));
        return;
    }
    let share = items.len().div_ceil(n);
    std::thread::scope(|s| {
        let workers: Vec<_> = (items.chunks_mut(share))
            .zip(states.iter_mut())
            .map(|(part, state)| {
                let f = &f;
                s.spawn(move || part.iter_mut().for_each(|x| f(state, x)))
            })
            .collect();
        for w in workers {
            if let Err(e) = w.join() {
                std::panic::resume_unwind(e);
            }
        }
    });
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
        let got = super::map_with(
            &items,
            || 0u64,
            |seen, x| {
                *seen += 1;
                x * x
            },
        );
        assert_eq!(got, items.iter().map(|x| x * x).collect::<Vec<_>>());
        assert!(super::map(&[] as &[u8], |x| *x).is_empty());
        let mut states = vec![0usize; 3];
        let mut v: Vec<u64> = (0..10).collect();
        super::for_each_mut(&mut states, &mut v, |n, x| {
            *n += 1;
            *x *= 2;
        });
        assert_eq!(v, (0..10).map(|x| 2 * x).collect::<Vec<_>>());
        assert_eq!(states.iter().sum::<usize>(), 10);
    }
}
