//! Planning on the invented demo catalog, through the domain (`relations::planning`) as the
//! doors call it: the reliability table of P(resolved) against the demo's own measured
//! spheres of influence, and a ranked plan for a list of invented candidates. What to expect is
//! counted from the demo files, so a regenerated demo still works.

use massline::astro::SphereOfInfluence;
use massline::catalog::demo::{DEMO_GALAXIES_CSV, DEMO_MEASUREMENTS_CSV, parse_demo};
use massline::catalog::model::{Quantity, is_virial_method};
use massline::fit::Method;
use massline::relations::planning::{self, Resolution, SIGMA_NEEDED};
use massline::relations::{Relation, SampleFilter};

use crate::helpers::spawn_demo_app;

/// (resolved?) of every demo galaxy the reliability table can compare: an adopted dynamical
/// mass that is not a limit, with a recorded resolution, and an adopted σ_e; resolved when
/// θ_infl/θ_res ≥ `threshold` (θ_infl does not depend on the distance for a dynamical mass,
/// docs/methods.md §3.1, so the source's distance serves).
fn comparable(threshold: f64) -> Vec<bool> {
    let demo = parse_demo(DEMO_GALAXIES_CSV, DEMO_MEASUREMENTS_CSV).unwrap();
    let adopted = |gi: usize, q: Quantity| {
        demo.measurements
            .iter()
            .find(|(i, m, a)| *i == gi && *a && m.quantity == q)
            .map(|(_, m, _)| m)
    };
    demo.galaxies
        .iter()
        .enumerate()
        .filter_map(|(gi, g)| {
            let m = adopted(gi, Quantity::BlackHoleMass)?;
            let s = adopted(gi, Quantity::VelocityDispersion)?;
            if m.upper_limit || is_virial_method(&m.method) || s.sigma_definition != "sigma_e" {
                return None;
            }
            let resolution = m.resolution_arcsec?;
            let soi = SphereOfInfluence::from_log_mbh(
                m.log_value,
                10f64.powf(s.log_value),
                m.source_distance_mpc.unwrap_or(g.distance_mpc),
                Some(resolution),
                threshold,
            )
            .unwrap();
            soi.resolved
        })
        .collect()
}

#[tokio::test]
async fn the_reliability_table_of_the_demo_catalog_has_rows_and_its_counts_add_up() {
    let app = spawn_demo_app().await;
    let catalog = app.state.catalog();
    // Waited for in full first (as the command line does), so a slow machine cannot make the
    // page's one-second wait answer "computing"; then the page's call answers the same table.
    let table = planning::reliability_within(&catalog, 1.0, None)
        .await
        .unwrap();
    assert_eq!(planning::reliability(&catalog, 1.0).await.unwrap(), table);
    assert!(table.problem.is_none(), "{table:?}");
    assert_eq!(table.bins.len(), planning::RELIABILITY_BINS);
    let expected = comparable(1.0);
    assert!(
        !expected.is_empty(),
        "the demo has measured spheres of influence"
    );
    assert_eq!(table.compared, expected.len());
    assert_eq!(
        table.bins.iter().map(|b| b.count).sum::<usize>(),
        table.compared
    );
    assert_eq!(
        table.bins.iter().map(|b| b.resolved).sum::<usize>(),
        expected.iter().filter(|r| **r).count()
    );
    // Every galaxy of the default M–σ sample is compared or counted as left out, and each was
    // left out of the fit by a refit or the one-step change.
    let outcome = catalog
        .fitted(
            &Relation::MSigma,
            Method::Structural,
            &SampleFilter::default(),
            (
                Relation::MSigma.default_pivot(),
                Relation::MSigma.default_pivot2(),
            ),
        )
        .await
        .unwrap();
    assert_eq!(table.compared + table.left_out, outcome.sample.points.len());
    assert_eq!(table.refitted + table.one_step, table.compared);
    assert!(
        table
            .fit_id
            .as_deref()
            .is_some_and(|id| id.starts_with("fit-"))
    );
    for bin in table.bins.iter().filter(|b| b.count > 0) {
        let mean = bin.mean_predicted.unwrap();
        assert!(mean >= bin.lo && mean <= bin.hi, "{bin:?}");
        let (lo, hi) = bin.interval68.unwrap();
        let observed = bin.observed_fraction.unwrap();
        assert!(lo <= observed && observed <= hi, "{bin:?}");
        assert!(bin.verdict.is_some());
    }
    // The demo's resolutions were chosen knowing θ_infl (seed-data/generate.py), so most bins
    // are resolved more often than predicted, and the reading says why.
    let reading = table.reading.as_deref().unwrap();
    assert_eq!(reading, planning::reading_of(&table.bins).unwrap().as_str());
    assert!(
        reading.contains("more often than predicted") && reading.contains("expected of a catalog"),
        "{reading}"
    );
    // A stricter threshold cannot resolve more of the same galaxies.
    let strict = planning::reliability_within(&catalog, 3.0, None)
        .await
        .unwrap();
    let resolved = |t: &planning::Reliability| t.bins.iter().map(|b| b.resolved).sum::<usize>();
    assert!(resolved(&strict) <= resolved(&table));
    assert_eq!(
        resolved(&strict),
        comparable(3.0).iter().filter(|r| **r).count()
    );
}

#[tokio::test]
async fn a_candidate_list_is_ranked_against_the_demo_relations() {
    let app = spawn_demo_app().await;
    let catalog = app.state.catalog();
    let text = "name,sigma_km_s,sigma_err_km_s,log_bulge_mass,log_bulge_mass_err_dex,distance_mpc,distance_err_mpc\n\
        Candidate Near,240,12,,,8,0.8\n\
        Candidate Far,120,6,,,90,9\n\
        Candidate Middle,180,9,10.9,0.15,25,2.5\n\
        Candidate Unknown,,,11.1,0.1,30,3\n";
    let candidates = planning::read_candidates(text).unwrap();
    let resolutions = [
        Resolution::new("adaptive optics", 0.05).unwrap(),
        Resolution::new("seeing limited", 0.6).unwrap(),
    ];
    let plan = planning::plan_within(&catalog, &candidates, &resolutions, 1.0, None)
        .await
        .unwrap();
    let page = planning::plan(&catalog, &candidates, &resolutions, 1.0)
        .await
        .unwrap();
    assert_eq!(page, plan);
    assert!(plan.computing.is_none());
    assert_eq!(plan.rows.len(), candidates.len());
    assert_eq!(
        plan.rows.iter().map(|r| r.rank).collect::<Vec<_>>(),
        (1..=candidates.len()).collect::<Vec<_>>()
    );
    let m_sigma = plan
        .fits
        .iter()
        .find(|f| f.relation == Relation::MSigma)
        .unwrap();
    assert!(m_sigma.fit_id.is_some() && m_sigma.terms.is_some());
    assert_eq!(m_sigma.catalog_version, Some(plan.catalog_version));
    // Ranked by P at the first resolution; the candidate without σ comes last, with a mass and
    // the sentence saying why it has no P.
    let first: Vec<f64> = plan.rows.iter().filter_map(|r| r.p_resolved[0]).collect();
    assert_eq!(first.len(), 3);
    assert!(first.windows(2).all(|w| w[0] >= w[1]), "{first:?}");
    assert_eq!(plan.rows[0].candidate.name, "Candidate Near");
    let last = plan.rows.last().unwrap();
    assert_eq!(last.candidate.name, "Candidate Unknown");
    assert_eq!(last.note.as_deref(), Some(SIGMA_NEEDED));
    assert!(last.mass.is_some() && last.p_resolved.iter().all(Option::is_none));
    for row in plan.rows.iter().filter(|r| r.prediction.is_some()) {
        let (ao, seeing) = (row.p_resolved[0].unwrap(), row.p_resolved[1].unwrap());
        assert!((0.0..=1.0).contains(&ao) && seeing <= ao, "{row:?}");
        let used = row.relation.as_ref().unwrap();
        let least = row
            .considered
            .iter()
            .map(|c| c.sd_dex)
            .fold(f64::INFINITY, f64::min);
        let chosen = row.considered.iter().find(|c| &c.relation == used).unwrap();
        assert!(chosen.sd_dex <= least, "{row:?}");
    }
    // Bad arguments are refused with a sentence.
    assert!(
        planning::plan(&catalog, &candidates, &[], 1.0)
            .await
            .is_err()
    );
    assert!(
        planning::plan(&catalog, &candidates, &resolutions, 0.0)
            .await
            .is_err()
    );
    let twice = [resolutions[0].clone(), resolutions[0].clone()];
    let refused = planning::plan(&catalog, &candidates, &twice, 1.0)
        .await
        .unwrap_err();
    assert!(refused.to_string().contains("its own label"), "{refused}");
}
