//! A black-hole mass from a rotating gas or water-maser disk (docs/methods.md §4.6, §4.8):
//! the velocity table read, the settings checked, both models fitted by `fit::disk`, and
//! everything the three doors show in one [`KinematicsResult`]. Nothing is stored.
//!
//! The table is CSV whose header names the position unit: `offset_arcsec`, `offset_mas` or
//! `offset_pc` (signed, along the major axis), or a plain `offset` with the unit chosen
//! beside it; then `v_km_s` and `v_err_km_s` (line-of-sight velocity and its 1σ error), and
//! optionally `acceleration_km_s_yr` with `acceleration_err_km_s_yr`. A row with an
//! acceleration is a maser's systemic feature: it lies in front of the black hole, not at
//! its projected radius, so it is kept out of the rotation curve and used only for the
//! geometric distance. Every faulty row is named at once ([`KinematicsFault::Table`]).

use serde::Serialize;

use crate::astro::influence::{angular_size_arcsec, influence_radius_pc, projected_radius_pc};
use crate::catalog::intake::RowError;
use crate::error::{AppError, FieldError};
use crate::fit::FitError;
use crate::fit::disk::{
    self, ClusterSpec, DiskFit, DiskInput, DiskPoint, Extended, Inclination, LightProfile,
    MassToLight,
};

/// The file name used in row reports.
const FILE: &str = "table";

/// The most rows a table may have.
pub const MAX_ROWS: usize = 5_000;

/// The seed of the posterior sampler: a table gives the same interval on every door and
/// every visit.
pub const POSTERIOR_SEED: u64 = 20_261_203;

/// How positions along the major axis are given.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, utoipa::ToSchema)]
#[serde(rename_all = "snake_case")]
pub enum OffsetUnit {
    /// Arcseconds.
    Arcsec,
    /// Milliarcseconds.
    Mas,
    /// Parsecs at the distance given.
    Pc,
}

impl OffsetUnit {
    /// Every unit, in the order a form offers them.
    pub const ALL: [OffsetUnit; 3] = [OffsetUnit::Arcsec, OffsetUnit::Mas, OffsetUnit::Pc];

    /// The word a form, the API and the command line use.
    pub fn as_str(self) -> &'static str {
        match self {
            OffsetUnit::Arcsec => "arcsec",
            OffsetUnit::Mas => "mas",
            OffsetUnit::Pc => "pc",
        }
    }

    /// The unit for people.
    pub fn label(self) -> &'static str {
        match self {
            OffsetUnit::Arcsec => "arcsec",
            OffsetUnit::Mas => "milliarcsec",
            OffsetUnit::Pc => "pc",
        }
    }

    /// The unit named by `word` (`arcsec`, `mas`, `pc`).
    ///
    /// # Errors
    /// The sentence naming the accepted words.
    pub fn parse(word: &str) -> Result<Self, String> {
        match word.trim() {
            "arcsec" => Ok(OffsetUnit::Arcsec),
            "mas" => Ok(OffsetUnit::Mas),
            "pc" => Ok(OffsetUnit::Pc),
            other => Err(format!(
                "“{}” is not a position unit; choose arcsec, mas or pc.",
                other.chars().take(40).collect::<String>()
            )),
        }
    }

    /// Arcseconds per unit of angle (`None` for pc).
    fn arcsec_per_unit(self) -> Option<f64> {
        match self {
            OffsetUnit::Arcsec => Some(1.0),
            OffsetUnit::Mas => Some(1.0e-3),
            OffsetUnit::Pc => None,
        }
    }
}

/// One row of the table, as given.
#[derive(Debug, Clone, PartialEq)]
pub struct TableRow {
    /// Line in the file (the header is line 1); the index + 1 for points sent as JSON.
    pub line: u64,
    /// Signed position along the major axis, in the table's unit.
    pub offset: f64,
    /// Line-of-sight velocity, km/s.
    pub v_km_s: f64,
    /// Its 1σ error, km/s.
    pub v_err_km_s: f64,
    /// A systemic feature's line-of-sight acceleration and its 1σ error, km/s/yr.
    pub acceleration_km_s_yr: Option<(f64, f64)>,
}

/// A table read: its rows and the unit of their positions.
#[derive(Debug, Clone, PartialEq)]
pub struct Table {
    /// The rows, in the file's order.
    pub rows: Vec<TableRow>,
    /// The unit of `offset`.
    pub unit: OffsetUnit,
}

/// A stellar light profile as typed.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum StarsSpec {
    /// Plummer: total luminosity (L☉) and scale radius (pc).
    Plummer {
        /// Total luminosity, L☉.
        l_total_lsun: f64,
        /// Scale radius a, pc.
        a_pc: f64,
    },
    /// Power law L(<r) = L_ref (r / r_ref)^slope.
    PowerLaw {
        /// Enclosed luminosity at the reference radius, L☉.
        l_ref_lsun: f64,
        /// Reference radius, pc.
        r_ref_pc: f64,
        /// Logarithmic slope of the enclosed light.
        slope: f64,
    },
}

/// What the fit is asked, checked.
#[derive(Debug, Clone, PartialEq)]
pub struct KinematicsSettings {
    /// The unit of a plain `offset` column (ignored when the header names its unit).
    pub offset_unit: Option<OffsetUnit>,
    /// Distance, Mpc, and its 1σ error.
    pub distance_mpc: f64,
    /// 1σ error of the distance, Mpc.
    pub distance_err_mpc: f64,
    /// Inclination and its 1σ error, degrees; `None` when unknown (the mass is M sin² i).
    pub inclination_deg: Option<(f64, f64)>,
    /// The stellar light, when an extended mass is fitted.
    pub stars: Option<StarsSpec>,
    /// The mass-to-light ratio Υ (M☉/L☉), `None` to fit it.
    pub upsilon: Option<f64>,
    /// A dark cluster's radius r_c (pc), when one is fitted.
    pub cluster_r_c_pc: Option<f64>,
    /// The host's velocity dispersion σ, km/s (for the sphere of influence).
    pub sigma_km_s: Option<f64>,
    /// The data's resolution, arcsec.
    pub resolution_arcsec: Option<f64>,
    /// The sphere-of-influence threshold θ_infl / resolution (docs/methods.md §3.1).
    pub soi_threshold: f64,
}

/// The settings' names, as every door spells them (form fields, JSON keys, and the command
/// line's options with dashes).
pub const SETTING_NAMES: [&str; 15] = [
    "offset_unit",
    "distance_mpc",
    "distance_err_mpc",
    "inclination_deg",
    "inclination_err_deg",
    "plummer_l_lsun",
    "plummer_a_pc",
    "power_l_ref_lsun",
    "power_r_ref_pc",
    "power_slope",
    "upsilon",
    "cluster_r_c_pc",
    "sigma_km_s",
    "resolution_arcsec",
    "soi_threshold",
];

/// Why nothing could be fitted.
#[derive(Debug, Clone, PartialEq)]
pub enum KinematicsFault {
    /// Faulty settings, each named.
    Settings(Vec<FieldError>),
    /// Faulty rows, every one of them (and the header's faults, line 1).
    Table(Vec<RowError>),
    /// The table and settings were read but the fit refused them (one sentence).
    Fit(String),
}

impl KinematicsFault {
    /// Every fault as field errors: settings by name, rows as `rows[LINE].COLUMN`.
    pub fn fields(&self) -> Vec<FieldError> {
        match self {
            KinematicsFault::Settings(fields) => fields.clone(),
            KinematicsFault::Table(rows) => {
                let (listed, _) = crate::catalog::csv_io::reported_faults(rows);
                listed
                    .iter()
                    .map(|r| {
                        FieldError::new(
                            format!("rows[{}].{}", r.line, r.column),
                            format!("Row {}, {}: {}", r.line, r.column, r.message),
                        )
                    })
                    .collect()
            }
            KinematicsFault::Fit(why) => vec![FieldError::new("table", why.clone())],
        }
    }

    /// One sentence summing the fault up.
    pub fn summary(&self) -> String {
        match self {
            KinematicsFault::Settings(f) => format!(
                "{} setting(s) need correcting; nothing was fitted.",
                f.len()
            ),
            KinematicsFault::Table(rows) => format!(
                "{}; correct {} and fit again.",
                crate::catalog::csv_io::reported_faults(rows)
                    .1
                    .replace("nothing was imported", "nothing was fitted")
                    .trim_end_matches('.'),
                if rows.len() == 1 { "it" } else { "them" }
            ),
            KinematicsFault::Fit(why) => why.clone(),
        }
    }
}

impl From<KinematicsFault> for AppError {
    fn from(fault: KinematicsFault) -> Self {
        AppError::Invalid {
            title: Some("The disk cannot be fitted"),
            message: Some(fault.summary()),
            fields: fault.fields(),
        }
    }
}

/// A number typed in a setting or a cell: plain decimal or exponent notation, finite.
fn number(text: &str) -> Result<f64, String> {
    let t = text.trim();
    if t.contains(',') {
        return Err(format!(
            "“{}” contains a comma; type the number with a point for decimals and no separators, such as 16.4.",
            t.chars().take(40).collect::<String>()
        ));
    }
    match t.parse::<f64>() {
        Ok(v) if v.is_finite() => Ok(v),
        _ => Err(format!(
            "“{}” is not a number; type a number such as 16.4 or 2.5e9.",
            t.chars().take(40).collect::<String>()
        )),
    }
}

impl KinematicsSettings {
    /// Read the settings from named texts (a form, the command line, JSON made text). Empty
    /// texts are left out; `inclination_deg` may be `unknown`.
    ///
    /// # Errors
    /// Every setting at fault, each named, one sentence saying what to type.
    pub fn from_pairs(
        pairs: &[(String, String)],
        default_threshold: f64,
    ) -> Result<Self, Vec<FieldError>> {
        let get = |name: &str| {
            pairs
                .iter()
                .rev()
                .find(|(k, _)| k == name)
                .map(|(_, v)| v.trim())
                .filter(|v| !v.is_empty())
        };
        let mut faults = Vec::new();
        let mut num =
            |name: &'static str, what: &str, check: fn(f64) -> bool, range: &str| -> Option<f64> {
                let text = get(name)?;
                match number(text) {
                    Ok(v) if check(v) => Some(v),
                    Ok(_) => {
                        faults.push(FieldError::new(
                            name,
                            format!("The {what} {text} is out of range; type {range}."),
                        ));
                        None
                    }
                    Err(e) => {
                        faults.push(FieldError::new(name, format!("The {what}: {e}")));
                        None
                    }
                }
            };
        let positive = |v: f64| v > 0.0;
        let distance = num(
            "distance_mpc",
            "distance",
            |v| v > 0.0 && v <= 20_000.0,
            "a distance in Mpc above 0 and at most 20000, such as 16.4",
        );
        let distance_err = num(
            "distance_err_mpc",
            "distance error",
            |v| v > 0.0 && v <= 20_000.0,
            "a 1σ error in Mpc above 0, such as 0.8",
        );
        let unknown_inclination = get("inclination_deg").is_some_and(|t| t == "unknown");
        let inclination = if unknown_inclination {
            None
        } else {
            num(
                "inclination_deg",
                "inclination",
                |v| v > 0.0 && v < 180.0,
                "an angle in degrees between 0 and 180 (90 is edge-on), such as 80, or “unknown”",
            )
        };
        let inclination_err = num(
            "inclination_err_deg",
            "inclination error",
            |v| (0.0..=45.0).contains(&v),
            "a 1σ error in degrees from 0 to 45, such as 3",
        );
        let plummer_l = num(
            "plummer_l_lsun",
            "Plummer luminosity",
            positive,
            "the total luminosity in L☉ above 0, such as 2e9",
        );
        let plummer_a = num(
            "plummer_a_pc",
            "Plummer scale radius",
            positive,
            "the scale radius in pc above 0, such as 40",
        );
        let power_l = num(
            "power_l_ref_lsun",
            "power-law luminosity",
            positive,
            "the enclosed luminosity in L☉ at the reference radius, above 0",
        );
        let power_r = num(
            "power_r_ref_pc",
            "power-law reference radius",
            positive,
            "the reference radius in pc above 0",
        );
        let power_slope = num(
            "power_slope",
            "power-law slope",
            |v| v > 0.0 && v <= 3.0,
            "the slope of the enclosed light, above 0 and at most 3 (3 is a constant density)",
        );
        let upsilon = match get("upsilon") {
            Some("free") => None,
            _ => num(
                "upsilon",
                "mass-to-light ratio Υ",
                |v| v > 0.0 && v <= 100.0,
                "Υ in M☉/L☉ above 0 and at most 100, such as 3, or “free” to fit it",
            ),
        };
        let cluster = num(
            "cluster_r_c_pc",
            "dark cluster's radius",
            positive,
            "r_c in pc above 0, such as 1",
        );
        let sigma = num(
            "sigma_km_s",
            "velocity dispersion σ",
            |v| (20.0..=600.0).contains(&v),
            "σ in km/s from 20 to 600, such as 180",
        );
        let resolution = num(
            "resolution_arcsec",
            "resolution",
            |v| v > 0.0 && v <= 100.0,
            "the resolution in arcsec above 0, such as 0.05",
        );
        let threshold = num(
            "soi_threshold",
            "sphere-of-influence threshold",
            |v| super::planning::check_threshold(v).is_ok(),
            "a number above 0 and at most 100 (the default is 1)",
        )
        .unwrap_or(default_threshold);
        let offset_unit = match get("offset_unit") {
            None => None,
            Some(word) => match OffsetUnit::parse(word) {
                Ok(u) => Some(u),
                Err(e) => {
                    faults.push(FieldError::new("offset_unit", e));
                    None
                }
            },
        };
        if get("distance_mpc").is_none() {
            faults.push(FieldError::new(
                "distance_mpc",
                "Give the distance in Mpc, such as 16.4: positions in angle become parsecs with it, and the mass scales with it.",
            ));
        }
        if get("distance_err_mpc").is_none() {
            faults.push(FieldError::new(
                "distance_err_mpc",
                "Give the distance's 1σ error in Mpc, such as 0.8: it is part of the mass's error.",
            ));
        }
        if get("inclination_deg").is_none() {
            faults.push(FieldError::new(
                "inclination_deg",
                "Give the disk's inclination in degrees (90 is edge-on), such as 80, or “unknown”: the mass is then M sin² i.",
            ));
        } else if inclination.is_some() && get("inclination_err_deg").is_none() {
            faults.push(FieldError::new(
                "inclination_err_deg",
                "Give the inclination's 1σ error in degrees, such as 3 (0 if it is exact).",
            ));
        }
        let stars = match (plummer_l, plummer_a, power_l, power_r, power_slope) {
            (Some(l), Some(a), None, None, None) => Some(StarsSpec::Plummer {
                l_total_lsun: l,
                a_pc: a,
            }),
            (None, None, Some(l), Some(r), Some(s)) => Some(StarsSpec::PowerLaw {
                l_ref_lsun: l,
                r_ref_pc: r,
                slope: s,
            }),
            (None, None, None, None, None) => None,
            _ => {
                let given = |n: &str| get(n).is_some();
                if ["plummer_l_lsun", "plummer_a_pc"].iter().any(|n| given(n))
                    && ["power_l_ref_lsun", "power_r_ref_pc", "power_slope"]
                        .iter()
                        .any(|n| given(n))
                {
                    faults.push(FieldError::new(
                        "plummer_l_lsun",
                        "Give either a Plummer profile or a power law for the stars, not both.",
                    ));
                } else if given("plummer_l_lsun") != given("plummer_a_pc") {
                    faults.push(FieldError::new(
                        if given("plummer_l_lsun") {
                            "plummer_a_pc"
                        } else {
                            "plummer_l_lsun"
                        },
                        "A Plummer profile needs both its total luminosity (L☉) and its scale radius (pc).",
                    ));
                } else {
                    for n in ["power_l_ref_lsun", "power_r_ref_pc", "power_slope"] {
                        if !given(n) {
                            faults.push(FieldError::new(
                                n,
                                "A power law needs its luminosity at the reference radius, the reference radius and the slope.",
                            ));
                        }
                    }
                }
                None
            }
        };
        if !faults.is_empty() {
            return Err(faults);
        }
        let (Some(distance_mpc), Some(distance_err_mpc)) = (distance, distance_err) else {
            return Err(vec![FieldError::new(
                "distance_mpc",
                "Give the distance and its error in Mpc.",
            )]);
        };
        Ok(KinematicsSettings {
            offset_unit,
            distance_mpc,
            distance_err_mpc,
            inclination_deg: inclination.map(|i| (i, inclination_err.unwrap_or(0.0))),
            stars,
            upsilon,
            cluster_r_c_pc: cluster,
            sigma_km_s: sigma,
            resolution_arcsec: resolution,
            soi_threshold: threshold,
        })
    }

    /// The extended mass asked for, if any.
    fn extended(&self) -> Option<Extended> {
        if self.stars.is_none() && self.cluster_r_c_pc.is_none() {
            return None;
        }
        let ml = self.upsilon.map_or(MassToLight::Free, MassToLight::Fixed);
        Some(Extended {
            stars: self.stars.map(|s| {
                let profile = match s {
                    StarsSpec::Plummer { l_total_lsun, a_pc } => {
                        LightProfile::Plummer { l_total_lsun, a_pc }
                    }
                    StarsSpec::PowerLaw {
                        l_ref_lsun,
                        r_ref_pc,
                        slope,
                    } => LightProfile::PowerLaw {
                        l_ref_lsun,
                        r_ref_pc,
                        slope,
                    },
                };
                (profile, ml)
            }),
            cluster: self.cluster_r_c_pc.map(|r_c_pc| ClusterSpec { r_c_pc }),
        })
    }
}

/// The columns a table may have besides its position column.
const VALUE_COLUMNS: [&str; 4] = [
    "v_km_s",
    "v_err_km_s",
    "acceleration_km_s_yr",
    "acceleration_err_km_s_yr",
];

/// The position columns and the unit each declares (`None`: chosen beside the table).
const OFFSET_COLUMNS: [(&str, Option<OffsetUnit>); 4] = [
    ("offset_arcsec", Some(OffsetUnit::Arcsec)),
    ("offset_mas", Some(OffsetUnit::Mas)),
    ("offset_pc", Some(OffsetUnit::Pc)),
    ("offset", None),
];

/// Read a velocity table (CSV text), with `chosen` the unit of a plain `offset` column.
///
/// # Errors
/// Every faulty row, each with its line, column, what is wrong and what to type instead; a
/// header at fault stops the reading (line 1).
pub fn read_table(text: &str, chosen: Option<OffsetUnit>) -> Result<Table, Vec<RowError>> {
    let header_fault = |column: &'static str, message: String| RowError {
        file: FILE,
        line: 1,
        column,
        message,
    };
    let text = text.trim_start_matches('\u{feff}');
    if text.trim().is_empty() {
        return Err(vec![header_fault(
            "(header)",
            "the table is empty; paste or upload a CSV whose first line is offset_arcsec,v_km_s,v_err_km_s (or offset_mas, offset_pc)".to_owned(),
        )]);
    }
    let mut reader = csv::ReaderBuilder::new()
        .trim(csv::Trim::All)
        .flexible(true)
        .from_reader(text.as_bytes());
    let headers = match reader.headers() {
        Ok(h) => h.clone(),
        Err(e) => return Err(vec![header_fault("(header)", e.to_string())]),
    };
    let names: Vec<String> = headers.iter().map(str::to_ascii_lowercase).collect();
    let mut faults = Vec::new();
    let offsets: Vec<(usize, &'static str, Option<OffsetUnit>)> = OFFSET_COLUMNS
        .iter()
        .filter_map(|(c, u)| names.iter().position(|n| n == c).map(|i| (i, *c, *u)))
        .collect();
    let unknown: Vec<&str> = names
        .iter()
        .filter(|n| {
            !VALUE_COLUMNS.contains(&n.as_str()) && !OFFSET_COLUMNS.iter().any(|(c, _)| c == n)
        })
        .map(String::as_str)
        .collect();
    if !unknown.is_empty() {
        faults.push(header_fault(
            "(header)",
            format!(
                "the column(s) {} are not known; the columns are offset_arcsec, offset_mas, offset_pc or offset, v_km_s, v_err_km_s, acceleration_km_s_yr, acceleration_err_km_s_yr",
                unknown
                    .iter()
                    .map(|u| format!("“{}”", u.chars().take(40).collect::<String>()))
                    .collect::<Vec<_>>()
                    .join(", ")
            ),
        ));
    }
    let (offset_at, offset_column, unit) = match offsets.as_slice() {
        [] => {
            faults.push(header_fault(
                "offset",
                "the table has no position column; name it offset_arcsec, offset_mas or offset_pc (signed, along the major axis)".to_owned(),
            ));
            (0, "offset", OffsetUnit::Arcsec)
        }
        [(i, c, Some(u))] => (*i, *c, *u),
        [(i, c, None)] => match chosen {
            Some(u) => (*i, *c, u),
            None => {
                faults.push(header_fault(
                    "offset",
                    "the column “offset” does not say its unit; name it offset_arcsec, offset_mas or offset_pc, or choose the unit".to_owned(),
                ));
                (*i, *c, OffsetUnit::Arcsec)
            }
        },
        _ => {
            faults.push(header_fault(
                "offset",
                "the table has more than one position column; keep one of offset_arcsec, offset_mas, offset_pc and offset".to_owned(),
            ));
            (0, "offset", OffsetUnit::Arcsec)
        }
    };
    let at = |c: &str| names.iter().position(|n| n == c);
    for required in ["v_km_s", "v_err_km_s"] {
        if at(required).is_none() {
            faults.push(header_fault(
                if required == "v_km_s" {
                    "v_km_s"
                } else {
                    "v_err_km_s"
                },
                format!("the table has no column {required}; the header needs offset_…, v_km_s and v_err_km_s"),
            ));
        }
    }
    let acc_at = at("acceleration_km_s_yr");
    let acc_err_at = at("acceleration_err_km_s_yr");
    if acc_at.is_some() != acc_err_at.is_some() {
        faults.push(header_fault(
            "(header)",
            "give acceleration_km_s_yr and acceleration_err_km_s_yr together, or neither"
                .to_owned(),
        ));
    }
    if !faults.is_empty() {
        return Err(faults);
    }
    let (Some(v_at), Some(e_at)) = (at("v_km_s"), at("v_err_km_s")) else {
        return Err(faults);
    };
    let mut rows = Vec::new();
    let mut record = csv::StringRecord::new();
    let mut line: u64 = 1;
    loop {
        match reader.read_record(&mut record) {
            Ok(true) => {}
            Ok(false) => break,
            Err(e) => {
                faults.push(RowError {
                    file: FILE,
                    line: line + 1,
                    column: "(row)",
                    message: format!("the row cannot be read as CSV: {e}"),
                });
                break;
            }
        }
        line = record.position().map_or(line + 1, |p| p.line());
        if rows.len() + faults.len() >= MAX_ROWS {
            faults.push(RowError {
                file: FILE,
                line,
                column: "(row)",
                message: format!(
                    "the table has more than {MAX_ROWS} rows; send at most {MAX_ROWS}"
                ),
            });
            break;
        }
        let cell = |i: usize| record.get(i).unwrap_or("").trim();
        let mut row_faults = Vec::new();
        let mut read = |column: &'static str, i: usize, what: &str, check: fn(f64) -> bool| {
            let text = cell(i);
            if text.is_empty() {
                row_faults.push(RowError {
                    file: FILE,
                    line,
                    column,
                    message: format!("the cell is empty; type {what}"),
                });
                return None;
            }
            match number(text) {
                Ok(v) if check(v) => Some(v),
                Ok(_) => {
                    row_faults.push(RowError {
                        file: FILE,
                        line,
                        column,
                        message: format!("{text} is out of range; type {what}"),
                    });
                    None
                }
                Err(e) if text.contains(',') => {
                    row_faults.push(RowError {
                        file: FILE,
                        line,
                        column,
                        message: e.trim_end_matches('.').to_owned(),
                    });
                    None
                }
                Err(_) => {
                    row_faults.push(RowError {
                        file: FILE,
                        line,
                        column,
                        message: format!(
                            "“{}” is not a number; type {what}",
                            text.chars().take(40).collect::<String>()
                        ),
                    });
                    None
                }
            }
        };
        let offset = read(
            offset_column,
            offset_at,
            "the signed position along the major axis, such as -0.12",
            |v| v.abs() < 1.0e6,
        );
        let v = read(
            "v_km_s",
            v_at,
            "the line-of-sight velocity in km/s, such as 1450.3 (at most 100000 in size)",
            |v| v.abs() <= 1.0e5,
        );
        let err = read(
            "v_err_km_s",
            e_at,
            "the velocity's 1σ error in km/s, above 0, such as 4.5",
            |v| v > 0.0 && v <= 1.0e4,
        );
        let acceleration = match (acc_at, acc_err_at) {
            (Some(a), Some(ae)) if !cell(a).is_empty() || !cell(ae).is_empty() => {
                let acc = read(
                    "acceleration_km_s_yr",
                    a,
                    "the line-of-sight acceleration in km/s/yr, such as 9.3",
                    |v| v.abs() <= 1.0e3,
                );
                let acc_err = read(
                    "acceleration_err_km_s_yr",
                    ae,
                    "its 1σ error in km/s/yr, above 0, such as 0.3",
                    |v| v > 0.0 && v <= 1.0e3,
                );
                acc.zip(acc_err)
            }
            _ => None,
        };
        if row_faults.is_empty() {
            if let (Some(offset), Some(v_km_s), Some(v_err_km_s)) = (offset, v, err) {
                rows.push(TableRow {
                    line,
                    offset,
                    v_km_s,
                    v_err_km_s,
                    acceleration_km_s_yr: acceleration,
                });
            }
        } else {
            faults.extend(row_faults);
        }
    }
    if !faults.is_empty() {
        return Err(faults);
    }
    if rows.is_empty() {
        return Err(vec![header_fault(
            "(row)",
            "the table has a header but no rows; add one row per velocity measurement".to_owned(),
        )]);
    }
    Ok(Table { rows, unit })
}

/// One model's fit, as every door shows it.
#[derive(Debug, Clone, Serialize, utoipa::ToSchema)]
pub struct ModelFit {
    /// The model in words ("point mass", "point mass + stars", …).
    pub model: String,
    /// log10 M_BH (M☉); M sin² i when the inclination is unknown.
    pub log_mbh: f64,
    /// Its statistical 1σ error, dex.
    pub log_mbh_err_stat_dex: f64,
    /// The part from the inclination's error, dex (docs/methods.md §4.8).
    pub log_mbh_err_inclination_dex: f64,
    /// The part from the distance's error, dex (M ∝ D, §3.2).
    pub log_mbh_err_distance_dex: f64,
    /// All three in quadrature, dex.
    pub log_mbh_err_total_dex: f64,
    /// Systemic velocity and its 1σ error, km/s.
    pub v_sys_km_s: (f64, f64),
    /// The fitted centre along the major axis and its 1σ error, pc.
    pub centre_pc: (f64, f64),
    /// Intrinsic velocity scatter s and its 1σ error, km/s.
    pub scatter_km_s: (f64, f64),
    /// The mass-to-light ratio Υ (M☉/L☉) and its error, when stars are in the model (error 0
    /// when Υ was held).
    pub upsilon: Option<(f64, f64)>,
    /// Every fitted parameter: name, value, 1σ error.
    pub params: Vec<(String, f64, f64)>,
    /// ln L at its maximum.
    pub max_log_likelihood: f64,
    /// Free parameters.
    pub n_params: usize,
    /// AIC = 2k − 2 ln L.
    pub aic: f64,
    /// BIC = k ln n − 2 ln L.
    pub bic: f64,
    /// v − v_model of each rotation-curve point, km/s, in the table's order.
    pub residuals_km_s: Vec<f64>,
}

impl ModelFit {
    fn of(fit: &DiskFit) -> Self {
        ModelFit {
            model: fit.model.to_string(),
            log_mbh: fit.log_mbh,
            log_mbh_err_stat_dex: fit.log_mbh_err_stat,
            log_mbh_err_inclination_dex: fit.log_mbh_err_inclination,
            log_mbh_err_distance_dex: fit.log_mbh_err_distance,
            log_mbh_err_total_dex: fit.log_mbh_err_total,
            v_sys_km_s: fit.v_sys_km_s,
            centre_pc: fit.centre_pc,
            scatter_km_s: fit.scatter_km_s,
            upsilon: fit.upsilon,
            params: fit
                .params
                .iter()
                .map(|(n, v, e)| ((*n).to_string(), *v, *e))
                .collect(),
            max_log_likelihood: fit.max_log_likelihood,
            n_params: fit.n_params,
            aic: fit.aic,
            bic: fit.bic,
            residuals_km_s: fit.residuals.clone(),
        }
    }
}

/// Point mass against point mass + extended mass.
#[derive(Debug, Clone, Serialize, utoipa::ToSchema)]
pub struct Comparison {
    /// AIC(extended) − AIC(point mass): negative favours the extended mass.
    pub delta_aic: f64,
    /// BIC(extended) − BIC(point mass): negative favours the extended mass (the rule the
    /// preferred model follows).
    pub delta_bic: f64,
    /// The likelihood-ratio statistic 2 (ln L_ext − ln L_point).
    pub lrt_statistic: f64,
    /// Its degrees of freedom (the extra parameters).
    pub lrt_df: usize,
    /// Its p-value (χ² with `lrt_df` degrees of freedom; none when there is no extra
    /// parameter).
    pub lrt_p: Option<f64>,
    /// The model the comparison prefers.
    pub preferred: String,
    /// The comparison in one or two sentences.
    pub words: String,
}

/// The slope of the rotation curve, d ln|v − v_sys| / d ln r.
#[derive(Debug, Clone, Serialize, utoipa::ToSchema)]
pub struct Slope {
    /// The fitted slope.
    pub slope: f64,
    /// Its 1σ error.
    pub slope_err: f64,
    /// (slope − (−1/2)) / error: how far from a point mass's −1/2, in σ.
    pub z_from_keplerian: f64,
    /// Points the slope rests on (those clearly off v_sys).
    pub n_used: usize,
    /// The slope in words.
    pub words: String,
}

/// The posterior of log M_BH (flat priors; `fit::disk::posterior`).
#[derive(Debug, Clone, Serialize, utoipa::ToSchema)]
pub struct PosteriorInterval {
    /// Median of log10 M_BH, M☉.
    pub median_log_mbh: f64,
    /// 16th percentile.
    pub low_log_mbh: f64,
    /// 84th percentile.
    pub high_log_mbh: f64,
    /// A warning about the chain (short, or not converged), if any.
    pub warning: Option<String>,
}

/// The sphere of influence of the fitted mass (docs/methods.md §3.1).
#[derive(Debug, Clone, Serialize, utoipa::ToSchema)]
pub struct Influence {
    /// σ used, km/s.
    pub sigma_km_s: f64,
    /// r_infl = G M / σ², pc.
    pub r_infl_pc: f64,
    /// θ_infl at the distance, arcsec.
    pub theta_infl_arcsec: f64,
    /// The innermost point lies inside r_infl.
    pub innermost_inside: bool,
    /// θ_infl / resolution, when a resolution was given.
    pub resolution_ratio: Option<f64>,
    /// The threshold the ratio is held to.
    pub threshold: f64,
    /// Resolved: the innermost point inside r_infl and, with a resolution, the ratio at least
    /// the threshold.
    pub resolved: bool,
    /// Which tests the verdict rests on, in words.
    pub basis: String,
}

/// The geometric distance from the systemic features' accelerations.
#[derive(Debug, Clone, Serialize, utoipa::ToSchema)]
pub struct MaserDistanceResult {
    /// Distance and its 1σ error, Mpc.
    pub distance_mpc: (f64, f64),
    /// The systemic features' radius and its error, pc.
    pub radius_pc: (f64, f64),
    /// The same in milliarcseconds.
    pub radius_mas: (f64, f64),
    /// How many systemic features it rests on.
    pub n_features: usize,
    /// What to type as the galaxy's distance change (method maser), in words.
    pub words: String,
}

/// What the submission form is filled with (the member checks and sends it).
#[derive(Debug, Clone, Serialize, utoipa::ToSchema)]
pub struct Prefill {
    /// The mass method: `maser` (a table with accelerations) or `gas_dynamics`.
    pub method: String,
    /// The mass as the form takes it, log10 M☉ with its total error.
    pub value: String,
    /// log10 M_BH, M☉.
    pub log_mbh: f64,
    /// Its total 1σ error, dex.
    pub err_dex: f64,
    /// The distance the mass is at, Mpc.
    pub distance_mpc: f64,
    /// The data's resolution, arcsec, when given.
    pub resolution_arcsec: Option<f64>,
    /// The note proposed to the reviewer.
    pub note: String,
}

/// One rotation-curve point as fitted.
#[derive(Debug, Clone, Serialize, utoipa::ToSchema)]
pub struct FittedPoint {
    /// Line in the table.
    pub line: u64,
    /// Signed position, pc at the distance.
    pub offset_pc: f64,
    /// Line-of-sight velocity, km/s.
    pub v_km_s: f64,
    /// Its 1σ error, km/s.
    pub v_err_km_s: f64,
}

/// Everything a disk fit answers, the same on every door.
#[derive(Debug, Clone, Serialize, utoipa::ToSchema)]
pub struct KinematicsResult {
    /// Rotation-curve points fitted.
    pub n_points: usize,
    /// Systemic features (rows with an acceleration), kept out of the rotation curve.
    pub n_systemic: usize,
    /// The unit the positions were given in.
    pub offset_unit: OffsetUnit,
    /// Distance used, Mpc.
    pub distance_mpc: f64,
    /// Its 1σ error, Mpc.
    pub distance_err_mpc: f64,
    /// Inclination and its 1σ error, degrees; `None` when unknown.
    pub inclination_deg: Option<(f64, f64)>,
    /// The mass is M sin² i (the inclination is unknown).
    pub mass_is_m_sin2i: bool,
    /// The point-mass fit.
    pub point_mass: ModelFit,
    /// The fit with the extended mass, when one was asked.
    pub extended: Option<ModelFit>,
    /// The two compared, when both were fitted.
    pub comparison: Option<Comparison>,
    /// The model whose mass is quoted: the extended one when the comparison prefers it.
    pub adopted_model: String,
    /// log10 M_BH of that model, M☉.
    pub log_mbh: f64,
    /// Its statistical error, dex.
    pub log_mbh_err_stat_dex: f64,
    /// Its inclination part, dex.
    pub log_mbh_err_inclination_dex: f64,
    /// Its distance part, dex.
    pub log_mbh_err_distance_dex: f64,
    /// All in quadrature, dex.
    pub log_mbh_err_total_dex: f64,
    /// The rotation curve's slope against a point mass's −1/2, when enough points allow it.
    pub slope: Option<Slope>,
    /// Why there is no slope, if there is none.
    pub slope_note: Option<String>,
    /// The posterior interval of log M_BH (without the distance error), when it could be
    /// sampled.
    pub posterior: Option<PosteriorInterval>,
    /// Why there is no posterior interval, if there is none.
    pub posterior_note: Option<String>,
    /// The innermost point's radius from the fitted centre, pc.
    pub innermost_radius_pc: f64,
    /// The same in arcsec at the distance.
    pub innermost_radius_arcsec: f64,
    /// The least mean density inside it, M / (4/3 π r³), M☉ pc⁻³.
    pub minimum_density_msun_pc3: f64,
    /// The sphere of influence, when σ was given.
    pub influence: Option<Influence>,
    /// The maser distance, when the table has systemic features.
    pub maser_distance: Option<MaserDistanceResult>,
    /// Why there is no maser distance although accelerations were given.
    pub maser_note: Option<String>,
    /// What the submission form is filled with.
    pub prefill: Prefill,
    /// The rotation-curve points, in pc.
    pub points: Vec<FittedPoint>,
}

/// A fit with its chart inputs: the result, and what the chart needs to draw the models.
pub struct KinematicsOutcome {
    /// The answer every door shows.
    pub result: KinematicsResult,
    /// The point-mass fit.
    pub point_fit: DiskFit,
    /// The extended fit and its mass model.
    pub extended_fit: Option<(DiskFit, Extended)>,
}

impl KinematicsOutcome {
    /// The model velocities at `offsets_pc`: (point mass, extended) for the chart.
    pub fn curves(&self, offsets_pc: &[f64]) -> (Vec<f64>, Option<Vec<f64>>) {
        let point = offsets_pc
            .iter()
            .map(|x| disk::model_velocity(&self.point_fit, None, *x).unwrap_or(f64::NAN))
            .collect();
        let extended = self.extended_fit.as_ref().map(|(f, e)| {
            offsets_pc
                .iter()
                .map(|x| disk::model_velocity(f, Some(e), *x).unwrap_or(f64::NAN))
                .collect()
        });
        (point, extended)
    }
}

/// Positions converted to pc at the distance.
fn to_pc(offset: f64, unit: OffsetUnit, distance_mpc: f64) -> f64 {
    match unit.arcsec_per_unit() {
        None => offset,
        Some(scale) => {
            let theta = offset * scale;
            // r = θ D / 206 264.806″ (docs/methods.md §4.6), signed.
            theta.signum() * projected_radius_pc(theta.abs(), distance_mpc).unwrap_or(0.0)
        }
    }
}

/// Read a CSV table and the settings' texts, and fit.
///
/// # Errors
/// The settings or rows at fault, every one named, or the fit's refusal.
pub fn fit_table(
    text: &str,
    pairs: &[(String, String)],
    default_threshold: f64,
) -> Result<KinematicsOutcome, KinematicsFault> {
    let settings = KinematicsSettings::from_pairs(pairs, default_threshold);
    let table = read_table(
        text,
        settings
            .as_ref()
            .ok()
            .and_then(|s| s.offset_unit)
            .or_else(|| {
                // A bad settings list still reads the table, so every fault shows at once.
                pairs
                    .iter()
                    .find(|(k, _)| k == "offset_unit")
                    .and_then(|(_, v)| OffsetUnit::parse(v).ok())
            }),
    );
    match (settings, table) {
        (Err(f), _) => Err(KinematicsFault::Settings(f)),
        (Ok(_), Err(rows)) => Err(KinematicsFault::Table(rows)),
        (Ok(s), Ok(t)) => fit(&t, &s),
    }
}

/// Disk fits run at once for the pages and the API (each samples a posterior, about a core
/// for a moment); more wait their turn.
pub const CONCURRENT_FITS: usize = 2;

static FIT_SLOTS: tokio::sync::Semaphore = tokio::sync::Semaphore::const_new(CONCURRENT_FITS);

/// [`fit_table`] off the request's thread, at most [`CONCURRENT_FITS`] at a time.
///
/// # Errors
/// The outer error when the task could not run; the inner one as [`fit_table`].
pub async fn fit_table_queued(
    text: String,
    pairs: Vec<(String, String)>,
    default_threshold: f64,
) -> Result<Result<KinematicsOutcome, KinematicsFault>, AppError> {
    let _slot = FIT_SLOTS
        .acquire()
        .await
        .map_err(|e| anyhow::anyhow!("the disk-fit queue is closed: {e}"))?;
    tokio::task::spawn_blocking(move || fit_table(&text, &pairs, default_threshold))
        .await
        .map_err(|e| AppError::Internal(anyhow::Error::from(e)))
}

/// Fit a table read with settings checked.
///
/// # Errors
/// [`KinematicsFault::Fit`] when the fit refuses the data (one sentence), or
/// [`KinematicsFault::Table`] when no row is left for the rotation curve.
pub fn fit(
    table: &Table,
    settings: &KinematicsSettings,
) -> Result<KinematicsOutcome, KinematicsFault> {
    let d = settings.distance_mpc;
    let (systemic, curve): (Vec<&TableRow>, Vec<&TableRow>) = table
        .rows
        .iter()
        .partition(|r| r.acceleration_km_s_yr.is_some());
    let points: Vec<DiskPoint> = curve
        .iter()
        .map(|r| DiskPoint {
            offset_pc: to_pc(r.offset, table.unit, d),
            v_km_s: r.v_km_s,
            err_km_s: r.v_err_km_s,
        })
        .collect();
    let input = DiskInput {
        points: points.clone(),
        distance_mpc: d,
        distance_err_mpc: settings.distance_err_mpc,
        inclination: match settings.inclination_deg {
            Some((deg, err_deg)) => Inclination::Given { deg, err_deg },
            None => Inclination::Unknown,
        },
    };
    if curve.is_empty() {
        return Err(KinematicsFault::Fit(
            "The table has no rotation-curve rows (every row has an acceleration): add the high-velocity features with empty acceleration cells.".to_owned(),
        ));
    }
    let fault = |e: FitError| KinematicsFault::Fit(fit_sentence(&e, &curve));
    let point_fit = disk::fit_point_mass(&input).map_err(fault)?;
    let extended = settings.extended();
    let extended_fit = match &extended {
        Some(e) => Some((disk::fit_extended(&input, e).map_err(fault)?, e.clone())),
        None => None,
    };
    let comparison = extended_fit
        .as_ref()
        .map(|(f, _)| disk::compare(&point_fit, f));
    let prefers_extended = match (&comparison, &extended_fit) {
        (Some(c), Some((f, _))) => c.preferred == f.model,
        _ => false,
    };
    let adopted = match (&extended_fit, prefers_extended) {
        (Some((f, _)), true) => f,
        _ => &point_fit,
    };
    let adopted_extended = extended_fit
        .as_ref()
        .filter(|_| prefers_extended)
        .map(|(_, e)| e);
    let slope = disk::velocity_slope(&input, adopted);
    let slope_note = slope.as_ref().err().map(ToString::to_string);
    let (posterior, posterior_note) =
        match disk::posterior(&input, adopted, adopted_extended, POSTERIOR_SEED) {
            Ok(p) => (
                Some(PosteriorInterval {
                    median_log_mbh: p.log_mbh.median,
                    low_log_mbh: p.log_mbh.p16,
                    high_log_mbh: p.log_mbh.p84,
                    warning: p.warning.clone(),
                }),
                None,
            ),
            Err(e) => (None, Some(e.to_string())),
        };
    let centre = adopted.centre_pc.0;
    let innermost_pc = points
        .iter()
        .map(|p| (p.offset_pc - centre).abs())
        .fold(f64::INFINITY, f64::min)
        .max(f64::MIN_POSITIVE);
    let innermost_arcsec = angular_size_arcsec(innermost_pc, d).unwrap_or(0.0);
    let mass = 10f64.powf(adopted.log_mbh);
    let influence = settings.sigma_km_s.and_then(|sigma| {
        let r_infl = influence_radius_pc(mass, sigma).ok()?;
        let theta = angular_size_arcsec(r_infl, d).ok()?;
        let inside = innermost_pc < r_infl;
        let ratio = settings.resolution_arcsec.map(|res| theta / res);
        let threshold = settings.soi_threshold;
        let resolved = inside && ratio.is_none_or(|q| q >= threshold);
        let basis = match ratio {
            Some(q) => format!(
                "the innermost point ({} pc) is {} r_infl ({} pc), and θ_infl / resolution = {:.2} is {} the threshold {}",
                short(innermost_pc),
                if inside { "inside" } else { "outside" },
                short(r_infl),
                q,
                if q >= threshold { "at least" } else { "below" },
                threshold
            ),
            None => format!(
                "the innermost point ({} pc) is {} r_infl ({} pc); no resolution was given, so θ_infl / resolution was not tested",
                short(innermost_pc),
                if inside { "inside" } else { "outside" },
                short(r_infl)
            ),
        };
        Some(Influence {
            sigma_km_s: sigma,
            r_infl_pc: r_infl,
            theta_infl_arcsec: theta,
            innermost_inside: inside,
            resolution_ratio: ratio,
            threshold,
            resolved,
            basis,
        })
    });
    let (maser_distance, maser_note) = maser(&systemic, table.unit, settings, adopted);
    let minimum_density = disk::minimum_density(mass, innermost_pc).unwrap_or(0.0);
    let method = if systemic.is_empty() {
        "gas_dynamics"
    } else {
        "maser"
    };
    let err = adopted.log_mbh_err_total;
    let prefill = Prefill {
        method: method.to_owned(),
        value: format!("log {:.3} ± {:.3}", adopted.log_mbh, err),
        log_mbh: adopted.log_mbh,
        err_dex: err,
        distance_mpc: d,
        resolution_arcsec: settings.resolution_arcsec,
        note: format!(
            "Disk fit ({}) of {} points at {d} Mpc{}; errors in dex: statistical {}, inclination {}, distance {}.",
            adopted.model,
            points.len(),
            match settings.inclination_deg {
                Some((i, e)) => format!(", i = {i} ± {e}°"),
                None => ", inclination unknown (M sin² i)".to_owned(),
            },
            two_digits(adopted.log_mbh_err_stat),
            two_digits(adopted.log_mbh_err_inclination),
            two_digits(adopted.log_mbh_err_distance)
        ),
    };
    let result = KinematicsResult {
        n_points: points.len(),
        n_systemic: systemic.len(),
        offset_unit: table.unit,
        distance_mpc: d,
        distance_err_mpc: settings.distance_err_mpc,
        inclination_deg: settings.inclination_deg,
        mass_is_m_sin2i: adopted.mass_is_m_sin2i,
        point_mass: ModelFit::of(&point_fit),
        extended: extended_fit.as_ref().map(|(f, _)| ModelFit::of(f)),
        comparison: comparison.as_ref().map(|c| Comparison {
            delta_aic: c.delta_aic,
            delta_bic: c.delta_bic,
            lrt_statistic: c.lr_statistic,
            lrt_df: c.df,
            lrt_p: c.p_value,
            preferred: c.preferred.to_string(),
            words: c.sentence.clone(),
        }),
        adopted_model: adopted.model.to_string(),
        log_mbh: adopted.log_mbh,
        log_mbh_err_stat_dex: adopted.log_mbh_err_stat,
        log_mbh_err_inclination_dex: adopted.log_mbh_err_inclination,
        log_mbh_err_distance_dex: adopted.log_mbh_err_distance,
        log_mbh_err_total_dex: err,
        slope: slope.ok().map(|s| Slope {
            slope: s.slope,
            slope_err: s.slope_err,
            z_from_keplerian: s.z,
            n_used: s.n_used,
            words: slope_words(s.slope, s.slope_err, s.z),
        }),
        slope_note,
        posterior,
        posterior_note,
        innermost_radius_pc: innermost_pc,
        innermost_radius_arcsec: innermost_arcsec,
        minimum_density_msun_pc3: minimum_density,
        influence,
        maser_distance,
        maser_note,
        prefill,
        points: curve
            .iter()
            .zip(&points)
            .map(|(r, p)| FittedPoint {
                line: r.line,
                offset_pc: p.offset_pc,
                v_km_s: p.v_km_s,
                v_err_km_s: p.err_km_s,
            })
            .collect(),
    };
    Ok(KinematicsOutcome {
        result,
        point_fit,
        extended_fit,
    })
}

/// An error with two significant digits, for sentences.
fn two_digits(v: f64) -> String {
    if v == 0.0 || !v.is_finite() {
        return format!("{v}");
    }
    let digits = (1 - v.abs().log10().floor() as i32).max(0) as usize;
    format!("{v:.digits$}")
}

/// A number with four significant digits, for sentences.
fn short(v: f64) -> String {
    if v == 0.0 || !v.is_finite() {
        return format!("{v}");
    }
    let digits = (3 - v.abs().log10().floor() as i32).max(0) as usize;
    format!("{v:.digits$}")
}

/// The slope against −1/2 in words: within 2σ is "consistent" (common practice).
fn slope_words(slope: f64, err: f64, z: f64) -> String {
    let shown = |v: f64| format!("{v:.2}").replace('-', "−");
    if z.abs() <= 2.0 {
        format!(
            "The speed falls as r^{} ± {}, consistent with a point mass's r^−0.5 (within 2σ): the curve looks Keplerian.",
            shown(slope),
            shown(err)
        )
    } else {
        format!(
            "The speed falls as r^{} ± {}, {:.1}σ from a point mass's r^−0.5: the curve is not Keplerian, so mass besides the black hole matters.",
            shown(slope),
            shown(err),
            z.abs()
        )
    }
}

/// The fit's refusal in a sentence, naming the table's line when it names a point (the fit
/// counts rotation-curve points from 0).
fn fit_sentence(e: &FitError, curve: &[&TableRow]) -> String {
    let line = |row: usize| curve.get(row).map_or(0, |r| r.line);
    match e {
        FitError::NonFiniteInput { row, column } => {
            format!(
                "Row {}, {column}: the value is not a finite number.",
                line(*row)
            )
        }
        FitError::NegativeError { row, column } => {
            format!("Row {}, {column}: the error must be above 0.", line(*row))
        }
        other => crate::error::sentence(&other.to_string()),
    }
}

/// The maser distance from the systemic features, when the table has some.
///
/// The systemic features lie on the near side of the disk at one radius θ_s. Along the axis
/// their velocity changes as v − v_sys = v_rot(θ_s) θ / θ_s, so the fitted gradient g = dv/dθ
/// and the rotation curve in angle, v(θ) = K θ^(−1/2) with K = sin i √(G M / (D θ)) θ^(1/2)
/// (distance-free, since M ∝ D), give θ_s = (K / g)^(2/3) and v_rot = K θ_s^(−1/2). The
/// features share that radius, so their accelerations are averaged (weighted) into one drift
/// before `fit::disk::maser_distance` turns r = v_rot² / a and θ_s into D (docs/methods.md
/// §4.8; common practice).
fn maser(
    systemic: &[&TableRow],
    unit: OffsetUnit,
    settings: &KinematicsSettings,
    fit: &DiskFit,
) -> (Option<MaserDistanceResult>, Option<String>) {
    if systemic.is_empty() {
        return (None, None);
    }
    let Some(scale) = unit.arcsec_per_unit() else {
        return (
            None,
            Some("A maser distance needs positions in angle (offset_arcsec or offset_mas); positions in pc already assume a distance.".to_owned()),
        );
    };
    if systemic.len() < 2 {
        return (
            None,
            Some("A maser distance needs at least two systemic features (rows with an acceleration) to measure their velocity gradient.".to_owned()),
        );
    }
    // Positions from the fitted centre, in mas.
    let pc_per_mas = to_pc(1.0e-3, OffsetUnit::Arcsec, settings.distance_mpc);
    let centre_mas = fit.centre_pc.0 / pc_per_mas;
    let v_sys = fit.v_sys_km_s.0;
    // Weighted least squares of v − v_sys = g θ through the origin.
    let (mut swxy, mut swxx) = (0.0, 0.0);
    for r in systemic {
        let theta = r.offset * scale * 1.0e3 - centre_mas;
        let w = 1.0 / (r.v_err_km_s * r.v_err_km_s);
        swxy += w * theta * (r.v_km_s - v_sys);
        swxx += w * theta * theta;
    }
    let gradient = (swxy / swxx).abs();
    let gradient_err = swxx.sqrt().recip();
    // K in km/s mas^(1/2): the projected speed at 1 mas.
    let k = fit.sin_i
        * (crate::astro::constants::G_PC_KM2_S2_PER_MSUN * 10f64.powf(fit.log_mbh) / pc_per_mas)
            .sqrt();
    let k_rel = 0.5 * std::f64::consts::LN_10 * fit.log_mbh_err_stat;
    if !(gradient.is_finite() && gradient > 0.0 && k.is_finite() && k > 0.0) {
        return (
            None,
            Some("The systemic features show no velocity gradient along the axis, so their radius cannot be found.".to_owned()),
        );
    }
    let theta_s = (k / gradient).powf(2.0 / 3.0);
    let theta_rel = 2.0 / 3.0 * k_rel.hypot(gradient_err / gradient);
    let v_rot = k / theta_s.sqrt();
    // θ_s and v_rot both come from K and g, so their errors are correlated: with them,
    // D ∝ v_rot² / (a θ_s) = K^(2/3) g^(4/3) / a. The whole K and g error is carried on θ_s
    // (σ_D/D from them is √((2/3 σ_K/K)² + (4/3 σ_g/g)²)) and none on v_rot, so that
    // `maser_distance`'s independent-error formula gives the right total.
    let distance_rel_kg = (2.0 / 3.0 * k_rel).hypot(4.0 / 3.0 * gradient_err / gradient);
    let (mut aw, mut awa) = (0.0, 0.0);
    for r in systemic {
        if let Some((a, e)) = r.acceleration_km_s_yr {
            aw += 1.0 / (e * e);
            awa += a.abs() / (e * e);
        }
    }
    let feature = disk::MaserFeature {
        radius_mas: theta_s,
        radius_err_mas: distance_rel_kg * theta_s,
        v_rot_km_s: v_rot,
        v_rot_err_km_s: 0.0,
        acceleration_km_s_yr: awa / aw,
        err: aw.sqrt().recip(),
    };
    match disk::maser_distance(std::slice::from_ref(&feature)) {
        Ok(m) => {
            let radius_pc = m.per_feature.first().map_or(0.0, |f| f.0);
            (
                Some(MaserDistanceResult {
                    distance_mpc: (m.distance_mpc, m.err_mpc),
                    radius_pc: (radius_pc, theta_rel * radius_pc),
                    radius_mas: (theta_s, theta_rel * theta_s),
                    n_features: systemic.len(),
                    words: format!(
                        "Geometric distance {:.2} ± {:.2} Mpc from {} systemic features (method maser); a reviewer or admin can enter it as the galaxy's distance on its page.",
                        m.distance_mpc,
                        m.err_mpc,
                        systemic.len()
                    ),
                }),
                None,
            )
        }
        Err(e) => (None, Some(crate::error::sentence(&e.to_string()))),
    }
}

/// A demo table with the settings it was made for (seed-data/kinematics, invented).
pub struct Example {
    /// Its word in addresses (`?example=maser`).
    pub slug: &'static str,
    /// What it is, for the link.
    pub label: &'static str,
    /// The CSV text.
    pub table: &'static str,
    /// The settings, as a form's fields.
    pub settings: &'static [(&'static str, &'static str)],
}

/// The two demo tables: an invented maser disk around a point mass, with systemic features,
/// and an invented gas disk whose black hole sits in a Plummer star cluster (generated by
/// seed-data/kinematics/generate_disks.py; its docstring states the models and the seed).
pub const EXAMPLES: [Example; 2] = [
    Example {
        slug: "maser",
        label: "a water-maser disk (Harnwick 7, invented)",
        table: include_str!("../../seed-data/kinematics/maser-disk.csv"),
        settings: &[
            ("distance_mpc", "7.2"),
            ("distance_err_mpc", "0.5"),
            ("inclination_deg", "86"),
            ("inclination_err_deg", "2"),
            ("sigma_km_s", "110"),
            ("resolution_arcsec", "0.0005"),
        ],
    },
    Example {
        slug: "gas",
        label: "a gas disk in a star cluster (Tolvenna 3, invented)",
        table: include_str!("../../seed-data/kinematics/gas-disk.csv"),
        settings: &[
            ("distance_mpc", "21"),
            ("distance_err_mpc", "1.5"),
            ("inclination_deg", "60"),
            ("inclination_err_deg", "4"),
            ("plummer_l_lsun", "1e9"),
            ("plummer_a_pc", "40"),
            ("upsilon", "free"),
            ("sigma_km_s", "190"),
            ("resolution_arcsec", "0.08"),
        ],
    },
];

/// The demo table named `slug`.
pub fn example(slug: &str) -> Option<&'static Example> {
    EXAMPLES.iter().find(|e| e.slug == slug)
}

impl Example {
    /// The settings as owned pairs.
    pub fn pairs(&self) -> Vec<(String, String)> {
        self.settings
            .iter()
            .map(|(k, v)| ((*k).to_owned(), (*v).to_owned()))
            .collect()
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn fitted(slug: &str) -> KinematicsOutcome {
        let e = example(slug).unwrap();
        match fit_table(e.table, &e.pairs(), 1.0) {
            Ok(o) => o,
            Err(f) => panic!("{f:?}"),
        }
    }

    #[test]
    fn the_maser_example_recovers_its_invented_mass_and_distance() {
        // generate_disks.py: M = 4e7 M☉ at 7.2 Mpc, i = 86°, v_sys = 1420 km/s.
        let o = fitted("maser");
        let r = &o.result;
        assert_eq!(r.n_systemic, 5);
        assert_eq!(r.n_points, 34);
        assert_eq!(r.prefill.method, "maser");
        let truth = 4.0e7f64.log10();
        assert!(
            (r.log_mbh - truth).abs() < 3.0 * r.log_mbh_err_stat_dex + 0.01,
            "{} against {truth}",
            r.log_mbh
        );
        let s = r.slope.as_ref().unwrap();
        assert!(s.z_from_keplerian.abs() < 3.0, "{s:?}");
        let d = r.maser_distance.as_ref().expect("a maser distance");
        assert!(
            (d.distance_mpc.0 - 7.2).abs() < 3.0 * d.distance_mpc.1 + 0.2,
            "{d:?}"
        );
    }

    #[test]
    fn the_gas_example_prefers_the_stars_and_is_not_keplerian() {
        let o = fitted("gas");
        let r = &o.result;
        let c = r.comparison.as_ref().unwrap();
        assert!(c.delta_bic < 0.0, "{c:?}");
        assert_eq!(r.adopted_model, r.extended.as_ref().unwrap().model);
        assert_eq!(r.prefill.method, "gas_dynamics");
        assert!(r.maser_distance.is_none());
        // The point mass alone must absorb the stars: a larger mass than the model with them.
        assert!(r.point_mass.log_mbh > r.log_mbh);
    }

    #[test]
    fn every_faulty_row_is_named_with_its_line_and_column() {
        let text = "offset_arcsec,v_km_s,v_err_km_s\n0.1,300,5\n0.2,abc,5\n0.3,250,-1\n0.4,240,\n";
        let rows = read_table(text, None).unwrap_err();
        let named: Vec<(u64, &str)> = rows.iter().map(|r| (r.line, r.column)).collect();
        assert_eq!(
            named,
            vec![(3, "v_km_s"), (4, "v_err_km_s"), (5, "v_err_km_s")]
        );
        assert!(
            rows[0].message.contains("type the line-of-sight velocity"),
            "{}",
            rows[0].message
        );
    }

    #[test]
    fn a_plain_offset_column_needs_its_unit_and_takes_the_one_chosen() {
        let text = "offset,v_km_s,v_err_km_s\n0.1,300,5\n";
        let faults = read_table(text, None).unwrap_err();
        assert_eq!(faults[0].column, "offset");
        assert_eq!(
            read_table(text, Some(OffsetUnit::Mas)).unwrap().unit,
            OffsetUnit::Mas
        );
        let declared = "offset_pc,v_km_s,v_err_km_s\n0.1,300,5\n";
        assert_eq!(
            read_table(declared, Some(OffsetUnit::Mas)).unwrap().unit,
            OffsetUnit::Pc
        );
    }

    #[test]
    fn missing_settings_are_each_named() {
        let faults = KinematicsSettings::from_pairs(&[], 1.0).unwrap_err();
        let names: Vec<&str> = faults.iter().map(|f| f.field.as_str()).collect();
        assert_eq!(
            names,
            vec!["distance_mpc", "distance_err_mpc", "inclination_deg"]
        );
        let unknown = KinematicsSettings::from_pairs(
            &[
                ("distance_mpc".into(), "10".into()),
                ("distance_err_mpc".into(), "1".into()),
                ("inclination_deg".into(), "unknown".into()),
            ],
            1.0,
        )
        .unwrap();
        assert_eq!(unknown.inclination_deg, None);
    }

    #[test]
    fn angles_become_parsecs_at_the_distance() {
        // r = θ D / 206 264.806″ (docs/methods.md §4.6): 1″ at 10 Mpc is 48.4814 pc.
        assert!((to_pc(-1.0, OffsetUnit::Arcsec, 10.0) + 48.481_37).abs() < 1e-4);
        assert!((to_pc(1000.0, OffsetUnit::Mas, 10.0) - 48.481_37).abs() < 1e-4);
        assert!((to_pc(3.5, OffsetUnit::Pc, 10.0) - 3.5).abs() < 1e-15);
    }
}
