//! Retries store nothing twice: the form's request key, the API's `Idempotency-Key`, catalog
//! files sent again; and the API's submission endpoint with its errors.

use massline::auth::Role;
use serde_json::{Value, json};

use crate::helpers::{TestApp, spawn_demo_app};

async fn count(app: &TestApp, table: &str) -> i64 {
    sqlx::query_scalar(sqlx::AssertSqlSafe(format!("select count(*) from {table}")))
        .fetch_one(&app.pool)
        .await
        .unwrap()
}

async fn some_slug(app: &TestApp) -> String {
    sqlx::query_scalar("select slug from galaxy order by galaxy_id limit 1")
        .fetch_one(&app.pool)
        .await
        .unwrap()
}

/// POST JSON to the API with a token and an idempotency key; (status, headers, body).
async fn post_api(
    app: &TestApp,
    token: Option<&str>,
    key: Option<&str>,
    body: &Value,
) -> (u16, reqwest::header::HeaderMap, Value) {
    let mut request = app
        .client
        .post(format!("{}/api/v1/submissions", app.address))
        .header("content-type", "application/json")
        .body(body.to_string());
    if let Some(t) = token {
        request = request.header("authorization", format!("Bearer {t}"));
    }
    if let Some(k) = key {
        request = request.header("idempotency-key", k);
    }
    let response = request.send().await.unwrap();
    let status = response.status().as_u16();
    let headers = response.headers().clone();
    let text = response.text().await.unwrap();
    let json = serde_json::from_str(&text).unwrap_or(Value::String(text));
    (status, headers, json)
}

fn mass_body(slug: &str, value: &str) -> Value {
    json!({
        "galaxy": slug,
        "measurements": [{
            "quantity": "bh_mass",
            "value": value,
            "method": "stellar_dynamics",
            "source_distance_mpc": 20,
            "resolution_arcsec": "0.08",
            "reference": "Invented et al. 2032"
        }],
        "note": "from a script"
    })
}

#[tokio::test]
async fn an_api_submission_lands_pending_and_a_replay_stores_nothing() {
    let app = spawn_demo_app().await;
    let member = app.create_account("script-member", Role::Member).await;
    let (token, _) = app.make_token(member, "read submit").await;
    let slug = some_slug(&app).await;
    let body = mass_body(&slug, "3.1e8 ± 0.4e8");
    let before = count(&app, "measurement").await;

    let (status, headers, answer) = post_api(&app, Some(&token), Some("run-1/obj-1"), &body).await;
    assert_eq!(status, 201, "{answer}");
    assert_eq!(answer["state"], "pending");
    assert_eq!(answer["replayed"], false);
    let id = answer["submission_id"].as_i64().unwrap();
    assert_eq!(
        headers["location"].to_str().unwrap(),
        format!("/api/v1/submissions/{id}")
    );
    assert_eq!(count(&app, "measurement").await, before + 1);

    // The replay: 200, the same submission, nothing new.
    let (status, _, again) = post_api(&app, Some(&token), Some("run-1/obj-1"), &body).await;
    assert_eq!(status, 200, "{again}");
    assert_eq!(again["submission_id"], id);
    assert_eq!(again["replayed"], true);
    assert_eq!(count(&app, "measurement").await, before + 1);

    // The same key with another value: refused, nothing new.
    let other = mass_body(&slug, "3.3e8 ± 0.4e8");
    let (status, headers, problem) =
        post_api(&app, Some(&token), Some("run-1/obj-1"), &other).await;
    assert_eq!(status, 422, "{problem}");
    assert_eq!(headers["content-type"], "application/problem+json");
    assert_eq!(problem["errors"][0]["field"], "Idempotency-Key");
    assert_eq!(count(&app, "measurement").await, before + 1);

    // Its state, for the submitter.
    let status: Value = app
        .client
        .get(format!("{}/api/v1/submissions/{id}", app.address))
        .header("authorization", format!("Bearer {token}"))
        .send()
        .await
        .unwrap()
        .json()
        .await
        .unwrap();
    assert_eq!(status["state"], "pending");
    assert_eq!(status["galaxy_slug"], slug.as_str());
    assert_eq!(status["n_measurements"], 1);
    // The reviewer's queue has it.
    let mut reviewer = app.login_as(Role::Reviewer).await;
    let queue = reviewer.get("/review").await;
    assert!(queue.body.contains(&format!("/submissions/{id}")), "queue");
}

#[tokio::test]
async fn the_api_lists_every_invalid_field_and_keeps_401_403_415_apart() {
    let app = spawn_demo_app().await;
    let member = app.create_account("script-member", Role::Member).await;
    let (submit, _) = app.make_token(member, "submit").await;
    let (read_only, _) = app.make_token(member, "read").await;
    let slug = some_slug(&app).await;
    let before = count(&app, "measurement").await;

    let bad = json!({
        "galaxy": slug,
        "measurements": [
            {"quantity": "bh_mass", "value": "-2e8", "method": "stellar_dynamics"},
            {"quantity": "sigma", "value": "210 ± 10", "sigma_definition": "sigma_e"},
            {"quantity": "bh_mass", "value": "2e8", "method": "teleportation"},
            {"quantity": "sigma", "value": "200", "colour": "blue"}
        ]
    });
    let (status, headers, problem) = post_api(&app, Some(&submit), Some("k1"), &bad).await;
    assert_eq!(status, 422, "{problem}");
    assert_eq!(headers["content-type"], "application/problem+json");
    let fields = crate::common::problem_fields(&problem);
    assert_eq!(
        fields,
        vec![
            "measurements[0].value",
            "measurements[2].method",
            "measurements[3].colour"
        ],
        "{problem}"
    );
    // Neither galaxy nor new_galaxy; an unknown slug.
    let (status, _, p) = post_api(
        &app,
        Some(&submit),
        Some("k2"),
        &json!({"measurements": []}),
    )
    .await;
    assert_eq!(status, 422);
    assert_eq!(p["errors"][0]["field"], "galaxy");
    let (status, _, p) = post_api(
        &app,
        Some(&submit),
        Some("k3"),
        &mass_body("no-such-galaxy", "2e8"),
    )
    .await;
    assert_eq!(status, 422);
    assert_eq!(p["errors"][0]["field"], "galaxy");
    // A new galaxy with a bad distance.
    let new = json!({
        "new_galaxy": {"name": "Tesk 1201", "morphology": "elliptical", "bulge_kind": "classical",
                       "centre_kind": "core", "distance_mpc": -5, "distance_err_mpc": 1,
                       "distance_method": "sbf"},
        "measurements": [{"quantity": "sigma", "value": "200 ± 10", "sigma_definition": "sigma_e"}]
    });
    let (status, _, p) = post_api(&app, Some(&submit), Some("k4"), &new).await;
    assert_eq!(status, 422, "{p}");
    assert_eq!(p["errors"][0]["field"], "new_galaxy.distance_mpc");
    // Unreadable JSON, a missing key, a bad key, not JSON.
    let (status, _, p) = post_api(&app, Some(&submit), Some("k5"), &json!([1, 2])).await;
    assert_eq!(status, 400, "{p}");
    let (status, _, p) = post_api(&app, Some(&submit), None, &mass_body(&slug, "2e8")).await;
    assert_eq!(status, 400);
    assert_eq!(p["errors"][0]["field"], "Idempotency-Key");
    let (status, _, _) = post_api(
        &app,
        Some(&submit),
        Some("has space"),
        &mass_body(&slug, "2e8"),
    )
    .await;
    assert_eq!(status, 400);
    let r = app
        .client
        .post(format!("{}/api/v1/submissions", app.address))
        .header("authorization", format!("Bearer {submit}"))
        .header("idempotency-key", "k6")
        .header("content-type", "text/plain")
        .body(mass_body(&slug, "2e8").to_string())
        .send()
        .await
        .unwrap();
    assert_eq!(r.status().as_u16(), 415);
    // No token 401, a read-only token 403, a browser session 403 (use the form).
    let (status, headers, _) = post_api(&app, None, Some("k7"), &mass_body(&slug, "2e8")).await;
    assert_eq!(status, 401);
    assert_eq!(headers["www-authenticate"], "Bearer");
    let (status, _, p) =
        post_api(&app, Some(&read_only), Some("k8"), &mass_body(&slug, "2e8")).await;
    assert_eq!(status, 403, "{p}");
    assert_eq!(
        count(&app, "measurement").await,
        before,
        "nothing was stored"
    );
    // A new galaxy that is valid is created with its submission.
    let good_new = json!({
        "new_galaxy": {"name": "Tesk 1202", "morphology": "elliptical", "bulge_kind": "classical",
                       "centre_kind": "core", "distance_mpc": "18.5", "distance_err_mpc": 1.2,
                       "distance_method": "sbf"},
        "measurements": [{"quantity": "sigma", "value": "200 ± 10", "sigma_definition": "sigma_e"}]
    });
    let (status, _, a) = post_api(&app, Some(&submit), Some("k9"), &good_new).await;
    assert_eq!(status, 201, "{a}");
    // Its replay finds the submission even though the galaxy now exists.
    let (status, _, b) = post_api(&app, Some(&submit), Some("k9"), &good_new).await;
    assert_eq!((status, &b["submission_id"]), (200, &a["submission_id"]));
}

#[tokio::test]
async fn the_same_form_posted_twice_stores_one_submission() {
    let app = spawn_demo_app().await;
    let mut member = app.login_as(Role::Member).await;
    let page = member.get("/submissions/new").await;
    let marker = "name=\"request_key\" value=\"";
    let at = page
        .body
        .find(marker)
        .expect("the form carries a request key")
        + marker.len();
    let key = page.body[at..].split('"').next().unwrap().to_owned();
    assert_eq!(key.len(), 64);
    let slug = some_slug(&app).await;
    let fields = [
        ("request_key", key.as_str()),
        ("galaxy", slug.as_str()),
        ("m0_quantity", "bh_mass"),
        ("m0_value", "2.2e8 ± 0.3e8"),
        ("m0_scale", "auto"),
        ("m0_method", "gas_dynamics"),
        ("m0_source_distance_mpc", "20"),
        ("action", "submit"),
    ];
    let before = count(&app, "submission").await;
    let first = member.post("/submissions/new", &fields).await;
    assert_eq!(first.status, 303, "{}", first.body);
    let second = member.post("/submissions/new", &fields).await;
    assert_eq!(second.status, 303);
    assert_eq!(first.header("location"), second.header("location"));
    assert_eq!(count(&app, "submission").await, before + 1);
    // A fresh form has a fresh key.
    let again = member.get("/submissions/new").await;
    assert!(!again.body.contains(&key));
    // The old page, edited after going back, and sent again: nothing stored, a fresh key and
    // the typed values come back.
    let mut edited = fields.to_vec();
    edited[3] = ("m0_value", "2.6e8 ± 0.3e8");
    let r = member.post("/submissions/new", &edited).await;
    assert_eq!(r.status, 409, "{}", r.body);
    assert!(r.body.contains("already submitted"));
    assert!(r.body.contains("value=\"2.6e8 ± 0.3e8\""));
    assert!(!r.body.contains(&key), "the form gets a fresh key");
    assert_eq!(count(&app, "submission").await, before + 1);
}

#[tokio::test]
async fn rows_can_be_added_and_the_placement_is_shown_before_submitting() {
    let app = spawn_demo_app().await;
    let mut member = app.login_as(Role::Member).await;
    let page = member.get("/submissions/new").await;
    assert!(page.body.contains("name=\"m2_value\""));
    assert!(!page.body.contains("name=\"m3_value\""));
    let before = count(&app, "submission").await;
    let galaxies_before = count(&app, "galaxy").await;
    // "Add a measurement row" keeps what was typed and stores nothing.
    let r = member
        .post(
            "/submissions/new",
            &[
                ("rows", "3"),
                ("m0_value", "kept 123"),
                ("action", "add_row"),
            ],
        )
        .await;
    assert_eq!(r.status, 200);
    assert!(r.body.contains("name=\"m3_value\""));
    assert!(r.body.contains("value=\"kept 123\""));
    // "Check against the relations": a galaxy far above M–σ (σ = 120 km/s with 5e9 M☉).
    let fields = [
        ("galaxy", ""),
        ("name", "Tesk 1301"),
        ("morphology", "elliptical"),
        ("bulge_kind", "classical"),
        ("centre_kind", "core"),
        ("distance_mpc", "20"),
        ("distance_err_mpc", "1"),
        ("distance_method", "sbf"),
        ("m0_quantity", "sigma"),
        ("m0_value", "120 ± 5"),
        ("m0_scale", "auto"),
        ("m0_sigma_definition", "sigma_e"),
        ("m1_quantity", "bh_mass"),
        ("m1_value", "5e9 ± 0.5e9"),
        ("m1_scale", "auto"),
        ("m1_method", "stellar_dynamics"),
        ("m1_source_distance_mpc", "20"),
        ("m1_resolution_arcsec", "0.1"),
        ("action", "check"),
    ];
    let r = member.post("/submissions/new", &fields).await;
    assert_eq!(r.status, 200, "{}", r.body);
    assert!(r.body.contains("id=\"preview\""));
    assert!(r.body.contains("id=\"place-m_sigma\""), "{}", r.body);
    // Invented values: 5e9 M☉ lies 2.7 dex above the demo M–σ fit at 120 km/s (computed from
    // α = 8.30, β = 5.99 of seed-data/README.md), far beyond |z| = 3 (docs/methods.md §6).
    assert!(
        r.body.contains("outlier"),
        "5e9 M☉ at 120 km/s is far off M–σ"
    );
    assert!(
        r.body.contains("value=\"Tesk 1301\""),
        "what was typed stays"
    );
    assert_eq!(
        count(&app, "submission").await,
        before,
        "checking stores nothing"
    );
    assert_eq!(count(&app, "galaxy").await, galaxies_before);
}

#[tokio::test]
async fn a_file_uploaded_twice_adds_nothing_and_the_json_export_is_stamped() {
    let app = spawn_demo_app().await;
    let mut member = app.login_as(Role::Member).await;
    member.get("/submissions/upload").await;
    let csv = "galaxy,morphology,bulge_kind,centre_kind,distance_mpc,distance_err_mpc,distance_method,quantity,value,scale,limit_confidence_sigma,method,sigma_definition,aperture,band,source_distance_mpc,resolution_arcsec,reference,note\n\
               Tesk 1401,elliptical,classical,core,20,1,sbf,sigma,210 ± 10,,,,sigma_e,r_e,,,,,\n\
               Tesk 1401,,,,,,,bh_mass,2e8 ± 3e7,,,stellar_dynamics,,,,20,0.1,,\n";
    let before = count(&app, "measurement").await;
    let r = member
        .post_file("/submissions/upload", &[], "file", "tesk.csv", csv)
        .await;
    assert_eq!(r.status, 200, "{}", r.body);
    assert!(
        r.body
            .contains("Imported 2 measurements as 1 pending submission (1 new galaxy)"),
        "{}",
        r.body
    );
    assert_eq!(count(&app, "measurement").await, before + 2);
    let r = member
        .post_file("/submissions/upload", &[], "file", "tesk.csv", csv)
        .await;
    assert_eq!(r.status, 200);
    assert!(r.body.contains("Imported 0 measurements"), "{}", r.body);
    assert!(
        r.body
            .contains("2 rows already in the catalog were skipped")
    );
    assert_eq!(count(&app, "measurement").await, before + 2);
    // A file without this session's anti-forgery token is refused, nothing written.
    let other = csv.replace("Tesk 1401", "Tesk 1402");
    let token = std::mem::replace(&mut member.csrf, "0".repeat(64));
    let r = member
        .post_file("/submissions/upload", &[], "file", "other.csv", &other)
        .await;
    assert_eq!(r.status, 403);
    member.csrf = token;
    assert_eq!(count(&app, "measurement").await, before + 2);

    // The JSON export carries the catalog version, and so does its header.
    let r = app
        .client
        .get(format!("{}/catalog.json", app.address))
        .send()
        .await
        .unwrap();
    assert_eq!(r.status(), 200);
    let version = r.headers()["catalog-version"].to_str().unwrap().to_owned();
    let doc: Value = r.json().await.unwrap();
    assert_eq!(doc["catalog_version"].to_string(), version);
    assert_eq!(
        doc["rows"].as_array().unwrap().len() as i64,
        count(&app, "adopted_value").await
    );
}

#[tokio::test]
async fn a_null_cell_bare_log_mass_and_formula_band_are_named_with_what_to_send() {
    let app = spawn_demo_app().await;
    let member = app.create_account("script-member2", Role::Member).await;
    let (token, _) = app.make_token(member, "read submit").await;
    let body = json!({
        "new_galaxy": {
            "name": "X 214", "morphology": "elliptical", "bulge_kind": "classical",
            "centre_kind": "core", "distance_mpc": null, "distance_err_mpc": 1,
            "distance_method": "sbf"
        },
        "measurements": [
            {"quantity": "bh_mass", "value": "9.51", "method": "stellar_dynamics"},
            {"quantity": "bulge_luminosity", "value": "2e10 ± 0.4e10", "band": "=1+1"},
            {"quantity": "sigma", "value": "210 ± 10", "sigma_definition": "sigma_e",
             "reference": null}
        ]
    });
    let before = count(&app, "measurement").await;
    let (status, _, answer) = post_api(&app, Some(&token), Some("nulls-1"), &body).await;
    assert_eq!(status, 422, "{answer}");
    let errors = answer["errors"].as_array().unwrap();
    let message_of = |field: &str| -> String {
        let hits: Vec<&Value> = errors.iter().filter(|e| e["field"] == field).collect();
        assert_eq!(hits.len(), 1, "{field} in {answer}");
        hits[0]["message"].as_str().unwrap().to_owned()
    };
    let null = message_of("new_galaxy.distance_mpc");
    assert!(
        null.contains("null is not a value") && null.contains("16.5"),
        "{null}"
    );
    assert!(!null.contains("untagged"), "{null}");
    let optional = message_of("measurements[2].reference");
    assert!(optional.contains("leave the field out"), "{optional}");
    let mass = message_of("measurements[0].value");
    assert!(
        mass.contains("log10 = 9.51") && mass.contains("“log10”"),
        "{mass}"
    );
    let band = message_of("measurements[1].band");
    assert!(
        band.contains("not a band name") && band.contains("such as K"),
        "{band}"
    );
    assert_eq!(count(&app, "measurement").await, before);
}
