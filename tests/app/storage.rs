//! The storage promises: SQLite settings, schema range checks, all-or-nothing demo load.

use massline::catalog::model::{NewMeasurement, Quantity};
use massline::catalog::{self, demo, galaxies, history, model};

use crate::helpers::{spawn_app, spawn_demo_app, spawn_with};

#[tokio::test]
async fn database_runs_wal_full_foreign_keys_and_a_fixed_sqlite() {
    let app = spawn_app().await;
    let mode: String = sqlx::query_scalar("pragma journal_mode")
        .fetch_one(&app.pool)
        .await
        .unwrap();
    assert_eq!(mode, "wal");
    let sync: i64 = sqlx::query_scalar("pragma synchronous")
        .fetch_one(&app.pool)
        .await
        .unwrap();
    assert_eq!(sync, 2, "synchronous=FULL is 2");
    let fk: i64 = sqlx::query_scalar("pragma foreign_keys")
        .fetch_one(&app.pool)
        .await
        .unwrap();
    assert_eq!(fk, 1);
    let timeout: i64 = sqlx::query_scalar("pragma busy_timeout")
        .fetch_one(&app.pool)
        .await
        .unwrap();
    assert_eq!(timeout, 5000);
    let version = catalog::sqlite_version(&app.pool).await.unwrap();
    assert!(
        catalog::parse_version(&version).unwrap() >= catalog::MIN_SQLITE_VERSION,
        "SQLite {version} lacks the WAL-reset fix"
    );
    assert!(app.db_path.exists());
}

fn good_mass() -> NewMeasurement {
    NewMeasurement {
        quantity: Quantity::BlackHoleMass,
        log_value: 8.2,
        err_minus_dex: 0.1,
        err_plus_dex: 0.1,
        err_dex: 0.1,
        upper_limit: false,
        limit_confidence_sigma: None,
        method: "stellar_dynamics".into(),
        sigma_definition: String::new(),
        aperture: String::new(),
        band: String::new(),
        source_distance_mpc: Some(16.5),
        resolution_arcsec: Some(0.1),
        reference: "test".into(),
        note: String::new(),
        value_text: "1.6e8 ± 0.4e8".into(),
        value_scale: "linear".into(),
        virial: None,
    }
}

fn new_galaxy(name: &str) -> model::NewGalaxy {
    model::NewGalaxy {
        name: name.into(),
        morphology: model::Morphology::Elliptical,
        bulge_kind: model::BulgeKind::Classical,
        centre_kind: model::CentreKind::Core,
        distance_mpc: 16.5,
        distance_err_mpc: 0.8,
        distance_method: model::DistanceMethod::Sbf,
        activity: massline::catalog::model::Activity::Unknown,
    }
}

#[tokio::test]
async fn schema_range_checks_refuse_impossible_rows() {
    let app = spawn_app().await;
    let mut tx = catalog::begin_write(&app.pool).await.unwrap();
    let g = galaxies::insert_galaxy(&mut tx, &new_galaxy("Tesk 1"))
        .await
        .unwrap();
    let s = galaxies::insert_submission(
        &mut tx,
        None,
        galaxies::SubmissionSource::Import,
        model::SubmissionState::Accepted,
        "",
        None,
    )
    .await
    .unwrap();
    galaxies::insert_measurement(&mut tx, g.galaxy_id, s, &good_mass(), &row_key("good"))
        .await
        .expect("a good row is stored");
    tx.commit().await.unwrap();

    let bad: Vec<(&str, NewMeasurement)> = vec![
        (
            "log M_BH above 11.5",
            NewMeasurement {
                log_value: 12.0,
                ..good_mass()
            },
        ),
        (
            "log M_BH below 3",
            NewMeasurement {
                log_value: 2.5,
                ..good_mass()
            },
        ),
        (
            "sigma above 600 km/s",
            NewMeasurement {
                quantity: Quantity::VelocityDispersion,
                log_value: 2.9,
                method: String::new(),
                sigma_definition: "sigma_e".into(),
                ..good_mass()
            },
        ),
        (
            "negative error",
            NewMeasurement {
                err_minus_dex: -0.1,
                ..good_mass()
            },
        ),
        (
            "error above 2 dex",
            NewMeasurement {
                err_plus_dex: 2.5,
                ..good_mass()
            },
        ),
        (
            "limit with error bars",
            NewMeasurement {
                upper_limit: true,
                ..good_mass()
            },
        ),
        (
            "unknown mass method",
            NewMeasurement {
                method: "guess".into(),
                ..good_mass()
            },
        ),
        (
            "sigma without definition",
            NewMeasurement {
                quantity: Quantity::VelocityDispersion,
                log_value: 2.3,
                method: String::new(),
                ..good_mass()
            },
        ),
        (
            "luminosity without band",
            NewMeasurement {
                quantity: Quantity::BulgeLuminosity,
                log_value: 10.5,
                method: String::new(),
                ..good_mass()
            },
        ),
        (
            "resolution of 0 arcsec",
            NewMeasurement {
                resolution_arcsec: Some(0.0),
                ..good_mass()
            },
        ),
        (
            "source distance above 2000 Mpc",
            NewMeasurement {
                source_distance_mpc: Some(5000.0),
                ..good_mass()
            },
        ),
        (
            "limit confidence of 5 sigma",
            NewMeasurement {
                upper_limit: true,
                err_minus_dex: 0.0,
                err_plus_dex: 0.0,
                err_dex: 0.0,
                limit_confidence_sigma: Some(5.0),
                ..good_mass()
            },
        ),
    ];
    for (why, m) in bad {
        let mut tx = catalog::begin_write(&app.pool).await.unwrap();
        let result = galaxies::insert_measurement(&mut tx, g.galaxy_id, s, &m, &row_key(why)).await;
        assert!(result.is_err(), "the schema accepted a row with {why}");
        tx.rollback().await.unwrap();
    }
    let bad_galaxies = [
        model::NewGalaxy {
            distance_mpc: 0.001,
            ..new_galaxy("Tesk 2")
        },
        model::NewGalaxy {
            distance_mpc: 3000.0,
            ..new_galaxy("Tesk 3")
        },
        model::NewGalaxy {
            distance_err_mpc: 20.0,
            ..new_galaxy("Tesk 4")
        },
        new_galaxy("Tesk 1"), // duplicate name
    ];
    for g in bad_galaxies {
        let mut tx = catalog::begin_write(&app.pool).await.unwrap();
        assert!(
            galaxies::insert_galaxy(&mut tx, &g).await.is_err(),
            "accepted {g:?}"
        );
        tx.rollback().await.unwrap();
    }
    // A measurement of a galaxy that does not exist: the foreign key refuses it.
    let mut tx = catalog::begin_write(&app.pool).await.unwrap();
    assert!(
        galaxies::insert_measurement(&mut tx, 9999, s, &good_mass(), &row_key("orphan"))
            .await
            .is_err()
    );
    tx.rollback().await.unwrap();
    let n: i64 = sqlx::query_scalar("select count(*) from measurement")
        .fetch_one(&app.pool)
        .await
        .unwrap();
    assert_eq!(n, 1, "only the good row is stored");
}

#[tokio::test]
async fn audit_events_cannot_be_changed_or_deleted() {
    let app = spawn_demo_app().await;
    // The demo load is one catalog event; the demo accounts add one account event each.
    let events = massline::catalog::accounts::recent_catalog_events(&app.pool, 5)
        .await
        .unwrap();
    assert_eq!(events.len(), 1);
    assert_eq!(events[0].action, "demo_loaded");
    let all = history::recent_events(&app.pool, 10).await.unwrap();
    assert_eq!(all.len(), 4);
    assert!(all[..3].iter().all(|e| e.action == "account_created"));
    assert!(
        sqlx::query("update audit_event set summary = 'x'")
            .execute(&app.pool)
            .await
            .is_err()
    );
    assert!(
        sqlx::query("delete from audit_event")
            .execute(&app.pool)
            .await
            .is_err()
    );
}

#[tokio::test]
async fn demo_load_runs_once_and_a_second_run_changes_nothing() {
    let app = spawn_demo_app().await;
    let galaxies_before = galaxies::count(&app.pool).await.unwrap();
    let version_before = history::current_version(&app.pool).await.unwrap();
    assert!(galaxies_before >= 80);
    // Run the load again on the same database, directly and through a second server start.
    let again = demo::load_demo(&app.pool).await.unwrap();
    assert_eq!(
        again,
        demo::DemoLoad::Skipped {
            existing: galaxies_before
        }
    );
    let path = app.db_path.clone();
    let second = spawn_with(move |s| {
        s.db_path = path;
        s.demo = true;
    })
    .await;
    assert_eq!(
        galaxies::count(&second.pool).await.unwrap(),
        galaxies_before
    );
    assert_eq!(
        history::current_version(&second.pool).await.unwrap(),
        version_before
    );
    let measurements: i64 = sqlx::query_scalar("select count(*) from measurement")
        .fetch_one(&app.pool)
        .await
        .unwrap();
    let parsed = demo::parse_demo(demo::DEMO_GALAXIES_CSV, demo::DEMO_MEASUREMENTS_CSV).unwrap();
    assert_eq!(measurements as usize, parsed.measurements.len());
}

#[tokio::test]
async fn a_failing_demo_load_leaves_nothing_behind() {
    let app = spawn_app().await;
    // Make the load fail part-way: a one-connection pool whose database may not grow beyond a
    // few pages (page limits are per connection), so an insert hits SQLITE_FULL mid-transaction.
    let options = sqlx::sqlite::SqliteConnectOptions::new()
        .filename(&app.db_path)
        .pragma("max_page_count", "40");
    let small = sqlx::sqlite::SqlitePoolOptions::new()
        .max_connections(1)
        .connect_with(options)
        .await
        .unwrap();
    let err = demo::load_demo(&small)
        .await
        .expect_err("the demo should not fit in 40 pages");
    let full = err
        .chain()
        .filter_map(|e| e.downcast_ref::<sqlx::Error>())
        .any(|e| catalog::classify(e) == catalog::DbFailure::Full);
    assert!(full, "expected SQLITE_FULL, got {err:#}");
    assert_eq!(
        galaxies::count(&app.pool).await.unwrap(),
        0,
        "nothing half-written"
    );
    assert_eq!(history::current_version(&app.pool).await.unwrap(), 0);
    // And the catalog still works afterwards.
    assert!(matches!(
        demo::load_demo(&app.pool).await.unwrap(),
        demo::DemoLoad::Loaded { .. }
    ));
}

fn row_key(key: &str) -> galaxies::RowKey {
    galaxies::RowKey {
        key: key.to_owned(),
        sha256: None,
    }
}
