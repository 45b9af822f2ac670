//! Any catalog version, every door: a random history of accepted and rejected submissions,
//! replaced adopted values, distance changes and new galaxies, 50+ versions long; what a
//! version's files were when it was current is what `?version=N` serves later, byte for byte.

use massline::auth::Role;
use massline::catalog::galaxies::{self, NewDistance};
use massline::catalog::model::{BulgeKind, CentreKind, DistanceMethod, Morphology, NewGalaxy};
use massline::catalog::submissions::{self, GalaxyChoice};
use massline::catalog::{galaxies::SubmissionSource, history};
use std::collections::HashSet;

use crate::helpers::{TestApp, spawn_demo_app};

/// A small deterministic generator (xorshift64*), so a failing history can be replayed.
struct Dice(u64);

impl Dice {
    fn next(&mut self) -> u64 {
        self.0 ^= self.0 >> 12;
        self.0 ^= self.0 << 25;
        self.0 ^= self.0 >> 27;
        self.0.wrapping_mul(0x2545_F491_4F6C_DD1D)
    }
    fn below(&mut self, n: u64) -> u64 {
        self.next() % n
    }
    fn uniform(&mut self, lo: f64, hi: f64) -> f64 {
        lo + (hi - lo) * (self.next() >> 11) as f64 / (1u64 << 53) as f64
    }
}

/// Adopts a new distance for a galaxy (a new catalog version), as the system.
async fn move_galaxy(app: &TestApp, galaxy: i64, distance_mpc: f64, err_mpc: f64, method: &str) {
    galaxies::change_distance(
        &app.pool,
        None,
        galaxy,
        &NewDistance {
            distance_mpc,
            distance_err_mpc: err_mpc,
            distance_method: method.into(),
        },
        "",
    )
    .await
    .unwrap()
    .expect("the galaxy exists");
}

/// The files whose bytes a version must keep.
const FILES: [&str; 8] = [
    "/relations/m_sigma/fit.json",
    "/relations/m_sigma/sample.csv",
    "/relations/m_mbulge/fit.json?method=conditional",
    "/catalog.csv",
    "/catalog.json",
    "/relations/m_sigma/sample.vot",
    "/relations/m_sigma/sample.tex",
    "/catalog.vot",
];

/// The file at `path`, `?version=N` (or `&version=N`) added when `version` is given.
async fn file(app: &TestApp, path: &str, version: Option<i64>) -> (u16, String) {
    let path = match version {
        None => path.to_owned(),
        Some(v) if path.contains('?') => format!("{path}&version={v}"),
        Some(v) => format!("{path}?version={v}"),
    };
    app.get(&path).await
}

/// A measurement from the cells a form or file would carry.
fn measurement(cells: &[(&str, String)]) -> massline::catalog::model::NewMeasurement {
    massline::catalog::intake::measurement_from_cells("test", 0, &|c| {
        cells
            .iter()
            .find(|(k, _)| *k == c)
            .map_or("", |(_, v)| v.as_str())
    })
    .expect("a valid measurement")
}

/// Submits `measurements` for `galaxy` as `member`; returns the submission's key.
async fn submit(
    app: &TestApp,
    member: i64,
    galaxy: GalaxyChoice,
    measurements: Vec<massline::catalog::model::NewMeasurement>,
    n: usize,
) -> i64 {
    let key = submissions::request_key(Some(member), &format!("h{n}"), &galaxy, &measurements, "");
    submissions::create(
        &app.pool,
        Some(member),
        SubmissionSource::Api,
        &galaxy,
        &measurements,
        "",
        &key,
        true,
    )
    .await
    .expect("stored")
    .submission_id
}

#[tokio::test]
async fn every_version_serves_later_exactly_what_it_served_when_current() {
    let app = spawn_demo_app().await;
    let member = app.create_account("hist-member", Role::Member).await;
    let reviewer = app.create_account("hist-reviewer", Role::Reviewer).await;
    let galaxy_ids: Vec<i64> =
        sqlx::query_scalar("select galaxy_id from galaxy order by galaxy_id")
            .fetch_all(&app.pool)
            .await
            .unwrap();
    let mut dice = Dice(0x9E37_79B9_7F4A_7C15);
    let mut kept: Vec<(i64, Vec<(u16, String)>)> = Vec::new();
    let mut kinds_seen = HashSet::new();
    let start = history::current_version(&app.pool).await.unwrap();
    let mut step = 0;
    while history::current_version(&app.pool).await.unwrap() < start + 55 {
        step += 1;
        assert!(step < 400, "the history does not advance");
        let galaxy = galaxy_ids[dice.below(galaxy_ids.len() as u64) as usize];
        let kind = dice.below(10);
        match kind {
            // A new black-hole mass for a galaxy, accepted: replaces the adopted one.
            0..=3 => {
                let log_m = dice.uniform(6.5, 9.8);
                let m = measurement(&[
                    ("quantity", "bh_mass".into()),
                    ("value", format!("log {log_m:.3} ± 0.12")),
                    ("scale", "log10".into()),
                    ("method", "stellar_dynamics".into()),
                ]);
                let id = submit(&app, member, GalaxyChoice::Existing(galaxy), vec![m], step).await;
                submissions::accept(&app.pool, reviewer, id, &HashSet::new(), "checked")
                    .await
                    .unwrap();
                kinds_seen.insert("replaced");
            }
            // The same, rejected: no new version.
            4 => {
                let m = measurement(&[
                    ("quantity", "sigma".into()),
                    ("value", format!("{:.0} ± 9", dice.uniform(90.0, 300.0))),
                    ("scale", "linear".into()),
                    ("sigma_definition", "sigma_e".into()),
                ]);
                let id = submit(&app, member, GalaxyChoice::Existing(galaxy), vec![m], step).await;
                submissions::reject(&app.pool, reviewer, id, "not convincing")
                    .await
                    .unwrap();
                kinds_seen.insert("rejected");
            }
            // A new distance.
            5..=7 => {
                let d = dice.uniform(5.0, 80.0);
                galaxies::change_distance(
                    &app.pool,
                    Some(reviewer),
                    galaxy,
                    &NewDistance {
                        distance_mpc: d,
                        distance_err_mpc: 0.08 * d,
                        distance_method: "sbf".into(),
                    },
                    "new calibration",
                )
                .await
                .unwrap()
                .expect("the galaxy exists");
                kinds_seen.insert("distance");
            }
            // A new galaxy with a mass and σ, accepted.
            _ => {
                let sigma = dice.uniform(100.0, 300.0);
                let log_m = 8.3 + 5.0 * (sigma.log10() - 2.3) + dice.uniform(-0.4, 0.4);
                let g = GalaxyChoice::New(NewGalaxy {
                    name: format!("Hist-{step:03}"),
                    morphology: Morphology::Elliptical,
                    bulge_kind: BulgeKind::Classical,
                    centre_kind: CentreKind::Unknown,
                    distance_mpc: dice.uniform(10.0, 60.0),
                    distance_err_mpc: 1.0,
                    distance_method: DistanceMethod::Sbf,
                    activity: massline::catalog::model::Activity::Unknown,
                });
                let ms = vec![
                    measurement(&[
                        ("quantity", "bh_mass".into()),
                        ("value", format!("log {log_m:.3} ± 0.1")),
                        ("scale", "log10".into()),
                        ("method", "gas_dynamics".into()),
                    ]),
                    measurement(&[
                        ("quantity", "sigma".into()),
                        ("value", format!("{sigma:.0} ± 8")),
                        ("scale", "linear".into()),
                        ("sigma_definition", "sigma_e".into()),
                    ]),
                ];
                let id = submit(&app, member, g, ms, step).await;
                submissions::accept(&app.pool, reviewer, id, &HashSet::new(), "")
                    .await
                    .unwrap();
                kinds_seen.insert("new galaxy");
            }
        }
        let version = history::current_version(&app.pool).await.unwrap();
        if kept.last().is_some_and(|(v, _)| *v == version) || dice.below(3) != 0 {
            continue;
        }
        let mut files = Vec::new();
        for path in FILES {
            let (status, body) = file(&app, path, None).await;
            assert_eq!(status, 200, "{path}: {body}");
            files.push((status, body));
        }
        kept.push((version, files));
    }
    assert_eq!(
        kinds_seen.len(),
        4,
        "every kind of change happened: {kinds_seen:?}"
    );
    assert!(kept.len() >= 10, "versions sampled: {}", kept.len());
    let current = history::current_version(&app.pool).await.unwrap();
    for (version, files) in &kept {
        for (path, (_, then)) in FILES.iter().zip(files) {
            let (status, now) = file(&app, path, Some(*version)).await;
            assert_eq!(status, 200, "{path} at version {version}: {now}");
            assert!(
                now == *then,
                "{path} at version {version} (current {current}) differs from what it was:\n--- then\n{}\n--- now\n{}",
                &then[..then.len().min(600)],
                &now[..now.len().min(600)]
            );
        }
    }
    // Versions differ from each other (the test would pass vacuously otherwise).
    let distinct: HashSet<&String> = kept.iter().map(|(_, f)| &f[3].1).collect();
    assert!(
        distinct.len() > kept.len() / 2,
        "the catalogs sampled differ"
    );
}

#[tokio::test]
async fn a_past_version_is_immutable_and_versions_outside_the_history_say_why() {
    let app = spawn_demo_app().await;
    let demo = history::current_version(&app.pool).await.unwrap();
    let galaxy: i64 = sqlx::query_scalar("select min(galaxy_id) from galaxy")
        .fetch_one(&app.pool)
        .await
        .unwrap();
    move_galaxy(&app, galaxy, 33.0, 2.0, "trgb").await;
    // A past version's file: strong ETag, a year's cache, 304 when the tag is sent back.
    let path = format!("/relations/m_sigma/sample.csv?version={demo}");
    let r = app
        .client
        .get(format!("{}{path}", app.address))
        .send()
        .await
        .unwrap();
    assert_eq!(r.status(), 200);
    let etag = r.headers()["etag"].to_str().unwrap().to_owned();
    assert!(etag.starts_with("\"sha256-"), "{etag}");
    assert!(
        r.headers()["cache-control"]
            .to_str()
            .unwrap()
            .contains("immutable")
    );
    assert_eq!(
        r.headers()["catalog-version"].to_str().unwrap(),
        demo.to_string()
    );
    let again = app
        .client
        .get(format!("{}{path}", app.address))
        .header("if-none-match", &etag)
        .send()
        .await
        .unwrap();
    assert_eq!(again.status(), 304);
    // The current version's file may still change: no year-long cache.
    let r = app
        .client
        .get(format!("{}/relations/m_sigma/sample.csv", app.address))
        .send()
        .await
        .unwrap();
    assert!(
        !r.headers()["cache-control"]
            .to_str()
            .unwrap()
            .contains("immutable")
    );
    // The distance change moved the galaxy's row in the current catalog, not in the old one.
    let (_, old) = app.get(&format!("/catalog.csv?version={demo}")).await;
    let (_, now) = app.get("/catalog.csv").await;
    assert_ne!(old, now);
    // Not yet made: 404 naming the current version; not a number: 400; unknown release: 404.
    let (status, body) = app.get("/relations/m_sigma?version=999").await;
    assert_eq!(status, 404);
    assert!(body.contains("does not exist yet"), "{body}");
    let (status, body) = app.get("/catalog.csv?version=latest").await;
    assert_eq!(status, 400);
    assert!(body.contains("whole number"), "{body}");
    let r = app.get("/api/v1/catalog.json?release=nope").await;
    assert_eq!(r.0, 404, "{}", r.1);
    // Before the history: 410 with the first version kept.
    sqlx::query("update catalog_state set history_from_version = ?")
        .bind(demo)
        .execute(&app.pool)
        .await
        .unwrap();
    let (status, body) = app
        .get(&format!("/relations/m_sigma/fit.json?version={}", demo - 1))
        .await;
    assert_eq!(status, 410, "{body}");
    assert!(
        body.contains(&format!("Ask for version {demo} or later")),
        "{body}"
    );
    let (status, body) = app
        .get(&format!("/api/v1/relations/m_sigma?version={}", demo - 1))
        .await;
    assert_eq!(status, 410, "{body}");
}

#[tokio::test]
async fn the_history_cannot_be_rewritten() {
    let app = spawn_demo_app().await;
    for statement in [
        "update adopted_value_span set measurement_id = measurement_id + 1",
        "delete from adopted_value_span",
        "update galaxy_span set distance_mpc = 1",
        "delete from galaxy_span",
        "delete from galaxy",
    ] {
        let result = sqlx::query(statement).execute(&app.pool).await;
        assert!(result.is_err(), "{statement} was allowed");
    }
}

#[tokio::test]
async fn a_cited_fit_keeps_its_page_and_is_made_again_equal_after_the_catalog_moves_on() {
    let app = spawn_demo_app().await;
    let version = history::current_version(&app.pool).await.unwrap();
    let page = app.ok("/relations/m_sigma?method=conditional").await;
    let start = page.find("href=\"/fits/fit-").expect("a cite box") + "href=\"/fits/".len();
    let id = page[start..start + 20].to_owned();
    assert!(page.contains("@misc{"), "BibTeX on the page");
    assert!(
        page.contains(&format!("catalog version {version}")),
        "the sentence names the version"
    );
    let galaxy: i64 = sqlx::query_scalar("select min(galaxy_id) from galaxy")
        .fetch_one(&app.pool)
        .await
        .unwrap();
    move_galaxy(&app, galaxy, 40.0, 3.0, "cepheid").await;
    // The current fit has another identifier now; the old one still has its page.
    let now = app.ok("/relations/m_sigma?method=conditional").await;
    assert!(
        !now.contains(&format!("/fits/{id}")),
        "a new version, a new identifier"
    );
    let fit_page = app.ok(&format!("/fits/{id}")).await;
    assert!(fit_page.contains("equals, to the last digit"), "{fit_page}");
    assert!(
        fit_page.contains("The catalog has changed since"),
        "{fit_page}"
    );
    assert!(
        fit_page.contains(&format!("version={version}")),
        "links carry the version"
    );
    // Its fit.json at that version names the same identifier.
    let (status, json) = app
        .get(&format!(
            "/relations/m_sigma/fit.json?method=conditional&version={version}"
        ))
        .await;
    assert_eq!(status, 200);
    let doc: serde_json::Value = serde_json::from_str(&json).unwrap();
    assert_eq!(doc["fit_id"], id.as_str());
    assert_eq!(doc["catalog_version"], version);
    // A forged result is caught: the page says the fit differs.
    sqlx::query("update cited_fit set result_json = '{}' where fit_id = ?")
        .bind(&id)
        .execute(&app.pool)
        .await
        .unwrap();
    let forged = app.ok(&format!("/fits/{id}")).await;
    assert!(
        forged.contains("differs from the result recorded"),
        "{forged}"
    );
    let (status, body) = app.get("/fits/fit-0123456789abcdef").await;
    assert_eq!(status, 404);
    assert!(body.contains("How to cite this fit"), "{body}");
}

#[tokio::test]
async fn the_api_answers_galaxies_and_placements_at_a_past_version() {
    let app = spawn_demo_app().await;
    let demo = history::current_version(&app.pool).await.unwrap();
    let (galaxy, slug, old_d): (i64, String, f64) = sqlx::query_as(
        "select g.galaxy_id, g.slug, g.distance_mpc from galaxy g
           join adopted_value a on a.galaxy_id = g.galaxy_id and a.quantity = 'bh_mass'
       order by g.galaxy_id limit 1",
    )
    .fetch_one(&app.pool)
    .await
    .unwrap();
    move_galaxy(&app, galaxy, old_d * 2.0, 1.0, "trgb").await;
    let json = |body: &str| serde_json::from_str::<serde_json::Value>(body).unwrap();
    let (status, then) = app
        .get(&format!("/api/v1/galaxies/{slug}?version={demo}"))
        .await;
    assert_eq!(status, 200, "{then}");
    let (_, now) = app.get(&format!("/api/v1/galaxies/{slug}")).await;
    let (then, now) = (json(&then), json(&now));
    assert_eq!(then["catalog_version"], demo);
    // Stored and read back as the same double: compared by their bits.
    assert_eq!(
        then["distance_mpc"].as_f64().unwrap().to_bits(),
        old_d.to_bits()
    );
    assert_eq!(
        now["distance_mpc"].as_f64().unwrap().to_bits(),
        (old_d * 2.0).to_bits()
    );
    assert_eq!(now["catalog_version"], demo + 1);
    let (status, list) = app
        .get(&format!("/api/v1/galaxies?version={demo}&per_page=5"))
        .await;
    assert_eq!(status, 200, "{list}");
    assert_eq!(json(&list)["catalog_version"], demo);
    // The page of that version shows the old distance too.
    let page = app.ok(&format!("/galaxies/{slug}?version={demo}")).await;
    assert!(page.contains("You are reading catalog version"), "{page}");
    // Placing against a past version uses that version's fits.
    let (status, placed) = app
        .get(&format!(
            "/api/v1/place?sigma=200&mass=2e8&distance=20&version={demo}"
        ))
        .await;
    assert_eq!(status, 200, "{placed}");
    assert_eq!(json(&placed)["catalog_version"], demo);
    let page = app
        .ok(&format!(
            "/place?sigma=200&mass=2e8&distance=20&version={demo}"
        ))
        .await;
    assert!(page.contains("You are reading catalog version"), "{page}");
    assert!(
        page.contains(&format!("name=\"version\" value=\"{demo}\"")),
        "the form keeps it"
    );
    let (status, _) = app.get("/api/v1/galaxies?version=-3").await;
    assert_eq!(status, 422);
}

#[tokio::test]
async fn the_command_line_exports_any_version_as_the_server_serves_it() {
    let app = spawn_demo_app().await;
    let demo = history::current_version(&app.pool).await.unwrap();
    let galaxy: i64 = sqlx::query_scalar("select max(galaxy_id) from galaxy")
        .fetch_one(&app.pool)
        .await
        .unwrap();
    move_galaxy(&app, galaxy, 12.5, 0.5, "cepheid").await;
    let bin = env!("CARGO_BIN_EXE_massline");
    let export = |version: i64| {
        std::process::Command::new(bin)
            .args(["export", "--version", &version.to_string(), "--db"])
            .arg(&app.db_path)
            .output()
            .unwrap()
    };
    let old = export(demo);
    assert!(
        old.status.success(),
        "{}",
        String::from_utf8_lossy(&old.stderr)
    );
    let (_, served) = app.get(&format!("/catalog.csv?version={demo}")).await;
    assert_eq!(String::from_utf8(old.stdout).unwrap(), served);
    let (_, current) = app.get("/catalog.csv").await;
    assert_ne!(
        served, current,
        "the distance change is in the current catalog only"
    );
    let later = export(demo + 5);
    assert!(!later.status.success());
    assert!(
        String::from_utf8_lossy(&later.stderr).contains("does not exist yet"),
        "{}",
        String::from_utf8_lossy(&later.stderr)
    );
}
