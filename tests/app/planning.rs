//! Planning observations through its doors (`/planning`, `/api/v1/planning`, `massline
//! plan`) on the invented demo catalog: the three give the same ranked numbers for the example
//! candidate file, every faulty row is named, the downloads carry the ranked rows in order,
//! and saved resolutions belong to their account alone.

use massline::auth::Role;
use massline::catalog::{accounts, resolutions};
use massline::cli::plan::{PlanArgs, PlanFormat};
use serde_json::{Value, json};

use crate::common::problem_fields;
use crate::helpers::{Browser, TEST_PASSWORD, TestApp, spawn_demo_app};

/// The example candidate file the page links.
const EXAMPLE: &str = include_str!("../../seed-data/planning/candidates.csv");

/// Asks the API for the plan of the example file until the default fits are ready (the
/// background analysis computes them after the demo loads; a plan made before says
/// `computing`).
async fn api_plan(app: &TestApp, body: &Value) -> Value {
    let token = reader(app).await;
    for _ in 0..120 {
        let r = app
            .client
            .post(format!("{}/api/v1/planning", app.address))
            .bearer_auth(&token)
            .json(body)
            .send()
            .await
            .unwrap();
        assert_eq!(r.status().as_u16(), 200);
        let v: Value = r.json().await.unwrap();
        if v["computing"].is_null() {
            return v;
        }
        tokio::time::sleep(std::time::Duration::from_millis(500)).await;
    }
    panic!("the default fits were never ready");
}

/// A token with the read scope (scripts may POST only with one, even with `--public-read`).
async fn reader(app: &TestApp) -> String {
    let name = format!("reader-{}", rand::random::<u32>());
    let id = app.create_account(&name, Role::Member).await;
    app.make_token(id, "read").await.0
}

fn request() -> Value {
    json!({
        "csv": EXAMPLE,
        "resolutions": [{"label": "AO K band", "arcsec": 0.1}, {"label": "seeing", "arcsec": 0.8}],
        "threshold": 1.0
    })
}

/// The page's fields for the same request.
fn form_fields() -> Vec<(&'static str, &'static str)> {
    vec![
        ("candidates", EXAMPLE),
        ("res_label", "AO K band"),
        ("res_arcsec", "0.1"),
        ("res_label", "seeing"),
        ("res_arcsec", "0.8"),
        ("threshold", "1"),
    ]
}

/// A probability as the page shows it (`web::display::probability`, HTML-escaped).
fn shown_probability(p: f64) -> String {
    if p > 0.999 {
        "&gt; 99.9 %".to_owned()
    } else if p < 0.001 {
        "&lt; 0.1 %".to_owned()
    } else {
        format!("{:.1} %", 100.0 * p)
    }
}

fn close(a: f64, b: f64) -> bool {
    (a - b).abs() <= 1e-9 * a.abs().max(1.0)
}

/// The numbers of a plan row in one list: medians, sd, intervals and every P (NaN for none).
fn numbers(row: &Value) -> Vec<f64> {
    let mut out = Vec::new();
    for key in ["log_mbh", "log_r_infl_pc", "log_theta_arcsec"] {
        let p = &row[key];
        for v in [
            &p["median"],
            &p["sd_dex"],
            &p["interval68"][0],
            &p["interval68"][1],
            &p["interval95"][0],
            &p["interval95"][1],
        ] {
            out.push(v.as_f64().unwrap_or(f64::NAN));
        }
    }
    for p in row["p_resolved"].as_array().unwrap() {
        out.push(p.as_f64().unwrap_or(f64::NAN));
    }
    out
}

fn same_rows(a: &Value, b: &Value, what: &str) {
    let (a, b) = (a["rows"].as_array().unwrap(), b["rows"].as_array().unwrap());
    assert_eq!(a.len(), b.len(), "{what}");
    for (x, y) in a.iter().zip(b) {
        assert_eq!(x["name"], y["name"], "{what}");
        assert_eq!(x["rank"], y["rank"], "{what}");
        assert_eq!(x["relation"], y["relation"], "{what}");
        for (u, v) in numbers(x).into_iter().zip(numbers(y)) {
            assert!(
                (u.is_nan() && v.is_nan()) || close(u, v),
                "{what}: {u} against {v} for {}",
                x["name"]
            );
        }
    }
}

/// An anonymous visitor of a `--public-read` server, with the form's token.
async fn visitor(app: &TestApp) -> Browser {
    let mut b = app.browser();
    let page = b.get("/planning").await;
    assert_eq!(page.status, 200, "{}", page.body);
    b
}

#[tokio::test]
async fn the_page_the_api_and_the_command_rank_the_example_file_alike() {
    let app = spawn_demo_app().await;
    let api = api_plan(&app, &request()).await;
    let rows = api["rows"].as_array().unwrap();
    let names_in_file = EXAMPLE.lines().count() - 1;
    assert_eq!(rows.len(), names_in_file);
    // Ranked by P at the first resolution, highest first; a candidate without σ has no P.
    let first: Vec<f64> = rows
        .iter()
        .filter_map(|r| r["p_resolved"][0].as_f64())
        .collect();
    assert!(first.windows(2).all(|w| w[0] >= w[1]), "{first:?}");
    assert!(
        first.len() < rows.len(),
        "the file has a candidate without σ"
    );
    for (i, r) in rows.iter().enumerate() {
        assert_eq!(r["rank"].as_u64(), Some(i as u64 + 1));
    }

    // The page shows the same rows in the same order with the same probabilities.
    let mut b = visitor(&app).await;
    let page = b.post("/planning", &form_fields()).await;
    assert_eq!(page.status, 200, "{}", page.body);
    let table = &page.body[page.body.find("id=\"plan-table\"").unwrap()..];
    let mut at = 0;
    for r in rows {
        let name = r["name"].as_str().unwrap();
        let found = table[at..]
            .find(&format!("<bdi>{name}</bdi>"))
            .unwrap_or_else(|| panic!("{name} is not shown after rank {}", r["rank"]));
        at += found;
        let line_end = at + table[at..].find("</tr>").unwrap();
        for p in r["p_resolved"].as_array().unwrap() {
            if let Some(p) = p.as_f64() {
                assert!(
                    table[at..line_end].contains(&shown_probability(p)),
                    "{name}: {}",
                    &table[at..line_end]
                );
            }
        }
    }
    assert!(page.body.contains("<svg class=\"chart\" role=\"img\""));
    assert!(page.body.contains("id=\"reliability-table\""));

    // The downloads re-post the same form and carry the same rows, in rank order.
    let json_download = b
        .post("/planning/download?format=json", &form_fields())
        .await;
    assert_eq!(json_download.status, 200, "{}", json_download.body);
    assert!(
        json_download
            .header("content-disposition")
            .contains("plan.json")
    );
    same_rows(&api, &json_download.json(), "the JSON download");
    let csv_download = b
        .post("/planning/download?format=csv", &form_fields())
        .await;
    assert_eq!(csv_download.status, 200, "{}", csv_download.body);
    assert!(csv_download.header("content-type").starts_with("text/csv"));
    let mut reader = csv::ReaderBuilder::new()
        .comment(Some(b'#'))
        .from_reader(csv_download.body.as_bytes());
    let header = reader.headers().unwrap().clone();
    let col = |name: &str| header.iter().position(|h| h == name).unwrap();
    let records: Vec<csv::StringRecord> = reader.records().map(Result::unwrap).collect();
    assert_eq!(records.len(), rows.len());
    for (rec, r) in records.iter().zip(rows) {
        assert_eq!(&rec[col("name")], r["name"].as_str().unwrap());
        assert_eq!(rec[col("rank")].parse::<u64>().ok(), r["rank"].as_u64());
        // serde_json reads floats to within an ulp or so; the CSV is written unrounded.
        let same = |cell: &str, json: Option<f64>| match (cell.parse::<f64>().ok(), json) {
            (Some(a), Some(b)) => close(a, b),
            (None, None) => true,
            _ => false,
        };
        assert!(
            same(&rec[col("p_resolved_1")], r["p_resolved"][0].as_f64()),
            "{}",
            r["name"]
        );
        assert!(same(
            &rec[col("log_theta_arcsec")],
            r["log_theta_arcsec"]["median"].as_f64()
        ));
    }

    // The command, on the same database file, agrees.
    let dir = tempfile::tempdir().unwrap();
    let input = dir.path().join("candidates.csv");
    std::fs::write(&input, EXAMPLE).unwrap();
    let args = PlanArgs {
        input,
        resolutions: vec!["AO K band=0.1".to_owned(), "seeing=0.8".to_owned()],
        threshold: 1.0,
        format: PlanFormat::Json,
        db_path: app.db_path.clone(),
    };
    // The command starts its own runtime, so it runs on a thread of its own.
    let out = tokio::task::spawn_blocking(move || {
        std::thread::spawn(move || {
            let mut out = Vec::new();
            massline::cli::plan::run(&args, &mut out).map(|()| out)
        })
        .join()
    })
    .await
    .unwrap()
    .unwrap()
    .unwrap();
    let cli: Value = serde_json::from_slice(&out).unwrap();
    same_rows(&api, &cli, "the command");
}

#[tokio::test]
async fn every_faulty_candidate_row_is_named_by_the_page_and_the_api() {
    let app = spawn_demo_app().await;
    let text = "name,sigma_km_s,sigma_err_km_s,distance_mpc,distance_err_mpc\n\
                Good one,200,10,20,1\n\
                Bad distance,200,10,far,1\n\
                Good two,150,8,12,1\n\
                Bad sigma,-5,1,14,1\n";
    let mut b = visitor(&app).await;
    let mut fields = form_fields();
    fields[0] = ("candidates", text);
    let page = b.post("/planning", &fields).await;
    assert_eq!(page.status, 400, "{}", page.body);
    let start = page.body.find("id=\"row-report\"").unwrap();
    let report = &page.body[start..start + page.body[start..].find("</table>").unwrap()];
    assert!(report.contains("line 3 (“Bad distance”)"), "{report}");
    assert!(report.contains("line 5 (“Bad sigma”)"), "{report}");
    assert!(!report.contains("Good one"));
    assert!(!page.body.contains("id=\"plan-table\""));

    let token = reader(&app).await;
    let mut body = request();
    body["csv"] = json!(text);
    let r = app
        .client
        .post(format!("{}/api/v1/planning", app.address))
        .bearer_auth(&token)
        .json(&body)
        .send()
        .await
        .unwrap();
    let reply = crate::common::Reply {
        status: r.status().as_u16(),
        headers: r.headers().clone(),
        body: r.text().await.unwrap(),
    };
    let fields = problem_fields(&reply.problem(422));
    assert!(
        fields.iter().any(|f| f.starts_with("csv.line3.")),
        "{fields:?}"
    );
    assert!(
        fields.iter().any(|f| f.starts_with("csv.line5.")),
        "{fields:?}"
    );
    assert!(!fields.iter().any(|f| f.starts_with("csv.line2.")));

    // A JSON batch names the item from 0, and a bad resolution is named too.
    let batch = json!({
        "candidates": [{"name": "Fine", "sigma_km_s": 200, "distance_mpc": 20},
                       {"name": "Nowhere", "sigma_km_s": 200, "distance_mpc": "far"}],
        "resolutions": [{"label": "", "arcsec": 0.1}]
    });
    let r = app
        .client
        .post(format!("{}/api/v1/planning", app.address))
        .bearer_auth(&token)
        .json(&batch)
        .send()
        .await
        .unwrap();
    assert_eq!(r.status().as_u16(), 422);
    let problem: Value = r.json().await.unwrap();
    let fields = problem_fields(&problem);
    assert!(
        fields.iter().any(|f| f.starts_with("candidates[1].")),
        "{fields:?}"
    );
    assert!(fields.iter().any(|f| f == "resolutions[0]"), "{fields:?}");
}

/// The account of a logged-in browser, by name.
async fn account_id(app: &TestApp, name: &str) -> i64 {
    accounts::find_by_username(&app.pool, name)
        .await
        .unwrap()
        .unwrap()
        .account_id
}

#[tokio::test]
async fn saved_resolutions_are_added_listed_prefilled_and_deleted_by_their_owner_alone() {
    let app = spawn_demo_app().await;
    let mut owner = app.login_as(Role::Member).await;
    let owner_id = account_id(&app, "test-member").await;
    app.create_account("other-member", Role::Member).await;
    let mut other = app.browser();
    assert_eq!(other.login("other-member", TEST_PASSWORD).await.status, 303);
    let other_id = account_id(&app, "other-member").await;

    // Anonymous visitors may plan but not save.
    let mut anonymous = visitor(&app).await;
    let refused = anonymous
        .post(
            "/planning/resolutions",
            &[("res_label", "AO"), ("res_arcsec", "0.1")],
        )
        .await;
    assert_eq!(refused.status, 303);
    assert!(refused.header("location").starts_with("/login"));

    owner.get("/planning").await;
    let saved = owner
        .post(
            "/planning/resolutions",
            &[
                ("res_label", "Owner AO"),
                ("res_arcsec", "0.07"),
                ("res_label", ""),
                ("res_arcsec", ""),
            ],
        )
        .await;
    assert_eq!(saved.status, 200, "{}", saved.body);
    assert!(saved.body.contains("Saved 1 resolution."), "{}", saved.body);
    let listed = resolutions::list(&app.pool, owner_id).await.unwrap();
    assert_eq!(listed.len(), 1);
    assert_eq!(listed[0].label, "Owner AO");
    assert_eq!(
        accounts::count_events(&app.pool, "resolution_saved")
            .await
            .unwrap(),
        1
    );

    // A faulty row is named and nothing is saved.
    let bad = owner
        .post(
            "/planning/resolutions",
            &[("res_label", "Too wide"), ("res_arcsec", "500")],
        )
        .await;
    assert_eq!(bad.status, 400);
    assert!(bad.body.contains("id=\"e-res-1\""), "{}", bad.body);
    assert_eq!(
        resolutions::list(&app.pool, owner_id).await.unwrap().len(),
        1
    );

    // The owner's form is prefilled; the other member sees none of it.
    let page = owner.get("/planning").await;
    assert!(page.body.contains("name=\"res_label\" value=\"Owner AO\""));
    assert!(page.body.contains("id=\"saved-resolutions\""));
    let theirs = other.get("/planning").await;
    assert!(!theirs.body.contains("Owner AO"));
    let (token, _) = app.make_token(other_id, "read submit").await;
    let mine = app
        .get_with_token("/api/v1/me/resolutions", Some(&token))
        .await;
    assert_eq!(mine.status, 200);
    assert_eq!(mine.json(), json!([]));

    // Nobody else can delete it, by page or API.
    let id = listed[0].account_resolution_id;
    let stolen = other
        .post(&format!("/planning/resolutions/{id}/delete"), &[])
        .await;
    assert_eq!(stolen.status, 404);
    let stolen = app
        .client
        .delete(format!("{}/api/v1/me/resolutions/{id}", app.address))
        .bearer_auth(&token)
        .send()
        .await
        .unwrap();
    assert_eq!(stolen.status().as_u16(), 404);
    assert_eq!(
        resolutions::list(&app.pool, owner_id).await.unwrap().len(),
        1
    );

    // The API saves (once per label) and lists for the token's owner.
    for expected in [201, 200] {
        let r = app
            .client
            .post(format!("{}/api/v1/me/resolutions", app.address))
            .bearer_auth(&token)
            .json(&json!({"label": "Other seeing", "arcsec": 0.9}))
            .send()
            .await
            .unwrap();
        assert_eq!(r.status().as_u16(), expected);
    }
    let mine = app
        .get_with_token("/api/v1/me/resolutions", Some(&token))
        .await
        .json();
    assert_eq!(mine.as_array().unwrap().len(), 1);
    assert_eq!(mine[0]["label"], "Other seeing");
    let (read_only, _) = app.make_token(other_id, "read").await;
    let r = app
        .client
        .post(format!("{}/api/v1/me/resolutions", app.address))
        .bearer_auth(&read_only)
        .json(&json!({"label": "x", "arcsec": 0.9}))
        .send()
        .await
        .unwrap();
    assert_eq!(r.status().as_u16(), 403);

    // The owner deletes it.
    let deleted = owner
        .post(&format!("/planning/resolutions/{id}/delete"), &[])
        .await;
    assert_eq!(deleted.status, 200, "{}", deleted.body);
    assert!(deleted.body.contains("Deleted the resolution."));
    assert!(
        resolutions::list(&app.pool, owner_id)
            .await
            .unwrap()
            .is_empty()
    );
    assert_eq!(
        accounts::count_events(&app.pool, "resolution_deleted")
            .await
            .unwrap(),
        1
    );
}

#[tokio::test]
async fn the_example_file_is_served_and_the_reliability_counts_add_up() {
    let app = spawn_demo_app().await;
    let (status, body) = app.get("/planning/candidates.csv").await;
    assert_eq!(status, 200);
    assert_eq!(body, EXAMPLE);
    let r = app
        .get_with_token("/api/v1/planning/reliability", None)
        .await;
    assert_eq!(r.status, 200, "{}", r.body);
    let v = r.json();
    if v["problem"].is_null() {
        let bins = v["bins"].as_array().unwrap();
        let total: u64 = bins.iter().map(|b| b["count"].as_u64().unwrap()).sum();
        assert_eq!(Some(total), v["compared"].as_u64());
        assert!(total > 0);
        assert!(
            v["reading"]
                .as_str()
                .is_some_and(|r| r.contains("predicted")),
            "{v}"
        );
    } else {
        assert!(v["computing"].is_i64(), "{v}");
    }
    let bad = app
        .get_with_token("/api/v1/planning/reliability?threshold=0", None)
        .await;
    assert_eq!(problem_fields(&bad.problem(422)), ["threshold"]);
}
