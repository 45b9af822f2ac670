//! Calibrating and adopting the mean virial factor ⟨f⟩ (`/virial-factor`,
//! `/api/v1/virial-factor`): on an invented catalog of quiescent galaxies drawn from a known
//! M–σ relation and reverberation AGN made with a known ⟨f⟩, entered through the submission
//! path with their lag and width cells.

use std::collections::HashSet;

use massline::auth::Role;
use massline::catalog::galaxies::SubmissionSource;
use massline::catalog::history;
use massline::catalog::model::{
    Activity, BulgeKind, CentreKind, DistanceMethod, Morphology, NewGalaxy, NewMeasurement,
};
use massline::catalog::submissions::{self, GalaxyChoice};
use serde_json::Value;

use crate::helpers::{TestApp, spawn_app};

/// The invented relation: log M = ALPHA + BETA log10(σ / 200 km/s) (log10 M☉).
const ALPHA: f64 = 8.3;
const BETA: f64 = 5.0;
/// The invented AGN's log ⟨f⟩: their virial products lie this far below the relation.
const TRUE_LOG_F: f64 = 0.70;
const N_QUIESCENT: usize = 40;
const N_AGN: usize = 12;

fn measurement(cells: &[(&str, String)]) -> NewMeasurement {
    massline::catalog::intake::measurement_from_cells("test", 0, &|c| {
        cells
            .iter()
            .find(|(k, _)| *k == c)
            .map_or("", |(_, v)| v.as_str())
    })
    .expect("a valid measurement")
}

fn galaxy(name: String, activity: Activity) -> GalaxyChoice {
    GalaxyChoice::New(NewGalaxy {
        name,
        morphology: Morphology::Elliptical,
        bulge_kind: BulgeKind::Classical,
        centre_kind: CentreKind::Unknown,
        distance_mpc: 20.0,
        distance_err_mpc: 1.0,
        distance_method: DistanceMethod::Sbf,
        activity,
    })
}

fn sigma_cells(sigma_km_s: f64) -> NewMeasurement {
    measurement(&[
        ("quantity", "sigma".into()),
        (
            "value",
            format!("{sigma_km_s:.2} ± {:.2}", 0.05 * sigma_km_s),
        ),
        ("scale", "linear".into()),
        ("sigma_definition", "sigma_e".into()),
        ("aperture", "r_e".into()),
        ("reference", "Invented et al. 2031".into()),
    ])
}

/// Submits a galaxy with its measurements as `member` and accepts it as `reviewer`.
async fn enter(
    app: &TestApp,
    (member, reviewer): (i64, i64),
    galaxy: GalaxyChoice,
    measurements: Vec<NewMeasurement>,
    key: &str,
) {
    let request = submissions::request_key(Some(member), key, &galaxy, &measurements, "");
    let id = submissions::create(
        &app.pool,
        Some(member),
        SubmissionSource::Api,
        &galaxy,
        &measurements,
        "",
        &request,
        true,
    )
    .await
    .expect("stored")
    .submission_id;
    submissions::accept(&app.pool, reviewer, id, &HashSet::new(), "")
        .await
        .expect("accepted");
}

/// A deterministic scatter of ±`size` about zero, alternating, with mean zero over an even
/// count.
fn wiggle(i: usize, size: f64) -> f64 {
    if i.is_multiple_of(2) { size } else { -size }
}

/// The invented catalog: quiescent galaxies with stellar-dynamical masses on the relation
/// (±0.3 dex) and AGN whose virial products lie log ⟨f⟩ below it (±0.25 dex), each computed
/// from a lag and a line dispersion.
async fn invented_catalog(app: &TestApp) {
    let member = app.create_account("vf-member", Role::Member).await;
    let reviewer = app.create_account("vf-reviewer", Role::Reviewer).await;
    let people = (member, reviewer);
    for i in 0..N_QUIESCENT {
        let sigma = 120.0 + 200.0 * i as f64 / N_QUIESCENT as f64;
        let log_m = ALPHA + BETA * (sigma / 200.0).log10() + wiggle(i / 2, 0.3);
        enter(
            app,
            people,
            galaxy(format!("Quiet {i}"), Activity::Quiescent),
            vec![
                measurement(&[
                    ("quantity", "bh_mass".into()),
                    ("value", format!("log {log_m:.4} ± 0.1")),
                    ("scale", "log10".into()),
                    ("method", "stellar_dynamics".into()),
                    ("source_distance_mpc", "20".into()),
                    ("resolution_arcsec", "0.1".into()),
                    ("reference", "Invented et al. 2031".into()),
                ]),
                sigma_cells(sigma),
            ],
            &format!("q{i}"),
        )
        .await;
    }
    // VP of a lag of one day at 2000 km/s; each AGN's lag gives its virial product.
    let vp_one_day = massline::astro::agn::virial_product_msun(1.0, 2000.0).unwrap();
    for i in 0..N_AGN {
        let sigma = 90.0 + 110.0 * i as f64 / N_AGN as f64;
        let log_vp = ALPHA + BETA * (sigma / 200.0).log10() - TRUE_LOG_F + wiggle(i / 2, 0.25);
        let lag_days = 10f64.powf(log_vp) / vp_one_day;
        enter(
            app,
            people,
            galaxy(format!("Active {i}"), Activity::Seyfert1),
            vec![
                measurement(&[
                    ("quantity", "bh_mass".into()),
                    ("method", "reverberation".into()),
                    ("line", "Hbeta".into()),
                    ("width_definition", "sigma_line".into()),
                    ("width_spectrum", "rms".into()),
                    ("lag_days", format!("{lag_days:.5}")),
                    ("lag_err_days", format!("{:.5}", 0.1 * lag_days)),
                    ("width_km_s", "2000".into()),
                    ("width_err_km_s", "100".into()),
                    ("reference", "Invented et al. 2031".into()),
                ]),
                sigma_cells(sigma),
            ],
            &format!("a{i}"),
        )
        .await;
    }
}

/// Every galaxy's (name, method, log M) from the API at a version.
async fn masses(app: &TestApp, version: i64) -> Vec<(String, String, f64)> {
    let (status, body) = app
        .get(&format!("/api/v1/galaxies?per_page=500&version={version}"))
        .await;
    assert_eq!(status, 200, "{body}");
    let v: Value = serde_json::from_str(&body).unwrap();
    v["galaxies"]
        .as_array()
        .unwrap()
        .iter()
        .map(|g| {
            (
                g["name"].as_str().unwrap().to_owned(),
                g["mbh_method"].as_str().unwrap_or_default().to_owned(),
                g["log_mbh"].as_f64().unwrap(),
            )
        })
        .collect()
}

/// The M–σ fit object of the relation endpoint at a version, as served.
async fn m_sigma_fit(app: &TestApp, version: i64, extra: &str) -> Value {
    let (status, body) = app
        .get(&format!(
            "/api/v1/relations/m_sigma?version={version}{extra}"
        ))
        .await;
    assert_eq!(status, 200, "{body}");
    let v: Value = serde_json::from_str(&body).unwrap();
    assert!(v["fit"].is_object(), "{body}");
    v["fit"].clone()
}

/// The number in a page cell `id="ID">TEXT<`, the first number of TEXT.
fn cell_number(page: &str, id: &str) -> f64 {
    let start = page
        .find(&format!("id=\"{id}\">"))
        .unwrap_or_else(|| panic!("no cell {id}: {page}"))
        + id.len()
        + 6;
    let text = &page[start..start + page[start..].find('<').unwrap()];
    text.split_whitespace()
        .next()
        .unwrap()
        .replace('\u{2212}', "-")
        .parse()
        .unwrap_or_else(|_| panic!("{id}: {text}"))
}

#[tokio::test]
async fn the_calibration_recovers_a_known_factor_and_adopting_it_moves_only_the_agn_masses() {
    let app = spawn_app().await;
    invented_catalog(&app).await;
    let before = history::current_version(&app.pool).await.unwrap();

    // The API and the page give the same calibration, which finds the invented ⟨f⟩.
    let r = app
        .get_with_token("/api/v1/virial-factor?width_definition=sigma_line", None)
        .await;
    assert_eq!(r.status, 200, "{}", r.body);
    let api = r.json();
    assert_eq!(api["catalog_version"], before);
    assert_eq!(api["n_agn"], N_AGN);
    assert_eq!(api["n_quiescent"], N_QUIESCENT);
    assert!(api["problem"].is_null(), "{api}");
    let c = &api["calibration"];
    let log_f = c["log_f"].as_f64().unwrap();
    let err = c["log_f_err_dex"].as_f64().unwrap();
    assert!(
        (log_f - TRUE_LOG_F).abs() < err,
        "log f = {log_f} ± {err}, invented {TRUE_LOG_F}"
    );
    let parts = c["log_f_err_agn_dex"]
        .as_f64()
        .unwrap()
        .hypot(c["log_f_err_relation_dex"].as_f64().unwrap());
    assert!((parts - err).abs() < 1e-9, "the parts add in quadrature");
    assert!((c["f"].as_f64().unwrap() - 10f64.powf(log_f)).abs() < 1e-9);
    // The factor in force is the one the catalog starts with (migration 9).
    let old_log_f = api["adopted_log_f"].as_f64().unwrap();
    assert!((old_log_f - 0.64).abs() < 1e-12, "{old_log_f}");

    // The joint mode (α and β fitted with both samples) finds it too, page and API alike.
    let joint = app
        .get_with_token("/api/v1/virial-factor?slope=joint", None)
        .await
        .json();
    assert_eq!(joint["slope"], "joint");
    let jc = &joint["calibration"];
    let (joint_log_f, joint_err) = (
        jc["log_f"].as_f64().unwrap(),
        jc["log_f_err_dex"].as_f64().unwrap(),
    );
    assert!(
        (joint_log_f - TRUE_LOG_F).abs() < joint_err,
        "joint log f = {joint_log_f} ± {joint_err}, invented {TRUE_LOG_F}"
    );
    assert!(
        (joint_log_f - log_f).abs() > 1e-6,
        "the joint mode is a fit of its own"
    );
    let joint_page = app.ok("/virial-factor?slope=joint").await;
    assert!(
        (cell_number(&joint_page, "log-f") - joint_log_f).abs() <= 0.005,
        "{joint_page}"
    );
    assert!(
        joint_page.contains("value=\"joint\" checked"),
        "{joint_page}"
    );

    let page = app.ok("/virial-factor?width_definition=sigma_line").await;
    let shown = cell_number(&page, "log-f");
    assert!((shown - log_f).abs() <= 0.005, "page {shown}, API {log_f}");
    assert!(page.contains(&format!("<span id=\"n-agn\">{N_AGN}</span>")));
    assert!(page.contains(&format!("<span id=\"n-quiescent\">{N_QUIESCENT}</span>")));
    assert!(page.contains("<svg"), "the chart is drawn");
    assert!(page.contains("Grier et al. 2013"), "published calibrations");
    assert!(
        !page.contains("Adopt this calibration</button>"),
        "only admins see the adoption form"
    );

    // Before: every mass, the default fit and the fit with reverberation masses.
    let masses_before = masses(&app, before).await;
    let default_before = m_sigma_fit(&app, before, "").await;
    let with_agn_before = m_sigma_fit(&app, before, "&masses=with_reverberation").await;

    // A member may not adopt.
    let mut member = app.login_as(Role::Member).await;
    member.get("/virial-factor").await;
    let refused = member
        .post(
            "/virial-factor/adopt",
            &[
                ("width_definition", "sigma_line"),
                ("version", &before.to_string()),
            ],
        )
        .await;
    assert_eq!(refused.status, 403, "{}", refused.body);

    // An admin adopts it: a new version, and the page confirms it.
    let mut admin = app.login_as(Role::Admin).await;
    let form = admin
        .get("/virial-factor?width_definition=sigma_line")
        .await;
    assert!(
        form.body.contains("Adopt this calibration</button>"),
        "{}",
        form.body
    );
    let adopted = admin
        .post(
            "/virial-factor/adopt",
            &[
                ("width_definition", "sigma_line"),
                ("bulge_kind", "any"),
                ("slope", "held"),
                ("version", &before.to_string()),
                ("note", "test adoption"),
            ],
        )
        .await;
    assert_eq!(adopted.status, 303, "{}", adopted.body);
    let after = history::current_version(&app.pool).await.unwrap();
    assert_eq!(after, before + 1);
    let location = adopted.header("location");
    assert!(
        location.ends_with(&format!("adopted={after}")),
        "{location}"
    );
    let confirmed = admin.get(&location).await;
    assert!(
        confirmed
            .body
            .contains(&format!("catalog version {after} rescales")),
        "{}",
        confirmed.body
    );
    // Nobody else sees the confirmation from the address.
    assert!(!app.ok(&location).await.contains("class=\"flash\""));

    // A calibration computed on the version before cannot be adopted any more.
    let stale = admin
        .post(
            "/virial-factor/adopt",
            &[
                ("width_definition", "sigma_line"),
                ("version", &before.to_string()),
            ],
        )
        .await;
    assert_eq!(stale.status, 409, "{}", stale.body);
    assert!(stale.body.contains("is now at version"), "{}", stale.body);
    assert_eq!(history::current_version(&app.pool).await.unwrap(), after);

    // At the new version the AGN masses moved by exactly Δ log ⟨f⟩; nothing else moved.
    let delta = log_f - old_log_f;
    let masses_after = masses(&app, after).await;
    assert_eq!(masses_after.len(), masses_before.len());
    let mut moved = 0;
    for ((name, method, m0), (name1, _, m1)) in masses_before.iter().zip(&masses_after) {
        assert_eq!(name, name1);
        if method == "reverberation" {
            assert!((m1 - m0 - delta).abs() < 1e-9, "{name}: {m0} → {m1}");
            moved += 1;
        } else {
            assert_eq!(m0.to_bits(), m1.to_bits(), "{name} must not move");
        }
    }
    assert_eq!(moved, N_AGN);
    let default_after = m_sigma_fit(&app, after, "").await;
    assert_eq!(
        default_before.to_string(),
        default_after.to_string(),
        "the default (dynamical-only) fit is unchanged"
    );
    let with_agn_after = m_sigma_fit(&app, after, "&masses=with_reverberation").await;
    assert_ne!(
        with_agn_before["alpha_log_mbh"], with_agn_after["alpha_log_mbh"],
        "a fit with reverberation masses moves"
    );
    // The old version still serves the old masses, and its calibration, which can no longer
    // be adopted.
    assert_eq!(masses(&app, before).await, masses_before);
    let past = app
        .get_with_token(&format!("/api/v1/virial-factor?version={before}"), None)
        .await
        .json();
    assert_eq!(past["calibration"]["log_f"], api["calibration"]["log_f"]);
    assert_eq!(past["adopted_log_f"], api["adopted_log_f"]);
    let past_page = admin.get(&format!("/virial-factor?version={before}")).await;
    assert!(
        past_page.body.contains("id=\"adopt-past\""),
        "{}",
        past_page.body
    );
    assert!(!past_page.body.contains("Adopt this calibration</button>"));

    // The calibration at the new version says what is adopted now.
    let now = app
        .get_with_token("/api/v1/virial-factor", None)
        .await
        .json();
    assert!((now["adopted_log_f"].as_f64().unwrap() - log_f).abs() < 1e-12);
    let history_list = app
        .get_with_token("/api/v1/virial-factor/adopted", None)
        .await
        .json();
    let newest = &history_list["adopted"][0];
    assert_eq!(newest["from_catalog_version"], after);
    assert_eq!(newest["adopted_by"], "test-admin");
    let source = newest["source"].as_str().unwrap();
    assert!(
        source.contains(&format!("catalog version {before}"))
            && source.contains(&format!("{N_AGN} reverberation AGN"))
            && source.contains("test adoption"),
        "{source}"
    );

    // What changed shows the adoption, on the page and in the API.
    let changes = app
        .get_with_token(&format!("/api/v1/changes?from={before}&to={after}"), None)
        .await
        .json();
    let f = &changes["virial_factors"][0];
    assert_eq!(f["width_definition"], "sigma_line");
    assert!((f["old_log_f"].as_f64().unwrap() - old_log_f).abs() < 1e-12);
    assert!((f["new_log_f"].as_f64().unwrap() - log_f).abs() < 1e-12);
    assert_eq!(f["adopted_by"], "test-admin");
    let page = app.ok(&format!("/changes?from={before}&to={after}")).await;
    assert!(page.contains("Virial factors adopted"), "{page}");
    assert!(page.contains("test adoption"), "{page}");
}

#[tokio::test]
async fn too_few_agn_are_said_with_what_is_missing_and_bad_choices_are_refused() {
    let app = spawn_app().await;
    let r = app.get_with_token("/api/v1/virial-factor", None).await;
    assert_eq!(r.status, 200, "{}", r.body);
    let v = r.json();
    assert!(v["calibration"].is_null());
    let problem = v["problem"].as_str().unwrap();
    assert!(
        problem.contains("has 0 reverberation AGN") && problem.contains("at least 5"),
        "{problem}"
    );
    let page = app.ok("/virial-factor?bulge_kind=pseudo").await;
    assert!(page.contains("id=\"calibration-problem\""), "{page}");
    assert!(page.contains("pseudo bulges only"), "{page}");
    let joint = app
        .get_with_token("/api/v1/virial-factor?slope=joint", None)
        .await
        .json();
    assert_eq!(joint["slope"], "joint");
    assert!(joint["calibration"].is_null(), "{joint}");
    let bad = app
        .get_with_token(
            "/api/v1/virial-factor?width_definition=fwhm2&colour=red",
            None,
        )
        .await;
    let problem = bad.problem(422);
    let fields = crate::common::problem_fields(&problem);
    assert!(
        fields.contains(&"width_definition".to_owned()) && fields.contains(&"colour".to_owned()),
        "{problem}"
    );
}
