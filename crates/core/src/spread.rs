//! Independent jobs on a caller's threads. The core starts no threads (ARCHITECTURE.md,
//! invariant 1); a caller that has them (the command line, with rayon) passes a [`Spread`]
//! that runs jobs `0..count` in any order and on any thread, and [`map`] collects their
//! results by index. Every job here depends only on its index and seeded streams keyed by
//! it (invariant 2), so the results are the same whatever runs them, and with no
//! [`Spread`] the jobs simply run one after another.

use std::sync::OnceLock;

/// Runs `job(i)` once for every `i` in `0..count`, in any order, on any threads, and
/// returns when all have run.
pub type Spread<'a> = &'a (dyn Fn(usize, &(dyn Fn(usize) + Sync)) + Sync);

/// `f(0), f(1), ..., f(count − 1)` in index order, run by `spread` when there is one.
pub fn map<T: Send + Sync>(
    spread: Option<Spread<'_>>,
    count: usize,
    f: impl Fn(usize) -> T + Sync,
) -> Vec<T> {
    let Some(spread) = spread else {
        return (0..count).map(f).collect();
    };
    let slots: Vec<OnceLock<T>> = (0..count).map(|_| OnceLock::new()).collect();
    spread(count, &|i| {
        if let Some(slot) = slots.get(i) {
            let _ = slot.set(f(i));
        }
    });
    // A spread that skipped a job (it must not) has it run here, so nothing is lost.
    slots
        .into_iter()
        .enumerate()
        .map(|(i, s)| s.into_inner().unwrap_or_else(|| f(i)))
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn a_spread_in_reverse_gives_the_results_in_index_order() {
        let backwards = |count: usize, job: &(dyn Fn(usize) + Sync)| {
            for i in (0..count).rev() {
                job(i);
            }
        };
        let plain = map(None, 5, |i| i * i);
        assert_eq!(plain, vec![0, 1, 4, 9, 16]);
        assert_eq!(map(Some(&backwards), 5, |i| i * i), plain);
        // One that forgets a job still yields every result.
        let lazy = |count: usize, job: &(dyn Fn(usize) + Sync)| (1..count).for_each(job);
        assert_eq!(map(Some(&lazy), 5, |i| i * i), plain);
    }
}
