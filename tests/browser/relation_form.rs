//! Journey 8: a group member fits M–σ with FITEXY from the relation page's form and is told
//! how many upper limits were left out, types the pivot in km/s and sees how it was read, then
//! types a pivot that cannot be read and gets the message beside the field with the form kept,
//! then starts a bootstrap run and watches the page follow it to its result.

use massline::auth::Role;

use crate::support::{self, Reading, TEST_PASSWORD};

#[tokio::test(flavor = "multi_thread", worker_threads = 2)]
async fn a_member_fits_with_fitexy_types_the_pivot_in_km_s_and_is_told_of_a_bad_one() {
    support::run("j8-relation", Reading::Private, |journey| async move {
        journey.account("ines", Role::Member).await;
        let member = journey.browser("member").await;
        member.log_in_by_keyboard("ines", TEST_PASSWORD).await;
        member.open("/relations/m_sigma", "m_sigma-default").await;
        let limits = member.text("#n-limits").await.trim().parse::<usize>().expect("a count");
        assert!(limits > 0, "the default M–σ sample has upper limits");
        assert_eq!(member.count("#limits-note").await, 0, "nothing is left out by default");

        // FITEXY chosen in the form: the fit is made and the page says what was left out.
        member.fill("select[name=method]", "fitexy").await;
        member.tab_and_enter("form.filters button[type=submit]").await;
        member.check("m_sigma-fitexy").await;
        assert!(member.url().await.contains("method=fitexy"));
        assert_eq!(member.count("#params").await, 1, "FITEXY fits the detections");
        assert_eq!(member.count("#fit-error").await, 0);
        let note = member.text("#limits-note").await;
        let count = if limits == 1 {
            "1 upper limit left out".to_owned()
        } else {
            format!("{limits} upper limits left out")
        };
        assert!(note.contains(&count), "the notice counts the limits: {note}");
        assert_eq!(member.text("#n-limits").await.trim(), "0");

        // On a 390 px phone the covariance (each pair a row) is no wider than the screen.
        member
            .driver
            .set_window_rect(0, 0, 390, 844)
            .await
            .expect("the window can be narrowed");
        let fits = member
            .script("const t = document.getElementById('covariance'); return t.getBoundingClientRect().right <= document.documentElement.clientWidth + 0.5 && t.scrollWidth <= t.clientWidth + 1;")
            .await;
        assert_eq!(fits, true, "the covariance fits a 390 px screen");
        member
            .driver
            .set_window_rect(0, 0, 1280, 900)
            .await
            .expect("the window can be widened again");

        // The pivot typed in km/s, with the keyboard alone: read and echoed.
        member.tab_and_type("input[name=pivot]", "200 km/s").await;
        member.navigating(member.press(thirtyfour::Key::Enter)).await;
        member.check("m_sigma-pivot-km-s").await;
        let hint = member.text("#h-pivot").await;
        assert!(hint.contains("read as 200 km/s, log10 = 2.3010"), "{hint}");
        assert_eq!(member.count("#params").await, 1, "the fit is shown");
        assert_eq!(member.count("#query-errors").await, 0);

        // A pivot that cannot be read: the message beside the field, the form kept.
        member.tab_and_type("input[name=pivot]", "fast").await;
        member.navigating(member.press(thirtyfour::Key::Enter)).await;
        member.check("m_sigma-pivot-bad").await;
        let message = member.text("#e-pivot").await;
        assert!(message.contains("200 km/s"), "the message gives an example: {message}");
        let kept = member
            .script("const p = document.querySelector('input[name=pivot]'); return [p.value, p.getAttribute('aria-invalid'), p.getAttribute('aria-describedby')];")
            .await;
        assert_eq!(kept[0], "fast", "the typed text is kept");
        assert_eq!(kept[1], "true");
        assert!(kept[2].as_str().unwrap_or("").contains("e-pivot"));
        assert_eq!(
            member.script("return document.querySelector('select[name=method]').value;").await,
            "fitexy",
            "the other choices are kept"
        );
        assert_eq!(member.count("form.filters").await, 1);

        // A bootstrap run started from the page: its progress follows by itself
        // (static/runs.js) and the page lands on the stored result without anyone reloading.
        member
            .open("/relations/m_sigma?replicates=400", "m_sigma-before-run")
            .await;
        // (The charts' point links put the button beyond the Tab key's reach: clicked.)
        let start = member.element("#run-bootstrap button[type=submit]").await;
        member
            .navigating(async {
                start.click().await.expect("the button can be clicked");
            })
            .await;
        member.check("m_sigma-run-started").await;
        assert_eq!(
            member.count("[data-run-id][aria-live=polite]").await,
            1,
            "the page shows the run waiting or running"
        );
        let mut stored = false;
        for _ in 0..600 {
            let shown = member
                .script("return document.querySelector('#run-bootstrap table') !== null;")
                .await;
            if shown.as_bool() == Some(true) {
                stored = true;
                break;
            }
            tokio::time::sleep(std::time::Duration::from_millis(200)).await;
        }
        assert!(stored, "the run's result was not shown within 2 minutes");
        member.check("m_sigma-run-stored").await;
        assert!(member.text("#run-bootstrap").await.contains("Stored"));
    })
    .await;
}
