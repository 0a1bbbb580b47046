//! The cache of derived figures behind the portfolio and the case pages' calibration.
//!
//! # Invalidation
//! Each zone's base figures ([`ZoneBase`]: schedule metrics, the straight-line NPV, the Monte
//! Carlo, realization and calibration evidence) are kept with the zone's change counter and the
//! site's counter at the time they were computed. Triggers (migration 0005) bump a zone's
//! counter in the same transaction as any change to the zone, its cases and items, its ledger or
//! its readiness scores, and the site counter for site settings, readiness weights and new
//! zones. Every request reads the counters (one small query) and recomputes only the zones
//! whose counters moved, in parallel. A recomputed zone whose case, hurdle rate and trials are
//! those of its cached figures (a booking or a score moved its counter) keeps its schedule
//! metrics and Monte Carlo and recomputes only realization and evidence. An approved baseline's
//! hurdle rate is the one frozen on its version at approval (migration 0008): approving bumps
//! the zone's counter, and a later settings change recomputes it to the same figures. Only the default
//! Monte Carlo seed is cached; another seed computes every zone for that request.
//!
//! # Warm-up
//! At start the server fills the cache in the background ([`FigureCache::warm_up`]), a chunk
//! of zones at a time, so that no request computes every zone's Monte Carlo on demand. While
//! it runs, a portfolio request waits for it at most [`READY_WAIT`], then answers with the
//! zones that are ready and says how many are still pending ([`Bases::pending`]); a zone not
//! yet in the cache counts as pending until the warm-up ends, one already there is kept fresh
//! as usual. Callers that need every zone ([`FigureCache::bases`]) wait for the end.

use super::AppError;
use crate::db;
use crate::domain::{SiteSettings, Trials, ZoneBase, ZoneData, zone_base};
use rayon::prelude::*;
use sqlx::SqlitePool;
use std::collections::{HashMap, HashSet};
use std::future::Future;
use std::sync::{Arc, LazyLock, Mutex, PoisonError};
use std::time::Duration;
use tokio::sync::watch;

/// A cached zone: its counter and the site's when computed, and the figures.
type Entry = (i64, i64, Arc<ZoneBase>);

/// How long a portfolio request waits for a running warm-up before answering with what is
/// ready: with the answer's own work (0.1 to 0.3 s at 10,000 zones, beside the warm-up) it
/// stays under a second.
pub const READY_WAIT: Duration = Duration::from_millis(700);

/// Zones the warm-up computes per step: small enough that requests see steady progress and
/// get the CPU pool between steps (about 0.1 s per step on two cores).
const WARM_CHUNK: usize = 256;

/// Zone id -> [`Entry`], and whether a warm-up is running.
pub struct FigureCache {
    zones: Mutex<HashMap<i64, Entry>>,
    warming: watch::Sender<bool>,
}

impl Default for FigureCache {
    fn default() -> Self {
        Self { zones: Mutex::default(), warming: watch::Sender::new(false) }
    }
}

/// Base figures for a request.
pub struct Bases {
    /// The zones whose figures are ready, fresh as of the call, ordered by zone id.
    pub zones: Vec<Arc<ZoneBase>>,
    /// Zones left out because the warm-up has not reached them yet.
    pub pending: usize,
}

impl FigureCache {
    /// Every zone's base figures, fresh as of this call, ordered by zone id; waits for a
    /// running warm-up to end first.
    pub async fn bases(
        &self,
        pool: &SqlitePool,
        site: &SiteSettings,
        trials: Trials,
    ) -> Result<Vec<Arc<ZoneBase>>, AppError> {
        Ok(self.bases_within(pool, site, trials, None).await?.zones)
    }

    /// Whether a warm-up is running.
    pub fn warming(&self) -> bool {
        *self.warming.borrow()
    }

    /// Wait until no warm-up runs, or at most `wait`.
    pub async fn settle(&self, wait: Option<Duration>) {
        let mut rx = self.warming.subscribe();
        let done = rx.wait_for(|warming| !*warming);
        // An error means the sender is gone, which cannot be while `self` lives.
        match wait {
            None => drop(done.await),
            Some(wait) => drop(tokio::time::timeout(wait, done).await),
        }
    }

    /// The base figures, fresh as of this call; after waiting for a running warm-up at most
    /// `wait` (`None`: until it ends), zones it has not reached are left out and counted.
    pub async fn bases_within(
        &self,
        pool: &SqlitePool,
        site: &SiteSettings,
        trials: Trials,
        wait: Option<Duration>,
    ) -> Result<Bases, AppError> {
        let cached = trials == Trials::default();
        if cached {
            self.settle(wait).await;
        }
        // Read after the wait: if the warm-up has ended, every zone is computed here.
        let warming = cached && self.warming();
        // What the cache holds now: the snapshot decides freshness against exactly these
        // entries, and they are what this call returns for the zones it finds fresh (another
        // request may replace them meanwhile).
        let known: HashMap<i64, Entry> = if cached { self.lock().clone() } else { HashMap::new() };
        let snapshot = {
            let counters: HashMap<i64, (i64, i64)> = known.iter().map(|(id, (n, s, _))| (*id, (*n, *s))).collect();
            // During a warm-up a zone not in the cache is the warm-up's to compute: not read here.
            db::snapshot(pool, move |id, n, s| counters.get(&id).map_or(warming, |c| *c == (n, s))).await?
        };
        let site_n = snapshot.site;
        let stale: Vec<_> = snapshot
            .stale
            .into_iter()
            .map(|(n, data)| {
                let previous = known.get(&data.zone.id).map(|e| e.2.clone());
                (n, data, previous)
            })
            .collect();
        let computed = compute(stale, site, trials, false).await?;
        if cached {
            self.store(&computed, site_n);
        }
        let mut fresh: HashMap<i64, Arc<ZoneBase>> = computed.into_iter().map(|(_, b)| (b.zone.id, b)).collect();
        let zones: Vec<Arc<ZoneBase>> = snapshot
            .counters
            .iter()
            .filter_map(|(id, _)| fresh.remove(id).or_else(|| known.get(id).map(|e| e.2.clone())))
            .collect();
        Ok(Bases { pending: snapshot.counters.len() - zones.len(), zones })
    }

    /// Fill the cache with every zone's figures for the default trials, [`WARM_CHUNK`] zones
    /// at a time; meanwhile requests answer with what is ready (see the module docs).
    pub async fn warm_up(&self, pool: &SqlitePool) -> Result<usize, AppError> {
        self.warm_up_with(pool, WARM_CHUNK, |_, _| async {}).await
    }

    /// [`Self::warm_up`] in chunks of `chunk` zones, awaiting `before_chunk(done, total)`
    /// before each (tests hold the warm-up there). Returns the number of zones gone through.
    pub async fn warm_up_with<F, Fut>(
        &self,
        pool: &SqlitePool,
        chunk: usize,
        before_chunk: F,
    ) -> Result<usize, AppError>
    where
        F: FnMut(usize, usize) -> Fut,
        Fut: Future<Output = ()>,
    {
        self.warming.send_replace(true);
        let result = self.warm_steps(pool, chunk.max(1), before_chunk).await;
        // Whatever happened, requests stop waiting; zones still missing are computed on demand.
        self.warming.send_replace(false);
        result
    }

    async fn warm_steps<F, Fut>(&self, pool: &SqlitePool, chunk: usize, mut before_chunk: F) -> Result<usize, AppError>
    where
        F: FnMut(usize, usize) -> Fut,
        Fut: Future<Output = ()>,
    {
        let site = db::get_site(pool).await?;
        // The zones as they are now; each step reads only its own zones' data, so that the
        // first are ready quickly and no step holds the whole plant group in memory.
        let zones = db::snapshot(pool, |_, _, _| true).await?.counters;
        let total = zones.len();
        let mut done = 0;
        for step in zones.chunks(chunk) {
            before_chunk(done, total).await;
            let wanted: HashSet<i64> = step.iter().map(|(id, _)| *id).collect();
            let known: HashMap<i64, (i64, i64)> = {
                let map = self.lock();
                wanted.iter().filter_map(|id| map.get(id).map(|(n, s, _)| (*id, (*n, *s)))).collect()
            };
            // A zone a request has computed meanwhile is not computed again.
            let snapshot =
                db::snapshot(pool, move |id, n, s| !wanted.contains(&id) || known.get(&id) == Some(&(n, s))).await?;
            let stale = snapshot.stale.into_iter().map(|(n, data)| (n, data, None)).collect();
            let computed = compute(stale, &site, Trials::default(), true).await?;
            self.store(&computed, snapshot.site);
            done += step.len();
        }
        Ok(done)
    }

    /// Keep computed figures, unless newer ones are there already.
    fn store(&self, computed: &[(i64, Arc<ZoneBase>)], site_n: i64) {
        let mut map = self.lock();
        for (n, base) in computed {
            // Never replace figures with older ones: a slower request may finish last.
            let newer = map.get(&base.zone.id).is_none_or(|(old_n, old_s, _)| (site_n, *n) >= (*old_s, *old_n));
            if newer {
                map.insert(base.zone.id, (*n, site_n, base.clone()));
            }
        }
    }

    /// How many zones the cache holds.
    pub fn len(&self) -> usize {
        self.lock().len()
    }

    /// Whether the cache holds no zone.
    pub fn is_empty(&self) -> bool {
        self.lock().is_empty()
    }

    fn lock(&self) -> std::sync::MutexGuard<'_, HashMap<i64, Entry>> {
        // A panic while holding the lock leaves a usable map: at worst stale entries, which the
        // counters correct on the next request.
        self.zones.lock().unwrap_or_else(PoisonError::into_inner)
    }
}

/// Compute stale zones' figures (each with its previous figures, if any) in parallel on the
/// CPU pool; `background` work (the warm-up) runs on [`WARM_THREADS`].
async fn compute(
    stale: Vec<(i64, ZoneData, Option<Arc<ZoneBase>>)>,
    site: &SiteSettings,
    trials: Trials,
    background: bool,
) -> Result<Vec<(i64, Arc<ZoneBase>)>, AppError> {
    if stale.is_empty() {
        return Ok(Vec::new());
    }
    let site = site.clone();
    Ok(crate::app::cpu::run(move || {
        let work = move || {
            stale
                .into_par_iter()
                .map(|(n, data, previous)| (n, Arc::new(zone_base(data, &site, trials, previous.as_deref()))))
                .collect()
        };
        match (background, WARM_THREADS.as_ref()) {
            (true, Some(threads)) => threads.install(work),
            _ => work(),
        }
    })
    .await?)
}

/// The warm-up's own threads, one core fewer than the machine has: a request arriving meanwhile
/// finds a core for its own parallel work instead of queueing behind a whole chunk on the
/// shared pool (measured: 1.13 s for a first answer that way, with 0.7 s of waiting).
static WARM_THREADS: LazyLock<Option<rayon::ThreadPool>> = LazyLock::new(|| {
    let threads = crate::app::cpu::slots().saturating_sub(1).max(1);
    rayon::ThreadPoolBuilder::new().num_threads(threads).thread_name(|i| format!("warm-up-{i}")).build().ok()
});
