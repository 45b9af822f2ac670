//! AGN quantities as the pages and the API show them (docs/methods.md §4): what lies behind a
//! virial mass (lag, width, the factor the stored mass assumed and the adopted ⟨f⟩ applied
//! now), and the Eddington quantities of a black hole with a known λL(5100 Å). Computed once
//! here for the galaxy pages, the place check and the API alike.

use sqlx::SqlitePool;

use super::galaxy::GalaxyRecord;
use crate::astro::agn;
use crate::catalog::galaxies::{
    StoredVirial, virial_measurements, virial_measurements_of_submission,
};
use crate::catalog::model::{
    Activity, MassMethod, Measurement, SingleEpochCalibration, WidthDefinition, WidthSpectrum,
};
use crate::catalog::virial::Factors;
use crate::units::Quantity;

/// The thin-disk spins whose radiative efficiencies bound the accretion rate: a non-rotating
/// hole and the Thorne (1974) limit (docs/methods.md §4.5).
pub const SPIN_RANGE: (f64, f64) = (0.0, 0.998);

/// The Eddington quantities of a black hole of known mass shining with a known λL(5100 Å)
/// (docs/methods.md §4.4, §4.5, §4.7).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Eddington {
    /// log10 of the mass used, M☉.
    pub log_mass_msun: f64,
    /// log10 λL_λ(5100 Å) used, erg/s.
    pub log_l5100_erg_s: f64,
    /// The bolometric correction applied (`astro::agn::BOLOMETRIC_CORRECTION_5100`).
    pub bolometric_correction: f64,
    /// Bolometric luminosity, erg/s.
    pub l_bol_erg_s: f64,
    /// Eddington luminosity of the mass, erg/s.
    pub l_edd_erg_s: f64,
    /// L_bol / L_Edd.
    pub eddington_ratio: f64,
    /// Radiative efficiency at the lower and the upper spin of [`SPIN_RANGE`].
    pub efficiency: (f64, f64),
    /// Accretion rate, M☉ per Julian year, at the upper and the lower efficiency: (least, most).
    pub accretion_msun_yr: (f64, f64),
}

/// The Eddington quantities of a mass (log10 M☉) and a λL(5100 Å) (log10 erg/s): L_bol =
/// 9.26 λL(5100 Å) (Richards et al. 2006, from memory; docs/methods.md §4.7), L_Edd and the
/// Eddington ratio (§4.4), and the accretion rate Ṁ = L_bol/(η c²) for η from spin 0 to 0.998
/// (§4.5). None when an input is not a finite, representable number.
pub fn eddington(log_mass_msun: f64, log_l5100_erg_s: f64) -> Option<Eddington> {
    if !log_mass_msun.is_finite() || !log_l5100_erg_s.is_finite() {
        return None;
    }
    let mass = 10f64.powf(log_mass_msun);
    let l_bol = agn::BOLOMETRIC_CORRECTION_5100 * 10f64.powf(log_l5100_erg_s);
    let l_edd = agn::eddington_luminosity_erg_s(mass).ok()?;
    let ratio = agn::eddington_ratio(l_bol, mass).ok()?;
    let low = agn::radiative_efficiency(SPIN_RANGE.0).ok()?;
    let high = agn::radiative_efficiency(SPIN_RANGE.1).ok()?;
    Some(Eddington {
        log_mass_msun,
        log_l5100_erg_s,
        bolometric_correction: agn::BOLOMETRIC_CORRECTION_5100,
        l_bol_erg_s: l_bol,
        l_edd_erg_s: l_edd,
        eddington_ratio: ratio,
        efficiency: (low, high),
        accretion_msun_yr: (
            agn::accretion_rate_msun_yr(l_bol, high).ok()?,
            agn::accretion_rate_msun_yr(l_bol, low).ok()?,
        ),
    })
}

/// A reverberation or single-epoch mass with what lies behind it, and the mass shown now.
#[derive(Debug, Clone, PartialEq)]
pub struct VirialDetail {
    /// The measurement.
    pub measurement_id: i64,
    /// Reverberation or single epoch.
    pub method: MassMethod,
    /// The broad line.
    pub line: String,
    /// The width measure.
    pub width_definition: WidthDefinition,
    /// The spectrum the width was measured on.
    pub width_spectrum: WidthSpectrum,
    /// Rest-frame lag and its lower and upper errors, days.
    pub lag_days: Option<(f64, f64, f64)>,
    /// Line width and its error, km/s.
    pub width_km_s: Option<(f64, f64)>,
    /// log10 λL(5100 Å), erg/s, at the source's distance.
    pub log_l5100_erg_s: Option<f64>,
    /// log10 of the virial product c τ Δv²/G, M☉, when the lag and the width are known
    /// (docs/methods.md §4.1).
    pub log_virial_product: Option<f64>,
    /// log10 of the factor the stored mass assumed (0: the virial product; None: not known).
    pub assumed_log_f: Option<f64>,
    /// log10 ⟨f⟩ adopted at the version read and applied; None when the mass is not rescaled.
    pub applied_log_f: Option<f64>,
    /// The single-epoch calibration.
    pub calibration: Option<SingleEpochCalibration>,
    /// log10 of the mass as stored (for `assumed_log_f`), M☉.
    pub log_mass_stored: f64,
    /// log10 of the mass shown and fitted: stored + applied − assumed, M☉.
    pub log_mass_shown: f64,
}

impl VirialDetail {
    /// A stored virial measurement of `m` with the factors in force. None when `v` is not
    /// `m`'s or its words are not the schema's.
    pub fn of(m: &Measurement, v: &StoredVirial, factors: &Factors) -> Option<Self> {
        if v.measurement_id != m.measurement_id {
            return None;
        }
        let method = m.method.parse::<MassMethod>().ok()?;
        let width_definition = v.width_definition.parse::<WidthDefinition>().ok()?;
        let width_spectrum = v.width_spectrum.parse::<WidthSpectrum>().ok()?;
        let calibration = v.calibration.parse::<SingleEpochCalibration>().ok();
        let lag_days = v.lag_days.map(|l| {
            (
                l,
                v.lag_err_minus_days.unwrap_or(0.0),
                v.lag_err_plus_days.unwrap_or(0.0),
            )
        });
        let width_km_s = v.width_km_s.map(|w| (w, v.width_err_km_s.unwrap_or(0.0)));
        let log_virial_product = match (lag_days, width_km_s) {
            (Some(l), Some(w)) => agn::virial_product_msun(l.0, w.0).ok().map(f64::log10),
            _ => None,
        };
        let applied_log_f = v.assumed_log_f.map(|_| factors.of(width_definition).0);
        let shift = match (applied_log_f, v.assumed_log_f) {
            (Some(f), Some(a)) => f - a,
            _ => 0.0,
        };
        Some(VirialDetail {
            measurement_id: m.measurement_id,
            method,
            line: v.line.clone(),
            width_definition,
            width_spectrum,
            lag_days,
            width_km_s,
            log_l5100_erg_s: v.log_l5100_erg_s,
            log_virial_product,
            assumed_log_f: v.assumed_log_f,
            applied_log_f,
            calibration,
            log_mass_stored: m.log_value,
            log_mass_shown: m.log_value + shift,
        })
    }

    /// How the mass shown follows from the stored one, in a plain sentence.
    pub fn factor_sentence(&self) -> String {
        match (self.assumed_log_f, self.applied_log_f) {
            (Some(a), Some(f)) => format!(
                "rescaled from f = {} to the adopted ⟨f⟩ = {} (log ⟨f⟩ = {:.2})",
                factor_words(a),
                factor_words(f),
                f
            ),
            _ if self.calibration == Some(SingleEpochCalibration::Vp06) => {
                "the vp06 calibration carries its own factor: shown as published, not rescaled"
                    .to_owned()
            }
            _ => "the source's factor is not recorded: shown as published, not rescaled".to_owned(),
        }
    }

    /// For a single-epoch mass, the flag the pages show with it: the calibration's scatter
    /// (docs/methods.md §4.2) and that no default fit takes it (§4.7).
    pub fn single_epoch_flag(&self) -> Option<String> {
        (self.method == MassMethod::SingleEpoch).then(|| {
            format!(
                "single-epoch: ±{:.2} dex calibration scatter; in no default fit",
                single_epoch_scatter_dex(self.calibration)
            )
        })
    }
}

/// What lies behind the virial masses of one submission's measurements (all of one
/// submission), at the factors adopted now: what a reviewer reads beside each mass.
///
/// # Errors
/// When the database fails.
pub async fn submission_virial(
    pool: &SqlitePool,
    measurements: &[Measurement],
) -> sqlx::Result<Vec<VirialDetail>> {
    let Some(first) = measurements.first() else {
        return Ok(Vec::new());
    };
    let stored = virial_measurements_of_submission(pool, first.submission_id).await?;
    if stored.is_empty() {
        return Ok(Vec::new());
    }
    let version = crate::catalog::history::current_version(pool).await?;
    let factors = crate::catalog::virial::factors_at(pool, version).await?;
    Ok(measurements
        .iter()
        .filter_map(|m| {
            stored
                .iter()
                .find(|v| v.measurement_id == m.measurement_id)
                .and_then(|v| VirialDetail::of(m, v, &factors))
        })
        .collect())
}

/// The error floor of a single-epoch mass by its calibration, dex (docs/methods.md §4.2).
pub fn single_epoch_scatter_dex(calibration: Option<SingleEpochCalibration>) -> f64 {
    match calibration {
        Some(SingleEpochCalibration::Vp06) => agn::VESTERGAARD_PETERSON_2006.scatter_dex,
        _ => agn::R_L_ROUTE_SCATTER_DEX,
    }
}

/// A linear factor 10^log_f in words: "1 (the virial product)" for log f = 0, else two
/// decimals.
fn factor_words(log_f: f64) -> String {
    if log_f == 0.0 {
        "1 (the virial product)".to_owned()
    } else {
        let f = 10f64.powf(log_f);
        let text = format!("{f:.2}");
        text.trim_end_matches('0').trim_end_matches('.').to_owned()
    }
}

/// A galaxy's AGN record: its activity class, its virial masses with what lies behind them,
/// and the Eddington quantities of its adopted black-hole mass.
#[derive(Debug, Clone, PartialEq)]
pub struct GalaxyAgn {
    /// The activity class.
    pub activity: Activity,
    /// Every virial mass the record shows, in the record's order.
    pub virial: Vec<VirialDetail>,
    /// The Eddington quantities: the adopted black-hole mass (at the adopted distance and the
    /// adopted ⟨f⟩) with the λL(5100 Å) of its own broad-line measurement, or else of another
    /// of the galaxy's, moved to the adopted distance. None without both, or for a mass limit.
    pub eddington: Option<Eddington>,
    /// Which mass and luminosity the Eddington quantities use, in words.
    pub eddington_basis: String,
}

/// The AGN record of a galaxy (at the factors of the version the record was read at).
///
/// # Errors
/// When the database fails.
pub async fn galaxy_agn(pool: &SqlitePool, record: &GalaxyRecord) -> sqlx::Result<GalaxyAgn> {
    let galaxy = &record.galaxy;
    let activity = galaxy
        .activity
        .parse::<Activity>()
        .unwrap_or(Activity::Unknown);
    let stored = virial_measurements(pool, galaxy.galaxy_id).await?;
    // The factors the record's values were moved to (the version read).
    let factors = (!stored.is_empty()).then_some(record.virial_factors);
    let mut virial = Vec::new();
    // (λL at the adopted distance, whether it belongs to the adopted mass)
    let mut luminosities: Vec<(f64, bool)> = Vec::new();
    for at in &record.measurements {
        let m = &at.measurement;
        let Some(v) = stored.iter().find(|v| v.measurement_id == m.measurement_id) else {
            continue;
        };
        let Some(f) = &factors else { continue };
        if let Some(detail) = VirialDetail::of(m, v, f) {
            let mut detail = detail;
            // The mass shown is also moved to the adopted distance (docs/methods.md §3.2):
            // the record's value is at the adopted factor and distance, so the distance's part
            // is what remains once the factor's is taken off.
            detail.log_mass_shown += at.log_value_at_adopted_distance - m.log_at_factor(f);
            if let Some(l) = detail.log_l5100_erg_s {
                let moved = match m.source_distance_mpc {
                    Some(d) if d > 0.0 => l + 2.0 * (galaxy.distance_mpc / d).log10(),
                    _ => l,
                };
                luminosities.push((moved, m.adopted));
            }
            virial.push(detail);
        }
    }
    let adopted_mass = record
        .adopted()
        .find(|at| at.measurement.quantity == Quantity::BlackHoleMass);
    let luminosity = luminosities
        .iter()
        .find(|(_, own)| *own)
        .or_else(|| luminosities.first())
        .copied();
    let (eddington, eddington_basis) = match (adopted_mass, luminosity) {
        (Some(at), Some((log_l, own))) if !at.measurement.upper_limit => {
            let log_mass = virial
                .iter()
                .find(|d| d.measurement_id == at.measurement.measurement_id)
                .map_or(at.log_value_at_adopted_distance, |d| d.log_mass_shown);
            let basis = format!(
                "the adopted black-hole mass ({}) and the λL(5100 Å) of {}, both at the adopted distance",
                at.measurement
                    .method
                    .parse::<MassMethod>()
                    .map_or("stored", MassMethod::label),
                if own {
                    "its own broad-line measurement"
                } else {
                    "the galaxy's broad-line measurement"
                }
            );
            (eddington(log_mass, log_l), basis)
        }
        _ => (None, String::new()),
    };
    Ok(GalaxyAgn {
        activity,
        virial,
        eddington,
        eddington_basis,
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn the_eddington_block_follows_the_formulas_of_methods_section_4() {
        // 10⁸ M☉ at λL(5100 Å) = 10⁴⁴ erg/s: L_bol = 9.26e44 erg/s, L_Edd = 1.257065e46 erg/s
        // (docs/methods.md §4.4, computed), λ = 0.07366; Ṁ = L_bol/(η c²) with η = 0.057191
        // (spin 0) and 0.320994 (spin 0.998), §4.5 table.
        let e = eddington(8.0, 44.0).unwrap();
        assert!((e.l_bol_erg_s / 9.26e44 - 1.0).abs() < 1e-12);
        assert!((e.l_edd_erg_s / 1.257_065e46 - 1.0).abs() < 5e-7);
        assert!((e.eddington_ratio - 9.26e44 / 1.257_065e46).abs() < 1e-6);
        assert!((e.efficiency.0 - 0.057_191).abs() < 1e-6);
        assert!((e.efficiency.1 - 0.320_994).abs() < 1e-6);
        // §4.4: 10⁴⁶ erg/s at η = 0.1 needs 1.765862 M☉/yr, so Ṁ scales as L/η.
        let per = 1.765_862 * 0.1 / 1e46;
        assert!((e.accretion_msun_yr.1 / (per * 9.26e44 / 0.057_191) - 1.0).abs() < 1e-5);
        assert!((e.accretion_msun_yr.0 / (per * 9.26e44 / 0.320_994) - 1.0).abs() < 1e-5);
        assert!(e.accretion_msun_yr.0 < e.accretion_msun_yr.1);
        assert!(eddington(f64::NAN, 44.0).is_none());
    }

    #[test]
    fn factor_sentences_say_what_was_done_to_the_mass() {
        let d = VirialDetail {
            measurement_id: 1,
            method: MassMethod::Reverberation,
            line: "Hbeta".into(),
            width_definition: WidthDefinition::SigmaLine,
            width_spectrum: WidthSpectrum::Rms,
            lag_days: None,
            width_km_s: None,
            log_l5100_erg_s: None,
            log_virial_product: None,
            assumed_log_f: Some(5.5f64.log10()),
            applied_log_f: Some(4.4f64.log10()),
            calibration: None,
            log_mass_stored: 7.0,
            log_mass_shown: 7.0 + 4.4f64.log10() - 5.5f64.log10(),
        };
        assert!(
            d.factor_sentence()
                .starts_with("rescaled from f = 5.5 to the adopted ⟨f⟩ = 4.4"),
            "{}",
            d.factor_sentence()
        );
        let unknown = VirialDetail {
            assumed_log_f: None,
            applied_log_f: None,
            ..d.clone()
        };
        assert_eq!(
            unknown.factor_sentence(),
            "the source's factor is not recorded: shown as published, not rescaled"
        );
        assert!(unknown.single_epoch_flag().is_none());
        let se = VirialDetail {
            method: MassMethod::SingleEpoch,
            calibration: Some(SingleEpochCalibration::Vp06),
            ..unknown
        };
        assert_eq!(
            se.single_epoch_flag().unwrap(),
            "single-epoch: ±0.43 dex calibration scatter; in no default fit"
        );
    }
}
