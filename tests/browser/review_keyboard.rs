//! Journey 8: a reviewer decides on a submission with the keyboard alone (Tab, Shift-Tab,
//! Enter and Space): from the header to the review queue, into the submission's page and
//! back, through the clash choice and the note to Accept, and reads the confirmation.

use massline::auth::Role;
use thirtyfour::Key;

use crate::submit_outlier::FAR_OFF_MASS;
use crate::support::{self, MassSubmission, Reading, TEST_PASSWORD};

#[tokio::test(flavor = "multi_thread", worker_threads = 2)]
async fn a_reviewer_chooses_and_accepts_a_submission_with_the_keyboard_alone() {
    support::run(
        "j8-keyboard-review",
        Reading::Private,
        |journey| async move {
            let galaxy = support::planted_outliers()
                .into_iter()
                .next()
                .expect("the demo catalog plants an M–σ outlier with σ_e");
            journey.account("mira", Role::Member).await;
            journey.account("rhea", Role::Reviewer).await;
            let member = journey.browser("member").await;
            member.log_in_by_keyboard("mira", TEST_PASSWORD).await;
            let id = member
                .submit_mass(&MassSubmission {
                    galaxy: &galaxy,
                    value: FAR_OFF_MASS,
                    reference: "Invented et al. 2033",
                    note: "a second kinematic model",
                })
                .await;
            assert!(
                member
                    .text("p.flash[role=status]")
                    .await
                    .contains(&format!("Submission {id}")),
                "the member's submission is confirmed"
            );

            let reviewer = journey.browser("reviewer").await;
            reviewer.log_in_by_keyboard("rhea", TEST_PASSWORD).await;
            // The header's link to the queue.
            reviewer.tab_and_enter("header a[href='/review']").await;
            reviewer.check("queue").await;
            let item = format!("#review-{id}");
            // Open the submission from the queue, then come back through the header.
            reviewer
                .tab_and_enter(&format!("{item} h2 a[href='/submissions/{id}']"))
                .await;
            reviewer.check("submission").await;
            assert!(
                reviewer
                    .url()
                    .await
                    .ends_with(&format!("/submissions/{id}")),
                "the submission's page is open"
            );
            reviewer.tab_and_enter("header a[href='/review']").await;
            reviewer.check("queue-again").await;

            // The clash: Tab reaches the preselected choice (keep the adopted mass, since the new
            // one makes the galaxy an outlier); Space chooses it.
            let keep = format!("{item} form[action$='/accept'] input[type=radio][value=old]");
            reviewer.tab_to(&keep).await;
            reviewer.press(Key::Space).await;
            assert_eq!(
                reviewer
                    .script(&format!(
                        "return document.querySelector({}).checked;",
                        serde_json::to_string(&keep).expect("a string")
                    ))
                    .await,
                serde_json::Value::Bool(true),
                "keeping the adopted value is chosen"
            );
            // The note, then the Accept button; Shift-Tab goes back to the note in order.
            let note_css = format!("{item} form[action$='/accept'] input[name=note]");
            reviewer
                .tab_and_type(
                    &note_css,
                    "Kept the published mass until the new model is out.",
                )
                .await;
            let accept = format!("{item} form[action$='/accept'] button");
            reviewer.tab_to(&accept).await;
            reviewer.driver_keys(&[Key::Shift, Key::Tab]).await;
            assert_eq!(
                reviewer
                    .script(&format!(
                        "return document.activeElement.matches({});",
                        serde_json::to_string(&note_css).expect("a string")
                    ))
                    .await,
                serde_json::Value::Bool(true),
                "Shift-Tab from Accept goes back to the note"
            );
            reviewer.tab_to(&accept).await;
            reviewer.navigating(reviewer.press(Key::Space)).await;
            reviewer.check("queue-after-accept").await;

            let flash = reviewer.text("p.flash[role=status]").await;
            assert!(
                flash.contains(&format!("Submission {id}")) && flash.contains("was accepted"),
                "the decision is confirmed: {flash}"
            );
            assert_eq!(
                reviewer.count(&item).await,
                0,
                "the submission left the queue"
            );
            let state: String =
                sqlx::query_scalar("select state from submission where submission_id = ?")
                    .bind(id)
                    .fetch_one(&journey.pool)
                    .await
                    .expect("the submission is stored");
            assert_eq!(state, "accepted");
        },
    )
    .await;
}
