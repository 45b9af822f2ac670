//! The downloads for papers and astronomy software against the invented demo catalog: the
//! VOTables read back (here with quick-xml, and with astropy when it is installed), the LaTeX
//! tables compiled with pdflatex and AASTeX when they are installed, the methods paragraph.
//! Without astropy or pdflatex those two tests print a loud SKIP; with
//! `MASSLINE_REQUIRE_EXTERNAL=1` (CI) they fail.

use std::collections::BTreeMap;
use std::process::{Command, Stdio};

use massline::export::sample::{DEX, written_columns};
use massline::export::votable::catalog_fields;
use massline::relations::Relation;
use quick_xml::Reader;
use quick_xml::events::Event;

use crate::helpers::{TestApp, spawn_demo_app};

/// A VOTable as read back: each FIELD's attributes and each row's TD texts (unescaped).
struct Table {
    fields: Vec<BTreeMap<String, String>>,
    rows: Vec<Vec<String>>,
}

impl Table {
    fn column(&self, name: &str) -> Vec<&str> {
        let i = self
            .fields
            .iter()
            .position(|f| f["name"] == name)
            .unwrap_or_else(|| panic!("no field {name}"));
        self.rows.iter().map(|r| r[i].as_str()).collect()
    }
}

fn read_table(text: &str) -> Table {
    let mut reader = Reader::from_str(text);
    let mut table = Table {
        fields: Vec::new(),
        rows: Vec::new(),
    };
    let mut cell: Option<String> = None;
    loop {
        match reader.read_event().expect("well-formed XML") {
            Event::Start(e) | Event::Empty(e) if e.name().as_ref() == "FIELD" => {
                table.fields.push(
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
                        .collect(),
                );
            }
            Event::Start(e) if e.name().as_ref() == "TR" => table.rows.push(Vec::new()),
            Event::Start(e) if e.name().as_ref() == "TD" => cell = Some(String::new()),
            Event::Empty(e) if e.name().as_ref() == "TD" => {
                table.rows.last_mut().unwrap().push(String::new());
            }
            Event::Text(t) => {
                if let Some(c) = cell.as_mut() {
                    c.push_str(&t.xml10_content());
                }
            }
            Event::GeneralRef(r) => {
                if let Some(c) = cell.as_mut() {
                    let raw = format!("&{};", r.xml10_content());
                    c.push_str(&quick_xml::escape::unescape(&raw).unwrap());
                }
            }
            Event::End(e) if e.name().as_ref() == "TD" => {
                let c = cell.take().unwrap();
                table.rows.last_mut().unwrap().push(c);
            }
            Event::Eof => break,
            _ => {}
        }
    }
    table
}

/// The galaxies (slugs) of a relation's fit, from `fit.json`.
async fn fitted_slugs(app: &TestApp, relation: &str, query: &str) -> Vec<String> {
    let fit = app
        .get_with_token(&format!("/relations/{relation}/fit.json{query}"), None)
        .await
        .json();
    fit["galaxies"]
        .as_array()
        .unwrap()
        .iter()
        .map(|s| s.as_str().unwrap().to_owned())
        .collect()
}

/// The number of rows of the catalog CSV export.
async fn catalog_rows(app: &TestApp) -> usize {
    let csv = app.ok("/catalog.csv").await;
    csv::Reader::from_reader(csv.as_bytes()).records().count()
}

#[tokio::test]
async fn the_demo_sample_and_catalog_votables_read_back_with_units_and_ucds() {
    let app = spawn_demo_app().await;
    let reply = app
        .get_with_token("/relations/m_sigma/sample.vot", None)
        .await;
    assert_eq!(reply.status, 200);
    assert_eq!(reply.header("content-type"), "application/x-votable+xml");
    let sample = read_table(&reply.body);
    let slugs = fitted_slugs(&app, "m_sigma", "").await;
    assert!(slugs.len() > 10, "the demo's M–σ fit has its sample");
    assert_eq!(sample.rows.len(), slugs.len());
    assert_eq!(sample.column("slug"), slugs);
    let expected: Vec<String> = written_columns(&Relation::MSigma)
        .into_iter()
        .map(|c| c.name)
        .collect();
    let names: Vec<&str> = sample.fields.iter().map(|f| f["name"].as_str()).collect();
    assert_eq!(names, expected);
    for f in &sample.fields {
        assert!(!f["ucd"].is_empty(), "{f:?}");
        if f["datatype"] == "double" {
            assert!(f.contains_key("unit"), "{f:?}");
        }
    }
    // log σ in dex, each value a number.
    let log_sigma = sample
        .fields
        .iter()
        .find(|f| f["name"] == "log_sigma")
        .unwrap();
    assert_eq!(log_sigma["unit"], DEX);
    assert_eq!(log_sigma["ucd"], "phys.veloc.dispersion");
    for v in sample.column("log_mbh") {
        assert!(v.parse::<f64>().unwrap().is_finite(), "{v}");
    }

    let reply = app.get_with_token("/catalog.vot", None).await;
    assert_eq!(reply.status, 200);
    assert_eq!(reply.header("content-type"), "application/x-votable+xml");
    assert_eq!(reply.header("catalog-version"), "1");
    let catalog = read_table(&reply.body);
    assert_eq!(catalog.rows.len(), catalog_rows(&app).await);
    assert_eq!(catalog.fields.len(), catalog_fields().len());
    let distance = catalog
        .fields
        .iter()
        .find(|f| f["name"] == "distance_mpc")
        .unwrap();
    assert_eq!(distance["unit"], "Mpc");
    assert_eq!(distance["ucd"], "pos.distance");
    assert!(catalog.fields.iter().all(|f| !f["ucd"].is_empty()));
}

#[tokio::test]
async fn the_demo_sample_tex_has_one_row_per_galaxy_of_the_fit_and_the_methods_name_the_version() {
    let app = spawn_demo_app().await;
    let reply = app
        .get_with_token("/relations/m_sigma/sample.tex", None)
        .await;
    assert_eq!(reply.status, 200);
    assert_eq!(reply.header("content-type"), "text/x-tex; charset=utf-8");
    let tex = reply.body;
    let body = tex
        .split("\\startdata\n")
        .nth(1)
        .and_then(|b| b.split("\\enddata").next())
        .unwrap_or_else(|| panic!("no data in {tex}"));
    let rows: Vec<&str> = body.lines().collect();
    let slugs = fitted_slugs(&app, "m_sigma", "").await;
    assert_eq!(rows.len(), slugs.len(), "{tex}");
    let columns = rows[0].matches(" & ").count();
    assert!(rows.iter().all(|r| r.matches(" & ").count() == columns));
    // The demo has upper limits in its M–σ sample (seed-data/README.md).
    assert!(rows.iter().any(|r| r.contains("$<")), "{tex}");
    assert!(
        tex.contains("\\tablecomments{massline catalog version 1."),
        "{tex}"
    );

    let row = app.ok("/relations/m_sigma/fit.tex").await;
    assert!(
        row.contains("$M_{\\rm BH}$--$\\sigma$ & structural & "),
        "{row}"
    );
    let methods = app.ok("/relations/m_sigma/methods.txt").await;
    assert!(
        methods.contains("version 1 of the massline catalog"),
        "{methods}"
    );
    assert!(
        methods.contains(&format!("to {} galaxies", slugs.len())),
        "{methods}"
    );
}

/// Whether a command runs and exits 0.
fn runs(program: &str, args: &[&str]) -> bool {
    Command::new(program)
        .args(args)
        .stdout(Stdio::null())
        .stderr(Stdio::null())
        .status()
        .is_ok_and(|s| s.success())
}

/// Skip loudly, or fail when outside tools are required.
fn missing(tool: &str, install: &str) {
    let message = format!("{tool} is not installed: {install}");
    if crate::common::external_required() {
        panic!("{message}; MASSLINE_REQUIRE_EXTERNAL=1 makes this a failure");
    }
    crate::common::loud(&format!("SKIP {message}"));
}

#[tokio::test]
async fn astropy_reads_the_demo_votables_with_their_units_ucds_and_rows() {
    if !runs("python3", &["-c", "import astropy.io.votable"]) {
        missing("astropy", "python3 -m pip install astropy");
        return;
    }
    let app = spawn_demo_app().await;
    let dir = tempfile::tempdir().unwrap();
    let sample_path = dir.path().join("sample.vot");
    let catalog_path = dir.path().join("catalog.vot");
    std::fs::write(&sample_path, app.ok("/relations/m_sigma/sample.vot").await).unwrap();
    std::fs::write(&catalog_path, app.ok("/catalog.vot").await).unwrap();
    let sample_fields: Vec<serde_json::Value> = written_columns(&Relation::MSigma)
        .iter()
        .map(|c| serde_json::json!({"name": c.name, "unit": c.unit, "ucd": c.ucd}))
        .collect();
    let catalog_fields: Vec<serde_json::Value> = catalog_fields()
        .iter()
        .map(|f| serde_json::json!({"name": f.name, "unit": f.unit, "ucd": f.ucd}))
        .collect();
    let expected = serde_json::json!([
        {"file": sample_path, "rows": fitted_slugs(&app, "m_sigma", "").await.len(),
         "fields": sample_fields},
        {"file": catalog_path, "rows": catalog_rows(&app).await, "fields": catalog_fields},
    ]);
    let expected_path = dir.path().join("expected.json");
    std::fs::write(&expected_path, expected.to_string()).unwrap();
    let script = concat!(
        env!("CARGO_MANIFEST_DIR"),
        "/tests/reference/read_votable.py"
    );
    let out = Command::new("python3")
        .arg(script)
        .arg(&expected_path)
        .output()
        .unwrap();
    assert!(
        out.status.success(),
        "astropy refused a VOTable:\n{}\n{}",
        String::from_utf8_lossy(&out.stdout),
        String::from_utf8_lossy(&out.stderr)
    );
}

/// The notes a `fit.tex` carries as comments, as LaTeX.
fn notes_of(fit_tex: &str) -> String {
    fit_tex
        .lines()
        .filter_map(|l| l.strip_prefix("% \\tablenotetext"))
        .map(|l| format!("\\tablenotetext{l}\n"))
        .collect()
}

#[tokio::test]
async fn pdflatex_compiles_the_demo_fit_rows_and_sample_table_with_aastex() {
    if !runs("pdflatex", &["--version"]) || !runs("kpsewhich", &["aastex631.cls"]) {
        missing(
            "pdflatex with AASTeX 6.3.1",
            "apt-get install texlive-latex-base texlive-latex-recommended texlive-plain-generic texlive-fonts-recommended texlive-publishers",
        );
        return;
    }
    let app = spawn_demo_app().await;
    // A row with intervals, one whose ε has none (a table note), and the plane's γ.
    let structural = app.ok("/relations/m_sigma/fit.tex").await;
    let fitexy = app.ok("/relations/m_sigma/fit.tex?method=fitexy").await;
    let plane = app.ok("/relations/m_sigma_mbulge/fit.tex").await;
    assert!(fitexy.contains("\\tablenotemark{a}"), "{fitexy}");
    let head = structural
        .lines()
        .find_map(|l| l.strip_prefix("% Column heads (AASTeX): "))
        .unwrap_or_else(|| panic!("no heads in {structural}"));
    let luminosity = app.ok("/relations/m_l_k/fit.tex").await;
    let sample = app.ok("/relations/m_sigma/sample.tex").await;
    let plane_sample = app.ok("/relations/m_sigma_mbulge/sample.tex").await;
    let luminosity_sample = app.ok("/relations/m_l_k/sample.tex").await;
    let document = format!(
        "\\documentclass{{aastex631}}\n\\begin{{document}}\n\
         \\begin{{deluxetable}}{{llcccccl}}\n\\tablecaption{{Fitted relations}}\n{head}\n\\startdata\n\
         {structural}{}{}{luminosity}\\enddata\n{}\\end{{deluxetable}}\n\
         {sample}\n{plane_sample}\n{luminosity_sample}\n\\end{{document}}\n",
        // Only the first file's notes are used: the marks are per row.
        fitexy.replace("\\tablenotemark{a}", "\\tablenotemark{b}"),
        plane,
        notes_of(&fitexy).replace("\\tablenotetext{a}", "\\tablenotetext{b}"),
    );
    let dir = tempfile::tempdir().unwrap();
    std::fs::write(dir.path().join("exports.tex"), &document).unwrap();
    let out = Command::new("pdflatex")
        .args(["-interaction=nonstopmode", "-halt-on-error", "exports.tex"])
        .current_dir(dir.path())
        .stdin(Stdio::null())
        .output()
        .unwrap();
    let log = std::fs::read_to_string(dir.path().join("exports.log")).unwrap_or_default();
    assert!(
        out.status.success() && dir.path().join("exports.pdf").exists(),
        "pdflatex failed on:\n{document}\n--- log ---\n{}",
        log.lines()
            .filter(|l| l.starts_with('!') || l.starts_with("l."))
            .collect::<Vec<_>>()
            .join("\n")
    );
    assert!(
        !log.contains("Missing character"),
        "a character the font lacks"
    );
}
