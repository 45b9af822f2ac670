//! Journey 8: a visitor on a phone (390 × 844) places an object, reads a relation, its fit's
//! permanent page, what changed and the releases, and a galaxy: no page is wider than the screen, and on /place the placement's z and verdict can
//! be read without scrolling sideways (the table becomes cards at this width).

use crate::support::{self, PHONE_WIDTH, Reading};

/// Where an element lies across the window: (left, right, window width), in CSS pixels.
const SPAN: &str = "const r = document.querySelector(arguments[0]).getBoundingClientRect(); return [r.left, r.right, window.innerWidth, document.documentElement.scrollWidth];";

#[tokio::test(flavor = "multi_thread", worker_threads = 2)]
async fn on_a_phone_no_page_is_wider_than_the_screen_and_z_and_the_verdict_show_first() {
    support::run("j8-phone", Reading::Public, |journey| async move {
        let visitor = journey.browser("phone").await;
        visitor.set_phone(true).await;
        visitor.open("/place", "place-empty").await;
        visitor.tab_and_type("#f-sigma", "210 ± 10").await;
        visitor.tab_and_type("#f-mass", "2.4e8 +0.6e8/-0.5e8").await;
        visitor.tab_and_type("#f-distance", "16.5 ± 0.8").await;
        visitor.tab_and_type("#f-resolution", "0.1").await;
        visitor.tab_and_enter("button.primary").await;
        visitor.check("place-result").await;
        for css in [
            "#place-m_sigma td.card-z",
            "#place-m_sigma td.card-verdict .verdict",
        ] {
            let span = visitor
                .driver
                .execute(SPAN, vec![serde_json::json!(css)])
                .await
                .expect("the script runs")
                .json()
                .clone();
            let at = |i: usize| span[i].as_f64().expect("a number");
            assert_eq!(
                span[2].as_u64(),
                Some(u64::from(PHONE_WIDTH)),
                "the window is phone-wide"
            );
            assert!(
                at(0) >= 0.0 && at(1) <= at(2),
                "{css} lies at {}–{} px, outside the {} px screen",
                at(0),
                at(1),
                at(2)
            );
            assert!(at(3) <= at(2), "the page is {} px wide", at(3));
        }
        // Card order: the relation, then z, then the verdict, before the predictions.
        let order = visitor
            .script(
                "const row = document.querySelector('#place-m_sigma'); \
                 const top = (c) => row.querySelector(c).getBoundingClientRect().top; \
                 return [top('td.card-title'), top('td.card-z'), top('td.card-verdict'), top('td.predicted')];",
            )
            .await;
        let tops: Vec<f64> = order
            .as_array()
            .expect("a list")
            .iter()
            .map(|v| v.as_f64().expect("a number"))
            .collect();
        assert!(
            tops.windows(2).all(|w| w[0] < w[1]),
            "the card reads relation, z, verdict, prediction from the top: {tops:?}"
        );
        let verdict = visitor.text("#place-m_sigma td.card-verdict").await;
        assert!(
            ["consistent", "in tension", "outlier"]
                .iter()
                .any(|v| verdict.contains(v)),
            "the verdict is in words: {verdict}"
        );

        visitor.open("/relations/m_sigma", "relation").await;
        // The fit's permanent page, from the relation page's how-to-cite box, and the pages of
        // versions and releases: none wider than the screen either.
        let fit_page = visitor
            .script("return document.querySelector('section.cite a').getAttribute('href');")
            .await;
        let fit_page = fit_page.as_str().expect("a how-to-cite link").to_owned();
        visitor.open(&fit_page, "fit-page").await;
        visitor.open("/relations/m_sigma?version=1", "relation-version").await;
        visitor.open("/changes", "changes").await;
        visitor.open("/releases", "releases").await;
        let galaxy = support::planted_outliers()
            .into_iter()
            .next()
            .expect("the demo plants an outlier");
        visitor
            .open(&format!("/galaxies/{}", galaxy.slug), "galaxy")
            .await;
        visitor.open("/", "overview").await;
        visitor.open("/api", "api").await;
    })
    .await;
}
