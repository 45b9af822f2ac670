//! What changed in the catalog between two versions, read from the history spans
//! (`galaxy_span`, `adopted_value_span`, migration 8) and the audit log: galaxies added, values
//! adopted or replaced (with who accepted them), distances changed. A change "happens at"
//! version V when its span starts at V; the range (from, to] holds the versions after `from` up
//! to and including `to`. Spans whose end equals their start never held at any version and are
//! left out.

use sqlx::SqlitePool;

/// A galaxy whose first adopted value came in the range.
#[derive(Debug, Clone, PartialEq, Eq, sqlx::FromRow)]
pub struct AddedGalaxy {
    /// Key.
    pub galaxy_id: i64,
    /// Its name at the range's end.
    pub name: String,
    /// Its URL form at the range's end.
    pub slug: String,
    /// The version that adopted its first value.
    pub catalog_version: i64,
}

/// A value adopted at the range's end for a galaxy.
#[derive(Debug, Clone, PartialEq, Eq, sqlx::FromRow)]
pub struct ValueAt {
    /// The galaxy.
    pub galaxy_id: i64,
    /// Stored quantity word.
    pub quantity: String,
    /// Photometric band, empty but for luminosities.
    pub band: String,
    /// The value as entered.
    pub value_text: String,
}

/// A value adopted in the range: new, or replacing another.
#[derive(Debug, Clone, PartialEq, Eq, sqlx::FromRow)]
pub struct AdoptedChange {
    /// The galaxy.
    pub galaxy_id: i64,
    /// Its name at the version of the change.
    pub galaxy_name: String,
    /// Its URL form.
    pub slug: String,
    /// Stored quantity word.
    pub quantity: String,
    /// Photometric band, empty but for luminosities.
    pub band: String,
    /// The value it replaced, as entered; None when it is the first of its kind.
    pub old_value_text: Option<String>,
    /// The value adopted, as entered.
    pub new_value_text: String,
    /// The version it happened at.
    pub catalog_version: i64,
    /// How the submission arrived (`form`, `csv`, `api`, `seed`, `import`).
    pub source: String,
    /// Who accepted it, by username; None without a review (the demo load, imports).
    pub reviewer: Option<String>,
    /// The reviewer's note (empty without a review).
    pub review_note: String,
}

/// A distance changed in the range.
#[derive(Debug, Clone, PartialEq, sqlx::FromRow)]
pub struct DistanceChange {
    /// The galaxy.
    pub galaxy_id: i64,
    /// Its name at the version of the change.
    pub galaxy_name: String,
    /// Its URL form.
    pub slug: String,
    /// Old distance, Mpc.
    pub old_distance_mpc: f64,
    /// Its error, Mpc.
    pub old_distance_err_mpc: f64,
    /// Old method word.
    pub old_method: String,
    /// New distance, Mpc.
    pub new_distance_mpc: f64,
    /// Its error, Mpc.
    pub new_distance_err_mpc: f64,
    /// New method word.
    pub new_method: String,
    /// The version it happened at.
    pub catalog_version: i64,
    /// Who changed it, by username (from the audit event), if anyone.
    pub changed_by: Option<String>,
    /// The audit event's sentence, which carries the note (None without an event).
    pub summary: Option<String>,
}

/// Galaxies whose first adopted value came in (from, to], with their name at `to`, by
/// version and name. A galaxy's own first span starts when the submission that names it
/// arrives, pending; it joins the catalog's values only when one is adopted, so that is the
/// version that added it (a galaxy whose submission was rejected is never added).
///
/// # Errors
/// Any database error.
pub async fn galaxies_added(
    pool: &SqlitePool,
    from: i64,
    to: i64,
) -> sqlx::Result<Vec<AddedGalaxy>> {
    sqlx::query_as(
        // The spans that start in the range (an index range), of galaxies with no span that
        // held before it: not a scan of every span of the catalog.
        "with first as (
             select a.galaxy_id, min(a.valid_from_version) as v from adopted_value_span a
              where a.valid_from_version > ?1 and a.valid_from_version <= ?2
                and (a.valid_until_version is null or a.valid_until_version > a.valid_from_version)
                and not exists (
                    select 1 from adopted_value_span e
                     where e.galaxy_id = a.galaxy_id and e.valid_from_version <= ?1
                       and (e.valid_until_version is null
                            or e.valid_until_version > e.valid_from_version))
           group by a.galaxy_id
         )
         select f.galaxy_id, s.name, s.slug, f.v as catalog_version
           from first f
           join galaxy_span s on s.galaxy_id = f.galaxy_id
                              and s.valid_from_version <= ?2
                              and (s.valid_until_version is null or s.valid_until_version > ?2)
       order by f.v, s.name",
    )
    .bind(from)
    .bind(to)
    .fetch_all(pool)
    .await
}

/// The values adopted at version `at` for the galaxies `galaxy_ids`, by galaxy, quantity and
/// band.
///
/// # Errors
/// Any database error.
pub async fn values_at(
    pool: &SqlitePool,
    galaxy_ids: &[i64],
    at: i64,
) -> sqlx::Result<Vec<ValueAt>> {
    if galaxy_ids.is_empty() {
        return Ok(Vec::new());
    }
    let ids = serde_json::to_string(galaxy_ids).unwrap_or_else(|_| "[]".into());
    sqlx::query_as(
        "select s.galaxy_id, s.quantity, s.band, m.value_text
           from adopted_value_span s join measurement m on m.measurement_id = s.measurement_id
          where s.galaxy_id in (select value from json_each(?1))
            and s.valid_from_version <= ?2
            and (s.valid_until_version is null or s.valid_until_version > ?2)
       order by s.galaxy_id, s.quantity, s.band",
    )
    .bind(ids)
    .bind(at)
    .fetch_all(pool)
    .await
}

/// Every value adopted in (from, to] that held at some version, with the value it replaced
/// and who accepted it, by version, galaxy name, quantity and band.
///
/// # Errors
/// Any database error.
pub async fn values_adopted(
    pool: &SqlitePool,
    from: i64,
    to: i64,
) -> sqlx::Result<Vec<AdoptedChange>> {
    sqlx::query_as(
        "select s.galaxy_id, g.name as galaxy_name, g.slug, s.quantity, s.band,
                (select pm.value_text
                   from adopted_value_span p join measurement pm on pm.measurement_id = p.measurement_id
                  where p.galaxy_id = s.galaxy_id and p.quantity = s.quantity and p.band = s.band
                    and p.valid_until_version = s.valid_from_version
                    and p.valid_until_version > p.valid_from_version
               order by p.valid_from_version desc limit 1) as old_value_text,
                m.value_text as new_value_text, s.valid_from_version as catalog_version,
                sub.source, a.username as reviewer, coalesce(r.note, '') as review_note
           from adopted_value_span s
           join measurement m on m.measurement_id = s.measurement_id
           join submission sub on sub.submission_id = m.submission_id
           join galaxy_span g on g.galaxy_id = s.galaxy_id
                             and g.valid_from_version <= s.valid_from_version
                             and (g.valid_until_version is null
                                  or g.valid_until_version > s.valid_from_version)
           left join review r on r.review_id = (select max(review_id) from review
                                                 where submission_id = sub.submission_id
                                                   and decision = 'accepted')
           left join account a on a.account_id = r.account_id
          where s.valid_from_version > ?1 and s.valid_from_version <= ?2
            and (s.valid_until_version is null or s.valid_until_version > s.valid_from_version)
       order by s.valid_from_version, g.name, s.quantity, s.band",
    )
    .bind(from)
    .bind(to)
    .fetch_all(pool)
    .await
}

/// Every distance change in (from, to]: a galaxy span starting in the range whose predecessor
/// had another distance, error or method, with the audit event of that version, by version
/// and name.
///
/// # Errors
/// Any database error.
pub async fn distances_changed(
    pool: &SqlitePool,
    from: i64,
    to: i64,
) -> sqlx::Result<Vec<DistanceChange>> {
    sqlx::query_as(
        "select s.galaxy_id, s.name as galaxy_name, s.slug,
                p.distance_mpc as old_distance_mpc, p.distance_err_mpc as old_distance_err_mpc,
                p.distance_method as old_method,
                s.distance_mpc as new_distance_mpc, s.distance_err_mpc as new_distance_err_mpc,
                s.distance_method as new_method, s.valid_from_version as catalog_version,
                a.username as changed_by, e.summary
           from galaxy_span s
           join galaxy_span p on p.galaxy_id = s.galaxy_id
                             and p.valid_until_version = s.valid_from_version
                             and p.valid_until_version > p.valid_from_version
           left join audit_event e on e.audit_event_id =
                (select max(audit_event_id) from audit_event
                  where action = 'distance_changed' and entity = 'galaxy'
                    and entity_id = s.galaxy_id and catalog_version = s.valid_from_version)
           left join account a on a.account_id = e.account_id
          where s.valid_from_version > ?1 and s.valid_from_version <= ?2
            and (s.valid_until_version is null or s.valid_until_version > s.valid_from_version)
            and (p.distance_mpc <> s.distance_mpc or p.distance_err_mpc <> s.distance_err_mpc
                 or p.distance_method <> s.distance_method)
       order by s.valid_from_version, s.name",
    )
    .bind(from)
    .bind(to)
    .fetch_all(pool)
    .await
}

/// A galaxy's activity class changed in the range.
#[derive(Debug, Clone, PartialEq, sqlx::FromRow)]
pub struct ActivityChange {
    /// The galaxy.
    pub galaxy_id: i64,
    /// Its name at the version of the change.
    pub galaxy_name: String,
    /// Its URL form.
    pub slug: String,
    /// Old class word.
    pub old_activity: String,
    /// New class word.
    pub new_activity: String,
    /// The version it happened at.
    pub catalog_version: i64,
    /// Who changed it, by username (from the audit event), if anyone.
    pub changed_by: Option<String>,
    /// The audit event's sentence, which carries the note (None without an event).
    pub summary: Option<String>,
}

impl ActivityChange {
    /// The note given with the change: the audit sentence after its fixed part
    /// ("Activity class of NAME: old → new."); empty without an event.
    pub fn note(&self) -> String {
        let Some(summary) = &self.summary else {
            return String::new();
        };
        let fixed = format!(
            "Activity class of {}: {} → {}.",
            self.galaxy_name, self.old_activity, self.new_activity
        );
        summary
            .strip_prefix(&fixed)
            .map_or_else(|| summary.clone(), |rest| rest.trim().to_owned())
    }
}

/// Every activity-class change in (from, to]: a galaxy span starting in the range whose
/// predecessor had another class, with the audit event of that version, by version and name.
///
/// # Errors
/// Any database error.
pub async fn activities_changed(
    pool: &SqlitePool,
    from: i64,
    to: i64,
) -> sqlx::Result<Vec<ActivityChange>> {
    sqlx::query_as(
        "select s.galaxy_id, s.name as galaxy_name, s.slug, p.activity as old_activity,
                s.activity as new_activity, s.valid_from_version as catalog_version,
                a.username as changed_by, e.summary
           from galaxy_span s
           join galaxy_span p on p.galaxy_id = s.galaxy_id
                             and p.valid_until_version = s.valid_from_version
                             and p.valid_until_version > p.valid_from_version
           left join audit_event e on e.audit_event_id =
                (select max(audit_event_id) from audit_event
                  where action = 'activity_changed' and entity = 'galaxy'
                    and entity_id = s.galaxy_id and catalog_version = s.valid_from_version)
           left join account a on a.account_id = e.account_id
          where s.valid_from_version > ?1 and s.valid_from_version <= ?2
            and (s.valid_until_version is null or s.valid_until_version > s.valid_from_version)
            and p.activity <> s.activity
       order by s.valid_from_version, s.name",
    )
    .bind(from)
    .bind(to)
    .fetch_all(pool)
    .await
}

/// The distance change of galaxy `galaxy_id` made at version `version` by account
/// `account_id`, if there is one: what a galaxy page confirms to the person who made it.
///
/// # Errors
/// Any database error.
pub async fn distance_changed_by(
    pool: &SqlitePool,
    galaxy_id: i64,
    version: i64,
    account_id: i64,
) -> sqlx::Result<bool> {
    sqlx::query_scalar(
        "select exists (select 1 from audit_event
                         where action = 'distance_changed' and entity = 'galaxy'
                           and entity_id = ? and catalog_version = ? and account_id = ?)",
    )
    .bind(galaxy_id)
    .bind(version)
    .bind(account_id)
    .fetch_one(pool)
    .await
}

impl DistanceChange {
    /// The note given with the change: the audit sentence after its fixed part
    /// (`galaxies::distance_summary`); the whole sentence if it does not start that way, empty
    /// without an event.
    pub fn note(&self) -> String {
        let Some(summary) = &self.summary else {
            return String::new();
        };
        let fixed = super::galaxies::distance_summary(
            &self.galaxy_name,
            &super::galaxies::NewDistance {
                distance_mpc: self.old_distance_mpc,
                distance_err_mpc: self.old_distance_err_mpc,
                distance_method: self.old_method.clone(),
            },
            &super::galaxies::NewDistance {
                distance_mpc: self.new_distance_mpc,
                distance_err_mpc: self.new_distance_err_mpc,
                distance_method: self.new_method.clone(),
            },
        );
        summary
            .strip_prefix(&fixed)
            .map_or_else(|| summary.clone(), |rest| rest.trim().to_owned())
    }
}
