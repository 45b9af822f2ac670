//! Journey 3: a member uploads a CSV file with one bad row, gets the row-level report and finds
//! nothing written; fixes the row, uploads again, and the rows appear as pending.

use massline::auth::Role;

use crate::support::{self, PAYLOADS, Page, Reading, TEST_PASSWORD};

const HEADER: &str = "galaxy,morphology,bulge_kind,centre_kind,distance_mpc,distance_err_mpc,distance_method,quantity,value,scale,limit_confidence_sigma,method,sigma_definition,aperture,band,source_distance_mpc,resolution_arcsec,reference,note";

/// Two invented galaxies; `sigma_q8` is the σ cell of the second one's row (line 4).
fn file(sigma_q8: &str) -> String {
    format!(
        "{HEADER}\n\
         Quellin 7,elliptical,classical,core,21,1.2,sbf,sigma,212 ± 11,,,,sigma_e,r_e,,,,Invented et al. 2030,\n\
         Quellin 7,,,,,,,bh_mass,2.1e8 +0.4e8/-0.3e8,,,stellar_dynamics,,,,21,0.08,Invented et al. 2030,\"{}\"\n\
         Quellin 8,spiral,pseudo,unknown,14,0.9,cepheid,sigma,{sigma_q8},,,,sigma_e,r_e,,,,Invented et al. 2031,\n\
         Quellin 8,,,,,,,bh_mass,<3e7,,2,gas_dynamics,,,,14,0.1,Invented et al. 2031,\n",
        PAYLOADS[1].replace('"', "\"\"")
    )
}

async fn submissions_count(pool: &sqlx::SqlitePool) -> i64 {
    sqlx::query_scalar("select count(*) from submission")
        .fetch_one(pool)
        .await
        .expect("a count")
}

/// Choose a file on the upload page's file input and send it.
async fn upload(member: &Page, dir: &std::path::Path, name: &str, text: &str) {
    member.open("/submissions/upload", "upload-form").await;
    let path = dir.join(name);
    std::fs::write(&path, text).expect("the file is written");
    member
        .element("input[type=file][name=file]")
        .await
        .send_keys(path.display().to_string())
        .await
        .expect("the file is chosen");
    member
        .click_button("form[action='/submissions/upload']", "Submit")
        .await;
}

#[tokio::test(flavor = "multi_thread", worker_threads = 2)]
async fn a_csv_file_with_one_bad_row_is_reported_row_by_row_and_the_fixed_file_lands_as_pending() {
    support::run("j3-csv", Reading::Private, |journey| async move {
        journey.account("mira", Role::Member).await;
        let member = journey.browser("member").await;
        member.log_in_by_keyboard("mira", TEST_PASSWORD).await;
        let dir = tempfile::tempdir().expect("a temporary directory");
        let before = submissions_count(&journey.pool).await;

        // σ of 900 km/s is outside the plausible range (20–600 km/s, README "Plausible ranges").
        upload(&member, dir.path(), "bad.csv", &file("900 ± 20")).await;
        member.check_expecting(400, "upload-report").await;
        let report = member.texts("#row-report tbody tr").await;
        assert_eq!(
            report.len(),
            1,
            "one faulty row, one line of the report: {report:?}"
        );
        assert!(
            report[0].starts_with('4') && report[0].contains("value"),
            "the report names line 4 and the value column: {report:?}"
        );
        assert!(
            member
                .text("#upload-summary")
                .await
                .contains("nothing was imported"),
            "the page says nothing was written"
        );
        assert_eq!(
            submissions_count(&journey.pool).await,
            before,
            "nothing was written"
        );

        upload(&member, dir.path(), "fixed.csv", &file("95 ± 6")).await;
        member.check("upload-done").await;
        let done = member.text("#upload-done").await;
        assert!(
            done.contains("2 pending submission"),
            "the page says what was imported: {done}"
        );
        assert_eq!(
            submissions_count(&journey.pool).await,
            before + 2,
            "one pending submission per galaxy"
        );
        member.open("/submissions", "my-submissions").await;
        let rows = member.texts("#submissions tbody tr").await;
        for galaxy in ["Quellin 7", "Quellin 8"] {
            let row = rows
                .iter()
                .find(|r| r.contains(galaxy))
                .unwrap_or_else(|| panic!("{galaxy} is listed: {rows:?}"));
            assert!(row.contains("pending"), "{galaxy} is pending: {row}");
        }

        // The same file again adds nothing.
        upload(&member, dir.path(), "fixed-again.csv", &file("95 ± 6")).await;
        member.check("upload-again").await;
        assert_eq!(
            submissions_count(&journey.pool).await,
            before + 2,
            "sending the file twice adds nothing"
        );

        let slug = massline::catalog::model::slugify("Quellin 7");
        member
            .open(&format!("/galaxies/{slug}"), "new-galaxy")
            .await;
        assert!(
            member
                .text("table.measurements")
                .await
                .contains(PAYLOADS[1]),
            "the note typed in the file is shown as text"
        );
    })
    .await;
}
