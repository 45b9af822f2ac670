//! Journey: a member loads the invented maser disk on the disk-fit page, fits it with the
//! keyboard, opens "Submit this mass", finds the form filled with the mass, chooses a demo
//! galaxy, submits and sees the pending submission with that mass.

use massline::auth::Role;

use crate::support::{self, Reading, TEST_PASSWORD, planted_outliers};

#[tokio::test(flavor = "multi_thread", worker_threads = 2)]
async fn a_member_fits_a_maser_disk_and_submits_the_mass_from_the_filled_form() {
    support::run("j-disk", Reading::Private, |journey| async move {
        journey.account("tarn", Role::Member).await;
        let member = journey.browser("member").await;
        member.log_in_by_keyboard("tarn", TEST_PASSWORD).await;

        member.open("/kinematics", "disk-form").await;
        member.tab_and_enter("#example-maser").await;
        member.check("disk-example").await;
        assert!(
            member
                .script("return document.querySelector('#f-table').value;")
                .await
                .as_str()
                .is_some_and(|t| t.starts_with("offset_mas,v_km_s")),
            "the example's table is in the form"
        );
        let stored_before = submissions_count(&journey.pool).await;
        member.tab_and_enter("#fit").await;
        member.check("disk-result").await;
        let log_mbh = member.text("#log-mbh").await;
        assert!(
            log_mbh.starts_with("7."),
            "the invented maser disk holds 4 × 10⁷ M☉: {log_mbh}"
        );
        assert!(member.count("figure.chart svg[role=img]").await >= 1);
        assert!(member.text("#maser-distance").await.contains("Mpc"));
        assert_eq!(
            submissions_count(&journey.pool).await,
            stored_before,
            "fitting stores nothing"
        );

        member.tab_and_enter("#submit-mass").await;
        member.check("disk-submission-form").await;
        let value = member
            .script("return document.querySelector('input[name=m0_value]').value;")
            .await;
        assert!(
            value
                .as_str()
                .is_some_and(|v| v.starts_with(&format!("log {log_mbh}"))),
            "the form carries the mass: {value}"
        );
        let method = member
            .script("return document.querySelector('select[name=m0_method_bh]').value;")
            .await;
        assert_eq!(method.as_str(), Some("maser"));

        let galaxy = planted_outliers()
            .into_iter()
            .next()
            .expect("a demo galaxy");
        member.fill("input[name=galaxy]", &galaxy.name).await;
        member
            .click_button("#submission-form", "Submit for review")
            .await;
        member.check("disk-submission-sent").await;
        assert_eq!(
            submissions_count(&journey.pool).await,
            stored_before + 1,
            "one submission stored"
        );
        assert_eq!(member.text("#submission-state").await, "pending");
        assert!(
            member.text("#measurements").await.contains(&log_mbh),
            "the submission shows the fitted mass"
        );
    })
    .await;
}

async fn submissions_count(pool: &sqlx::SqlitePool) -> i64 {
    sqlx::query_scalar("select count(*) from submission")
        .fetch_one(pool)
        .await
        .expect("a count")
}
