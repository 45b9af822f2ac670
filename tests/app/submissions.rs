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
        text.starts_with(&massline::catalog::csv_io::COLUMNS.join(",")),
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

/// The body of the first element with this id, up to its closing tag's start.
fn element<'a>(body: &'a str, id: &str) -> &'a str {
    let at = body
        .find(&format!("id=\"{id}\""))
        .unwrap_or_else(|| panic!("no #{id} in {body}"));
    &body[at..]
}

#[tokio::test]
async fn the_submitter_reads_the_decision_its_note_reviewer_and_date() {
    let app = spawn_demo_app().await;
    let mut member = app.login_as(Role::Member).await;
    let r = member
        .post(
            "/submissions/new",
            &new_galaxy_form("Tesk 921", "2e8 ± 0.3e8"),
        )
        .await;
    let id = submission_id(&r.header("location"));
    let mut reviewer = app.login_as(Role::Reviewer).await;
    reviewer.get("/review").await;
    let note = "the aperture is smaller than the seeing disc";
    let r = reviewer
        .post(&format!("/review/{id}/reject"), &[("note", note)])
        .await;
    assert_eq!(r.status, 303, "{}", r.body);
    let (reviewer_name, stored_at): (String, String) = sqlx::query_as(
        "select a.username, r.created_at from review r join account a using (account_id)
          where r.submission_id = ?",
    )
    .bind(id)
    .fetch_one(&app.pool)
    .await
    .unwrap();
    for path in ["/submissions".to_owned(), format!("/submissions/{id}")] {
        let page = member.get(&path).await;
        assert_eq!(page.status, 200, "{path}");
        assert!(page.body.contains(note), "{path}: {}", page.body);
        assert!(page.body.contains(&reviewer_name), "{path}");
        // The date for people, the stored time for machines.
        assert!(
            page.body
                .contains(&format!("<time datetime=\"{stored_at}\">")),
            "{path}: {}",
            page.body
        );
        assert!(
            !page.body.contains(&format!(">{stored_at}<")),
            "{path}: a raw stored time is shown"
        );
        assert!(page.body.contains(" UTC</time>"), "{path}");
        assert!(page.body.contains("rejected"), "{path}");
    }
}

/// Submit a black-hole mass of `log_value` (± 0.1 dex) for an existing galaxy; returns the
/// submission's number and its measurement's.
async fn submit_log_mass(
    app: &TestApp,
    member: &mut crate::helpers::Browser,
    slug: &str,
    log_value: f64,
) -> (i64, i64) {
    let value = format!("log {log_value:.2} ± 0.1");
    let r = member
        .post(
            "/submissions/new",
            &[
                ("galaxy", slug),
                ("m0_quantity", "bh_mass"),
                ("m0_value", value.as_str()),
                ("m0_scale", "auto"),
                ("m0_method", "stellar_dynamics"),
            ],
        )
        .await;
    assert_eq!(r.status, 303, "{}", r.body);
    let id = submission_id(&r.header("location"));
    let measurement: i64 =
        sqlx::query_scalar("select measurement_id from measurement where submission_id = ?")
            .bind(id)
            .fetch_one(&app.pool)
            .await
            .unwrap();
    (id, measurement)
}

#[tokio::test]
async fn an_outlier_clash_preselects_keeping_the_adopted_value_and_says_why() {
    let app = spawn_demo_app().await;
    // A galaxy with an adopted mass and σ, so the mass places it against M–σ.
    let (slug, log_mass): (String, f64) = sqlx::query_as(
        "select g.slug, m.log_value from galaxy g
           join adopted_value a on a.galaxy_id = g.galaxy_id and a.quantity = 'bh_mass'
           join measurement m on m.measurement_id = a.measurement_id
          where exists (select 1 from adopted_value s
                         where s.galaxy_id = g.galaxy_id and s.quantity = 'sigma')
            and m.log_value between 7.0 and 9.0
       order by g.galaxy_id limit 1",
    )
    .fetch_one(&app.pool)
    .await
    .unwrap();
    let mut member = app.login_as(Role::Member).await;
    // Two dex above its adopted mass: far beyond 3σ of any relation's scatter.
    let (outlier, outlier_m) = submit_log_mass(&app, &mut member, &slug, log_mass + 2.0).await;
    // Its adopted mass again: consistent wherever the adopted one is.
    let (same, same_m) = submit_log_mass(&app, &mut member, &slug, log_mass).await;
    let mut reviewer = app.login_as(Role::Reviewer).await;
    let queue = reviewer.get("/review").await.body;
    let item = |id: i64| {
        let start = element(&queue, &format!("review-{id}"));
        start[..start.find("</section>").unwrap()].to_owned()
    };
    let outlier_item = item(outlier);
    assert!(
        outlier_item.contains("class=\"verdict v-outlier\""),
        "{outlier_item}"
    );
    assert!(
        outlier_item.contains(&format!("name=\"keep_{outlier_m}\" value=\"old\" checked")),
        "{outlier_item}"
    );
    assert!(
        !outlier_item.contains(&format!("name=\"keep_{outlier_m}\" value=\"new\" checked")),
        "{outlier_item}"
    );
    assert!(
        outlier_item.contains("keep the adopted value, because"),
        "{outlier_item}"
    );
    let same_item = item(same);
    assert!(
        same_item.contains(&format!("name=\"keep_{same_m}\" value=\"new\" checked")),
        "{same_item}"
    );
    assert!(!same_item.contains("because with the submitted values"));
    // The buttons say which action is the main one and which destroys.
    assert!(outlier_item.contains("<button type=\"submit\" class=\"primary\">Accept"));
    assert!(outlier_item.contains("<button type=\"submit\" class=\"danger\">Reject"));
}

#[tokio::test]
async fn each_action_is_confirmed_to_the_one_who_did_it_and_an_address_forges_nothing() {
    let app = spawn_demo_app().await;
    let mut member = app.login_as(Role::Member).await;
    let r = member
        .post(
            "/submissions/new",
            &new_galaxy_form("Tesk 922", "2e8 ± 0.3e8"),
        )
        .await;
    let location = r.header("location");
    let id = submission_id(&location);
    let page = member.get(&location).await.body;
    assert!(
        element(&page, "flash").contains(&format!("Submission {id} for Tesk 922 was saved")),
        "{page}"
    );
    assert!(page.contains("<p class=\"flash\" role=\"status\""));
    // Shown once.
    let again = member.get(&location).await.body;
    assert!(!again.contains("class=\"flash\""), "{again}");
    // A pending submission is not confirmed as withdrawn by an address.
    let list = member
        .get(&format!("/submissions?withdrawn={id}"))
        .await
        .body;
    assert!(!list.contains("class=\"flash\""), "{list}");
    // Nor decided on, to a reviewer who did not decide.
    let mut reviewer = app.login_as(Role::Reviewer).await;
    let queue = reviewer.get(&format!("/review?decided={id}")).await.body;
    assert!(!queue.contains("class=\"flash\""), "{queue}");
    let r = reviewer
        .post(&format!("/review/{id}/accept"), &[("note", "")])
        .await;
    assert_eq!(r.status, 303, "{}", r.body);
    let queue = reviewer.get(&r.header("location")).await.body;
    assert!(
        element(&queue, "flash").contains("for Tesk 922 was accepted"),
        "{queue}"
    );
    app.create_account("second-reviewer", Role::Reviewer).await;
    let mut other = app.browser();
    other
        .login("second-reviewer", crate::helpers::TEST_PASSWORD)
        .await;
    let queue = other.get(&format!("/review?decided={id}")).await.body;
    assert!(!queue.contains("class=\"flash\""), "{queue}");
    // Withdrawing is confirmed on the list.
    let r = member
        .post(
            "/submissions/new",
            &new_galaxy_form("Tesk 923", "2e8 ± 0.3e8"),
        )
        .await;
    let second = submission_id(&r.header("location"));
    let r = member
        .post(&format!("/submissions/{second}/withdraw"), &[])
        .await;
    assert_eq!(r.status, 303);
    let list = member.get(&r.header("location")).await.body;
    assert!(
        element(&list, "flash")
            .contains(&format!("Submission {second} for Tesk 923 was withdrawn")),
        "{list}"
    );
}

#[tokio::test]
async fn measurement_details_show_words_not_codes() {
    let app = spawn_demo_app().await;
    let mut member = app.login_as(Role::Member).await;
    let r = member
        .post(
            "/submissions/new",
            &new_galaxy_form("Tesk 924", "2e8 ± 0.3e8"),
        )
        .await;
    let id = submission_id(&r.header("location"));
    let page = member.get(&format!("/submissions/{id}")).await.body;
    let table = element(&page, "measurements");
    let table = &table[..table.find("</table>").unwrap()];
    assert!(table.contains("σ_e within r_e"), "{table}");
    assert!(table.contains("stellar dynamics"), "{table}");
    assert!(
        !table.contains("stellar_dynamics") && !table.contains("sigma_e"),
        "{table}"
    );
    // θ_infl / resolution, worked out on the page.
    assert!(page.contains("θ_infl / resolution"), "{page}");
    assert!(!page.contains("resolution/θ"));
}

#[tokio::test]
async fn the_form_asks_only_what_each_quantity_needs_and_resolves_typed_galaxy_names() {
    let app = spawn_demo_app().await;
    let mut member = app.login_as(Role::Member).await;
    let form = member.get("/submissions/new").await.body;
    // The picker is a text box with the catalog's names to choose from; a script file, no
    // inline script.
    assert!(
        form.contains("name=\"galaxy\" list=\"galaxy-names\""),
        "{form}"
    );
    assert!(form.contains("<datalist id=\"galaxy-names\">"));
    assert!(form.contains("<script src=\"/static/submission.js\" defer></script>"));
    assert!(
        app.ok("/static/submission.js")
            .await
            .contains("for-quantity")
    );
    // One method list per quantity, each under a heading naming it.
    let bh = element(&form, "f-m0_method_bh");
    let bh = &bh[..bh.find("</select>").unwrap()];
    assert!(
        bh.contains("stellar dynamics") && !bh.contains("photometric"),
        "{bh}"
    );
    let bulge = element(&form, "f-m0_method_bulge");
    let bulge = &bulge[..bulge.find("</select>").unwrap()];
    assert!(
        bulge.contains("photometric") && !bulge.contains("maser"),
        "{bulge}"
    );
    assert!(form.contains("<legend>Black-hole mass only</legend>"));
    assert!(form.contains("data-quantities=\"sigma\""));
    // A new galaxy's kinds are asked, not assumed.
    for field in ["morphology", "bulge_kind", "centre_kind", "distance_method"] {
        let select = element(&form, &format!("f-{field}"));
        let first = &select[select.find("<option").unwrap()..];
        assert!(
            first.starts_with("<option value=\"\" selected>choose…</option>"),
            "{field}: {}",
            &first[..80.min(first.len())]
        );
    }
    // "Check" opens the page at its result.
    assert!(form.contains("formaction=\"/submissions/new#preview\""));

    // A galaxy typed by its name (any letter case) is that galaxy.
    let (name, slug): (String, String) =
        sqlx::query_as("select name, slug from galaxy order by galaxy_id limit 1")
            .fetch_one(&app.pool)
            .await
            .unwrap();
    let typed = name.to_uppercase();
    let r = member
        .post(
            "/submissions/new",
            &[
                ("galaxy", typed.as_str()),
                ("m0_quantity", "bh_mass"),
                ("m0_value", "2e8 ± 0.3e8"),
                ("m0_scale", "auto"),
                ("m0_method_bh", "gas_dynamics"),
            ],
        )
        .await;
    assert_eq!(r.status, 303, "{}", r.body);
    let id = submission_id(&r.header("location"));
    let (stored_slug, method): (String, String) = sqlx::query_as(
        "select g.slug, m.method from measurement m join galaxy g using (galaxy_id)
          where m.submission_id = ?",
    )
    .bind(id)
    .fetch_one(&app.pool)
    .await
    .unwrap();
    assert_eq!(
        (stored_slug.as_str(), method.as_str()),
        (slug.as_str(), "gas_dynamics")
    );

    // A name not in the catalog is named beside the picker, and everything typed stays.
    let before = count(&app, "submission").await;
    let r = member
        .post(
            "/submissions/new",
            &[
                ("galaxy", "Nowhere 12345"),
                ("m0_quantity", "sigma"),
                ("m0_value", "185 ± 9"),
                ("m0_sigma_definition", "sigma_e"),
                ("m0_aperture", "r_e"),
                ("m0_reference", "Invented et al. 2034"),
                ("note", "kept as typed"),
            ],
        )
        .await;
    assert_eq!(r.status, 400, "{}", r.body);
    let error = element(&r.body, "e-galaxy");
    assert!(
        error.contains("No galaxy in the catalog is called “Nowhere 12345”"),
        "{error}"
    );
    assert!(r.body.contains("aria-describedby=\"e-galaxy\""));
    for kept in [
        "value=\"Nowhere 12345\"",
        "value=\"185 ± 9\"",
        "value=\"r_e\"",
        "value=\"Invented et al. 2034\"",
        ">kept as typed</textarea>",
        "<option value=\"sigma_e\" selected>",
    ] {
        assert!(r.body.contains(kept), "{kept} kept: {}", r.body);
    }
    assert_eq!(count(&app, "submission").await, before, "nothing stored");
    // A new galaxy whose kinds were not chosen: each is named, nothing stored.
    let mut fields = new_galaxy_form("Tesk 925", "2e8 ± 0.3e8");
    fields.retain(|(k, _)| *k != "morphology");
    let r = member.post("/submissions/new", &fields).await;
    assert_eq!(r.status, 400, "{}", r.body);
    assert!(r.body.contains("id=\"e-morphology\""), "{}", r.body);
    assert!(r.body.contains("value=\"Tesk 925\""));
    assert_eq!(count(&app, "submission").await, before, "nothing stored");
}
