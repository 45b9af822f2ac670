//! The JSON API under /api/v1: every endpoint for each kind of caller, entity tags and 304,
//! batch and body limits, the shape of every error (RFC 9457 problem details), 401 against
//! 403, the API rate (429 with Retry-After), the OpenAPI document against the route
//! table, and the numbers against the fits they come from.

use std::collections::BTreeSet;

use massline::auth::Role;
use massline::catalog::accounts;
use reqwest::header::{CONTENT_TYPE, ETAG, IF_NONE_MATCH, RETRY_AFTER, WWW_AUTHENTICATE};
use serde_json::{Value, json};

use crate::helpers::{Reply, TestApp, spawn_with};

/// A private demo app (nothing without credentials), as deployed by default.
async fn private_demo() -> TestApp {
    spawn_with(|s| s.demo = true).await
}

/// A token of a new account with `role` and `scopes`.
async fn token(app: &TestApp, name: &str, role: Role, scopes: &str) -> String {
    let id = app.create_account(name, role).await;
    app.make_token(id, scopes).await.0
}

async fn finish(r: reqwest::Response) -> Reply {
    Reply {
        status: r.status().as_u16(),
        headers: r.headers().clone(),
        body: r.text().await.unwrap(),
    }
}

async fn get(app: &TestApp, path: &str, token: Option<&str>) -> Reply {
    let mut req = app.client.get(format!("{}{path}", app.address));
    if let Some(t) = token {
        req = req.bearer_auth(t);
    }
    finish(req.send().await.unwrap()).await
}

async fn post_json(app: &TestApp, path: &str, token: Option<&str>, body: &Value) -> Reply {
    let mut req = app.client.post(format!("{}{path}", app.address)).json(body);
    if let Some(t) = token {
        req = req.bearer_auth(t);
    }
    finish(req.send().await.unwrap()).await
}

async fn post_raw(app: &TestApp, path: &str, token: &str, ctype: &str, body: Vec<u8>) -> Reply {
    let r = app
        .client
        .post(format!("{}{path}", app.address))
        .bearer_auth(token)
        .header(CONTENT_TYPE, ctype)
        .body(body)
        .send()
        .await
        .unwrap();
    finish(r).await
}

async fn a_slug(app: &TestApp) -> String {
    sqlx::query_scalar("select slug from galaxy order by galaxy_id limit 1")
        .fetch_one(&app.pool)
        .await
        .unwrap()
}

#[tokio::test]
async fn the_openapi_document_lists_every_api_route_with_its_method_and_nothing_else() {
    let app = private_demo().await;
    // Public: no token needed.
    let doc = get(&app, "/api/v1/openapi.json", None).await;
    assert_eq!(doc.status, 200, "{}", doc.body);
    let doc = doc.json();
    assert_eq!(doc["openapi"], "3.1.0");
    let mut documented = BTreeSet::new();
    for (path, item) in doc["paths"].as_object().unwrap() {
        for method in item.as_object().unwrap().keys() {
            if ["get", "post", "put", "patch", "delete"].contains(&method.as_str()) {
                documented.insert((method.to_uppercase(), path.clone()));
            }
        }
    }
    let served: BTreeSet<(String, String)> = massline::startup::route_table()
        .into_iter()
        .filter(|r| r.path.starts_with("/api/v1/"))
        .map(|r| (r.method.to_string(), r.path.to_owned()))
        .collect();
    assert_eq!(
        served, documented,
        "routes under /api/v1 and the OpenAPI paths differ"
    );
    // Every operation documents its error answers as problems.
    for (path, item) in doc["paths"].as_object().unwrap() {
        for (method, op) in item.as_object().unwrap() {
            for (status, response) in op["responses"].as_object().unwrap() {
                if status.starts_with('4') {
                    assert!(
                        response["content"]["application/problem+json"].is_object(),
                        "{method} {path} {status} is not documented as a problem"
                    );
                }
            }
        }
    }
}

#[tokio::test]
async fn each_kind_of_caller_gets_what_its_credentials_allow() {
    let app = private_demo().await;
    let slug = a_slug(&app).await;
    let read = token(&app, "reader", Role::Member, "read").await;
    let submit = token(&app, "submitter", Role::Member, "submit").await;
    let reviewer = token(&app, "checker", Role::Reviewer, "read submit").await;
    let admin = token(&app, "keeper", Role::Admin, "read").await;
    let owner = app.create_account("revoker", Role::Member).await;
    let (revoked, revoked_id) = app.make_token(owner, "read").await;
    assert!(
        accounts::revoke_token(&app.pool, owner, revoked_id)
            .await
            .unwrap()
    );

    let reads = [
        "/api/v1/relations".to_owned(),
        "/api/v1/relations/m_sigma".to_owned(),
        "/api/v1/place?sigma=200".to_owned(),
        "/api/v1/galaxies".to_owned(),
        format!("/api/v1/galaxies/{slug}"),
        "/api/v1/catalog.csv".to_owned(),
        "/api/v1/catalog.json".to_owned(),
    ];
    for path in &reads {
        // Nobody: 401 with a Bearer challenge.
        let a = get(&app, path, None).await;
        a.problem(401);
        assert_eq!(a.header(WWW_AUTHENTICATE), "Bearer", "{path}");
        // A revoked or malformed token: 401, never treated as anonymous.
        get(&app, path, Some(&revoked)).await.problem(401);
        get(&app, path, Some("ml_nonsense")).await.problem(401);
        // A valid token without the read scope: 403, not 401.
        let p = get(&app, path, Some(&submit)).await.problem(403);
        assert!(p["detail"].as_str().unwrap().contains("not allowed"), "{p}");
        // Read scope, any role: 200.
        for t in [&read, &reviewer, &admin] {
            let a = get(&app, path, Some(t)).await;
            assert_eq!(a.status, 200, "{path}: {}", a.body);
        }
    }
    // /me answers any valid token, with the token's scopes.
    let me = get(&app, "/api/v1/me", Some(&submit)).await;
    assert_eq!(me.status, 200);
    assert_eq!(
        me.json(),
        json!({"username": "submitter", "role": "member", "scopes": ["submit"]})
    );
    let me = get(&app, "/api/v1/me", Some(&reviewer)).await.json();
    assert_eq!(me["role"], "reviewer");

    // POST endpoints: a token with read; without it 403; nobody 401.
    let batch = json!([{"sigma": "200 ± 10"}]);
    let fit = json!({"points": [
        {"x": 2.0, "x_err": 0.02, "y": 7.1, "y_err": 0.1},
        {"x": 2.2, "x_err": 0.02, "y": 8.0, "y_err": 0.1},
        {"x": 2.4, "x_err": 0.02, "y": 9.1, "y_err": 0.1},
        {"x": 2.5, "x_err": 0.02, "y": 9.4, "y_err": 0.1}],
        "method": "bces-yx"});
    for (path, body) in [("/api/v1/place", &batch), ("/api/v1/fit", &fit)] {
        post_json(&app, path, None, body).await.problem(401);
        post_json(&app, path, Some(&submit), body)
            .await
            .problem(403);
        let a = post_json(&app, path, Some(&read), body).await;
        assert_eq!(a.status, 200, "{path}: {}", a.body);
    }

    // A browser session reads too, and posts JSON with its anti-forgery token in a header.
    let mut browser = app.login_as(Role::Member).await;
    let r = browser.get("/api/v1/relations/m_sigma").await;
    assert_eq!(r.status, 200, "{}", r.body);
    let session = browser.cookies.get("ml_session").unwrap().clone();
    let csrf = browser.csrf.clone();
    assert!(!csrf.is_empty());
    let send = |with_token: bool| {
        let mut req = app
            .client
            .post(format!("{}/api/v1/place", app.address))
            .header("cookie", format!("ml_session={session}"))
            .json(&batch);
        if with_token {
            req = req.header("x-csrf-token", csrf.clone());
        }
        req.send()
    };
    let with = finish(send(true).await.unwrap()).await;
    assert_eq!(with.status, 200, "{}", with.body);
    // Without it the session's request is refused (a cookie alone proves nothing).
    finish(send(false).await.unwrap()).await.problem(403);
}

#[tokio::test]
async fn a_fit_carries_an_etag_and_an_unchanged_fit_answers_304() {
    let app = private_demo().await;
    let t = token(&app, "reader", Role::Member, "read").await;
    let first = get(&app, "/api/v1/relations/m_sigma", Some(&t)).await;
    assert_eq!(first.status, 200);
    let etag = first.header(ETAG);
    assert!(etag.starts_with("\"v1-"), "{etag}");
    let again = app
        .client
        .get(format!("{}/api/v1/relations/m_sigma", app.address))
        .bearer_auth(&t)
        .header(IF_NONE_MATCH, &etag)
        .send()
        .await
        .unwrap();
    let again = finish(again).await;
    assert_eq!(again.status, 304);
    assert!(again.body.is_empty());
    assert_eq!(again.header(ETAG), etag);
    // Other settings, another tag.
    let other = get(
        &app,
        "/api/v1/relations/m_sigma?method=conditional",
        Some(&t),
    )
    .await;
    assert_ne!(other.header(ETAG), etag);
    assert_eq!(other.json()["estimator"], "conditional");
    // A new catalog version: the old tag no longer matches, and the fit is redone.
    let mut tx = massline::catalog::begin_write(&app.pool).await.unwrap();
    massline::catalog::history::bump_version(&mut tx)
        .await
        .unwrap();
    tx.commit().await.unwrap();
    let after = app
        .client
        .get(format!("{}/api/v1/relations/m_sigma", app.address))
        .bearer_auth(&t)
        .header(IF_NONE_MATCH, &etag)
        .send()
        .await
        .unwrap();
    let after = finish(after).await;
    assert_eq!(after.status, 200);
    assert!(after.header(ETAG).starts_with("\"v2-"));
    assert_eq!(after.json()["catalog_version"], 2);
}

#[tokio::test]
async fn a_fit_answer_has_its_parameters_covariance_counts_and_time() {
    let app = private_demo().await;
    let t = token(&app, "reader", Role::Member, "read").await;
    let v = get(
        &app,
        "/api/v1/relations/m_sigma_mbulge?limits=exclude&pivot=2.3",
        Some(&t),
    )
    .await
    .json();
    assert_eq!(v["relation"], "m_sigma_mbulge");
    assert_eq!(v["sample_filter"]["limits"], "exclude");
    assert_eq!(v["n_limits"], 0);
    assert!((v["pivot_log"].as_f64().unwrap() - 2.3).abs() < 1e-12);
    assert_eq!(v["pivot2_log"], 11.0);
    let fit = &v["fit"];
    assert!(fit["gamma"].is_number(), "{v}");
    assert_eq!(
        fit["covariance"]["names"],
        json!(["alpha", "beta", "gamma", "eps"])
    );
    // RFC 3339 UTC.
    let t_text = v["fitted_at"].as_str().unwrap();
    assert!(
        time::OffsetDateTime::parse(t_text, &time::format_description::well_known::Rfc3339).is_ok()
            && t_text.ends_with('Z'),
        "{t_text}"
    );
    // An estimator asked to use limits it cannot take says why instead of failing.
    let v = get(
        &app,
        "/api/v1/relations/m_sigma?method=fitexy&limits=include",
        Some(&t),
    )
    .await;
    assert_eq!(v.status, 200);
    let v = v.json();
    assert!(v["fit"].is_null() && v["problem"].is_string(), "{v}");
    // Bad parameters: 422, one field error each.
    let p = get(
        &app,
        "/api/v1/relations/m_sigma?method=ols&soi=maybe",
        Some(&t),
    )
    .await
    .problem(422);
    let fields = crate::common::problem_fields(&p);
    assert_eq!(fields, ["method", "soi"]);
    get(&app, "/api/v1/relations/m_nothing", Some(&t))
        .await
        .problem(404);
}

#[tokio::test]
async fn placing_one_object_gives_the_prediction_of_the_fit_it_names() {
    let app = private_demo().await;
    let t = token(&app, "reader", Role::Member, "read").await;
    let fit = get(&app, "/api/v1/relations/m_sigma", Some(&t))
        .await
        .json();
    let f = &fit["fit"];
    let (alpha, beta, eps) = (
        f["alpha_log_mbh"].as_f64().unwrap(),
        f["beta"].as_f64().unwrap(),
        f["scatter_dex"].as_f64().unwrap(),
    );
    // The values to quote sit beside the ML ones: restricted likelihood, ε at least the ML ε.
    assert_eq!(f["intervals"]["kind"], "restricted", "{f}");
    let quoted_eps = f["intervals"]["params"]
        .as_array()
        .unwrap()
        .iter()
        .find(|p| p["name"] == "eps")
        .and_then(|p| p["estimate"].as_f64())
        .unwrap();
    assert!(
        quoted_eps >= eps && quoted_eps < eps + 0.1,
        "{quoted_eps} vs {eps}"
    );
    let c = &f["covariance"]["matrix"];
    let cov = |i: usize, j: usize| c[i][j].as_f64().unwrap();
    // σ = 250 ± 10 km/s and a mass of 10^9 ± 10^8 M☉ with a distance and resolution.
    let a = get(
        &app,
        "/api/v1/place?sigma=250+%C2%B1+10&mass=1e9+%C2%B1+1e8&distance=20&resolution=0.1",
        Some(&t),
    )
    .await;
    assert_eq!(a.status, 200, "{}", a.body);
    let v = a.json();
    assert_eq!(v["catalog_version"], fit["catalog_version"]);
    let rows = v["object"]["relations"].as_array().unwrap();
    assert_eq!(rows.len(), 1, "only M–σ can use σ alone: {v}");
    let r = &rows[0];
    assert_eq!(r["relation"], "m_sigma");
    // ŷ = α + β d, s_pred² = ε² + Var α + d² Var β + 2 d Cov(α, β) + β² σ_x² with the quoted
    // ε (computed from the prediction formula, docs/methods.md §6 and §2.8).
    let x = 250f64.log10();
    let x_err = r["x_err_dex"].as_f64().unwrap();
    let d = x - massline::relations::SIGMA_PIVOT_LOG;
    let y_hat = alpha + beta * d;
    let s2 = quoted_eps * quoted_eps
        + cov(0, 0)
        + d * d * cov(1, 1)
        + 2.0 * d * cov(0, 1)
        + beta * beta * x_err * x_err;
    assert!((r["x_log"].as_f64().unwrap() - x).abs() < 1e-9);
    assert!(
        (r["predicted_log_mbh"].as_f64().unwrap() - y_hat).abs() < 1e-9,
        "{r}"
    );
    assert!(
        (r["prediction_sd_dex"].as_f64().unwrap() - s2.sqrt()).abs() < 1e-9,
        "{r}"
    );
    let lo95 = r["interval95_low_log_mbh"].as_f64().unwrap();
    // 1.959964: the standard normal 97.5 % quantile (docs/methods.md §6).
    assert!((lo95 - (y_hat - 1.959_964 * s2.sqrt())).abs() < 1e-5);
    // z = r / √(s_pred² + σ_y²) (docs/methods.md §6) with the mass error in dex, the mean of
    // u and l (docs/methods.md §2.5 option 1).
    let y_err = (((1.1e9f64).log10() - 9.0) + (9.0 - (0.9e9f64).log10())) / 2.0;
    let z = (9.0 - y_hat) / (s2 + y_err * y_err).sqrt();
    assert!((r["z"].as_f64().unwrap() - z).abs() < 1e-6, "{r} vs {z}");
    assert!((r["residual_dex"].as_f64().unwrap() - (9.0 - y_hat)).abs() < 1e-9);
    // Verdict thresholds |z| ≥ 3 outlier, ≥ 2 in tension (common practice, docs/methods.md §6).
    let verdict = if z.abs() >= 3.0 {
        "outlier"
    } else if z.abs() >= 2.0 {
        "in tension"
    } else {
        "consistent"
    };
    assert_eq!(r["verdict"], verdict);
    assert!(r["prob_below_limit"].is_null());
    // The sphere of influence: r_infl = G M / σ² (docs/methods.md §3.1; 68.81 pc for 10^9 M☉ at
    // 250 km/s, computed from G = 4.3009e-3 pc M☉⁻¹ (km/s)², and θ = r / D with
    // 206 264.806″ per radian). G is rounded from 4.30091727e-3 (docs/methods.md §5); the
    // 0.1 pc tolerance covers the rounding.
    let soi = &v["object"]["sphere_of_influence"];
    let radius = soi["radius_pc"].as_f64().unwrap();
    assert!(
        (radius - 4.3009e-3 * 1e9 / 250f64.powi(2)).abs() < 0.1,
        "{soi}"
    );
    let theta = radius / 20e6 * 206_264.806;
    assert!(
        (soi["theta_arcsec"].as_f64().unwrap() - theta).abs() < 1e-3,
        "{soi}"
    );
    assert!((soi["ratio"].as_f64().unwrap() - theta / 0.1).abs() < 1e-2);

    // An upper limit far above the line: P(true below) near 1.
    let v = get(&app, "/api/v1/place?sigma=200&mass=%3C1e11", Some(&t))
        .await
        .json();
    let r = &v["object"]["relations"][0];
    assert!(r["prob_below_limit"].as_f64().unwrap() > 0.99, "{r}");
    assert_eq!(r["verdict"], "consistent");
    // The same numbers as the place page shows for the same query (rounded there to 0.01).
    let mut browser = app.login_as(Role::Member).await;
    let page = browser.get("/place?sigma=200&mass=%3C1e11").await;
    assert_eq!(page.status, 200);
    let shown = page
        .body
        .split("class=\"num predicted\">")
        .nth(1)
        .and_then(|rest| rest.split(' ').next())
        .unwrap()
        .replace('−', "-");
    let predicted = r["predicted_log_mbh"].as_f64().unwrap();
    assert_eq!(shown, format!("{predicted:.2}"), "page and API differ");
    // Nothing usable: an answer with a note, not an error.
    let v = get(&app, "/api/v1/place?distance=20", Some(&t))
        .await
        .json();
    assert!(v["object"]["relations"].as_array().unwrap().is_empty());
    assert!(
        v["object"]["note"]
            .as_str()
            .unwrap()
            .contains("No relation")
    );
    // Bad values: 422 naming each field; unknown parameters too.
    let p = get(
        &app,
        "/api/v1/place?sigma=fast&mass=9.5&colour=red",
        Some(&t),
    )
    .await
    .problem(422);
    let fields = crate::common::problem_fields(&p);
    assert_eq!(fields, ["colour", "sigma", "mass"], "{p}");
}

#[tokio::test]
async fn a_batch_is_answered_in_order_and_limited_to_ten_thousand_objects() {
    let app = private_demo().await;
    let t = token(&app, "reader", Role::Member, "read").await;
    let single = get(&app, "/api/v1/place?sigma=180&bulge_mass=1e11", Some(&t))
        .await
        .json();
    let batch = json!([
        {"sigma": "180", "bulge_mass": "1e11"},
        {"bulge_mass": "3e10 ± 10%", "mass": "<1e7"},
        {}
    ]);
    let a = post_json(&app, "/api/v1/place", Some(&t), &batch).await;
    assert_eq!(a.status, 200, "{}", a.body);
    let v = a.json();
    let objects = v["objects"].as_array().unwrap();
    assert_eq!(objects.len(), 3);
    // The first object is answered exactly as the single endpoint answers it.
    assert_eq!(objects[0], single["object"]);
    let slugs: Vec<&str> = objects[0]["relations"]
        .as_array()
        .unwrap()
        .iter()
        .map(|r| r["relation"].as_str().unwrap())
        .collect();
    assert_eq!(slugs, ["m_sigma", "m_mbulge", "m_sigma_mbulge"]);
    assert_eq!(objects[1]["relations"][0]["relation"], "m_mbulge");
    assert!(objects[1]["relations"][0]["prob_below_limit"].is_number());
    assert!(objects[2]["relations"].as_array().unwrap().is_empty());

    // Any invalid value: 422 naming the object and field; nothing is placed.
    let p = post_json(
        &app,
        "/api/v1/place",
        Some(&t),
        &json!([{"sigma": "200"}, {"sigma": "-5"}, {"luminosity": "1e10"}]),
    )
    .await
    .problem(422);
    let fields = crate::common::problem_fields(&p);
    assert_eq!(fields, ["[1].sigma", "[2].band"], "{p}");
    // A key that is not a field: 422 naming it.
    let p = post_json(
        &app,
        "/api/v1/place",
        Some(&t),
        &json!([{"sigma": "200", "colour": "red"}]),
    )
    .await
    .problem(422);
    assert!(
        p["errors"][0]["message"]
            .as_str()
            .unwrap()
            .contains("colour"),
        "{p}"
    );

    // 10,000 objects are placed; 10,001 are refused with 413.
    let many: Vec<Value> = (0..10_000).map(|_| json!({"sigma": "200"})).collect();
    let a = post_json(&app, "/api/v1/place", Some(&t), &Value::Array(many.clone())).await;
    assert_eq!(a.status, 200);
    assert_eq!(a.json()["objects"].as_array().unwrap().len(), 10_000);
    let mut too_many = many;
    too_many.push(json!({}));
    let p = post_json(&app, "/api/v1/place", Some(&t), &Value::Array(too_many))
        .await
        .problem(413);
    assert!(p["detail"].as_str().unwrap().contains("10001"), "{p}");
    // A body beyond 4 MB: 413 as problem+json, whatever it holds.
    let big = vec![b' '; 4 * 1024 * 1024 + 1];
    post_raw(&app, "/api/v1/place", &t, "application/json", big)
        .await
        .problem(413);
}

#[tokio::test]
async fn unreadable_and_misshapen_bodies_and_unknown_endpoints_are_problems() {
    let app = private_demo().await;
    let t = token(&app, "reader", Role::Member, "read").await;
    // Not JSON at all: 400.
    let p = post_raw(
        &app,
        "/api/v1/fit",
        &t,
        "application/json",
        b"{\"points\": [".to_vec(),
    )
    .await
    .problem(400);
    assert!(p.get("errors").is_none());
    // Not sent as JSON: 415.
    post_raw(&app, "/api/v1/fit", &t, "text/plain", b"{}".to_vec())
        .await
        .problem(415);
    // JSON of the wrong shape: 422 naming the field.
    let p = post_json(
        &app,
        "/api/v1/fit",
        Some(&t),
        &json!({"points": [{"x": "two"}]}),
    )
    .await
    .problem(422);
    assert!(
        p["errors"][0]["field"]
            .as_str()
            .unwrap()
            .starts_with("points[0]"),
        "{p}"
    );
    // No such endpoint, or a method it does not answer.
    get(&app, "/api/v1/nothing-here", Some(&t))
        .await
        .problem(404);
    let a = finish(
        app.client
            .delete(format!("{}/api/v1/relations", app.address))
            .bearer_auth(&t)
            .send()
            .await
            .unwrap(),
    )
    .await;
    a.problem(405);
    assert!(a.header("allow").contains("GET"));
    // A galaxy that does not exist.
    get(&app, "/api/v1/galaxies/no-such-galaxy", Some(&t))
        .await
        .problem(404);
}

#[tokio::test]
async fn a_posted_sample_is_fitted_with_the_estimator_asked() {
    let app = private_demo().await;
    let t = token(&app, "reader", Role::Member, "read").await;
    // Points on y = 8.2 + 4.0 (x − 2.3) with alternating offsets of ±0.1 dex (invented): the
    // BCES Y|X line through symmetric offsets is the line itself.
    let points: Vec<Value> = (0..40)
        .map(|i| {
            let x = 1.9 + 0.02 * f64::from(i);
            let off = if i % 2 == 0 { 0.1 } else { -0.1 };
            json!({"x": x, "x_err": 0.0, "y": 8.2 + 4.0 * (x - 2.3) + off, "y_err": 0.1})
        })
        .collect();
    let v = post_json(
        &app,
        "/api/v1/fit",
        Some(&t),
        &json!({"points": points, "method": "bces-yx", "pivot": 2.3}),
    )
    .await;
    assert_eq!(v.status, 200, "{}", v.body);
    let v = v.json();
    assert_eq!(v["estimator"], "bces-yx");
    assert_eq!(v["pivot_rule"], "given");
    assert!(
        (v["fit"]["alpha_log_mbh"].as_f64().unwrap() - 8.2).abs() < 0.01,
        "{v}"
    );
    assert!(
        (v["fit"]["beta"].as_f64().unwrap() - 4.0).abs() < 0.05,
        "{v}"
    );
    assert_eq!(v["fit"]["n"], 40);
    // With a bootstrap; the default pivot rule picks log10 200 for σ-like x.
    let v = post_json(
        &app,
        "/api/v1/fit",
        Some(&t),
        &json!({"points": points, "method": "conditional", "bootstrap": 200, "seed": 3}),
    )
    .await
    .json();
    assert!((v["pivot"].as_f64().unwrap() - massline::relations::SIGMA_PIVOT_LOG).abs() < 1e-12);
    assert_eq!(v["bootstrap"]["n_boot"], 200);
    assert_eq!(v["bootstrap"]["params"][1]["name"], "beta");
    // Settings out of range, and a sample an estimator cannot take: 422 naming the field.
    let p = post_json(
        &app,
        "/api/v1/fit",
        Some(&t),
        &json!({"points": points, "bootstrap": 7, "posterior_steps": 1}),
    )
    .await
    .problem(422);
    assert_eq!(p["errors"].as_array().unwrap().len(), 2, "{p}");
    let mut with_limit = points.clone();
    with_limit[0]["upper_limit"] = json!(true);
    let p = post_json(
        &app,
        "/api/v1/fit",
        Some(&t),
        &json!({"points": with_limit, "method": "fitexy"}),
    )
    .await
    .problem(422);
    assert!(p["detail"].as_str().is_some(), "{p}");
    // More than 100,000 points: 413.
    let many: Vec<Value> = (0..100_001)
        .map(|_| json!({"x": 2.0, "x_err": 0.1, "y": 8.0, "y_err": 0.1}))
        .collect();
    post_json(&app, "/api/v1/fit", Some(&t), &json!({"points": many}))
        .await
        .problem(413);
}

#[tokio::test]
async fn a_posted_sample_takes_the_pivot_of_its_x_quantity_or_is_warned_of_the_inferred_one() {
    let app = private_demo().await;
    let t = token(&app, "reader", Role::Member, "read").await;
    // Invented σ-like points (log σ 1.9–2.68, median 2.29) on y = 8.2 + 4.0 (x − 2.3) ± 0.1 dex.
    let points: Vec<Value> = (0..40)
        .map(|i| {
            let x = 1.9 + 0.02 * f64::from(i);
            let off = if i % 2 == 0 { 0.1 } else { -0.1 };
            json!({"x": x, "x_err": 0.0, "y": 8.2 + 4.0 * (x - 2.3) + off, "y_err": 0.1})
        })
        .collect();
    let fit = |body: Value| {
        let (app, t) = (&app, &t);
        async move { post_json(app, "/api/v1/fit", Some(t), &body).await }
    };
    let sigma = massline::relations::SIGMA_PIVOT_LOG;
    // Named quantities: their conventions (log10 200 km/s; 10^11 M☉; 10^11 L☉), no warning.
    for (word, x0) in [("sigma", sigma), ("mass", 11.0), ("luminosity", 11.0)] {
        let v = fit(json!({"points": points, "method": "bces-yx", "x_quantity": word})).await;
        assert_eq!(v.status, 200, "{}", v.body);
        let v = v.json();
        assert!(
            (v["pivot"].as_f64().unwrap() - x0).abs() < 1e-12,
            "{word}: {v}"
        );
        assert_eq!(v["warnings"], json!([]), "{word}: {v}");
    }
    // Unnamed: inferred from the median, with a warning in the API's own words.
    let v = fit(json!({"points": points, "method": "bces-yx"}))
        .await
        .json();
    assert!((v["pivot"].as_f64().unwrap() - sigma).abs() < 1e-12, "{v}");
    let w = v["warnings"][0].as_str().unwrap();
    assert!(
        w.contains("x0 = 2.30103") && w.contains(r#""x_quantity": "sigma""#),
        "{w}"
    );
    assert!(
        !w.contains("--"),
        "the API names its fields, not flags: {w}"
    );
    // other: the median 2.29 rounded to 0.5 is 2.5 (computed), with a warning.
    let v = fit(json!({"points": points, "method": "bces-yx", "x_quantity": "other"}))
        .await
        .json();
    assert!((v["pivot"].as_f64().unwrap() - 2.5).abs() < 1e-12, "{v}");
    assert!(
        v["warnings"][0]
            .as_str()
            .unwrap()
            .contains(r#""x_quantity": "other""#),
        "{v}"
    );
    // A pivot wins over the quantity, with no warning.
    let v = fit(json!({"points": points, "method": "bces-yx", "x_quantity": "mass", "pivot": 2.3}))
        .await
        .json();
    assert!((v["pivot"].as_f64().unwrap() - 2.3).abs() < 1e-12, "{v}");
    assert_eq!(
        (v["pivot_rule"].as_str(), v["warnings"].clone()),
        (Some("given"), json!([]))
    );
    // An unknown word: 422 naming the field, with the sentence listing the words.
    let p = fit(json!({"points": points, "x_quantity": "velocity"}))
        .await
        .problem(422);
    assert_eq!(p["errors"][0]["field"], "x_quantity", "{p}");
    let m = p["errors"][0]["message"].as_str().unwrap();
    for word in ["'velocity'", "sigma", "mass", "luminosity", "other"] {
        assert!(m.contains(word), "{word}: {p}");
    }
    // The OpenAPI document lists the words.
    let doc: Value = serde_json::from_str(&app.ok("/api/v1/openapi.json").await).unwrap();
    let field = &doc["components"]["schemas"]["FitRequest"]["properties"]["x_quantity"];
    assert_eq!(
        field["enum"],
        json!(["sigma", "mass", "luminosity", "other"]),
        "{field}"
    );
    assert!(
        field["description"].as_str().unwrap().contains("2.30103"),
        "{field}"
    );
}

#[tokio::test]
async fn galaxies_are_listed_as_the_table_lists_them_and_shown_with_their_measurements() {
    let app = private_demo().await;
    let t = token(&app, "reader", Role::Member, "read").await;
    let n: i64 = sqlx::query_scalar("select count(*) from galaxy")
        .fetch_one(&app.pool)
        .await
        .unwrap();
    let v = get(&app, "/api/v1/galaxies?per_page=10&page=2", Some(&t))
        .await
        .json();
    assert_eq!(v["total"], n);
    assert_eq!(v["galaxies"].as_array().unwrap().len(), 10);
    assert_eq!(v["pages"], (n + 9) / 10);
    // Filters: only upper limits, sorted by σ descending.
    let v = get(
        &app,
        "/api/v1/galaxies?limits=limits&sort=sigma&dir=desc&per_page=500",
        Some(&t),
    )
    .await
    .json();
    let rows = v["galaxies"].as_array().unwrap();
    assert!(!rows.is_empty());
    assert!(rows.iter().all(|r| r["mbh_upper_limit"] == true));
    let sigmas: Vec<f64> = rows
        .iter()
        .filter_map(|r| r["sigma_km_s"].as_f64())
        .collect();
    assert!(sigmas.windows(2).all(|w| w[0] >= w[1]), "{sigmas:?}");
    // A page past the end is empty, not an error.
    let v = get(&app, "/api/v1/galaxies?page=999", Some(&t))
        .await
        .json();
    assert!(v["galaxies"].as_array().unwrap().is_empty());
    get(&app, "/api/v1/galaxies?per_page=501", Some(&t))
        .await
        .problem(422);

    let slug = a_slug(&app).await;
    let v = get(&app, &format!("/api/v1/galaxies/{slug}"), Some(&t))
        .await
        .json();
    let id: i64 = sqlx::query_scalar("select galaxy_id from galaxy where slug = ?")
        .bind(&slug)
        .fetch_one(&app.pool)
        .await
        .unwrap();
    let stored = massline::catalog::galaxies::measurements_of(&app.pool, id)
        .await
        .unwrap();
    assert_eq!(v["measurements"].as_array().unwrap().len(), stored.len());
    let adopted = stored.iter().filter(|m| m.adopted).count();
    assert_eq!(v["adopted"].as_array().unwrap().len(), adopted);
    assert_eq!(v["slug"], slug);
}

#[tokio::test]
async fn the_catalog_files_are_the_same_as_the_page_downloads() {
    let app = spawn_with(|s| {
        s.demo = true;
        s.public_read = true;
    })
    .await;
    let t = token(&app, "reader", Role::Member, "read").await;
    let api = get(&app, "/api/v1/catalog.csv", Some(&t)).await;
    assert_eq!(api.status, 200);
    assert_eq!(api.header("catalog-version"), "1");
    assert!(api.header(CONTENT_TYPE).starts_with("text/csv"));
    let page = app.ok("/catalog.csv").await;
    assert_eq!(api.body, page);
    // The JSON export: the same rows as the page's, stamped with the version.
    let api = get(&app, "/api/v1/catalog.json", Some(&t)).await;
    assert_eq!(api.status, 200);
    assert_eq!(api.header("catalog-version"), "1");
    let page: Value = serde_json::from_str(&app.ok("/catalog.json").await).unwrap();
    let v = api.json();
    assert_eq!(v["catalog_version"], 1);
    assert_eq!(v["rows"], page["rows"]);
    assert_eq!(
        v["rows"].as_array().unwrap().len(),
        app.ok("/catalog.csv").await.lines().count() - 1
    );
    // With public read, anonymous scripts read the API too (GET only).
    assert_eq!(get(&app, "/api/v1/relations", None).await.status, 200);
    post_json(&app, "/api/v1/place", None, &json!([]))
        .await
        .problem(403);
}

#[tokio::test]
async fn a_token_beyond_its_rate_gets_429_with_retry_after_until_the_bucket_refills() {
    let app = spawn_with(|s| {
        s.demo = true;
        s.api_rate_per_minute = 3;
    })
    .await;
    let t = token(&app, "busy", Role::Member, "read").await;
    let other = token(&app, "calm", Role::Member, "read").await;
    for _ in 0..3 {
        assert_eq!(get(&app, "/api/v1/me", Some(&t)).await.status, 200);
    }
    let a = get(&app, "/api/v1/relations", Some(&t)).await;
    let p = a.problem(429);
    // 3 a minute: one every 20 s.
    assert_eq!(a.header(RETRY_AFTER), "20", "{p}");
    // A token of another account has its own allowance.
    assert_eq!(get(&app, "/api/v1/me", Some(&other)).await.status, 200);
    app.clock.advance(20);
    assert_eq!(get(&app, "/api/v1/me", Some(&t)).await.status, 200);
    get(&app, "/api/v1/me", Some(&t)).await.problem(429);
}

#[tokio::test]
async fn the_api_page_lists_every_endpoint_with_curl_and_python_and_no_inline_script() {
    let app = private_demo().await;
    let body = app.ok("/api").await;
    for path in [
        "/api/v1/relations",
        "/api/v1/relations/{relation}",
        "/api/v1/place",
        "/api/v1/galaxies",
        "/api/v1/galaxies/{slug}",
        "/api/v1/fit",
        "/api/v1/catalog.csv",
        "/api/v1/catalog.json",
        "/api/v1/submissions",
        "/api/v1/submissions/{id}",
        "/api/v1/me",
        "/api/v1/openapi.json",
    ] {
        assert!(body.contains(path), "{path} is missing from /api");
    }
    assert!(body.matches("curl ").count() >= 13);
    assert!(body.matches("urllib.request").count() >= 13);
    assert!(!body.contains("<script"), "the CSP forbids inline script");
    assert!(body.contains("/static/massline.css"));
}

#[tokio::test]
async fn ten_thousand_bare_parameters_get_one_short_problem_that_stores_nothing_said() {
    let app = private_demo().await;
    let t = token(&app, "reader1", Role::Member, "read").await;
    let query = "a&".repeat(10_000);
    let r = get(&app, &format!("/api/v1/galaxies?{query}"), Some(&t)).await;
    assert_eq!(r.status, 422, "{}", &r.body[..r.body.len().min(500)]);
    assert!(r.body.len() < 2_000, "{} bytes", r.body.len());
    let v: Value = serde_json::from_str(&r.body).unwrap();
    assert_eq!(v["errors"].as_array().unwrap().len(), 1, "{v}");
    assert_eq!(v["errors"][0]["field"], "a");
    // A read is not told that nothing was stored.
    assert!(!v["detail"].as_str().unwrap().contains("stored"), "{v}");
    // Many distinct bad names: the first 100, then one entry counting the rest.
    let query: String = (0..300).map(|i| format!("p{i}=1&")).collect();
    let r = get(&app, &format!("/api/v1/galaxies?{query}"), Some(&t)).await;
    assert_eq!(r.status, 422);
    let v: Value = serde_json::from_str(&r.body).unwrap();
    let errors = v["errors"].as_array().unwrap();
    assert_eq!(errors.len(), 101, "{v}");
    assert!(
        errors[100]["message"]
            .as_str()
            .unwrap()
            .contains("200 more"),
        "{v}"
    );
}
