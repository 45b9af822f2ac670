//! Reliability promises of the catalog, tested against the real server: a held database lock,
//! a full database, SIGKILL during a bulk import, many concurrent writers, and backups. Each
//! test starts the app on 127.0.0.1 with a fresh temporary SQLite file (see support.rs).

#[path = "../common/mod.rs"]
mod common;
mod support;

mod backup;
mod concurrency;
mod crash;
mod held_lock;
mod storage_full;
