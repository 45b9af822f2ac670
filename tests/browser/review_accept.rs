//! Journey 6: a reviewer accepts a submission, and the relation page shows the new catalog
//! version and the moved parameters.

use massline::auth::Role;

use crate::support::{self, MassSubmission, Reading, TEST_PASSWORD};

fn version(text: &str) -> i64 {
    text.trim()
        .parse()
        .unwrap_or_else(|_| panic!("a catalog version: {text}"))
}

#[tokio::test(flavor = "multi_thread", worker_threads = 2)]
async fn a_reviewer_accepts_a_submission_and_the_relation_page_shows_the_new_version_and_moved_parameters()
 {
    support::run("j6-accept", Reading::Private, |journey| async move {
        let galaxy = support::planted_outliers()
            .into_iter()
            .next()
            .expect("the demo catalog plants an M–σ outlier with σ_e");
        journey.account("mira", Role::Member).await;
        journey.account("rhea", Role::Reviewer).await;
        let member = journey.browser("member").await;
        member.log_in_by_keyboard("mira", TEST_PASSWORD).await;
        let reviewer = journey.browser("reviewer").await;
        reviewer.log_in_by_keyboard("rhea", TEST_PASSWORD).await;

        reviewer.open("/relations/m_sigma", "relation-before").await;
        let version_before = version(&reviewer.fact("Catalog version").await);
        let params_before = reviewer.text("#params").await;

        // A re-measurement that moves the outlier far onto the high side of the relation.
        let id = member
            .submit_mass(&MassSubmission {
                galaxy: &galaxy,
                value: "3e10 ± 0.5e10",
                reference: "Invented et al. 2032",
                note: "new data cube",
            })
            .await;

        // The clash with the adopted mass: the new mass makes the galaxy an outlier, so the
        // form preselects keeping the adopted one and says why; the reviewer adopts the new one.
        reviewer.open("/review", "queue").await;
        let item = format!("#review-{id}");
        let accept_form = reviewer
            .text(&format!("{item} form[action$='/accept']"))
            .await;
        assert!(
            accept_form.contains("adopt the submitted value")
                && accept_form.contains("keep the adopted value, because"),
            "the clash with the adopted mass is offered, with the reason for the preselection: {accept_form}"
        );
        assert_eq!(
            reviewer
                .script(&format!(
                    "return document.querySelector(\"{item} input[type=radio][value=old]\").checked;"
                ))
                .await,
            serde_json::Value::Bool(true),
            "keeping the adopted value is preselected on an outlier"
        );
        reviewer
            .element(&format!("{item} input[type=radio][value=new]"))
            .await
            .click()
            .await
            .expect("the reviewer chooses to adopt the new mass");
        // Then the note and Enter with the keyboard alone.
        reviewer
            .tab_and_type(
                &format!("{item} form[action$='/accept'] input[name=note]"),
                "Checked against the data cube.",
            )
            .await;
        reviewer
            .navigating(reviewer.press(thirtyfour::Key::Enter))
            .await;
        reviewer.check("queue-after-accept").await;
        assert!(
            reviewer
                .text("p.flash[role=status]")
                .await
                .contains(&format!("Submission {id}")),
            "the decision is confirmed"
        );
        assert_eq!(
            reviewer.count(&item).await,
            0,
            "the submission left the queue"
        );

        reviewer.open("/relations/m_sigma", "relation-after").await;
        let version_after = version(&reviewer.fact("Catalog version").await);
        assert!(
            version_after == version_before + 1,
            "one new catalog version: {version_before} → {version_after}"
        );
        let params_after = reviewer.text("#params").await;
        assert_ne!(
            params_after, params_before,
            "the parameters moved with the adopted mass"
        );
        reviewer.open("/relations", "relations-after").await;
        assert_eq!(
            version(&reviewer.text("#catalog-version").await),
            version_after,
            "the relations list names the same version"
        );
        member
            .open(&format!("/galaxies/{}", galaxy.slug), "galaxy-after")
            .await;
        assert!(
            member
                .text(&format!("#review-{id}"))
                .await
                .contains("accepted"),
            "the galaxy page shows the decision"
        );
    })
    .await;
}
