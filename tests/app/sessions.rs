//! Sessions: rotation at login, logout, idle and absolute expiry on the app's clock, disabling,
//! cookie attributes; and the anti-forgery checks of every form.

use massline::auth::Role;
use massline::catalog::accounts;
use sqlx::SqlitePool;

use crate::helpers::{TEST_PASSWORD, TestApp, spawn_private_app, spawn_with};

#[tokio::test]
async fn login_gives_a_new_session_id_and_ends_the_old_one() {
    let app = spawn_private_app().await;
    app.create_account("quillfern", Role::Member).await;
    let mut b = app.browser();
    assert_eq!(b.login("quillfern", TEST_PASSWORD).await.status, 303);
    let first = b.session_id().expect("a session cookie");
    assert_eq!(first.len(), 64);
    // Logging in again from the same browser: a new id, and the old one no longer works.
    let mut old = app.browser();
    old.cookies.insert("ml_session".into(), first.clone());
    assert_eq!(b.login("quillfern", TEST_PASSWORD).await.status, 303);
    let second = b.session_id().expect("a session cookie");
    assert_ne!(first, second);
    assert_eq!(old.get("/account").await.status, 303, "the old id is dead");
    assert_eq!(b.get("/account").await.status, 200);
    // The database keeps only a hash of the id.
    let stored: Vec<String> = sqlx::query_scalar("select id_sha256 from session")
        .fetch_all(&app.pool)
        .await
        .unwrap();
    assert_eq!(stored.len(), 1);
    assert!(!stored.contains(&second));
    assert_eq!(stored[0], massline::auth::secret::sha256_hex(&second));
}

#[tokio::test]
async fn a_pre_set_session_cookie_is_not_adopted_at_login() {
    // Session fixation: an id planted before login must not become the session.
    let app = spawn_private_app().await;
    app.create_account("quillfern", Role::Member).await;
    let mut b = app.browser();
    let planted = "a".repeat(64);
    b.cookies.insert("ml_session".into(), planted.clone());
    assert_eq!(b.login("quillfern", TEST_PASSWORD).await.status, 303);
    assert_ne!(b.session_id().unwrap(), planted);
}

#[tokio::test]
async fn logout_ends_the_session_on_the_server() {
    let app = spawn_private_app().await;
    let mut b = app.login_as(Role::Member).await;
    let id = b.session_id().unwrap();
    let r = b.post("/logout", &[]).await;
    assert_eq!(r.status, 303);
    assert!(b.session_id().is_none(), "the cookie is deleted");
    // Replaying the old cookie does not bring the session back.
    let mut replay = app.browser();
    replay.cookies.insert("ml_session".into(), id);
    assert_eq!(replay.get("/account").await.status, 303);
    assert_eq!(
        accounts::count_events(&app.pool, "logout").await.unwrap(),
        1
    );
}

#[tokio::test]
async fn an_idle_member_session_ends_after_30_minutes_on_the_server() {
    let app = spawn_private_app().await;
    let mut b = app.login_as(Role::Member).await;
    // Active every 29 minutes: the session lives on.
    for _ in 0..3 {
        app.clock.advance(29 * 60);
        assert_eq!(b.get("/account").await.status, 200);
    }
    app.clock.advance(30 * 60);
    let r = b.get("/account").await;
    assert_eq!(r.status, 303);
    assert!(r.header("location").starts_with("/login?next=/account"));
    assert_eq!(
        sqlx::query_scalar::<_, i64>("select count(*) from session")
            .fetch_one(&app.pool)
            .await
            .unwrap(),
        0,
        "the expired session was deleted"
    );
}

#[tokio::test]
async fn an_idle_admin_session_ends_after_15_minutes() {
    let app = spawn_private_app().await;
    let mut admin = app.login_as(Role::Admin).await;
    let mut member = app.login_as(Role::Member).await;
    app.clock.advance(15 * 60);
    assert_eq!(admin.get("/admin/accounts").await.status, 303);
    assert_eq!(member.get("/account").await.status, 200);
}

#[tokio::test]
async fn every_session_ends_8_hours_after_login_however_active() {
    let app = spawn_private_app().await;
    let mut b = app.login_as(Role::Reviewer).await;
    for _ in 0..(8 * 60 / 20 - 1) {
        app.clock.advance(20 * 60);
        assert_eq!(b.get("/").await.status, 200);
    }
    // 7 h 40 min now; 20 more minutes reach 8 h.
    app.clock.advance(20 * 60);
    assert_eq!(b.get("/").await.status, 303);
}

#[tokio::test]
async fn the_periodic_clean_up_deletes_expired_sessions() {
    let app = spawn_private_app().await;
    let _a = app.login_as(Role::Member).await;
    let _b = app.login_as(Role::Admin).await;
    app.clock.advance(16 * 60);
    // Only the admin's session is past its limit.
    assert_eq!(
        massline::startup::clean_up_once(&app.state).await.unwrap(),
        1
    );
    app.clock.advance(15 * 60);
    assert_eq!(
        massline::startup::clean_up_once(&app.state).await.unwrap(),
        1
    );
}

#[tokio::test]
async fn disabling_an_account_ends_its_live_sessions() {
    let app = spawn_private_app().await;
    let mut member = app.login_as(Role::Member).await;
    let mut admin = app.login_as(Role::Admin).await;
    let id = accounts::find_by_username(&app.pool, "test-member")
        .await
        .unwrap()
        .unwrap()
        .account_id;
    admin.get("/admin/accounts").await;
    let r = admin
        .post(&format!("/admin/accounts/{id}/disable"), &[])
        .await;
    assert_eq!(r.status, 303, "{}", r.body);
    assert_eq!(accounts::session_count(&app.pool, id).await.unwrap(), 0);
    assert_eq!(member.get("/account").await.status, 303);
    // And the account cannot log in again.
    let mut again = app.browser();
    assert_eq!(again.login("test-member", TEST_PASSWORD).await.status, 401);
    assert_eq!(
        accounts::count_events(&app.pool, "account_disabled")
            .await
            .unwrap(),
        1
    );
}

#[tokio::test]
async fn the_session_cookie_is_http_only_and_same_site() {
    let app = spawn_private_app().await;
    app.create_account("quillfern", Role::Member).await;
    let mut b = app.browser();
    let r = b.login("quillfern", TEST_PASSWORD).await;
    let cookie = r
        .set_cookies()
        .into_iter()
        .find(|c| c.starts_with("ml_session="))
        .expect("a session cookie");
    assert!(cookie.contains("HttpOnly"), "{cookie}");
    assert!(cookie.contains("SameSite=Lax"), "{cookie}");
    assert!(cookie.contains("Path=/"), "{cookie}");
    assert!(!cookie.contains("Secure"), "plain HTTP: no Secure flag");
}

#[tokio::test]
async fn with_secure_cookies_the_cookies_are_host_prefixed_and_secure_and_hsts_is_sent() {
    let app = spawn_with(|s| s.secure_cookies = true).await;
    app.create_account("quillfern", Role::Member).await;
    let mut b = app.browser();
    let page = b.get("/login").await;
    assert!(
        page.header("strict-transport-security")
            .contains("max-age=31536000")
    );
    let login_cookie = page.set_cookies().join("\n");
    assert!(
        login_cookie.starts_with("__Host-ml_login="),
        "{login_cookie}"
    );
    assert!(login_cookie.contains("; Secure"), "{login_cookie}");
    let csrf = b.csrf.clone();
    let r = b
        .post_raw(
            "/login",
            &[
                ("csrf", csrf.as_str()),
                ("username", "quillfern"),
                ("password", TEST_PASSWORD),
            ],
            &[],
        )
        .await;
    assert_eq!(r.status, 303, "{}", r.body);
    let cookie = r
        .set_cookies()
        .into_iter()
        .find(|c| c.starts_with("__Host-ml_session="))
        .expect("a __Host- session cookie");
    assert!(
        cookie.contains("; Secure") && cookie.contains("HttpOnly") && cookie.contains("Path=/")
    );
    // The session works (reqwest is not a browser: it sends the cookie over plain HTTP too).
    assert_eq!(b.get("/account").await.status, 200);
}

// --------------------------------------------------------------------------- anti-forgery

/// Everything a forged request could change, as one comparable value.
async fn snapshot(pool: &SqlitePool) -> (i64, String, String, i64) {
    let events: i64 = sqlx::query_scalar("select count(*) from audit_event")
        .fetch_one(pool)
        .await
        .unwrap();
    let accounts: String = sqlx::query_scalar(
        "select coalesce(group_concat(username || ':' || role || ':' || disabled, ','), '')
           from (select * from account order by account_id)",
    )
    .fetch_one(pool)
    .await
    .unwrap();
    let tokens: String = sqlx::query_scalar(
        "select coalesce(group_concat(api_token_id || ':' || coalesce(revoked_at, '-'), ','), '')
           from (select * from api_token order by api_token_id)",
    )
    .fetch_one(pool)
    .await
    .unwrap();
    let sessions: i64 = sqlx::query_scalar("select count(*) from session")
        .fetch_one(pool)
        .await
        .unwrap();
    (events, accounts, tokens, sessions)
}

/// The state-changing forms of an admin, each with a body that would succeed with a token.
fn admin_forms(victim: i64, own_token: i64) -> Vec<(String, Vec<(&'static str, &'static str)>)> {
    vec![
        (
            "/account/tokens".into(),
            vec![("label", "forged"), ("read", "1")],
        ),
        (format!("/account/tokens/{own_token}/revoke"), vec![]),
        (
            "/admin/accounts".into(),
            vec![
                ("username", "forged-one"),
                ("role", "admin"),
                ("password", ""),
            ],
        ),
        (
            format!("/admin/accounts/{victim}/role"),
            vec![("role", "admin")],
        ),
        (format!("/admin/accounts/{victim}/disable"), vec![]),
        ("/logout".into(), vec![]),
    ]
}

/// A forged request: what it is, the token it carries, extra headers.
type Variant<'a> = (&'a str, Option<&'a str>, Vec<(&'a str, &'a str)>);

async fn arrange(app: &TestApp) -> (crate::helpers::Browser, i64, i64) {
    let victim = app.create_account("victim", Role::Member).await;
    let admin = app.login_as(Role::Admin).await;
    let me = accounts::find_by_username(&app.pool, "test-admin")
        .await
        .unwrap()
        .unwrap()
        .account_id;
    let (_, own_token) = app.make_token(me, "read").await;
    (admin, victim, own_token)
}

#[tokio::test]
async fn forms_without_a_valid_token_or_from_another_site_are_refused_and_change_nothing() {
    let app = spawn_private_app().await;
    let (mut admin, victim, own_token) = arrange(&app).await;
    let valid = admin.csrf.clone();
    // Another session's token.
    let other = app.login_as(Role::Member).await;
    let foreign_token = other.csrf.clone();
    assert_ne!(foreign_token, valid);
    // A token from a session that has since logged out.
    let mut old = app.browser();
    old.login("test-admin", TEST_PASSWORD).await;
    let stale = old.csrf.clone();
    assert_eq!(old.post("/logout", &[]).await.status, 303);

    let before = snapshot(&app.pool).await;
    let mut refused = 0;
    for (path, fields) in admin_forms(victim, own_token) {
        let variants: Vec<Variant<'_>> = vec![
            ("no token", None, vec![]),
            ("another session's token", Some(&foreign_token), vec![]),
            ("a token from before logout", Some(&stale), vec![]),
            (
                "Sec-Fetch-Site: cross-site",
                Some(&valid),
                vec![("sec-fetch-site", "cross-site")],
            ),
            (
                "a foreign Origin",
                Some(&valid),
                vec![("origin", "http://evil.example")],
            ),
            ("Origin: null", Some(&valid), vec![("origin", "null")]),
        ];
        for (what, token, headers) in variants {
            let mut all = fields.clone();
            if let Some(t) = token {
                all.push(("csrf", t));
            }
            let r = admin.post_raw(&path, &all, &headers).await;
            assert_eq!(r.status, 403, "POST {path} with {what}: {}", r.body);
            refused += 1;
        }
    }
    assert_eq!(refused, 36);
    assert_eq!(
        snapshot(&app.pool).await,
        before,
        "a refused form changed something"
    );

    // The same forms with the valid token and same-origin headers go through.
    for (path, fields) in admin_forms(victim, own_token) {
        let mut all = fields.clone();
        all.push(("csrf", valid.as_str()));
        let origin = app.address.clone();
        let r = admin
            .post_raw(
                &path,
                &all,
                &[
                    ("sec-fetch-site", "same-origin"),
                    ("origin", origin.as_str()),
                ],
            )
            .await;
        assert!(
            r.status == 200 || r.status == 303,
            "POST {path} with a valid token answered {}: {}",
            r.status,
            r.body
        );
    }
    assert_ne!(snapshot(&app.pool).await, before);
}

#[tokio::test]
async fn the_login_form_is_protected_against_forgery_too() {
    let app = spawn_private_app().await;
    app.create_account("quillfern", Role::Member).await;
    let fields = [("username", "quillfern"), ("password", TEST_PASSWORD)];
    // No login cookie and no token.
    let mut b = app.browser();
    assert_eq!(b.post_raw("/login", &fields, &[]).await.status, 403);
    // A token that does not match the cookie.
    b.get("/login").await;
    let mut wrong = fields.to_vec();
    let other = "b".repeat(64);
    wrong.push(("csrf", other.as_str()));
    assert_eq!(b.post_raw("/login", &wrong, &[]).await.status, 403);
    // A valid token sent from another site.
    let csrf = b.csrf.clone();
    let mut good = fields.to_vec();
    good.push(("csrf", csrf.as_str()));
    let r = b
        .post_raw("/login", &good, &[("sec-fetch-site", "cross-site")])
        .await;
    assert_eq!(r.status, 403);
    assert_eq!(accounts::count_events(&app.pool, "login").await.unwrap(), 0);
    // The real thing works.
    assert_eq!(b.post_raw("/login", &good, &[]).await.status, 303);
}

#[tokio::test]
async fn a_login_cookie_and_token_chosen_together_by_someone_else_do_not_log_in() {
    let app = spawn_private_app().await;
    app.create_account("quillfern", Role::Member).await;
    // Someone who can set cookies for this host (another port of it, say) plants a login
    // cookie and sends a form whose token is that same value, with no Origin or Sec-Fetch-Site
    // header to give it away.
    let chosen = "5e".repeat(32);
    let mut b = app.browser();
    b.cookies.insert("ml_login".into(), chosen.clone());
    let forged = [
        ("csrf", chosen.as_str()),
        ("username", "quillfern"),
        ("password", TEST_PASSWORD),
    ];
    let r = b.post_raw("/login", &forged, &[]).await;
    assert_eq!(r.status, 403, "{}", r.body);
    assert!(!b.cookies.contains_key("ml_session"));
    assert_eq!(accounts::count_events(&app.pool, "login").await.unwrap(), 0);
    // The server's form keeps the cookie's nonce and carries a value derived from it, so
    // neither can be copied into the other.
    let page = b.get("/login").await;
    assert_eq!(page.status, 200);
    let nonce = b.cookies["ml_login"].clone();
    assert_eq!(nonce, chosen, "a well-formed cookie is kept");
    assert_ne!(b.csrf, nonce);
    assert_eq!(b.csrf.len(), 64);
    // A form of this server carrying the token for another nonce is refused too.
    let mut elsewhere = app.browser();
    elsewhere.get("/login").await;
    let foreign = elsewhere.csrf.clone();
    let mixed = [
        ("csrf", foreign.as_str()),
        ("username", "quillfern"),
        ("password", TEST_PASSWORD),
    ];
    assert_eq!(b.post_raw("/login", &mixed, &[]).await.status, 403);
    // The server's own pair logs in.
    assert_eq!(b.login("quillfern", TEST_PASSWORD).await.status, 303);
    assert_eq!(accounts::count_events(&app.pool, "login").await.unwrap(), 1);
}

#[tokio::test]
async fn get_requests_change_nothing() {
    let app = spawn_private_app().await;
    let (mut admin, victim, own_token) = arrange(&app).await;
    let before = snapshot(&app.pool).await;
    for (path, _) in admin_forms(victim, own_token) {
        let r = admin.get(&path).await;
        // 405 for form targets; /admin/accounts is also the (read-only) list page.
        assert!(
            r.status == 405 || (path == "/admin/accounts" && r.status == 200),
            "GET {path}: {}",
            r.status
        );
    }
    assert_eq!(snapshot(&app.pool).await, before);
}

#[tokio::test]
async fn after_login_the_browser_returns_to_the_page_it_asked_for_on_this_site_only() {
    let app = spawn_private_app().await;
    app.create_account("quillfern", Role::Member).await;
    let mut b = app.browser();
    let r = b.get("/galaxies?sort=sigma").await;
    assert_eq!(r.status, 303);
    let location = r.header("location");
    assert_eq!(location, "/login?next=/galaxies%3Fsort%3Dsigma");
    let page = b.get(&location).await;
    assert!(
        page.body
            .contains("name=\"next\" value=\"/galaxies?sort=sigma\"")
    );
    for (next, expected) in [
        ("/galaxies?sort=sigma", "/galaxies?sort=sigma"),
        ("https://evil.example/", "/"),
        ("//evil.example/", "/"),
    ] {
        b.get("/login").await;
        let csrf = b.csrf.clone();
        let r = b
            .post_raw(
                "/login",
                &[
                    ("csrf", csrf.as_str()),
                    ("username", "quillfern"),
                    ("password", TEST_PASSWORD),
                    ("next", next),
                ],
                &[],
            )
            .await;
        assert_eq!(r.status, 303);
        assert_eq!(r.header("location"), expected, "{next}");
    }
}
