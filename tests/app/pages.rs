//! The pages against the demo catalog.

use massline::catalog::demo::{DEMO_GALAXIES_CSV, DEMO_MEASUREMENTS_CSV, parse_demo};
use massline::catalog::model::{Morphology, Quantity};

use crate::helpers::{count, spawn_app, spawn_demo_app};

/// The overview page counts one version's rows in memory; the database's aggregate queries
/// give the same counts, on the demo catalog with pending submissions and a few edits.
#[tokio::test]
async fn overview_counts_in_memory_agree_with_the_database() {
    use massline::catalog::{overview, relation_rows, review_scores};
    let app = spawn_demo_app().await;
    let snapshot = relation_rows::snapshot(&app.pool).await.unwrap();
    let pending = review_scores::pending_count(&app.pool).await.unwrap();
    let in_memory = overview::of_rows(&snapshot.rows, pending);
    let from_sql = overview::overview(&app.pool).await.unwrap();
    assert_eq!(in_memory, from_sql);
    assert!(in_memory.galaxies > 50 && in_memory.upper_limits > 0);
    assert!(in_memory.by_method.len() >= 3, "{:?}", in_memory.by_method);
}

#[tokio::test]
async fn overview_counts_the_demo_catalog() {
    let app = spawn_demo_app().await;
    let demo = parse_demo(DEMO_GALAXIES_CSV, DEMO_MEASUREMENTS_CSV).unwrap();
    let body = app.ok("/").await;
    assert!(
        body.contains(&format!(
            "<dd id=\"galaxy-count\">{}</dd>",
            demo.galaxies.len()
        )),
        "{body}"
    );
    // The demo load is one accepted change.
    assert!(body.contains("<dd id=\"catalog-version\">1</dd>"), "{body}");
    assert!(body.contains("Loaded the invented demo catalog"));
    for label in [
        "stellar dynamics",
        "gas dynamics",
        "maser",
        "reverberation mapping",
    ] {
        assert!(body.contains(label), "missing method {label}");
    }
    let ellipticals = demo
        .galaxies
        .iter()
        .filter(|g| g.morphology == Morphology::Elliptical)
        .count();
    assert!(
        body.contains(&format!(
            "<a href=\"/galaxies?morphology=elliptical\">elliptical</a></td><td class=\"num\">{ellipticals}</td>"
        )),
        "{body}"
    );
}

#[tokio::test]
async fn an_empty_catalog_says_how_to_get_data() {
    let app = spawn_app().await;
    let body = app.ok("/").await;
    assert!(body.contains("The catalog is empty"), "{body}");
    let table = app.ok("/galaxies").await;
    assert!(
        table.contains("No galaxy matches this selection."),
        "{table}"
    );
}

#[tokio::test]
async fn catalog_table_pages_through_every_galaxy_once() {
    let app = spawn_demo_app().await;
    let demo = parse_demo(DEMO_GALAXIES_CSV, DEMO_MEASUREMENTS_CSV).unwrap();
    let mut seen = Vec::new();
    let mut page = 1;
    loop {
        let body = app.ok(&format!("/galaxies?per_page=25&page={page}")).await;
        let rows: Vec<String> = body
            .split("<td><a href=\"/galaxies/")
            .skip(1)
            .map(|s| s.split('"').next().unwrap().to_string())
            .collect();
        assert!(rows.len() <= 25);
        seen.extend(rows);
        if !body.contains("rel=\"next\"") {
            break;
        }
        page += 1;
    }
    assert_eq!(seen.len(), demo.galaxies.len());
    let mut unique = seen.clone();
    unique.sort();
    unique.dedup();
    assert_eq!(unique.len(), seen.len(), "a galaxy appeared twice");
    // Units are shown in the headers.
    let body = app.ok("/galaxies").await;
    for unit in ["[km/s]", "[Mpc]", "M☉, at adopted D"] {
        assert!(body.contains(unit), "missing unit {unit}");
    }
}

/// Decimals shown in a number ("8.320" → 3, "247" → 0).
fn decimals(number: &str) -> usize {
    number.split_once('.').map_or(0, |(_, f)| f.len())
}

/// Significant digits shown in a number ("0.050" → 2, "14.3" → 3, "10" → 2).
fn significant_digits(number: &str) -> usize {
    number
        .chars()
        .filter(char::is_ascii_digit)
        .skip_while(|&c| c == '0')
        .count()
}

#[tokio::test]
async fn catalog_table_writes_each_column_of_values_with_errors_alike() {
    let app = spawn_demo_app().await;
    let body = app.ok("/galaxies?per_page=500").await;
    let rows: Vec<Vec<String>> = body
        .split("<tr>")
        .filter(|row| row.contains("<td><a href=\"/galaxies/"))
        .map(|row| {
            row.split("<td")
                .map(|c| {
                    let text = c.split_once('>').map_or("", |(_, t)| t);
                    text.split('<').next().unwrap_or("").trim().to_owned()
                })
                .collect()
        })
        .collect();
    assert!(rows.len() >= 80);
    let mut checked = 0;
    // log M_BH, σ, log M_bulge, distance.
    for column in [3, 5, 6, 7] {
        // (value, the smaller error) of each cell with an error below 100.
        let cells: Vec<(String, String)> = rows
            .iter()
            .filter_map(|row| {
                let words: Vec<&str> = row[column].split(' ').collect();
                match words.as_slice() {
                    [v, "±", e] => Some((v.to_string(), e.to_string())),
                    [v, pm] => {
                        let (plus, minus) = pm.strip_prefix('+')?.split_once("/−")?;
                        let smaller = if plus.parse::<f64>().ok()? <= minus.parse::<f64>().ok()? {
                            plus
                        } else {
                            minus
                        };
                        Some((v.to_string(), smaller.to_string()))
                    }
                    _ => None,
                }
            })
            .filter(|(_, e)| e.parse::<f64>().is_ok_and(|e| e < 100.0))
            .collect();
        assert!(cells.len() >= 20, "column {column}: {cells:?}");
        let coarsest = cells.iter().map(|(v, _)| decimals(v)).min().unwrap();
        for (value, err) in &cells {
            // The value to the error's place; one or two significant digits in the error, one
            // only where the column's coarser rows call for it.
            assert_eq!(decimals(value), decimals(err), "{value} ± {err}");
            let digits = significant_digits(err);
            assert!(
                (1..=2).contains(&digits),
                "column {column}: {value} ± {err}"
            );
            assert!(
                decimals(value) == coarsest || digits == 1,
                "column {column}: {value} ± {err} beside {coarsest} decimals"
            );
            checked += 1;
        }
    }
    assert!(checked >= 80);
}

#[tokio::test]
async fn fitexy_says_why_its_scatter_has_no_interval() {
    let app = spawn_demo_app().await;
    let body = app
        .ok("/relations/m_sigma?method=fitexy&limits=exclude")
        .await;
    let params = body
        .split("id=\"params\"")
        .nth(1)
        .and_then(|t| t.split("</table>").next())
        .expect("parameter table");
    let eps = params
        .split("<tr>")
        .find(|row| row.contains("<th scope=\"row\">ε</th>"))
        .expect("ε row");
    assert!(eps.contains("set so that χ²/dof = 1; no interval"), "{eps}");
    // No interval from a number to itself.
    assert!(!eps.contains(" – "), "{eps}");
    // α and β keep theirs.
    let alpha = params
        .split("<tr>")
        .find(|row| row.contains("<th scope=\"row\">α</th>"))
        .expect("α row");
    assert!(
        alpha.contains(" – ") && !alpha.contains("no interval"),
        "{alpha}"
    );
}

#[tokio::test]
async fn catalog_table_sorts_by_a_column_in_both_directions() {
    let app = spawn_demo_app().await;
    // (shown distance, half its last digit): a shown value stands for anything that rounds to it.
    let distances = |body: &str| -> Vec<(f64, f64)> {
        // Distance is the 7th cell: take the cells that end with " Mpc"-less "a ± b" in that column.
        body.split("<tr>")
            .filter(|row| row.contains("<td><a href=\"/galaxies/"))
            .map(|row| {
                let cells: Vec<&str> = row.split("<td").collect();
                let cell = cells[7];
                let text = cell.split('>').nth(1).unwrap().split('<').next().unwrap();
                let shown = text.split(" ± ").next().unwrap();
                let half = 0.5 * 10f64.powi(-(decimals(shown) as i32));
                (shown.parse::<f64>().unwrap(), half)
            })
            .collect()
    };
    let in_order = |a: (f64, f64), b: (f64, f64)| a.0 - a.1 <= b.0 + b.1;
    let asc = distances(&app.ok("/galaxies?sort=distance&dir=asc&per_page=500").await);
    let desc = distances(
        &app.ok("/galaxies?sort=distance&dir=desc&per_page=500")
            .await,
    );
    assert!(asc.len() >= 80);
    assert!(
        asc.windows(2).all(|w| in_order(w[0], w[1])),
        "not ascending: {asc:?}"
    );
    assert!(
        desc.windows(2).all(|w| in_order(w[1], w[0])),
        "not descending: {desc:?}"
    );
}

#[tokio::test]
async fn catalog_table_filters_by_morphology_and_limits() {
    let app = spawn_demo_app().await;
    let demo = parse_demo(DEMO_GALAXIES_CSV, DEMO_MEASUREMENTS_CSV).unwrap();
    let spirals = demo
        .galaxies
        .iter()
        .filter(|g| g.morphology == Morphology::Spiral)
        .count();
    let body = app.ok("/galaxies?morphology=spiral&per_page=500").await;
    assert_eq!(count(&body, "<td><a href=\"/galaxies/"), spirals);
    assert!(
        !body.contains(">elliptical<span"),
        "an elliptical slipped through"
    );

    let limits = demo
        .measurements
        .iter()
        .filter(|(_, m, adopted)| {
            *adopted && m.quantity == Quantity::BlackHoleMass && m.upper_limit
        })
        .count();
    let body = app.ok("/galaxies?limits=limits&per_page=500").await;
    assert_eq!(count(&body, "<td><a href=\"/galaxies/"), limits);
    assert_eq!(
        count(&body, "<td class=\"num\">&#60; "),
        limits,
        "limits are shown with '<'"
    );
}

#[tokio::test]
async fn sphere_of_influence_filter_splits_the_dynamical_masses() {
    let app = spawn_demo_app().await;
    let all = app.ok("/galaxies?per_page=500").await;
    let resolved = app.ok("/galaxies?soi=resolved&per_page=500").await;
    let unresolved = app.ok("/galaxies?soi=unresolved&per_page=500").await;
    let n = |b: &str| count(b, "<td><a href=\"/galaxies/");
    assert!(
        n(&unresolved) >= 3,
        "the demo plants unresolved spheres of influence"
    );
    assert!(n(&resolved) > n(&unresolved));
    assert!(n(&resolved) + n(&unresolved) <= n(&all));
    assert_eq!(count(&unresolved, "<td>not resolved</td>"), n(&unresolved));
}

#[tokio::test]
async fn galaxy_page_shows_every_measurement_as_entered_and_canonical() {
    let app = spawn_demo_app().await;
    let demo = parse_demo(DEMO_GALAXIES_CSV, DEMO_MEASUREMENTS_CSV).unwrap();
    // Pick the galaxy with the most measurements: it has a superseded mass.
    let (gi, n) = (0..demo.galaxies.len())
        .map(|gi| {
            (
                gi,
                demo.measurements
                    .iter()
                    .filter(|(g, _, _)| *g == gi)
                    .count(),
            )
        })
        .max_by_key(|(_, n)| *n)
        .unwrap();
    let name = &demo.galaxies[gi].name;
    let slug = massline::catalog::model::slugify(name);
    let body = app.ok(&format!("/galaxies/{slug}")).await;
    assert!(
        body.contains(&format!("<h1>{}</h1>", askama_escape(name))),
        "{body}"
    );
    // One row per measurement (rows start with the quantity cell).
    assert_eq!(count(&body, "<td><code>"), n, "{body}");
    for (_, m, _) in demo.measurements.iter().filter(|(g, _, _)| *g == gi) {
        assert!(
            body.contains(&askama_escape(&m.value_text)),
            "missing '{}'",
            m.value_text
        );
    }
    assert!(body.contains("adopted</strong>"));
    assert!(
        body.contains("Sphere of influence: r<sub>infl</sub>"),
        "{body}"
    );
}

#[tokio::test]
async fn unknown_galaxy_and_unknown_page_answer_404_pages() {
    let app = spawn_demo_app().await;
    let (status, body) = app.get("/galaxies/no-such-galaxy").await;
    assert_eq!(status, 404);
    assert!(
        body.contains("The galaxy &#39;no-such-galaxy&#39; was not found"),
        "{body}"
    );
    let (status, body) = app.get("/nowhere").await;
    assert_eq!(status, 404);
    assert!(body.contains("There is no page at /nowhere."), "{body}");
}

#[tokio::test]
async fn bad_query_parameters_get_a_readable_400_page() {
    let app = spawn_demo_app().await;
    let (status, body) = app.get("/galaxies?sort=colour&morphology=blob").await;
    assert_eq!(status, 400);
    assert!(
        body.contains("Parameter &#39;sort&#39;") || body.contains("Parameter 'sort'"),
        "{body}"
    );
    assert!(body.contains("elliptical, lenticular, spiral"), "{body}");
    let (status, body) = app.get("/galaxies?page=999").await;
    assert_eq!(status, 400);
    assert!(body.contains("page"), "{body}");
}

#[tokio::test]
async fn health_check_and_security_headers() {
    let app = spawn_app().await;
    let response = app
        .client
        .get(format!("{}/healthz", app.address))
        .send()
        .await
        .unwrap();
    assert_eq!(response.status().as_u16(), 200);
    let csp = response
        .headers()
        .get("content-security-policy")
        .expect("a CSP header")
        .to_str()
        .unwrap()
        .to_string();
    assert!(csp.contains("default-src 'self'") && csp.contains("frame-ancestors 'none'"));
    assert_eq!(
        response.headers().get("x-content-type-options").unwrap(),
        "nosniff"
    );
    assert_eq!(response.text().await.unwrap(), "ok\n");
    // Error pages carry them too.
    let response = app
        .client
        .get(format!("{}/nowhere", app.address))
        .send()
        .await
        .unwrap();
    assert!(response.headers().contains_key("content-security-policy"));
    // The stylesheet is served from the binary.
    let css = app.ok("/static/massline.css").await;
    assert!(css.contains("--accent"));
}

/// HTML-escape as askama does for text nodes.
fn askama_escape(text: &str) -> String {
    text.replace('&', "&#38;")
        .replace('<', "&#60;")
        .replace('>', "&#62;")
        .replace('"', "&#34;")
        .replace('\'', "&#39;")
}

#[tokio::test]
async fn error_pages_show_the_visitors_session_links() {
    let app = crate::helpers::spawn_demo_app().await;
    // Anonymous (public read): the login link.
    let (status, body) = app.get("/galaxies/no-such-galaxy").await;
    assert_eq!(status, 404);
    assert!(body.contains("href=\"/login\""), "{body}");
    // Logged in: the account, submissions and log-out links on a 404 and on a 403.
    let mut member = app.login_as(massline::auth::Role::Member).await;
    let page = member.get("/galaxies/no-such-galaxy").await;
    assert_eq!(page.status, 404);
    assert!(page.body.contains("Account: "), "{}", page.body);
    assert!(page.body.contains("action=\"/logout\""));
    assert!(!page.body.contains("href=\"/login\""));
    assert_eq!(page.header("content-type"), "text/html; charset=utf-8");
    let refused = member.get("/review").await;
    assert_eq!(refused.status, 403);
    assert!(refused.body.contains("Account: "), "{}", refused.body);
    // The security headers stay on the redrawn page.
    assert!(!refused.header("content-security-policy").is_empty());
}

/// A catalog file of `n` invented galaxies ("X 0", "X 1", …) on the M–σ relation
/// log M = 8.3 + 5 (log σ − log 200), except those with `off(i)`, 1.5 dex above it.
fn large_catalog(n: usize, off: impl Fn(usize) -> bool) -> String {
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

#[tokio::test]
async fn a_large_catalog_draws_its_relation_chart_as_a_density_with_the_outliers_named() {
    let app = spawn_app().await;
    let n = 2_100;
    let off = |i: usize| i % 300 == 7;
    massline::catalog::csv_io::import_csv(
        &app.pool,
        &large_catalog(n, off),
        massline::catalog::csv_io::ImportMode::Accepted,
        &mut |_, _| {},
    )
    .await
    .expect("the invented catalog is imported");
    let svg = app.ok("/relations/m_sigma/chart.svg").await;
    assert!(svg.len() <= 300_000, "the chart weighs {} bytes", svg.len());
    assert!(svg.contains("<g class=\"density\""), "drawn as a density");
    let hover = |i: usize| format!("<title>X {i}: ");
    for i in (0..n).filter(|&i| off(i)) {
        assert!(svg.contains(&hover(i)), "X {i}, off the relation, is named");
    }
    // On the relation, only objects whose sphere of influence is not resolved are drawn one by
    // one, each with its mark, within the chart's cap; the rest are shaded.
    let named_on_it: Vec<usize> = (0..n)
        .filter(|&i| !off(i) && svg.contains(&hover(i)))
        .collect();
    for &i in &named_on_it {
        let k = svg.find(&hover(i)).expect("named");
        let point = &svg[k..k + svg[k..].find("</g>").expect("closed")];
        assert!(
            point.contains("class=\"unresolved-mark\""),
            "X {i}, on the relation, is drawn one by one without a reason"
        );
    }
    assert!(named_on_it.len() <= massline::charts::MAX_EMPHASISED);

    // Every page stays light (under 500 kB) with its three charts, once the version's analysis
    // is done; the galaxy page of a sample above 2,000 objects places the galaxy against the
    // one-step fit without it, and says so.
    let mut galaxy = String::new();
    for _ in 0..1200 {
        galaxy = app.ok("/galaxies/x-7").await;
        if !galaxy.contains("id=\"computing\"") {
            break;
        }
        tokio::time::sleep(std::time::Duration::from_millis(100)).await;
    }
    assert!(galaxy.contains("id=\"left-out-approximate\""), "{galaxy}");
    assert!(
        galaxy.contains("</span> outlier</span>"),
        "X 7 lies 1.5 dex above the relation"
    );
    // Its chart is about X 7: the sample is shaded, and the other objects off the relation are
    // left to the relation page's chart (a page of one chart per relation stays light).
    let others_named = (0..n)
        .filter(|&i| i != 7 && galaxy.contains(&hover(i)))
        .count();
    assert_eq!(others_named, 0, "the galaxy page's charts name only X 7");
    for (path, body) in [
        ("/galaxies/x-7", galaxy),
        ("/relations/m_sigma", app.ok("/relations/m_sigma").await),
        ("/relations", app.ok("/relations").await),
        ("/galaxies", app.ok("/galaxies").await),
        (
            "/place?sigma=200&mass=1e8",
            app.ok("/place?sigma=200&mass=1e8").await,
        ),
    ] {
        assert!(body.len() < 500_000, "{path} weighs {} bytes", body.len());
        assert!(!body.contains("NaN"), "{path}");
    }
}
