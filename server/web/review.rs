//! `/review`: the reviewers' queue of pending submissions, largest |z| first, and the accept
//! and reject actions.
//!
//! Each entry shows what accepting it would mean (`relations::assess`): residual
//! and z against the current structural fits, the sphere-of-influence check, the mass at the
//! adopted distance, adopted values it would replace (the reviewer chooses, per clash, which
//! stays adopted) and how a refit with it would move α, β and ε. A reviewer never decides on
//! their own submission (`auth::may_review`): the buttons are absent and the action is a 403.

use std::collections::HashSet;

use askama::Template;
use askama_web::WebTemplate;
use axum::Form;
use axum::extract::{Extension, Path, State};
use axum::response::Redirect;

use super::Nav;
use super::account::session_of;
use super::display::{Badge, readable_utc, signed};
use super::place::PlaceRow;
use super::submissions::{
    AssessmentView, ClashView, FlashQuery, MeasurementView, flag_id, parse_id,
};
use crate::auth::{Principal, may_review};
use crate::catalog::intake::check_note;
use crate::catalog::submissions::{self, SubmissionError};
use crate::error::{AppError, AppResult};
use crate::relations::assess::{QueueEntry, review_queue_page};
use crate::state::AppState;

/// The sentence of the 403 for one's own submission.
const OWN_SUBMISSION: &str =
    "You submitted this yourself; another reviewer must accept or reject it.";

/// One pending submission in the queue.
pub(crate) struct QueueItem {
    id: i64,
    galaxy_name: String,
    galaxy_slug: String,
    submitter: String,
    /// "2 Dec 2026, 14:05 UTC".
    created_at: String,
    /// The stored RFC 3339 time, for `<time datetime>`.
    created_iso: String,
    note: String,
    own: bool,
    measurements: Vec<MeasurementView>,
    rows: Vec<PlaceRow>,
    soi: Option<String>,
    soi_badge: Option<Badge>,
    mass_at_adopted: Option<String>,
    clashes: Vec<ClashView>,
    /// Why "keep the adopted value" is preselected on each clash: the submission makes its
    /// galaxy an outlier ([`keep_old_reason`]). None: "adopt the submitted value" is.
    keep_old_reason: Option<String>,
}

/// `/review`.
#[derive(Template, WebTemplate)]
#[template(path = "pages/review.html")]
pub(crate) struct ReviewPage {
    nav: Nav,
    csrf: String,
    items: Vec<QueueItem>,
    /// Pending submissions in all.
    total: usize,
    /// Pending submissions not yet placed against the current fits (listed last).
    unscored: usize,
    page: usize,
    pages: usize,
    /// After accepting or rejecting: the submission and what this reviewer decided on it.
    flash: Option<(i64, String)>,
}

/// Submissions per page of the queue.
pub(crate) const QUEUE_PAGE: usize = 20;

/// `?page=N` of the queue.
#[derive(Debug, serde::Deserialize)]
pub(crate) struct QueueQuery {
    #[serde(default)]
    page: Option<String>,
}

/// The queue, largest |z| first (submissions without a mass last, oldest first among equals),
/// [`QUEUE_PAGE`] a page. Every pending submission is placed against the cached fits to order
/// them (cheap); only the page shown gets the refits with each submission in.
pub(crate) async fn show_queue(
    State(state): State<AppState>,
    Extension(principal): Extension<Principal>,
    nav: Nav,
    axum::extract::Query(query): axum::extract::Query<QueueQuery>,
    axum::extract::Query(flags): axum::extract::Query<FlashQuery>,
) -> AppResult<ReviewPage> {
    let user = session_of(&principal)?;
    let flash = match flag_id(flags.decided.as_ref()) {
        Some(id) => decided_flash(&state, &user.username, id).await?,
        None => None,
    };
    let page = match query.page.as_deref().map(str::trim) {
        None | Some("") => 1,
        Some(p) => p.parse::<usize>().ok().filter(|p| *p >= 1).ok_or_else(|| {
            AppError::bad_request(format!(
                "'{}' is not a page number (1, 2, 3, …).",
                p.chars().take(20).collect::<String>()
            ))
        })?,
    };
    let queue = review_queue_page(&state.catalog(), page, QUEUE_PAGE).await?;
    let total = queue.total;
    let mut items = Vec::with_capacity(queue.entries.len());
    for e in &queue.entries {
        let virial =
            crate::relations::agn::submission_virial(&state.pool, &e.pending.measurements).await?;
        items.push(QueueItem::of(e, &virial, user.role, user.account_id));
    }
    let pages = total.div_ceil(QUEUE_PAGE).max(1);
    Ok(ReviewPage {
        nav,
        csrf: user.csrf_token.clone(),
        items,
        total,
        unscored: queue.unscored,
        page,
        pages,
        flash,
    })
}

/// The confirmation of a decision: only when the newest review of the submission is this
/// reviewer's, and in the words of what is stored.
async fn decided_flash(
    state: &AppState,
    reviewer: &str,
    id: i64,
) -> AppResult<Option<(i64, String)>> {
    let Some(summary) = submissions::find(&state.pool, id).await? else {
        return Ok(None);
    };
    let reviews = submissions::reviews_of_submission(&state.pool, id).await?;
    Ok(reviews.first().filter(|r| r.reviewer == reviewer).map(|r| {
        (
            id,
            format!(
                "for {} was {}; the submitter sees your decision{}.",
                summary.galaxy_name,
                r.decision,
                if r.note.is_empty() {
                    ""
                } else {
                    " and its note"
                }
            ),
        )
    }))
}

/// Whether accepting should keep the adopted values by default: when, with the submitted
/// values in place, the galaxy is an outlier against a relation (the verdict of
/// `relations::place`: |z| ≥ 3, common practice), the sentence saying so; the largest such |z|
/// is named. A reviewer may still choose to adopt.
fn keep_old_reason(e: &QueueEntry) -> Option<String> {
    let worst = e
        .assessment
        .placements
        .iter()
        .filter_map(|p| {
            let n = p.numbers.as_ref().ok()?;
            let z = n.z?;
            n.verdict
                .filter(|v| v.starts_with("outlier"))
                .map(|_| (z, p.relation.label()))
        })
        .max_by(|a, b| a.0.abs().total_cmp(&b.0.abs()))?;
    Some(format!(
        "Preselected: keep the adopted value, because with the submitted values this galaxy is an outlier (z = {} against {}; |z| ≥ 3). Choose “adopt” only if you have checked the new value.",
        signed(worst.0, 1),
        worst.1
    ))
}

impl QueueItem {
    fn of(
        e: &QueueEntry,
        virial: &[crate::relations::agn::VirialDetail],
        role: crate::auth::Role,
        account_id: i64,
    ) -> Self {
        let s = &e.pending.summary;
        let a = AssessmentView::of(&e.assessment);
        QueueItem {
            id: s.submission_id,
            galaxy_name: s.galaxy_name.clone(),
            galaxy_slug: s.galaxy_slug.clone(),
            submitter: s
                .username
                .clone()
                .unwrap_or_else(|| "command line".to_owned()),
            created_at: readable_utc(&s.created_at),
            created_iso: s.created_at.clone(),
            note: s.note.clone(),
            own: !may_review(role, account_id, s.account_id),
            measurements: e
                .pending
                .measurements
                .iter()
                .map(|m| MeasurementView::new(m, virial))
                .collect(),
            rows: a.rows,
            soi: a.soi,
            soi_badge: a.soi_badge,
            mass_at_adopted: a.mass_at_adopted,
            clashes: a.clashes,
            keep_old_reason: keep_old_reason(e),
        }
    }
}

/// Refuse unless the submission exists and the caller may review it.
async fn check_reviewable(state: &AppState, principal: &Principal, id: i64) -> AppResult<i64> {
    let user = session_of(principal)?;
    let summary = submissions::find(&state.pool, id)
        .await?
        .ok_or_else(|| AppError::not_found(format!("Submission number {id}")))?;
    if !may_review(user.role, user.account_id, summary.account_id) {
        return Err(AppError::forbidden(OWN_SUBMISSION));
    }
    Ok(user.account_id)
}

fn decision_error(e: SubmissionError) -> AppError {
    match e {
        SubmissionError::Db(e) => e.into(),
        SubmissionError::OwnSubmission => AppError::forbidden(OWN_SUBMISSION),
        SubmissionError::NotFound => AppError::not_found("The submission"),
        other => AppError::bad_request(other.to_string()),
    }
}

/// Accept: `note`, and for each clash `keep_<measurement id>=old` to keep the adopted value
/// (anything else, or nothing, adopts the new one).
pub(crate) async fn accept(
    State(state): State<AppState>,
    Extension(principal): Extension<Principal>,
    Path(id): Path<String>,
    Form(pairs): Form<Vec<(String, String)>>,
) -> AppResult<Redirect> {
    let id = parse_id(&id)?;
    let reviewer = check_reviewable(&state, &principal, id).await?;
    let mut note = String::new();
    let mut keep_old = HashSet::new();
    for (k, v) in &pairs {
        if k == "note" {
            v.trim().clone_into(&mut note);
        } else if let Some(mid) = k.strip_prefix("keep_")
            && v == "old"
        {
            let mid: i64 = mid.parse().map_err(|_| {
                AppError::bad_request(format!("'{k}' is not a field of this form."))
            })?;
            keep_old.insert(mid);
        }
    }
    check_note(&note).map_err(|e| AppError::bad_request(format!("{e} Nothing was changed.")))?;
    submissions::accept(&state.pool, reviewer, id, &keep_old, &note)
        .await
        .map_err(decision_error)?;
    Ok(Redirect::to(&format!("/review?decided={id}")))
}

/// The reject form's fields.
#[derive(Debug, serde::Deserialize)]
pub(crate) struct RejectForm {
    #[serde(default)]
    note: String,
}

/// Reject with a note (required: the submitter and the galaxy page show it).
pub(crate) async fn reject(
    State(state): State<AppState>,
    Extension(principal): Extension<Principal>,
    Path(id): Path<String>,
    Form(form): Form<RejectForm>,
) -> AppResult<Redirect> {
    let id = parse_id(&id)?;
    let reviewer = check_reviewable(&state, &principal, id).await?;
    let note = form.note.trim();
    if note.is_empty() {
        return Err(AppError::bad_request(
            "A rejection needs a note saying why; nothing was changed.",
        ));
    }
    check_note(note).map_err(|e| AppError::bad_request(format!("{e} Nothing was changed.")))?;
    submissions::reject(&state.pool, reviewer, id, note)
        .await
        .map_err(decision_error)?;
    Ok(Redirect::to(&format!("/review?decided={id}")))
}
