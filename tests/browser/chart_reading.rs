//! Journey 8: a reader goes through the M–σ relation page with the keyboard, and on a phone.
//! The chart's points open their galaxy on a click but are no tab stops (the tables below the
//! chart carry the same links); each chart is one image with a text summary; on a 390-pixel
//! screen each chart's box fits the window and scrolls inside itself.

use crate::support::{self, Reading};

/// Focusable elements inside the charts: links and anything with a tab index of 0 or more.
const FOCUSABLE_IN_CHARTS: &str = "return [...document.querySelectorAll('figure.chart svg a, figure.chart svg [tabindex]')].filter(e => e.tabIndex >= 0).length;";

/// The smallest rendered size, in CSS pixels, of any text of the first chart: its font size in
/// SVG units times the scale at which the SVG is drawn.
const SMALLEST_CHART_TEXT: &str = "const svg = document.querySelector('figure.chart svg'); const scale = svg.getBoundingClientRect().width / svg.viewBox.baseVal.width; return Math.min(...[...svg.querySelectorAll('text')].map(t => parseFloat(getComputedStyle(t).fontSize) * scale));";

#[tokio::test(flavor = "multi_thread", worker_threads = 2)]
async fn chart_points_are_no_tab_stops_and_charts_fit_a_phone_window() {
    support::run("j8-chart-reading", Reading::Public, |journey| async move {
        let reader = journey.browser("reader").await;
        reader.open("/relations/m_sigma", "relation-page").await;
        let links = reader.count("figure.chart svg a").await;
        assert!(links > 50, "the chart's points are links ({links})");
        assert_eq!(
            reader.script(FOCUSABLE_IN_CHARTS).await,
            0,
            "no chart point is a tab stop"
        );
        let labelled = reader
            .script("return [...document.querySelectorAll('figure.chart svg')].every(s => s.getAttribute('role') === 'img' && (s.getAttribute('aria-label') || '').includes('object'));")
            .await;
        assert_eq!(labelled, true, "every chart is an image with a text summary");

        // A phone-width window: the page fits, the chart may scroll inside its own box.
        reader
            .driver
            .set_window_rect(0, 0, 390, 844)
            .await
            .expect("the window resizes");
        reader
            .driver
            .goto(format!("{}/relations/m_sigma", journey.address))
            .await
            .expect("the page opens");
        let wider = reader
            .script("return [...document.querySelectorAll('figure.chart')].filter(f => f.getBoundingClientRect().right > window.innerWidth + 0.5).length;")
            .await;
        assert_eq!(wider, 0, "every chart box fits the 390-pixel window");
        let scrolls = reader
            .script("return [...document.querySelectorAll('figure.chart')].every(f => getComputedStyle(f).overflowX === 'auto');")
            .await;
        assert_eq!(scrolls, true, "a chart wider than its box scrolls inside it");
        // What else is wider than the window, for the record (the page's layout decides it).
        let others = reader
            .script("return [...document.querySelectorAll('main *')].filter(e => e.getBoundingClientRect().right > window.innerWidth + 0.5 && !e.closest('figure.chart')).slice(0, 5).map(e => e.tagName + '.' + e.className).join(', ');")
            .await;
        eprintln!("wider than a 390 px window outside the charts: {others}");
        let smallest = reader.script(SMALLEST_CHART_TEXT).await;
        let smallest = smallest.as_f64().expect("a size");
        assert!(smallest > 0.0, "chart text is measured ({smallest} px)");
        // The style sheet's `.chart svg` minimum width keeps chart text legible on a phone; the
        // chart scrolls inside its box instead of shrinking.
        assert!(
            smallest >= 11.0,
            "chart text renders at {smallest:.1} px on a 390 px screen"
        );
    })
    .await;
}
