//! Journey 1: a member logs in, submits a new black-hole mass for an existing galaxy that lies
//! far off the M–σ relation, and sees its z-score, verdict and chart before and after
//! submitting.

use massline::auth::Role;

use thirtyfour::Key;

use crate::support::{self, MassSubmission, PAYLOADS, Page, Reading, TEST_PASSWORD, number};

/// The mass submitted: about 2 dex below what M–σ predicts at the outlier's σ (~185 km/s);
/// computed from the demo fit of seed-data/README.md (α = 8.30, β = 5.99): 8.10 − 6.0 = 2.1 dex.
pub(crate) const FAR_OFF_MASS: &str = "1.0e6 +0.3e6/-0.2e6";

#[tokio::test(flavor = "multi_thread", worker_threads = 2)]
async fn a_member_submits_a_mass_far_off_m_sigma_and_sees_z_verdict_and_chart_before_and_after() {
    support::run("j1-submit", Reading::Private, |journey| async move {
        let galaxy = support::planted_outliers()
            .into_iter()
            .next()
            .expect("the demo catalog plants an M–σ outlier with σ_e");
        journey.account("mira", Role::Member).await;
        let member = journey.browser("member").await;
        member.log_in_by_keyboard("mira", TEST_PASSWORD).await;

        // Before: the galaxy page places it against M–σ fitted without it.
        member
            .open(&format!("/galaxies/{}", galaxy.slug), "galaxy-before")
            .await;
        let before = member.text("#place-m_sigma").await;
        let z_before = number(&member.text("#place-m_sigma td:nth-child(7)").await);
        // z ≤ −2 "in tension", z ≤ −3 "outlier" (common practice, docs/methods.md §6).
        assert!(
            z_before <= -2.0,
            "the planted outlier lies below M–σ by 2σ or more: {before}"
        );
        assert!(
            before.contains("in tension") || before.contains("outlier"),
            "the verdict says so: {before}"
        );
        assert!(
            member.count("figure.chart svg").await >= 1,
            "the galaxy page has its charts"
        );

        // Before submitting: the form's check against the relations. Enter in a text field
        // presses the form's first button, which checks and stores nothing.
        let stored_before = submissions_count(&journey.pool).await;
        member.open("/submissions/new", "submission-form").await;
        let submission = MassSubmission {
            galaxy: &galaxy,
            value: FAR_OFF_MASS,
            reference: PAYLOADS[1],
            note: PAYLOADS[0],
        };
        member.fill_mass_submission(&submission).await;
        member.tab_to("input[name=m0_value]").await;
        member.navigating(member.press(Key::Enter)).await;
        member.check("preview").await;
        let preview = member.text("#preview #place-m_sigma").await;
        let z_preview = number(&member.text("#preview #place-m_sigma td:nth-child(7)").await);
        assert!(z_preview <= -3.0, "the new mass is an outlier: {preview}");
        assert!(
            preview.contains("outlier"),
            "the verdict says so: {preview}"
        );
        assert!(
            chart_names(&member, &galaxy.name).await,
            "the preview's chart marks the galaxy with its new mass"
        );
        assert_eq!(
            submissions_count(&journey.pool).await,
            stored_before,
            "checking stores nothing"
        );
        assert_eq!(
            member
                .script("return document.querySelector('input[name=m0_reference]').value;")
                .await,
            PAYLOADS[1],
            "the form keeps what was typed, as text"
        );

        // Submit.
        member
            .click_button("#submission-form", "Submit for review")
            .await;
        member.check("submission-sent").await;
        let flash = member.text("p.flash[role=status]").await;
        assert!(
            flash.contains("was saved"),
            "the submission is confirmed: {flash}"
        );
        let url = member.url().await;
        let id: i64 = url
            .rsplit('/')
            .next()
            .and_then(|id| id.parse().ok())
            .unwrap_or_else(|| panic!("the submission did not land on its page: {url}"));
        assert_eq!(
            submissions_count(&journey.pool).await,
            stored_before + 1,
            "one submission stored"
        );
        assert_eq!(member.text("#submission-state").await, "pending");
        assert!(
            member.text("#measurements").await.contains(PAYLOADS[1]),
            "the reference is shown as typed, as text"
        );
        let after = member.text("#place-m_sigma").await;
        let z_after = number(&member.text("#place-m_sigma td:nth-child(7)").await);
        assert!(z_after <= -3.0, "after submitting: an outlier: {after}");
        assert!(after.contains("outlier"), "the verdict says so: {after}");
        assert!(
            chart_names(&member, &galaxy.name).await,
            "the submission page's chart marks the galaxy with its submitted mass"
        );

        // The member's list has it, pending.
        member.open("/submissions", "my-submissions").await;
        assert_eq!(
            member.text(&format!("#submission-{id} .state")).await,
            "pending"
        );
    })
    .await;
}

/// Whether a chart on the page names the galaxy (its legend entry for the highlighted star).
async fn chart_names(page: &Page, name: &str) -> bool {
    page.script(&format!(
        "return [...document.querySelectorAll('figure.chart')].some(f => f.textContent.includes({}));",
        serde_json::to_string(name).expect("a string")
    ))
    .await
        == true
}

async fn submissions_count(pool: &sqlx::SqlitePool) -> i64 {
    sqlx::query_scalar("select count(*) from submission")
        .fetch_one(pool)
        .await
        .expect("a count")
}
