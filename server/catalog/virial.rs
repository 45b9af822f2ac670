//! Virial (broad-line) masses as measured, and the group's adopted mean virial factor ⟨f⟩
//! over the catalog versions (docs/methods.md §4.1–§4.3, migration 9).
//!
//! A reverberation measurement is stored as measured: the lag and the width, and the mass for
//! the virial factor its source assumed (`assumed_log_f`; 0 when the mass is the virial product
//! computed here). What is shown and fitted is that mass moved to the adopted ⟨f⟩ of the
//! width measure at the catalog version read ([`factors_at`]), the way stored values are moved
//! to the adopted distance: the stored value never changes.

use sqlx::{SqliteExecutor, SqlitePool};

use super::begin_write;
use super::history::{self, NewEvent};
use super::intake::{Field, RowError};
use super::model::{
    MassMethod, SingleEpochCalibration, VirialEntry, WidthDefinition, WidthSpectrum,
};
use crate::astro::agn;

/// The text stored as "the value as entered" of a mass computed from a lag and a width (the
/// value cell was left empty): exports write the value cell empty again for it, so a re-import
/// computes the same virial product.
pub const COMPUTED_VALUE_TEXT: &str = "computed from the lag and the line width";

/// The text stored as "the value as entered" of a single-epoch mass computed from the
/// luminosity and the width.
pub const COMPUTED_SINGLE_EPOCH_TEXT: &str = "computed from the luminosity and the line width";

/// The measurement cells only a virial mass may fill.
pub const VIRIAL_COLUMNS: [&str; 10] = [
    "line",
    "width_definition",
    "width_spectrum",
    "lag_days",
    "lag_err_days",
    "width_km_s",
    "width_err_km_s",
    "log_l5100_erg_s",
    "virial_factor",
    "calibration",
];

/// A virial mass read from cells: the values to store and what lies behind them.
#[derive(Debug, Clone, PartialEq)]
pub struct VirialMass {
    /// log10 of the mass for `entry.assumed_log_f`, M☉; None when the value cell gave it.
    pub computed: Option<Computed>,
    /// What lies behind it.
    pub entry: VirialEntry,
}

/// A mass computed here (the value cell was empty).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Computed {
    /// log10 M☉ (for the entry's assumed factor).
    pub log_value: f64,
    /// Lower and upper errors, dex.
    pub err_minus_dex: f64,
    /// Upper error, dex.
    pub err_plus_dex: f64,
    /// Which text to store as entered.
    pub value_text: &'static str,
}

/// Errors of a lag or a width carried into log VP, dex (first-order propagation of
/// VP ∝ τ Δv²): (lower, upper).
fn virial_product_errors_dex(lag: (f64, f64, f64), width: (f64, f64)) -> (f64, f64) {
    let ln10 = std::f64::consts::LN_10;
    let w = 2.0 * width.1 / (width.0 * ln10);
    let minus = (lag.1 / (lag.0 * ln10)).hypot(w);
    let plus = (lag.2 / (lag.0 * ln10)).hypot(w);
    (minus, plus)
}

/// Reads the virial cells of a black-hole mass measured by `method` ([`VIRIAL_COLUMNS`]); for
/// any other method every such cell must be empty (`Ok(None)`).
///
/// A reverberation mass is either computed (value cell empty; `lag_days` and `width_km_s`
/// given; stored as the virial product, assumed log f = 0) or typed (value cell given;
/// `virial_factor` is the f its source assumed, or empty when not known, and the lag and width
/// are kept when given). A single-epoch mass is computed from `log_l5100_erg_s` and
/// `width_km_s` by its `calibration`, or typed; either way its error is at least the
/// calibration's scatter (docs/methods.md §4.2).
///
/// # Errors
/// The first cell at fault, with what to type instead.
pub(super) fn virial_from_fields<'a>(
    field: &impl Fn(&'static str) -> Field<'a>,
    method: Option<MassMethod>,
    value_given: bool,
) -> Result<Option<VirialMass>, RowError> {
    let Some(method) = method.filter(|m| m.is_virial()) else {
        for column in VIRIAL_COLUMNS {
            let f = field(column);
            if !f.text.trim().is_empty() {
                return Err(f.error(
                    "only a reverberation or single-epoch black-hole mass takes this column; leave it empty"
                        .into(),
                ));
            }
        }
        return Ok(None);
    };
    let single = method == MassMethod::SingleEpoch;
    let line = match field("line").text.trim() {
        "" => "Hbeta".to_owned(),
        t if t.chars().count() <= 20
            && t.chars().all(|c| c.is_alphanumeric() || "-_. ".contains(c)) =>
        {
            t.to_owned()
        }
        _ => {
            return Err(field("line").error(
                "a line is named in up to 20 letters and digits, such as Hbeta or MgII".into(),
            ));
        }
    };
    let width_definition = match field("width_definition").text.trim() {
        "" if single => WidthDefinition::Fwhm,
        "" => WidthDefinition::SigmaLine,
        _ => field("width_definition").word::<WidthDefinition>()?,
    };
    let width_spectrum = match field("width_spectrum").text.trim() {
        "" if single => WidthSpectrum::Single,
        "" => WidthSpectrum::Rms,
        _ => field("width_spectrum").word::<WidthSpectrum>()?,
    };
    let lag = lag_from(&field("lag_days"), &field("lag_err_days"))?;
    let width = match field("width_km_s").optional_number(10.0, 100_000.0, "km/s")? {
        Some(w) => Some((
            w,
            field("width_err_km_s")
                .optional_number(0.0, w, "km/s")?
                .unwrap_or(0.0),
        )),
        None => {
            let e = field("width_err_km_s");
            if !e.text.trim().is_empty() {
                return Err(e.error("an error needs the width itself in width_km_s".into()));
            }
            None
        }
    };
    let l5100 = field("log_l5100_erg_s")
        .optional_number(38.0, 49.0, "log10 erg/s")?
        .map(|l| (l, 0.0));
    let assumed_f = field("virial_factor").optional_number(0.01, 100.0, "(dimensionless f)")?;
    let calibration = match (single, field("calibration").text.trim()) {
        (true, "") => {
            return Err(field("calibration").error(format!(
                "a single-epoch mass names its calibration: one of {}",
                SingleEpochCalibration::accepted()
            )));
        }
        (true, _) => Some(field("calibration").word::<SingleEpochCalibration>()?),
        (false, "") => None,
        (false, _) => {
            return Err(field("calibration")
                .error("only a single-epoch mass names a calibration; leave it empty".into()));
        }
    };
    let mut entry = VirialEntry {
        line,
        width_definition,
        width_spectrum,
        lag_days: lag,
        width_km_s: width,
        log_l5100_erg_s: l5100,
        assumed_log_f: assumed_f.map(f64::log10),
        calibration,
    };
    if value_given {
        if single && calibration == Some(SingleEpochCalibration::Vp06) && assumed_f.is_some() {
            return Err(field("virial_factor").error(
                "a mass by the vp06 calibration carries that calibration's own factor; leave virial_factor empty"
                    .into(),
            ));
        }
        if single && lag.is_some() {
            return Err(field("lag_days")
                .error("a single-epoch mass has no measured lag; leave lag_days empty".into()));
        }
        return Ok(Some(VirialMass {
            computed: None,
            entry,
        }));
    }
    if assumed_f.is_some() {
        return Err(field("virial_factor").error(
            "a computed mass is the virial product (f = 1) rescaled to the adopted factor; leave virial_factor empty, or type the published mass in value"
                .into(),
        ));
    }
    let missing = |column: &'static str, what: &str| {
        field(column).error(format!(
            "type the {what} here, or the published mass in value"
        ))
    };
    let computed = if single {
        let (w, w_err) = width.ok_or_else(|| missing("width_km_s", "line width (km/s)"))?;
        let (log_l, _) =
            l5100.ok_or_else(|| missing("log_l5100_erg_s", "log10 λL(5100 Å) in erg/s"))?;
        if lag.is_some() {
            return Err(field("lag_days")
                .error("a single-epoch mass has no measured lag; leave lag_days empty".into()));
        }
        let l = 10f64.powf(log_l);
        let ln10 = std::f64::consts::LN_10;
        let width_err = 2.0 * w_err / (w * ln10);
        let (log_value, floor) = match calibration {
            Some(SingleEpochCalibration::Vp06) => {
                if width_definition != WidthDefinition::Fwhm {
                    return Err(field("width_definition")
                        .error("the vp06 calibration takes the FWHM: type fwhm".into()));
                }
                entry.assumed_log_f = None;
                let c = agn::VESTERGAARD_PETERSON_2006;
                (
                    c.log_mass_msun(w, l)
                        .map_err(|e| field("width_km_s").error(e.to_string()))?,
                    c.scatter_dex,
                )
            }
            _ => {
                entry.assumed_log_f = Some(0.0);
                let tau = agn::BENTZ_2013
                    .radius_lt_days(l)
                    .map_err(|e| field("log_l5100_erg_s").error(e.to_string()))?;
                let vp = agn::virial_product_msun(tau, w)
                    .map_err(|e| field("width_km_s").error(e.to_string()))?;
                (vp.log10(), agn::R_L_ROUTE_SCATTER_DEX)
            }
        };
        let err = width_err.max(floor);
        Computed {
            log_value,
            err_minus_dex: err,
            err_plus_dex: err,
            value_text: COMPUTED_SINGLE_EPOCH_TEXT,
        }
    } else {
        let lag = lag.ok_or_else(|| missing("lag_days", "rest-frame lag (days)"))?;
        let width = width.ok_or_else(|| missing("width_km_s", "line width (km/s)"))?;
        entry.assumed_log_f = Some(0.0);
        let vp = agn::virial_product_msun(lag.0, width.0)
            .map_err(|e| field("lag_days").error(e.to_string()))?;
        let (minus, plus) = virial_product_errors_dex(lag, width);
        Computed {
            log_value: vp.log10(),
            err_minus_dex: minus,
            err_plus_dex: plus,
            value_text: COMPUTED_VALUE_TEXT,
        }
    };
    if !(3.0..=11.5).contains(&computed.log_value) {
        return Err(field("width_km_s").error(format!(
            "the mass computed from these values, log M = {:.2}, is outside 3..11.5",
            computed.log_value
        )));
    }
    if computed.err_minus_dex > 2.0 || computed.err_plus_dex > 2.0 {
        return Err(field("lag_err_days")
            .error("the errors make the mass uncertain by more than 2 dex".into()));
    }
    Ok(Some(VirialMass {
        computed: Some(computed),
        entry,
    }))
}

/// The lag cell and its error cell: `12.3` with `1.1` (symmetric) or `+1.4/-1.1`, days.
fn lag_from(lag: &Field<'_>, err: &Field<'_>) -> Result<Option<(f64, f64, f64)>, RowError> {
    let Some(days) = lag.optional_number(1e-3, 10_000.0, "days")? else {
        if !err.text.trim().is_empty() {
            return Err(err.error("an error needs the lag itself in lag_days".into()));
        }
        return Ok(None);
    };
    let text = err.text.trim();
    if text.is_empty() {
        return Ok(Some((days, 0.0, 0.0)));
    }
    let number = |t: &str| -> Result<f64, RowError> {
        match t.trim().parse::<f64>() {
            Ok(v) if v.is_finite() && v >= 0.0 && v < days => Ok(v),
            _ => Err(err.error(format!(
                "'{}' is not an error in days: type one number below the lag (1.2) or +upper/-lower (+1.4/-1.1)",
                text.chars().take(20).collect::<String>()
            ))),
        }
    };
    if let Some(rest) = text.strip_prefix('+') {
        let (plus, minus) = rest.split_once("/-").ok_or_else(|| {
            err.error("type the errors as +upper/-lower, such as +1.4/-1.1".into())
        })?;
        Ok(Some((days, number(minus)?, number(plus)?)))
    } else {
        let e = number(text)?;
        Ok(Some((days, e, e)))
    }
}

/// The adopted mean virial factors in force at one catalog version.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Factors {
    /// log10 ⟨f⟩ for the line dispersion σ_line, with its error (dex).
    pub sigma_line: (f64, f64),
    /// log10 ⟨f⟩ for the FWHM, with its error (dex).
    pub fwhm: (f64, f64),
}

impl Factors {
    /// log10 ⟨f⟩ and its error for a width measure.
    pub fn of(&self, width: WidthDefinition) -> (f64, f64) {
        match width {
            WidthDefinition::SigmaLine => self.sigma_line,
            WidthDefinition::Fwhm => self.fwhm,
        }
    }
}

/// One adoption of a mean virial factor.
#[derive(Debug, Clone, PartialEq, sqlx::FromRow)]
pub struct AdoptedFactor {
    /// Key.
    pub virial_factor_id: i64,
    /// Width measure word.
    pub width_definition: String,
    /// log10 ⟨f⟩.
    pub log_f: f64,
    /// Its error, dex.
    pub log_f_err_dex: f64,
    /// First catalog version it is adopted at.
    pub from_version: i64,
    /// Where it comes from.
    pub source: String,
    /// Who adopted it (None for the values the catalog starts with).
    pub username: Option<String>,
    /// When.
    pub created_at: String,
}

/// `virial_factor` rows in force at version `?1`, one per width measure: SQL text for
/// `concat!` (a `with` clause of the relation rows' query, and [`factors_at`]).
macro_rules! factors_at_sql {
    () => {
        "select v.width_definition, v.log_f, v.log_f_err_dex
           from virial_factor v
          where v.from_version = (select max(w.from_version) from virial_factor w
                                   where w.width_definition = v.width_definition
                                     and w.from_version <= ?1)"
    };
}
pub(crate) use factors_at_sql;

/// The SQL of `factors_at_sql!`.
pub const FACTORS_AT_SQL: &str = factors_at_sql!();

/// The factors in force at catalog version `version`.
///
/// # Errors
/// When the database cannot be read, or a width measure has no factor (the migration gives
/// both one at version 0).
pub async fn factors_at(db: impl SqliteExecutor<'_>, version: i64) -> sqlx::Result<Factors> {
    let rows: Vec<(String, f64, f64)> = sqlx::query_as(FACTORS_AT_SQL)
        .bind(version)
        .fetch_all(db)
        .await?;
    let find = |w: WidthDefinition| {
        rows.iter()
            .find(|r| r.0 == w.as_str())
            .map(|r| (r.1, r.2))
            .ok_or_else(|| sqlx::Error::RowNotFound)
    };
    Ok(Factors {
        sigma_line: find(WidthDefinition::SigmaLine)?,
        fwhm: find(WidthDefinition::Fwhm)?,
    })
}

/// Every adoption, newest first.
///
/// # Errors
/// When the database cannot be read.
pub async fn adoptions(pool: &SqlitePool) -> sqlx::Result<Vec<AdoptedFactor>> {
    sqlx::query_as(
        "select v.virial_factor_id, v.width_definition, v.log_f, v.log_f_err_dex, v.from_version,
                v.source, a.username, v.created_at
           from virial_factor v left join account a on a.account_id = v.account_id
       order by v.from_version desc, v.virial_factor_id desc",
    )
    .fetch_all(pool)
    .await
}

/// Adopts log ⟨f⟩ for a width measure: a new catalog version from which every virial mass of
/// that measure (with a known assumed factor) is rescaled, with an audit event. Returns the new
/// version.
///
/// # Errors
/// A value outside the schema's range, or a database failure; nothing is written then.
pub async fn adopt(
    pool: &SqlitePool,
    account_id: Option<i64>,
    width: WidthDefinition,
    log_f: f64,
    log_f_err_dex: f64,
    source: &str,
) -> sqlx::Result<i64> {
    let mut tx = begin_write(pool).await?;
    let version = history::bump_version(&mut tx).await?;
    sqlx::query(
        "insert into virial_factor (width_definition, log_f, log_f_err_dex, from_version, source,
                                    account_id)
         values (?, ?, ?, ?, ?, ?)",
    )
    .bind(width.as_str())
    .bind(log_f)
    .bind(log_f_err_dex)
    .bind(version)
    .bind(source)
    .bind(account_id)
    .execute(&mut *tx)
    .await?;
    history::record(
        &mut tx,
        &NewEvent {
            account_id,
            action: "virial_factor_adopted",
            entity: "virial_factor",
            entity_id: None,
            summary: format!(
                "adopted log <f> = {log_f:.3} ± {log_f_err_dex:.3} for the {}: {}",
                width.label(),
                source.chars().take(500).collect::<String>()
            ),
        },
    )
    .await?;
    tx.commit().await?;
    Ok(version)
}

#[cfg(test)]
mod tests {
    use super::*;

    fn read(
        cells: &[(&'static str, &str)],
        method: MassMethod,
        value_given: bool,
    ) -> Result<Option<VirialMass>, RowError> {
        let field = |column: &'static str| Field {
            file: "test",
            line: 2,
            column,
            text: cells.iter().find(|c| c.0 == column).map_or("", |c| c.1),
        };
        virial_from_fields(&field, Some(method), value_given)
    }

    #[test]
    fn a_lag_and_a_width_give_the_virial_product_with_its_errors() {
        // VP = c τ Δv² / G: τ = 10 d, σ_line = 2000 km/s → 7.80698e6 M☉ (docs/methods.md §4.1,
        // computed from the IAU GM☉ and c).
        let m = read(
            &[
                ("lag_days", "10"),
                ("lag_err_days", "1"),
                ("width_km_s", "2000"),
                ("width_err_km_s", "100"),
            ],
            MassMethod::Reverberation,
            false,
        )
        .unwrap()
        .unwrap();
        let c = m.computed.unwrap();
        assert!(
            (10f64.powf(c.log_value) / 7.80698e6 - 1.0).abs() < 1e-5,
            "{c:?}"
        );
        // dex errors: hypot(1/10, 2·100/2000)/ln 10 = 0.0614 (computed).
        let expected = 0.1f64.hypot(0.1) / std::f64::consts::LN_10;
        assert!((c.err_minus_dex - expected).abs() < 1e-12);
        assert_eq!(m.entry.assumed_log_f, Some(0.0));
        assert_eq!(m.entry.width_definition, WidthDefinition::SigmaLine);
        assert_eq!(m.entry.width_spectrum, WidthSpectrum::Rms);
    }

    #[test]
    fn asymmetric_lag_errors_are_read_upper_first() {
        let m = read(
            &[
                ("lag_days", "20"),
                ("lag_err_days", "+3/-2"),
                ("width_km_s", "1500"),
            ],
            MassMethod::Reverberation,
            false,
        )
        .unwrap()
        .unwrap();
        assert_eq!(m.entry.lag_days, Some((20.0, 2.0, 3.0)));
        let c = m.computed.unwrap();
        assert!(c.err_plus_dex > c.err_minus_dex);
    }

    #[test]
    fn a_typed_mass_keeps_its_sources_factor_and_a_computed_one_refuses_one() {
        let m = read(&[("virial_factor", "5.5")], MassMethod::Reverberation, true)
            .unwrap()
            .unwrap();
        assert!((m.entry.assumed_log_f.unwrap() - 5.5f64.log10()).abs() < 1e-15);
        assert!(m.computed.is_none());
        let unknown = read(&[], MassMethod::Reverberation, true).unwrap().unwrap();
        assert_eq!(unknown.entry.assumed_log_f, None);
        let e = read(
            &[
                ("lag_days", "10"),
                ("width_km_s", "2000"),
                ("virial_factor", "4"),
            ],
            MassMethod::Reverberation,
            false,
        )
        .unwrap_err();
        assert_eq!(e.column, "virial_factor");
        let e = read(&[("width_km_s", "2000")], MassMethod::Reverberation, false).unwrap_err();
        assert_eq!(e.column, "lag_days");
        assert!(e.message.contains("lag"), "{e}");
    }

    #[test]
    fn single_epoch_masses_carry_their_calibrations_scatter_as_a_floor() {
        // Vestergaard & Peterson 2006 (from memory; docs/methods.md §4.2): FWHM 4000 km/s at
        // 10⁴⁴ erg/s → log M = 8.114 (computed), error at least 0.43 dex.
        let m = read(
            &[
                ("width_km_s", "4000"),
                ("log_l5100_erg_s", "44"),
                ("calibration", "vp06"),
            ],
            MassMethod::SingleEpoch,
            false,
        )
        .unwrap()
        .unwrap();
        let c = m.computed.unwrap();
        assert!((c.log_value - 8.114_123).abs() < 1e-5, "{c:?}");
        assert!((c.err_dex_for_test() - 0.43).abs() < 1e-12);
        assert_eq!(m.entry.assumed_log_f, None);
        // Through Bentz et al. 2013 at 10⁴⁴ erg/s: τ = 33.65 d (docs/methods.md §4.2, computed);
        // FWHM 4000 km/s → VP = c τ Δv²/G.
        let r = read(
            &[
                ("width_km_s", "4000"),
                ("log_l5100_erg_s", "44"),
                ("calibration", "r_l_bentz13"),
            ],
            MassMethod::SingleEpoch,
            false,
        )
        .unwrap()
        .unwrap();
        let vp = agn::virial_product_msun(10f64.powf(1.527), 4000.0).unwrap();
        assert!((r.computed.unwrap().log_value - vp.log10()).abs() < 1e-12);
        assert_eq!(r.entry.assumed_log_f, Some(0.0));
        let e = read(&[("width_km_s", "4000")], MassMethod::SingleEpoch, false).unwrap_err();
        assert_eq!(e.column, "calibration");
    }

    #[test]
    fn other_methods_take_no_virial_cells() {
        let field = |column: &'static str| Field {
            file: "test",
            line: 2,
            column,
            text: if column == "lag_days" { "10" } else { "" },
        };
        let e = virial_from_fields(&field, Some(MassMethod::StellarDynamics), true).unwrap_err();
        assert_eq!(e.column, "lag_days");
        let empty = |column: &'static str| Field {
            file: "test",
            line: 2,
            column,
            text: "",
        };
        assert!(virial_from_fields(&empty, None, true).unwrap().is_none());
    }

    /// Stores one galaxy per mass (cells as a form or file carries them), all adopted, in one
    /// new catalog version; returns the galaxies' keys in order.
    async fn store(pool: &SqlitePool, masses: &[&[(&'static str, &str)]]) -> Vec<i64> {
        use crate::catalog::galaxies::{self, RowKey, SubmissionSource};
        use crate::catalog::model::SubmissionState;
        let mut tx = begin_write(pool).await.unwrap();
        history::bump_version(&mut tx).await.unwrap();
        let submission = galaxies::insert_submission(
            &mut tx,
            None,
            SubmissionSource::Import,
            SubmissionState::Accepted,
            "",
            None,
        )
        .await
        .unwrap();
        let mut ids = Vec::new();
        for (n, cells) in masses.iter().enumerate() {
            let name = format!("Test nucleus {n}");
            let cell = |c: &'static str| -> &str {
                match c {
                    "name" => name.as_str(),
                    "morphology" => "spiral",
                    "bulge_kind" | "centre_kind" => "unknown",
                    "distance_mpc" => "50",
                    "distance_err_mpc" => "5",
                    "distance_method" => "hubble_flow",
                    "activity" => "seyfert1",
                    "quantity" => "bh_mass",
                    _ => cells.iter().find(|x| x.0 == c).map_or("", |x| x.1),
                }
            };
            let g = super::super::intake::galaxy_from_cells("test", 1, &cell).unwrap();
            let m = super::super::intake::measurement_from_cells("test", 1, &cell).unwrap();
            let gid = galaxies::insert_galaxy(&mut tx, &g)
                .await
                .unwrap()
                .galaxy_id;
            let row = RowKey {
                key: format!("t-{n}"),
                sha256: None,
            };
            let mid = galaxies::insert_measurement(&mut tx, gid, submission, &m, &row)
                .await
                .unwrap();
            galaxies::adopt(&mut tx, mid).await.unwrap();
            ids.push(gid);
        }
        tx.commit().await.unwrap();
        ids
    }

    #[tokio::test]
    async fn adopting_a_factor_moves_the_virial_masses_of_its_width_measure_only_from_its_version_on()
     {
        let dir = tempfile::tempdir().unwrap();
        let pool = crate::catalog::connect(&dir.path().join("t.sqlite"))
            .await
            .unwrap();
        let ids = store(
            &pool,
            &[
                &[
                    ("method", "reverberation"),
                    ("lag_days", "10"),
                    ("width_km_s", "2000"),
                ],
                &[
                    ("method", "reverberation"),
                    ("value", "1e8 ± 0.3e8"),
                    ("virial_factor", "5.5"),
                ],
                &[("method", "reverberation"), ("value", "2e7 ± 0.5e7")],
                &[
                    ("method", "single_epoch"),
                    ("width_km_s", "4000"),
                    ("log_l5100_erg_s", "44"),
                    ("calibration", "vp06"),
                ],
                &[
                    ("method", "single_epoch"),
                    ("width_km_s", "4000"),
                    ("log_l5100_erg_s", "44"),
                    ("calibration", "r_l_bentz13"),
                ],
                &[
                    ("method", "stellar_dynamics"),
                    ("value", "3e8 ± 1e8"),
                    ("source_distance_mpc", "50"),
                ],
            ],
        )
        .await;
        let masses = |rows: Vec<crate::catalog::relation_rows::RelationRow>| -> Vec<f64> {
            ids.iter()
                .map(|id| {
                    rows.iter()
                        .find(|r| r.galaxy_id == *id)
                        .unwrap()
                        .log_mbh
                        .unwrap()
                })
                .collect()
        };
        let v1 = history::current_version(&pool).await.unwrap();
        let first = masses(
            crate::catalog::relation_rows::relation_rows_at(&pool, v1)
                .await
                .unwrap(),
        );
        // The starting factors of migration 9: σ_line 0.64, FWHM 0.05.
        let start = factors_at(&pool, v1).await.unwrap();
        assert_eq!(start.sigma_line, (0.64, 0.11));
        assert_eq!(start.fwhm, (0.05, 0.12));
        let vp = agn::virial_product_msun(10.0, 2000.0).unwrap().log10();
        assert!((first[0] - (vp + 0.64)).abs() < 1e-12, "{first:?}");
        assert!((first[1] - (8.0 - 5.5f64.log10() + 0.64)).abs() < 1e-12);
        assert!(
            (first[2] - 2e7f64.log10()).abs() < 1e-12,
            "no recorded factor: as published"
        );
        assert!(
            (first[3] - 8.114_123).abs() < 1e-5,
            "vp06 keeps its own factor"
        );
        let vp_rl = agn::virial_product_msun(10f64.powf(1.527), 4000.0)
            .unwrap()
            .log10();
        assert!((first[4] - (vp_rl + 0.05)).abs() < 1e-12);
        assert!((first[5] - 3e8f64.log10()).abs() < 1e-12);

        let v2 = adopt(
            &pool,
            None,
            WidthDefinition::SigmaLine,
            0.75,
            0.1,
            "test calibration",
        )
        .await
        .unwrap();
        assert_eq!(v2, v1 + 1);
        let second = masses(
            crate::catalog::relation_rows::relation_rows_at(&pool, v2)
                .await
                .unwrap(),
        );
        for (i, (a, b)) in first.iter().zip(&second).enumerate() {
            let moved = if i < 2 { 0.75 - 0.64 } else { 0.0 };
            assert!((b - a - moved).abs() < 1e-12, "mass {i}: {a} → {b}");
        }
        let v3 = adopt(
            &pool,
            None,
            WidthDefinition::Fwhm,
            0.20,
            0.1,
            "test calibration",
        )
        .await
        .unwrap();
        let third = masses(
            crate::catalog::relation_rows::relation_rows_at(&pool, v3)
                .await
                .unwrap(),
        );
        for (i, (a, b)) in second.iter().zip(&third).enumerate() {
            let moved = if i == 4 { 0.20 - 0.05 } else { 0.0 };
            assert!((b - a - moved).abs() < 1e-12, "mass {i}: {a} → {b}");
        }
        // Past versions read as they were.
        let again = masses(
            crate::catalog::relation_rows::relation_rows_at(&pool, v1)
                .await
                .unwrap(),
        );
        assert_eq!(
            again.iter().map(|x| x.to_bits()).collect::<Vec<_>>(),
            first.iter().map(|x| x.to_bits()).collect::<Vec<_>>()
        );
        let log = adoptions(&pool).await.unwrap();
        assert_eq!(log.len(), 4);
        assert_eq!(log[0].from_version, v3);
        // The factor table keeps its history.
        assert!(
            sqlx::query("delete from virial_factor")
                .execute(&pool)
                .await
                .is_err()
        );
        assert!(
            sqlx::query("update virial_factor set log_f = 0")
                .execute(&pool)
                .await
                .is_err()
        );
    }

    impl Computed {
        fn err_dex_for_test(&self) -> f64 {
            0.5 * (self.err_minus_dex + self.err_plus_dex)
        }
    }
}
