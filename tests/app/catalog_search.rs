//! The catalog list's name search and natural name order, and the charts' outlier rings and
//! keyboard order, against a small invented catalog ("X 0" … "X 24").

use massline::catalog::csv_io::{ImportMode, import_csv};
use massline::relations::table::natural_cmp;

use crate::helpers::{count, spawn_app};

/// `n` invented galaxies named "X 0" … on an M–σ relation; those `off` sit 1.5 dex above it.
fn small_catalog(n: usize, off: impl Fn(usize) -> bool) -> String {
    let mut text = String::from(
        "galaxy,morphology,bulge_kind,centre_kind,distance_mpc,distance_err_mpc,distance_method,quantity,value,scale,method,sigma_definition,aperture,source_distance_mpc,resolution_arcsec,reference\n",
    );
    for i in 0..n {
        let sigma_km_s = 100.0 + 200.0 * (i as f64) / (n as f64);
        let shift = if off(i) { 1.5 } else { 0.0 };
        let log_mbh = 8.3 + 5.0 * (sigma_km_s / 200.0).log10() + shift;
        text.push_str(&format!(
            "X {i},elliptical,classical,core,20,1,sbf,sigma,{sigma_km_s:.1} ± 10,,,sigma_e,r_e,,,Invented et al. 2030\n\
             X {i},,,,,,,bh_mass,{log_mbh:.2} ± 0.1,log10,stellar_dynamics,,,20,0.1,Invented et al. 2030\n"
        ));
    }
    text
}

/// The galaxy names of a catalog page, in the table's order.
fn names(body: &str) -> Vec<String> {
    body.split("<td><a href=\"/galaxies/")
        .skip(1)
        .map(|chunk| {
            let start = chunk.find('>').expect("link text") + 1;
            let end = chunk.find("</a>").expect("closed link");
            chunk[start..end].to_owned()
        })
        .collect()
}

async fn app_with(n: usize, off: impl Fn(usize) -> bool) -> crate::helpers::TestApp {
    let app = spawn_app().await;
    import_csv(
        &app.pool,
        &small_catalog(n, off),
        ImportMode::Accepted,
        &mut |_, _| {},
    )
    .await
    .expect("the invented catalog is imported");
    app
}

#[tokio::test]
async fn names_sort_as_numbers_and_the_search_finds_substrings_in_any_case() {
    let app = app_with(25, |_| false).await;
    let body = app.ok("/galaxies?sort=name&per_page=100").await;
    let all = names(&body);
    assert_eq!(all.len(), 25, "{body}");
    assert_eq!(
        all[..3],
        ["X 0", "X 1", "X 2"],
        "numbers compared as numbers"
    );
    assert_eq!(all[24], "X 24");
    assert!(all.windows(2).all(|w| natural_cmp(&w[0], &w[1]).is_lt()));
    let down = names(&app.ok("/galaxies?sort=name&dir=desc&per_page=100").await);
    assert_eq!(down[0], "X 24");
    assert_eq!(down[24], "X 0");

    // "x 1" in lower case: X 1 and X 10 … X 19, in natural order.
    let found = app.ok("/galaxies?q=x+1&per_page=100").await;
    let hits = names(&found);
    let expected: Vec<String> = std::iter::once(1)
        .chain(10..20)
        .map(|i| format!("X {i}"))
        .collect();
    assert_eq!(hits, expected);
    assert!(
        found.contains("value=\"x 1\""),
        "the field shows the search"
    );
    // Paging links keep the search.
    let paged = app.ok("/galaxies?q=x+1&per_page=5").await;
    assert!(paged.contains("href=\"/galaxies?q=x+1&#38;"), "{paged}");

    let none = app.ok("/galaxies?q=nothing+like+it").await;
    assert!(none.contains("No galaxy matches this selection"), "{none}");
    assert!(
        none.contains("(name containing “nothing like it”)"),
        "{none}"
    );

    let (status, body) = app.get(&format!("/galaxies?q={}", "y".repeat(101))).await;
    assert_eq!(status, 400, "{body}");
}

#[tokio::test]
async fn the_catalog_page_links_its_downloads_upload_and_api() {
    let app = app_with(3, |_| false).await;
    let body = app.ok("/galaxies").await;
    for href in [
        "/catalog.csv",
        "/catalog.json",
        "/submissions/upload",
        "/api",
    ] {
        assert!(body.contains(&format!("href=\"{href}\"")), "{href}: {body}");
    }
}

#[tokio::test]
async fn outliers_are_ringed_and_chart_points_are_no_tab_stops() {
    let app = app_with(25, |i| i == 7).await;
    let svg = app.ok("/relations/m_sigma/chart.svg").await;
    let points = count(&svg, "<a href=\"/galaxies/");
    assert_eq!(points, 25);
    assert_eq!(count(&svg, "tabindex=\"-1\""), points);
    // X 7's point carries the ring; the legend names it.
    let k = svg.find("<title>X 7: ").expect("X 7 drawn");
    let end = k + svg[k..].find("</a>").expect("closed");
    assert!(svg[k..end].contains("class=\"outlier-ring\""), "X 7 ringed");
    assert!(svg.contains(">Outlier (ringed)</text>"));
    assert!(svg.contains("outlier ringed: X 7."), "the summary names it");
    assert!(svg.contains("role=\"img\""));
    // The residual charts on the page ring it too.
    let page_rings = count(
        &app.ok("/relations/m_sigma").await,
        "class=\"outlier-ring\"",
    );
    assert_eq!(
        page_rings,
        3 * 2,
        "one point and one legend ring on each of three charts"
    );
    // The downloaded file stands alone with its drawn title; the page's chart leaves it to the
    // page heading.
    assert!(svg.contains("M_BH–σ\n</text>"), "the file is titled");
    let page = app.ok("/relations/m_sigma").await;
    assert!(!page.contains("M_BH–σ\n</text>"), "the page chart is not");
}

#[tokio::test]
async fn the_chart_comes_as_a_png_for_print() {
    let app = app_with(25, |i| i == 7).await;
    let r = app
        .client
        .get(format!(
            "{}/relations/m_sigma/chart.png?morphology=elliptical",
            app.address
        ))
        .send()
        .await
        .unwrap();
    assert_eq!(r.status(), 200);
    assert_eq!(r.headers()["content-type"], "image/png");
    let disposition = r.headers()["content-disposition"]
        .to_str()
        .unwrap()
        .to_owned();
    assert!(
        disposition.starts_with("attachment; filename=\"m_sigma-")
            && disposition.ends_with(".png\""),
        "{disposition}"
    );
    let bytes = r.bytes().await.unwrap();
    assert_eq!(&bytes[..8], b"\x89PNG\r\n\x1a\n");
    // Width and height from the IHDR chunk, big-endian, after the signature and chunk header.
    let width = u32::from_be_bytes(bytes[16..20].try_into().unwrap());
    let height = u32::from_be_bytes(bytes[20..24].try_into().unwrap());
    assert_eq!(
        (width, height),
        (massline::charts::PNG_WIDTH, massline::charts::PNG_HEIGHT)
    );
    let page = app.ok("/relations/m_sigma").await;
    assert!(
        page.contains("href=\"/relations/m_sigma/chart.png"),
        "linked beside the SVG"
    );
    let (status, _) = app.get("/relations/m_sigma/chart.png?method=eyeball").await;
    assert_eq!(status, 400);
}
