//! A write the storage refuses answers 507 (full) or 500 (an I/O error) and harms no later
//! request: once there is room again, every write succeeds, and `/healthz` says at each step
//! whether the database can take a write.
//!
//! Two faults. The database's page limit (`--max-db-pages`, SQLite's `max_page_count` on every
//! connection of the server): a write that needs a page beyond it fails with SQLITE_FULL, as on a
//! full disk, without root or a small filesystem. Room comes back by deleting ballast rows the
//! test put in the file beforehand through its own connection, which has no limit. This one
//! fails a statement inside the transaction.
//!
//! The file size limit of the server's process (`ulimit -f`): the write of a commit's
//! write-ahead-log frames past it fails (EFBIG, an I/O error: 500), and SQLite rolls the whole
//! transaction back at `COMMIT`, as it does when a full disk fails the commit (SQLITE_FULL:
//! 507). Room comes back by lifting the limit (`prlimit`). Without the pool's check
//! (`catalog::pool_options`), a connection whose commit failed so goes back to the pool still
//! counted as inside its transaction, and every later write on it fails with a 500 until a
//! restart.

use std::time::{Duration, Instant};

use massline::auth::Role;
use massline::catalog::health::RESERVE_BYTES;
use sqlx::Connection;

use crate::support::{
    Browser, ChildServer, Reply, TestApp, assert_sound, create_account, make_token, open_file,
    plain_client, spawn_on,
};

/// Rows of ballast, about one 4096-byte page each: far more room, once deleted, than the
/// writes after it need.
const BALLAST_ROWS: i64 = 1500;

/// SQLite's page size for a new database (the schema does not change it).
const PAGE_BYTES: i64 = 4096;

/// GET a path of a server as (status, body).
async fn get(address: &str, path: &str) -> (u16, String) {
    let r = plain_client()
        .get(format!("{address}{path}"))
        .send()
        .await
        .expect("the request is answered");
    (r.status().as_u16(), r.text().await.unwrap())
}

/// `/healthz` as (status, body).
async fn health(app: &TestApp) -> (u16, String) {
    get(&app.address, "/healthz").await
}

/// Poll `/healthz` until it answers `status` (its answer may be up to a second old); panics
/// with the last answer after 30 s.
async fn health_becomes(app: &TestApp, status: u16, when: &str) -> String {
    health_of_becomes(&app.address, status, when).await
}

/// [`health_becomes`] for a server by its address.
async fn health_of_becomes(address: &str, status: u16, when: &str) -> String {
    let started = Instant::now();
    loop {
        let (got, body) = get(address, "/healthz").await;
        if got == status {
            return body;
        }
        assert!(
            started.elapsed() < Duration::from_secs(30),
            "/healthz {when} still answered {got} instead of {status}: {body}"
        );
        tokio::time::sleep(Duration::from_millis(100)).await;
    }
}

/// A note of the longest allowed length in two-byte characters: about 4000 bytes, so each
/// submission needs about a page of its own and the room left fills in a few submissions.
fn long_note() -> String {
    "é".repeat(massline::catalog::intake::NOTE_MAX_CHARS)
}

/// POST one submission through the API (a new galaxy with one σ_e measurement, invented).
async fn submit(address: &str, token: &str, n: usize) -> Reply {
    let body = serde_json::json!({
        "new_galaxy": {"name": format!("X 214-{n}"), "morphology": "elliptical",
                       "bulge_kind": "classical", "centre_kind": "core", "distance_mpc": "18",
                       "distance_err_mpc": "1", "distance_method": "sbf"},
        "measurements": [{"quantity": "sigma", "value": "200 ± 10", "sigma_definition": "sigma_e"}],
        "note": long_note()
    });
    let r = plain_client()
        .post(format!("{address}/api/v1/submissions"))
        .bearer_auth(token)
        .header("Idempotency-Key", format!("storage-full-{n}"))
        .json(&body)
        .send()
        .await
        .expect("the request is answered");
    Reply {
        status: r.status().as_u16(),
        headers: r.headers().clone(),
        body: r.text().await.unwrap(),
    }
}

/// Send 100 more submissions (numbered after `*n`) and assert that all 100 answer 201.
async fn hundred_writes_succeed(address: &str, token: &str, n: &mut usize, when: &str) {
    let mut answers = Vec::new();
    for _ in 0..100 {
        *n += 1;
        let r = submit(address, token, *n).await;
        answers.push((r.status, r.body));
    }
    let failed: Vec<_> = answers
        .iter()
        .filter(|(status, _)| *status != 201)
        .collect();
    assert_eq!(
        answers.len() - failed.len(),
        100,
        "writes {when}: {} failed, the first: {:?}",
        failed.len(),
        failed.first()
    );
}

/// Assert that the file holds `expected` submissions (every 201 stored once, no 507 stored)
/// and is sound, then close the connection.
async fn assert_stored_once(mut outsider: sqlx::SqliteConnection, expected: i64, when: &str) {
    let stored_rows: i64 = sqlx::query_scalar("select count(*) from submission")
        .fetch_one(&mut outsider)
        .await
        .unwrap();
    assert_eq!(
        stored_rows, expected,
        "every 201 stored once, no 507 stored"
    );
    assert_sound(&mut outsider, when).await;
    outsider.close().await.unwrap();
}

#[tokio::test]
async fn after_the_database_was_full_every_write_succeeds_and_the_health_check_tells_the_truth() {
    let dir = tempfile::tempdir().unwrap();
    let db_path = dir.path().join("catalog.sqlite");
    // The schema, then the ballast.
    let pool = massline::catalog::connect(&db_path).await.unwrap();
    sqlx::query("create table ballast (b blob not null)")
        .execute(&pool)
        .await
        .unwrap();
    sqlx::query(sqlx::AssertSqlSafe(format!(
        "with recursive n(i) as (select 1 union all select i + 1 from n where i < {BALLAST_ROWS}) \
         insert into ballast select randomblob(3000) from n"
    )))
    .execute(&pool)
    .await
    .unwrap();
    let pages: i64 = sqlx::query_scalar("pragma page_count")
        .fetch_one(&pool)
        .await
        .unwrap();
    pool.close().await;
    // Room for the health check's reserve and a little more.
    let reserve_pages = i64::try_from(RESERVE_BYTES).unwrap() / PAGE_BYTES;
    let limit = u32::try_from(pages + reserve_pages + 60).unwrap();
    let app = spawn_on(dir, db_path.clone(), |s| {
        s.max_db_pages = Some(limit);
        s.api_rate_per_minute = 0;
    })
    .await;
    let member_id = create_account(&app.pool, "member1", Role::Member).await;
    let token = make_token(&app.pool, member_id, "submit").await;

    let (status, body) = health(&app).await;
    assert_eq!((status, body.as_str()), (200, "ok\n"), "/healthz before");
    let (status, body) = app.get("/livez").await;
    assert_eq!((status, body.as_str()), (200, "ok\n"), "/livez before");

    // Most of the room left goes to more ballast, so that a few dozen submissions fill the rest.
    let mut outsider = open_file(&db_path).await;
    let pages_now: i64 = sqlx::query_scalar("pragma page_count")
        .fetch_one(&mut outsider)
        .await
        .unwrap();
    sqlx::query(sqlx::AssertSqlSafe(format!(
        "with recursive n(i) as (select 1 union all select i + 1 from n where i < {}) \
         insert into ballast select randomblob(3000) from n",
        i64::from(limit) - pages_now - 10
    )))
    .execute(&mut outsider)
    .await
    .unwrap();

    // Fill: submissions until the page limit refuses one.
    let mut n = 0;
    let mut stored = 0;
    let full = loop {
        n += 1;
        assert!(n < 5000, "the database never filled up");
        let r = submit(&app.address, &token, n).await;
        match r.status {
            201 => stored += 1,
            507 => break r,
            other => panic!("submission {n} while filling answered {other}: {}", r.body),
        }
    };
    assert!(stored > 0, "some submissions fitted before the limit");
    assert!(
        full.body.contains("storage is full") && full.body.contains("freed disk space"),
        "the 507 says what happened and what to do: {}",
        full.body
    );
    eprintln!("storage full: {stored} submissions fitted, number {n} answered 507");

    // While full: every write answers 507 (never 500), the health check 503, liveness 200.
    for _ in 0..8 {
        n += 1;
        let r = submit(&app.address, &token, n).await;
        assert_eq!(r.status, 507, "a write while full: {}", r.body);
    }
    let reason = health_becomes(&app, 503, "while full").await;
    assert!(reason.contains("page limit"), "the reason: {reason}");
    assert_eq!(app.get("/livez").await.0, 200, "/livez while full");
    let mut member = Browser::new(&app.address);
    let login = member.login("member1", crate::common::TEST_PASSWORD).await;
    assert!(
        login.status == 303 || login.status == 507,
        "a login while full answered {}: {}",
        login.status,
        login.body
    );

    // Free: delete the ballast through the test's own connection (no page limit on it).
    sqlx::query("delete from ballast")
        .execute(&mut outsider)
        .await
        .unwrap();
    health_becomes(&app, 200, "after the ballast was deleted").await;

    // Every write after the fault cleared succeeds: 100 of 100.
    hundred_writes_succeed(&app.address, &token, &mut n, "after room came back").await;
    member.log_in("member1").await;
    let (status, body) = health(&app).await;
    assert_eq!((status, body.as_str()), (200, "ok\n"), "/healthz after");

    assert_stored_once(outsider, stored + 100, "after the database was full").await;
}

/// The server's file size limit, in blocks of 512 bytes (`ulimit -f`): 150 KiB, room in the
/// write-ahead log for a few submissions.
const FILE_SIZE_BLOCKS: u64 = 300;

#[tokio::test]
async fn after_commits_failed_at_the_file_size_limit_every_write_succeeds_once_it_is_lifted() {
    let dir = tempfile::tempdir().unwrap();
    let db_path = dir.path().join("catalog.sqlite");
    let pool = massline::catalog::connect(&db_path).await.unwrap();
    let member_id = create_account(&pool, "member1", Role::Member).await;
    let token = make_token(&pool, member_id, "submit").await;
    // Closing the last connection moves the log into the file and removes it.
    pool.close().await;
    let server = ChildServer::start_with_file_size_limit(&db_path, Some(FILE_SIZE_BLOCKS)).await;
    let address = server.address.clone();

    // The health check sees the limit from the start: less than its reserve.
    let reason = health_of_becomes(&address, 503, "under the file size limit").await;
    assert!(reason.contains("file size limit"), "the reason: {reason}");
    assert_eq!(
        get(&address, "/livez").await.0,
        200,
        "/livez under the limit"
    );

    let mut n = 0;
    let mut stored = 0;
    let failed_at = loop {
        n += 1;
        assert!(n < 1000, "the file size limit was never reached");
        let r = submit(&address, &token, n).await;
        match r.status {
            201 => stored += 1,
            500 | 507 => break r.status,
            other => panic!(
                "submission {n} before the limit answered {other}: {}",
                r.body
            ),
        }
    };
    assert!(stored > 0, "some submissions fitted below the limit");
    eprintln!("file size limit: {stored} submissions fitted, number {n} answered {failed_at}");
    for _ in 0..8 {
        n += 1;
        let r = submit(&address, &token, n).await;
        assert!(
            r.status == 500 || r.status == 507,
            "a write while at the limit answered {}: {}",
            r.status,
            r.body
        );
    }

    // Lift the limit of the running server.
    let lifted = std::process::Command::new("prlimit")
        .arg("--pid")
        .arg(server.pid().to_string())
        .arg("--fsize=unlimited")
        .status()
        .expect("prlimit (util-linux) runs");
    assert!(lifted.success(), "prlimit lifted the limit");
    health_of_becomes(&address, 200, "after the limit was lifted").await;

    hundred_writes_succeed(&address, &token, &mut n, "after the limit was lifted").await;
    let (status, body) = get(&address, "/healthz").await;
    assert_eq!((status, body.as_str()), (200, "ok\n"), "/healthz after");

    assert_stored_once(
        open_file(&db_path).await,
        stored + 100,
        "after commits failed at the file size limit",
    )
    .await;
    drop(server);
}
