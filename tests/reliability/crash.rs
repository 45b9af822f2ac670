//! SIGKILL during a bulk import.
//!
//! The server runs as a child process (`massline serve`). A member uploads a 50,000-row catalog
//! CSV (5,000 invented galaxies, 10 rows each, all pending review) while a second member keeps
//! submitting one-measurement forms and logs every one the server acknowledged (303). At a
//! seeded random moment the server is killed with SIGKILL; then it is started again on the
//! same file and the test checks: `integrity_check` answers "ok", `foreign_key_check` finds
//! nothing, the batch is entirely present (50,000 rows) or entirely absent (0) — entirely
//! present whenever its upload was acknowledged — and every acknowledged form is present with
//! its measurement.
//!
//! Trials: 20 when `MASSLINE_REQUIRE_EXTERNAL=1` (CI) or `MASSLINE_CRASH_TRIALS=N` asks for
//! N, otherwise 3 (each trial imports 50,000 rows in a debug build: several seconds apiece).
//! The kill moments are drawn from a fixed seed over 0 to twice the import's duration as
//! measured on a first, unkilled run, so both outcomes (before and after the commit) occur.

use std::time::{Duration, Instant};

use massline::auth::Role;
use rand::rngs::StdRng;
use rand::{RngExt, SeedableRng};

use crate::support::{
    Browser, ChildServer, assert_sound, borrowed, create_account, external_required,
    new_galaxy_form, open_file,
};

/// Rows in the bulk import (the size of a large group upload; the project's reliability target).
const BATCH_ROWS: usize = 50_000;
/// Rows per galaxy in the batch.
const ROWS_PER_GALAXY: usize = 10;
/// The reference every batch row carries, to count them afterwards.
const BATCH_REFERENCE: &str = "Bulk import trial";
/// Seed of the kill moments and the invented values.
const SEED: u64 = 0x6d61_7373_6c69_6e65;

fn trials() -> usize {
    if let Some(n) = std::env::var("MASSLINE_CRASH_TRIALS")
        .ok()
        .and_then(|v| v.trim().parse::<usize>().ok())
    {
        return n.max(1);
    }
    if external_required() { 20 } else { 3 }
}

/// A 50,000-row catalog CSV of invented galaxies (README "Catalog CSV"): the first row of each
/// galaxy describes it and gives σ_e, the other nine give black-hole masses. Each row's note
/// carries its number, so no two rows have the same content (and the same derived row key).
fn batch_csv(rng: &mut StdRng) -> String {
    let mut text = String::with_capacity(BATCH_ROWS * 64);
    text.push_str(
        "galaxy,morphology,bulge_kind,centre_kind,distance_mpc,distance_err_mpc,distance_method,quantity,value,method,sigma_definition,source_distance_mpc,reference,note\n",
    );
    for g in 0..BATCH_ROWS / ROWS_PER_GALAXY {
        let name = format!("Bulkfield {g:05}");
        let distance_mpc = rng.random_range(8..60);
        let sigma_km_s = rng.random_range(90..330);
        text.push_str(&format!(
            "{name},elliptical,classical,core,{distance_mpc},1,sbf,sigma,{sigma_km_s} ± 9,,sigma_e,,{BATCH_REFERENCE},row {}\n",
            g * ROWS_PER_GALAXY
        ));
        for r in 1..ROWS_PER_GALAXY {
            let mantissa = rng.random_range(11..99);
            let exponent = rng.random_range(7..10);
            text.push_str(&format!(
                "{name},,,,,,,bh_mass,{mantissa}e{exponent} ± {}e{exponent},stellar_dynamics,,{distance_mpc},{BATCH_REFERENCE},row {}\n",
                mantissa / 5,
                g * ROWS_PER_GALAXY + r
            ));
        }
    }
    text
}

/// A fresh catalog file with two members, in its own directory.
async fn prepared_catalog() -> (tempfile::TempDir, std::path::PathBuf) {
    let dir = tempfile::tempdir().unwrap();
    let db_path = dir.path().join("catalog.sqlite");
    let pool = massline::catalog::connect(&db_path).await.unwrap();
    create_account(&pool, "bulk-member", Role::Member).await;
    create_account(&pool, "form-member", Role::Member).await;
    pool.close().await;
    (dir, db_path)
}

/// What one trial saw.
#[derive(Debug)]
struct Outcome {
    kill_after: Duration,
    upload_acknowledged: bool,
    batch_rows: i64,
    acknowledged_forms: usize,
}

/// Upload the batch as a file (multipart field `file`); Ok(reply) or Err when the connection
/// broke.
async fn upload(browser: &mut Browser, csv: &str) -> Result<(u16, String), String> {
    browser
        .try_post_file("/submissions/upload", &[], "file", "bulk.csv", csv)
        .await
        .map(|r| (r.status, r.body))
        .map_err(|e| e.to_string())
}

async fn one_trial(csv: &str, kill_after: Option<Duration>) -> (Outcome, Duration) {
    let (_dir, db_path) = prepared_catalog().await;
    let mut server = ChildServer::start(&db_path).await;
    let mut bulk = Browser::new(&server.address);
    bulk.log_in("bulk-member").await;
    bulk.get("/submissions/upload").await;
    let mut forms = Browser::new(&server.address);
    forms.log_in("form-member").await;

    let writer = tokio::spawn(async move {
        let mut acknowledged = Vec::new();
        for i in 0.. {
            let name = format!("Ackfield {i:05}");
            let fields = new_galaxy_form(&name);
            match forms.try_post("/submissions/new", &borrowed(&fields)).await {
                Ok(r) if r.status == 303 => acknowledged.push(name),
                // Busy while the import holds the lock: not acknowledged, try the next one.
                Ok(r) => assert!(
                    r.status == 503,
                    "a form during the import answered {}:\n{}",
                    r.status,
                    r.body
                ),
                Err(_) => break,
            }
        }
        acknowledged
    });
    let csv_owned = csv.to_owned();
    let started = Instant::now();
    let uploader = tokio::spawn(async move {
        let status = upload(&mut bulk, &csv_owned).await;
        (status, started.elapsed())
    });
    let (upload_status, took) = if let Some(after) = kill_after {
        tokio::time::sleep(after).await;
        server.kill();
        uploader.await.unwrap()
    } else {
        let result = uploader.await.unwrap();
        server.kill();
        result
    };
    if let Ok((status, body)) = &upload_status {
        assert_eq!(*status, 200, "the upload answered {status}:\n{body}");
        assert!(
            body.contains(&format!("Imported {BATCH_ROWS} measurements")),
            "{body}"
        );
    }
    let acknowledged = writer.await.unwrap();

    // Start again on the same file (SQLite recovers from the WAL on open), then inspect it.
    let server = ChildServer::start(&db_path).await;
    let mut conn = open_file(&db_path).await;
    assert_sound(&mut conn, "after SIGKILL and restart").await;
    let batch_rows: i64 =
        sqlx::query_scalar("select count(*) from measurement where reference = ?")
            .bind(BATCH_REFERENCE)
            .fetch_one(&mut conn)
            .await
            .unwrap();
    let batch_galaxies: i64 =
        sqlx::query_scalar("select count(*) from galaxy where name like 'Bulkfield %'")
            .fetch_one(&mut conn)
            .await
            .unwrap();
    let expected_galaxies = i64::try_from(BATCH_ROWS / ROWS_PER_GALAXY).unwrap();
    assert!(
        (batch_rows, batch_galaxies) == (0, 0)
            || (batch_rows, batch_galaxies)
                == (i64::try_from(BATCH_ROWS).unwrap(), expected_galaxies),
        "the batch is half there: {batch_rows} rows, {batch_galaxies} galaxies"
    );
    let upload_acknowledged = upload_status.is_ok();
    if upload_acknowledged {
        assert!(batch_rows > 0, "an acknowledged import is missing");
    }
    for name in &acknowledged {
        let n: i64 = sqlx::query_scalar(
            "select count(*) from measurement m join galaxy g using (galaxy_id) where g.name = ?",
        )
        .bind(name)
        .fetch_one(&mut conn)
        .await
        .unwrap();
        assert_eq!(
            n, 1,
            "the acknowledged form '{name}' is missing after restart"
        );
    }
    drop(server);
    (
        Outcome {
            kill_after: kill_after.unwrap_or(took),
            upload_acknowledged,
            batch_rows,
            acknowledged_forms: acknowledged.len(),
        },
        took,
    )
}

#[tokio::test(flavor = "multi_thread", worker_threads = 2)]
async fn sigkill_during_a_bulk_import_leaves_it_whole_or_absent_and_keeps_acknowledged_writes() {
    let mut rng = StdRng::seed_from_u64(SEED);
    let csv = batch_csv(&mut rng);
    // A first run without a kill measures how long the import takes on this machine.
    let (calibration, import_time) = one_trial(&csv, None).await;
    assert!(calibration.upload_acknowledged);
    assert_eq!(calibration.batch_rows, i64::try_from(BATCH_ROWS).unwrap());
    eprintln!(
        "crash trials: the unkilled upload of {BATCH_ROWS} rows took {:.2} s",
        import_time.as_secs_f64()
    );
    let horizon = import_time.mul_f64(2.0);
    let n = trials();
    let mut outcomes = Vec::with_capacity(n);
    for trial in 0..n {
        // Each trial's moment comes from its own seed, as a fraction of the horizon, so a
        // trial kills at the same point of the import whatever the machine's speed.
        let mut trial_rng = StdRng::seed_from_u64(SEED + 1 + trial as u64);
        let fraction: f64 = trial_rng.random_range(0.0..1.0);
        let kill_after = Duration::from_secs_f64(horizon.as_secs_f64() * fraction);
        let (outcome, _) = one_trial(&csv, Some(kill_after)).await;
        eprintln!(
            "crash trial {trial}: killed after {:.2} s, upload acknowledged: {}, batch rows: {}, acknowledged forms: {}",
            outcome.kill_after.as_secs_f64(),
            outcome.upload_acknowledged,
            outcome.batch_rows,
            outcome.acknowledged_forms
        );
        outcomes.push(outcome);
    }
    let present = outcomes.iter().filter(|o| o.batch_rows > 0).count();
    eprintln!(
        "crash trials: {n} kills, batch present in {present}, absent in {}; {} acknowledged forms checked",
        n - present,
        outcomes.iter().map(|o| o.acknowledged_forms).sum::<usize>()
    );
}
