//! Brute-force limits, request rates, the response headers, API tokens, and script injection.

use massline::auth::Role;
use massline::catalog::accounts;

use crate::helpers::{Reply, TEST_PASSWORD, spawn_private_app, spawn_with};

// ---------------------------------------------------------------------------- brute force

#[tokio::test]
async fn five_failures_lock_the_name_and_rotating_forwarded_for_gives_no_extra_tries() {
    let app = spawn_private_app().await;
    app.create_account("quillfern", Role::Member).await;
    app.create_account("bystander", Role::Member).await;
    let mut b = app.browser();
    let mut statuses = Vec::new();
    for i in 0..12 {
        let forwarded = format!("203.0.113.{i}");
        let r = b
            .login_with(
                "quillfern",
                "not the password at all",
                &[
                    ("x-forwarded-for", forwarded.as_str()),
                    ("x-real-ip", forwarded.as_str()),
                ],
            )
            .await;
        statuses.push(r.status);
    }
    // Authentication Cheat Sheet (OWASP): count per account; here 5 per 15 minutes.
    assert_eq!(&statuses[..5], &[401; 5], "{statuses:?}");
    assert!(statuses[5..].iter().all(|s| *s == 429), "{statuses:?}");
    // Locked means locked: the right password is refused too, whatever the forwarded address.
    let r = b
        .login_with(
            "quillfern",
            TEST_PASSWORD,
            &[("x-forwarded-for", "198.51.100.7")],
        )
        .await;
    assert_eq!(r.status, 429);
    assert!(r.header("retry-after").parse::<u64>().is_ok());
    // Other accounts are not affected.
    let mut other = app.browser();
    assert_eq!(other.login("bystander", TEST_PASSWORD).await.status, 303);
    // The lock is in the audit log, once.
    assert_eq!(
        accounts::count_events(&app.pool, "login_locked")
            .await
            .unwrap(),
        1
    );
    assert_eq!(
        accounts::count_events(&app.pool, "login_failed")
            .await
            .unwrap(),
        5,
        "requests refused while locked are not even checked"
    );
    // After the 15-minute lock the right password works again.
    app.clock.advance(15 * 60 + 1);
    assert_eq!(b.login("quillfern", TEST_PASSWORD).await.status, 303);
}

#[tokio::test]
async fn each_lock_in_a_row_lasts_twice_as_long() {
    let app = spawn_private_app().await;
    app.create_account("quillfern", Role::Member).await;
    let mut b = app.browser();
    for _ in 0..5 {
        b.login("quillfern", "wrong wrong wrong").await;
    }
    app.clock.advance(15 * 60 + 1);
    for _ in 0..5 {
        assert_eq!(b.login("quillfern", "wrong wrong wrong").await.status, 401);
    }
    // Second lock: 30 minutes. After 16 minutes it still holds.
    app.clock.advance(16 * 60);
    assert_eq!(b.login("quillfern", TEST_PASSWORD).await.status, 429);
    app.clock.advance(15 * 60);
    assert_eq!(b.login("quillfern", TEST_PASSWORD).await.status, 303);
    assert_eq!(
        accounts::count_events(&app.pool, "login_locked")
            .await
            .unwrap(),
        2
    );
}

#[tokio::test]
async fn one_address_gets_at_most_20_failures_across_names() {
    let app = spawn_private_app().await;
    app.create_account("quillfern", Role::Member).await;
    let mut b = app.browser();
    for i in 0..20 {
        let r = b.login(&format!("guess-{i}"), "wrong wrong wrong").await;
        assert_eq!(r.status, 401);
    }
    let r = b.login("quillfern", TEST_PASSWORD).await;
    assert_eq!(r.status, 429, "the address is refused for a while");
    assert_eq!(
        accounts::count_events(&app.pool, "login_address_locked")
            .await
            .unwrap(),
        1
    );
    app.clock.advance(15 * 60 + 1);
    assert_eq!(b.login("quillfern", TEST_PASSWORD).await.status, 303);
}

#[tokio::test]
async fn an_unknown_name_gets_the_same_answer_and_the_same_hash_check() {
    let app = spawn_private_app().await;
    app.create_account("quillfern", Role::Member).await;
    let mut b = app.browser();
    let known = b.login("quillfern", "wrong wrong wrong").await;
    let unknown = b.login("nobody-here", "wrong wrong wrong").await;
    assert_eq!(known.status, unknown.status);
    // Same page apart from the name typed, which is put back into the form.
    assert_eq!(
        known.body.replace("quillfern", "NAME"),
        unknown.body.replace("nobody-here", "NAME")
    );
    // Both cost one Argon2 verification (the unknown name against a dummy hash), so neither
    // answer is faster. Counted rather than timed: wall-clock comparisons are flaky on a busy
    // machine; the verification is what makes the two take the same time.
    let passwords = &app.state.passwords;
    let before = passwords.verifications();
    assert_eq!(b.login("quillfern", "wrong wrong wrong").await.status, 401);
    assert_eq!(
        passwords.verifications(),
        before + 1,
        "a known name is verified"
    );
    assert_eq!(
        b.login("nobody-else", "wrong wrong wrong").await.status,
        401
    );
    assert_eq!(
        passwords.verifications(),
        before + 2,
        "an unknown name must cost a verification too"
    );
}

// ---------------------------------------------------------------------------- request rates

/// Asserts a 429 drawn by the door owning the path (problem+json under `/api/`, an HTML page
/// elsewhere) that says how long to wait: `per_minute` a minute is one every 60 / per_minute s.
fn assert_limited(r: &Reply, path: &str, per_minute: u64) {
    assert_eq!(r.status, 429, "{path}: {}", r.body);
    let wait: u64 = r.header("retry-after").parse().unwrap_or_else(|_| {
        panic!("{path}: no Retry-After in {:?}", r.headers);
    });
    assert_eq!(wait, 60 / per_minute, "{path}");
    let content_type = r.header("content-type");
    if path.starts_with("/api/") {
        assert_eq!(content_type, "application/problem+json", "{path}");
        r.problem(429);
    } else {
        assert!(
            content_type.starts_with("text/html"),
            "{path}: {content_type}"
        );
        assert!(r.body.contains("Too many requests"), "{path}: {}", r.body);
    }
    assert!(
        r.body.contains(&format!("{wait} s")),
        "{path}: the answer says how long to wait: {}",
        r.body
    );
}

#[tokio::test]
async fn a_token_at_its_limit_on_the_api_is_refused_on_the_pages_downloads_too() {
    const PER_MINUTE: u64 = 3;
    let app = spawn_with(|s| {
        s.demo = true;
        s.api_rate_per_minute = PER_MINUTE as u32;
        s.page_rate_per_minute = 600;
    })
    .await;
    let id = app.create_account("member1", Role::Member).await;
    let (token, _) = app.make_token(id, "read").await;
    for _ in 0..PER_MINUTE {
        assert_eq!(
            app.get_with_token("/api/v1/me", Some(&token)).await.status,
            200
        );
    }
    let refused = app.get_with_token("/api/v1/relations", Some(&token)).await;
    assert_limited(&refused, "/api/v1/relations", PER_MINUTE);
    // The same data through the pages' door is the same budget when a token asks.
    for path in ["/galaxies", "/catalog.csv", "/relations/m_sigma/fit.json"] {
        let r = app.get_with_token(path, Some(&token)).await;
        assert_limited(&r, path, PER_MINUTE);
    }
    // A person's browser of another account is not affected.
    let mut other = app.login_as(Role::Member).await;
    assert_eq!(other.get("/galaxies").await.status, 200);
    // One request's worth later (20 s at 3 a minute) the token may go on.
    app.clock.advance(60 / PER_MINUTE as i64);
    assert_eq!(
        app.get_with_token("/catalog.csv", Some(&token))
            .await
            .status,
        200
    );
}

#[tokio::test]
async fn a_second_token_of_the_same_account_shares_its_budget() {
    const PER_MINUTE: u64 = 4;
    let app = spawn_with(|s| {
        s.demo = true;
        s.api_rate_per_minute = PER_MINUTE as u32;
    })
    .await;
    let id = app.create_account("member1", Role::Member).await;
    let (first, _) = app.make_token(id, "read").await;
    let (second, _) = app.make_token(id, "read").await;
    let other_id = app.create_account("member2", Role::Member).await;
    let (other, _) = app.make_token(other_id, "read").await;
    for _ in 0..PER_MINUTE {
        assert_eq!(
            app.get_with_token("/api/v1/me", Some(&first)).await.status,
            200
        );
    }
    let r = app.get_with_token("/api/v1/relations", Some(&second)).await;
    assert_limited(&r, "/api/v1/relations", PER_MINUTE);
    // Another account has its own budget.
    assert_eq!(
        app.get_with_token("/api/v1/me", Some(&other)).await.status,
        200
    );
}

#[tokio::test]
async fn a_browser_session_calling_the_api_is_limited_and_its_pages_have_their_own_budget() {
    const PER_MINUTE: u64 = 5;
    let app = spawn_with(|s| {
        s.demo = true;
        s.api_rate_per_minute = PER_MINUTE as u32;
        s.page_rate_per_minute = 600;
    })
    .await;
    let mut member = app.login_as(Role::Member).await;
    for _ in 0..PER_MINUTE {
        assert_eq!(member.get("/api/v1/me").await.status, 200);
    }
    let r = member.get("/api/v1/relations").await;
    assert_limited(&r, "/api/v1/relations", PER_MINUTE);
    // The account's token draws on the same API budget as its session.
    let id = massline::catalog::accounts::find_by_username(&app.pool, "test-member")
        .await
        .unwrap()
        .unwrap()
        .account_id;
    let (token, _) = app.make_token(id, "read").await;
    let r = app.get_with_token("/api/v1/me", Some(&token)).await;
    assert_limited(&r, "/api/v1/me", PER_MINUTE);
    // Pages are the larger budget of a person: still open.
    assert_eq!(member.get("/galaxies").await.status, 200);
    app.clock.advance(60 / PER_MINUTE as i64);
    assert_eq!(member.get("/api/v1/me").await.status, 200);
}

#[tokio::test]
async fn anonymous_visitors_are_limited_by_address_for_pages_and_for_the_api() {
    const PAGES_PER_MINUTE: u64 = 6;
    const API_PER_MINUTE: u64 = 2;
    let app = spawn_with(|s| {
        s.demo = true;
        s.public_read = true;
        s.page_rate_per_minute = PAGES_PER_MINUTE as u32;
        s.api_rate_per_minute = API_PER_MINUTE as u32;
    })
    .await;
    // Logging in is two anonymous page requests (the form and its answer) from this address.
    let mut member = app.login_as(Role::Member).await;
    let mut allowed = 0;
    loop {
        let r = app.get_with_token("/galaxies", None).await;
        if r.status != 200 {
            assert_limited(&r, "/galaxies", PAGES_PER_MINUTE);
            break;
        }
        allowed += 1;
        assert!(
            allowed <= PAGES_PER_MINUTE,
            "anonymous pages are never limited"
        );
    }
    assert_eq!(allowed, PAGES_PER_MINUTE - 2);
    // The login page too: everything an address asks counts, but for the stylesheet and the
    // health and liveness checks.
    let r = app.get_with_token("/login", None).await;
    assert_limited(&r, "/login", PAGES_PER_MINUTE);
    assert_eq!(app.get("/static/massline.css").await.0, 200);
    assert_eq!(app.get("/healthz").await.0, 200);
    assert_eq!(app.get("/livez").await.0, 200);
    // The API budget of the address is separate, and limited too.
    for _ in 0..API_PER_MINUTE {
        assert_eq!(
            app.get_with_token("/api/v1/relations", None).await.status,
            200
        );
    }
    let r = app.get_with_token("/api/v1/relations", None).await;
    assert_limited(&r, "/api/v1/relations", API_PER_MINUTE);
    // A logged-in person at the same address counts against the account, not the address.
    assert_eq!(member.get("/galaxies").await.status, 200);
    // One request's worth later the address may ask again.
    app.clock.advance(60 / PAGES_PER_MINUTE as i64);
    assert_eq!(app.get("/galaxies").await.0, 200);
}

// -------------------------------------------------------------------------------- headers

/// A GET written by hand on its own connection, its answer read until the server closes it.
async fn raw_get(address: &str, target: &str) -> Reply {
    use tokio::io::{AsyncReadExt, AsyncWriteExt};
    let host = address.trim_start_matches("http://");
    let mut stream = tokio::net::TcpStream::connect(host).await.unwrap();
    let request = format!("GET {target} HTTP/1.1\r\nHost: {host}\r\nConnection: close\r\n\r\n");
    // The server may answer and close before reading the whole request line.
    let _ = stream.write_all(request.as_bytes()).await;
    let mut answer = Vec::new();
    let _ = stream.read_to_end(&mut answer).await;
    let text = String::from_utf8_lossy(&answer).into_owned();
    let (head, body) = text.split_once("\r\n\r\n").expect("an answer head");
    let mut lines = head.lines();
    let status = lines.next().unwrap()[9..12].parse().unwrap();
    let mut headers = reqwest::header::HeaderMap::new();
    for line in lines {
        let (name, value) = line.split_once(':').unwrap();
        headers.append(
            reqwest::header::HeaderName::from_bytes(name.trim().as_bytes()).unwrap(),
            value.trim().parse().unwrap(),
        );
    }
    Reply {
        status,
        headers,
        body: body.to_owned(),
    }
}

fn assert_baseline(r: &Reply, what: &str) {
    let csp = r.header("content-security-policy");
    assert!(
        csp.contains("default-src 'self'")
            && csp.contains("script-src 'self'")
            && csp
                .split(';')
                .filter(|d| d.trim().starts_with("script-src"))
                .all(|d| !d.contains("unsafe-inline"))
            && csp.contains("frame-ancestors 'none'")
            && csp.contains("object-src 'none'")
            && csp.contains("base-uri 'none'"),
        "{what}: CSP {csp}"
    );
    assert_eq!(r.header("x-content-type-options"), "nosniff", "{what}");
    assert_eq!(r.header("referrer-policy"), "same-origin", "{what}");
    assert_eq!(r.header("x-frame-options"), "DENY", "{what}");
    assert!(
        !r.header("cache-control").is_empty(),
        "{what}: no Cache-Control"
    );
}

#[tokio::test]
async fn every_response_carries_the_security_headers_including_errors() {
    let app = spawn_private_app().await;
    let mut anon = app.browser();
    let mut cases: Vec<(String, Reply)> = Vec::new();
    for path in [
        "/",
        "/login",
        "/healthz",
        "/static/massline.css",
        "/nowhere",
        "/api/v1/me",
    ] {
        cases.push((format!("anonymous GET {path}"), anon.get(path).await));
    }
    // A request line beyond 64 KiB is refused by the HTTP library before any route: 414
    // (sent by hand: HTTP clients refuse to send such an address).
    cases.push((
        "anonymous GET of a 80 KB address".into(),
        raw_get(&app.address, &format!("/galaxies?{}", "a&".repeat(40_000))).await,
    ));
    cases.push((
        "forged POST".into(),
        anon.post_raw("/login", &[("username", "x")], &[]).await,
    ));
    let mut member = app.login_as(Role::Member).await;
    for path in [
        "/",
        "/galaxies",
        "/galaxies?sort=nonsense",
        "/galaxies/none-such",
        "/account",
        "/admin/audit",
    ] {
        cases.push((format!("member GET {path}"), member.get(path).await));
    }
    let big = "x".repeat(massline::router::BODY_LIMIT_BYTES + 10);
    cases.push((
        "oversized POST".into(),
        member
            .post("/account/tokens", &[("label", big.as_str())])
            .await,
    ));
    let statuses: Vec<u16> = cases.iter().map(|(_, r)| r.status).collect();
    for code in [200, 303, 400, 401, 403, 404, 413, 414] {
        assert!(statuses.contains(&code), "no {code} among {statuses:?}");
    }
    for (what, r) in &cases {
        assert_baseline(r, what);
        if r.header("content-type").starts_with("text/html") {
            assert!(r.header("content-type").contains("charset=utf-8"), "{what}");
            assert!(r.body.contains("<meta charset=\"utf-8\">"), "{what}");
        }
    }
    // Pages of a logged-in person are never stored.
    for (what, r) in cases
        .iter()
        .filter(|(w, _)| w.starts_with("member GET /account"))
    {
        assert_eq!(r.header("cache-control"), "no-store", "{what}");
    }
}

// --------------------------------------------------------------------------------- tokens

#[tokio::test]
async fn a_token_is_shown_once_and_its_scope_decides_what_it_may_do() {
    let app = spawn_private_app().await;
    let mut member = app.login_as(Role::Member).await;
    let r = member
        .post("/account/tokens", &[("label", "nightly"), ("read", "1")])
        .await;
    assert_eq!(r.status, 200, "{}", r.body);
    let start = r.body.find("id=\"new-token\">").expect("the new token") + 15;
    let token = r.body[start..start + 76].to_string();
    assert!(
        massline::auth::secret::looks_like_api_token(&token),
        "{token}"
    );
    // Shown once: the account page never shows it again, and the database holds only a hash.
    let again = member.get("/account").await;
    assert!(!again.body.contains(&token));
    assert!(again.body.contains(&format!("ml_{}_…", &token[3..11])));
    let stored: i64 = sqlx::query_scalar("select count(*) from api_token where token_sha256 = ?")
        .bind(massline::auth::secret::sha256_hex(&token))
        .fetch_one(&app.pool)
        .await
        .unwrap();
    assert_eq!(stored, 1);

    let me = |t: &str| {
        let t = t.to_string();
        let c = app.client.clone();
        let url = format!("{}/api/v1/me", app.address);
        async move {
            let r = c.get(url).bearer_auth(t).send().await.unwrap();
            let status = r.status().as_u16();
            let ct = r
                .headers()
                .get("content-type")
                .map(|v| v.to_str().unwrap().to_string())
                .unwrap_or_default();
            (status, ct, r.text().await.unwrap())
        }
    };
    let (status, _, body) = me(&token).await;
    assert_eq!(status, 200);
    let json: serde_json::Value = serde_json::from_str(&body).unwrap();
    assert_eq!(json["username"], "test-member");
    assert_eq!(json["role"], "member");
    assert_eq!(json["scopes"], serde_json::json!(["read"]));
    let read_page = app
        .client
        .get(format!("{}/galaxies", app.address))
        .bearer_auth(&token)
        .send()
        .await
        .unwrap();
    assert_eq!(read_page.status().as_u16(), 200);
    // Last use is recorded.
    let used: Option<String> =
        sqlx::query_scalar("select last_used_at from api_token where token_sha256 = ?")
            .bind(massline::auth::secret::sha256_hex(&token))
            .fetch_one(&app.pool)
            .await
            .unwrap();
    assert!(used.is_some());

    // A submit-only token knows who it is but may not read pages.
    let r = member
        .post("/account/tokens", &[("label", "uploader"), ("submit", "1")])
        .await;
    let start = r.body.find("id=\"new-token\">").unwrap() + 15;
    let submit = r.body[start..start + 76].to_string();
    let (status, _, body) = me(&submit).await;
    assert_eq!(status, 200);
    assert!(body.contains("\"scopes\":[\"submit\"]"), "{body}");
    let page = app
        .client
        .get(format!("{}/galaxies", app.address))
        .bearer_auth(&submit)
        .send()
        .await
        .unwrap();
    assert_eq!(page.status().as_u16(), 403);

    // Revoked: 401 as problem+json.
    let id: i64 = sqlx::query_scalar("select api_token_id from api_token where label = 'nightly'")
        .fetch_one(&app.pool)
        .await
        .unwrap();
    member.get("/account").await;
    assert_eq!(
        member
            .post(&format!("/account/tokens/{id}/revoke"), &[])
            .await
            .status,
        303
    );
    let (status, ct, body) = me(&token).await;
    assert_eq!(status, 401);
    assert_eq!(ct, "application/problem+json");
    let problem: serde_json::Value = serde_json::from_str(&body).unwrap();
    assert_eq!(problem["status"], 401);
    // Malformed, unknown and missing tokens: 401 too.
    for bad in ["", "ml_abc", &token.replace(&token[12..20], "00000000")] {
        assert_eq!(me(bad).await.0, 401, "{bad}");
    }
    let none = app
        .client
        .get(format!("{}/api/v1/me", app.address))
        .send()
        .await
        .unwrap();
    assert_eq!(none.status().as_u16(), 401);
    assert_eq!(
        accounts::count_events(&app.pool, "token_created")
            .await
            .unwrap(),
        2
    );
    assert_eq!(
        accounts::count_events(&app.pool, "token_revoked")
            .await
            .unwrap(),
        1
    );
}

#[tokio::test]
async fn a_disabled_accounts_tokens_stop_working() {
    let app = spawn_private_app().await;
    let id = app.create_account("script-owner", Role::Reviewer).await;
    let (token, _) = app.make_token(id, "read submit").await;
    let url = format!("{}/api/v1/me", app.address);
    let ok = app
        .client
        .get(&url)
        .bearer_auth(&token)
        .send()
        .await
        .unwrap();
    assert_eq!(ok.status().as_u16(), 200);
    accounts::disable(&app.pool, id, None).await.unwrap();
    let refused = app
        .client
        .get(&url)
        .bearer_auth(&token)
        .send()
        .await
        .unwrap();
    assert_eq!(refused.status().as_u16(), 401);
}

#[tokio::test]
async fn a_member_cannot_revoke_someone_elses_token() {
    let app = spawn_private_app().await;
    let other = app.create_account("someone-else", Role::Member).await;
    let (_, their_token) = app.make_token(other, "read").await;
    let mut member = app.login_as(Role::Member).await;
    let r = member
        .post(&format!("/account/tokens/{their_token}/revoke"), &[])
        .await;
    assert_eq!(r.status, 404);
    assert_eq!(
        accounts::count_events(&app.pool, "token_revoked")
            .await
            .unwrap(),
        0
    );
}

// ------------------------------------------------------------------------ script injection

/// Script-injection payloads (common practice; after the OWASP XSS Filter Evasion Cheat Sheet).
fn payloads() -> Vec<String> {
    vec![
        "<script>alert(1)</script>".into(),
        "\"><svg onload=alert(1)>".into(),
        "'><img src=x onerror=alert(1)>".into(),
        "javascript:alert(1)".into(),
        "</textarea><script>alert(1)</script>".into(),
        "</title><script>alert(1)</script>".into(),
        "{{7*7}}".into(),
        "{% raw %}x".into(),
        "${7*7}".into(),
        "line\u{2028}separator".into(),
        "rtl \u{202E}gnp.exe".into(),
        "<a href=\"javascript:alert(1)\">x</a>".into(),
        "<iframe src=//evil.example>".into(),
        "&lt;script&gt;".into(),
        "\" autofocus onfocus=alert(1) x=\"".into(),
        "<style>@import 'x'</style>".into(),
        "<!--".into(),
        "]]><script>alert(1)</script>".into(),
        "%3Cscript%3Ealert(1)%3C/script%3E".into(),
        "x".repeat(5000),
    ]
}

/// A payload may appear only escaped: no new tag, attribute or script.
fn assert_inert(body: &str, payload: &str, what: &str) {
    let dangerous = payload.contains(['<', '>', '"', '\'']) || payload.starts_with("&lt;");
    if dangerous {
        assert!(
            !body.contains(payload),
            "{what}: raw payload {payload:?} in the page"
        );
    }
    assert!(!body.contains("<script"), "{what}: a script tag");
    assert!(!body.contains("<svg onload"), "{what}");
    assert!(!body.contains("<img src=x"), "{what}");
    assert!(!body.contains("<iframe"), "{what}");
    assert!(!body.contains("href=\"javascript:"), "{what}");
}

#[tokio::test]
async fn script_payloads_in_every_field_people_can_set_stay_inert() {
    let app = spawn_with(|s| s.public_read = false).await;
    let mut member = app.login_as(Role::Member).await;
    let mut admin = app.login_as(Role::Admin).await;
    let mut anon = app.browser();
    let mut checked = 0;
    for payload in payloads() {
        // Token label: shown on the account page (and in the form when refused).
        let r = member
            .post(
                "/account/tokens",
                &[("label", payload.as_str()), ("read", "1")],
            )
            .await;
        assert!(r.status == 200 || r.status == 400, "{}", r.status);
        assert_inert(&r.body, &payload, "token form answer");
        let account = member.get("/account").await.body;
        assert_inert(&account, &payload, "account page");
        if payload == "{{7*7}}" {
            // Shown as typed, never evaluated.
            assert!(account.contains("<bdi>{{7*7}}</bdi>"), "{account}");
        }
        // User name in the admin's create form (refused: not a valid name) and in the login form.
        let r = admin
            .post(
                "/admin/accounts",
                &[
                    ("username", payload.as_str()),
                    ("role", "member"),
                    ("password", ""),
                ],
            )
            .await;
        assert_eq!(r.status, 400);
        assert_inert(&r.body, &payload, "admin create answer");
        assert_inert(
            &admin.get("/admin/accounts").await.body,
            &payload,
            "accounts page",
        );
        let r = anon.login(&payload, "wrong wrong wrong").await;
        assert_inert(&r.body, &payload, "login answer");
        // Audit filters and the login page's next parameter, from the address.
        let q = massline::auth::middleware::encode_query_value(&payload);
        for path in [
            format!("/admin/audit?action={q}"),
            format!("/admin/audit?user={q}"),
            format!("/admin/audit?from={q}"),
        ] {
            let r = admin.get(&path).await;
            assert_eq!(r.status, 400, "{path}");
            assert_inert(&r.body, &payload, &path);
        }
        assert_inert(
            &anon.get(&format!("/login?next={q}")).await.body,
            &payload,
            "next",
        );
        assert_inert(
            &member.get(&format!("/galaxies/{q}")).await.body,
            &payload,
            "404 page",
        );
        checked += 1;
    }
    // The audit page shows the failed logins with the names as typed.
    let audit = admin.get("/admin/audit?action=login_failed").await;
    assert_eq!(audit.status, 200);
    for payload in payloads() {
        assert_inert(&audit.body, &payload, "audit page");
    }
    assert_eq!(checked, 20);
}
