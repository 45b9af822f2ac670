//! Journey 5: an admin creates an account with the reviewer role; the new user logs in and
//! makes an API token on /account; a plain HTTP client uses the token to read the fit and to
//! submit a measurement.
//!
//! The JSON API's fit and submission endpoints arrive separately: each part below runs as soon
//! as the server's route table lists its route, and says loudly that it did not run before.

use massline::auth::Role;
use serde_json::Value;
use thirtyfour::Key;

use crate::support::{self, PAYLOADS, Reading, TEST_PASSWORD};

#[tokio::test(flavor = "multi_thread", worker_threads = 2)]
async fn an_admin_makes_a_reviewer_whose_api_token_lets_a_script_read_the_fit_and_submit() {
    support::run("j5-token", Reading::Private, |journey| async move {
        journey.account("quillfern", Role::Admin).await;
        let admin = journey.browser("admin").await;
        admin.log_in_by_keyboard("quillfern", TEST_PASSWORD).await;
        admin.open("/admin/accounts", "accounts").await;

        // A payload as a user name is refused and shown back as text.
        admin.fill("form[action='/admin/accounts'] input[name=username]", PAYLOADS[1]).await;
        admin.click_button("form[action='/admin/accounts']", "Create").await;
        admin.check_expecting(400, "accounts-refused").await;
        assert!(
            admin.text(".form-error").await.contains("user name"),
            "the refusal names the field"
        );
        assert_eq!(
            admin
                .script("return document.querySelector(\"form[action='/admin/accounts'] input[name=username]\").value;")
                .await,
            PAYLOADS[1],
            "the typed name is kept as text"
        );

        // The reviewer account, with a generated password shown once.
        admin.fill("form[action='/admin/accounts'] input[name=username]", "rowan").await;
        admin.fill("form[action='/admin/accounts'] select[name=role]", "reviewer").await;
        admin.click_button("form[action='/admin/accounts']", "Create").await;
        admin.check("account-created").await;
        let password = admin.text("#new-password").await;
        assert!(password.chars().count() >= 12, "a generated password is shown");
        let row = admin
            .script("return [...document.querySelectorAll('tbody tr')].map(r => r.textContent).find(t => t.includes('rowan')) || '';")
            .await;
        assert!(
            row.as_str().unwrap_or("").contains("reviewer"),
            "the list shows rowan as a reviewer: {row}"
        );
        admin.open("/admin/audit?action=account_created", "audit").await;
        assert!(admin.text("table").await.contains("rowan"), "the audit log has it");

        // The new user logs in and makes a token with the keyboard alone.
        let user = journey.browser("new-reviewer").await;
        user.log_in_by_keyboard("rowan", &password).await;
        user.open("/account", "account").await;
        assert_eq!(user.text("#account-role").await, "reviewer");
        user.tab_and_type("input[name=label]", PAYLOADS[1]).await;
        user.tab_to("input[name=submit]").await;
        user.press(Key::Space).await;
        user.tab_and_enter("form[action='/account/tokens'] button").await;
        user.check("token-made").await;
        let token = user.text("#new-token").await;
        assert!(token.starts_with("ml_"), "the token is shown once: {token}");
        assert!(
            user.text("table").await.contains(PAYLOADS[1]),
            "the label is listed as typed, as text"
        );

        // A plain HTTP client with the token.
        let client = reqwest::Client::builder()
            .redirect(reqwest::redirect::Policy::none())
            .build()
            .expect("a client");
        let base = journey.address.clone();
        let get = |path: &str| {
            client
                .get(format!("{base}{path}"))
                .bearer_auth(&token)
                .send()
        };
        let me = get("/api/v1/me").await.expect("an answer");
        assert_eq!(me.status(), 200);
        let me: Value = me.json().await.expect("JSON");
        assert_eq!(me["username"], "rowan");
        assert_eq!(me["role"], "reviewer");
        let scopes: Vec<&str> = me["scopes"]
            .as_array()
            .expect("a list of scopes")
            .iter()
            .filter_map(Value::as_str)
            .collect();
        assert!(scopes.contains(&"read") && scopes.contains(&"submit"), "{scopes:?}");

        // The fit as the relation page offers it for download (token scope `read`).
        let fit = get("/relations/m_sigma/fit.json").await.expect("an answer");
        assert_eq!(fit.status(), 200, "the token reads the fit download");
        let fit: Value = fit.json().await.expect("JSON");
        assert!(fit.to_string().contains("alpha"), "the fit names its parameters: {fit}");
        let no_token = client
            .get(format!("{base}/relations/m_sigma/fit.json"))
            .send()
            .await
            .expect("an answer");
        assert_eq!(
            no_token.status(),
            303,
            "without the token the private catalog sends the visitor to the login page"
        );

        // The fit through the JSON API.
        let answer = get("/api/v1/relations/m_sigma").await.expect("an answer");
        assert_eq!(answer.status(), 200, "GET /api/v1/relations/m_sigma with the token");
        let body: Value = answer.json().await.expect("JSON");
        assert!(
            body["catalog_version"].as_i64().is_some_and(|v| v >= 1),
            "the API fit names its catalog version: {body}"
        );

        // Submitting a measurement through the JSON API.
        {
            let galaxy = support::planted_outliers()
                .into_iter()
                .next()
                .expect("the demo catalog plants an M–σ outlier with σ_e");
            let body = serde_json::json!({
                "galaxy": galaxy.slug,
                "measurements": [{
                    "quantity": "bh_mass", "value": "2.4e8 +0.6e8/-0.5e8",
                    "method": "stellar_dynamics",
                    "source_distance_mpc": galaxy.source_distance_mpc,
                    "resolution_arcsec": "0.05", "reference": "Invented et al. 2033",
                    "note": PAYLOADS[0]
                }],
                "note": "sent by a script"
            });
            let send = || {
                client
                    .post(format!("{base}/api/v1/submissions"))
                    .bearer_auth(&token)
                    .header("Idempotency-Key", "journey-5-first")
                    .json(&body)
                    .send()
            };
            let first = send().await.expect("an answer");
            assert_eq!(first.status(), 201, "the submission is created");
            let first: Value = first.json().await.expect("JSON");
            assert_eq!(first["state"], "pending");
            assert_eq!(first["replayed"], false);
            let again: Value = send().await.expect("an answer").json().await.expect("JSON");
            assert_eq!(again["replayed"], true, "the same key answers the first submission");
            assert_eq!(again["submission_id"], first["submission_id"]);

            // The reviewer sees it in the queue as their own (someone else must decide).
            user.open("/review", "queue-with-own").await;
            let item = format!("#review-{}", first["submission_id"]);
            assert!(
                user.text(&item).await.contains("You submitted this yourself"),
                "the queue shows the script's submission as the reviewer's own"
            );
        }
    })
    .await;
}
