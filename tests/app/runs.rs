//! Background runs under control: one queue, one running run per account and per slot, a cap
//! on an account's waiting runs, and runs of a superseded catalog version cancelled.
//!
//! Each test holds started runs before their first unit of work (`RunRegistry::hold_runs`), so
//! a run stays running while the test looks at the queue; the guard releases them at the end.

use massline::auth::Role;
use massline::relations::{MAX_QUEUED_PER_ACCOUNT, RunRegistry};
use serde_json::{Value, json};

use crate::helpers::{Browser, Reply, TestApp, spawn_demo_app};

/// Releases held runs when the test ends (also when it fails), so the runtime can shut down.
struct Held(RunRegistry);

impl Held {
    fn new(app: &TestApp, slots: usize) -> Self {
        app.state.runs.set_max_running(slots);
        app.state.runs.hold_runs(true);
        Held(app.state.runs.clone())
    }
}

impl Drop for Held {
    fn drop(&mut self) {
        self.0.hold_runs(false);
    }
}

/// A member account with a read token; returns the token.
async fn member_token(app: &TestApp, name: &str) -> String {
    let id = app.create_account(name, Role::Member).await;
    app.make_token(id, "read").await.0
}

/// Starts a bootstrap run of `replicates` of the default M–σ fit through the API.
async fn start(app: &TestApp, token: &str, replicates: usize) -> Reply {
    let r = app
        .client
        .post(format!("{}/api/v1/relations/m_sigma/runs", app.address))
        .bearer_auth(token)
        .json(&json!({"kind": "bootstrap", "size": replicates}))
        .send()
        .await
        .expect("the request is answered");
    Reply {
        status: r.status().as_u16(),
        headers: r.headers().clone(),
        body: r.text().await.expect("a text body"),
    }
}

/// Starts a run and expects it accepted; its answer.
async fn started(app: &TestApp, token: &str, replicates: usize) -> Value {
    let r = start(app, token, replicates).await;
    assert_eq!(r.status, 202, "{}", r.body);
    r.json()
}

async fn status(app: &TestApp, token: &str, run: &Value) -> Value {
    let url = run["status_url"].as_str().expect("a status URL");
    let r = app.get_with_token(url, Some(token)).await;
    assert_eq!(r.status, 200, "{}", r.body);
    r.json()
}

/// Asks for a run's status until `done` holds, at most 2000 times 25 ms apart (the runs are
/// small; this waits for them, it measures nothing).
async fn wait_for(app: &TestApp, token: &str, run: &Value, done: impl Fn(&Value) -> bool) -> Value {
    for _ in 0..2000 {
        let now = status(app, token, run).await;
        if done(&now) {
            return now;
        }
        tokio::time::sleep(std::time::Duration::from_millis(25)).await;
    }
    panic!("the run never reached the expected state: {run}");
}

#[tokio::test]
async fn a_member_starting_more_runs_than_the_cap_is_refused_with_429_saying_to_wait() {
    let app = spawn_demo_app().await;
    let _held = Held::new(&app, 1);
    let token = member_token(&app, "member1").await;
    let first = started(&app, &token, 20).await;
    assert_eq!(first["status"], "running", "{first}");
    let mut waiting = Vec::new();
    for i in 0..MAX_QUEUED_PER_ACCOUNT {
        let run = started(&app, &token, 21 + i).await;
        assert_eq!(run["status"], "queued", "{run}");
        assert_eq!(run["queue_position"], i + 1, "{run}");
        waiting.push(run);
    }
    // The same run again is not queued twice: the answer is the run already waiting.
    let again = started(&app, &token, 21).await;
    assert_eq!(again["id"], waiting[0]["id"], "{again}");
    assert_eq!(again["queue_length"], MAX_QUEUED_PER_ACCOUNT, "{again}");

    let refused = start(&app, &token, 30).await.problem(429);
    let detail = refused["detail"].as_str().unwrap();
    assert!(
        detail.contains(&format!("{MAX_QUEUED_PER_ACCOUNT} runs waiting"))
            && detail.contains("wait for one of them to finish"),
        "{refused}"
    );

    // The relation page's form is refused the same way, for the same account.
    let mut browser: Browser = app.browser();
    browser.log_in("member1").await;
    browser.get("/relations/m_sigma").await;
    let r = browser
        .post(
            "/relations/m_sigma/runs",
            &[("kind", "bootstrap"), ("size", "31"), ("query", "")],
        )
        .await;
    assert_eq!(r.status, 429, "{}", r.body);
    assert!(
        r.body.contains("wait for one of them to finish"),
        "{}",
        r.body
    );
}

#[tokio::test]
async fn two_accounts_runs_compute_while_a_third_waits_with_its_place_in_the_queue() {
    let app = spawn_demo_app().await;
    let held = Held::new(&app, 2);
    let one = member_token(&app, "member1").await;
    let two = member_token(&app, "member2").await;
    let three = member_token(&app, "member3").await;

    let a = started(&app, &one, 20).await;
    // One running run per account: member1's second run waits although a slot is free.
    let b = started(&app, &one, 21).await;
    let c = started(&app, &two, 22).await;
    let d = started(&app, &three, 23).await;
    assert_eq!(a["status"], "running", "{a}");
    assert_eq!(b["status"], "queued", "{b}");
    assert_eq!(c["status"], "running", "{c}");
    let d = status(&app, &three, &d).await;
    assert_eq!(d["status"], "queued", "{d}");
    assert_eq!(d["queue_position"], 2, "{d}");
    assert_eq!(d["queue_length"], 2, "{d}");
    let b = status(&app, &one, &b).await;
    assert_eq!(b["queue_position"], 1, "{b}");

    // The relation page shows the waiting run's place and keeps reloading itself.
    let mut browser = app.browser();
    browser.log_in("member3").await;
    let page = browser.get("/relations/m_sigma?replicates=23").await;
    assert_eq!(page.status, 200, "{}", page.body);
    assert!(
        page.body.contains("Queued: position 2 of 2"),
        "{}",
        page.body
    );
    assert!(page.body.contains("http-equiv=\"refresh\""));

    // Released, the queue drains and every run is stored.
    drop(held);
    for (token, run) in [(&one, &a), (&one, &b), (&two, &c), (&three, &d)] {
        let done = wait_for(&app, token, run, |s| {
            s["status"] != "queued" && s["status"] != "running"
        })
        .await;
        assert_eq!(done["status"], "stored", "{done}");
        assert!(
            done["params"].as_array().is_some_and(|p| !p.is_empty()),
            "{done}"
        );
    }
}

/// The form fields of a new galaxy with a σ_e and a black-hole mass (invented values).
fn new_galaxy_form(name: &str) -> Vec<(&str, &str)> {
    vec![
        ("galaxy", ""),
        ("name", name),
        ("morphology", "elliptical"),
        ("bulge_kind", "classical"),
        ("centre_kind", "core"),
        ("distance_mpc", "20"),
        ("distance_err_mpc", "1.5"),
        ("distance_method", "sbf"),
        ("m0_quantity", "sigma"),
        ("m0_value", "210 ± 10"),
        ("m0_scale", "auto"),
        ("m0_sigma_definition", "sigma_e"),
        ("m0_aperture", "r_e"),
        ("m1_quantity", "bh_mass"),
        ("m1_value", "2e8 ± 0.3e8"),
        ("m1_scale", "auto"),
        ("m1_method", "stellar_dynamics"),
        ("m1_source_distance_mpc", "20"),
        ("m1_resolution_arcsec", "0.1"),
        ("m1_reference", "Invented et al. 2031"),
        ("note", "test submission"),
    ]
}

#[tokio::test]
async fn runs_of_an_older_catalog_version_are_cancelled_after_an_accept() {
    let app = spawn_demo_app().await;
    let held = Held::new(&app, 1);
    let one = member_token(&app, "member1").await;
    let two = member_token(&app, "member2").await;
    let version = massline::catalog::history::current_version(&app.pool)
        .await
        .unwrap();
    let running = started(&app, &one, 20).await;
    let queued = started(&app, &two, 21).await;
    assert_eq!(queued["status"], "queued", "{queued}");
    assert_eq!(queued["catalog_version"], version, "{queued}");

    let mut member = app.login_as(Role::Member).await;
    let r = member
        .post("/submissions/new", &new_galaxy_form("X 214"))
        .await;
    assert_eq!(r.status, 303, "{}", r.body);
    let id = r.header("location").rsplit('/').next().unwrap().to_owned();
    let mut reviewer = app.login_as(Role::Reviewer).await;
    reviewer.get("/review").await;
    let r = reviewer
        .post(&format!("/review/{id}/accept"), &[("note", "looks fine")])
        .await;
    assert_eq!(r.status, 303, "{}", r.body);

    let sentence = format!("the catalog changed (version {version} → {})", version + 1);
    let dropped = status(&app, &two, &queued).await;
    assert_eq!(dropped["status"], "cancelled", "{dropped}");
    assert!(
        dropped["message"].as_str().unwrap().contains(&sentence),
        "{dropped}"
    );
    assert_eq!(dropped["queue_position"], Value::Null, "{dropped}");

    // The running one stops at its next check instead of storing a result nobody is shown.
    drop(held);
    let stopped = wait_for(&app, &one, &running, |s| s["status"] != "running").await;
    assert_eq!(stopped["status"], "cancelled", "{stopped}");
    assert!(
        stopped["message"].as_str().unwrap().contains(&sentence),
        "{stopped}"
    );
    let stored: i64 = sqlx::query_scalar("select count(*) from fit_run")
        .fetch_one(&app.pool)
        .await
        .unwrap();
    assert_eq!(stored, 0);

    // A run asked for now starts from the new version.
    let fresh = started(&app, &two, 21).await;
    assert_eq!(fresh["catalog_version"], version + 1, "{fresh}");
    assert_ne!(fresh["id"], queued["id"], "{fresh}");
}

#[tokio::test]
async fn the_openapi_document_describes_the_queue_position_and_the_429_of_a_run() {
    let app = spawn_demo_app().await;
    let doc = app
        .get_with_token("/api/v1/openapi.json", None)
        .await
        .json();
    let answer = &doc["components"]["schemas"]["RunAnswer"]["properties"];
    assert!(answer["queue_position"].is_object(), "{answer}");
    assert!(answer["queue_length"].is_object(), "{answer}");
    let start = &doc["paths"]["/api/v1/relations/{relation}/runs"]["post"]["responses"];
    let refusal = start["429"]["description"].as_str().unwrap_or("");
    assert!(refusal.contains("runs waiting"), "{start}");
    assert!(doc["paths"]["/api/v1/runs/{id}"]["get"].is_object());
}

#[tokio::test]
async fn a_run_started_on_the_page_is_followed_by_its_script_with_the_page_session() {
    let app = spawn_demo_app().await;
    let _held = Held::new(&app, 1);
    let mut member = app.login_as(Role::Member).await;
    let page = member.get("/relations/m_sigma").await;
    assert_eq!(page.status, 200);
    assert!(
        !page.body.contains("/static/runs.js"),
        "no script without a run"
    );
    let r = member
        .post(
            "/relations/m_sigma/runs",
            &[("kind", "bootstrap"), ("size", "150"), ("query", "")],
        )
        .await;
    assert_eq!(r.status, 303, "{}", r.body);
    let back = r.headers["location"].to_str().unwrap().to_owned();
    assert!(back.ends_with("#runs"), "{back}");
    let page = member.get(back.trim_end_matches("#runs")).await;
    // The progress line names the run for the script and is announced politely; without
    // script the page reloads itself and offers a link.
    assert!(
        page.body
            .contains("<script src=\"/static/runs.js\" defer></script>")
    );
    assert!(page.body.contains("<noscript><meta http-equiv=\"refresh\""));
    let at = page
        .body
        .find("data-run-id=\"")
        .expect("a run id on the page")
        + 13;
    let id: u64 = page.body[at..at + page.body[at..].find('"').unwrap()]
        .parse()
        .unwrap();
    assert!(page.body.contains("aria-live=\"polite\""));
    assert!(page.body.contains(">Refresh</a>"));
    // The script's question, asked with the page's session.
    let status = member.get(&format!("/api/v1/runs/{id}")).await;
    assert_eq!(status.status, 200, "{}", status.body);
    let v = status.json();
    assert!(v["status"] == "running" || v["status"] == "queued", "{v}");
    // The script is served from the server itself, as a script.
    let script = member.get("/static/runs.js").await;
    assert_eq!(script.status, 200);
    assert!(
        script.headers["content-type"]
            .to_str()
            .unwrap()
            .starts_with("text/javascript")
    );
    assert!(script.body.contains("/api/v1/runs/"));
    assert!(script.body.contains("location.reload"));
    // Once the run is done, the page shows its result without a script.
    app.state.runs.hold_runs(false);
    for _ in 0..2000 {
        let v = member.get(&format!("/api/v1/runs/{id}")).await.json();
        if v["status"] == "stored" {
            break;
        }
        tokio::time::sleep(std::time::Duration::from_millis(25)).await;
    }
    let page = member.get(back.trim_end_matches("#runs")).await;
    assert!(!page.body.contains("data-run-id"), "{}", page.body);
    assert!(
        page.body.contains("Stored <time datetime="),
        "{}",
        page.body
    );
}
