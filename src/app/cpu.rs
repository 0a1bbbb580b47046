//! The bounded pool for CPU-heavy work: root searches, Monte Carlo runs, portfolio
//! recomputation and CSV parsing run here, never on the async threads, so that a heavy request
//! cannot stall the others (sign-in keeps answering while a large metrics request computes).
//!
//! At most [`slots`] pieces of work run at once; the rest wait their turn without holding a
//! thread. The slot is held by the work itself, not by the request waiting for it: a request
//! dropped by its timeout does not free a slot its work still occupies.

use super::{AppResult, Error};
use crate::domain::NumberFormat;
use std::sync::{Arc, LazyLock};
use tokio::sync::Semaphore;

/// One slot per core but one: more would only make each piece of work slower.
static SLOTS: LazyLock<Arc<Semaphore>> = LazyLock::new(|| Arc::new(Semaphore::new(slots())));
/// Password hashing (argon2id, about 25 ms each) has slots of its own, so that a sign-in never
/// queues behind a long metrics request.
static PASSWORD_SLOTS: LazyLock<Arc<Semaphore>> = LazyLock::new(|| Arc::new(Semaphore::new(slots())));

/// How many pieces of CPU-heavy work run at once: one per core, less one core left to the async
/// threads (at least one slot). With every core computing, a sign-in waits for the operating
/// system to preempt a CPU-bound thread: on two cores under ten concurrent 2,400-flow metrics
/// requests (`tests/it/load.rs`) it took up to 214 ms, against the 200 ms bound.
pub fn slots() -> usize {
    std::thread::available_parallelism().map_or(1, |n| n.get().saturating_sub(1).max(1))
}

/// Run `work` on the blocking pool once a slot is free, with the request's number format as
/// [`NumberFormat::current`] and its time zone as `PlantZone::current` inside it.
pub async fn run<T, F>(work: F) -> AppResult<T>
where
    F: FnOnce() -> T + Send + 'static,
    T: Send + 'static,
{
    run_in(&SLOTS, work).await
}

/// Run a password hash or verification on the blocking pool, in the password slots.
pub async fn password<T, F>(work: F) -> AppResult<T>
where
    F: FnOnce() -> T + Send + 'static,
    T: Send + 'static,
{
    run_in(&PASSWORD_SLOTS, work).await
}

async fn run_in<T, F>(slots: &Arc<Semaphore>, work: F) -> AppResult<T>
where
    F: FnOnce() -> T + Send + 'static,
    T: Send + 'static,
{
    let slot = slots.clone().acquire_owned().await.map_err(|e| Error::Internal(e.into()))?;
    let numbers = NumberFormat::current();
    let zone = crate::domain::PlantZone::current();
    tokio::task::spawn_blocking(move || {
        let _slot = slot;
        numbers.sync_scope(|| zone.sync_scope(work))
    })
    .await
    .map_err(|e| Error::Internal(e.into()))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[tokio::test]
    async fn work_sees_the_request_number_format() -> AppResult<()> {
        let seen = NumberFormat::DecimalComma.scope(run(NumberFormat::current)).await?;
        assert_eq!(seen, NumberFormat::DecimalComma);
        Ok(())
    }

    #[tokio::test]
    async fn no_more_than_the_slots_run_at_once() -> AppResult<()> {
        use std::sync::atomic::{AtomicUsize, Ordering::SeqCst};
        static NOW: AtomicUsize = AtomicUsize::new(0);
        static MOST: AtomicUsize = AtomicUsize::new(0);
        let mut jobs = tokio::task::JoinSet::new();
        for _ in 0..slots() * 3 {
            jobs.spawn(run(|| {
                let n = NOW.fetch_add(1, SeqCst) + 1;
                MOST.fetch_max(n, SeqCst);
                std::thread::sleep(std::time::Duration::from_millis(20));
                NOW.fetch_sub(1, SeqCst);
            }));
        }
        while let Some(done) = jobs.join_next().await {
            done.map_err(|e| Error::Internal(e.into()))??;
        }
        let most = MOST.load(SeqCst);
        assert!((1..=slots()).contains(&most), "{most} ran at once with {} slots", slots());
        Ok(())
    }
}
