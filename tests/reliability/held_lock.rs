//! A write while another process holds the database lock beyond the busy timeout answers 503
//! with Retry-After (never 500, never a false success), reads keep answering, and the same
//! writes go through once the lock is released.

use std::time::{Duration, Instant};

use massline::auth::Role;
use sqlx::Connection;

use crate::support::{
    Browser, Reply, TestApp, borrowed, count, create_account, hidden_value, make_token,
    new_galaxy_form, open_file, plain_client, spawn_with,
};

/// The busy timeout of this test's server (the default is 5 s; a short one keeps the test quick).
const BUSY_TIMEOUT_MS: u64 = 300;

async fn written(app: &TestApp) -> (i64, i64, i64) {
    (
        count(&app.pool, "submission").await,
        count(&app.pool, "measurement").await,
        count(&app.pool, "galaxy").await,
    )
}

#[tokio::test]
async fn a_write_during_a_held_lock_answers_503_with_retry_after_and_succeeds_after_release() {
    let app = spawn_with(|s| {
        s.public_read = true;
        s.busy_timeout_ms = BUSY_TIMEOUT_MS;
    })
    .await;
    let member_id = create_account(&app.pool, "lock-member", Role::Member).await;
    let token = make_token(&app.pool, member_id, "read").await;
    let submit_token = make_token(&app.pool, member_id, "submit").await;
    let mut member = Browser::new(&app.address);
    member.log_in("lock-member").await;
    let form_page = member.get("/submissions/new").await;
    assert_eq!(form_page.status, 200);
    let request_key =
        hidden_value(&form_page.body, "request_key").expect("the form carries a request_key");
    let mut form = new_galaxy_form("Lockwait 1");
    form.push(("request_key", request_key));
    let api_body = serde_json::json!({
        "new_galaxy": {"name": "Lockwait 3", "morphology": "elliptical", "bulge_kind": "classical",
                       "centre_kind": "core", "distance_mpc": "18", "distance_err_mpc": "1",
                       "distance_method": "sbf"},
        "measurements": [{"quantity": "sigma", "value": "200 ± 10", "sigma_definition": "sigma_e"}],
        "note": "held-lock test"
    });
    let api = plain_client();
    let post_api = || {
        api.post(format!("{}/api/v1/submissions", app.address))
            .bearer_auth(&submit_token)
            .header("Idempotency-Key", "held-lock-1")
            .json(&api_body)
            .send()
    };
    let csv = "galaxy,morphology,bulge_kind,centre_kind,distance_mpc,distance_err_mpc,distance_method,quantity,value,sigma_definition\n\
               Lockwait 2,elliptical,classical,core,20,1,sbf,sigma,190 ± 9,sigma_e\n";
    let before = written(&app).await;

    // Another process's connection takes the write lock and keeps it (BEGIN IMMEDIATE, as a
    // second program on the same file would).
    let mut outsider = open_file(&app.db_path).await;
    let held = outsider
        .begin_with("BEGIN IMMEDIATE")
        .await
        .expect("the outside connection takes the lock");
    let locked_at = Instant::now();

    let answers = [
        (
            "the submission form",
            member.post("/submissions/new", &borrowed(&form)).await,
        ),
        (
            "the CSV upload",
            member.post("/submissions/upload", &[("csv", csv)]).await,
        ),
    ];
    let api_reply = post_api().await.unwrap();
    let api_answer = Reply {
        status: api_reply.status().as_u16(),
        headers: api_reply.headers().clone(),
        body: api_reply.text().await.unwrap(),
    };
    for (what, reply) in &answers {
        assert_eq!(
            reply.status, 503,
            "{what} during the held lock answered {}:\n{}",
            reply.status, reply.body
        );
        let retry: u64 = reply
            .header("retry-after")
            .parse()
            .unwrap_or_else(|_| panic!("{what}: Retry-After is missing or not seconds"));
        assert!(retry >= 1, "{what}: Retry-After {retry}");
        assert!(
            reply.body.contains("nothing was changed"),
            "{what}: the page says nothing was written:\n{}",
            reply.body
        );
    }
    assert_eq!(
        api_answer.status, 503,
        "the API during the held lock:\n{}",
        api_answer.body
    );
    assert!(
        api_answer
            .header("retry-after")
            .parse::<u64>()
            .is_ok_and(|s| s >= 1),
        "the API's 503 carries Retry-After"
    );
    eprintln!(
        "held lock: the API's 503 came as {}",
        api_answer.header("content-type")
    );
    // Reads keep answering while the lock is held: WAL readers do not wait for writers.
    let anonymous = plain_client();
    for path in ["/", "/galaxies", "/relations/m_sigma", "/catalog.csv"] {
        let r = anonymous
            .get(format!("{}{path}", app.address))
            .send()
            .await
            .unwrap();
        assert_eq!(r.status(), 200, "anonymous GET {path} during the lock");
    }
    for path in ["/submissions", "/submissions/new", "/account"] {
        let r = member.get(path).await;
        assert_eq!(r.status, 200, "member GET {path} during the lock");
    }
    // A token read: the token's last use is recorded on every request (a write), so today it
    // waits for the lock as writes do. Whatever it answers, it is never a 500.
    let r = anonymous
        .get(format!("{}/api/v1/me", app.address))
        .bearer_auth(&token)
        .send()
        .await
        .unwrap();
    let token_read = r.status().as_u16();
    assert!(
        token_read == 200 || (token_read == 503 && r.headers().contains_key("retry-after")),
        "a token read during the lock answered {token_read}"
    );
    eprintln!("held lock: a token read (GET /api/v1/me) answered {token_read}");
    // The lock was held past the busy timeout for every write above.
    assert!(locked_at.elapsed() >= Duration::from_millis(2 * BUSY_TIMEOUT_MS));
    // Never a false success: nothing was written.
    assert_eq!(
        written(&app).await,
        before,
        "nothing was written during the lock"
    );
    held.rollback().await.unwrap();

    // After release the same requests go through, and retrying them again (same request
    // key, same Idempotency-Key) adds nothing.
    let r = member.post("/submissions/new", &borrowed(&form)).await;
    assert_eq!(r.status, 303, "the form after release:\n{}", r.body);
    let location = r.header("location");
    let r = member.post("/submissions/upload", &[("csv", csv)]).await;
    assert_eq!(r.status, 200, "the upload after release:\n{}", r.body);
    assert!(r.body.contains("Imported 1 measurement"), "{}", r.body);
    let r = post_api().await.unwrap();
    assert_eq!(r.status(), 201, "the API after release");
    let after = written(&app).await;
    assert_eq!(
        after,
        (before.0 + 3, before.1 + 3, before.2 + 3),
        "each write went in exactly once"
    );
    let r = member.post("/submissions/new", &borrowed(&form)).await;
    assert_eq!((r.status, r.header("location")), (303, location));
    let r = post_api().await.unwrap();
    assert_eq!(r.status(), 200, "the API replay");
    assert_eq!(written(&app).await, after, "the retries added nothing");
}
