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
    #[serde(default)]
    pending: Vec<PendingRow>,
}

/// Who sees a pending measurement at a path: "shown" or "hidden" per caller.
#[derive(Debug, Deserialize)]
struct PendingRow {
    path: String,
    anonymous_public: String,
    submitter: String,
    member: String,
    reviewer: String,
    admin: String,
    submitter_token: String,
    member_token: String,
    reviewer_token: String,
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
            } else if row.method == "DELETE" {
                let r = b.delete(&path).await;
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
            } else if row.method == "DELETE" {
                app.client.delete(url)
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

/// The cell of a caller's column in a `[[pending]]` row.
type Expected = fn(&PendingRow) -> &str;

/// What a reader of a galaxy gets: its status and body.
enum Reader {
    Browser(Browser),
    Token(String),
}

impl Reader {
    async fn read(&mut self, app: &TestApp, path: &str) -> (u16, String) {
        match self {
            Self::Browser(b) => {
                let r = b.get(path).await;
                (r.status, r.body)
            }
            Self::Token(token) => {
                let r = app
                    .client
                    .get(format!("{}{path}", app.address))
                    .bearer_auth(token)
                    .send()
                    .await
                    .unwrap();
                let status = r.status().as_u16();
                (status, r.text().await.unwrap())
            }
        }
    }
}

#[tokio::test]
async fn a_pending_value_is_seen_only_by_its_submitter_and_reviewers_as_the_access_table_says() {
    let table = load_table();
    assert!(
        !table.pending.is_empty(),
        "tests/access.toml lists who sees pending values"
    );
    let app = spawn_with(|s| {
        s.demo = true;
        s.public_read = true;
    })
    .await;
    let slug: String = sqlx::query_scalar("select slug from galaxy order by galaxy_id limit 1")
        .fetch_one(&app.pool)
        .await
        .expect("the demo catalog has galaxies");

    // The submitter puts a black-hole mass of the demo galaxy forward; it stays pending.
    let submitter = app.create_account("member1", Role::Member).await;
    let mut own = app.browser();
    own.log_in("member1").await;
    let (value, reference) = ("4.321e7", "Pendref 2099");
    let reply = own
        .post(
            "/submissions/new",
            &[
                ("galaxy", slug.as_str()),
                ("m0_quantity", "bh_mass"),
                ("m0_value", value),
                ("m0_scale", "auto"),
                ("m0_method", "stellar_dynamics"),
                ("m0_reference", reference),
                ("note", "unreviewed"),
            ],
        )
        .await;
    assert_eq!(
        reply.status, 303,
        "the submission is stored: {}",
        reply.body
    );
    let submission_id: i64 = reply
        .header("location")
        .strip_prefix("/submissions/")
        .and_then(|id| id.parse().ok())
        .expect("the answer names the new submission");
    let submission_field = format!("\"submission_id\":{submission_id}");

    let other = app.login_as(Role::Member).await;
    let reviewer = app.login_as(Role::Reviewer).await;
    let admin = app.login_as(Role::Admin).await;
    let other_id = accounts::find_by_username(&app.pool, "test-member")
        .await
        .unwrap()
        .unwrap()
        .account_id;
    let reviewer_id = accounts::find_by_username(&app.pool, "test-reviewer")
        .await
        .unwrap()
        .unwrap()
        .account_id;
    let (submitter_token, _) = app.make_token(submitter, "read").await;
    let (member_token, _) = app.make_token(other_id, "read").await;
    let (reviewer_token, _) = app.make_token(reviewer_id, "read").await;

    let mut readers: Vec<(&str, Reader, Expected)> = vec![
        ("anonymous_public", Reader::Browser(app.browser()), |r| {
            &r.anonymous_public
        }),
        ("submitter", Reader::Browser(own), |r| &r.submitter),
        ("member", Reader::Browser(other), |r| &r.member),
        ("reviewer", Reader::Browser(reviewer), |r| &r.reviewer),
        ("admin", Reader::Browser(admin), |r| &r.admin),
        ("submitter_token", Reader::Token(submitter_token), |r| {
            &r.submitter_token
        }),
        ("member_token", Reader::Token(member_token), |r| {
            &r.member_token
        }),
        ("reviewer_token", Reader::Token(reviewer_token), |r| {
            &r.reviewer_token
        }),
    ];
    let mut failures = Vec::new();
    for row in &table.pending {
        let path = row.path.replace("{slug}", &slug);
        let api = path.starts_with("/api/");
        for (column, reader, expected) in &mut readers {
            let (status, body) = reader.read(&app, &path).await;
            assert_eq!(
                status, 200,
                "{column}: GET {path} answered {status}: {body}"
            );
            let body = body.replace(' ', "");
            let mut marks = vec![value.to_owned(), reference.replace(' ', "")];
            if api {
                marks.push(submission_field.clone());
            }
            let seen: Vec<&String> = marks.iter().filter(|m| body.contains(m.as_str())).collect();
            match expected(row) {
                "shown" if seen.len() != marks.len() => failures.push(format!(
                    "{column}: {path} should show the pending value, but lacks some of {marks:?}"
                )),
                "hidden" if !seen.is_empty() => failures.push(format!(
                    "{column}: {path} should hide the pending value, but shows {seen:?}"
                )),
                "shown" | "hidden" => {}
                other => failures.push(format!("{column}: '{other}' is not shown or hidden")),
            }
        }
    }
    // Withdrawn before review, the value stays as it was: its submitter's and the reviewers'.
    massline::catalog::submissions::withdraw(&app.pool, submitter, submission_id)
        .await
        .unwrap();
    let path = format!("/api/v1/galaxies/{slug}");
    for (index, shown) in [(0, false), (1, true), (2, false), (3, true)] {
        let (column, reader, _) = &mut readers[index];
        let (status, body) = reader.read(&app, &path).await;
        assert_eq!(status, 200, "{column}: {body}");
        let seen = body.contains(&submission_field);
        if seen != shown {
            failures.push(format!(
                "{column}: {path} {} the withdrawn value",
                if seen { "shows" } else { "hides" }
            ));
        }
    }
    assert!(
        failures.is_empty(),
        "{} cells differ from the pending rows of tests/access.toml:\n{}",
        failures.len(),
        failures.join("\n")
    );
}
