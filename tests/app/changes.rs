//! Named releases, what changed between two catalog versions (`/changes`,
//! `/api/v1/changes`) and distance changes from the galaxy page.

use std::collections::HashSet;

use massline::auth::Role;
use massline::catalog::galaxies::{self, NewDistance, SubmissionSource};
use massline::catalog::model::{BulgeKind, CentreKind, DistanceMethod, Morphology, NewGalaxy};
use massline::catalog::submissions::{self, GalaxyChoice};
use massline::catalog::{citations, history};
use serde_json::{Value, json};

use crate::helpers::{TestApp, spawn_demo_app};

/// A measurement from the cells a form or file would carry.
fn measurement(cells: &[(&str, &str)]) -> massline::catalog::model::NewMeasurement {
    massline::catalog::intake::measurement_from_cells("test", 0, &|c| {
        cells.iter().find(|(k, _)| *k == c).map_or("", |(_, v)| *v)
    })
    .expect("a valid measurement")
}

/// Submits `measurements` for `galaxy` as `member`; returns the submission's key.
async fn submit(
    app: &TestApp,
    member: i64,
    galaxy: GalaxyChoice,
    measurements: Vec<massline::catalog::model::NewMeasurement>,
    key: &str,
) -> i64 {
    let key = submissions::request_key(Some(member), key, &galaxy, &measurements, "");
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

/// The adopted value text of a galaxy's quantity now.
async fn adopted_text(app: &TestApp, galaxy: i64, quantity: &str) -> String {
    sqlx::query_scalar(
        "select m.value_text from adopted_value a join measurement m on m.measurement_id = a.measurement_id
          where a.galaxy_id = ? and a.quantity = ?",
    )
    .bind(galaxy)
    .bind(quantity)
    .fetch_one(&app.pool)
    .await
    .unwrap()
}

/// (name, slug, distance, error, method) of a galaxy now.
async fn galaxy_row(app: &TestApp, galaxy: i64) -> (String, String, f64, f64, String) {
    sqlx::query_as(
        "select name, slug, distance_mpc, distance_err_mpc, distance_method from galaxy where galaxy_id = ?",
    )
    .bind(galaxy)
    .fetch_one(&app.pool)
    .await
    .unwrap()
}

/// The default structural fit's reported (estimate, error) of each parameter of a relation at a
/// version, read from the relation endpoint.
async fn fit_params(app: &TestApp, relation: &str, version: i64) -> Vec<(String, f64, f64)> {
    let (status, body) = app
        .get(&format!("/api/v1/relations/{relation}?version={version}"))
        .await;
    assert_eq!(status, 200, "{body}");
    let v: Value = serde_json::from_str(&body).unwrap();
    v["fit"]["intervals"]["params"]
        .as_array()
        .expect("a fit")
        .iter()
        .map(|p| {
            (
                p["name"].as_str().unwrap().to_owned(),
                p["estimate"].as_f64().unwrap(),
                p["error"].as_f64().unwrap(),
            )
        })
        .collect()
}

#[tokio::test]
async fn what_changed_lists_exactly_the_changes_made_in_between_and_the_fits_moves() {
    let app = spawn_demo_app().await;
    let member = app.create_account("chg-member", Role::Member).await;
    let reviewer = app.create_account("chg-reviewer", Role::Reviewer).await;
    let first = history::current_version(&app.pool).await.unwrap();
    let ids: Vec<i64> = sqlx::query_scalar(
        "select galaxy_id from adopted_value where quantity = 'bh_mass' order by galaxy_id limit 3",
    )
    .fetch_all(&app.pool)
    .await
    .unwrap();
    let (replaced, rejected, moved) = (ids[0], ids[1], ids[2]);
    let old_mass = adopted_text(&app, replaced, "bh_mass").await;

    // 1. An accepted mass replacing the adopted one.
    let new_mass = "log 8.321 ± 0.11";
    let id = submit(
        &app,
        member,
        GalaxyChoice::Existing(replaced),
        vec![measurement(&[
            ("quantity", "bh_mass"),
            ("value", new_mass),
            ("scale", "log10"),
            ("method", "stellar_dynamics"),
        ])],
        "a",
    )
    .await;
    submissions::accept(&app.pool, reviewer, id, &HashSet::new(), "model checked")
        .await
        .unwrap();
    let v_replaced = history::current_version(&app.pool).await.unwrap();

    // 2. A rejected one: no change to list.
    let rejected_value = "log 9.876 ± 0.2";
    let id = submit(
        &app,
        member,
        GalaxyChoice::Existing(rejected),
        vec![measurement(&[
            ("quantity", "bh_mass"),
            ("value", rejected_value),
            ("scale", "log10"),
            ("method", "gas_dynamics"),
        ])],
        "b",
    )
    .await;
    submissions::reject(&app.pool, reviewer, id, "not convincing")
        .await
        .unwrap();
    assert_eq!(
        history::current_version(&app.pool).await.unwrap(),
        v_replaced
    );

    // 3. A distance change.
    let (moved_name, moved_slug, old_d, old_err, old_method) = galaxy_row(&app, moved).await;
    let v_distance = galaxies::change_distance(
        &app.pool,
        Some(reviewer),
        moved,
        &NewDistance {
            distance_mpc: old_d * 1.25,
            distance_err_mpc: 1.5,
            distance_method: "trgb".into(),
        },
        "new calibration",
    )
    .await
    .unwrap()
    .unwrap();

    // 4. A new galaxy with a mass and σ.
    let new_galaxy = GalaxyChoice::New(NewGalaxy {
        name: "Changes Test Galaxy 1".into(),
        morphology: Morphology::Elliptical,
        bulge_kind: BulgeKind::Classical,
        centre_kind: CentreKind::Unknown,
        distance_mpc: 21.0,
        distance_err_mpc: 1.0,
        distance_method: DistanceMethod::Sbf,
        activity: massline::catalog::model::Activity::Unknown,
    });
    let id = submit(
        &app,
        member,
        new_galaxy,
        vec![
            measurement(&[
                ("quantity", "bh_mass"),
                ("value", "log 8.9 ± 0.1"),
                ("scale", "log10"),
                ("method", "gas_dynamics"),
            ]),
            measurement(&[
                ("quantity", "sigma"),
                ("value", "250 ± 10"),
                ("scale", "linear"),
                ("sigma_definition", "sigma_e"),
            ]),
        ],
        "c",
    )
    .await;
    submissions::accept(&app.pool, reviewer, id, &HashSet::new(), "")
        .await
        .unwrap();
    let last = history::current_version(&app.pool).await.unwrap();
    let (new_name, new_slug): (String, String) =
        sqlx::query_as("select name, slug from galaxy order by galaxy_id desc limit 1")
            .fetch_one(&app.pool)
            .await
            .unwrap();
    let (replaced_name, replaced_slug, ..) = galaxy_row(&app, replaced).await;

    let r = app
        .get_with_token(&format!("/api/v1/changes?from={first}&to={last}"), None)
        .await;
    assert_eq!(r.status, 200, "{}", r.body);
    let c = r.json();
    assert_eq!(c["from_catalog_version"], first);
    assert_eq!(c["to_catalog_version"], last);
    assert_eq!(
        c["galaxies_added"],
        json!([{
            "name": new_name, "slug": new_slug, "catalog_version": last,
            "values": [
                {"quantity": "bh_mass", "band": "", "value_text": "log 8.9 ± 0.1"},
                {"quantity": "sigma", "band": "", "value_text": "250 ± 10"},
            ],
        }])
    );
    let change =
        |galaxy: &str, slug: &str, q: &str, old: Option<&str>, new: &str, v: i64, note: &str| {
            json!({
                "galaxy": galaxy, "slug": slug, "quantity": q, "band": "",
                "old_value_text": old, "new_value_text": new, "catalog_version": v,
                "accepted_by": "chg-reviewer", "review_note": note,
            })
        };
    assert_eq!(
        c["values"],
        json!([
            change(
                &replaced_name,
                &replaced_slug,
                "bh_mass",
                Some(old_mass.as_str()),
                new_mass,
                v_replaced,
                "model checked"
            ),
            change(
                &new_name,
                &new_slug,
                "bh_mass",
                None,
                "log 8.9 ± 0.1",
                last,
                ""
            ),
            change(&new_name, &new_slug, "sigma", None, "250 ± 10", last, ""),
        ])
    );
    assert_eq!(
        c["distances"],
        json!([{
            "galaxy": moved_name, "slug": moved_slug,
            "old_distance_mpc": old_d, "old_distance_err_mpc": old_err,
            "old_distance_method": old_method,
            "new_distance_mpc": old_d * 1.25, "new_distance_err_mpc": 1.5,
            "new_distance_method": "trgb", "catalog_version": v_distance,
            "changed_by": "chg-reviewer", "note": "new calibration",
        }])
    );
    assert!(
        !r.body.contains(rejected_value),
        "the rejected value is listed"
    );

    // Each relation's change is the difference of the two versions' fits.
    let relations = c["relations"].as_array().unwrap();
    assert!(!relations.is_empty());
    for rel in relations {
        let slug = rel["relation"].as_str().unwrap();
        let before = fit_params(&app, slug, first).await;
        let after = fit_params(&app, slug, last).await;
        let params = rel["params"].as_array().unwrap();
        assert_eq!(params.len(), after.len(), "{slug}: {rel}");
        for p in params {
            let name = p["name"].as_str().unwrap();
            let (_, a, ea) = before.iter().find(|(n, ..)| n == name).unwrap();
            let (_, b, eb) = after.iter().find(|(n, ..)| n == name).unwrap();
            let delta = p["delta"].as_f64().unwrap();
            assert!(
                (delta - (b - a)).abs() < 1e-12,
                "{slug} {name}: {delta} vs {}",
                b - a
            );
            let sig = p["significance_sigma"].as_f64().unwrap();
            assert!(
                (sig - (b - a) / ea.hypot(*eb)).abs() < 1e-9,
                "{slug} {name}"
            );
        }
    }
    let m_sigma = relations
        .iter()
        .find(|r| r["relation"] == "m_sigma")
        .unwrap();
    assert_eq!(
        m_sigma["n_to"].as_u64().unwrap(),
        m_sigma["n_from"].as_u64().unwrap() + 1,
        "the new galaxy enters M–σ"
    );

    // The page lists the same.
    let page = app.ok(&format!("/changes?from={first}&to={last}")).await;
    for text in [
        new_mass,
        old_mass.as_str(),
        "model checked",
        "new calibration",
        new_name.as_str(),
        "conservative",
    ] {
        assert!(page.contains(text), "the page lacks {text}");
    }
    assert!(!page.contains(rejected_value));
    // The demo's own values came with the demo load, not a reviewer.
    let demo = app
        .get_with_token(&format!("/api/v1/changes?to={first}"), None)
        .await;
    if first > history::history_from(&app.pool).await.unwrap() {
        assert_eq!(demo.status, 200, "{}", demo.body);
        let values = demo.json()["values"].as_array().unwrap().clone();
        assert!(!values.is_empty());
        assert!(
            values.iter().all(|v| v["accepted_by"] == "demo load"),
            "{values:?}"
        );
    } else {
        // Nothing before the first version of the history to compare with.
        demo.problem(422);
    }
}

#[tokio::test]
async fn bad_ranges_are_refused_with_a_sentence_and_past_ranges_never_change() {
    let app = spawn_demo_app().await;
    let first = history::current_version(&app.pool).await.unwrap();
    let galaxy: i64 = sqlx::query_scalar("select min(galaxy_id) from galaxy")
        .fetch_one(&app.pool)
        .await
        .unwrap();
    for d in [30.0, 31.0] {
        galaxies::change_distance(
            &app.pool,
            None,
            galaxy,
            &NewDistance {
                distance_mpc: d,
                distance_err_mpc: 2.0,
                distance_method: "sbf".into(),
            },
            "",
        )
        .await
        .unwrap();
    }
    let (status, body) = app
        .get(&format!("/changes?from={}&to={first}", first + 1))
        .await;
    assert_eq!(status, 400);
    assert!(body.contains("from must be before to"), "{body}");
    let (status, body) = app.get("/changes?from=soon").await;
    assert_eq!(status, 400);
    assert!(body.contains("is not a catalog version"), "{body}");
    let (status, _) = app.get("/changes?to=9999").await;
    assert_eq!(status, 404);
    let r = app
        .get_with_token(
            &format!("/api/v1/changes?from={}&to={first}", first + 2),
            None,
        )
        .await;
    r.problem(422);
    let r = app.get_with_token("/api/v1/changes?to=-3", None).await;
    r.problem(422);
    // Past only: immutable; up to the current version: not.
    let r = app
        .get_with_token(
            &format!("/api/v1/changes?from={first}&to={}", first + 1),
            None,
        )
        .await;
    assert_eq!(r.status, 200, "{}", r.body);
    assert!(
        r.header("cache-control").contains("immutable"),
        "{:?}",
        r.headers
    );
    assert_eq!(r.json()["distances"].as_array().unwrap().len(), 1);
    let r = app.get_with_token("/api/v1/changes", None).await;
    assert_eq!(r.status, 200, "{}", r.body);
    assert!(!r.header("cache-control").contains("immutable"));
    assert_eq!(r.json()["from_catalog_version"], first + 1);
}

#[tokio::test]
async fn an_admin_names_a_release_that_never_moves_and_its_pages_read_that_version() {
    let app = spawn_demo_app().await;
    let released = history::current_version(&app.pool).await.unwrap();
    let mut admin = app.login_as(Role::Admin).await;
    admin.get("/releases").await;
    let r = admin
        .post(
            "/releases",
            &[
                ("name", "2027A"),
                ("version", ""),
                ("note", "for the survey paper"),
            ],
        )
        .await;
    assert_eq!(r.status, 303, "{}", r.body);
    assert_eq!(r.header("location"), "/releases?named=2027A");
    let named = admin.get("/releases?named=2027A").await;
    assert!(named.body.contains("class=\"flash\""), "{}", named.body);
    assert!(named.body.contains(&format!("catalog version {released}")));
    // Nobody else is told they named it.
    let (_, other) = app.get("/releases?named=2027A").await;
    assert!(!other.contains("class=\"flash\""));

    // The catalog moves on; the release stays.
    let galaxy: i64 = sqlx::query_scalar("select min(galaxy_id) from galaxy")
        .fetch_one(&app.pool)
        .await
        .unwrap();
    galaxies::change_distance(
        &app.pool,
        None,
        galaxy,
        &NewDistance {
            distance_mpc: 44.0,
            distance_err_mpc: 3.0,
            distance_method: "cepheid".into(),
        },
        "",
    )
    .await
    .unwrap();
    let taken = admin
        .post(
            "/releases",
            &[("name", "2027A"), ("version", ""), ("note", "")],
        )
        .await;
    assert_eq!(taken.status, 409, "{}", taken.body);
    assert!(
        taken.body.contains("already names catalog version"),
        "{}",
        taken.body
    );
    let bad = admin
        .post(
            "/releases",
            &[("name", "a b"), ("version", "1"), ("note", "")],
        )
        .await;
    assert_eq!(bad.status, 400);
    assert!(bad.body.contains("id=\"e-name\""), "{}", bad.body);
    let releases = citations::releases(&app.pool).await.unwrap();
    assert_eq!(releases.len(), 1);
    assert_eq!(releases[0].catalog_version, released);

    let mut member = app.login_as(Role::Member).await;
    member.get("/releases").await;
    let r = member
        .post(
            "/releases",
            &[("name", "2027B"), ("version", ""), ("note", "")],
        )
        .await;
    assert_eq!(r.status, 403);

    // ?release= reads the released version.
    let (status, by_name) = app.get("/catalog.csv?release=2027A").await;
    assert_eq!(status, 200);
    let (_, by_number) = app.get(&format!("/catalog.csv?version={released}")).await;
    let (_, now) = app.get("/catalog.csv").await;
    assert_eq!(by_name, by_number);
    assert_ne!(by_name, now);
    let (status, page) = app.get("/relations/m_sigma?release=2027A").await;
    assert_eq!(status, 200, "{page}");
    let (_, list) = app.get("/relations?release=2027A").await;
    assert!(
        list.contains(&format!("id=\"catalog-version\">{released}<")),
        "{list}"
    );

    // /releases shows it with its fits: the α of M–σ as the relations list of that version
    // shows it.
    let row = list
        .split("id=\"relation-m_sigma\"")
        .nth(1)
        .expect("the M–σ row");
    let alpha = row
        .split("<td class=\"num\">")
        .nth(1)
        .and_then(|cell| cell.split("</td>").next())
        .expect("the α cell");
    let (_, page) = app.get("/releases").await;
    assert!(page.contains("2027A"));
    assert!(page.contains("for the survey paper"));
    assert!(page.contains("/relations?release=2027A"));
    assert!(page.contains("/catalog.csv?release=2027A"));
    assert!(
        page.contains(&format!("<td class=\"num\">{alpha}</td>")),
        "α {alpha} not on {page}"
    );
    let api = app.get_with_token("/api/v1/releases", None).await;
    assert_eq!(api.status, 200);
    assert_eq!(api.json()["releases"][0]["name"], "2027A");
    assert_eq!(api.json()["releases"][0]["catalog_version"], released);
}

#[tokio::test]
async fn a_reviewer_changes_a_distance_from_the_galaxy_page_and_bad_input_names_the_field() {
    let app = spawn_demo_app().await;
    let galaxy: i64 = sqlx::query_scalar("select min(galaxy_id) from galaxy")
        .fetch_one(&app.pool)
        .await
        .unwrap();
    let (_, slug, old_d, ..) = galaxy_row(&app, galaxy).await;
    let before = history::current_version(&app.pool).await.unwrap();
    let path = format!("/galaxies/{slug}/distance");

    let mut member = app.login_as(Role::Member).await;
    let page = member.get(&format!("/galaxies/{slug}")).await;
    assert!(
        !page.body.contains("name=\"distance_mpc\""),
        "a member sees no form"
    );
    let r = member
        .post(
            &path,
            &[
                ("distance_mpc", "40"),
                ("distance_err_mpc", "2"),
                ("distance_method", "sbf"),
                ("note", ""),
            ],
        )
        .await;
    assert_eq!(r.status, 403);

    let mut reviewer = app.login_as(Role::Reviewer).await;
    let page = reviewer.get(&format!("/galaxies/{slug}")).await;
    assert!(page.body.contains("name=\"distance_mpc\""));
    let bad = reviewer
        .post(
            &path,
            &[
                ("distance_mpc", "far"),
                ("distance_err_mpc", ""),
                ("distance_method", "guess"),
                ("note", ""),
            ],
        )
        .await;
    assert_eq!(bad.status, 400, "{}", bad.body);
    for field in ["distance_mpc", "distance_err_mpc", "distance_method"] {
        assert!(
            bad.body.contains(&format!("id=\"e-{field}\"")),
            "{field} not named: {}",
            bad.body
        );
        assert!(
            bad.body
                .contains(&format!("aria-describedby=\"e-{field}\""))
        );
    }
    assert_eq!(history::current_version(&app.pool).await.unwrap(), before);

    let new_d = (old_d * 1.5 * 10.0).round() / 10.0;
    let new_d_text = new_d.to_string();
    let r = reviewer
        .post(
            &path,
            &[
                ("distance_mpc", new_d_text.as_str()),
                ("distance_err_mpc", "2.5"),
                ("distance_method", "cepheid"),
                ("note", "recalibrated zero point"),
            ],
        )
        .await;
    assert_eq!(r.status, 303, "{}", r.body);
    let version = history::current_version(&app.pool).await.unwrap();
    assert_eq!(version, before + 1);
    let location = r.header("location");
    assert_eq!(
        location,
        format!("/galaxies/{slug}?distance_changed={version}#distance")
    );
    let shown = reviewer.get(location.split('#').next().unwrap()).await;
    assert!(
        shown.body.contains(&format!("catalog version {version}"))
            && shown.body.contains("class=\"flash\""),
        "{}",
        shown.body
    );
    let (_, _, d, err, method) = galaxy_row(&app, galaxy).await;
    assert_eq!((d, err, method.as_str()), (new_d, 2.5, "cepheid"));
    assert!(shown.body.contains("(Cepheids)"), "the new method is shown");
    // The address alone does not make the page claim a change to someone else.
    let (_, other) = app
        .get(&format!("/galaxies/{slug}?distance_changed={version}"))
        .await;
    assert!(!other.contains("class=\"flash\""));

    let changes = app.ok(&format!("/changes?to={version}")).await;
    assert!(changes.contains("recalibrated zero point"), "{changes}");
    assert!(changes.contains("Cepheids"));
    assert!(changes.contains("test-reviewer"));
}
