//! M_BH/M_bulge on the galaxy page, the place check and their API answers, against the
//! invented demo catalog. Which galaxies to look at, and their ratios, are derived from the
//! demo files.

use massline::catalog::demo::{DEMO_GALAXIES_CSV, DEMO_MEASUREMENTS_CSV, DemoCatalog, parse_demo};
use massline::catalog::model::{NewMeasurement, Quantity, is_virial_method, slugify};
use serde_json::Value;

use crate::helpers::{TestApp, spawn_demo_app};

fn demo() -> DemoCatalog {
    parse_demo(DEMO_GALAXIES_CSV, DEMO_MEASUREMENTS_CSV).unwrap()
}

/// The adopted measurement of `quantity` of galaxy `gi`, if any.
fn adopted(demo: &DemoCatalog, gi: usize, quantity: Quantity) -> Option<&NewMeasurement> {
    demo.measurements
        .iter()
        .find(|(i, m, a)| *i == gi && *a && m.quantity == quantity)
        .map(|(_, m, _)| m)
}

/// The text between `id="ID"…>` and the next `</`, with the page's escapes undone.
fn element_text(body: &str, id: &str) -> String {
    let start = body
        .find(&format!("id=\"{id}\""))
        .unwrap_or_else(|| panic!("no id={id} in {body}"));
    let open = start + body[start..].find('>').unwrap() + 1;
    let end = open + body[open..].find("</").unwrap();
    body[open..end]
        .replace("&lt;", "<")
        .replace("&#60;", "<")
        .replace("&#62;", ">")
        .replace("&gt;", ">")
        .replace("&#39;", "'")
        .replace("&quot;", "\"")
        .replace("&amp;", "&")
}

/// The value of the `data-value` attribute of the element `id`.
fn data_value(body: &str, id: &str) -> f64 {
    let start = body.find(&format!("id=\"{id}\"")).unwrap();
    let attr = start + body[start..].find("data-value=\"").unwrap() + "data-value=\"".len();
    let end = attr + body[attr..].find('"').unwrap();
    body[attr..end].parse().unwrap()
}

/// Waits for the background analysis of catalog version 1 (the whole-sample fits).
async fn analysed(app: &TestApp) {
    for _ in 0..1200 {
        if app.state.analyst.is_done(1) {
            return;
        }
        tokio::time::sleep(std::time::Duration::from_millis(50)).await;
    }
    panic!("the analysis of version 1 did not finish");
}

#[tokio::test]
async fn a_galaxy_page_and_its_api_answer_show_the_same_mass_ratio() {
    let app = spawn_demo_app().await;
    let demo = demo();
    // The first demo galaxy with a detected dynamical black-hole mass and a bulge mass.
    let gi = (0..demo.galaxies.len())
        .find(|&gi| {
            adopted(&demo, gi, Quantity::BlackHoleMass)
                .is_some_and(|m| !m.upper_limit && !is_virial_method(&m.method))
                && adopted(&demo, gi, Quantity::BulgeMass).is_some()
        })
        .expect("the demo has such a galaxy");
    let galaxy = &demo.galaxies[gi];
    let slug = slugify(&galaxy.name);
    let (mbh, bulge) = (
        adopted(&demo, gi, Quantity::BlackHoleMass).unwrap(),
        adopted(&demo, gi, Quantity::BulgeMass).unwrap(),
    );
    // Both masses moved to the adopted distance (docs/methods.md §3.2): a dynamical mass ∝ D,
    // a photometric bulge mass ∝ D², a dynamical one ∝ D.
    let moved = |m: &NewMeasurement, p: f64| {
        m.log_value
            + m.source_distance_mpc
                .map_or(0.0, |src| p * (galaxy.distance_mpc / src).log10())
    };
    let bulge_p = if bulge.method == "photometric" {
        2.0
    } else {
        1.0
    };
    let expected_log_ratio = moved(mbh, 1.0) - moved(bulge, bulge_p);

    analysed(&app).await;
    // The fit without the galaxy may still be under way at the first visit.
    let mut body = String::new();
    for _ in 0..100 {
        body = app.ok(&format!("/galaxies/{slug}")).await;
        if body.contains("id=\"ratio-predicted\"><span class=\"num\">") {
            break;
        }
        tokio::time::sleep(std::time::Duration::from_millis(100)).await;
    }
    assert!(body.contains("id=\"bulge-ratio\""), "{body}");
    assert!(body.contains("common practice"), "{body}");
    let page_fraction = data_value(&body, "ratio-percent");
    assert!(
        (page_fraction.log10() - expected_log_ratio).abs() < 1e-9,
        "{page_fraction} against 10^{expected_log_ratio}"
    );
    // The verdict against the usual range in words, with its mark and colour class.
    let range = element_text(&body, "ratio-range");
    let words = [
        "within the usual range",
        "above the usual range",
        "below the usual range",
    ];
    assert!(
        body.contains("class=\"verdict v-consistent\"><span aria-hidden=\"true\">✓</span> within the usual range")
            || body.contains("class=\"verdict v-tension\"><span aria-hidden=\"true\">▲</span> above the usual range")
            || body.contains("class=\"verdict v-tension\"><span aria-hidden=\"true\">▲</span> below the usual range"),
        "{range} / {body}"
    );
    // The prediction names the default fit, refitted without the galaxy.
    assert!(body.contains("refitted without this galaxy"), "{body}");
    assert!(!body.contains("NaN"), "{body}");

    let (status, json) = app.get(&format!("/api/v1/galaxies/{slug}")).await;
    assert_eq!(status, 200, "{json}");
    let v: Value = serde_json::from_str(&json).unwrap();
    let r = &v["bulge_ratio"];
    assert!(r.is_object(), "{v}");
    // The same number as the page (serde_json reads a float to within one unit in the last
    // place), and the same verdict and sentence.
    let api_fraction = r["fraction"].as_f64().unwrap();
    assert!(
        (api_fraction / page_fraction - 1.0).abs() < 1e-15,
        "{api_fraction} {page_fraction}"
    );
    assert!((r["percent"].as_f64().unwrap() - 100.0 * page_fraction).abs() < 1e-12);
    assert!(words.contains(&r["range_verdict"].as_str().unwrap()), "{r}");
    assert_eq!(
        element_text(&body, "ratio-sentence"),
        r["sentence"].as_str().unwrap()
    );
    assert_eq!(r["usual_range_low_percent"], 0.1);
    assert_eq!(r["usual_range_high_percent"], 0.5);
    let rel = &r["relation"];
    assert_eq!(rel["relation"], "m_mbulge", "{r}");
    assert_eq!(rel["without_this_galaxy"], true);
    let fit_id = rel["fit_id"].as_str().unwrap();
    assert!(body.contains(&format!("href=\"/fits/{fit_id}\"")), "{body}");
    // The interval holds the prediction.
    let (lo, mid, hi) = (
        rel["interval68_low_percent"].as_f64().unwrap(),
        rel["percent"].as_f64().unwrap(),
        rel["interval68_high_percent"].as_f64().unwrap(),
    );
    assert!(lo < mid && mid < hi, "{rel}");
    // The identifier names the default fit, which can be looked up.
    let (status, fit_page) = app.get(&format!("/fits/{fit_id}")).await;
    assert_eq!(status, 200, "{fit_page}");
    // The API's adopted values are the masses the ratio was made of.
    let adopted_log = |q: &str| {
        v["adopted"]
            .as_array()
            .unwrap()
            .iter()
            .find(|a| a["quantity"] == q)
            .and_then(|a| a["log_value"].as_f64())
            .unwrap()
    };
    assert!(
        (adopted_log("bulge_mass") - r["log_mbulge"].as_f64().unwrap()).abs() < 1e-12,
        "{v}"
    );
    assert!((adopted_log("bh_mass") - r["log_mbh"].as_f64().unwrap()).abs() < 1e-12);
}

#[tokio::test]
async fn a_galaxy_without_a_bulge_mass_has_no_ratio() {
    let app = spawn_demo_app().await;
    let demo = demo();
    let gi = (0..demo.galaxies.len())
        .find(|&gi| {
            adopted(&demo, gi, Quantity::BlackHoleMass).is_some()
                && adopted(&demo, gi, Quantity::BulgeMass).is_none()
        })
        .expect("the demo has a galaxy with a mass and no bulge mass");
    let slug = slugify(&demo.galaxies[gi].name);
    let body = app.ok(&format!("/galaxies/{slug}")).await;
    assert!(!body.contains("id=\"bulge-ratio\""), "{body}");
    let (status, json) = app.get(&format!("/api/v1/galaxies/{slug}")).await;
    assert_eq!(status, 200, "{json}");
    let v: Value = serde_json::from_str(&json).unwrap();
    assert!(v.get("bulge_ratio").is_some_and(Value::is_null), "{v}");
}

#[tokio::test]
async fn the_place_check_shows_the_ratio_of_a_typed_mass_and_bulge_mass() {
    let app = spawn_demo_app().await;
    analysed(&app).await;
    // Computed: 10⁸ / (5 × 10¹⁰) = 0.2 %, within 0.1–0.5 %.
    let body = app.ok("/place?mass=1e8&bulge_mass=5e10").await;
    assert!(body.contains("id=\"bulge-ratio\""), "{body}");
    assert_eq!(element_text(&body, "ratio-percent"), "0.20 %");
    assert!(
        body.contains("class=\"verdict v-consistent\"><span aria-hidden=\"true\">✓</span> within the usual range"),
        "{body}"
    );
    assert!(body.contains("common practice"), "{body}");
    let (status, json) = app.get("/api/v1/place?mass=1e8&bulge_mass=5e10").await;
    assert_eq!(status, 200, "{json}");
    let v: Value = serde_json::from_str(&json).unwrap();
    let r = &v["object"]["bulge_ratio"];
    assert!((r["percent"].as_f64().unwrap() - 0.2).abs() < 1e-12, "{r}");
    assert_eq!(r["range_verdict"], "within the usual range");
    assert_eq!(r["upper_limit"], false);
    assert!(
        (data_value(&body, "ratio-percent") / r["fraction"].as_f64().unwrap() - 1.0).abs() < 1e-15
    );
    assert_eq!(
        element_text(&body, "ratio-sentence"),
        r["sentence"].as_str().unwrap()
    );
    // The prediction is the placement on M_BH–M_bulge: the same predicted mass over the same
    // bulge mass.
    let placed = v["object"]["relations"]
        .as_array()
        .unwrap()
        .iter()
        .find(|p| p["relation"] == "m_mbulge")
        .unwrap();
    let predicted = placed["predicted_log_mbh"].as_f64().unwrap() - 5e10f64.log10();
    let rel = &r["relation"];
    assert!(
        (rel["log_ratio"].as_f64().unwrap() - predicted).abs() < 1e-12,
        "{rel}"
    );
    assert_eq!(rel["without_this_galaxy"], false);
    assert_eq!(rel["verdict"], placed["verdict"]);
    let fit_id = rel["fit_id"].as_str().unwrap();
    let (status, _) = app.get(&format!("/fits/{fit_id}")).await;
    assert_eq!(status, 200, "the fit a ratio names can be looked up");

    // An upper limit on the mass is an upper limit on the ratio: 10⁷ / 5 × 10¹⁰ = 0.02 %.
    let limit = app.ok("/place?mass=%3C1e7&bulge_mass=5e10").await;
    assert_eq!(element_text(&limit, "ratio-percent"), "< 0.020 %");
    assert!(
        limit.contains(
            "class=\"verdict v-tension\"><span aria-hidden=\"true\">▲</span> below the usual range"
        ),
        "{limit}"
    );
    // Without a bulge mass there is no ratio.
    let none = app.ok("/place?mass=1e8&sigma=200").await;
    assert!(!none.contains("id=\"bulge-ratio\""), "{none}");
    let (_, json) = app.get("/api/v1/place?mass=1e8&sigma=200").await;
    let v: Value = serde_json::from_str(&json).unwrap();
    assert!(v["object"]["bulge_ratio"].is_null(), "{v}");
}
