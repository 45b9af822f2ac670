//! Journey 2: a reviewer logs in, finds the far-off submission at the top of the review queue
//! with its influence on the fit, rejects it with a note; the member reads the note on the
//! galaxy page, on their list of submissions and on the submission's page.

use massline::auth::Role;

use crate::submit_outlier::FAR_OFF_MASS;
use crate::support::{self, MassSubmission, PAYLOADS, Reading, TEST_PASSWORD};

/// Pending submissions already in the queue.
const QUEUED: usize = 24;

/// A catalog file of `n` invented galaxies whose masses lie on the M–σ relation
/// (log M = 8.3 + 5 (log σ − log 200), the demo model of seed-data/README.md, close to the
/// demo's fit).
fn queue_filler(n: usize) -> String {
    let mut text = String::from(
        "galaxy,morphology,bulge_kind,centre_kind,distance_mpc,distance_err_mpc,distance_method,quantity,value,scale,method,sigma_definition,aperture,source_distance_mpc,resolution_arcsec,reference\n",
    );
    for i in 0..n {
        let sigma_km_s = 120.0 + 6.0 * i as f64;
        let log_mbh = 8.3 + 5.0 * (sigma_km_s / 200.0).log10();
        text.push_str(&format!(
            "Tarrow {i},elliptical,classical,core,20,1,sbf,sigma,{sigma_km_s:.0} ± 10,,,sigma_e,r_e,,,Invented et al. 2030\n\
             Tarrow {i},,,,,,,bh_mass,{log_mbh:.2} ± 0.1,log10,stellar_dynamics,,,20,0.1,Invented et al. 2030\n"
        ));
    }
    text
}

#[tokio::test(flavor = "multi_thread", worker_threads = 2)]
async fn a_reviewer_rejects_the_far_off_submission_at_the_top_of_the_queue_and_the_member_sees_the_note()
 {
    support::run("j2-reject", Reading::Private, |journey| async move {
        let galaxy = support::planted_outliers()
            .into_iter()
            .next()
            .expect("the demo catalog plants an M–σ outlier with σ_e");
        journey.account("mira", Role::Member).await;
        journey.account("rhea", Role::Reviewer).await;
        // A busy queue: more pending submissions than one page holds, all near the relation.
        let colleague = journey.account("tomas", Role::Member).await;
        let filler = queue_filler(QUEUED);
        massline::catalog::csv_io::import_csv(
            &journey.pool,
            &filler,
            massline::catalog::csv_io::ImportMode::Pending {
                account_id: Some(colleague),
                source: massline::catalog::galaxies::SubmissionSource::Csv,
            },
            &mut |_, _| {},
        )
        .await
        .expect("the colleague's submissions are stored");

        let member = journey.browser("member").await;
        member.log_in_by_keyboard("mira", TEST_PASSWORD).await;
        let id = member
            .submit_mass(&MassSubmission {
                galaxy: &galaxy,
                value: FAR_OFF_MASS,
                reference: "Invented et al. 2031",
                note: "re-measured with a new kinematic model",
            })
            .await;

        let reviewer = journey.browser("reviewer").await;
        reviewer.log_in_by_keyboard("rhea", TEST_PASSWORD).await;
        reviewer.open("/review", "queue").await;
        let first = reviewer
            .script(
                "const s = document.querySelector('section.review-item'); return s ? s.id : null;",
            )
            .await;
        assert_eq!(
            first,
            format!("review-{id}"),
            "the largest |z| comes first in the queue"
        );
        assert!(
            reviewer
                .text("#queue-count")
                .await
                .starts_with(&format!("{} pending", QUEUED + 1)),
            "the queue counts every pending submission"
        );
        assert_eq!(
            reviewer.count("nav.pager").await,
            1,
            "a queue longer than a page has one pager, below the items"
        );
        let item = format!("#review-{id}");
        let placement = reviewer.text(&format!("{item} table.placements")).await;
        assert!(
            placement.contains("outlier"),
            "with its verdict: {placement}"
        );
        assert!(
            placement.contains('α') && placement.contains('β') && placement.contains('→'),
            "with its influence on the fit (the parameters with it included): {placement}"
        );

        // Reject with the keyboard alone; the note carries script-injection payloads.
        let note = format!(
            "Inconsistent with the kinematics {} {}",
            PAYLOADS[0], PAYLOADS[1]
        );
        reviewer
            .tab_and_type(
                &format!("{item} form[action$='/reject'] input[name=note]"),
                &note,
            )
            .await;
        reviewer
            .navigating(reviewer.press(thirtyfour::Key::Enter))
            .await;
        reviewer.check("queue-after-reject").await;
        let flash = reviewer.text("p.flash[role=status]").await;
        assert!(
            flash.contains(&format!("Submission {id}")) && flash.contains("was rejected"),
            "the rejection is confirmed: {flash}"
        );
        assert_eq!(
            reviewer.count(&item).await,
            0,
            "the rejected submission has left the queue"
        );

        // The member sees the decision and the note, as text.
        member
            .open(&format!("/galaxies/{}", galaxy.slug), "galaxy-with-note")
            .await;
        let review = member.text(&format!("#review-{id}")).await;
        assert!(
            review.contains("rejected"),
            "the decision is shown: {review}"
        );
        assert_eq!(
            member.text(&format!("#review-{id} .review-note")).await,
            note,
            "the note is shown exactly as typed"
        );
        // And on their own submission pages, with who decided and when.
        member.open("/submissions", "my-submissions-rejected").await;
        let row = member.text(&format!("#submission-{id}")).await;
        assert!(row.contains("rejected"), "the list says rejected: {row}");
        assert_eq!(
            member.text(&format!("#submission-{id} .review-note")).await,
            note,
            "the list shows the reviewer's note exactly as typed"
        );
        assert!(
            row.contains("rhea") && row.contains(" UTC"),
            "with the reviewer and a readable date: {row}"
        );
        member
            .open(&format!("/submissions/{id}"), "submission-rejected")
            .await;
        assert_eq!(member.text("#submission-state").await, "rejected");
        assert_eq!(
            member.text("#decisions .review-note").await,
            note,
            "the submission page shows the reviewer's note exactly as typed"
        );
        let decision = member.text("#decisions").await;
        assert!(
            decision.contains("rhea") && decision.contains(" UTC"),
            "with the reviewer and a readable date: {decision}"
        );
    })
    .await;
}
