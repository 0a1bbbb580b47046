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

use super::AppError;
use crate::db;
use crate::domain::{SiteSettings, Trials, ZoneBase, zone_base};
use rayon::prelude::*;
use sqlx::SqlitePool;
use std::collections::HashMap;
use std::sync::{Arc, Mutex, PoisonError};

/// A cached zone: its counter and the site's when computed, and the figures.
type Entry = (i64, i64, Arc<ZoneBase>);

/// Zone id -> [`Entry`].
#[derive(Default)]
pub struct FigureCache {
    zones: Mutex<HashMap<i64, Entry>>,
}

impl FigureCache {
    /// Every zone's base figures, fresh as of this call, ordered by zone id.
    pub async fn bases(
        &self,
        pool: &SqlitePool,
        site: &SiteSettings,
        trials: Trials,
    ) -> Result<Vec<Arc<ZoneBase>>, AppError> {
        let cached = trials == Trials::default();
        // What the cache holds now: the snapshot decides freshness against exactly these
        // entries, and they are what this call returns for the zones it finds fresh (another
        // request may replace them meanwhile).
        let known: HashMap<i64, Entry> = if cached { self.lock().clone() } else { HashMap::new() };
        let snapshot = {
            let counters: HashMap<i64, (i64, i64)> = known.iter().map(|(id, (n, s, _))| (*id, (*n, *s))).collect();
            db::snapshot(pool, move |id, n, s| counters.get(&id) == Some(&(n, s))).await?
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
        let site = site.clone();
        let computed: Vec<(i64, Arc<ZoneBase>)> = crate::app::cpu::run(move || {
            stale
                .into_par_iter()
                .map(|(n, data, previous)| (n, Arc::new(zone_base(data, &site, trials, previous.as_deref()))))
                .collect()
        })
        .await?;
        if cached {
            let mut map = self.lock();
            for (n, base) in &computed {
                // Never replace figures with older ones: a slower request may finish last.
                let newer = map.get(&base.zone.id).is_none_or(|(old_n, old_s, _)| (site_n, *n) >= (*old_s, *old_n));
                if newer {
                    map.insert(base.zone.id, (*n, site_n, base.clone()));
                }
            }
        }
        let mut fresh: HashMap<i64, Arc<ZoneBase>> = computed.into_iter().map(|(_, b)| (b.zone.id, b)).collect();
        Ok(snapshot
            .counters
            .iter()
            .filter_map(|(id, _)| fresh.remove(id).or_else(|| known.get(id).map(|e| e.2.clone())))
            .collect())
    }

    fn lock(&self) -> std::sync::MutexGuard<'_, HashMap<i64, Entry>> {
        // A panic while holding the lock leaves a usable map: at worst stale entries, which the
        // counters correct on the next request.
        self.zones.lock().unwrap_or_else(PoisonError::into_inner)
    }
}
