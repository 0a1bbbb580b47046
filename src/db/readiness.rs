//! Readiness criteria (weights) and zone scores.

use super::DbResult;
use crate::domain::Criterion;
use sqlx::{Row, SqliteConnection, SqlitePool};
use std::collections::HashMap;

/// The criteria in display order.
pub async fn criteria(pool: &SqlitePool) -> DbResult<Vec<Criterion>> {
    let rows = sqlx::query("SELECT id, key, label, hint, weight FROM readiness_criteria ORDER BY position, id")
        .fetch_all(pool)
        .await?;
    rows.iter()
        .map(|r| {
            Ok(Criterion {
                id: r.try_get("id")?,
                key: r.try_get("key")?,
                label: r.try_get("label")?,
                hint: r.try_get("hint")?,
                // The CHECK constraint keeps it in 0..=10.
                weight: u8::try_from(r.try_get::<i64, _>("weight")?).unwrap_or(0),
            })
        })
        .collect()
}

/// Set the criteria's weights.
pub async fn set_weights(conn: &mut SqliteConnection, weights: &[(i64, u8)], actor: &str, at: &str) -> DbResult<()> {
    for (id, w) in weights {
        sqlx::query("UPDATE readiness_criteria SET weight = ?, updated_at = ?, updated_by = ? WHERE id = ?")
            .bind(i64::from(*w))
            .bind(at)
            .bind(actor)
            .bind(id)
            .execute(&mut *conn)
            .await?;
    }
    Ok(())
}

/// Scores of every zone, or of one, in the caller's transaction: zone id -> (criterion id -> score).
pub(super) async fn scores_in(
    conn: &mut SqliteConnection,
    zone: Option<i64>,
) -> DbResult<HashMap<i64, HashMap<i64, u8>>> {
    let rows = match zone {
        None => sqlx::query("SELECT zone_id, criterion_id, score FROM readiness_scores").fetch_all(conn).await?,
        Some(id) => {
            sqlx::query("SELECT zone_id, criterion_id, score FROM readiness_scores WHERE zone_id = ?")
                .bind(id)
                .fetch_all(conn)
                .await?
        }
    };
    let mut out: HashMap<i64, HashMap<i64, u8>> = HashMap::new();
    for r in rows {
        let score = u8::try_from(r.try_get::<i64, _>("score")?).unwrap_or(0);
        out.entry(r.try_get("zone_id")?).or_default().insert(r.try_get("criterion_id")?, score);
    }
    Ok(out)
}

/// One zone's scores: criterion id -> (score, rated at, rated by).
pub async fn zone_scores(pool: &SqlitePool, zone_id: i64) -> DbResult<HashMap<i64, (u8, String, String)>> {
    let rows = sqlx::query("SELECT criterion_id, score, rated_at, rated_by FROM readiness_scores WHERE zone_id = ?")
        .bind(zone_id)
        .fetch_all(pool)
        .await?;
    rows.iter()
        .map(|r| {
            let score = u8::try_from(r.try_get::<i64, _>("score")?).unwrap_or(0);
            Ok((r.try_get("criterion_id")?, (score, r.try_get("rated_at")?, r.try_get("rated_by")?)))
        })
        .collect()
}

/// Replace a zone's scores: `Some` sets a score, `None` removes it.
pub async fn set_scores(
    conn: &mut SqliteConnection,
    zone_id: i64,
    scores: &[(i64, Option<u8>)],
    actor: &str,
    at: &str,
) -> DbResult<()> {
    for (criterion, score) in scores {
        match score {
            Some(s) => {
                sqlx::query(
                    "INSERT INTO readiness_scores (zone_id, criterion_id, score, rated_at, rated_by) VALUES (?, ?, ?, ?, ?)
                     ON CONFLICT (zone_id, criterion_id) DO UPDATE SET score = excluded.score,
                         rated_at = excluded.rated_at, rated_by = excluded.rated_by
                     WHERE score <> excluded.score",
                )
                .bind(zone_id)
                .bind(criterion)
                .bind(i64::from(*s))
                .bind(at)
                .bind(actor)
                .execute(&mut *conn)
                .await?;
            }
            None => {
                sqlx::query("DELETE FROM readiness_scores WHERE zone_id = ? AND criterion_id = ?")
                    .bind(zone_id)
                    .bind(criterion)
                    .execute(&mut *conn)
                    .await?;
            }
        }
    }
    Ok(())
}
