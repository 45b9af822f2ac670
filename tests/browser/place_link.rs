//! Journey 4: with public read access on, a visitor places an object on the place page, copies
//! the address, and a second browser session opening it sees the same result.

use crate::support::{self, PAYLOADS, Reading};

#[tokio::test(flavor = "multi_thread", worker_threads = 2)]
async fn a_visitor_places_an_object_and_a_colleague_opening_the_copied_address_sees_the_same_result()
 {
    support::run("j4-place", Reading::Public, |journey| async move {
        let visitor = journey.browser("visitor").await;
        visitor.open("/place", "place-empty").await;
        assert_eq!(visitor.count("#placements").await, 0, "an empty form shows no result");

        // Script-injection payloads typed into the fields are shown back as text, never run.
        visitor.tab_and_type("#f-sigma", PAYLOADS[0]).await;
        visitor.tab_and_type("#f-mass", PAYLOADS[1]).await;
        visitor.navigating(visitor.press(thirtyfour::Key::Enter)).await;
        visitor.check("place-payloads").await;
        let kept = visitor
            .script("return [document.getElementById('f-sigma').value, document.getElementById('f-mass').value];")
            .await;
        assert_eq!(kept[0], PAYLOADS[0], "the typed text is kept as typed");
        assert_eq!(kept[1], PAYLOADS[1], "the typed text is kept as typed");
        assert!(visitor.count(".field-error").await >= 2, "both fields are marked wrong");
        assert_eq!(visitor.count("#f-sigma + img, img[src=x]").await, 0, "no element was injected");

        // The keyboard alone: Tab to each field, type, Enter.
        visitor.tab_and_type("#f-sigma", "210 ± 10").await;
        visitor.tab_and_type("#f-mass", "2.4e8 +0.6e8/-0.5e8").await;
        visitor.tab_and_type("#f-distance", "16.5 ± 0.8").await;
        visitor.tab_and_type("#f-resolution", "0.1").await;
        visitor.navigating(visitor.press(thirtyfour::Key::Enter)).await;
        visitor.check("place-result").await;
        let row = visitor.text("#place-m_sigma").await;
        assert!(
            ["consistent", "in tension", "outlier"].iter().any(|v| row.contains(v)),
            "the M–σ row has a verdict: {row}"
        );
        let z = visitor.text("#place-m_sigma td:nth-child(7)").await;
        assert!(z.trim().replace('−', "-").parse::<f64>().is_ok(), "z is a number: {z}");
        assert!(visitor.count("figure.chart svg").await >= 1, "the result has a chart");
        let placed = visitor.text("#placements").await;
        let soi = visitor.text("#soi").await;

        // The address carries the whole question.
        let url = visitor.url().await;
        assert!(url.contains("sigma=") && url.contains("mass="), "the address holds the values: {url}");
        let colleague = journey.browser("colleague").await;
        colleague.open_url(&url, "place-opened-from-link").await;
        assert_eq!(colleague.text("#placements").await, placed, "the same placements");
        assert_eq!(colleague.text("#soi").await, soi, "the same sphere-of-influence check");
        assert_eq!(
            colleague.script("return document.getElementById('f-mass').value;").await,
            "2.4e8 +0.6e8/-0.5e8",
            "the form shows the values typed"
        );
    })
    .await;
}
