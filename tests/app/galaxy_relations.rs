//! The galaxy page's view of the relations, fitted with the galaxy left out, against the
//! invented demo catalog. Which galaxies to look at is derived from the demo files.

use massline::catalog::demo::{DEMO_GALAXIES_CSV, DEMO_MEASUREMENTS_CSV, DemoCatalog, parse_demo};
use massline::catalog::model::{
    BulgeKind, CentreKind, DistanceMethod, Morphology, NewGalaxy, Quantity, slugify,
};

use crate::helpers::{count, spawn_demo_app};

fn demo() -> DemoCatalog {
    parse_demo(DEMO_GALAXIES_CSV, DEMO_MEASUREMENTS_CSV).unwrap()
}

/// Whether galaxy `gi` has an adopted measurement of `quantity` passing `more`.
fn has(
    demo: &DemoCatalog,
    gi: usize,
    quantity: Quantity,
    more: impl Fn(&massline::catalog::model::NewMeasurement) -> bool,
) -> bool {
    demo.measurements
        .iter()
        .any(|(i, m, adopted)| *i == gi && *adopted && m.quantity == quantity && more(m))
}

/// The text of the table row of one relation on a page.
fn row<'a>(body: &'a str, slug: &str) -> &'a str {
    let start = format!("id=\"place-{slug}\"");
    let from = body
        .find(&start)
        .unwrap_or_else(|| panic!("no {start} in {body}"));
    let to = from + body[from..].find("</tr>").unwrap();
    &body[from..to]
}

#[tokio::test]
async fn a_galaxy_with_sigma_and_a_mass_is_placed_against_fits_without_it() {
    let app = spawn_demo_app().await;
    let demo = demo();
    // The first demo galaxy with a detected mass and an adopted σ_e.
    let gi = (0..demo.galaxies.len())
        .find(|&gi| {
            has(&demo, gi, Quantity::BlackHoleMass, |m| !m.upper_limit)
                && has(&demo, gi, Quantity::VelocityDispersion, |m| {
                    m.sigma_definition == "sigma_e"
                })
        })
        .expect("the demo has such a galaxy");
    let name = &demo.galaxies[gi].name;
    let slug = slugify(name);
    // The background analysis of the catalog version has fitted the whole samples.
    for _ in 0..1200 {
        if app.state.analyst.is_done(1) {
            break;
        }
        tokio::time::sleep(std::time::Duration::from_millis(50)).await;
    }
    let whole_sample_fits = app.state.fits.len();
    assert!(whole_sample_fits >= 4, "{whole_sample_fits}");
    let body = app.ok(&format!("/galaxies/{slug}")).await;
    assert!(body.contains("fitted without this galaxy"), "{body}");
    let m_sigma = row(&body, "m_sigma");
    assert!(m_sigma.contains("class=\"num predicted\">"), "{m_sigma}");
    assert!(
        [
            "v-consistent\"><span aria-hidden=\"true\">✓</span> consistent<",
            "v-tension\"><span aria-hidden=\"true\">▲</span> in tension<",
            "v-outlier\"><span aria-hidden=\"true\">✕</span> outlier<"
        ]
        .iter()
        .any(|v| m_sigma.contains(v)),
        "no verdict in {m_sigma}"
    );
    // The thresholds are stated.
    assert!(body.contains("|z| ≥ 3 outlier"), "{body}");
    // The chart is drawn with the galaxy's name in its legend, and no number is NaN.
    assert!(body.contains("id=\"chart-m_sigma\""), "{body}");
    assert!(body.contains("<svg"));
    assert!(!body.contains("NaN"), "{body}");
    // The left-out fits are cached under their own keys, beside the whole-sample ones: a
    // second visit refits nothing, and the whole-sample fit is the analysis's.
    let fits = app.state.fits.len();
    assert!(fits > whole_sample_fits, "{fits} {whole_sample_fits}");
    app.ok(&format!("/galaxies/{slug}")).await;
    assert_eq!(app.state.fits.len(), fits);
    let whole = app.ok("/relations/m_sigma/fit.json").await;
    let v: serde_json::Value = serde_json::from_str(&whole).unwrap();
    let galaxies = v["galaxies"].as_array().unwrap();
    assert!(galaxies.iter().any(|g| g == slug.as_str()));
    assert_eq!(
        app.state.fits.len(),
        fits,
        "the whole-sample fit was there already"
    );
}

#[tokio::test]
async fn planted_outliers_are_flagged_on_their_own_pages() {
    let app = spawn_demo_app().await;
    let demo = demo();
    // The demo's planted outliers carry that note on their adopted mass (seed-data/README.md).
    let planted: Vec<usize> = demo
        .measurements
        .iter()
        .filter(|(_, m, adopted)| {
            *adopted && m.quantity == Quantity::BlackHoleMass && m.note.contains("planted outlier")
        })
        .map(|(gi, _, _)| *gi)
        .collect();
    assert!(!planted.is_empty(), "the demo plants outliers");
    for gi in planted {
        let slug = slugify(&demo.galaxies[gi].name);
        let body = app.ok(&format!("/galaxies/{slug}")).await;
        let table = &body[body.find("id=\"placements\"").expect("a placement table")..];
        // Flagged in words and in the badge's class (its colour and mark).
        let flagged = count(
            table,
            "v-tension\"><span aria-hidden=\"true\">▲</span> in tension",
        ) + count(
            table,
            "v-outlier\"><span aria-hidden=\"true\">✕</span> outlier",
        );
        assert!(
            flagged >= 1,
            "{slug} is not flagged against any relation: {table}"
        );
        assert!(!body.contains("NaN"));
    }
}

#[tokio::test]
async fn a_galaxy_without_host_values_or_mass_says_no_relation_applies() {
    let app = spawn_demo_app().await;
    // A galaxy with no measurement at all.
    let mut tx = massline::catalog::begin_write(&app.pool).await.unwrap();
    massline::catalog::galaxies::insert_galaxy(
        &mut tx,
        &NewGalaxy {
            name: "Vellow 999".to_owned(),
            morphology: Morphology::Elliptical,
            bulge_kind: BulgeKind::Classical,
            centre_kind: CentreKind::Core,
            distance_mpc: 20.0,
            distance_err_mpc: 1.0,
            distance_method: DistanceMethod::Sbf,
            activity: massline::catalog::model::Activity::Unknown,
        },
    )
    .await
    .unwrap();
    // As every accepted change does: a new catalog version, so no page reads the rows of the
    // version before the galaxy existed.
    massline::catalog::history::bump_version(&mut tx)
        .await
        .unwrap();
    tx.commit().await.unwrap();
    let body = app
        .ok(&format!("/galaxies/{}", slugify("Vellow 999")))
        .await;
    assert!(body.contains("id=\"no-relation\""), "{body}");
    assert!(
        body.contains("No relation applies to this galaxy"),
        "{body}"
    );
    assert!(body.contains("no adopted black-hole mass"), "{body}");
    assert!(!body.contains("id=\"placements\""));
    assert!(!body.contains("NaN"));

    // Demo galaxies with a mass but no σ_e, bulge mass or luminosity (e.g. only a central σ_c)
    // say the same, with the reason.
    let demo = demo();
    for gi in 0..demo.galaxies.len() {
        let usable = has(&demo, gi, Quantity::VelocityDispersion, |m| {
            m.sigma_definition == "sigma_e"
        }) || has(&demo, gi, Quantity::BulgeMass, |_| true)
            || has(&demo, gi, Quantity::BulgeLuminosity, |_| true);
        if usable || !has(&demo, gi, Quantity::BlackHoleMass, |_| true) {
            continue;
        }
        let slug = slugify(&demo.galaxies[gi].name);
        let body = app.ok(&format!("/galaxies/{slug}")).await;
        assert!(
            body.contains("No relation applies to this galaxy"),
            "{body}"
        );
        assert!(!body.contains("NaN"));
    }
}

#[tokio::test]
async fn the_place_page_draws_a_chart_for_every_usable_relation() {
    let app = spawn_demo_app().await;
    let body = app
        .ok("/place?sigma=200&bulge_mass=1e11&luminosity=5e10&band=K&mass=3e8")
        .await;
    for slug in ["m_sigma", "m_mbulge", "m_l_k", "m_sigma_mbulge"] {
        assert!(body.contains(&format!("id=\"place-{slug}\"")), "{slug}");
        assert!(
            body.contains(&format!("id=\"chart-{slug}\"")),
            "no chart for {slug}"
        );
    }
    assert_eq!(count(&body, "<figure class=\"chart\">"), 4);
    // The plane is drawn as log M_BH − γ (x2 − x02) against σ, as on its relation page.
    assert!(body.contains("log₁₀ M_BH − γ"), "{body}");
    assert!(!body.contains("NaN"));
}
