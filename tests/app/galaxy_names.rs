//! Galaxy names: what a name may hold (NFC, no characters that do not show as text), and new
//! galaxies whose names look like one in the catalog — from the form, the API and catalog files.

use massline::auth::Role;
use massline::catalog::csv_io::{ImportError, ImportMode, import_rows, parse_catalog_csv};
use massline::catalog::galaxies::SubmissionSource;
use serde_json::{Value, json};

use crate::helpers::{Browser, TestApp, spawn_app};

async fn galaxies(app: &TestApp) -> Vec<String> {
    sqlx::query_scalar("select name from galaxy order by galaxy_id")
        .fetch_all(&app.pool)
        .await
        .unwrap()
}

/// The form of a new galaxy with one black-hole mass (invented values).
fn form<'a>(name: &'a str, confirm: &'a str) -> Vec<(&'a str, &'a str)> {
    vec![
        ("galaxy", ""),
        ("name", name),
        ("morphology", "elliptical"),
        ("bulge_kind", "classical"),
        ("centre_kind", "core"),
        ("distance_mpc", "20"),
        ("distance_err_mpc", "1.5"),
        ("distance_method", "sbf"),
        ("new_galaxy_confirmed", confirm),
        ("m0_quantity", "bh_mass"),
        ("m0_value", "2.4e8 ± 0.3e8"),
        ("m0_scale", "auto"),
        ("m0_method", "stellar_dynamics"),
        ("action", "submit"),
    ]
}

/// The app with the galaxy "X 214" and a member's browser.
async fn with_x_214() -> (TestApp, Browser) {
    let app = spawn_app().await;
    app.create_account("member1", Role::Member).await;
    let mut b = app.browser();
    b.log_in("member1").await;
    let r = b.post("/submissions/new", &form("X 214", "")).await;
    assert_eq!(r.status, 303, "{}", r.body);
    assert_eq!(galaxies(&app).await, ["X 214"]);
    (app, b)
}

#[tokio::test]
async fn a_look_alike_of_an_existing_name_is_asked_to_choose_or_confirm() {
    let (app, mut b) = with_x_214().await;
    // Case, a Cyrillic Х (U+0425), a hyphen, an underscore, no space.
    for alike in ["x 214", "\u{425} 214", "X-214", "X_214", "x214"] {
        let r = b.post("/submissions/new", &form(alike, "")).await;
        assert_eq!(r.status, 409, "{alike}: {}", r.body);
        assert!(
            r.body
                .contains("looks like the existing galaxy “X 214” (slug x-214): choose it"),
            "{alike}: {}",
            r.body
        );
        assert!(
            r.body.contains("name=\"new_galaxy_confirmed\""),
            "{}",
            r.body
        );
    }
    assert_eq!(galaxies(&app).await, ["X 214"], "no look-alike was stored");

    // "Check against the relations" says so before submitting, and stores nothing.
    let mut check = form("X_214", "");
    check.retain(|(k, _)| *k != "action");
    check.push(("action", "check"));
    let r = b.post("/submissions/new", &check).await;
    assert_eq!(r.status, 200, "{}", r.body);
    assert!(
        r.body.contains("looks like the existing galaxy “X 214”"),
        "{}",
        r.body
    );
    assert_eq!(galaxies(&app).await, ["X 214"]);

    // The submitter confirms that the hyphenated name is another galaxy.
    let r = b.post("/submissions/new", &form("X-214", "yes")).await;
    assert_eq!(r.status, 303, "{}", r.body);
    assert_eq!(galaxies(&app).await, ["X 214", "X-214"]);
}

#[tokio::test]
async fn names_with_characters_that_do_not_show_are_refused_by_code_point() {
    let (app, mut b) = with_x_214().await;
    for (name, code) in [
        ("X\u{0}215", "U+0000"),
        ("X 215\u{7}", "U+0007"),
        ("X\n215", "U+000A"),
        ("X\t215", "U+0009"),
        ("\u{202e}X 215", "U+202E"),
        ("X\u{200b} 214", "U+200B"),
        ("X \u{2066}215\u{2069}", "U+2066"),
    ] {
        let r = b.post("/submissions/new", &form(name, "yes")).await;
        assert_eq!(r.status, 400, "{name:?}: {}", r.body);
        assert!(r.body.contains(code), "{name:?}: {}", r.body);
        assert!(!r.body.contains('\u{0}'), "a NUL byte reached the page raw");
    }
    assert_eq!(galaxies(&app).await, ["X 214"]);
}

#[tokio::test]
async fn a_decomposed_name_is_stored_composed() {
    let (app, mut b) = with_x_214().await;
    let r = b
        .post("/submissions/new", &form("Ce\u{301}le  4 ", ""))
        .await;
    assert_eq!(r.status, 303, "{}", r.body);
    assert_eq!(galaxies(&app).await, ["X 214", "C\u{e9}le 4"]);
    // The same name typed composed is the same galaxy, not a new one.
    let r = b
        .post("/submissions/new", &form("C\u{e9}le 4", "yes"))
        .await;
    assert_eq!(r.status, 400, "{}", r.body);
    assert!(r.body.contains("is already in the catalog"), "{}", r.body);
}

async fn post_api(app: &TestApp, token: &str, key: &str, body: &Value) -> (u16, Value) {
    let response = app
        .client
        .post(format!("{}/api/v1/submissions", app.address))
        .bearer_auth(token)
        .header("content-type", "application/json")
        .header("idempotency-key", key)
        .body(body.to_string())
        .send()
        .await
        .unwrap();
    let status = response.status().as_u16();
    (status, response.json().await.unwrap())
}

fn api_body(name: &str, confirmed: Option<bool>) -> Value {
    let mut body = json!({
        "new_galaxy": {
            "name": name, "morphology": "elliptical", "bulge_kind": "classical",
            "centre_kind": "core", "distance_mpc": 20, "distance_err_mpc": 1.5,
            "distance_method": "sbf"
        },
        "measurements": [{"quantity": "bh_mass", "value": "2.4e8", "method": "stellar_dynamics"}]
    });
    if let Some(c) = confirmed {
        body["new_galaxy_confirmed"] = json!(c);
    }
    body
}

#[tokio::test]
async fn the_api_answers_a_look_alike_with_409_naming_the_galaxy_and_takes_a_confirmation() {
    let (app, _) = with_x_214().await;
    let member = app.create_account("script1", Role::Member).await;
    let (token, _) = app.make_token(member, "read submit").await;

    let (status, problem) = post_api(&app, &token, "k1", &api_body("\u{425} 214", None)).await;
    assert_eq!(status, 409, "{problem}");
    assert!(
        problem["detail"]
            .as_str()
            .unwrap()
            .contains("\"new_galaxy_confirmed\": true"),
        "{problem}"
    );
    assert_eq!(problem["errors"][0]["field"], "new_galaxy_confirmed");
    let message = problem["errors"][0]["message"].as_str().unwrap();
    assert!(
        message.contains("“X 214”") && message.contains("x-214"),
        "{message}"
    );

    let (status, problem) = post_api(&app, &token, "k2", &api_body("X\u{0}214", Some(true))).await;
    assert_eq!(status, 422, "{problem}");
    assert_eq!(problem["errors"][0]["field"], "new_galaxy.name");
    assert!(
        problem["errors"][0]["message"]
            .as_str()
            .unwrap()
            .contains("U+0000")
    );
    assert_eq!(galaxies(&app).await, ["X 214"]);

    let (status, answer) = post_api(&app, &token, "k3", &api_body("\u{425} 214", Some(true))).await;
    assert_eq!(status, 201, "{answer}");
    assert_eq!(galaxies(&app).await, ["X 214", "\u{425} 214"]);
    // A retry of the confirmed request is answered with its submission, not refused as a
    // look-alike of the galaxy it created.
    let (status, again) = post_api(&app, &token, "k3", &api_body("\u{425} 214", Some(true))).await;
    assert_eq!(
        (status, &again["submission_id"]),
        (200, &answer["submission_id"])
    );
}

#[tokio::test]
async fn a_catalog_file_row_with_a_look_alike_is_a_fault_until_its_confirm_column_says_yes() {
    let (app, _) = with_x_214().await;
    let header = "galaxy,morphology,bulge_kind,centre_kind,distance_mpc,distance_err_mpc,distance_method,quantity,value,method";
    let row = "x_214,elliptical,classical,core,20,1.5,sbf,bh_mass,2.4e8,stellar_dynamics";
    let pending = ImportMode::Pending {
        account_id: None,
        source: SubmissionSource::Import,
    };

    let rows = parse_catalog_csv(&format!("{header}\n{row}\n")).unwrap();
    match import_rows(&app.pool, &rows, pending, &mut |_, _| {}).await {
        Err(ImportError::Rows(faults)) => {
            assert_eq!(faults.len(), 1, "{faults:?}");
            assert_eq!(faults[0].column, "new_galaxy_confirmed");
            assert_eq!(faults[0].line, 2);
            assert!(
                faults[0]
                    .message
                    .contains("“X 214” of the catalog (slug x-214)"),
                "{}",
                faults[0].message
            );
        }
        other => panic!("a look-alike row was not a fault: {other:?}"),
    }
    assert_eq!(galaxies(&app).await, ["X 214"]);

    // A row that only names a look-alike is pointed to the catalog's galaxy.
    let rows =
        parse_catalog_csv("galaxy,quantity,value,method\nx-214,bh_mass,2.4e8,stellar_dynamics\n")
            .unwrap();
    match import_rows(&app.pool, &rows, pending, &mut |_, _| {}).await {
        Err(ImportError::Rows(faults)) => {
            assert_eq!(faults[0].column, "galaxy");
            assert!(
                faults[0].message.contains("but “X 214” is"),
                "{}",
                faults[0].message
            );
        }
        other => panic!("a row naming no catalog galaxy was not a fault: {other:?}"),
    }

    let confirmed = format!("{header},new_galaxy_confirmed\n{row},yes\n");
    let rows = parse_catalog_csv(&confirmed).unwrap();
    let report = import_rows(&app.pool, &rows, pending, &mut |_, _| {})
        .await
        .unwrap();
    assert_eq!(report.new_galaxies, 1);
    assert_eq!(galaxies(&app).await, ["X 214", "x_214"]);
}

#[tokio::test]
async fn galaxies_stored_before_the_name_key_get_one_when_the_catalog_opens() {
    let (app, _) = with_x_214().await;
    sqlx::query("update galaxy set name_key = null")
        .execute(&app.pool)
        .await
        .unwrap();
    let reopened = massline::catalog::connect(&app.db_path).await.unwrap();
    let key: Option<String> = sqlx::query_scalar("select name_key from galaxy")
        .fetch_one(&reopened)
        .await
        .unwrap();
    assert_eq!(
        key.as_deref(),
        Some(massline::catalog::names::name_key("X 214").as_str())
    );
}

#[tokio::test]
async fn a_control_character_in_a_free_text_cell_never_reaches_a_page_raw() {
    let (app, mut b) = with_x_214().await;
    let mut fields = form("X 214", "");
    fields[0] = ("galaxy", "x-214");
    fields.push(("m0_note", "seen\u{0}with\u{7}bell"));
    let r = b.post("/submissions/new", &fields).await;
    assert!(!r.body.contains(['\u{0}', '\u{7}']), "{}", r.body);
    if r.status == 303 {
        let page = b.get("/galaxies/x-214").await;
        assert_eq!(page.status, 200);
        assert!(
            !page.body.contains(['\u{0}', '\u{7}']),
            "a control character reached the page raw"
        );
        assert!(
            page.body.contains("seen\u{fffd}with\u{fffd}bell"),
            "{}",
            page.body
        );
    }
    let _ = app;
}
