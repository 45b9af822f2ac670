//! LaTeX for papers: one row of a table of fitted relations ([`fit_table_row`]) and the fitted
//! sample as an AASTeX `deluxetable` ([`sample_table`]).
//!
//! Numbers are rounded by the project's one rule (`units::rounded_column`: two significant
//! digits of the error, a column sharing its decimals) and written in math mode: asymmetric
//! errors as `$v^{+a}_{-b}$`, errors that round alike as `$v \pm e$`, upper limits as `$<v$`.
//! Text (names, references, words) goes through [`latex_escape`].

use super::sample::{Column, Kind};
use super::{count, filter_words, method_of, method_short_name, no_interval_note, pivots_of};
use crate::catalog::model::code_label;
use crate::fit::Shape;
use crate::relations::{FitOutcome, Relation};
use crate::units::{Quantity, Rounded, Uncertain, rounded_column};

/// `text` safe in LaTeX text mode: the ten special characters (`& % $ # _ { } ~ ^ \`) and `<`,
/// `>`, `|` (which the default font encoding draws as other glyphs) written as commands, and
/// the symbols the catalog's words use (σ, ε, χ², M☉, −, …) in math mode. Other characters pass
/// as they are (LaTeX reads UTF-8 input).
pub fn latex_escape(text: &str) -> String {
    let mut out = String::with_capacity(text.len() + 8);
    for c in text.chars() {
        match c {
            '&' | '%' | '$' | '#' | '_' | '{' | '}' => {
                out.push('\\');
                out.push(c);
            }
            '~' => out.push_str("\\textasciitilde{}"),
            '^' => out.push_str("\\textasciicircum{}"),
            '\\' => out.push_str("\\textbackslash{}"),
            '<' => out.push_str("\\textless{}"),
            '>' => out.push_str("\\textgreater{}"),
            '|' => out.push_str("\\textbar{}"),
            'α' => out.push_str("$\\alpha$"),
            'β' => out.push_str("$\\beta$"),
            'γ' => out.push_str("$\\gamma$"),
            'ε' => out.push_str("$\\epsilon$"),
            'θ' => out.push_str("$\\theta$"),
            'μ' => out.push_str("$\\mu$"),
            'σ' => out.push_str("$\\sigma$"),
            'τ' => out.push_str("$\\tau$"),
            'χ' => out.push_str("$\\chi$"),
            '²' => out.push_str("$^2$"),
            '☉' => out.push_str("$_\\odot$"),
            '−' => out.push('-'),
            '–' => out.push_str("--"),
            '—' => out.push_str("---"),
            '±' => out.push_str("$\\pm$"),
            '×' => out.push_str("$\\times$"),
            '≤' => out.push_str("$\\leq$"),
            '≥' => out.push_str("$\\geq$"),
            '₀'..='₉' => {
                out.push_str("$_");
                out.push(char::from(b'0' + (c as u32 - '₀' as u32) as u8));
                out.push('$');
            }
            // Controls other than line ends would stop LaTeX.
            c if c.is_control() && c != '\n' => out.push(' '),
            c => out.push(c),
        }
    }
    out
}

/// A rounded number for math mode: the minus sign as LaTeX's `-`.
fn math_number(text: &str) -> String {
    text.replace('\u{2212}', "-")
}

/// A value rounded by the project's rule, in math mode: `$8.32^{+0.05}_{-0.04}$`,
/// `$8.32 \pm 0.05$`, `$<8.10$`, `$8.32$`; `\nodata` for a value that is not a number.
pub fn value_math(r: &Rounded) -> String {
    match r {
        Rounded::Missing => "\\nodata".to_owned(),
        Rounded::Bare(v) => format!("${}$", math_number(v)),
        Rounded::Limit(v) => format!("$<{}$", math_number(v)),
        Rounded::WithErrors { value, minus, plus } if minus == plus => {
            format!("${} \\pm {}$", math_number(value), math_number(plus))
        }
        Rounded::WithErrors { value, minus, plus } => format!(
            "${}^{{+{}}}_{{-{}}}$",
            math_number(value),
            math_number(plus),
            math_number(minus)
        ),
    }
}

/// A relation's name in LaTeX: `$M_{\rm BH}$--$\sigma$`.
pub fn relation_latex(relation: &Relation) -> String {
    let rest = match relation {
        Relation::MSigma => "$\\sigma$".to_owned(),
        Relation::MBulge => "$M_{\\rm bulge}$".to_owned(),
        Relation::Luminosity(band) => format!("$L_{{\\rm {}}}$", latex_escape(band)),
        Relation::SigmaBulgePlane => "($\\sigma$, $M_{\\rm bulge}$)".to_owned(),
    };
    format!("$M_{{\\rm BH}}$--{rest}")
}

/// "11", "10.9": a log pivot with at most two decimals and no trailing zeros.
fn trimmed(value: f64) -> String {
    let text = format!("{value:.2}");
    let text = text.trim_end_matches('0').trim_end_matches('.');
    math_number(&text.replace('-', "\u{2212}"))
}

/// A pivot in its unit: `$200$~km\,s$^{-1}$` for σ, `$10^{11}\,M_\odot$` for a mass.
fn pivot_latex(quantity: Quantity, band: Option<&str>, log_pivot: f64) -> String {
    match quantity {
        Quantity::VelocityDispersion => {
            let linear = 10f64.powf(log_pivot);
            let text = if (linear - linear.round()).abs() < 0.05 {
                format!("{linear:.0}")
            } else {
                format!("{linear:.1}")
            };
            format!("${text}$~km\\,s$^{{-1}}$")
        }
        Quantity::BulgeLuminosity => format!(
            "$10^{{{}}}\\,L_{{\\odot,{{\\rm {}}}}}$",
            trimmed(log_pivot),
            latex_escape(band.unwrap_or(""))
        ),
        _ => format!("$10^{{{}}}\\,M_\\odot$", trimmed(log_pivot)),
    }
}

/// A relation's pivots in their units (both for the plane).
fn pivots_latex(relation: &Relation, outcome: &FitOutcome) -> String {
    let (pivot, pivot2) = pivots_of(outcome);
    let band = match relation {
        Relation::Luminosity(b) => Some(b.as_str()),
        _ => None,
    };
    let first = pivot_latex(relation.x_quantity(), band, pivot);
    if relation.shape() == Shape::Plane {
        format!(
            "{first}, {}",
            pivot_latex(Quantity::BulgeMass, None, pivot2)
        )
    } else {
        first
    }
}

/// One row of a table of fitted relations, with the notes its marks point to.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct FitTableRow {
    /// The column heads, for a `\tablehead` (the same for every relation).
    pub head: String,
    /// The row, ending in `\\`.
    pub row: String,
    /// `\tablenotetext{a}{…}` lines for the marks in the row.
    pub notes: Vec<String>,
}

/// The heads of [`fit_table_row`]'s columns.
pub const FIT_TABLE_HEAD: &str = "\\colhead{Relation} & \\colhead{Estimator} & \\colhead{$N$ (limits)} & \\colhead{$\\alpha$} & \\colhead{$\\beta$} & \\colhead{$\\gamma$} & \\colhead{$\\epsilon$} & \\colhead{Pivot}";

/// One row of a table of fitted relations: relation, estimator, detections (upper limits),
/// α, β, γ (`\nodata` but for the plane), ε with their 68 % intervals from the fit
/// (`fit.intervals`, the values every page quotes), and the pivot in its unit:
///
/// ```text
/// $M_{\rm BH}$--$\sigma$ & structural & 44 (3) & $8.32^{+0.05}_{-0.05}$ & … \\
/// ```
///
/// A parameter the estimator gives without an interval (FITEXY's and BCES's ε) is written as
/// its value with a table-note mark, and the note says why ([`no_interval_note`]). Without a
/// fit, every parameter is `\nodata` and a note says why.
pub fn fit_table_row(outcome: &FitOutcome, relation: &Relation) -> FitTableRow {
    let sample = &outcome.sample;
    let method = method_of(outcome);
    let mut notes = Vec::new();
    let params: Vec<String> = match &outcome.fit {
        Ok(fit) => ["alpha", "beta", "gamma", "eps"]
            .iter()
            .map(|name| {
                let Some(iv) = fit.intervals.get(name) else {
                    return "\\nodata".to_owned();
                };
                let has_interval = iv.p16.is_finite()
                    && iv.p84.is_finite()
                    && iv.error.is_finite()
                    && iv.error > 0.0;
                if has_interval {
                    let item = Uncertain::asymmetric(
                        iv.estimate,
                        iv.estimate - iv.p16,
                        iv.p84 - iv.estimate,
                        false,
                    );
                    value_math(&rounded_column(&[item], 3)[0])
                } else {
                    let note = method.map_or("no interval reported", |m| {
                        no_interval_note(m, iv.error).unwrap_or("no interval reported")
                    });
                    let mark = char::from(b'a' + notes.len() as u8);
                    notes.push(format!(
                        "\\tablenotetext{{{mark}}}{{{}}}",
                        latex_escape(&format!("{}: {note}.", super::param_symbol(name)))
                    ));
                    format!(
                        "{}\\tablenotemark{{{mark}}}",
                        value_math(
                            &rounded_column(&[Uncertain::symmetric(iv.estimate, 0.0)], 3)[0]
                        )
                    )
                }
            })
            .collect(),
        Err(e) => {
            notes.push(format!(
                "\\tablenotetext{{a}}{{{}}}",
                latex_escape(&format!("No fit: {e}"))
            ));
            let mut cells = vec!["\\nodata".to_owned(); 4];
            cells[0].push_str("\\tablenotemark{a}");
            cells
        }
    };
    let row = format!(
        "{} & {} & {} ({}) & {} & {} & {} & {} & {} \\\\",
        relation_latex(relation),
        latex_escape(method.map_or(outcome.key.method, method_short_name)),
        sample.n_detections(),
        sample.n_limits(),
        params[0],
        params[1],
        params[2],
        params[3],
        pivots_latex(relation, outcome)
    );
    FitTableRow {
        head: FIT_TABLE_HEAD.to_owned(),
        row,
        notes,
    }
}

/// `fit.tex`: the row of [`fit_table_row`] with, as comments, what it is, the column heads and
/// the notes its marks point to, ready to paste into a `deluxetable` of relations.
pub fn fit_tex_file(outcome: &FitOutcome, relation: &Relation) -> String {
    let row = fit_table_row(outcome, relation);
    let mut out = format!(
        "% massline: the {} fit of catalog version {} ({}), one row of a table of fitted relations.\n\
         % Column heads (AASTeX): \\tablehead{{{}}}\n",
        relation.label(),
        outcome.key.catalog_version,
        filter_words(&outcome.key.filter),
        row.head
    );
    out.push_str(&row.row);
    out.push('\n');
    if !row.notes.is_empty() {
        out.push_str("% Notes for the marks in the row (after \\enddata):\n");
        for note in &row.notes {
            out.push_str(&format!("% {note}\n"));
        }
    }
    out
}

/// The head and unit of a sample column in the LaTeX table.
fn column_head(column: &Column, relation: &Relation) -> (String, String) {
    match column.name.as_str() {
        "log_sigma" => ("$\\log\\sigma$".to_owned(), "(km\\,s$^{-1}$)".to_owned()),
        "log_mbulge" => (
            "$\\log M_{\\rm bulge}$".to_owned(),
            "($M_\\odot$)".to_owned(),
        ),
        "log_mbh" => ("$\\log M_{\\rm BH}$".to_owned(), "($M_\\odot$)".to_owned()),
        _ => match relation {
            Relation::Luminosity(band) => (
                format!("$\\log L_{{\\rm {}}}$", latex_escape(band)),
                format!("($L_{{\\odot,{{\\rm {}}}}}$)", latex_escape(band)),
            ),
            _ => (latex_escape(&column.name), String::new()),
        },
    }
}

/// The fitted sample as an AASTeX `deluxetable`: galaxy, adopted distance, the relation's host
/// properties and the black-hole mass (log10, at the adopted distance, with the errors as
/// fitted; asymmetric where the published mass errors are), the mass method and a reference
/// number into `\tablerefs`; `\tablecomments` names the catalog version, the estimator, the
/// sample and how distances and errors were treated.
pub fn sample_table(outcome: &FitOutcome, relation: &Relation) -> String {
    let sample = &outcome.sample;
    let columns: Vec<Column> = super::sample::written_columns(relation)
        .into_iter()
        // The values; their errors go beside them.
        .filter(|c| {
            c.kind == Kind::Number && c.name.starts_with("log_") && !c.name.ends_with("_err")
        })
        .collect();
    // The references, numbered in order of first use.
    let mut references: Vec<&str> = Vec::new();
    let reference_numbers: Vec<Option<usize>> = sample
        .members
        .iter()
        .map(|m| {
            let r = m.mbh_reference.trim();
            (!r.is_empty()).then(|| match references.iter().position(|k| *k == r) {
                Some(i) => i + 1,
                None => {
                    references.push(r);
                    references.len()
                }
            })
        })
        .collect();
    let with_refs = !references.is_empty();
    // Each column rounded by one rule.
    let distances = rounded_column(
        &sample
            .members
            .iter()
            .map(|m| Uncertain::symmetric(10f64.powf(m.log_distance), 0.0))
            .collect::<Vec<_>>(),
        1,
    );
    let value_columns: Vec<Vec<Rounded>> = columns
        .iter()
        .map(|c| {
            let items: Vec<Uncertain> = sample
                .points
                .iter()
                .zip(&sample.members)
                .map(|(p, m)| match c.name.as_str() {
                    "log_mbh" => {
                        Uncertain::asymmetric(p.y, m.mbh_err_dex.0, m.mbh_err_dex.1, p.upper_limit)
                    }
                    "log_mbulge" if relation.shape() == Shape::Plane => {
                        Uncertain::symmetric(p.x2.unwrap_or(f64::NAN), p.x2_err)
                    }
                    _ => Uncertain::symmetric(p.x, p.x_err),
                })
                .collect();
            rounded_column(&items, 2)
        })
        .collect();
    let heads: Vec<(String, String)> = columns.iter().map(|c| column_head(c, relation)).collect();
    let mut head_names = vec!["Galaxy".to_owned(), "$D$".to_owned()];
    let mut head_units = vec![String::new(), "(Mpc)".to_owned()];
    head_names.extend(heads.iter().map(|h| h.0.clone()));
    head_units.extend(heads.iter().map(|h| h.1.clone()));
    head_names.push("Method".to_owned());
    head_units.push(String::new());
    if with_refs {
        head_names.push("Ref.".to_owned());
        head_units.push(String::new());
    }
    let colhead = |cells: &[String]| {
        cells
            .iter()
            .map(|c| format!("\\colhead{{{c}}}"))
            .collect::<Vec<_>>()
            .join(" & ")
    };
    let spec = format!(
        "lc{}l{}",
        "c".repeat(columns.len()),
        if with_refs { "c" } else { "" }
    );
    let mut rows: Vec<String> = Vec::with_capacity(sample.members.len());
    for (i, m) in sample.members.iter().enumerate() {
        let mut cells = vec![latex_escape(&m.name), value_math(&distances[i])];
        cells.extend(value_columns.iter().map(|col| value_math(&col[i])));
        cells.push(latex_escape(&code_label(&m.mass_method)));
        if with_refs {
            cells.push(reference_numbers[i].map_or("\\nodata".to_owned(), |n| n.to_string()));
        }
        rows.push(cells.join(" & "));
    }
    let method_words = method_of(outcome).map_or(outcome.key.method, method_short_name);
    let comments = format!(
        "massline catalog version {}. Estimator: {}. Sample: {}; {} ({}). \
         Values are log10 at each galaxy's adopted distance $D$: masses, luminosities and bulge masses were rescaled from the distance their source assumed, \
         and their errors are as fitted, with the adopted distance's error added in quadrature (each side of an asymmetric black-hole mass error so; the fit uses their mean). \
         Upper limits on the black-hole mass are written $<$value.",
        outcome.key.catalog_version,
        latex_escape(method_words),
        latex_escape(&filter_words(&outcome.key.filter)),
        count(sample.members.len(), "galaxy", "galaxies"),
        count(sample.n_limits(), "upper limit", "upper limits"),
    );
    let mut out = String::new();
    out.push_str(&format!("\\begin{{deluxetable}}{{{spec}}}\n"));
    out.push_str(&format!(
        "\\tablecaption{{The fitted sample of the {} relation\\label{{tab:sample-{}}}}}\n",
        relation_latex(relation),
        relation.slug().replace('_', "-")
    ));
    out.push_str(&format!(
        "\\tablehead{{{} \\\\ {}}}\n",
        colhead(&head_names),
        colhead(&head_units)
    ));
    out.push_str("\\startdata\n");
    out.push_str(&rows.join(" \\\\\n"));
    if !rows.is_empty() {
        out.push('\n');
    }
    out.push_str("\\enddata\n");
    out.push_str(&format!("\\tablecomments{{{comments}}}\n"));
    if with_refs {
        let list: Vec<String> = references
            .iter()
            .enumerate()
            .map(|(i, r)| format!("({}) {}", i + 1, latex_escape(r)))
            .collect();
        out.push_str(&format!("\\tablerefs{{{}.}}\n", list.join("; ")));
    }
    out.push_str("\\end{deluxetable}\n");
    out
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::export::sample::tests::{member, outcome_of, small_outcome};
    use crate::fit::Point;

    #[test]
    fn every_latex_special_is_escaped() {
        assert_eq!(
            latex_escape(r"A&B 5% $x# a_b {c} ~d ^e \f <g> |"),
            r"A\&B 5\% \$x\# a\_b \{c\} \textasciitilde{}d \textasciicircum{}e \textbackslash{}f \textless{}g\textgreater{} \textbar{}"
        );
        assert_eq!(latex_escape("σ_e"), r"$\sigma$\_e");
        assert_eq!(latex_escape("χ²/dof"), r"$\chi$$^2$/dof");
        assert_eq!(latex_escape("plain"), "plain");
    }

    #[test]
    fn asymmetric_errors_get_superscripts_and_symmetric_ones_pm() {
        let one = |u: Uncertain| value_math(&rounded_column(&[u], 2)[0]);
        assert_eq!(
            one(Uncertain::asymmetric(8.3214, 0.04, 0.12, false)),
            "$8.321^{+0.120}_{-0.040}$"
        );
        assert_eq!(
            one(Uncertain::asymmetric(8.3214, 0.051, 0.049, false)),
            "$8.321^{+0.049}_{-0.051}$"
        );
        assert_eq!(
            one(Uncertain::symmetric(8.3214, 0.05)),
            "$8.321 \\pm 0.050$"
        );
        assert_eq!(
            one(Uncertain::asymmetric(-0.3, 0.11, 0.114, false)),
            "$-0.30 \\pm 0.11$"
        );
        assert_eq!(one(Uncertain::asymmetric(8.1, 0.0, 0.0, true)), "$<8.10$");
        assert_eq!(one(Uncertain::symmetric(f64::NAN, 0.1)), "\\nodata");
    }

    #[test]
    fn the_sample_table_has_one_row_per_galaxy_limits_and_references() {
        let outcome = small_outcome();
        let tex = sample_table(&outcome, &Relation::MSigma);
        let body = tex
            .split("\\startdata\n")
            .nth(1)
            .unwrap()
            .split("\\enddata")
            .next()
            .unwrap();
        let rows: Vec<&str> = body.lines().collect();
        assert_eq!(rows.len(), outcome.sample.members.len());
        assert!(rows[..rows.len() - 1].iter().all(|r| r.ends_with(" \\\\")));
        assert!(!rows[rows.len() - 1].ends_with("\\\\"), "{tex}");
        // The first galaxy's asymmetric mass errors: the smaller (0.08) keeps two significant
        // digits, the value and the other error are rounded to the same place.
        assert!(rows[0].contains("$8.457^{+0.120}_{-0.080}$"), "{}", rows[0]);
        // The limit, with the column's decimals.
        assert!(rows[2].contains("$<7.123$"), "{}", rows[2]);
        // A name starting with '=' needs no guard in LaTeX; references escaped and numbered.
        assert!(rows[1].starts_with("=Galaxy Two & "), "{}", rows[1]);
        assert!(
            tex.contains("\\tablerefs{(1) Invented \\& Made 2001; (2) Invented \\& Made 2002; (3) Invented \\& Made 2003.}"),
            "{tex}"
        );
        assert!(tex.contains("catalog version 7"), "{tex}");
        // Galaxy, D, log σ, log M_BH, method, reference.
        assert!(tex.starts_with("\\begin{deluxetable}{lccclc}\n"), "{tex}");
    }

    #[test]
    fn a_luminosity_table_has_one_column_per_value() {
        let tex = sample_table(&small_outcome(), &Relation::Luminosity("K".to_owned()));
        // Galaxy, D, log L_K, log M_BH, method, reference.
        assert!(tex.starts_with("\\begin{deluxetable}{lccclc}\n"), "{tex}");
        assert_eq!(
            tex.matches("\\colhead{$\\log L_{\\rm K}$}").count(),
            1,
            "{tex}"
        );
        let first = tex
            .split("\\startdata\n")
            .nth(1)
            .unwrap()
            .lines()
            .next()
            .unwrap();
        assert_eq!(first.matches(" & ").count(), 5, "{first}");
    }

    #[test]
    fn a_table_without_references_has_no_reference_column() {
        let mut m = member(1, "Galaxy One");
        m.mbh_reference = String::new();
        let outcome = outcome_of(vec![Point::new(2.3, 0.02, 8.4, 0.1)], vec![m]);
        let tex = sample_table(&outcome, &Relation::MSigma);
        assert!(!tex.contains("\\tablerefs"), "{tex}");
        assert!(!tex.contains("Ref."), "{tex}");
    }

    /// An invented sample of 24 galaxies about log M = 8.3 + 5 log(σ/200) with a scatter of
    /// ±0.3 dex, fitted by `method`.
    fn fitted(method: crate::fit::Method) -> FitOutcome {
        let points: Vec<Point> = (0..24)
            .map(|i| {
                let x = 2.0 + 0.025 * f64::from(i);
                let scatter = if i % 2 == 0 { 0.3 } else { -0.3 };
                Point::new(x, 0.02, 8.3 + 5.0 * (x - 2.301_03) + scatter, 0.1)
            })
            .collect();
        let members = (0..24).map(|i| member(i, &format!("Galaxy {i}"))).collect();
        let mut outcome = outcome_of(points, members);
        let spec = crate::fit::FitSpec::new(method, Relation::MSigma.default_pivot());
        outcome.fit = crate::fit::fit(&outcome.sample.points, &spec);
        outcome.spec = Ok(spec);
        outcome
    }

    #[test]
    fn a_fit_row_quotes_each_parameter_with_its_interval() {
        let outcome = fitted(crate::fit::Method::Structural);
        let fit = outcome.fit.as_ref().unwrap();
        let row = fit_table_row(&outcome, &Relation::MSigma);
        let cells: Vec<&str> = row.row.trim_end_matches(" \\\\").split(" & ").collect();
        assert_eq!(cells.len(), 8, "{}", row.row);
        assert_eq!(cells[1], "structural");
        assert_eq!(cells[2], "24 (0)");
        assert_eq!(cells[5], "\\nodata", "a line has no γ");
        for (cell, name) in [(cells[3], "alpha"), (cells[4], "beta"), (cells[6], "eps")] {
            let iv = fit.intervals.get(name).unwrap();
            assert!(
                cell.contains("^{+") || cell.contains("\\pm"),
                "{name}: {cell}"
            );
            // The value written is the estimate rounded to the interval's precision.
            let value: f64 = cell
                .trim_start_matches('$')
                .split(['^', ' '])
                .next()
                .unwrap()
                .parse()
                .unwrap();
            assert!(
                (value - iv.estimate).abs() <= 0.05 * iv.error,
                "{name}: {cell} vs {iv:?}"
            );
        }
        assert!(row.notes.is_empty());
    }

    #[test]
    fn an_estimate_without_an_interval_gets_a_table_note() {
        let outcome = fitted(crate::fit::Method::Fitexy);
        let row = fit_table_row(&outcome, &Relation::MSigma);
        let eps = row.row.split(" & ").nth(6).unwrap();
        assert!(eps.ends_with("$\\tablenotemark{a}"), "{}", row.row);
        assert_eq!(row.notes.len(), 1, "{:?}", row.notes);
        assert!(
            row.notes[0].contains("$\\chi$$^2$/dof = 1"),
            "{:?}",
            row.notes
        );
        assert!(row.row.contains("& FITEXY &"), "{}", row.row);
    }

    #[test]
    fn a_sample_that_cannot_be_fitted_gives_a_row_with_a_note() {
        let row = fit_table_row(&small_outcome(), &Relation::MSigma);
        assert!(
            row.row.starts_with(
                "$M_{\\rm BH}$--$\\sigma$ & structural & 2 (1) & \\nodata\\tablenotemark{a}"
            ),
            "{}",
            row.row
        );
        assert!(row.row.ends_with("$200$~km\\,s$^{-1}$ \\\\"), "{}", row.row);
        assert_eq!(row.notes.len(), 1);
        assert!(row.notes[0].starts_with("\\tablenotetext{a}{No fit"));
    }
}
