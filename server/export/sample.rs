//! The fitted sample's columns, defined once: `sample.csv`, the sample VOTable and the LaTeX
//! table read the same list. Each column has its CSV header (as `sample.csv` has always written
//! it), a field name, its unit in VOUnit syntax (see [`DEX`]), a UCD1+ word and a description.

use crate::catalog::csv_io::guard_text_cell;
use crate::fit::{Point, Shape};
use crate::relations::{FitOutcome, Member, Relation};

/// The unit of a log10 value and of an error in dex, in VOUnit syntax.
///
/// VOUnit 1.0 (IVOA Recommendation, 2014) writes the logarithm of a unit as a function,
/// `log(solMass)`, and has no `dex` among its known units; a unit outside its list is written
/// quoted, `'dex'`, which parsers accept as a unit they need not know. We write `'dex'` (and
/// `'dex'**2` for covariances) and say in each field's description what the value is the log10
/// of, because the widely used reader (astropy 8's VOTable parser) refuses function units such
/// as `log(solMass)` with an "invalid unit" warning, while it reads `'dex'` as dex.
pub const DEX: &str = "'dex'";

/// The unit of a covariance of two values in dex ([`DEX`] squared).
pub const DEX2: &str = "'dex'**2";

/// What a column's cells hold.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Kind {
    /// A stored word (ASCII).
    Code,
    /// Free text (any Unicode).
    Text,
    /// A number.
    Number,
    /// True or false.
    Flag,
}

/// One cell of the sample.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Cell<'a> {
    /// Text.
    Text(&'a str),
    /// A number.
    Number(f64),
    /// No value (an empty cell).
    Missing,
    /// True or false.
    Flag(bool),
}

/// Reads one column's cell from a point and its galaxy.
pub type CellOf = for<'a> fn(&'a Point, &'a Member) -> Cell<'a>;

/// One column of the fitted sample.
pub struct Column {
    /// The header `sample.csv` writes.
    pub csv_header: String,
    /// The field name of the other formats (letters, digits and `_`).
    pub name: String,
    /// What its cells hold.
    pub kind: Kind,
    /// Its unit in VOUnit syntax ("" for words and flags).
    pub unit: &'static str,
    /// Its UCD1+ words.
    pub ucd: &'static str,
    /// What it is, in words.
    pub description: String,
    /// Decimals `sample.csv` writes.
    pub csv_decimals: usize,
    /// Whether only the plane has values in it (the other formats leave it out for a line).
    pub plane_only: bool,
    /// Whether `sample.csv` writes it (its header is kept as it has always been; the columns
    /// added since are in the VOTable only).
    pub in_csv: bool,
    /// Its cell.
    pub cell: CellOf,
}

/// The first host property of a relation: field name, UCD of the value and of its error, what
/// it is in words.
fn x_names(relation: &Relation) -> (String, &'static str, &'static str, String) {
    match relation {
        Relation::MSigma | Relation::SigmaBulgePlane => (
            "log_sigma".to_owned(),
            "phys.veloc.dispersion",
            "stat.error;phys.veloc.dispersion",
            "velocity dispersion σ in km/s".to_owned(),
        ),
        Relation::MBulge => (
            "log_mbulge".to_owned(),
            "phys.mass",
            "stat.error;phys.mass",
            "bulge mass in solar masses, at the adopted distance".to_owned(),
        ),
        Relation::Luminosity(band) => (
            format!("log_l_{}", band.to_lowercase()),
            "phys.luminosity",
            "stat.error;phys.luminosity",
            format!(
                "bulge luminosity in the {band} band in solar luminosities, at the adopted distance"
            ),
        ),
    }
}

/// The columns of the fitted sample of `relation`, in the order every format writes them.
pub fn sample_columns(relation: &Relation) -> Vec<Column> {
    let unit = relation.x_unit();
    let (x_name, x_ucd, x_err_ucd, x_words) = x_names(relation);
    let word = |csv: &str, ucd: &'static str, description: &str, cell: CellOf| Column {
        csv_header: csv.to_owned(),
        name: csv.to_owned(),
        kind: Kind::Code,
        unit: "",
        ucd,
        description: description.to_owned(),
        csv_decimals: 0,
        plane_only: false,
        in_csv: true,
        cell,
    };
    let number = |csv_header: String,
                  name: String,
                  unit: &'static str,
                  ucd: &'static str,
                  description: String,
                  cell: CellOf| Column {
        csv_header,
        name,
        kind: Kind::Number,
        unit,
        ucd,
        description,
        csv_decimals: 4,
        plane_only: false,
        in_csv: true,
        cell,
    };
    vec![
        Column {
            kind: Kind::Text,
            ..word("galaxy", "meta.id;meta.main", "Galaxy name", |_, m| {
                Cell::Text(&m.name)
            })
        },
        word(
            "slug",
            "meta.id",
            "The galaxy's name in the catalog's addresses",
            |_, m| Cell::Text(&m.slug),
        ),
        word("morphology", "src.morph.type", "Morphology", |_, m| {
            Cell::Text(&m.morphology)
        }),
        word(
            "bulge_kind",
            "meta.code.class",
            "Bulge kind (classical, pseudo, …)",
            |_, m| Cell::Text(&m.bulge_kind),
        ),
        word(
            "centre_kind",
            "meta.code.class",
            "Central surface-brightness profile (core, power law, …)",
            |_, m| Cell::Text(&m.centre_kind),
        ),
        word(
            "mass_method",
            "meta.code;phys.mass",
            "How the black-hole mass was measured",
            |_, m| Cell::Text(&m.mass_method),
        ),
        number(
            format!("x [{unit}]"),
            x_name.clone(),
            DEX,
            x_ucd,
            format!("log10 of the {x_words}"),
            |p, _| Cell::Number(p.x),
        ),
        number(
            "x_err [dex]".to_owned(),
            format!("{x_name}_err"),
            DEX,
            x_err_ucd,
            "Its error as fitted (the adopted distance's error in quadrature where the value depends on distance)".to_owned(),
            |p, _| Cell::Number(p.x_err),
        ),
        Column {
            plane_only: true,
            ..number(
                "x2 [log10 M_sun]".to_owned(),
                "log_mbulge".to_owned(),
                DEX,
                "phys.mass",
                "log10 of the bulge mass in solar masses, at the adopted distance (the plane's second property)".to_owned(),
                |p, _| p.x2.map_or(Cell::Missing, Cell::Number),
            )
        },
        Column {
            plane_only: true,
            ..number(
                "x2_err [dex]".to_owned(),
                "log_mbulge_err".to_owned(),
                DEX,
                "stat.error;phys.mass",
                "Its error as fitted, the adopted distance's error in quadrature".to_owned(),
                |p, _| {
                    if p.x2.is_some() {
                        Cell::Number(p.x2_err)
                    } else {
                        Cell::Missing
                    }
                },
            )
        },
        number(
            "log_mbh [log10 M_sun, at adopted distance]".to_owned(),
            "log_mbh".to_owned(),
            DEX,
            "phys.mass",
            "log10 of the black-hole mass in solar masses, at the adopted distance (the limit itself for an upper limit)".to_owned(),
            |p, _| Cell::Number(p.y),
        ),
        number(
            "log_mbh_err [dex]".to_owned(),
            "log_mbh_err".to_owned(),
            DEX,
            "stat.error;phys.mass",
            "Its error as fitted: the mean of the published lower and upper errors with the adopted distance's error in quadrature; 0 for an upper limit".to_owned(),
            |p, _| Cell::Number(p.y_err),
        ),
        Column {
            csv_decimals: 6,
            ..number(
                "xy_cov [dex^2]".to_owned(),
                "xy_cov".to_owned(),
                DEX2,
                "stat.covariance",
                "Covariance of the x and log_mbh errors from the shared distance".to_owned(),
                |p, _| Cell::Number(p.xy_cov),
            )
        },
        Column {
            kind: Kind::Flag,
            ..word(
                "upper_limit",
                "meta.code.error",
                "Whether the black-hole mass is an upper limit",
                |p, _| Cell::Flag(p.upper_limit),
            )
        },
        Column {
            in_csv: false,
            ..word(
                "activity",
                "src.class",
                "Activity class of the nucleus (quiescent, seyfert1, …, unknown)",
                |_, m| Cell::Text(&m.activity),
            )
        },
        Column {
            in_csv: false,
            ..word(
                "mbh_width_definition",
                "meta.code",
                "For a reverberation or single-epoch mass: the broad-line width measure (sigma_line or fwhm); empty otherwise",
                |_, m| Cell::Text(&m.mbh_width_definition),
            )
        },
        Column {
            in_csv: false,
            ..number(
                "mbh_log_f [dex]".to_owned(),
                "mbh_log_f".to_owned(),
                DEX,
                "arith.factor",
                "For a reverberation or single-epoch mass: log10 of the adopted mean virial factor applied to log_mbh at this catalog version (docs/methods.md §4.1); missing otherwise, and when the source's factor is not known".to_owned(),
                |_, m| m.mbh_log_f.map_or(Cell::Missing, Cell::Number),
            )
        },
    ]
}

/// The columns a format that leaves out empty columns writes for `relation`: all but the plane's
/// second property on a line.
pub fn written_columns(relation: &Relation) -> Vec<Column> {
    sample_columns(relation)
        .into_iter()
        .filter(|c| !c.plane_only || relation.shape() == Shape::Plane)
        .collect()
}

/// The fitted sample as `sample.csv`: one galaxy a row, text cells through the formula guard
/// (`catalog::csv_io::guard_text_cell`), numbers with [`Column::csv_decimals`], limits as 1
/// or 0.
///
/// # Errors
/// When the CSV writer fails (it writes to memory, so only on text it cannot hold).
pub fn sample_csv(outcome: &FitOutcome, relation: &Relation) -> anyhow::Result<String> {
    let columns: Vec<Column> = sample_columns(relation)
        .into_iter()
        .filter(|c| c.in_csv)
        .collect();
    let mut w = csv::Writer::from_writer(Vec::new());
    w.write_record(columns.iter().map(|c| c.csv_header.as_str()))?;
    for (p, m) in outcome.sample.points.iter().zip(&outcome.sample.members) {
        w.write_record(columns.iter().map(|c| match (c.cell)(p, m) {
            // Text columns pass through the formula guard; the numbers are ours.
            Cell::Text(t) => guard_text_cell(t).into_owned(),
            Cell::Number(v) => format!("{v:.decimals$}", decimals = c.csv_decimals),
            Cell::Missing => String::new(),
            Cell::Flag(b) => if b { "1" } else { "0" }.to_owned(),
        }))?;
    }
    let bytes = w.into_inner().map_err(|e| anyhow::anyhow!("{e}"))?;
    Ok(String::from_utf8(bytes)?)
}

#[cfg(test)]
pub(crate) mod tests {
    use std::sync::Arc;

    use super::*;
    use crate::fit::{FitSpec, Method};
    use crate::relations::{FitKey, Sample, SampleFilter};

    /// An invented galaxy of a test sample.
    pub(crate) fn member(i: usize, name: &str) -> Member {
        Member {
            galaxy_id: i as i64,
            name: name.to_owned(),
            slug: format!("galaxy-{i}"),
            morphology: "elliptical".to_owned(),
            bulge_kind: "classical".to_owned(),
            centre_kind: "core".to_owned(),
            mass_method: "stellar_dynamics".to_owned(),
            mbh_width_definition: String::new(),
            mbh_log_f: None,
            resolved: Some(true),
            log_distance: 1.25,
            log_sigma: Some(2.3),
            log_mbulge: None,
            mbh_err_dex: (0.08, 0.12),
            mbh_reference: format!("Invented & Made {}", 2000 + i),
            activity: "quiescent".to_owned(),
        }
    }

    /// An invented M–σ outcome with `points` (and members named "Galaxy i"), without a fit.
    pub(crate) fn outcome_of(points: Vec<Point>, members: Vec<Member>) -> FitOutcome {
        let relation = Relation::MSigma;
        let spec = FitSpec::new(Method::Structural, relation.default_pivot());
        FitOutcome {
            key: FitKey::new(
                7,
                &relation,
                Method::Structural,
                &SampleFilter::default(),
                relation.default_pivot(),
                relation.default_pivot2(),
            ),
            sample: Arc::new(Sample {
                points,
                members,
                ..Sample::default()
            }),
            fit: crate::fit::fit(&[], &spec),
            spec: Ok(spec),
            fitted_at: "2026-12-03T08:00:00Z".to_owned(),
        }
    }

    /// Three invented galaxies: two detections and one upper limit.
    pub(crate) fn small_outcome() -> FitOutcome {
        outcome_of(
            vec![
                Point::new(2.301_03, 0.021_5, 8.456_78, 0.104_4).with_xy_cov(0.000_123_4),
                Point::new(2.1, 0.03, 7.9, 0.2),
                Point::limit(2.0, 0.02, 7.123_4),
            ],
            vec![
                member(1, "Galaxy One"),
                Member {
                    activity: "seyfert1".to_owned(),
                    mbh_width_definition: "sigma_line".to_owned(),
                    mbh_log_f: Some(0.64),
                    ..member(2, "=Galaxy Two")
                },
                member(3, "Galaxy Three"),
            ],
        )
    }

    #[test]
    fn the_sample_csv_keeps_its_header_and_formats() {
        let text = sample_csv(&small_outcome(), &Relation::MSigma).unwrap();
        let lines: Vec<&str> = text.lines().collect();
        assert_eq!(
            lines[0],
            "galaxy,slug,morphology,bulge_kind,centre_kind,mass_method,x [log10 km/s],x_err [dex],x2 [log10 M_sun],x2_err [dex],\"log_mbh [log10 M_sun, at adopted distance]\",log_mbh_err [dex],xy_cov [dex^2],upper_limit"
        );
        assert_eq!(
            lines[1],
            "Galaxy One,galaxy-1,elliptical,classical,core,stellar_dynamics,2.3010,0.0215,,,8.4568,0.1044,0.000123,0"
        );
        // A name that a spreadsheet would take for a formula gets its quote.
        assert!(lines[2].starts_with("'=Galaxy Two,"), "{}", lines[2]);
        assert!(
            lines[3].ends_with(",7.1234,0.0000,0.000000,1"),
            "{}",
            lines[3]
        );
        assert_eq!(lines.len(), 4);
    }

    #[test]
    fn a_line_leaves_out_the_plane_columns_and_every_number_has_a_unit() {
        let line = written_columns(&Relation::MSigma);
        let plane = written_columns(&Relation::SigmaBulgePlane);
        assert_eq!(line.len() + 2, plane.len());
        assert!(line.iter().all(|c| !c.name.contains("mbulge")));
        for c in sample_columns(&Relation::Luminosity("K".into())) {
            assert!(!c.ucd.is_empty(), "{}", c.name);
            assert_eq!(c.kind == Kind::Number, !c.unit.is_empty(), "{}", c.name);
            assert!(
                c.name
                    .chars()
                    .all(|ch| ch.is_ascii_alphanumeric() || ch == '_'),
                "{}",
                c.name
            );
        }
    }
}
