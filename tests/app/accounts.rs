//! Account management: the admin pages, the audit page, the demo accounts and the `user`
//! command line.

use massline::auth::Role;
use massline::catalog::accounts;
use massline::cli::user::{UserArgs, UserCommand};

use crate::helpers::{TEST_PASSWORD, spawn_private_app, spawn_with};

#[tokio::test]
async fn an_admin_creates_an_account_with_a_generated_password_shown_once() {
    let app = spawn_private_app().await;
    let mut admin = app.login_as(Role::Admin).await;
    admin.get("/admin/accounts").await;
    let r = admin
        .post(
            "/admin/accounts",
            &[
                ("username", "new-reviewer"),
                ("role", "reviewer"),
                ("password", ""),
            ],
        )
        .await;
    assert_eq!(r.status, 200, "{}", r.body);
    let start = r.body.find("id=\"new-password\">").expect("the password") + 18;
    let end = r.body[start..].find('<').unwrap() + start;
    let password = r.body[start..end].to_string();
    assert_eq!(password.chars().count(), 20);
    // Not shown again, and it works.
    assert!(!admin.get("/admin/accounts").await.body.contains(&password));
    let mut b = app.browser();
    assert_eq!(b.login("new-reviewer", &password).await.status, 303);
    let me = b.get("/account").await;
    assert!(me.body.contains("<dd id=\"account-role\">reviewer</dd>"));
    assert_eq!(
        accounts::count_events(&app.pool, "account_created")
            .await
            .unwrap(),
        2
    );
}

#[tokio::test]
async fn weak_or_short_passwords_and_bad_names_are_refused_with_a_sentence() {
    let app = spawn_private_app().await;
    let mut admin = app.login_as(Role::Admin).await;
    admin.get("/admin/accounts").await;
    for (name, password, says) in [
        ("someone", "short", "at least 12"),
        ("someone", "password1234", "too easy to guess"),
        ("someone", "someone12345", "too easy to guess"),
        ("x", TEST_PASSWORD, "3 to 64 characters"),
        ("test-admin", TEST_PASSWORD, "already taken"),
    ] {
        let r = admin
            .post(
                "/admin/accounts",
                &[
                    ("username", name),
                    ("role", "member"),
                    ("password", password),
                ],
            )
            .await;
        assert_eq!(r.status, 400, "{name}/{password}");
        assert!(r.body.contains(says), "{says}: {}", r.body);
    }
    assert_eq!(accounts::list_accounts(&app.pool).await.unwrap().len(), 1);
}

#[tokio::test]
async fn role_changes_take_effect_at_once_and_are_audited() {
    let app = spawn_private_app().await;
    let mut member = app.login_as(Role::Member).await;
    let mut admin = app.login_as(Role::Admin).await;
    assert_eq!(member.get("/admin/accounts").await.status, 403);
    let id = accounts::find_by_username(&app.pool, "test-member")
        .await
        .unwrap()
        .unwrap()
        .account_id;
    admin.get("/admin/accounts").await;
    let r = admin
        .post(&format!("/admin/accounts/{id}/role"), &[("role", "admin")])
        .await;
    assert_eq!(r.status, 303);
    // The member's existing session now has the admin role.
    assert_eq!(member.get("/admin/accounts").await.status, 200);
    let audit = admin.get("/admin/audit?action=role_changed").await;
    assert!(
        audit
            .body
            .contains("Changed the role of &#39;test-member&#39; from member to admin."),
        "{}",
        audit.body
    );
    // Bad values: a 400 page.
    let r = admin
        .post(&format!("/admin/accounts/{id}/role"), &[("role", "root")])
        .await;
    assert_eq!(r.status, 400);
}

#[tokio::test]
async fn an_admin_cannot_demote_or_disable_themselves_here() {
    let app = spawn_private_app().await;
    let mut admin = app.login_as(Role::Admin).await;
    let me = accounts::find_by_username(&app.pool, "test-admin")
        .await
        .unwrap()
        .unwrap()
        .account_id;
    admin.get("/admin/accounts").await;
    let r = admin
        .post(&format!("/admin/accounts/{me}/role"), &[("role", "member")])
        .await;
    assert_eq!(r.status, 400);
    let r = admin
        .post(&format!("/admin/accounts/{me}/disable"), &[])
        .await;
    assert_eq!(r.status, 400);
    let r = admin.post("/admin/accounts/999/disable", &[]).await;
    assert_eq!(r.status, 404);
    assert_eq!(admin.get("/admin/accounts").await.status, 200);
}

#[tokio::test]
async fn the_audit_page_filters_by_action_user_and_date_and_refuses_bad_filters() {
    let app = spawn_private_app().await;
    app.create_account("quillfern", Role::Member).await;
    let mut member = app.browser();
    assert_eq!(
        member.login("quillfern", "wrong wrong wrong").await.status,
        401
    );
    assert_eq!(member.login("quillfern", TEST_PASSWORD).await.status, 303);
    let mut admin = app.login_as(Role::Admin).await;

    let logins = admin.get("/admin/audit?action=login").await.body;
    assert_eq!(crate::helpers::count(&logins, "<code>login</code>"), 2);
    assert!(!logins.contains("<code>login_failed</code>"));
    let member_only = admin.get("/admin/audit?user=quillfern").await.body;
    assert!(member_only.contains("<code>login_failed</code>"));
    assert!(member_only.contains("&#39;quillfern&#39; logged in"));
    assert!(!member_only.contains("&#39;test-admin&#39; logged in"));
    let today = time::OffsetDateTime::now_utc().date();
    let fmt = time::macros::format_description!("[year]-[month]-[day]");
    let d = today.format(&fmt).unwrap();
    let within = admin
        .get(&format!("/admin/audit?from={d}&to={d}"))
        .await
        .body;
    assert!(within.contains("<code>account_created</code>"));
    let next_day = today.next_day().unwrap().format(&fmt).unwrap();
    let later = admin
        .get(&format!("/admin/audit?from={next_day}"))
        .await
        .body;
    assert!(later.contains("No event matches these filters."));
    for bad in [
        "/admin/audit?from=2026-02-30",
        "/admin/audit?to=tomorrow",
        "/admin/audit?action=DROP%20TABLE",
        "/admin/audit?user=%3Cb%3E",
        "/admin/audit?from=2026-03-01&to=2026-02-01",
        "/admin/audit?colour=red",
    ] {
        let r = admin.get(bad).await;
        assert_eq!(r.status, 400, "{bad}");
        assert!(r.body.contains("Parameter"), "{bad}: {}", r.body);
    }
}

#[tokio::test]
async fn the_overview_does_not_show_login_events_to_readers() {
    let app = spawn_with(|s| s.public_read = true).await;
    app.create_account("quillfern", Role::Member).await;
    let mut b = app.browser();
    b.login("quillfern", "wrong wrong wrong").await;
    let overview = app.ok("/").await;
    assert!(!overview.contains("Failed login"), "{overview}");
    assert!(!overview.contains("Created the account"));
}

#[tokio::test]
async fn demo_mode_creates_three_accounts_once_with_working_passwords() {
    let app = spawn_with(|s| s.demo = true).await;
    let names: Vec<(String, String)> = accounts::list_accounts(&app.pool)
        .await
        .unwrap()
        .into_iter()
        .map(|a| (a.username, a.role))
        .collect();
    assert_eq!(
        names,
        vec![
            ("demo-admin".to_string(), "admin".to_string()),
            ("demo-member".to_string(), "member".to_string()),
            ("demo-reviewer".to_string(), "reviewer".to_string()),
        ]
    );
    // A second start on the same database makes none and shows no password.
    let path = app.db_path.clone();
    let mut settings = massline::Settings::for_tests(path);
    settings.demo = true;
    let again = massline::Application::build(settings).await.unwrap();
    assert!(again.demo_accounts().is_empty());
    // The first start's passwords log in.
    let dir = tempfile::tempdir().unwrap();
    let mut settings = massline::Settings::for_tests(dir.path().join("d.sqlite"));
    settings.demo = true;
    let fresh = massline::Application::build(settings).await.unwrap();
    assert_eq!(fresh.demo_accounts().len(), 3);
    let pool = fresh.pool();
    for a in fresh.demo_accounts() {
        let stored = accounts::find_by_username(&pool, &a.username)
            .await
            .unwrap()
            .unwrap();
        assert!(massline::auth::password::verify_now(
            &a.password,
            &stored.password_hash
        ));
        assert_eq!(stored.role, a.role.as_str());
    }
}

fn run_user(db: &std::path::Path, command: UserCommand) -> anyhow::Result<String> {
    let mut out = Vec::new();
    massline::cli::user::run(
        &UserArgs {
            db_path: db.to_path_buf(),
            command,
        },
        &mut out,
    )?;
    Ok(String::from_utf8(out).unwrap())
}

#[test]
fn the_user_command_adds_lists_changes_and_disables_accounts() {
    let dir = tempfile::tempdir().unwrap();
    let db = dir.path().join("cli.sqlite");
    let out = run_user(
        &db,
        UserCommand::Add {
            name: "lead-admin".into(),
            role: Role::Admin,
            generate: true,
        },
    )
    .unwrap();
    assert!(out.contains("Created the account 'lead-admin' with role admin."));
    let password = out
        .lines()
        .find_map(|l| l.strip_prefix("Its password (shown only now): "))
        .expect("the generated password is printed");
    assert_eq!(password.chars().count(), 20);
    let again = run_user(
        &db,
        UserCommand::Add {
            name: "lead-admin".into(),
            role: Role::Member,
            generate: true,
        },
    );
    assert!(again.unwrap_err().to_string().contains("already taken"));
    run_user(
        &db,
        UserCommand::SetRole {
            name: "lead-admin".into(),
            role: Role::Reviewer,
        },
    )
    .unwrap();
    run_user(
        &db,
        UserCommand::Disable {
            name: "lead-admin".into(),
        },
    )
    .unwrap();
    let list = run_user(&db, UserCommand::List).unwrap();
    assert!(list.contains("lead-admin") && list.contains("reviewer") && list.contains("disabled"));
    let missing = run_user(
        &db,
        UserCommand::Disable {
            name: "nobody".into(),
        },
    );
    assert!(
        missing
            .unwrap_err()
            .to_string()
            .contains("no account named 'nobody'")
    );
}
