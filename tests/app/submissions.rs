//! Submissions and review through the real server: the member's form, the review queue, the
//! galaxy page's history, and who may do what.

use massline::auth::Role;

use crate::helpers::{TestApp, spawn_demo_app};

/// The form fields of a new galaxy with a σ_e and a black-hole mass (invented values).
fn new_galaxy_form<'a>(name: &'a str, mass: &'a str) -> Vec<(&'a str, &'a str)> {
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
        ("m1_value", mass),
        ("m1_scale", "auto"),
        ("m1_method", "stellar_dynamics"),
        ("m1_source_distance_mpc", "20"),
        ("m1_resolution_arcsec", "0.1"),
        ("m1_reference", "Invented et al. 2031"),
        ("note", "test submission"),
    ]
}

async fn count(app: &TestApp, table: &str) -> i64 {
    sqlx::query_scalar(sqlx::AssertSqlSafe(format!("select count(*) from {table}")))
        .fetch_one(&app.pool)
        .await
        .unwrap()
}

fn submission_id(location: &str) -> i64 {
    location
        .strip_prefix("/submissions/")
        .and_then(|s| s.parse().ok())
        .unwrap_or_else(|| panic!("unexpected redirect {location}"))
}

fn detections(body: &str) -> i64 {
    let at = body
        .find("id=\"n-detections\">")
        .expect("the detections count")
        + 18;
    body[at..]
        .split('<')
        .next()
        .unwrap()
        .trim()
        .parse()
        .unwrap()
}

#[tokio::test]
async fn a_member_submits_sees_the_placement_and_can_withdraw() {
    let app = spawn_demo_app().await;
    let mut member = app.login_as(Role::Member).await;
    assert_eq!(member.get("/submissions/new").await.status, 200);
    let reply = member
        .post(
            "/submissions/new",
            &new_galaxy_form("Tesk 901", "2.0e8 ± 0.3e8"),
        )
        .await;
    assert_eq!(reply.status, 303, "{}", reply.body);
    let id = submission_id(&reply.header("location"));
    let page = member.get(&format!("/submissions/{id}")).await;
    assert_eq!(page.status, 200);
    assert!(page.body.contains("Tesk 901"));
    // σ and the mass place it against M–σ: a residual, a z and a refit line.
    assert!(page.body.contains("id=\"place-m_sigma\""), "{}", page.body);
    assert!(page.body.contains("With this object in the fit"));
    assert!(page.body.contains("id=\"soi\""));
    let list = member.get("/submissions").await;
    assert!(list.body.contains(&format!("id=\"submission-{id}\"")));
    assert!(list.body.contains("pending"));
    let r = member
        .post(&format!("/submissions/{id}/withdraw"), &[])
        .await;
    assert_eq!(r.status, 303);
    let list = member.get("/submissions").await;
    assert!(list.body.contains("withdrawn"), "{}", list.body);
    // Another member cannot see it.
    let mut other = app.browser();
    app.create_account("other-member", Role::Member).await;
    other
        .login("other-member", crate::helpers::TEST_PASSWORD)
        .await;
    assert_eq!(other.get(&format!("/submissions/{id}")).await.status, 404);
}

#[tokio::test]
async fn a_bad_value_is_reported_beside_its_field_and_nothing_is_written() {
    let app = spawn_demo_app().await;
    let mut member = app.login_as(Role::Member).await;
    let before = (
        count(&app, "submission").await,
        count(&app, "measurement").await,
        count(&app, "galaxy").await,
    );
    let reply = member
        .post("/submissions/new", &new_galaxy_form("Tesk 902", "-3e8"))
        .await;
    assert_eq!(reply.status, 400, "{}", reply.body);
    assert!(reply.body.contains("id=\"e-m1_value\""), "{}", reply.body);
    // What was typed comes back.
    assert!(reply.body.contains("value=\"-3e8\""));
    assert!(reply.body.contains("value=\"Tesk 902\""));
    let after = (
        count(&app, "submission").await,
        count(&app, "measurement").await,
        count(&app, "galaxy").await,
    );
    assert_eq!(before, after, "a refused form writes nothing");
}

#[tokio::test]
async fn members_cannot_review_and_reviewers_cannot_review_their_own() {
    let app = spawn_demo_app().await;
    let mut member = app.login_as(Role::Member).await;
    let r = member
        .post(
            "/submissions/new",
            &new_galaxy_form("Tesk 903", "2e8 ± 0.3e8"),
        )
        .await;
    let id = submission_id(&r.header("location"));
    let r = member
        .post(&format!("/review/{id}/accept"), &[("note", "")])
        .await;
    assert_eq!(r.status, 403);
    let mut reviewer = app.login_as(Role::Reviewer).await;
    let r = reviewer
        .post(
            "/submissions/new",
            &new_galaxy_form("Tesk 904", "2e8 ± 0.3e8"),
        )
        .await;
    let own = submission_id(&r.header("location"));
    let queue = reviewer.get("/review").await;
    assert!(queue.body.contains(&format!("id=\"review-{own}\"")));
    assert!(
        queue
            .body
            .contains("another reviewer must accept or reject it")
    );
    let r = reviewer
        .post(&format!("/review/{own}/accept"), &[("note", "")])
        .await;
    assert_eq!(r.status, 403);
    assert!(r.body.contains("You submitted this yourself"), "{}", r.body);
    assert_eq!(count(&app, "review").await, 0);
}

#[tokio::test]
async fn accepting_bumps_the_version_and_the_relation_gains_a_point() {
    let app = spawn_demo_app().await;
    let before = detections(&app.ok("/relations/m_sigma").await);
    let version = massline::catalog::history::current_version(&app.pool)
        .await
        .unwrap();
    let mut member = app.login_as(Role::Member).await;
    let r = member
        .post(
            "/submissions/new",
            &new_galaxy_form("Tesk 905", "2e8 ± 0.3e8"),
        )
        .await;
    let id = submission_id(&r.header("location"));
    let mut reviewer = app.login_as(Role::Reviewer).await;
    let queue = reviewer.get("/review").await;
    assert!(queue.body.contains(&format!("id=\"review-{id}\"")));
    let r = reviewer
        .post(&format!("/review/{id}/accept"), &[("note", "looks fine")])
        .await;
    assert_eq!(r.status, 303, "{}", r.body);
    assert_eq!(
        massline::catalog::history::current_version(&app.pool)
            .await
            .unwrap(),
        version + 1
    );
    let after = detections(&app.ok("/relations/m_sigma").await);
    assert_eq!(after, before + 1);
    let queue = reviewer.get("/review").await;
    assert!(!queue.body.contains(&format!("id=\"review-{id}\"")));
}

#[tokio::test]
async fn a_rejection_note_is_shown_on_the_galaxy_page() {
    let app = spawn_demo_app().await;
    let mut member = app.login_as(Role::Member).await;
    let r = member
        .post(
            "/submissions/new",
            &new_galaxy_form("Tesk 906", "2e8 ± 0.3e8"),
        )
        .await;
    let id = submission_id(&r.header("location"));
    let mut reviewer = app.login_as(Role::Reviewer).await;
    reviewer.get("/review").await;
    // A rejection needs a reason.
    let r = reviewer
        .post(&format!("/review/{id}/reject"), &[("note", "  ")])
        .await;
    assert_eq!(r.status, 400);
    let r = reviewer
        .post(
            &format!("/review/{id}/reject"),
            &[(
                "note",
                "the resolution does not reach the sphere of influence",
            )],
        )
        .await;
    assert_eq!(r.status, 303, "{}", r.body);
    let page = app.ok("/galaxies/tesk-906").await;
    assert!(page.contains("rejected"));
    assert!(
        page.contains("the resolution does not reach the sphere of influence"),
        "{page}"
    );
}

const CSV_HEADER: &str = "galaxy,morphology,bulge_kind,centre_kind,distance_mpc,distance_err_mpc,distance_method,quantity,value,scale,limit_confidence_sigma,method,sigma_definition,aperture,band,source_distance_mpc,resolution_arcsec,reference,note";

#[tokio::test]
async fn a_csv_with_one_bad_row_gets_a_row_report_and_nothing_is_written() {
    let app = spawn_demo_app().await;
    let mut member = app.login_as(Role::Member).await;
    assert_eq!(member.get("/submissions/upload").await.status, 200);
    let before = (
        count(&app, "submission").await,
        count(&app, "measurement").await,
        count(&app, "galaxy").await,
    );
    let text = format!(
        "{CSV_HEADER}\n\
         Tesk 951,elliptical,classical,core,20,1,sbf,sigma,210 ± 10,,,,sigma_e,r_e,,,,,\n\
         Tesk 951,,,,,,,bh_mass,2e8 ± 3e7,,,warp_drive,,,,20,0.1,,\n"
    );
    let r = member.post("/submissions/upload", &[("csv", &text)]).await;
    assert_eq!(r.status, 400, "{}", r.body);
    assert!(r.body.contains("id=\"row-report\""));
    assert!(
        r.body.contains("<td class=\"num\">3</td><td>method</td>"),
        "{}",
        r.body
    );
    let after = (
        count(&app, "submission").await,
        count(&app, "measurement").await,
        count(&app, "galaxy").await,
    );
    assert_eq!(before, after);
    // The corrected file goes in as one pending submission of the new galaxy.
    let good = text.replace("warp_drive", "stellar_dynamics");
    let r = member.post("/submissions/upload", &[("csv", &good)]).await;
    assert_eq!(r.status, 200, "{}", r.body);
    assert!(r.body.contains("id=\"upload-done\""), "{}", r.body);
    let list = member.get("/submissions").await;
    assert!(list.body.contains("Tesk 951"));
    assert_eq!(count(&app, "submission").await, before.0 + 1);
}

#[tokio::test]
async fn the_downloaded_catalog_reimports_to_the_same_catalog_through_the_command_line() {
    let app = spawn_demo_app().await;
    let (status, text) = app.get("/catalog.csv").await;
    assert_eq!(status, 200);
    assert!(
        text.starts_with(CSV_HEADER),
        "{}",
        &text[..200.min(text.len())]
    );
    let adopted = count(&app, "adopted_value").await;
    assert_eq!(text.lines().count() as i64, adopted + 1);
    let dir = tempfile::tempdir().unwrap();
    let file = dir.path().join("catalog.csv");
    std::fs::write(&file, &text).unwrap();
    let db = dir.path().join("copy.sqlite");
    let bin = env!("CARGO_BIN_EXE_massline");
    let import = std::process::Command::new(bin)
        .args(["import", file.to_str().unwrap(), "--accept", "--db"])
        .arg(&db)
        .output()
        .unwrap();
    assert!(
        import.status.success(),
        "{}",
        String::from_utf8_lossy(&import.stderr)
    );
    assert!(String::from_utf8_lossy(&import.stderr).contains("importing [###"));
    let export = std::process::Command::new(bin)
        .args(["export", "--db"])
        .arg(&db)
        .output()
        .unwrap();
    assert!(export.status.success());
    assert_eq!(String::from_utf8(export.stdout).unwrap(), text);
    // Importing a faulty file through the command line writes nothing and names the row.
    std::fs::write(
        &file,
        format!("{CSV_HEADER}\nTesk 1,,,,,,,bh_mass,-1,,,maser,,,,,,,\n"),
    )
    .unwrap();
    let bad = std::process::Command::new(bin)
        .args(["import", file.to_str().unwrap(), "--db"])
        .arg(&db)
        .output()
        .unwrap();
    assert!(!bad.status.success());
    assert!(String::from_utf8_lossy(&bad.stderr).contains("line 2, column 'value'"));
}

#[tokio::test]
async fn the_upload_has_its_own_larger_body_limit_and_other_forms_keep_theirs() {
    let app = spawn_demo_app().await;
    let mut member = app.login_as(Role::Member).await;
    member.get("/submissions/upload").await;
    let long_note = "n".repeat(massline::router::BODY_LIMIT_BYTES + 100_000);
    let text = format!(
        "{CSV_HEADER}\nTesk 961,elliptical,classical,core,20,1,sbf,sigma,210 ± 10,,,,sigma_e,r_e,,,,,{long_note}\n"
    );
    // Over the ordinary limit, under the upload's: read, and refused for the note's length.
    let r = member.post("/submissions/upload", &[("csv", &text)]).await;
    assert_eq!(r.status, 400, "{}", &r.body[..300.min(r.body.len())]);
    assert!(
        r.body.contains("At most 2000 characters"),
        "row report expected"
    );
    let r = member
        .post("/submissions/new", &[("note", long_note.as_str())])
        .await;
    assert_eq!(r.status, 413);
    let huge = "x".repeat(massline::router::UPLOAD_LIMIT_BYTES + 10);
    let r = member.post("/submissions/upload", &[("csv", &huge)]).await;
    assert_eq!(r.status, 413);
}

#[tokio::test]
async fn the_reviewer_chooses_which_value_stays_adopted_when_they_clash() {
    let app = spawn_demo_app().await;
    let (galaxy_id, slug): (i64, String) = sqlx::query_as(
        "select g.galaxy_id, g.slug from galaxy g join adopted_value a using (galaxy_id)
          where a.quantity = 'bh_mass' order by g.galaxy_id limit 1",
    )
    .fetch_one(&app.pool)
    .await
    .unwrap();
    let adopted = |pool: sqlx::SqlitePool| async move {
        sqlx::query_scalar::<_, i64>(
            "select measurement_id from adopted_value where galaxy_id = ? and quantity = 'bh_mass'",
        )
        .bind(galaxy_id)
        .fetch_one(&pool)
        .await
        .unwrap()
    };
    let old = adopted(app.pool.clone()).await;
    let mut member = app.login_as(Role::Member).await;
    let mut submit = async || {
        let r = member
            .post(
                "/submissions/new",
                &[
                    ("galaxy", slug.as_str()),
                    ("m0_quantity", "bh_mass"),
                    ("m0_value", "1.5e8 ± 2e7"),
                    ("m0_scale", "auto"),
                    ("m0_method", "stellar_dynamics"),
                ],
            )
            .await;
        assert_eq!(r.status, 303, "{}", r.body);
        submission_id(&r.header("location"))
    };
    let first = submit().await;
    let second = submit().await;
    let new_of = |id: i64| {
        let pool = app.pool.clone();
        async move {
            sqlx::query_scalar::<_, i64>(
                "select measurement_id from measurement where submission_id = ?",
            )
            .bind(id)
            .fetch_one(&pool)
            .await
            .unwrap()
        }
    };
    let mut reviewer = app.login_as(Role::Reviewer).await;
    let queue = reviewer.get("/review").await;
    assert!(
        queue.body.contains("already has an adopted value"),
        "{}",
        queue.body
    );
    let key = format!("keep_{}", new_of(first).await);
    let r = reviewer
        .post(
            &format!("/review/{first}/accept"),
            &[(key.as_str(), "old"), ("note", "keep the published one")],
        )
        .await;
    assert_eq!(r.status, 303, "{}", r.body);
    assert_eq!(adopted(app.pool.clone()).await, old, "keep-old leaves it");
    let key = format!("keep_{}", new_of(second).await);
    let r = reviewer
        .post(
            &format!("/review/{second}/accept"),
            &[(key.as_str(), "new"), ("note", "")],
        )
        .await;
    assert_eq!(r.status, 303, "{}", r.body);
    assert_eq!(adopted(app.pool.clone()).await, new_of(second).await);
}

#[tokio::test]
async fn the_review_queue_is_paged_with_the_largest_z_first_across_pages() {
    use massline::catalog::galaxies::SubmissionSource;
    use massline::catalog::submissions::{self, GalaxyChoice};
    let app = spawn_demo_app().await;
    let member = app.create_account("queue-member", Role::Member).await;
    // 24 ordinary masses and one far above the relation, submitted last.
    let galaxy_ids: Vec<i64> = sqlx::query_scalar(
        "select galaxy_id from adopted_value where quantity = 'sigma' order by galaxy_id limit 25",
    )
    .fetch_all(&app.pool)
    .await
    .unwrap();
    for (i, galaxy_id) in galaxy_ids.iter().enumerate() {
        let sigma: f64 = sqlx::query_scalar(
            "select m.log_value from adopted_value a join measurement m using (measurement_id)
              where a.galaxy_id = ? and a.quantity = 'sigma'",
        )
        .bind(galaxy_id)
        .fetch_one(&app.pool)
        .await
        .unwrap();
        // M–σ of the demo model (seed-data/README.md): log M ≈ 8.3 + 5 (log σ − 2.3).
        let log_m = 8.3 + 5.0 * (sigma - 2.3) + if i == 24 { 2.5 } else { 0.0 };
        let cells = [
            ("quantity", "bh_mass".to_owned()),
            ("value", format!("log {log_m:.2} ± 0.1")),
            ("scale", "log10".to_owned()),
            ("method", "gas_dynamics".to_owned()),
        ];
        let m = massline::catalog::intake::measurement_from_cells("test", 0, &|c| {
            cells
                .iter()
                .find(|(k, _)| *k == c)
                .map_or("", |(_, v)| v.as_str())
        })
        .unwrap();
        let g = GalaxyChoice::Existing(*galaxy_id);
        let key = submissions::request_key(
            Some(member),
            &format!("q{i}"),
            &g,
            std::slice::from_ref(&m),
            "",
        );
        submissions::create(
            &app.pool,
            Some(member),
            SubmissionSource::Api,
            &g,
            &[m],
            "",
            &key,
            true,
        )
        .await
        .unwrap();
    }
    let mut reviewer = app.login_as(Role::Reviewer).await;
    let first = reviewer.get("/review").await;
    assert_eq!(first.status, 200);
    assert!(
        first.body.contains("25 pending; page 1 of 2."),
        "{}",
        first.body
    );
    let on_page = |body: &str| body.matches("class=\"review-item\"").count();
    assert_eq!(on_page(&first.body), 20);
    // The planted outlier, submitted last, heads the first page.
    let first_item = first.body.find("class=\"review-item\"").unwrap();
    let head = &first.body[first_item..first_item + 400];
    let outlier: i64 = sqlx::query_scalar("select max(submission_id) from submission")
        .fetch_one(&app.pool)
        .await
        .unwrap();
    assert!(head.contains(&format!("id=\"review-{outlier}\"")), "{head}");
    let second = reviewer.get("/review?page=2").await;
    assert_eq!(on_page(&second.body), 5);
    assert!(second.body.contains("rel=\"prev\""));
    assert_eq!(reviewer.get("/review?page=0").await.status, 400);
    assert_eq!(reviewer.get("/review?page=x").await.status, 400);
    let past = reviewer.get("/review?page=9").await;
    assert_eq!((past.status, on_page(&past.body)), (200, 0));
}

/// The residual (dex) and z of the M–σ row of a placement table, as shown.
fn m_sigma_residual_z(body: &str) -> (f64, f64) {
    let row = body
        .split("id=\"place-m_sigma\"")
        .nth(1)
        .expect("an M–σ row")
        .split("</tr>")
        .next()
        .unwrap();
    // Cells: relation, host value, predicted, 68 %, 95 %, residual, z, …
    let number = |n: usize| -> f64 {
        let cell = row.split("<td").nth(n).expect("a cell");
        let text = cell.split('>').nth(1).unwrap().split('<').next().unwrap();
        let text = text.trim().replace('−', "-").replace('+', "");
        text.parse()
            .unwrap_or_else(|_| panic!("cell {n}: '{text}'"))
    };
    (number(6), number(7))
}

#[tokio::test]
async fn the_distance_error_widens_the_z_of_a_submission() {
    // A mass above M–σ at 20 Mpc; the same with a distance known to 1 % and to 40 %. The
    // distance error enters the mass error in quadrature (docs/methods.md §3.2: σ_logD = σ_D /
    // (D ln 10), p = 1 for a dynamical mass, 0 for σ), so the second |z| is smaller.
    let app = spawn_demo_app().await;
    let mut member = app.login_as(Role::Member).await;
    member.get("/submissions/new").await;
    let mut shown = Vec::new();
    for (name, err) in [("Tesk 1501", "0.2"), ("Tesk 1502", "8")] {
        let mut fields = new_galaxy_form(name, "3e9 ± 0.3e9");
        for f in &mut fields {
            if f.0 == "distance_err_mpc" {
                f.1 = err;
            }
        }
        fields.push(("action", "check"));
        let r = member.post("/submissions/new", &fields).await;
        assert_eq!(r.status, 200, "{}", r.body);
        shown.push(m_sigma_residual_z(&r.body));
    }
    let ((r0, z0), (r1, z1)) = (shown[0], shown[1]);
    assert!(
        (r0 - r1).abs() < 1e-9,
        "the residual does not depend on the distance error"
    );
    // z > 2: beyond the "in tension" threshold (common practice, docs/methods.md §6).
    assert!(z0 > 2.0, "a mass far above the relation: z = {z0}");
    assert!(z1 < z0, "a 40 % distance error lowers z: {shown:?}");
    // z = r / √V; the larger distance error adds Δ = σ_logD₁² − σ_logD₀² to V, with
    // σ_logD = σ_D / (D ln 10) (docs/methods.md §3.2) and exponent 1 for a dynamical mass (σ has
    // none, so no covariance term). Shown values are rounded (z to 0.1, r to 0.01): compare
    // within that.
    let sigma_log_d = |err_mpc: f64| err_mpc / (20.0 * std::f64::consts::LN_10);
    let delta = sigma_log_d(8.0).powi(2) - sigma_log_d(0.2).powi(2);
    let expected_z1 = r0 / ((r0 / z0).powi(2) + delta).sqrt();
    assert!(
        (z1 - expected_z1).abs() < 0.12,
        "z with the wide distance error {z1}, expected {expected_z1:.3} from {shown:?}"
    );
}
