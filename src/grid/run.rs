//! The parallel runner: computes pencils on a rayon pool and hands each finished pencil to a
//! single writer (HDF5 calls are serialised anyway) through a bounded channel, so memory
//! stays independent of the grid size. It knows nothing of the physics: the caller passes a
//! function from pencil index to result.
//!
//! Determinism: every pencil is a pure function of its index, so the data written are the
//! same for any thread count and any order of completion.

use std::sync::atomic::{AtomicBool, Ordering};
use std::sync::mpsc;

/// Run `compute` over `todo` pencils with `threads` workers (0 = all cores) and pass each
/// result to `write` in completion order; `progress` is called after each write with the
/// number written so far. Stops at the first write error and returns it.
pub fn run<P, E>(
    todo: &[usize],
    threads: usize,
    compute: impl Fn(usize) -> P + Sync,
    mut write: impl FnMut(P) -> Result<(), E>,
    mut progress: impl FnMut(usize),
) -> Result<(), E>
where
    P: Send,
{
    use rayon::prelude::*;
    let pool = rayon::ThreadPoolBuilder::new()
        .num_threads(threads)
        .build()
        .expect("a thread pool of this size can be built");
    let cancel = AtomicBool::new(false);
    let capacity = 2 * pool.current_num_threads().max(1);
    let (tx, rx) = mpsc::sync_channel::<P>(capacity);
    std::thread::scope(|s| {
        let cancel = &cancel;
        let compute = &compute;
        let pool = &pool;
        s.spawn(move || {
            pool.install(|| {
                todo.par_iter().for_each_with(tx, |tx, &p| {
                    if cancel.load(Ordering::Relaxed) {
                        return;
                    }
                    if tx.send(compute(p)).is_err() {
                        cancel.store(true, Ordering::Relaxed);
                    }
                });
            });
        });
        let mut done = 0;
        for p in rx.iter() {
            if let Err(e) = write(p) {
                cancel.store(true, Ordering::Relaxed);
                // Drain so the producers can finish.
                for _ in rx.iter() {}
                return Err(e);
            }
            done += 1;
            progress(done);
        }
        Ok(())
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn every_pencil_is_written_once_for_any_thread_count() {
        let todo: Vec<usize> = (0..200).collect();
        for threads in [1, 2, 3] {
            let mut seen = vec![0u32; 200];
            let r: Result<(), ()> = run(
                &todo,
                threads,
                |p| (p, (p as f64).sqrt().to_bits()),
                |(p, bits)| {
                    assert_eq!(bits, (p as f64).sqrt().to_bits());
                    seen[p] += 1;
                    Ok(())
                },
                |_| {},
            );
            assert!(r.is_ok());
            assert!(seen.iter().all(|&c| c == 1));
        }
    }

    #[test]
    fn a_write_error_stops_the_run() {
        let todo: Vec<usize> = (0..10_000).collect();
        let mut written = 0;
        let r = run(
            &todo,
            2,
            |p| p,
            |_| {
                written += 1;
                if written == 5 {
                    Err("disk full")
                } else {
                    Ok(())
                }
            },
            |_| {},
        );
        assert_eq!(r, Err("disk full"));
        assert_eq!(written, 5);
    }
}
