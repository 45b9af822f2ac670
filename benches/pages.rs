//! Server time of the pages: `cargo bench --bench pages` (add `-- --quick` for a short run).
//!
//! The project's targets, on the invented demo catalog: a relation page whose fit is cached renders
//! in under 20 ms of server time, one with a fresh maximum-likelihood fit in under 200 ms, and
//! the place page answers in under 20 ms; no page weighs more than 300 KB with its chart.
//!
//! Each request goes through the whole router (every layer, the handler, the template) with
//! `tower::ServiceExt::oneshot`, without a socket, so the figures are server time only. The app
//! is built as `massline serve --demo --public-read` would build it, on a temporary database.
//! The page weights (body bytes) are printed before the timings.

use std::hint::black_box;
use std::net::SocketAddr;
use std::sync::atomic::{AtomicU64, Ordering};
use std::time::Duration;

use axum::Router;
use axum::body::Body;
use axum::extract::ConnectInfo;
use axum::http::Request;
use criterion::{Criterion, criterion_group, criterion_main};
use http_body_util::BodyExt;
use massline::catalog::demo::{DEMO_GALAXIES_CSV, DEMO_MEASUREMENTS_CSV, parse_demo};
use massline::catalog::model::slugify;
use massline::{Application, Settings};
use tower::ServiceExt;

/// Page weight limit, bytes (the project's limit: 300 KB).
const MAX_PAGE_BYTES: usize = 300 * 1024;

/// Every value a person could give the place page, so every relation is used and refitted.
const PLACE_FULL: &str = "/place?sigma=210+%C2%B1+10&bulge_mass=2e11+%C2%B1+10%25\
&luminosity=5e10+%C2%B1+1e10&band=K&mass=3.2e8+%2B0.5e8%2F-0.3e8&distance=16.5+%C2%B1+0.8\
&resolution=0.1";

/// The same values without the black-hole mass: no refit with the object, so the difference
/// to [`PLACE_FULL`] is the refits' share.
const PLACE_NO_MASS: &str = "/place?sigma=210+%C2%B1+10&bulge_mass=2e11+%C2%B1+10%25\
&luminosity=5e10+%C2%B1+1e10&band=K";

/// GET `path` through the router; the body length in bytes. Panics unless the answer is 200.
async fn get(router: &Router, path: &str) -> usize {
    let mut request = Request::get(path)
        .body(Body::empty())
        .expect("a valid request");
    request
        .extensions_mut()
        .insert(ConnectInfo(SocketAddr::from(([127, 0, 0, 1], 40_000))));
    let response = router
        .clone()
        .oneshot(request)
        .await
        .expect("the router answers");
    let status = response.status();
    let body = response
        .into_body()
        .collect()
        .await
        .expect("a body")
        .to_bytes();
    assert_eq!(
        status,
        200,
        "GET {path}: {}",
        String::from_utf8_lossy(&body)
    );
    body.len()
}

fn benches(c: &mut Criterion) {
    let runtime = tokio::runtime::Builder::new_multi_thread()
        .enable_all()
        .build()
        .expect("a runtime");
    let dir = tempfile::tempdir().expect("a temporary directory");
    let mut settings = Settings::for_tests(dir.path().join("catalog.sqlite"));
    settings.demo = true;
    settings.public_read = true;
    let app = runtime
        .block_on(Application::build(settings))
        .expect("the app builds");
    let router = massline::startup::app(app.state());
    let demo = parse_demo(DEMO_GALAXIES_CSV, DEMO_MEASUREMENTS_CSV).expect("the demo parses");
    let galaxy = format!("/galaxies/{}", slugify(&demo.galaxies[0].name));

    // Page weights; also warms the caches the "cached" timings rely on.
    println!("page weights (limit {} KB):", MAX_PAGE_BYTES / 1024);
    for path in [
        "/relations",
        "/relations/m_sigma",
        "/relations/m_sigma_mbulge",
        "/relations/m_l_k",
        PLACE_FULL,
        galaxy.as_str(),
        "/galaxies",
    ] {
        let bytes = runtime.block_on(get(&router, path));
        let verdict = if bytes <= MAX_PAGE_BYTES {
            "within"
        } else {
            "OVER"
        };
        println!("  {:>7.1} KB  {verdict}  {path}", bytes as f64 / 1024.0);
    }

    let mut g = c.benchmark_group("pages");
    g.bench_function("relation_cached_fit", |b| {
        b.iter(|| runtime.block_on(get(&router, black_box("/relations/m_sigma"))))
    });
    g.bench_function("place_full_input", |b| {
        b.iter(|| runtime.block_on(get(&router, black_box(PLACE_FULL))))
    });
    g.bench_function("place_without_mass", |b| {
        b.iter(|| runtime.block_on(get(&router, black_box(PLACE_NO_MASS))))
    });
    g.bench_function("galaxy_cached_fits", |b| {
        b.iter(|| runtime.block_on(get(&router, black_box(&galaxy))))
    });
    g.finish();

    // A new pivot each time: a new cache key, so the maximum-likelihood fit (and the
    // leave-one-out influence the page lists) is computed afresh on every request.
    let mut g = c.benchmark_group("pages_fresh");
    g.sample_size(10);
    g.measurement_time(Duration::from_secs(10));
    let counter = AtomicU64::new(0);
    g.bench_function("relation_fresh_fit", |b| {
        b.iter(|| {
            let n = counter.fetch_add(1, Ordering::Relaxed);
            let pivot = 2.25 + 1e-7 * n as f64;
            runtime.block_on(get(&router, &format!("/relations/m_sigma?pivot={pivot}")))
        })
    });
    g.finish();
    drop(dir);
}

criterion_group!(pages, benches);
criterion_main!(pages);
