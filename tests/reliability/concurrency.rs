//! 100 concurrent clients submit 10,000 measurements, half through the JSON API
//! (`POST /api/v1/submissions`, a submit-scoped token, an `Idempotency-Key`) and half through
//! the form (a session, its anti-forgery token and the hidden `request_key` of a freshly
//! loaded form): none is lost, none is duplicated, no request answers a server error; then
//! every request is sent again with the same keys, which adds nothing.

use std::collections::BTreeSet;
use std::sync::Arc;
use std::time::Instant;

use massline::auth::Role;

use crate::support::{
    Browser, assert_sound, count, create_account, hidden_value, make_token, open_file,
    plain_client, spawn_with,
};

/// Clients of each kind (API and form).
const CLIENTS_PER_KIND: usize = 50;
/// Submissions per client.
const SUBMISSIONS_PER_CLIENT: usize = 25;
/// Measurements per submission (the form has four measurement rows).
const MEASUREMENTS_PER_SUBMISSION: usize = 4;

/// The `i`-th black-hole mass of a client's submission: distinct values, so no two requests
/// carry the same content (invented numbers).
fn mass_text(client: usize, submission: usize, row: usize) -> String {
    let mantissa =
        1.0 + f64::from(u32::try_from((client * 131 + submission * 7 + row) % 89).unwrap()) / 10.0;
    format!("{mantissa:.1}e8 ± 0.3e8")
}

/// One acknowledged submission: who sent it, and the submission number the server gave.
#[derive(Debug, Clone)]
struct Ack {
    submission_id: i64,
    replay: Replay,
}

/// What it takes to send the same request again.
#[derive(Debug, Clone)]
enum Replay {
    Api {
        key: String,
        body: serde_json::Value,
    },
    Form {
        fields: Vec<(String, String)>,
    },
}

fn api_body(slug: &str, client: usize, submission: usize) -> serde_json::Value {
    let measurements: Vec<serde_json::Value> = (0..MEASUREMENTS_PER_SUBMISSION)
        .map(|row| {
            serde_json::json!({
                "quantity": "bh_mass",
                "value": mass_text(client, submission, row),
                "method": "stellar_dynamics",
                "source_distance_mpc": "16.5",
                "resolution_arcsec": "0.1",
                "reference": format!("Concurrent client {client}"),
                "note": ""
            })
        })
        .collect();
    serde_json::json!({
        "galaxy": slug,
        "measurements": measurements,
        "note": format!("api client {client}, submission {submission}")
    })
}

fn form_fields(
    slug: &str,
    client: usize,
    submission: usize,
    request_key: &str,
) -> Vec<(String, String)> {
    let mut fields = vec![
        ("galaxy".to_owned(), slug.to_owned()),
        ("request_key".to_owned(), request_key.to_owned()),
        ("rows".to_owned(), MEASUREMENTS_PER_SUBMISSION.to_string()),
        (
            "note".to_owned(),
            format!("form client {client}, submission {submission}"),
        ),
    ];
    for row in 0..MEASUREMENTS_PER_SUBMISSION {
        for (column, value) in [
            ("quantity", "bh_mass".to_owned()),
            ("value", mass_text(client + 1000, submission, row)),
            ("scale", "auto".to_owned()),
            ("method", "stellar_dynamics".to_owned()),
            ("source_distance_mpc", "16.5".to_owned()),
            ("resolution_arcsec", "0.1".to_owned()),
            ("reference", format!("Concurrent form client {client}")),
        ] {
            fields.push((format!("m{row}_{column}"), value));
        }
    }
    fields
}

fn borrowed(fields: &[(String, String)]) -> Vec<(&str, &str)> {
    fields
        .iter()
        .map(|(k, v)| (k.as_str(), v.as_str()))
        .collect()
}

fn id_from_location(location: &str, prefix: &str) -> i64 {
    location
        .strip_prefix(prefix)
        .and_then(|s| s.parse().ok())
        .unwrap_or_else(|| panic!("unexpected Location '{location}'"))
}

async fn post_api(
    client: &reqwest::Client,
    address: &str,
    token: &str,
    key: &str,
    body: &serde_json::Value,
) -> (u16, serde_json::Value) {
    let response = client
        .post(format!("{address}/api/v1/submissions"))
        .bearer_auth(token)
        .header("Idempotency-Key", key)
        .json(body)
        .send()
        .await
        .expect("the request is answered");
    let status = response.status().as_u16();
    let text = response.text().await.unwrap();
    let json = serde_json::from_str(&text)
        .unwrap_or_else(|_| panic!("answer {status} is not JSON: {text}"));
    (status, json)
}

#[tokio::test(flavor = "multi_thread", worker_threads = 2)]
async fn a_hundred_concurrent_clients_lose_nothing_duplicate_nothing_and_replays_add_nothing() {
    let app = spawn_with(|s| s.demo = true).await;
    let slugs: Arc<Vec<String>> = Arc::new(
        massline::catalog::submissions::galaxy_names(&app.pool)
            .await
            .unwrap()
            .into_iter()
            .map(|(_, _, slug)| slug)
            .collect(),
    );
    assert!(!slugs.is_empty());
    let before = (
        count(&app.pool, "submission").await,
        count(&app.pool, "measurement").await,
    );

    // Accounts, tokens and sessions first (password hashing is deliberately slow).
    let mut api_clients = Vec::new();
    let mut form_clients = Vec::new();
    for c in 0..CLIENTS_PER_KIND {
        let api_account = create_account(&app.pool, &format!("api-client-{c}"), Role::Member).await;
        api_clients.push(make_token(&app.pool, api_account, "submit").await);
        create_account(&app.pool, &format!("form-client-{c}"), Role::Member).await;
        let mut browser = Browser::new(&app.address);
        browser.log_in(&format!("form-client-{c}")).await;
        form_clients.push(browser);
    }

    let started = Instant::now();
    let mut tasks = Vec::new();
    for (c, token) in api_clients.iter().cloned().enumerate() {
        let address = app.address.clone();
        let slugs = Arc::clone(&slugs);
        tasks.push(tokio::spawn(async move {
            let client = plain_client();
            let mut acks = Vec::new();
            for s in 0..SUBMISSIONS_PER_CLIENT {
                let key = format!("api-{c}-{s}");
                let body = api_body(&slugs[(c + s) % slugs.len()], c, s);
                let (status, answer) = post_api(&client, &address, &token, &key, &body).await;
                assert_eq!(status, 201, "API submission {key}: {answer}");
                assert_eq!(answer["replayed"], false, "{answer}");
                let submission_id = answer["submission_id"].as_i64().expect("a number");
                acks.push(Ack {
                    submission_id,
                    replay: Replay::Api { key, body },
                });
            }
            (token, None, acks)
        }));
    }
    for (c, mut browser) in form_clients.into_iter().enumerate() {
        let slugs = Arc::clone(&slugs);
        tasks.push(tokio::spawn(async move {
            let mut acks = Vec::new();
            for s in 0..SUBMISSIONS_PER_CLIENT {
                let page = browser.get("/submissions/new").await;
                assert_eq!(page.status, 200, "{}", page.body);
                let key = hidden_value(&page.body, "request_key")
                    .expect("the form carries a request_key");
                let fields = form_fields(&slugs[(c + s) % slugs.len()], c, s, &key);
                let r = browser.post("/submissions/new", &borrowed(&fields)).await;
                assert_eq!(r.status, 303, "form submission {c}/{s}:\n{}", r.body);
                acks.push(Ack {
                    submission_id: id_from_location(&r.header("location"), "/submissions/"),
                    replay: Replay::Form { fields },
                });
            }
            (String::new(), Some(browser), acks)
        }));
    }
    let mut finished = Vec::new();
    for t in tasks {
        finished.push(t.await.expect("no client failed"));
    }
    let first_round = started.elapsed();

    let acks: Vec<&Ack> = finished.iter().flat_map(|(_, _, a)| a).collect();
    let expected_submissions = 2 * CLIENTS_PER_KIND * SUBMISSIONS_PER_CLIENT;
    let expected_measurements = expected_submissions * MEASUREMENTS_PER_SUBMISSION;
    assert_eq!(acks.len(), expected_submissions);
    let distinct: BTreeSet<i64> = acks.iter().map(|a| a.submission_id).collect();
    assert_eq!(
        distinct.len(),
        expected_submissions,
        "two requests got the same submission"
    );
    let after_first = (
        count(&app.pool, "submission").await,
        count(&app.pool, "measurement").await,
    );
    assert_eq!(
        after_first,
        (
            before.0 + i64::try_from(expected_submissions).unwrap(),
            before.1 + i64::try_from(expected_measurements).unwrap()
        ),
        "lost or duplicated rows"
    );
    let short: i64 = sqlx::query_scalar(
        "select count(*) from submission s
          where s.submission_id > ?
            and (select count(*) from measurement m where m.submission_id = s.submission_id) <> ?",
    )
    .bind(before.0)
    .bind(i64::try_from(MEASUREMENTS_PER_SUBMISSION).unwrap())
    .fetch_one(&app.pool)
    .await
    .unwrap();
    assert_eq!(short, 0, "a submission lost or gained measurements");

    // Replay every request with the same keys, again 100 clients at once.
    let started = Instant::now();
    let mut tasks = Vec::new();
    for (token, browser, acks) in finished {
        let address = app.address.clone();
        tasks.push(tokio::spawn(async move {
            let client = plain_client();
            let mut browser = browser;
            for ack in acks {
                match &ack.replay {
                    Replay::Api { key, body } => {
                        let (status, answer) = post_api(&client, &address, &token, key, body).await;
                        assert_eq!(status, 200, "replay of {key}: {answer}");
                        assert_eq!(answer["replayed"], true, "{answer}");
                        assert_eq!(answer["submission_id"].as_i64(), Some(ack.submission_id));
                    }
                    Replay::Form { fields } => {
                        let browser = browser.as_mut().expect("a form client");
                        let r = browser.post("/submissions/new", &borrowed(fields)).await;
                        assert_eq!(r.status, 303, "form replay:\n{}", r.body);
                        assert_eq!(
                            id_from_location(&r.header("location"), "/submissions/"),
                            ack.submission_id
                        );
                    }
                }
            }
        }));
    }
    for t in tasks {
        t.await.expect("no replay failed");
    }
    let replay_round = started.elapsed();
    let after_replay = (
        count(&app.pool, "submission").await,
        count(&app.pool, "measurement").await,
    );
    assert_eq!(after_replay, after_first, "a replay added rows");
    let mut conn = open_file(&app.db_path).await;
    assert_sound(&mut conn, "after the concurrent writes").await;
    eprintln!(
        "concurrency: {expected_submissions} submissions ({expected_measurements} measurements) in {:.1} s, replayed in {:.1} s",
        first_round.as_secs_f64(),
        replay_round.as_secs_f64()
    );
}
