//! The analysis of each catalog version runs in the background: a slow analysis never holds up
//! a request, and the review queue is ordered by stored scores and paged in SQL.

use std::time::Duration;

use massline::auth::Role;
use massline::catalog::csv_io::{ImportMode, import_csv};
use massline::catalog::galaxies::SubmissionSource;

use crate::helpers::spawn_demo_app;

/// One more invented galaxy with σ and a mass, adopted at once: a new catalog version.
const NEW_GALAXY: &str = "galaxy,morphology,bulge_kind,centre_kind,distance_mpc,distance_err_mpc,distance_method,quantity,value,scale,limit_confidence_sigma,method,sigma_definition,aperture,band,source_distance_mpc,resolution_arcsec,reference,note,row_key
Tesk 41,elliptical,classical,core,20,1,sbf,sigma,210 ± 10,,,,sigma_e,r_e,,,,Invented et al. 2031,,
Tesk 41,,,,,,,bh_mass,3e8 ± 0.5e8,,,stellar_dynamics,,,,20,0.1,Invented et al. 2031,,
";

/// Longest a request may take here before the test calls it stuck (the held computation would
/// hold it forever): a guard against a hang, not a speed target.
const STUCK: Duration = Duration::from_secs(60);

#[tokio::test(flavor = "multi_thread", worker_threads = 2)]
async fn a_slow_analysis_never_blocks_a_request() {
    let app = spawn_demo_app().await;
    // Version 1's analysis is done.
    for _ in 0..1200 {
        if app.state.analyst.is_done(1) {
            break;
        }
        tokio::time::sleep(Duration::from_millis(50)).await;
    }
    assert!(
        app.state.analyst.is_done(1),
        "{:?}",
        app.state.analyst.status()
    );
    let before = app.ok("/relations/m_sigma").await;
    assert!(!before.contains("id=\"computing\""), "{before}");
    let mut reviewer = app.login_as(Role::Reviewer).await;

    // From now on every fit and influence computation waits until the hold is dropped, as a
    // very slow analysis of a survey-sized catalog would.
    let hold = app.state.fits.hold();
    import_csv(&app.pool, NEW_GALAXY, ImportMode::Accepted, &mut |_, _| {})
        .await
        .expect("the new galaxy is adopted");

    for path in [
        "/relations",
        "/relations/m_sigma",
        "/galaxies/tesk-41",
        "/place?sigma=200&mass=1e8",
    ] {
        let (status, body) = tokio::time::timeout(STUCK, app.get(path))
            .await
            .unwrap_or_else(|_| panic!("{path} waited on the held analysis"));
        assert_eq!(status, 200, "{path}: {body}");
        assert!(
            body.contains("Computing"),
            "{path} does not say computing: {body}"
        );
    }
    // The relation page shows the newest fit it has, version 1's, and names both versions.
    let page = app.ok("/relations/m_sigma").await;
    assert!(
        page.contains("the fit of catalog version 2 is under way")
            && page.contains("the fit of version 1"),
        "{page}"
    );
    assert!(
        page.contains("id=\"params\"") || page.contains("Parameters"),
        "{page}"
    );
    // The API's placement and the review queue answer too.
    let api = tokio::time::timeout(STUCK, app.get("/api/v1/place?sigma=200&mass=1e8"))
        .await
        .expect("the API's placement waited on the held analysis");
    assert_eq!(api.0, 200, "{}", api.1);
    let fit = tokio::time::timeout(STUCK, app.get("/api/v1/relations/m_sigma"))
        .await
        .expect("the API's fit waited on the held analysis");
    assert_eq!(fit.0, 200, "{}", fit.1);
    let fit: serde_json::Value = serde_json::from_str(&fit.1).unwrap();
    assert_eq!(
        fit["catalog_version"], 1,
        "the older fit names its own version: {fit}"
    );
    let queue = tokio::time::timeout(STUCK, reviewer.get("/review"))
        .await
        .expect("the review queue waited on the held analysis");
    assert_eq!(queue.status, 200, "{}", queue.body);

    // Released, the analysis finishes and the pages show version 2 without being asked twice.
    drop(hold);
    let mut done = String::new();
    for _ in 0..600 {
        done = app.ok("/relations/m_sigma").await;
        if !done.contains("id=\"computing\"") {
            break;
        }
        tokio::time::sleep(Duration::from_millis(50)).await;
    }
    assert!(!done.contains("id=\"computing\""), "{done}");
    assert!(done.contains("Tesk 41") || done.contains("version 2") || done.contains(">2<"));
    let mut status = app.state.analyst.status();
    for _ in 0..600 {
        if status.done.is_some_and(|(v, _)| v == 2) {
            break;
        }
        tokio::time::sleep(Duration::from_millis(50)).await;
        status = app.state.analyst.status();
    }
    assert_eq!(status.done.map(|(v, _)| v), Some(2), "{status:?}");
}

/// `n` pending submissions of new invented galaxies on the demo M–σ model; the one at
/// `outlier` lies 2 dex above it.
fn pending_rows(n: usize, outlier: usize) -> String {
    let mut csv = NEW_GALAXY.lines().next().unwrap().to_owned();
    csv.push('\n');
    for i in 0..n {
        // σ from 120 to 280 km/s; the demo model's mass (8.30 + 5 log10(σ/200)), ±0.1 dex.
        let sigma = 120.0 + 160.0 * (i as f64) / (n as f64);
        let mut log_m = 8.30 + 5.0 * (sigma / 200.0_f64).log10() + 0.1 * ((i % 3) as f64 - 1.0);
        if i == outlier {
            log_m += 2.0;
        }
        csv.push_str(&format!(
            "Queue {i},elliptical,classical,core,30,2,sbf,sigma,{sigma:.0} ± 10,,,,sigma_e,r_e,,,,Invented 2032,,\nQueue {i},,,,,,,bh_mass,{log_m:.2} ± 0.1,log10,,stellar_dynamics,,,,30,0.1,Invented 2032,,\n"
        ));
    }
    csv
}

#[tokio::test(flavor = "multi_thread", worker_threads = 2)]
async fn the_review_queue_is_ordered_by_stored_scores_and_paged_in_sql() {
    let app = spawn_demo_app().await;
    let member = app.create_account("member7", Role::Member).await;
    import_csv(
        &app.pool,
        &pending_rows(30, 17),
        ImportMode::Pending {
            account_id: Some(member),
            source: SubmissionSource::Csv,
        },
        &mut |_, _| {},
    )
    .await
    .expect("the pending submissions are stored");
    let mut reviewer = app.login_as(Role::Reviewer).await;
    let first = reviewer.get("/review").await;
    assert_eq!(first.status, 200, "{}", first.body);
    // Every pending submission has a stored score at the current version...
    let version: i64 = sqlx::query_scalar("select catalog_version from catalog_state")
        .fetch_one(&app.pool)
        .await
        .unwrap();
    let scored: Vec<(i64, f64)> = sqlx::query_as(
        "select submission_id, max_abs_z from submission_score
          where catalog_version = ? order by max_abs_z desc, submission_id",
    )
    .bind(version)
    .fetch_all(&app.pool)
    .await
    .unwrap();
    assert_eq!(scored.len(), 30, "{scored:?}");
    // ... the planted one is the farthest off ...
    let top_galaxy: String = sqlx::query_scalar(
        "select g.name from measurement m join galaxy g on g.galaxy_id = m.galaxy_id
          where m.submission_id = ? limit 1",
    )
    .bind(scored[0].0)
    .fetch_one(&app.pool)
    .await
    .unwrap();
    assert_eq!(top_galaxy, "Queue 17");
    assert!(scored[0].1 > 3.0 && scored[1].1 < 3.0, "{scored:?}");
    // ... and the page lists them in the stored order, 20 a page, the rest on page 2.
    let pos = |body: &str, id: i64| body.find(&format!("id=\"review-{id}\""));
    let (a, b) = (pos(&first.body, scored[0].0), pos(&first.body, scored[1].0));
    assert!(a.is_some() && b.is_some() && a < b, "{}", first.body);
    assert!(pos(&first.body, scored[25].0).is_none());
    assert!(first.body.contains("page 1 of 2"), "{}", first.body);
    let second = reviewer.get("/review?page=2").await;
    assert!(pos(&second.body, scored[25].0).is_some(), "{}", second.body);
    assert!(!first.body.contains("id=\"queue-computing\""));
}
