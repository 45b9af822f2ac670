//! Journey: a member plans observations: uploads the example candidate list, gives one
//! resolution, adds a second row with the page's button, ranks the candidates with the
//! keyboard, reads the ranked table and downloads it as CSV (the download form's answer is
//! fetched by the page itself, as the button would send it).

use massline::auth::Role;

use crate::support::{self, Reading, TEST_PASSWORD};

const EXAMPLE: &str = include_str!("../../seed-data/planning/candidates.csv");

#[tokio::test(flavor = "multi_thread", worker_threads = 2)]
async fn a_member_uploads_candidates_adds_a_resolution_ranks_them_and_downloads_the_table() {
    support::run("j-planning", Reading::Private, |journey| async move {
        journey.account("tamsin", Role::Member).await;
        let member = journey.browser("member").await;
        member.log_in_by_keyboard("tamsin", TEST_PASSWORD).await;
        member.open("/planning", "planning-form").await;

        let dir = tempfile::tempdir().expect("a temporary directory");
        let path = dir.path().join("candidates.csv");
        std::fs::write(&path, EXAMPLE).expect("the file is written");
        member
            .element("input[type=file][name=file]")
            .await
            .send_keys(path.display().to_string())
            .await
            .expect("the file is chosen");
        member.fill("#f-res-label-1", "AO K band").await;
        member.fill("#f-res-arcsec-1", "0.1").await;

        // The script adds a row below the two the page shows.
        let rows_before = member.count(".resolution-row").await;
        member
            .element("#add-resolution")
            .await
            .click()
            .await
            .expect("the button can be clicked");
        assert_eq!(
            member.count(".resolution-row").await,
            rows_before + 1,
            "“Add a resolution row” adds one row"
        );
        let new_row = rows_before + 1;
        member
            .fill(&format!("#f-res-label-{new_row}"), "seeing")
            .await;
        member
            .fill(&format!("#f-res-arcsec-{new_row}"), "0.8")
            .await;

        member.tab_and_enter("#run-plan").await;
        member.check("planning-ranked").await;
        let rows = member.texts("#plan-table tbody tr").await;
        assert_eq!(
            rows.len(),
            EXAMPLE.lines().count() - 1,
            "one row per candidate: {rows:?}"
        );
        let headers = member.texts("#plan-table thead th").await;
        assert!(
            headers.iter().any(|h| h.contains("AO K band"))
                && headers.iter().any(|h| h.contains("seeing")),
            "a P(resolved) column per resolution: {headers:?}"
        );
        let names: Vec<String> = member.texts("#plan-table tbody th").await;
        assert!(
            rows[0].starts_with('1'),
            "the first row is rank 1: {rows:?}"
        );
        assert_eq!(member.count("figure.chart svg[role=img]").await, 1);

        // The download button re-posts the same input; its answer is the ranked table.
        let action = member
            .script("return document.getElementById('download-csv').getAttribute('formaction');")
            .await;
        assert_eq!(action.as_str(), Some("/planning/download?format=csv"));
        let answer = member
            .script(
                "const form = document.getElementById('download-form');
                 return fetch('/planning/download?format=csv', {
                   method: 'POST', credentials: 'same-origin',
                   body: new URLSearchParams(new FormData(form)) })
                 .then(r => r.text().then(t => ({ status: r.status,
                   type: r.headers.get('content-type'),
                   disposition: r.headers.get('content-disposition'), text: t })));",
            )
            .await;
        assert_eq!(answer["status"], 200, "{answer}");
        assert!(
            answer["type"]
                .as_str()
                .is_some_and(|t| t.starts_with("text/csv")),
            "{answer}"
        );
        assert!(
            answer["disposition"]
                .as_str()
                .is_some_and(|d| d.contains("plan.csv")),
            "{answer}"
        );
        let text = answer["text"].as_str().expect("the CSV text");
        let mut reader = csv::ReaderBuilder::new()
            .comment(Some(b'#'))
            .from_reader(text.as_bytes());
        let header = reader.headers().expect("a header").clone();
        let name_column = header
            .iter()
            .position(|h| h == "name")
            .expect("a name column");
        assert!(header.iter().any(|h| h == "p_resolved_2"), "{header:?}");
        let downloaded: Vec<String> = reader
            .records()
            .map(|r| r.expect("a row")[name_column].to_owned())
            .collect();
        assert_eq!(
            downloaded, names,
            "the download carries the page's rows in rank order"
        );
    })
    .await;
}
