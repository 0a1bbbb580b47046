//! Rendered portfolio answers (the page's figures, the CSV, the API's JSON), shared by
//! concurrent readers.
//!
//! # Invalidation
//! An answer is stored with the database's [`db::generation`] read just before it was
//! computed; a request reads the generation first and takes a stored answer only if it is at
//! least that new, so a reader always sees every change committed before its request began.
//! One computation per answer runs at a time: readers arriving meanwhile wait for it and then
//! either take its result or, if something committed after it started, compute the next one
//! for everyone queued behind them. Under a stream of bookings each computation thus serves
//! all the reads that arrived while the previous one ran. An answer computed while the
//! figures' warm-up runs leaves zones out ([`super::figures`]): it is sent but not stored.

use super::AppError;
use crate::db;
use crate::domain::ZoneBase;
use axum::body::Bytes;
use rayon::prelude::*;
use sqlx::SqlitePool;
use std::collections::HashMap;
use std::future::Future;
use std::sync::{Arc, Mutex, PoisonError};

/// A stored answer: shared text, sent as a response body without copying (and taken from
/// its `String` without copying: the API's answer is 6.5 MB at 10,000 zones).
#[derive(Clone)]
pub struct Answer(Bytes);

impl Answer {
    fn new(text: String) -> Self {
        Self(Bytes::from(text))
    }

    /// The text as a response body.
    pub fn body(&self) -> axum::body::Body {
        axum::body::Body::from(self.0.clone())
    }
}

impl std::fmt::Display for Answer {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        // Made from a `String` only, so always UTF-8.
        f.write_str(std::str::from_utf8(&self.0).unwrap_or_default())
    }
}

/// One answer: the generation it was computed at, and the answer.
type Slot = Arc<tokio::sync::Mutex<Option<(i64, Answer)>>>;

/// More distinct queries than this and an idle answer is dropped for each new one.
const MAX_ANSWERS: usize = 64;

/// Query text -> its latest answer; and the rendered row pieces.
#[derive(Default)]
pub struct AnswerCache {
    slots: Mutex<HashMap<String, Slot>>,
    /// Pieces of the API's rows.
    pub api_rows: RowPieces,
}

/// A zone's rendered pieces: the figures they were rendered from, and the text.
type Pieces = (Arc<ZoneBase>, Arc<[Box<str>]>);

/// Zone id -> the pieces of its row that depend on its figures only (see the module docs).
#[derive(Default)]
pub struct RowPieces {
    zones: Mutex<HashMap<i64, Pieces>>,
}

impl RowPieces {
    /// The pieces of each of `bases`, in order: kept ones where they were rendered from
    /// exactly these figures, the others rendered by `render` (in parallel) and kept. CPU
    /// work: call it on the CPU pool.
    pub fn get<T: Sync>(
        &self,
        bases: &[(&Arc<ZoneBase>, T)],
        render: impl Fn(&T) -> Vec<Box<str>> + Sync,
    ) -> Vec<Arc<[Box<str>]>> {
        let mut out: Vec<Option<Arc<[Box<str>]>>> = {
            let zones = self.lock();
            bases
                .iter()
                .map(|(base, _)| {
                    zones.get(&base.zone.id).filter(|(from, _)| Arc::ptr_eq(from, base)).map(|(_, p)| p.clone())
                })
                .collect()
        };
        let missing: Vec<(usize, Arc<[Box<str>]>)> = out
            .iter()
            .enumerate()
            .filter(|(_, p)| p.is_none())
            .map(|(i, _)| i)
            .collect::<Vec<_>>()
            .into_par_iter()
            .map(|i| (i, render(&bases[i].1).into()))
            .collect();
        if !missing.is_empty() {
            let mut zones = self.lock();
            for (i, pieces) in &missing {
                let base = bases[*i].0;
                zones.insert(base.zone.id, (base.clone(), pieces.clone()));
            }
        }
        for (i, pieces) in missing {
            out[i] = Some(pieces);
        }
        out.into_iter().flatten().collect()
    }

    fn lock(&self) -> std::sync::MutexGuard<'_, HashMap<i64, Pieces>> {
        // A panic while holding the lock leaves a usable map: pieces name their figures.
        self.zones.lock().unwrap_or_else(PoisonError::into_inner)
    }
}

impl AnswerCache {
    /// The answer for `key`, computed by `render` unless one at least as new as the database
    /// is stored. `render` also says whether its answer is complete; one that is not is
    /// never stored.
    pub async fn get<F, Fut>(&self, pool: &SqlitePool, key: String, render: F) -> Result<Answer, AppError>
    where
        F: FnOnce() -> Fut,
        Fut: Future<Output = Result<(String, bool), AppError>>,
    {
        let asked_at = db::generation(pool).await?;
        let slot = self.slot(key);
        let mut answer = slot.lock().await;
        if let Some((generation, text)) = answer.as_ref()
            && *generation >= asked_at
        {
            return Ok(text.clone());
        }
        // Read again: whatever committed while this request waited is in the new answer.
        let generation = db::generation(pool).await?;
        let (text, complete) = render().await?;
        let text = Answer::new(text);
        *answer = complete.then(|| (generation, text.clone()));
        Ok(text)
    }

    fn slot(&self, key: String) -> Slot {
        // A panic while holding the lock leaves a usable map: answers carry their generation.
        let mut slots = self.slots.lock().unwrap_or_else(PoisonError::into_inner);
        if slots.len() >= MAX_ANSWERS && !slots.contains_key(&key) {
            // Drop one answer nobody is waiting for.
            let idle = slots.iter().find(|(_, slot)| Arc::strong_count(slot) == 1).map(|(k, _)| k.clone());
            if let Some(idle) = idle {
                slots.remove(&idle);
            }
        }
        slots.entry(key).or_default().clone()
    }
}
