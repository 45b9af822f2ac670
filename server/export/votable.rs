//! IVOA VOTable 1.4 documents: the fitted sample ([`sample_votable`]) and the adopted catalog
//! ([`catalog_votable`]), written with `quick-xml`.
//!
//! One RESOURCE with one TABLE: a DESCRIPTION, INFO elements naming what the table is (catalog
//! version, relation, estimator, sample, pivots, fitted parameters), a FIELD per column with its
//! datatype, unit (VOUnit, see `sample::DEX`) and UCD1+ words, and the rows as TABLEDATA. VOTable
//! 1.4 keeps the 1.3 namespace (`http://www.ivoa.net/xml/VOTable/v1.3`); the schema location
//! names the 1.4 schema. A missing number is an empty TD, which VOTable reads as NaN for
//! `double`; a missing flag an empty TD, read as null for `boolean`; no column needs a
//! `<VALUES null=…>`. Every text, in elements and attributes, is escaped by `quick-xml`, and
//! characters XML 1.0 cannot carry become U+FFFD first ([`xml_text`]).

use std::borrow::Cow;

use quick_xml::Writer;
use quick_xml::events::{BytesDecl, BytesEnd, BytesStart, BytesText, Event};

use super::sample::{Cell, DEX, Kind, written_columns};
use super::{filter_words, method_of, method_short_name, pivots_of};
use crate::catalog::csv_io::{COLUMNS, CatalogRow};
use crate::fit::Shape;
use crate::relations::{FitOutcome, Relation};

/// The namespace of VOTable 1.3 and 1.4.
pub const NAMESPACE: &str = "http://www.ivoa.net/xml/VOTable/v1.3";

/// Where the VOTable 1.4 schema is published.
const SCHEMA_LOCATION: &str =
    "http://www.ivoa.net/xml/VOTable/v1.3 http://www.ivoa.net/xml/VOTable/VOTable-1.4.xsd";

/// A FIELD's datatype.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Datatype {
    /// ASCII text (`char`, `arraysize="*"`).
    Char,
    /// Any text (`unicodeChar`, `arraysize="*"`).
    UnicodeChar,
    /// A 64-bit float.
    Double,
    /// True or false.
    Boolean,
}

impl Datatype {
    fn as_str(self) -> &'static str {
        match self {
            Datatype::Char => "char",
            Datatype::UnicodeChar => "unicodeChar",
            Datatype::Double => "double",
            Datatype::Boolean => "boolean",
        }
    }
}

/// A FIELD.
#[derive(Debug, Clone)]
pub struct Field<'a> {
    /// Its name.
    pub name: &'a str,
    /// Its datatype.
    pub datatype: Datatype,
    /// Its unit in VOUnit ("" for none: words, flags, pure numbers).
    pub unit: &'a str,
    /// Its UCD1+ words.
    pub ucd: &'a str,
    /// What it is.
    pub description: &'a str,
}

/// An INFO element: a name, a value and optionally a sentence.
#[derive(Debug, Clone)]
pub struct Info {
    /// Its name.
    pub name: &'static str,
    /// Its value.
    pub value: String,
    /// A sentence saying what it is, or "".
    pub text: String,
}

fn info(name: &'static str, value: impl ToString, text: impl Into<String>) -> Info {
    Info {
        name,
        value: value.to_string(),
        text: text.into(),
    }
}

/// A cell of TABLEDATA.
#[derive(Debug, Clone, PartialEq)]
pub enum Td<'a> {
    /// Text.
    Text(Cow<'a, str>),
    /// A number, written so that it reads back to the same double.
    Number(f64),
    /// No value: an empty TD.
    Missing,
    /// True or false ("T"/"F").
    Flag(bool),
}

/// `text` with every character XML 1.0 cannot carry (controls other than tab and line ends,
/// unpaired surrogates cannot occur in Rust strings, U+FFFE, U+FFFF) as U+FFFD; escaping of
/// `<`, `&` and quotes is left to the writer.
pub fn xml_text(text: &str) -> Cow<'_, str> {
    let bad = |c: char| {
        (c < ' ' && !matches!(c, '\t' | '\n' | '\r')) || matches!(c, '\u{FFFE}' | '\u{FFFF}')
    };
    if text.chars().any(bad) {
        Cow::Owned(
            text.chars()
                .map(|c| if bad(c) { '\u{FFFD}' } else { c })
                .collect(),
        )
    } else {
        Cow::Borrowed(text)
    }
}

/// A VOTable document with one table.
///
/// # Errors
/// When writing fails (it writes to memory, so only on an internal fault).
pub fn write_votable<'r>(
    description: &str,
    infos: &[Info],
    fields: &[Field<'_>],
    rows: impl IntoIterator<Item = Vec<Td<'r>>>,
) -> anyhow::Result<String> {
    let mut w = Writer::new_with_indent(Vec::new(), b' ', 1);
    w.write_event(Event::Decl(BytesDecl::new("1.0", Some("UTF-8"), None)))?;
    w.write_event(Event::Start(BytesStart::new("VOTABLE").with_attributes([
        ("version", "1.4"),
        ("xmlns", NAMESPACE),
        ("xmlns:xsi", "http://www.w3.org/2001/XMLSchema-instance"),
        ("xsi:schemaLocation", SCHEMA_LOCATION),
    ])))?;
    w.write_event(Event::Start(
        BytesStart::new("RESOURCE").with_attributes([("type", "results")]),
    ))?;
    w.write_event(Event::Start(BytesStart::new("TABLE")))?;
    w.create_element("DESCRIPTION")
        .write_text_content(BytesText::new(&xml_text(description)))?;
    for i in infos {
        let element = w
            .create_element("INFO")
            .with_attributes([("name", i.name), ("value", xml_text(&i.value).as_ref())]);
        if i.text.is_empty() {
            element.write_empty()?;
        } else {
            element.write_text_content(BytesText::new(&xml_text(&i.text)))?;
        }
    }
    for f in fields {
        let mut attributes = vec![("name", f.name), ("datatype", f.datatype.as_str())];
        if matches!(f.datatype, Datatype::Char | Datatype::UnicodeChar) {
            attributes.push(("arraysize", "*"));
        }
        if !f.unit.is_empty() {
            attributes.push(("unit", f.unit));
        }
        attributes.push(("ucd", f.ucd));
        w.create_element("FIELD")
            .with_attributes(attributes)
            .write_inner_content(|w| {
                w.create_element("DESCRIPTION")
                    .write_text_content(BytesText::new(&xml_text(f.description)))?;
                Ok(())
            })?;
    }
    w.write_event(Event::Start(BytesStart::new("DATA")))?;
    w.write_event(Event::Start(BytesStart::new("TABLEDATA")))?;
    for row in rows {
        w.write_event(Event::Start(BytesStart::new("TR")))?;
        for td in row {
            let text: Cow<'_, str> = match &td {
                Td::Text(t) => xml_text(t),
                Td::Number(v) if v.is_finite() => Cow::Owned(v.to_string()),
                Td::Number(_) | Td::Missing => Cow::Borrowed(""),
                Td::Flag(b) => Cow::Borrowed(if *b { "T" } else { "F" }),
            };
            if text.is_empty() {
                w.create_element("TD").write_empty()?;
            } else {
                w.create_element("TD")
                    .write_text_content(BytesText::new(&text))?;
            }
        }
        w.write_event(Event::End(BytesEnd::new("TR")))?;
    }
    for name in ["TABLEDATA", "DATA", "TABLE", "RESOURCE", "VOTABLE"] {
        w.write_event(Event::End(BytesEnd::new(name)))?;
    }
    let mut bytes = w.into_inner();
    bytes.push(b'\n');
    Ok(String::from_utf8(bytes)?)
}

/// The INFO elements naming a fit: catalog version, relation, estimator, sample, counts, pivots
/// and the fitted parameters with their intervals (or why there is no fit).
pub fn fit_infos(outcome: &FitOutcome, relation: &Relation) -> Vec<Info> {
    let (pivot, pivot2) = pivots_of(outcome);
    let sample = &outcome.sample;
    let mut infos = vec![
        info(
            "catalog_version",
            outcome.key.catalog_version,
            "The massline catalog version the sample was read at",
        ),
        info("relation", relation.slug(), relation.label()),
        info(
            "estimator",
            outcome.key.method,
            method_of(outcome).map_or("", method_short_name),
        ),
        info(
            "sample_filter",
            &outcome.key.filter,
            filter_words(&outcome.key.filter),
        ),
        info(
            "n_detections",
            sample.n_detections(),
            "Galaxies with a black-hole mass measurement",
        ),
        info(
            "n_upper_limits",
            sample.n_limits(),
            "Galaxies with an upper limit on the black-hole mass",
        ),
        info(
            "pivot_log",
            pivot,
            format!("Pivot x0 of x ({})", relation.x_unit()),
        ),
    ];
    if relation.shape() == Shape::Plane {
        infos.push(info(
            "pivot2_log",
            pivot2,
            "Pivot of the bulge mass (log10 M☉)",
        ));
    }
    infos.push(info(
        "distances",
        "adopted",
        "Masses, luminosities and bulge masses rescaled to each galaxy's adopted distance; the distance error added in quadrature, with the covariance a shared distance induces (xy_cov)",
    ));
    match &outcome.fit {
        Ok(fit) => {
            infos.push(info(
                "intervals",
                fit.intervals.kind.as_str(),
                fit.intervals.kind.label(),
            ));
            for (name, words) in [
                ("alpha", "α: log10 M_BH (M☉) at the pivot"),
                ("beta", "β: slope, dex of M_BH per dex of x"),
                ("gamma", "γ: slope in the bulge mass, dex per dex"),
                ("eps", "ε: intrinsic scatter in log10 M_BH, dex"),
            ] {
                if let Some(iv) = fit.intervals.get(name) {
                    let range = if iv.p16.is_finite() && iv.p84.is_finite() {
                        format!("; 68 % interval {} to {}", iv.p16, iv.p84)
                    } else {
                        "; no interval".to_owned()
                    };
                    infos.push(info(name, iv.estimate, format!("{words}{range}")));
                }
            }
        }
        Err(e) => infos.push(info("fit_error", e, "No fit could be made")),
    }
    infos
}

/// The fitted sample as a VOTable: the columns of `sample.csv` (`super::sample`) at full
/// precision, without the plane's columns on a line, and INFO elements naming the fit.
///
/// # Errors
/// As [`write_votable`].
pub fn sample_votable(outcome: &FitOutcome, relation: &Relation) -> anyhow::Result<String> {
    let columns = written_columns(relation);
    let fields: Vec<Field<'_>> = columns
        .iter()
        .map(|c| Field {
            name: &c.name,
            datatype: match c.kind {
                Kind::Code => Datatype::Char,
                Kind::Text => Datatype::UnicodeChar,
                Kind::Number => Datatype::Double,
                Kind::Flag => Datatype::Boolean,
            },
            unit: c.unit,
            ucd: c.ucd,
            description: &c.description,
        })
        .collect();
    let sample = &outcome.sample;
    let rows = sample.points.iter().zip(&sample.members).map(|(p, m)| {
        columns
            .iter()
            .map(|c| match (c.cell)(p, m) {
                Cell::Text(t) => Td::Text(Cow::Borrowed(t)),
                Cell::Number(v) => Td::Number(v),
                Cell::Missing => Td::Missing,
                Cell::Flag(b) => Td::Flag(b),
            })
            .collect::<Vec<_>>()
    });
    write_votable(
        &format!(
            "The fitted sample of the {} relation from the massline catalog, version {}: one galaxy a row, values in log10 at the adopted distance.",
            relation.label(),
            outcome.key.catalog_version
        ),
        &fit_infos(outcome, relation),
        &fields,
        rows,
    )
}

/// A catalog column's datatype, unit, UCD and description (by its name in `csv_io::COLUMNS`).
fn catalog_field(name: &str) -> (Datatype, &'static str, &'static str, &'static str) {
    use Datatype::{Char, Double, UnicodeChar};
    match name {
        "galaxy" => (UnicodeChar, "", "meta.id;meta.main", "Galaxy name"),
        "morphology" => (Char, "", "src.morph.type", "Morphology"),
        "bulge_kind" => (Char, "", "meta.code.class", "Bulge kind"),
        "centre_kind" => (Char, "", "meta.code.class", "Central profile kind"),
        "distance_mpc" => (Double, "Mpc", "pos.distance", "Adopted distance"),
        "distance_err_mpc" => (
            Double,
            "Mpc",
            "stat.error;pos.distance",
            "Error of the adopted distance",
        ),
        "distance_method" => (
            Char,
            "",
            "meta.code;pos.distance",
            "How the adopted distance was measured",
        ),
        "quantity" => (
            Char,
            "",
            "meta.code",
            "What the row measures: bh_mass, sigma, bulge_mass or bulge_luminosity",
        ),
        "value" => (
            UnicodeChar,
            "",
            "meta.note",
            "The value as entered, in the unit of its scale (see log_value for the number)",
        ),
        "scale" => (Char, "", "meta.code", "The scale the value was entered on"),
        "limit_confidence_sigma" => (
            Double,
            "",
            "stat.confidenceLevel",
            "Confidence of an upper limit, in standard deviations (a pure number)",
        ),
        "method" => (Char, "", "meta.code", "Measurement method"),
        "sigma_definition" => (Char, "", "meta.code", "σ definition (sigma_e or sigma_c)"),
        "aperture" => (UnicodeChar, "", "meta.note", "Aperture of σ, as entered"),
        "band" => (
            Char,
            "",
            "instr.bandpass",
            "Photometric band of a luminosity",
        ),
        "source_distance_mpc" => (
            Double,
            "Mpc",
            "pos.distance",
            "The distance the source assumed",
        ),
        "resolution_arcsec" => (
            Double,
            "arcsec",
            "pos.angResolution",
            "Spatial resolution of the measurement",
        ),
        "reference" => (UnicodeChar, "", "meta.bib", "Where the value was published"),
        "note" => (UnicodeChar, "", "meta.note", "Note"),
        "row_key" => (
            Char,
            "",
            "meta.record",
            "The row's key: importing the file again adds nothing",
        ),
        "activity" => (
            Char,
            "",
            "src.class",
            "Activity class of the nucleus (empty: unknown)",
        ),
        "line" => (
            Char,
            "",
            "meta.id;spect.line",
            "Broad line of a reverberation or single-epoch mass",
        ),
        "width_definition" => (
            Char,
            "",
            "meta.code",
            "Width measure of the broad line: sigma_line or fwhm",
        ),
        "width_spectrum" => (
            Char,
            "",
            "meta.code",
            "Spectrum the width was measured on: rms, mean or single",
        ),
        "lag_days" => (
            Double,
            "d",
            "time.interval",
            "Rest-frame lag of the broad line",
        ),
        "lag_err_days" => (
            Char,
            "",
            "stat.error;time.interval",
            "Error of the lag in days, as entered: one number or +upper/-lower",
        ),
        "width_km_s" => (
            Double,
            "km/s",
            "phys.veloc.dispersion;spect.line",
            "Broad-line width",
        ),
        "width_err_km_s" => (
            Double,
            "km/s",
            "stat.error;phys.veloc.dispersion",
            "Error of the broad-line width",
        ),
        "log_l5100_erg_s" => (
            Double,
            DEX,
            "phys.luminosity;em.opt",
            "log10 of lambda L_lambda at 5100 Angstrom in erg/s, host starlight removed, at the source's distance",
        ),
        "virial_factor" => (
            Double,
            "",
            "arith.factor",
            "The virial factor f the published mass assumed (a pure number); empty when computed here or not known",
        ),
        "calibration" => (
            Char,
            "",
            "meta.code",
            "How a single-epoch mass was made: vp06 or r_l_bentz13",
        ),
        _ => (UnicodeChar, "", "meta.note", ""),
    }
}

/// The FIELDs of the catalog VOTable: the catalog CSV's columns (`csv_io::COLUMNS`), then the
/// stored canonical numbers.
pub fn catalog_fields() -> Vec<Field<'static>> {
    let mut fields: Vec<Field<'static>> = COLUMNS
        .iter()
        .map(|name| {
            let (datatype, unit, ucd, description) = catalog_field(name);
            Field {
                name,
                datatype,
                unit,
                ucd,
                description,
            }
        })
        .collect();
    fields.extend([
        Field {
            name: "log_value",
            datatype: Datatype::Double,
            unit: DEX,
            ucd: "stat.value",
            description: "log10 of the value in its quantity's unit (M☉, km/s, L☉ of the band), at the distance its source assumed",
        },
        Field {
            name: "err_minus_dex",
            datatype: Datatype::Double,
            unit: DEX,
            ucd: "stat.error",
            description: "Lower error of log_value",
        },
        Field {
            name: "err_plus_dex",
            datatype: Datatype::Double,
            unit: DEX,
            ucd: "stat.error",
            description: "Upper error of log_value",
        },
        Field {
            name: "upper_limit",
            datatype: Datatype::Boolean,
            unit: "",
            ucd: "meta.code.error",
            description: "Whether the value is an upper limit",
        },
        Field {
            name: "log_f_applied",
            datatype: Datatype::Double,
            unit: DEX,
            ucd: "arith.factor",
            description: "For a reverberation or single-epoch mass: log10 of the adopted mean virial factor at this version, applied to the mass in the relations (log_value + log_f_applied - log10 virial_factor; missing when the mass is not rescaled)",
        },
    ]);
    fields
}

/// The adopted catalog as a VOTable: the columns of the catalog CSV (`csv_io::COLUMNS`), then
/// the stored canonical numbers (log10 value and its errors in dex, the upper-limit flag),
/// one measurement a row, with the catalog version as INFO.
///
/// # Errors
/// As [`write_votable`].
pub fn catalog_votable(rows: &[CatalogRow], version: i64) -> anyhow::Result<String> {
    let fields = catalog_fields();
    let table_rows = rows.iter().map(|r| {
        let mut tds: Vec<Td<'_>> = COLUMNS
            .iter()
            .zip(&r.cells)
            .map(|(name, cell)| match catalog_field(name).0 {
                Datatype::Double if cell.is_empty() => Td::Missing,
                // The CSV cells of number columns are Rust's shortest round-trip form.
                Datatype::Double => cell.parse().map_or(Td::Missing, Td::Number),
                _ => Td::Text(Cow::Borrowed(cell.as_str())),
            })
            .collect();
        tds.extend([
            Td::Number(r.log_value),
            Td::Number(r.err_minus_dex),
            Td::Number(r.err_plus_dex),
            Td::Flag(r.upper_limit),
            r.virial
                .as_ref()
                .and_then(|v| v.log_f_applied)
                .map_or(Td::Missing, Td::Number),
        ]);
        tds
    });
    write_votable(
        &format!(
            "The adopted massline catalog, version {version}: one adopted measurement a row, each galaxy's description repeated on its rows, values as published (at the distance their source assumed)."
        ),
        &[info(
            "catalog_version",
            version,
            "The massline catalog version exported",
        )],
        &fields,
        table_rows,
    )
}

#[cfg(test)]
pub(crate) mod tests {
    use quick_xml::Reader;
    use quick_xml::events::Event;

    use super::*;
    use crate::export::sample::tests::small_outcome;

    /// A VOTable read back: the FIELD attributes, the INFO name/value pairs and the TD texts of
    /// each TR (unescaped).
    #[derive(Debug, Default)]
    pub(crate) struct ReadBack {
        pub(crate) version: String,
        pub(crate) namespace: String,
        pub(crate) fields: Vec<std::collections::BTreeMap<String, String>>,
        pub(crate) infos: Vec<(String, String)>,
        pub(crate) rows: Vec<Vec<String>>,
    }

    /// Asserts that a TD's text reads back to exactly `value` (the same bits).
    #[track_caller]
    fn assert_same(text: &str, value: f64) {
        let read: f64 = text.parse().unwrap_or_else(|e| panic!("{text:?}: {e}"));
        assert_eq!(read.to_bits(), value.to_bits(), "{text} vs {value}");
    }

    pub(crate) fn read_back(text: &str) -> ReadBack {
        let mut reader = Reader::from_str(text);
        let mut out = ReadBack::default();
        let mut td: Option<String> = None;
        let attrs = |e: &quick_xml::events::BytesStart<'_>| {
            e.attributes()
                .map(|a| {
                    let a = a.unwrap();
                    (
                        a.key.as_ref().to_owned(),
                        a.normalized_value(quick_xml::XmlVersion::Implicit1_0)
                            .unwrap()
                            .into_owned(),
                    )
                })
                .collect::<std::collections::BTreeMap<_, _>>()
        };
        loop {
            match reader.read_event().unwrap() {
                Event::Start(e) | Event::Empty(e) if e.name().as_ref() == "VOTABLE" => {
                    let a = attrs(&e);
                    out.version = a["version"].clone();
                    out.namespace = a["xmlns"].clone();
                }
                Event::Start(e) if e.name().as_ref() == "FIELD" => out.fields.push(attrs(&e)),
                Event::Empty(e) if e.name().as_ref() == "FIELD" => out.fields.push(attrs(&e)),
                Event::Start(e) | Event::Empty(e) if e.name().as_ref() == "INFO" => {
                    let a = attrs(&e);
                    out.infos.push((a["name"].clone(), a["value"].clone()));
                }
                Event::Start(e) if e.name().as_ref() == "TR" => out.rows.push(Vec::new()),
                Event::Start(e) if e.name().as_ref() == "TD" => td = Some(String::new()),
                Event::Empty(e) if e.name().as_ref() == "TD" => {
                    out.rows.last_mut().unwrap().push(String::new());
                }
                Event::Text(t) => {
                    if let Some(s) = td.as_mut() {
                        s.push_str(&t.xml10_content());
                    }
                }
                Event::GeneralRef(r) => {
                    if let Some(s) = td.as_mut() {
                        let raw = format!("&{};", r.xml10_content());
                        s.push_str(&quick_xml::escape::unescape(&raw).unwrap());
                    }
                }
                Event::End(e) if e.name().as_ref() == "TD" => {
                    let s = td.take().unwrap();
                    out.rows.last_mut().unwrap().push(s);
                }
                Event::Eof => break,
                _ => {}
            }
        }
        out
    }

    #[test]
    fn the_sample_table_reads_back_with_units_ucds_and_every_value() {
        let outcome = small_outcome();
        let text = sample_votable(&outcome, &Relation::MSigma).unwrap();
        let doc = read_back(&text);
        assert_eq!(doc.version, "1.4");
        assert_eq!(doc.namespace, NAMESPACE);
        assert_eq!(doc.rows.len(), outcome.sample.points.len());
        assert_eq!(doc.fields.len(), written_columns(&Relation::MSigma).len());
        for f in &doc.fields {
            assert!(!f["ucd"].is_empty(), "{f:?}");
            if f["datatype"] == "double" {
                assert!(!f.get("unit").is_none_or(String::is_empty), "{f:?}");
            }
        }
        let column = |name: &str| {
            doc.fields
                .iter()
                .position(|f| f["name"] == name)
                .unwrap_or_else(|| panic!("no field {name}"))
        };
        for (row, (p, m)) in doc
            .rows
            .iter()
            .zip(outcome.sample.points.iter().zip(&outcome.sample.members))
        {
            assert_eq!(row.len(), doc.fields.len());
            assert_eq!(row[column("galaxy")], m.name);
            assert_same(&row[column("log_sigma")], p.x);
            assert_same(&row[column("log_sigma_err")], p.x_err);
            assert_same(&row[column("log_mbh")], p.y);
            assert_same(&row[column("log_mbh_err")], p.y_err);
            assert_same(&row[column("xy_cov")], p.xy_cov);
            assert_eq!(
                row[column("upper_limit")],
                if p.upper_limit { "T" } else { "F" }
            );
            assert_eq!(row[column("activity")], m.activity);
            assert_eq!(row[column("mbh_width_definition")], m.mbh_width_definition);
            match m.mbh_log_f {
                Some(f) => assert_same(&row[column("mbh_log_f")], f),
                None => assert_eq!(row[column("mbh_log_f")], ""),
            }
        }
        assert!(
            outcome.sample.members.iter().any(|m| m.mbh_log_f.is_some()),
            "the sample has a virial mass"
        );
        let infos: std::collections::BTreeMap<_, _> = doc.infos.into_iter().collect();
        assert_eq!(infos["catalog_version"], "7");
        assert_eq!(infos["relation"], "m_sigma");
        assert_eq!(infos["estimator"], "structural");
        assert!(infos.contains_key("sample_filter"));
        assert!(infos.contains_key("pivot_log"));
        // Three points cannot be fitted: the table says why instead of parameters.
        assert!(infos.contains_key("fit_error"));
    }

    #[test]
    fn every_text_is_escaped_and_reads_back_as_it_was() {
        let nasty = "A&B <C> \"D\" 'E' \u{1} ]]>";
        let fields = [Field {
            name: "t",
            datatype: Datatype::UnicodeChar,
            unit: "",
            ucd: "meta.note",
            description: "<&>",
        }];
        let text = write_votable(
            "x < y & z",
            &[info("q", "\"&<", "a&b")],
            &fields,
            [vec![Td::Text(Cow::Borrowed(nasty))]],
        )
        .unwrap();
        assert!(!text.contains("A&B"), "{text}");
        assert!(!text.contains("<C>"), "{text}");
        assert!(!text.contains('\u{1}'), "control characters are replaced");
        let doc = read_back(&text);
        assert_eq!(doc.rows, [vec![nasty.replace('\u{1}', "\u{FFFD}")]]);
        assert_eq!(doc.infos, [("q".to_owned(), "\"&<".to_owned())]);
    }

    #[test]
    fn the_catalog_table_has_every_column_and_parses_its_numbers() {
        let mut cells: [String; 31] = Default::default();
        cells[0] = "Galaxy & Co".to_owned();
        cells[4] = "16.5".to_owned();
        cells[7] = "seyfert1".to_owned();
        cells[8] = "bh_mass".to_owned();
        cells[9] = "2.4e8 +0.6e8/-0.5e8".to_owned();
        cells[23] = "12.5".to_owned();
        let rows = [CatalogRow {
            cells,
            log_value: 8.380_211_241_711_606,
            err_minus_dex: 0.1,
            err_plus_dex: 0.097,
            upper_limit: false,
            activity: "seyfert1".to_owned(),
            virial: Some(crate::catalog::csv_io::VirialFactorUsed {
                width_definition: "sigma_line".to_owned(),
                assumed_log_f: Some(0.0),
                log_f_applied: Some(0.64),
            }),
        }];
        let doc = read_back(&catalog_votable(&rows, 3).unwrap());
        assert_eq!(doc.fields.len(), COLUMNS.len() + 5);
        assert_eq!(doc.rows.len(), 1);
        let row = &doc.rows[0];
        assert_eq!(row[0], "Galaxy & Co");
        assert_same(&row[4], 16.5);
        assert_eq!(row[5], "", "an empty number stays empty");
        assert_eq!(row[7], "seyfert1");
        assert_eq!(row[9], "2.4e8 +0.6e8/-0.5e8");
        assert_same(&row[23], 12.5);
        assert_same(&row[31], rows[0].log_value);
        assert_eq!(row[34], "F");
        assert_same(&row[35], 0.64);
        assert_eq!(doc.infos, [("catalog_version".to_owned(), "3".to_owned())]);
        for f in &doc.fields {
            assert!(!f["ucd"].is_empty(), "{f:?}");
        }
    }
}
