//! The disk fit's three doors (`/kinematics`, `POST /api/v1/kinematics`, `massline
//! kinematics`) on the invented demo tables of seed-data/kinematics: the same numbers on each,
//! every faulty row named, nothing stored, and the submission form filled by "Submit this
//! mass".

use massline::auth::Role;
use massline::cli::kinematics::{KinematicsArgs, run};
use massline::relations::kinematics::example;
use serde_json::{Value, json};

use crate::common::problem_fields;
use crate::helpers::{TestApp, spawn_app};

/// The text of the element with `id`, tags removed and entities of numbers undone.
fn text_of(body: &str, id: &str) -> String {
    let start = body
        .find(&format!("id=\"{id}\""))
        .unwrap_or_else(|| panic!("no element {id}"));
    let open = body[start..].find('>').unwrap() + start + 1;
    let close = body[open..].find("</").unwrap() + open;
    body[open..close].trim().to_owned()
}

/// The settings of a demo table as form fields.
fn fields(slug: &str) -> Vec<(&'static str, &'static str)> {
    let e = example(slug).unwrap();
    let mut f = vec![("table", e.table)];
    f.extend_from_slice(e.settings);
    f
}

/// The API body of a demo table.
fn api_body(slug: &str) -> Value {
    let e = example(slug).unwrap();
    let mut body = json!({ "csv": e.table });
    for (k, v) in e.settings {
        body[*k] = match (*k, *v) {
            ("upsilon", "free") => continue,
            (_, v) => json!(v.parse::<f64>().unwrap()),
        };
    }
    if let Some(l) = body.get("plummer_l_lsun").cloned() {
        let a = body["plummer_a_pc"].clone();
        let o = body.as_object_mut().unwrap();
        o.remove("plummer_l_lsun");
        o.remove("plummer_a_pc");
        o.insert("plummer".into(), json!({ "l_total_lsun": l, "a_pc": a }));
    }
    body
}

async fn api(app: &TestApp, token: &str, body: &Value) -> (u16, Value) {
    let response = app
        .client
        .post(format!("{}/api/v1/kinematics", app.address))
        .bearer_auth(token)
        .json(body)
        .send()
        .await
        .unwrap();
    let status = response.status().as_u16();
    (status, response.json().await.unwrap())
}

async fn counts(app: &TestApp) -> (i64, i64) {
    let s: i64 = sqlx::query_scalar("select count(*) from submission")
        .fetch_one(&app.pool)
        .await
        .unwrap();
    let m: i64 = sqlx::query_scalar("select count(*) from measurement")
        .fetch_one(&app.pool)
        .await
        .unwrap();
    (s, m)
}

#[tokio::test]
async fn the_page_the_api_and_the_command_line_give_the_same_mass_for_the_gas_disk() {
    let app = spawn_app().await;
    let member = app.create_account("disk-member", Role::Member).await;
    let (token, _) = app.make_token(member, "read").await;
    let (status, from_api) = api(&app, &token, &api_body("gas")).await;
    assert_eq!(status, 200, "{from_api}");

    let dir = tempfile::tempdir().unwrap();
    let input = dir.path().join("gas.csv");
    std::fs::write(&input, example("gas").unwrap().table).unwrap();
    let args = KinematicsArgs {
        input,
        distance: "21".into(),
        distance_err: "1.5".into(),
        inclination: "60".into(),
        inclination_err: Some("4".into()),
        plummer: Some("1e9,40".into()),
        upsilon: Some("free".into()),
        sigma: Some("190".into()),
        resolution: Some("0.08".into()),
        json: true,
        ..KinematicsArgs::default()
    };
    let mut out = Vec::new();
    run(&args, &mut out).unwrap();
    let from_cli: Value = serde_json::from_slice(&out).unwrap();
    assert_eq!(from_cli, from_api, "the command line and the API differ");

    let mut browser = app.login_as(Role::Member).await;
    browser.get("/kinematics?example=gas").await;
    let page = browser.post("/kinematics", &fields("gas")).await;
    assert_eq!(page.status, 200, "{}", page.body);
    let log_mbh = from_api["log_mbh"].as_f64().unwrap();
    assert_eq!(text_of(&page.body, "log-mbh"), format!("{log_mbh:.3}"));
    assert_eq!(
        text_of(&page.body, "n-points"),
        from_api["n_points"].to_string()
    );
    // The errors are shown to two significant digits: within half of the second digit.
    for (id, key) in [
        ("err-total", "log_mbh_err_total_dex"),
        ("err-stat", "log_mbh_err_stat_dex"),
        ("err-inclination", "log_mbh_err_inclination_dex"),
        ("err-distance", "log_mbh_err_distance_dex"),
    ] {
        let shown: f64 = text_of(&page.body, id).parse().unwrap();
        let exact = from_api[key].as_f64().unwrap();
        assert!(
            (shown - exact).abs() <= 0.05 * exact,
            "{id}: the page shows {shown}, the API {exact}"
        );
    }
    // The comparison prefers the stars on this table (it was made with them), in words and
    // in the quoted model.
    assert!(
        from_api["comparison"]["delta_bic"].as_f64().unwrap() < 0.0,
        "{}",
        from_api["comparison"]
    );
    assert!(text_of(&page.body, "comparison").contains("preferred"));
    assert!(page.body.contains("role=\"img\""), "the chart is drawn");
}

#[tokio::test]
async fn a_faulty_table_names_every_faulty_row_on_the_page_and_in_the_api() {
    let app = spawn_app().await;
    let table =
        "offset_mas,v_km_s,v_err_km_s\n1.0,2000,3\n1.5,fast,3\n2.0,1900,0\n2.5,1850,\n3.0,1800,3\n";
    let mut browser = app.login_as(Role::Member).await;
    browser.get("/kinematics").await;
    let page = browser
        .post(
            "/kinematics",
            &[
                ("table", table),
                ("distance_mpc", "7"),
                ("distance_err_mpc", "0.5"),
                ("inclination_deg", "88"),
                ("inclination_err_deg", "1"),
            ],
        )
        .await;
    assert_eq!(page.status, 400);
    for (row, column) in [(3, "v_km_s"), (4, "v_err_km_s"), (5, "v_err_km_s")] {
        assert!(
            page.body.contains(&format!("Row {row}, {column}:")),
            "row {row} is not named:\n{}",
            page.body
        );
    }
    assert!(!page.body.contains("Row 2,"), "a good row is named");

    let member = app.create_account("disk-api", Role::Member).await;
    let (token, _) = app.make_token(member, "read").await;
    let (status, problem) = api(
        &app,
        &token,
        &json!({"csv": table, "distance_mpc": 7, "distance_err_mpc": 0.5, "inclination_deg": 88, "inclination_err_deg": 1}),
    )
    .await;
    assert_eq!(status, 422, "{problem}");
    let named = problem_fields(&problem);
    assert_eq!(
        named,
        vec!["rows[3].v_km_s", "rows[4].v_err_km_s", "rows[5].v_err_km_s"],
        "{problem}"
    );
}

#[tokio::test]
async fn fitting_stores_nothing_and_the_submit_link_fills_the_form_with_the_mass() {
    let app = spawn_app().await;
    let before = counts(&app).await;
    let mut browser = app.login_as(Role::Member).await;
    browser.get("/kinematics?example=maser").await;
    let page = browser.post("/kinematics", &fields("maser")).await;
    assert_eq!(page.status, 200, "{}", page.body);
    assert!(page.body.contains("id=\"maser-distance\""));
    assert_eq!(counts(&app).await, before, "a fit stored something");

    let marker = "id=\"submit-mass\" href=\"";
    let start = page.body.find(marker).unwrap() + marker.len();
    let end = page.body[start..].find('"').unwrap() + start;
    let href = page.body[start..end]
        .replace("&amp;", "&")
        .replace("&#38;", "&");
    assert!(href.starts_with("/submissions/new?"), "{href}");
    let form = browser.get(&href).await;
    assert_eq!(form.status, 200, "{}", form.body);
    let log_mbh = text_of(&page.body, "log-mbh");
    let marker = "name=\"m0_value\" value=\"";
    let value_at = form.body.find(marker).unwrap() + marker.len();
    assert!(
        form.body[value_at..].starts_with(&format!("log {log_mbh}")),
        "the form does not carry the mass {log_mbh}: {}",
        &form.body[value_at..value_at + 40]
    );
    assert!(form.body.contains("<option value=\"maser\" selected>"));
    assert_eq!(
        counts(&app).await,
        before,
        "opening the form stored something"
    );
}

#[tokio::test]
async fn missing_settings_are_named_beside_their_fields_and_the_table_is_kept() {
    let app = spawn_app().await;
    let mut browser = app.login_as(Role::Member).await;
    browser.get("/kinematics").await;
    let table = example("maser").unwrap().table;
    let page = browser
        .post("/kinematics", &[("table", table), ("distance_mpc", "7.2")])
        .await;
    assert_eq!(page.status, 400);
    for name in ["distance_err_mpc", "inclination_deg"] {
        assert!(
            page.body
                .contains(&format!("<p class=\"field-error\" id=\"e-{name}\">")),
            "{name} is not named:\n{}",
            page.body
        );
        assert!(
            page.body
                .contains(&format!("aria-describedby=\"e-{name}\""))
        );
    }
    assert!(
        !page.body.contains("id=\"e-distance_mpc\""),
        "a good field is named"
    );
    assert!(page.body.contains("offset_mas,v_km_s"), "the table is kept");
    assert!(!page.body.contains("id=\"result\""), "nothing was fitted");
}
