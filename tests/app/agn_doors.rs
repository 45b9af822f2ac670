//! AGN measurements through every door: the form, a CSV upload and the JSON API each store a
//! reverberation mass computed from a lag and a width, a typed one with the factor its source
//! assumed, and a single-epoch one, and refuse a bad cell naming it; the galaxy page and the
//! API show what lies behind a virial mass, the factor applied and the Eddington quantities;
//! the place check computes the same Eddington block. Values and names are invented.

use massline::astro::agn;
use massline::auth::Role;
use massline::catalog::csv_io::{ImportMode, import_csv};
use massline::catalog::virial::{COMPUTED_SINGLE_EPOCH_TEXT, COMPUTED_VALUE_TEXT};
use serde_json::{Value, json};

use crate::helpers::{TestApp, spawn_app, spawn_demo_app};

/// The new-galaxy fields of the form.
fn galaxy_fields(name: &str, activity: &str) -> Vec<(String, String)> {
    [
        ("galaxy", ""),
        ("name", name),
        ("morphology", "elliptical"),
        ("bulge_kind", "classical"),
        ("centre_kind", "core"),
        ("distance_mpc", "20"),
        ("distance_err_mpc", "1.5"),
        ("distance_method", "sbf"),
        ("activity", activity),
        ("m0_quantity", "bh_mass"),
        ("m0_scale", "auto"),
        ("m0_reference", "Invented et al. 2033"),
    ]
    .into_iter()
    .map(|(k, v)| (k.to_owned(), v.to_owned()))
    .collect()
}

/// The form of one new galaxy with one black-hole mass row `m0` made of `cells`.
fn form(name: &str, activity: &str, cells: &[(&str, &str)]) -> Vec<(String, String)> {
    let mut fields = galaxy_fields(name, activity);
    fields.extend(
        cells
            .iter()
            .map(|(k, v)| (format!("m0_{k}"), (*v).to_owned())),
    );
    fields
}

fn pairs(fields: &[(String, String)]) -> Vec<(&str, &str)> {
    fields
        .iter()
        .map(|(k, v)| (k.as_str(), v.as_str()))
        .collect()
}

/// The stored black-hole mass of a galaxy: (value as entered, log value, error dex, assumed
/// log f, galaxy activity).
async fn stored(app: &TestApp, name: &str) -> (String, f64, f64, Option<f64>, String) {
    sqlx::query_as(
        "select m.value_text, m.log_value, m.err_dex, v.assumed_log_f, g.activity
           from measurement m join galaxy g on g.galaxy_id = m.galaxy_id
           join virial_measurement v on v.measurement_id = m.measurement_id
          where g.name = ? and m.quantity = 'bh_mass'",
    )
    .bind(name)
    .fetch_one(&app.pool)
    .await
    .unwrap_or_else(|e| panic!("no virial mass stored for {name}: {e}"))
}

async fn count(app: &TestApp, table: &str) -> i64 {
    sqlx::query_scalar(sqlx::AssertSqlSafe(format!("select count(*) from {table}")))
        .fetch_one(&app.pool)
        .await
        .unwrap()
}

/// log10 of the virial product of a lag (days) and a width (km/s), docs/methods.md §4.1.
fn log_vp(lag: f64, width: f64) -> f64 {
    agn::virial_product_msun(lag, width).unwrap().log10()
}

/// log10 of the Vestergaard & Peterson 2006 mass of an FWHM at log λL(5100 Å).
fn log_vp06(fwhm: f64, log_l: f64) -> f64 {
    agn::VESTERGAARD_PETERSON_2006
        .log_mass_msun(fwhm, 10f64.powf(log_l))
        .unwrap()
}

#[tokio::test]
async fn the_form_stores_computed_typed_and_single_epoch_masses_and_names_a_bad_cell() {
    let app = spawn_demo_app().await;
    let mut member = app.login_as(Role::Member).await;
    let page = member.get("/submissions/new").await;
    assert!(
        page.body
            .contains("Broad-line measurement (reverberation or single-epoch masses)")
    );
    assert!(page.body.contains("id=\"f-m0_lag_days\""));
    assert!(page.body.contains("id=\"f-activity\""));

    let computed = form(
        "Tesk 961",
        "seyfert1",
        &[
            ("method_bh", "reverberation"),
            ("lag_days", "10"),
            ("lag_err_days", "1"),
            ("width_km_s", "2000"),
            ("width_err_km_s", "100"),
            ("log_l5100_erg_s", "43.6"),
        ],
    );
    let r = member.post("/submissions/new", &pairs(&computed)).await;
    assert_eq!(r.status, 303, "{}", r.body);
    // The submission's page and the review queue show the lag and width behind the mass,
    // and the mass at the adopted ⟨f⟩ (σ_line, log⟨f⟩ = 0.64 at the start).
    let shown = member.get(&r.header("location")).await;
    let expected_shown = format!("log M shown = {:.2} [M☉]", log_vp(10.0, 2000.0) + 0.64);
    for body in [
        shown.body,
        app.login_as(Role::Reviewer).await.get("/review").await.body,
    ] {
        let at = body
            .find("class=\"sub broad-line\"")
            .expect("the broad-line line");
        let line = &body[at..at + body[at..].find("</span>").unwrap()];
        assert!(line.contains("lag 10.0 ± 1.0 d (rest frame)"), "{line}");
        assert!(line.contains("2000 ± 100 km/s"), "{line}");
        assert!(line.contains(&expected_shown), "{line}");
    }
    let (text, log_value, _, assumed, activity) = stored(&app, "Tesk 961").await;
    assert_eq!(text, COMPUTED_VALUE_TEXT);
    assert_eq!(log_value.to_bits(), log_vp(10.0, 2000.0).to_bits());
    assert_eq!(assumed, Some(0.0));
    assert_eq!(activity, "seyfert1");

    let typed = form(
        "Tesk 962",
        "quasar",
        &[
            ("method_bh", "reverberation"),
            ("value", "3e7 ± 0.5e7"),
            ("virial_factor", "5.5"),
        ],
    );
    let r = member.post("/submissions/new", &pairs(&typed)).await;
    assert_eq!(r.status, 303, "{}", r.body);
    let (text, log_value, _, assumed, _) = stored(&app, "Tesk 962").await;
    assert_eq!(text, "3e7 ± 0.5e7");
    assert!((log_value - 3e7f64.log10()).abs() < 1e-12);
    assert_eq!(assumed, Some(5.5f64.log10()));

    let single = form(
        "Tesk 963",
        "quasar",
        &[
            ("method_bh", "single_epoch"),
            ("width_definition", "fwhm"),
            ("width_km_s", "4000"),
            ("log_l5100_erg_s", "44"),
            ("calibration", "vp06"),
        ],
    );
    let r = member.post("/submissions/new", &pairs(&single)).await;
    assert_eq!(r.status, 303, "{}", r.body);
    let (text, log_value, err, assumed, _) = stored(&app, "Tesk 963").await;
    assert_eq!(text, COMPUTED_SINGLE_EPOCH_TEXT);
    assert_eq!(log_value.to_bits(), log_vp06(4000.0, 44.0).to_bits());
    // The calibration's scatter is the error floor (docs/methods.md §4.2).
    assert_eq!(
        err.to_bits(),
        agn::VESTERGAARD_PETERSON_2006.scatter_dex.to_bits()
    );
    assert_eq!(assumed, None);

    // A lag missing: named beside its field, with what to type; nothing stored.
    let before = count(&app, "submission").await;
    let no_lag = form(
        "Tesk 964",
        "seyfert1",
        &[("method_bh", "reverberation"), ("width_km_s", "2000")],
    );
    let r = member.post("/submissions/new", &pairs(&no_lag)).await;
    assert_eq!(r.status, 400, "{}", r.body);
    assert!(r.body.contains("id=\"e-m0_lag_days\""), "{}", r.body);
    assert!(r.body.contains("rest-frame lag (days)"), "{}", r.body);
    assert!(r.body.contains("aria-describedby=\"e-m0_lag_days\""));
    // A broad-line cell on a dynamical mass.
    let dynamical = form(
        "Tesk 965",
        "quiescent",
        &[
            ("method_bh", "stellar_dynamics"),
            ("value", "2e8 ± 0.3e8"),
            ("width_km_s", "2000"),
        ],
    );
    let r = member.post("/submissions/new", &pairs(&dynamical)).await;
    assert_eq!(r.status, 400, "{}", r.body);
    assert!(r.body.contains("id=\"e-m0_width_km_s\""), "{}", r.body);
    assert!(
        r.body
            .contains("reverberation or single-epoch black-hole mass takes this column")
    );
    assert_eq!(count(&app, "submission").await, before);
}

#[tokio::test]
async fn a_csv_upload_and_the_api_store_virial_masses_and_name_a_bad_cell() {
    let app = spawn_demo_app().await;
    let mut member = app.login_as(Role::Member).await;
    let upload = member.get("/submissions/upload").await;
    assert!(
        upload.body.contains("lag_err_days"),
        "the columns are documented"
    );
    let header = "galaxy,morphology,bulge_kind,centre_kind,distance_mpc,distance_err_mpc,distance_method,activity,quantity,value,method,width_definition,lag_days,lag_err_days,width_km_s,log_l5100_erg_s,virial_factor,calibration";
    let text = format!(
        "{header}\n\
         Tesk 971,elliptical,classical,core,20,1,sbf,seyfert1,bh_mass,,reverberation,,8,+1/-0.8,1800,,,\n\
         Tesk 972,elliptical,classical,core,20,1,sbf,quasar,bh_mass,4e7 ± 1e7,reverberation,,,,,,5.5,\n\
         Tesk 973,elliptical,classical,core,20,1,sbf,quasar,bh_mass,,single_epoch,fwhm,,,4000,44,,vp06\n"
    );
    let bad = text.replace("+1/-0.8", "about one");
    let r = member.post("/submissions/upload", &[("csv", &bad)]).await;
    assert_eq!(r.status, 400, "{}", r.body);
    assert!(
        r.body
            .contains("<td class=\"num\">2</td><td>lag_err_days</td>"),
        "{}",
        r.body
    );
    assert!(
        r.body.contains("+1.4/-1.1"),
        "the refusal says what to type"
    );
    let r = member.post("/submissions/upload", &[("csv", &text)]).await;
    assert_eq!(r.status, 200, "{}", r.body);
    assert!(r.body.contains("id=\"upload-done\""), "{}", r.body);
    let (text_971, log_971, _, assumed_971, activity) = stored(&app, "Tesk 971").await;
    assert_eq!(text_971, COMPUTED_VALUE_TEXT);
    assert_eq!(log_971.to_bits(), log_vp(8.0, 1800.0).to_bits());
    assert_eq!((assumed_971, activity.as_str()), (Some(0.0), "seyfert1"));
    assert_eq!(stored(&app, "Tesk 972").await.3, Some(5.5f64.log10()));
    let (_, log_973, _, _, _) = stored(&app, "Tesk 973").await;
    assert_eq!(log_973.to_bits(), log_vp06(4000.0, 44.0).to_bits());

    // The JSON API, with a submit token.
    let id = app.create_account("agn-script", Role::Member).await;
    let (token, _) = app.make_token(id, "submit").await;
    let post = |key: &'static str, body: Value| {
        let request = app
            .client
            .post(format!("{}/api/v1/submissions", app.address))
            .bearer_auth(&token)
            .header("idempotency-key", key)
            .json(&body);
        async move {
            let r = request.send().await.unwrap();
            let status = r.status().as_u16();
            (status, r.json::<Value>().await.unwrap())
        }
    };
    let galaxy = |name: &str, activity: &str| {
        json!({"name": name, "morphology": "elliptical", "bulge_kind": "classical",
               "centre_kind": "core", "distance_mpc": 20, "distance_err_mpc": 1,
               "distance_method": "sbf", "activity": activity})
    };
    let (status, answer) = post(
        "agn-1",
        json!({"new_galaxy": galaxy("Tesk 981", "seyfert1"),
               "measurements": [{"quantity": "bh_mass", "method": "reverberation",
                                 "lag_days": 15, "lag_err_days": "+2/-1.5", "width_km_s": 2500}]}),
    )
    .await;
    assert_eq!(status, 201, "{answer}");
    let (text_981, log_981, _, _, activity) = stored(&app, "Tesk 981").await;
    assert_eq!(text_981, COMPUTED_VALUE_TEXT);
    assert_eq!(log_981.to_bits(), log_vp(15.0, 2500.0).to_bits());
    assert_eq!(activity, "seyfert1");
    let (status, answer) = post(
        "agn-2",
        json!({"new_galaxy": galaxy("Tesk 982", "quasar"),
               "measurements": [{"quantity": "bh_mass", "method": "reverberation",
                                 "value": "5e7 ± 1e7", "virial_factor": 4.0}]}),
    )
    .await;
    assert_eq!(status, 201, "{answer}");
    assert_eq!(stored(&app, "Tesk 982").await.3, Some(4f64.log10()));
    let (status, answer) = post(
        "agn-3",
        json!({"new_galaxy": galaxy("Tesk 983", "quasar"),
               "measurements": [{"quantity": "bh_mass", "method": "single_epoch",
                                 "width_definition": "fwhm", "width_km_s": 4000,
                                 "log_l5100_erg_s": 44, "calibration": "vp06"}]}),
    )
    .await;
    assert_eq!(status, 201, "{answer}");
    assert_eq!(
        stored(&app, "Tesk 983").await.1.to_bits(),
        log_vp06(4000.0, 44.0).to_bits()
    );
    // A computed mass takes no factor: the field is named, with what to do instead.
    let (status, problem) = post(
        "agn-4",
        json!({"new_galaxy": galaxy("Tesk 984", "seyfert1"),
               "measurements": [{"quantity": "bh_mass", "method": "reverberation",
                                 "lag_days": 15, "width_km_s": 2500, "virial_factor": 5}]}),
    )
    .await;
    assert_eq!(status, 422, "{problem}");
    assert_eq!(
        problem["errors"][0]["field"], "measurements[0].virial_factor",
        "{problem}"
    );
    assert!(
        problem["errors"][0]["message"]
            .as_str()
            .unwrap()
            .contains("leave virial_factor empty"),
        "{problem}"
    );
    // An activity that is not a class.
    let (status, problem) = post(
        "agn-5",
        json!({"new_galaxy": galaxy("Tesk 985", "blazing"),
               "measurements": [{"quantity": "bh_mass", "method": "reverberation",
                                 "lag_days": 15, "width_km_s": 2500}]}),
    )
    .await;
    assert_eq!(status, 422, "{problem}");
    assert_eq!(
        problem["errors"][0]["field"], "new_galaxy.activity",
        "{problem}"
    );
}

/// An adopted catalog of one Seyfert with σ and a computed reverberation mass with λL(5100 Å),
/// and one galaxy with a typed mass whose factor is not known.
async fn seyfert_catalog(app: &TestApp) {
    let text = "galaxy,morphology,bulge_kind,centre_kind,distance_mpc,distance_err_mpc,distance_method,activity,quantity,value,sigma_definition,method,source_distance_mpc,lag_days,lag_err_days,width_km_s,width_err_km_s,log_l5100_erg_s\n\
        Tesk 991,elliptical,classical,core,20,1,sbf,seyfert1,sigma,150 ± 10,sigma_e,,,,,,,\n\
        Tesk 991,elliptical,classical,core,20,1,sbf,seyfert1,bh_mass,,,reverberation,20,10,1,2000,100,44\n\
        Tesk 992,elliptical,classical,core,20,1,sbf,seyfert2,bh_mass,2e7 ± 0.5e7,,reverberation,20,,,,,\n";
    import_csv(&app.pool, text, ImportMode::Accepted, &mut |_, _| {})
        .await
        .unwrap();
}

/// The full-precision number of the element `id` of a page (its `data-value`).
fn data_value(body: &str, id: &str) -> f64 {
    let marker = format!("id=\"{id}\" data-value=\"");
    let start = body
        .find(&marker)
        .unwrap_or_else(|| panic!("no {id} in {body}"))
        + marker.len();
    let end = body[start..].find('"').unwrap() + start;
    body[start..end].split(' ').next().unwrap().parse().unwrap()
}

#[tokio::test]
async fn the_galaxy_page_and_api_show_the_factor_and_the_eddington_quantities() {
    let app = spawn_app().await;
    seyfert_catalog(&app).await;
    let page = app.ok("/galaxies/tesk-991").await;
    assert!(page.contains("id=\"activity-class\">Seyfert 1<"), "{page}");
    // σ_line ⟨f⟩ = 10^0.64 = 4.37 at version 0 (migration 9; Grier et al. 2013).
    assert!(
        page.contains("rescaled from f = 1 (the virial product) to the adopted ⟨f⟩ = 4.37"),
        "{page}"
    );
    assert!(page.contains("lag 10.0 ± 1.0 d (rest frame)"), "{page}");
    // The Eddington block: the mass shown is VP · ⟨f⟩; λL(5100 Å) = 10⁴⁴ erg/s at the
    // adopted distance (the source's, 20 Mpc).
    let log_m = log_vp(10.0, 2000.0) + 0.64;
    let l_edd = data_value(&page, "edd-l-edd");
    let expected = agn::eddington_luminosity_erg_s(10f64.powf(log_m)).unwrap();
    assert!(
        (l_edd / expected - 1.0).abs() < 1e-12,
        "{l_edd} vs {expected}"
    );
    // L_Edd = 1.257e38 erg/s per M☉ (docs/methods.md §4.4, computed).
    assert!((l_edd / 10f64.powf(log_m) / 1.257e38 - 1.0).abs() < 1e-3);
    let l_bol = data_value(&page, "edd-l-bol");
    assert!((l_bol / (agn::BOLOMETRIC_CORRECTION_5100 * 1e44) - 1.0).abs() < 1e-12);
    let ratio = data_value(&page, "edd-ratio");
    assert!((ratio - l_bol / l_edd).abs() < 1e-12 * ratio);
    let most = agn::accretion_rate_msun_yr(l_bol, agn::radiative_efficiency(0.0).unwrap()).unwrap();
    let least =
        agn::accretion_rate_msun_yr(l_bol, agn::radiative_efficiency(0.998).unwrap()).unwrap();
    let rates = {
        let marker = "id=\"edd-accretion\" data-value=\"";
        let start = page.find(marker).unwrap() + marker.len();
        let end = page[start..].find('"').unwrap() + start;
        page[start..end]
            .split(' ')
            .map(|v| v.parse::<f64>().unwrap())
            .collect::<Vec<_>>()
    };
    assert!((rates[0] / least - 1.0).abs() < 1e-12 && (rates[1] / most - 1.0).abs() < 1e-12);
    assert!(page.contains("Richards et al. 2006"));
    assert!(page.contains("η = 0.057–0.321"), "{page}");

    // A typed mass whose factor is not known is shown as published.
    let other = app.ok("/galaxies/tesk-992").await;
    assert!(
        other.contains("factor is not recorded: shown as published, not rescaled"),
        "{other}"
    );
    assert!(
        !other.contains("id=\"eddington\""),
        "no λL(5100 Å), no Eddington block"
    );

    // The API answers the same numbers.
    let (status, body) = app.get("/api/v1/galaxies/tesk-991").await;
    assert_eq!(status, 200, "{body}");
    let v: Value = serde_json::from_str(&body).unwrap();
    assert_eq!(v["activity"], "seyfert1");
    assert!((v["eddington"]["l_edd_erg_s"].as_f64().unwrap() / l_edd - 1.0).abs() < 1e-12);
    let virial = v["measurements"]
        .as_array()
        .unwrap()
        .iter()
        .find_map(|m| m.get("virial").filter(|x| !x.is_null()))
        .unwrap_or_else(|| panic!("no virial measurement in {v}"));
    assert_eq!(virial["lag_days"], 10.0);
    assert_eq!(virial["width_km_s"], 2000.0);
    assert_eq!(virial["width_definition"], "sigma_line");
    assert_eq!(virial["assumed_log_f"], 0.0);
    assert_eq!(virial["applied_log_f"], 0.64);
    let (_, list) = app.get("/api/v1/galaxies").await;
    let list: Value = serde_json::from_str(&list).unwrap();
    let row = list["galaxies"]
        .as_array()
        .unwrap()
        .iter()
        .find(|g| g["slug"] == "tesk-991")
        .unwrap();
    assert_eq!(row["activity"], "seyfert1");
    assert_eq!(row["mbh_log_f"], 0.64);
}

#[tokio::test]
async fn reviewers_change_the_activity_class_in_a_new_catalog_version() {
    let app = spawn_app().await;
    seyfert_catalog(&app).await;
    let version = |app: &TestApp| {
        let pool = app.pool.clone();
        async move {
            massline::catalog::history::current_version(&pool)
                .await
                .unwrap()
        }
    };
    let before = version(&app).await;
    let mut member = app.login_as(Role::Member).await;
    let page = member.get("/galaxies/tesk-991").await;
    assert!(
        !page.body.contains("id=\"activity\""),
        "members get no form"
    );
    let r = member
        .post("/galaxies/tesk-991/activity", &[("activity", "quasar")])
        .await;
    assert_eq!(r.status, 403);
    let mut reviewer = app.login_as(Role::Reviewer).await;
    let page = reviewer.get("/galaxies/tesk-991").await;
    assert!(page.body.contains("id=\"activity\""), "{}", page.body);
    let r = reviewer
        .post(
            "/galaxies/tesk-991/activity",
            &[("activity", "warp"), ("note", "")],
        )
        .await;
    assert_eq!(r.status, 400);
    assert!(r.body.contains("id=\"e-activity\""), "{}", r.body);
    assert_eq!(version(&app).await, before);
    let r = reviewer
        .post(
            "/galaxies/tesk-991/activity",
            &[
                ("activity", "quasar"),
                ("note", "broad lines at high luminosity"),
            ],
        )
        .await;
    assert_eq!(r.status, 303, "{}", r.body);
    assert_eq!(version(&app).await, before + 1);
    let confirmed = reviewer.get(&r.header("location")).await;
    assert!(
        confirmed.body.contains(&format!(
            "New activity class adopted: catalog version {}.",
            before + 1
        )),
        "{}",
        confirmed.body
    );
    // The address alone claims nothing to anyone else.
    let other = app.ok(&r.header("location")).await;
    assert!(!other.contains("New activity class adopted"));
    // The class already stored changes nothing.
    let r = reviewer
        .post("/galaxies/tesk-991/activity", &[("activity", "quasar")])
        .await;
    assert_eq!(r.status, 303);
    assert_eq!(version(&app).await, before + 1);
    let page = app.ok("/galaxies/tesk-991").await;
    assert!(page.contains("id=\"activity-class\">quasar<"), "{page}");
    // The old class stays in the history.
    let old = app
        .ok(&format!("/galaxies/tesk-991?version={before}"))
        .await;
    assert!(old.contains("id=\"activity-class\">Seyfert 1<"), "{old}");
    let events: i64 =
        sqlx::query_scalar("select count(*) from audit_event where action = 'activity_changed'")
            .fetch_one(&app.pool)
            .await
            .unwrap();
    assert_eq!(events, 1);
    // What changed names it, with who and the note, on the page and in the API.
    let changes = app
        .ok(&format!("/changes?from={before}&to={}", before + 1))
        .await;
    let at = changes.find("id=\"activities\"").expect("the section");
    let section = &changes[at..];
    assert!(section.contains("Seyfert 1</td>"), "{section}");
    assert!(section.contains("quasar</td>"), "{section}");
    assert!(
        section.contains("broad lines at high luminosity"),
        "{section}"
    );
    let (status, body) = app
        .get(&format!("/api/v1/changes?from={before}&to={}", before + 1))
        .await;
    assert_eq!(status, 200, "{body}");
    let json: serde_json::Value = serde_json::from_str(&body).unwrap();
    let change = &json["activities"][0];
    assert_eq!(change["old_activity"], "seyfert1", "{json}");
    assert_eq!(change["new_activity"], "quasar");
    assert_eq!(change["catalog_version"], before + 1);
    assert_eq!(change["note"], "broad lines at high luminosity");
    assert!(change["changed_by"].is_string());
}

#[tokio::test]
async fn the_place_check_shows_the_eddington_block_of_a_mass_and_a_luminosity() {
    let app = spawn_demo_app().await;
    let page = app
        .ok("/place?mass=1e8&log_l5100_erg_s=44.5&activity=seyfert1")
        .await;
    let e = massline::relations::agn::eddington(8.0, 44.5).unwrap();
    let l_edd = data_value(&page, "edd-l-edd");
    assert!((l_edd / e.l_edd_erg_s - 1.0).abs() < 1e-12, "{page}");
    assert!((data_value(&page, "edd-ratio") / e.eddington_ratio - 1.0).abs() < 1e-12);
    assert!(page.contains("a nucleus classed Seyfert 1"), "{page}");
    // An upper limit has no Eddington ratio; a bad luminosity is named.
    let page = app.ok("/place?mass=%3C1e8&log_l5100_erg_s=44.5").await;
    assert!(page.contains("id=\"eddington-note\""), "{page}");
    let (status, page) = app.get("/place?mass=1e8&log_l5100_erg_s=60").await;
    assert_eq!(status, 200);
    assert!(page.contains("id=\"e-log_l5100_erg_s\""), "{page}");
    // The API's place answers the same numbers.
    let (status, body) = app.get("/api/v1/place?mass=1e8&log_l5100_erg_s=44.5").await;
    assert_eq!(status, 200, "{body}");
    let v: Value = serde_json::from_str(&body).unwrap();
    let api = v["object"]["eddington"]["l_edd_erg_s"].as_f64().unwrap();
    assert!((api / e.l_edd_erg_s - 1.0).abs() < 1e-12, "{v}");
}
