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
//! metrics and Monte Carlo and recomputes only realization and evidence. Only the default
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
        let snapshot = {
            // The lock is not held across the query: the closure copies what it needs first.
            let known: HashMap<i64, (i64, i64)> = if cached {
                self.lock().iter().map(|(id, (n, s, _))| (*id, (*n, *s))).collect()
            } else {
                HashMap::new()
            };
            db::snapshot(pool, move |id, n, s| known.get(&id) == Some(&(n, s))).await?
        };
        let site_n = snapshot.site;
        let stale: Vec<_> = {
            let map = self.lock();
            snapshot
                .stale
                .into_iter()
                .map(|(n, data)| {
                    let previous = if cached { map.get(&data.zone.id).map(|e| e.2.clone()) } else { None };
                    (n, data, previous)
                })
                .collect()
        };
        let site = site.clone();
        let computed: Vec<(i64, Arc<ZoneBase>)> = tokio::task::spawn_blocking(move || {
            stale
                .into_par_iter()
                .map(|(n, data, previous)| (n, Arc::new(zone_base(data, &site, trials, previous.as_deref()))))
                .collect()
        })
        .await
        .map_err(|e| AppError::Internal(e.into()))?;
        let mut fresh: HashMap<i64, Arc<ZoneBase>> = HashMap::with_capacity(computed.len());
        let mut map = self.lock();
        for (n, base) in computed {
            if cached {
                map.insert(base.zone.id, (n, site_n, base.clone()));
            }
            fresh.insert(base.zone.id, base);
        }
        Ok(snapshot
            .counters
            .iter()
            .filter_map(|(id, _)| fresh.remove(id).or_else(|| map.get(id).map(|e| e.2.clone())))
            .collect())
    }

    fn lock(&self) -> std::sync::MutexGuard<'_, HashMap<i64, Entry>> {
        // A panic while holding the lock leaves a usable map: at worst stale entries, which the
        // counters correct on the next request.
        self.zones.lock().unwrap_or_else(PoisonError::into_inner)
    }
}
