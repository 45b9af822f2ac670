//! The access table (tests/access.toml) against the router's real route list and the running
//! server.

use std::collections::BTreeSet;

use massline::auth::Role;
use massline::catalog::accounts;
use serde::Deserialize;

use crate::helpers::{Browser, TestApp, spawn_with};

#[derive(Debug, Deserialize)]
struct Table {
    route: Vec<Row>,
}

#[derive(Debug, Deserialize)]
struct Row {
    method: String,
    path: String,
    request: Option<String>,
    form: Option<String>,
    anonymous: u16,
    anonymous_public: u16,
    member: u16,
    reviewer: u16,
    admin: u16,
    read_token: u16,
    submit_token: u16,
    revoked_token: u16,
    disabled: u16,
}

fn load_table() -> Table {
    let text = std::fs::read_to_string(concat!(env!("CARGO_MANIFEST_DIR"), "/tests/access.toml"))
        .expect("tests/access.toml is readable");
    toml::from_str(&text).expect("tests/access.toml parses")
}

#[test]
fn every_route_of_the_router_is_in_the_access_table_and_nothing_else() {
    let table = load_table();
    let listed: BTreeSet<(String, String)> = table
        .route
        .iter()
        .map(|r| (r.method.clone(), r.path.clone()))
        .collect();
    assert_eq!(listed.len(), table.route.len(), "a route is listed twice");
    let served: BTreeSet<(String, String)> = massline::startup::route_table()
        .into_iter()
        .map(|r| (r.method.to_string(), r.path.to_string()))
        .collect();
    let missing: Vec<_> = served.difference(&listed).collect();
    let extra: Vec<_> = listed.difference(&served).collect();
    assert!(
        missing.is_empty(),
        "routes served but missing from tests/access.toml: {missing:?}"
    );
    assert!(
        extra.is_empty(),
        "routes in tests/access.toml that the router does not serve: {extra:?}"
    );
}

/// Who sends a request.
enum Caller {
    Browser(Browser, Option<i64>),
    Token(String),
}

struct Context {
    slug: String,
    victim: i64,
    n: usize,
}

async fn send(app: &TestApp, caller: &mut Caller, row: &Row, ctx: &mut Context) -> (u16, String) {
    ctx.n += 1;
    let own_token = match caller {
        Caller::Browser(_, Some(id)) => id.to_string(),
        _ => "1".to_string(),
    };
    let fill = |text: &str| {
        text.replace("{slug}", &ctx.slug)
            .replace("{victim}", &ctx.victim.to_string())
            .replace("{own_token}", &own_token)
            .replace("{n}", &ctx.n.to_string())
    };
    let path = fill(row.request.as_deref().unwrap_or(&row.path));
    let form: Vec<(String, String)> =
        serde_urlencoded::from_str(&fill(row.form.as_deref().unwrap_or(""))).unwrap();
    let fields: Vec<(&str, &str)> = form.iter().map(|(k, v)| (k.as_str(), v.as_str())).collect();
    match caller {
        Caller::Browser(b, _) => {
            if row.method == "GET" {
                let r = b.get(&path).await;
                (r.status, r.body)
            } else {
                if path == "/login" {
                    // Fetch the login form first, as a person would (sets the form's token).
                    b.get("/login").await;
                }
                let r = b.post(&path, &fields).await;
                (r.status, r.body)
            }
        }
        Caller::Token(token) => {
            let url = format!("{}{path}", app.address);
            let request = if row.method == "GET" {
                app.client.get(url)
            } else {
                app.client.post(url).form(&fields)
            };
            let r = request.bearer_auth(token).send().await.unwrap();
            let status = r.status().as_u16();
            (status, r.text().await.unwrap())
        }
    }
}

async fn run_column(
    app: &TestApp,
    column: &str,
    caller: &mut Caller,
    rows: &[&Row],
    expected: impl Fn(&Row) -> u16,
    ctx: &mut Context,
    failures: &mut Vec<String>,
) {
    for row in rows {
        let (status, body) = send(app, caller, row, ctx).await;
        let want = expected(row);
        if status != want {
            let snippet: String = body.chars().take(300).collect();
            failures.push(format!(
                "{column}: {} {} answered {status}, the table says {want} ({snippet})",
                row.method, row.path
            ));
        }
    }
}

#[tokio::test]
async fn every_route_answers_each_caller_as_the_access_table_says() {
    let table = load_table();
    // Logout last: it ends the caller's session.
    let mut rows: Vec<&Row> = table.route.iter().collect();
    rows.sort_by_key(|r| r.path == "/logout");

    let private = spawn_with(|s| s.demo = true).await;
    let public = spawn_with(|s| {
        s.demo = true;
        s.public_read = true;
    })
    .await;
    let slug: String = sqlx::query_scalar("select slug from galaxy order by galaxy_id limit 1")
        .fetch_one(&private.pool)
        .await
        .expect("the demo catalog has galaxies");
    let victim = private.create_account("victim", Role::Member).await;
    let mut ctx = Context { slug, victim, n: 0 };
    let mut failures = Vec::new();

    // Tokens of a member.
    let owner = private.create_account("token-owner", Role::Member).await;
    let (read_token, _) = private.make_token(owner, "read").await;
    let (submit_token, _) = private.make_token(owner, "submit").await;
    let (revoked, revoked_id) = private.make_token(owner, "read submit").await;
    assert!(
        accounts::revoke_token(&private.pool, owner, revoked_id)
            .await
            .unwrap()
    );

    // The disabled account logs in, then is disabled.
    let gone = private.create_account("gone", Role::Member).await;
    let mut disabled = private.browser();
    assert_eq!(
        disabled
            .login("gone", crate::helpers::TEST_PASSWORD)
            .await
            .status,
        303
    );
    assert!(accounts::disable(&private.pool, gone, None).await.unwrap());

    run_column(
        &private,
        "anonymous",
        &mut Caller::Browser(private.browser(), None),
        &rows,
        |r| r.anonymous,
        &mut ctx,
        &mut failures,
    )
    .await;
    run_column(
        &public,
        "anonymous_public",
        &mut Caller::Browser(public.browser(), None),
        &rows,
        |r| r.anonymous_public,
        &mut ctx,
        &mut failures,
    )
    .await;
    for role in Role::ALL {
        let browser = private.login_as(role).await;
        let me = accounts::find_by_username(&private.pool, &format!("test-{role}"))
            .await
            .unwrap()
            .unwrap()
            .account_id;
        let (_, own) = private.make_token(me, "read").await;
        let expected = move |r: &Row| match role {
            Role::Member => r.member,
            Role::Reviewer => r.reviewer,
            Role::Admin => r.admin,
        };
        run_column(
            &private,
            role.as_str(),
            &mut Caller::Browser(browser, Some(own)),
            &rows,
            expected,
            &mut ctx,
            &mut failures,
        )
        .await;
    }
    for (column, token, pick) in [
        (
            "read_token",
            read_token,
            (|r: &Row| r.read_token) as fn(&Row) -> u16,
        ),
        ("submit_token", submit_token, |r: &Row| r.submit_token),
        ("revoked_token", revoked, |r: &Row| r.revoked_token),
    ] {
        run_column(
            &private,
            column,
            &mut Caller::Token(token),
            &rows,
            pick,
            &mut ctx,
            &mut failures,
        )
        .await;
    }
    run_column(
        &private,
        "disabled",
        &mut Caller::Browser(disabled, None),
        &rows,
        |r| r.disabled,
        &mut ctx,
        &mut failures,
    )
    .await;

    assert!(
        failures.is_empty(),
        "{} of {} cells differ from tests/access.toml:\n{}",
        failures.len(),
        rows.len() * 9,
        failures.join("\n")
    );
}
