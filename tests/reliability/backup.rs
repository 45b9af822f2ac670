//! `massline backup` of a live catalog: the copy is sound and consistent while writes keep
//! committing, and a server started on a restored copy holds exactly what the catalog held at
//! the moment of the backup.

use std::collections::BTreeMap;
use std::path::Path;
use std::sync::Arc;
use std::sync::atomic::{AtomicBool, Ordering};

use massline::auth::Role;
use massline::catalog::backup;
use sqlx::Connection;
use tokio::task::JoinHandle;

use crate::support::{
    Browser, ChildServer, TableDigest, TestApp, assert_sound, borrowed, create_account,
    digest_tables, new_galaxy_form, open_file, spawn_with,
};

/// The table of stored review scores: derived from the catalog by the server, not entered.
const DERIVED_SCORES: &str = "submission_score";

/// Writers that keep submitting forms (each a new galaxy with one measurement) until stopped;
/// each returns how many of its forms were acknowledged.
async fn start_writers(
    app: &TestApp,
    writers: usize,
    stop: &Arc<AtomicBool>,
) -> Vec<JoinHandle<usize>> {
    let mut handles = Vec::new();
    for w in 0..writers {
        let name = format!("backup-writer-{w}");
        create_account(&app.pool, &name, Role::Member).await;
        let mut browser = Browser::new(&app.address);
        browser.log_in(&name).await;
        let stop = Arc::clone(stop);
        handles.push(tokio::spawn(async move {
            let mut acknowledged = 0;
            let mut i = 0;
            while !stop.load(Ordering::Relaxed) {
                let fields = new_galaxy_form(&format!("Copyfield {w}-{i:05}"));
                let r = browser.post("/submissions/new", &borrowed(&fields)).await;
                assert_eq!(r.status, 303, "a write during the backup:\n{}", r.body);
                acknowledged += 1;
                i += 1;
            }
            acknowledged
        }));
    }
    handles
}

async fn stop_writers(stop: &AtomicBool, handles: Vec<JoinHandle<usize>>) -> usize {
    stop.store(true, Ordering::Relaxed);
    let mut total = 0;
    for h in handles {
        total += h.await.unwrap();
    }
    total
}

/// A copy is a snapshot of one moment: every submission in it has its galaxy, its one
/// measurement and its audit event (a torn copy would show a submission without them).
async fn assert_snapshot_consistent(path: &Path) -> i64 {
    let mut copy = open_file(path).await;
    assert_sound(&mut copy, "of the copy").await;
    let submissions: i64 = sqlx::query_scalar("select count(*) from submission")
        .fetch_one(&mut copy)
        .await
        .unwrap();
    let incomplete: i64 = sqlx::query_scalar(
        "select count(*) from submission s
          where (select count(*) from measurement m where m.submission_id = s.submission_id) <> 1
             or (select count(*) from audit_event e
                  where e.entity = 'submission' and e.entity_id = s.submission_id
                    and e.action = 'submission_created') <> 1",
    )
    .fetch_one(&mut copy)
    .await
    .unwrap();
    assert_eq!(incomplete, 0, "submissions torn apart in the copy");
    let galaxies: i64 = sqlx::query_scalar("select count(*) from galaxy")
        .fetch_one(&mut copy)
        .await
        .unwrap();
    assert_eq!(galaxies, submissions, "each form made one galaxy");
    copy.close().await.unwrap();
    submissions
}

#[tokio::test(flavor = "multi_thread", worker_threads = 2)]
async fn backups_taken_while_writes_keep_committing_pass_their_checks() {
    let app = spawn_with(|_| {}).await;
    let stop = Arc::new(AtomicBool::new(false));
    let writers = start_writers(&app, 2, &stop).await;
    let mut previous = -1;
    let mut sizes = Vec::new();
    for k in 0..5 {
        // Let some writes land between the copies.
        tokio::time::sleep(std::time::Duration::from_millis(150)).await;
        let target = app.dir.path().join(format!("copy-{k}.db"));
        let report = backup::backup(&app.pool, &target)
            .await
            .expect("the backup succeeds under load");
        let submissions = assert_snapshot_consistent(&target).await;
        assert_eq!(report.rows_of("submission"), Some(submissions));
        assert!(
            submissions >= previous,
            "a later copy has fewer submissions"
        );
        previous = submissions;
        sizes.push((submissions, report.bytes, report.elapsed));
    }
    let acknowledged = stop_writers(&stop, writers).await;
    assert!(
        previous > 0 && acknowledged > 0,
        "the writers made progress"
    );
    eprintln!("backups under load (submissions, bytes, time): {sizes:?}; {acknowledged} writes");
}

#[tokio::test(flavor = "multi_thread", worker_threads = 2)]
async fn a_server_on_a_restored_copy_holds_exactly_the_catalog_of_the_backup_moment() {
    let app = spawn_with(|_| {}).await;
    let stop = Arc::new(AtomicBool::new(false));
    let writers = start_writers(&app, 2, &stop).await;
    tokio::time::sleep(std::time::Duration::from_millis(400)).await;

    // The snapshot: an outside connection takes the write lock (BEGIN IMMEDIATE), so nothing
    // can commit until it lets go; it digests every table, then the backup runs on the
    // server's own pool. Both see the same committed state, although the writers keep going
    // (they wait for the lock, within their busy timeout, and continue afterwards).
    let target = app.dir.path().join("nightly.db");
    let mut snapshot_conn = open_file(&app.db_path).await;
    let snapshot = {
        let mut held = snapshot_conn.begin_with("BEGIN IMMEDIATE").await.unwrap();
        let digests = digest_tables(&mut held).await;
        let report = backup::backup(&app.pool, &target)
            .await
            .expect("the backup succeeds");
        held.rollback().await.unwrap();
        for (table, d) in &digests {
            assert_eq!(report.rows_of(table), Some(d.rows), "table {table}");
        }
        digests
    };
    tokio::time::sleep(std::time::Duration::from_millis(300)).await;
    let acknowledged = stop_writers(&stop, writers).await;
    let live_submissions = crate::support::count(&app.pool, "submission").await;
    assert!(
        live_submissions > snapshot["submission"].rows,
        "writes went on after the backup ({} then {live_submissions})",
        snapshot["submission"].rows
    );
    assert!(snapshot["submission"].rows > 0 && acknowledged > 0);

    // Restore: the server is stopped (here: a new directory the old server never saw), the
    // file is copied to the --db path and the server started on it.
    let restore_dir = tempfile::tempdir().unwrap();
    let restored = restore_dir.path().join("massline.db");
    std::fs::copy(&target, &restored).unwrap();
    {
        let mut copy = open_file(&restored).await;
        let mode: String = sqlx::query_scalar("pragma journal_mode")
            .fetch_one(&mut copy)
            .await
            .unwrap();
        assert_eq!(mode, "delete", "the copy is one self-contained file");
        copy.close().await.unwrap();
    }
    let server = ChildServer::start(&restored).await;
    let mut conn = open_file(&restored).await;
    let mode: String = sqlx::query_scalar("pragma journal_mode")
        .fetch_one(&mut conn)
        .await
        .unwrap();
    assert_eq!(
        mode, "wal",
        "the server puts the restored file back in WAL mode"
    );
    assert_sound(&mut conn, "of the restored catalog").await;
    let restored_digests = digest_tables(&mut conn).await;
    let differing: BTreeMap<&String, (i64, i64)> = snapshot
        .iter()
        // Review scores are derived from the catalog, not entered: the restored server scores
        // the pending submissions the copy had not scored yet, so that table may only grow.
        .filter(|(t, _)| t.as_str() != DERIVED_SCORES)
        .filter(|(t, d)| restored_digests.get(*t) != Some(d))
        .map(|(t, d)| (t, (d.rows, restored_digests.get(t).map_or(-1, |r| r.rows))))
        .collect();
    assert!(
        differing.is_empty(),
        "tables differ between the snapshot and the restored catalog (rows then, now): {differing:?}"
    );
    let scores = |d: &BTreeMap<String, TableDigest>| d.get(DERIVED_SCORES).map_or(0, |t| t.rows);
    assert!(
        scores(&restored_digests) >= scores(&snapshot),
        "the restored catalog lost review scores"
    );
    assert_eq!(
        restored_digests.keys().collect::<Vec<_>>(),
        snapshot.keys().collect::<Vec<_>>()
    );
    // The restored server works: the accounts of the copy log in and see their submissions.
    let mut writer = Browser::new(&server.address);
    writer.log_in("backup-writer-0").await;
    let list = writer.get("/submissions").await;
    assert_eq!(list.status, 200);
    assert!(list.body.contains("Copyfield 0-00000"), "{}", list.body);
    eprintln!(
        "restore: {} tables compared, {} submissions in the copy, {live_submissions} live at the end",
        snapshot.len(),
        snapshot["submission"].rows
    );
}

fn massline_command(args: &[&std::ffi::OsStr]) -> std::process::Output {
    std::process::Command::new(env!("CARGO_BIN_EXE_massline"))
        .args(args)
        .env_remove("MASSLINE_DB")
        .output()
        .expect("the massline binary runs")
}

#[tokio::test(flavor = "multi_thread", worker_threads = 2)]
async fn the_backup_command_copies_a_running_server_and_refuses_to_overwrite_without_force() {
    let app = spawn_with(|_| {}).await;
    create_account(&app.pool, "cli-member", Role::Member).await;
    let target = app.dir.path().join("cli-copy.db");
    let db = app.db_path.as_os_str();
    let run = |extra: &[&str]| {
        let mut args: Vec<&std::ffi::OsStr> =
            vec!["backup".as_ref(), target.as_os_str(), "--db".as_ref(), db];
        args.extend(extra.iter().map(|a| std::ffi::OsStr::new(*a)));
        massline_command(&args)
    };
    let first = tokio::task::block_in_place(|| run(&[]));
    let stdout = String::from_utf8_lossy(&first.stdout);
    assert!(
        first.status.success(),
        "{stdout}\n{}",
        String::from_utf8_lossy(&first.stderr)
    );
    assert!(
        stdout.contains("integrity ok") && stdout.contains("account"),
        "{stdout}"
    );
    assert_snapshot_consistent(&target).await;

    let again = tokio::task::block_in_place(|| run(&[]));
    let stderr = String::from_utf8_lossy(&again.stderr);
    assert!(!again.status.success());
    assert!(
        stderr.contains("already exists") && stderr.contains("--force"),
        "{stderr}"
    );
    let forced = tokio::task::block_in_place(|| run(&["--force"]));
    assert!(
        forced.status.success(),
        "{}",
        String::from_utf8_lossy(&forced.stderr)
    );

    let missing = app.dir.path().join("no-such.db");
    let absent = tokio::task::block_in_place(|| {
        massline_command(&[
            "backup".as_ref(),
            app.dir.path().join("x.db").as_os_str(),
            "--db".as_ref(),
            missing.as_os_str(),
        ])
    });
    let stderr = String::from_utf8_lossy(&absent.stderr);
    assert!(!absent.status.success());
    assert!(stderr.contains("does not exist"), "{stderr}");
    assert!(
        !missing.exists(),
        "the backup did not create the database it was asked to copy"
    );
}
