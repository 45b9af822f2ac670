//! The layers of `server/` import in one direction only.
//!
//! Every `crate::…` path in the non-test code of `server/` is read (in `use` lines and inline)
//! and mapped to the layer it names; each layer may use only the layers listed for it in
//! [`ALLOWED`]. A door (`web`, `api`, `cli`) never uses another door, and nothing below the
//! doors uses them. DEVELOPERS.md ("Layers") explains the table; change both together.

use std::collections::{BTreeMap, BTreeSet};
use std::path::{Path, PathBuf};

/// Each layer and the layers it may use, from the bottom up.
const ALLOWED: &[(&str, &[&str])] = &[
    // The pure core: what people type, physics, statistics, charts.
    ("units", &[]),
    ("astro", &["units"]),
    ("fit", &["units"]),
    ("charts", &["units"]),
    // Random ids and digests (no state, no storage), used by the catalog and by auth.
    ("auth::secret", &[]),
    ("config", &["units"]),
    // The only place with SQL. It reads what people type, and a broad-line mass typed as a
    // lag and a width is computed as it is read (the virial product), so it uses the physics
    // (astro: pure formulas, no state).
    ("catalog", &["units", "astro", "auth::secret"]),
    // The domain: errors, who may do what, everything computed from the catalog and the fits.
    ("error", &["catalog"]),
    ("auth", &["auth::secret", "catalog", "config", "error"]),
    (
        "relations",
        &["units", "astro", "fit", "charts", "catalog", "error"],
    ),
    // Files for papers and astronomy software, written from a fit or the catalog.
    (
        "export",
        &["units", "astro", "fit", "catalog", "relations", "error"],
    ),
    // What every handler shares, and the request layers.
    (
        "state",
        &["auth", "auth::secret", "catalog", "config", "relations"],
    ),
    (
        "auth::middleware",
        &["auth", "auth::secret", "catalog", "error", "state"],
    ),
    ("router", &["auth", "auth::middleware", "error", "state"]),
    // The doors: they translate requests and commands into calls of the layers below.
    (
        "web",
        &[
            "units",
            "astro",
            "fit",
            "charts",
            "catalog",
            "config",
            "error",
            "auth",
            "auth::secret",
            "auth::middleware",
            "relations",
            "export",
            "state",
            "router",
        ],
    ),
    (
        "api",
        &[
            "units",
            "astro",
            "fit",
            "charts",
            "catalog",
            "config",
            "error",
            "auth",
            "auth::secret",
            "relations",
            "export",
            "state",
            "router",
        ],
    ),
    // The assembled service: the doors behind the router.
    (
        "startup",
        &[
            "units",
            "catalog",
            "config",
            "error",
            "auth",
            "auth::secret",
            "relations",
            "export",
            "state",
            "router",
            "web",
            "api",
        ],
    ),
    // The command line may start the assembled service, but never uses the other doors.
    (
        "cli",
        &[
            "units",
            "astro",
            "fit",
            "catalog",
            "config",
            "error",
            "auth",
            "auth::secret",
            "relations",
            "export",
            "startup",
        ],
    ),
];

/// The layer a file of `server/` belongs to (None: the crate root and the binary).
fn layer_of(relative: &Path) -> Option<String> {
    let parts: Vec<String> = relative
        .iter()
        .map(|p| p.to_string_lossy().trim_end_matches(".rs").to_owned())
        .collect();
    match parts.as_slice() {
        [root] if root == "lib" || root == "main" => None,
        [first, second, ..]
            if first == "auth" && (second == "middleware" || second == "secret") =>
        {
            Some(format!("auth::{second}"))
        }
        [first, ..] => Some(first.clone()),
        [] => None,
    }
}

/// The layer a `crate::` path names, from its first segments.
fn layer_named(first: &str, second: Option<&str>) -> String {
    match (first, second) {
        ("auth", Some(s @ ("middleware" | "secret"))) => format!("auth::{s}"),
        // Re-exports at the crate root.
        ("Settings", _) => "config".to_owned(),
        ("Application", _) => "startup".to_owned(),
        (f, _) => f.to_owned(),
    }
}

/// The code of a file without its tests and comments.
fn code_of(path: &Path) -> String {
    let text = std::fs::read_to_string(path).expect("a source file of server/");
    let code = text.split("#[cfg(test)]").next().unwrap_or("");
    code.lines()
        .filter(|l| !l.trim_start().starts_with("//"))
        .collect::<Vec<_>>()
        .join("\n")
}

/// Every layer a piece of code names through `crate::`, including `use crate::{a, b::c}` groups.
fn layers_used(code: &str) -> BTreeSet<String> {
    let mut used = BTreeSet::new();
    let mut rest = code;
    while let Some(at) = rest.find("crate::") {
        rest = &rest[at + "crate::".len()..];
        if let Some(group) = rest.strip_prefix('{') {
            let end = group.find('}').unwrap_or(group.len());
            for item in group[..end].split(',') {
                let mut segments = item.trim().split("::");
                if let Some(first) = segments.next().filter(|s| !s.is_empty()) {
                    used.insert(layer_named(first, segments.next().map(str::trim)));
                }
            }
            continue;
        }
        let path: String = rest
            .chars()
            .take_while(|c| c.is_alphanumeric() || *c == '_' || *c == ':')
            .collect();
        let mut segments = path.split("::");
        if let Some(first) = segments.next().filter(|s| !s.is_empty()) {
            used.insert(layer_named(first, segments.next()));
        }
    }
    used
}

fn rust_files(dir: &Path, out: &mut Vec<PathBuf>) {
    for entry in std::fs::read_dir(dir).expect("a readable folder") {
        let path = entry.expect("a folder entry").path();
        if path.is_dir() {
            rust_files(&path, out);
        } else if path.extension().is_some_and(|e| e == "rs") {
            out.push(path);
        }
    }
}

/// The files of modules declared `#[cfg(test)] mod name;`: test code, outside the layers.
fn test_only_files(files: &[PathBuf]) -> BTreeSet<PathBuf> {
    let mut out = BTreeSet::new();
    for file in files {
        let text = std::fs::read_to_string(file).expect("a source file of server/");
        let dir = file.parent().expect("a file in a folder");
        let lines: Vec<&str> = text.lines().map(str::trim).collect();
        for pair in lines.windows(2) {
            if pair[0] != "#[cfg(test)]" {
                continue;
            }
            let name = pair[1]
                .trim_start_matches("pub(crate) ")
                .strip_prefix("mod ")
                .and_then(|rest| rest.strip_suffix(';'));
            if let Some(name) = name {
                out.insert(dir.join(format!("{name}.rs")));
                out.insert(dir.join(name).join("mod.rs"));
            }
        }
    }
    out
}

/// Every import of a layer not allowed for it: (file, layer, layer it uses).
fn upward_imports(server: &Path) -> Vec<(String, String, String)> {
    let allowed: BTreeMap<&str, BTreeSet<&str>> = ALLOWED
        .iter()
        .map(|(layer, uses)| (*layer, uses.iter().copied().collect()))
        .collect();
    let mut files = Vec::new();
    rust_files(server, &mut files);
    files.sort();
    let tests = test_only_files(&files);
    let mut wrong = Vec::new();
    for file in files {
        let relative = file.strip_prefix(server).expect("a file below server/");
        // Test modules kept in a file of their own.
        if tests.contains(&file) || relative.file_name().is_some_and(|n| n == "tests.rs") {
            continue;
        }
        let Some(layer) = layer_of(relative) else {
            continue;
        };
        let may = allowed.get(layer.as_str()).unwrap_or_else(|| {
            panic!("{} is in no layer of the table; add it", relative.display())
        });
        for used in layers_used(&code_of(&file)) {
            let inside = used == layer || (layer.starts_with("auth::") && used == "auth");
            if !inside && !may.contains(used.as_str()) {
                wrong.push((relative.display().to_string(), layer.clone(), used));
            }
        }
    }
    wrong
}

#[test]
fn no_layer_imports_a_layer_above_it_or_another_door() {
    let server = Path::new(env!("CARGO_MANIFEST_DIR")).join("server");
    let wrong = upward_imports(&server);
    assert!(
        wrong.is_empty(),
        "imports against the layer table (file: layer uses layer):\n{}",
        wrong
            .iter()
            .map(|(f, l, u)| format!("  {f}: {l} uses {u}"))
            .collect::<Vec<_>>()
            .join("\n")
    );
}

#[test]
fn the_reader_finds_every_form_of_crate_path() {
    let code = "use crate::web::place;\nuse crate::{api, auth::middleware::guard};\n\
                let x = crate::relations::place::verdict(1.0, false);\nuse crate::auth::secret::x;";
    let used = layers_used(code);
    let expected: BTreeSet<String> = [
        "web",
        "api",
        "auth::middleware",
        "relations",
        "auth::secret",
    ]
    .iter()
    .map(|s| (*s).to_owned())
    .collect();
    assert_eq!(used, expected);
    assert_eq!(
        layer_of(Path::new("auth/middleware.rs")).as_deref(),
        Some("auth::middleware")
    );
    assert_eq!(layer_of(Path::new("web/place.rs")).as_deref(), Some("web"));
    assert_eq!(layer_of(Path::new("lib.rs")), None);
}

#[test]
fn an_upward_import_is_caught() {
    // A copy of server/ in a temporary folder, with the domain importing a door.
    let server = Path::new(env!("CARGO_MANIFEST_DIR")).join("server");
    let copy = tempfile::tempdir().expect("a temporary folder");
    let mut files = Vec::new();
    rust_files(&server, &mut files);
    for file in &files {
        let to = copy.path().join(file.strip_prefix(&server).unwrap());
        std::fs::create_dir_all(to.parent().unwrap()).unwrap();
        std::fs::copy(file, &to).unwrap();
    }
    let planted = copy.path().join("relations/place.rs");
    let text = std::fs::read_to_string(&planted).unwrap();
    std::fs::write(&planted, format!("use crate::web::place::views;\n{text}")).unwrap();
    let wrong = upward_imports(copy.path());
    assert_eq!(
        wrong,
        vec![(
            "relations/place.rs".to_owned(),
            "relations".to_owned(),
            "web".to_owned()
        )]
    );
}
