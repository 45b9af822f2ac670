//! The pages not on any journey's path, opened once so each gets the page checks and a
//! screenshot: the overview, the catalog table (and its empty state), the relations, an error
//! page. The focus ring is measured in the header and on the page.

use crate::support::{self, Reading};

#[tokio::test(flavor = "multi_thread", worker_threads = 2)]
async fn a_visitor_reads_every_public_page_and_each_passes_the_page_checks() {
    support::run("j7-tour", Reading::Public, |journey| async move {
        let visitor = journey.browser("visitor").await;
        visitor.open("/", "overview").await;
        assert!(
            support::number(&visitor.text("#galaxy-count").await) > 0.0,
            "the demo catalog is loaded"
        );
        // The focus ring shows, with 3:1, on the dark header and on the page (the checks
        // measure the focused element's ring).
        visitor.tab_to("header nav a[href='/galaxies']").await;
        visitor.check("focus-in-header").await;
        visitor.tab_to("main a").await;
        visitor.check("focus-in-main").await;
        assert_eq!(
            visitor
                .script("return document.querySelector('header nav a[aria-current=page]').getAttribute('href');")
                .await,
            "/",
            "the overview's link is marked as the current page"
        );
        visitor.open("/galaxies", "catalog").await;
        assert_eq!(
            visitor
                .texts("header nav a[aria-current=page]")
                .await,
            ["Catalog"],
            "only the catalog's link is marked as the current page"
        );
        assert!(visitor.count("table.catalog tbody tr").await > 0);
        visitor
            .open("/galaxies?sort=sigma&dir=desc", "catalog-by-sigma")
            .await;
        visitor
            .open(
                "/galaxies?morphology=irregular&bulge_kind=pseudo&limits=limits",
                "catalog-empty",
            )
            .await;
        assert!(
            visitor.text("#match-count").await.starts_with("No galaxy"),
            "an empty selection says so"
        );
        visitor.open("/relations", "relations").await;
        for slug in ["m_sigma", "m_mbulge", "m_sigma_mbulge"] {
            visitor.open(&format!("/relations/{slug}"), slug).await;
            assert_eq!(
                visitor.count("#params").await,
                1,
                "{slug} has its parameters"
            );
        }
        visitor
            .open("/relations/m_sigma?method=bces-bisector", "m_sigma-bces")
            .await;
        visitor
            .open_expecting("/galaxies/no-such-galaxy", 404, "not-found")
            .await;
        assert!(visitor.text("section.error").await.contains("404"));
        visitor
            .open_expecting("/galaxies?sort=nonsense", 400, "bad-parameter")
            .await;
    })
    .await;
}
