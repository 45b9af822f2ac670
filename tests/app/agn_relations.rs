//! Virial (reverberation, single-epoch) masses and the relations: the default fits hold
//! dynamical masses only and say how many virial masses they left out; including them is a
//! visible choice; a galaxy with a virial mass is placed against the dynamical fit
//! (docs/methods.md §4.7). Counts are derived from the invented demo files.

use massline::catalog::demo::{DEMO_GALAXIES_CSV, DEMO_MEASUREMENTS_CSV, parse_demo};
use massline::catalog::model::{Quantity, is_virial_method, slugify};

use crate::helpers::spawn_demo_app;

/// Names of the demo galaxies whose adopted black-hole mass is a virial mass and that have an
/// adopted σ_e (the galaxies M–σ would take if virial masses entered).
fn virial_with_sigma_e() -> Vec<String> {
    virial_with_sigma_e_by(is_virial_method)
}

/// As [`virial_with_sigma_e`], for the virial mass methods `method` admits.
fn virial_with_sigma_e_by(method: fn(&str) -> bool) -> Vec<String> {
    let demo = parse_demo(DEMO_GALAXIES_CSV, DEMO_MEASUREMENTS_CSV).unwrap();
    (0..demo.galaxies.len())
        .filter(|&gi| {
            let adopted = |q: Quantity| {
                demo.measurements
                    .iter()
                    .find(|(i, m, a)| *i == gi && *a && m.quantity == q)
                    .map(|(_, m, _)| m)
            };
            adopted(Quantity::BlackHoleMass)
                .is_some_and(|m| is_virial_method(&m.method) && method(&m.method))
                && adopted(Quantity::VelocityDispersion)
                    .is_some_and(|m| m.sigma_definition == "sigma_e")
        })
        .map(|gi| demo.galaxies[gi].name.clone())
        .collect()
}

fn n(fit: &serde_json::Value) -> u64 {
    fit["n_detections"].as_u64().unwrap() + fit["n_limits"].as_u64().unwrap()
}

#[tokio::test]
async fn default_fits_leave_virial_masses_out_and_say_so_and_including_them_is_a_choice() {
    let app = spawn_demo_app().await;
    let virial = virial_with_sigma_e();
    assert!(!virial.is_empty(), "the demo has virial masses with σ_e");
    let k = virial.len() as u64;
    let k_rm = virial_with_sigma_e_by(|m| m == "reverberation").len() as u64;
    assert!(
        k_rm > 0 && k_rm < k,
        "the demo has reverberation and single-epoch masses"
    );

    let (status, body) = app.get("/api/v1/relations/m_sigma").await;
    assert_eq!(status, 200, "{body}");
    let default: serde_json::Value = serde_json::from_str(&body).unwrap();
    assert_eq!(default["left_out_virial"], k, "{default}");
    assert_eq!(default["sample_filter"]["masses"], "dynamical");

    let (_, body) = app
        .get("/api/v1/relations/m_sigma?masses=with_reverberation")
        .await;
    let with: serde_json::Value = serde_json::from_str(&body).unwrap();
    assert_eq!(with["left_out_virial"], k - k_rm, "{with}");
    assert_eq!(with["sample_filter"]["masses"], "with_reverberation");
    // Every reverberation mass with σ_e enters; the single-epoch ones stay out.
    assert_eq!(n(&with), n(&default) + k_rm, "{with}");
    // A different sample is a different fit to cite, and a different result.
    assert_ne!(with["fit_id"], default["fit_id"]);
    assert_ne!(
        with["fit"]["alpha_log_mbh"],
        default["fit"]["alpha_log_mbh"]
    );
    assert!(with["fit"]["alpha_log_mbh"].is_f64());

    // Choosing one mass method overrides the kinds: reverberation alone.
    let (_, body) = app
        .get("/api/v1/relations/m_sigma?mass_method=reverberation")
        .await;
    let alone: serde_json::Value = serde_json::from_str(&body).unwrap();
    assert_eq!(n(&alone), k_rm, "{alone}");

    let (status, body) = app.get("/api/v1/relations/m_sigma?masses=agn").await;
    assert_eq!(status, 422, "{body}");
    assert!(
        body.contains("dynamical, with_reverberation, all"),
        "{body}"
    );

    // The page says why, and offers the choice.
    let page = app.ok("/relations/m_sigma").await;
    let note_at = page
        .find("id=\"virial-note\"")
        .expect("the page names what it left out");
    let note = &page[note_at..note_at + page[note_at..].find("</p>").unwrap()];
    assert!(
        note.contains(&format!("{k} reverberation or single-epoch mass")),
        "{note}"
    );
    assert!(note.contains("circular"), "{note}");
    assert!(page.contains("name=\"masses\""), "{page}");
    assert!(page.contains("name=\"activity\""), "{page}");
    let all_page = app.ok("/relations/m_sigma?masses=all").await;
    assert!(!all_page.contains("id=\"virial-note\""));

    // The methods paragraph says it too.
    let methods = app.ok("/relations/m_sigma/methods.txt").await;
    assert!(
        methods.contains("reverberation or single-epoch mass"),
        "{methods}"
    );
}

#[tokio::test]
async fn a_galaxy_with_a_virial_mass_is_placed_against_the_dynamical_fit() {
    let app = spawn_demo_app().await;
    let name = virial_with_sigma_e().remove(0);
    for _ in 0..1200 {
        if app.state.analyst.is_done(1) {
            break;
        }
        tokio::time::sleep(std::time::Duration::from_millis(50)).await;
    }
    let body = app.ok(&format!("/galaxies/{}", slugify(&name))).await;
    assert!(body.contains("id=\"outside-default\""), "{body}");
    assert!(body.contains("id=\"place-m_sigma\""), "{body}");
    assert!(!body.contains("No relation applies"), "{body}");
}
