//! `/api`: a page listing each endpoint of the JSON API with a curl example and a short Python
//! example (standard library only). The examples use the address the page was reached at.

use askama::Template;
use askama_web::WebTemplate;
use axum::http::{HeaderMap, header};

use super::Nav;

/// One endpoint on the page.
pub(crate) struct EndpointView {
    /// HTTP method.
    pub(crate) method: &'static str,
    /// Path, with parameters in braces.
    pub(crate) path: &'static str,
    /// Who may call it.
    pub(crate) access: &'static str,
    /// What it answers.
    pub(crate) summary: &'static str,
    /// A curl command.
    pub(crate) curl: String,
    /// A Python snippet.
    pub(crate) python: String,
}

/// `/api`.
#[derive(Template, WebTemplate)]
#[template(path = "pages/api.html")]
pub(crate) struct ApiPage {
    nav: Nav,
    base: String,
    endpoints: Vec<EndpointView>,
}

const READ: &str = "token with scope read, or a session (anyone with --public-read for GET)";

fn get_example(base: &str, path_and_query: &str) -> (String, String) {
    let curl =
        format!("curl -H \"Authorization: Bearer $MASSLINE_TOKEN\" '{base}{path_and_query}'");
    let python = format!(
        "import json, os, urllib.request\n\
         req = urllib.request.Request(\"{base}{path_and_query}\",\n    \
         headers={{\"Authorization\": \"Bearer \" + os.environ[\"MASSLINE_TOKEN\"]}})\n\
         with urllib.request.urlopen(req) as r:\n    \
         print(json.load(r))"
    );
    (curl, python)
}

fn post_example(base: &str, path: &str, body: &str) -> (String, String) {
    // The same literal as Python (JSON's true/false/null are Python's True/False/None).
    let py_body = body
        .replace(": true", ": True")
        .replace(": false", ": False")
        .replace(": null", ": None");
    let curl = format!(
        "curl -H \"Authorization: Bearer $MASSLINE_TOKEN\" -H 'Content-Type: application/json' \\\n     -d '{body}' {base}{path}"
    );
    let python = format!(
        "import json, os, urllib.request\n\
         body = json.dumps({py_body}).encode()\n\
         req = urllib.request.Request(\"{base}{path}\", data=body, method=\"POST\",\n    \
         headers={{\"Authorization\": \"Bearer \" + os.environ[\"MASSLINE_TOKEN\"],\n             \
         \"Content-Type\": \"application/json\"}})\n\
         with urllib.request.urlopen(req) as r:\n    \
         print(json.load(r))"
    );
    (curl, python)
}

/// How an endpoint's example is made.
enum Example {
    /// A GET of this path and query.
    Get(&'static str),
    /// A POST of this JSON body.
    Post(&'static str),
    /// A POST of this JSON body with an idempotency key.
    PostOnce(&'static str),
    /// A GET without a token.
    Public,
}

/// One endpoint of the page: method, path, who may call it, what it answers, its example.
struct Endpoint(
    &'static str,
    &'static str,
    &'static str,
    &'static str,
    Example,
);

/// Every endpoint, in the page's order.
const ENDPOINTS: &[Endpoint] = &[
    Endpoint(
        "GET",
        "/api/v1/relations",
        READ,
        "Every relation of the catalog (slug, axes, default pivots) and where its fit is.",
        Example::Get("/api/v1/relations"),
    ),
    Endpoint(
        "GET",
        "/api/v1/relations/{relation}",
        READ,
        "The current fit of one relation for the estimator (method), sample filter (morphology, bulge_kind, centre_kind, mass_method, masses, activity, soi, sigma_definition, limits) and pivots (pivot, pivot2) asked, as on the relation page: parameters with errors, covariance, N, catalog version, fitted_at. Sends an ETag; If-None-Match with it answers 304 while the catalog is unchanged.",
        Example::Get("/api/v1/relations/m_sigma?method=conditional&limits=exclude"),
    ),
    Endpoint(
        "POST",
        "/api/v1/relations/{relation}/runs",
        "token with scope read, or a session sending X-CSRF-Token",
        "Queue a bootstrap (size = replicates) or posterior (size = steps) run of the relation's current fit for the fit query parameters; 202 with the run (status queued with queue_position, running, or stored with params) and its status_url. The same run again answers the one already queued, running or stored; 429 when your account has 3 runs waiting.",
        Example::Post(r#"{"kind": "bootstrap", "size": 1000}"#),
    ),
    Endpoint(
        "GET",
        "/api/v1/runs/{id}",
        READ,
        "Where a run stands: queued (queue_position of queue_length), running (done of size), stored (params), failed or cancelled (message; a run of a catalog version that changed is cancelled).",
        Example::Get("/api/v1/runs/{id}"),
    ),
    Endpoint(
        "GET",
        "/api/v1/place",
        READ,
        "Where one object falls against every relation it has values for (the place page's parameters sigma, bulge_mass, luminosity, band, mass, distance, resolution, each as typed): prediction with 68/95 % intervals, residual_dex, z, verdict, P(below a limit), sphere of influence.",
        Example::Get(
            "/api/v1/place?sigma=210%20%C2%B1%2010&mass=3.2e8%20%2B0.5e8/-0.3e8&distance=16.5&resolution=0.1",
        ),
    ),
    Endpoint(
        "POST",
        "/api/v1/place",
        "token with scope read, or a session sending X-CSRF-Token",
        "The same for a JSON array of up to 10,000 objects (body up to 4 MB); one answer per object, in order.",
        Example::Post(r#"[{"sigma": "210 ± 10", "mass": "<2e7"}, {"bulge_mass": "2e11 ± 10%"}]"#),
    ),
    Endpoint(
        "POST",
        "/api/v1/planning",
        "token with scope read, or a session sending X-CSRF-Token",
        "Rank candidates (a JSON batch in candidates, or a candidate file's text in csv) by the probability that each resolution resolves their sphere of influence: relation used, log M_BH, r_infl, θ_infl with intervals, p_resolved per resolution (README, Planning observations).",
        Example::Post(
            r#"{"candidates": [{"name": "Cand 1", "sigma_km_s": 240, "sigma_err_km_s": 12, "distance_mpc": 16.5, "distance_err_mpc": 1.2}], "resolutions": [{"label": "AO K band", "arcsec": 0.1}], "threshold": 1}"#,
        ),
    ),
    Endpoint(
        "GET",
        "/api/v1/planning/reliability",
        READ,
        "How reliable those probabilities are: the catalog's own galaxies predicted from σ and distance without themselves, against their measured verdicts, in bins of predicted P.",
        Example::Get("/api/v1/planning/reliability?threshold=1"),
    ),
    Endpoint(
        "GET",
        "/api/v1/galaxies",
        READ,
        "The catalog table with the filters, sort and pages of /galaxies (morphology, bulge_kind, method, limits, soi, sort, dir, page, per_page).",
        Example::Get("/api/v1/galaxies?limits=detections&sort=sigma&dir=desc&per_page=100"),
    ),
    Endpoint(
        "GET",
        "/api/v1/galaxies/{slug}",
        READ,
        "One galaxy: every measurement (as typed, canonical, at the adopted distance, state), the adopted values and the sphere-of-influence check.",
        Example::Get("/api/v1/galaxies/{slug}"),
    ),
    Endpoint(
        "POST",
        "/api/v1/fit",
        "token with scope read, or a session sending X-CSRF-Token",
        "Fit a sample of your own (up to 100,000 points; body up to 16 MB) with any estimator massline fit offers, optionally with a bootstrap or a posterior.",
        Example::Post(
            r#"{"method": "structural", "points": [{"x": 2.3, "x_err": 0.02, "y": 8.4, "y_err": 0.1}, {"x": 2.1, "x_err": 0.02, "y": 7.5, "y_err": 0.1}, {"x": 2.4, "x_err": 0.02, "y": 8.9, "y_err": 0.1}, {"x": 2.2, "x_err": 0.02, "y": 7.9, "y_err": 0.1, "upper_limit": true}]}"#,
        ),
    ),
    Endpoint(
        "GET",
        "/api/v1/catalog.csv",
        READ,
        "The accepted catalog in the catalog CSV format; its version in the Catalog-Version header.",
        Example::Get("/api/v1/catalog.csv"),
    ),
    Endpoint(
        "GET",
        "/api/v1/catalog.json",
        READ,
        "The accepted catalog as JSON: each column's text as in the CSV and the stored canonical numbers (derived), with catalog_version and exported_at.",
        Example::Get("/api/v1/catalog.json"),
    ),
    Endpoint(
        "POST",
        "/api/v1/submissions",
        "token with scope submit (in a browser, use the submission form)",
        "Submit measurements of a catalog galaxy (galaxy: its slug) or a new one (new_galaxy), keys as the catalog CSV's columns, values as typed; they land as a pending submission (201 with Location). Needs an Idempotency-Key header: the same key and body again answers 200 with the first submission and stores nothing.",
        Example::PostOnce(
            r#"{"galaxy": "{slug}", "measurements": [{"quantity": "bh_mass", "value": "2.4e8 +0.6e8/-0.5e8", "method": "stellar_dynamics", "source_distance_mpc": "16.5", "resolution_arcsec": "0.1", "reference": "Invented et al. 2031"}], "note": ""}"#,
        ),
    ),
    Endpoint(
        "GET",
        "/api/v1/submissions/{id}",
        "its submitter's token or session, reviewers, admins",
        "The state of one submission (pending, accepted, rejected, withdrawn).",
        Example::Get("/api/v1/submissions/{id}"),
    ),
    Endpoint(
        "GET",
        "/api/v1/me",
        "any token or session",
        "Who the caller is: user name, role, scopes.",
        Example::Get("/api/v1/me"),
    ),
    Endpoint(
        "GET",
        "/api/v1/openapi.json",
        "anyone",
        "The OpenAPI 3.1 document of all of the above, generated from the code.",
        Example::Public,
    ),
];

/// The curl and Python examples of `endpoint` at `base`.
fn examples(base: &str, endpoint: &Endpoint) -> (String, String) {
    let path = endpoint.1;
    match endpoint.4 {
        Example::Get(path_and_query) => get_example(base, path_and_query),
        Example::Post(body) => post_example(base, path, body),
        Example::PostOnce(body) => {
            let (curl, python) = post_example(base, path, body);
            (
                curl.replacen(" -d ", " -H \"Idempotency-Key: $(uuidgen)\" \\\n     -d ", 1),
                python
                    .replacen(
                        "\"Content-Type\": \"application/json\"}",
                        "\"Content-Type\": \"application/json\",\n             \"Idempotency-Key\": str(uuid.uuid4())}",
                        1,
                    )
                    .replacen(
                        "import json, os, urllib.request",
                        "import json, os, urllib.request, uuid",
                        1,
                    ),
            )
        }
        Example::Public => (
            format!("curl '{base}{path}'"),
            format!(
                "import json, urllib.request\n\
                 with urllib.request.urlopen(\"{base}{path}\") as r:\n    \
                 print(sorted(json.load(r)[\"paths\"]))"
            ),
        ),
    }
}

/// Show the API page, its examples at the address it was reached at.
pub(crate) async fn show_api_page(nav: Nav, headers: HeaderMap) -> ApiPage {
    let host = headers
        .get(header::HOST)
        .and_then(|h| h.to_str().ok())
        .filter(|h| {
            h.chars()
                .all(|c| c.is_ascii_alphanumeric() || matches!(c, '.' | ':' | '-' | '[' | ']'))
        })
        .unwrap_or("127.0.0.1:8080");
    let base = format!("http://{host}");
    let endpoints = ENDPOINTS
        .iter()
        .map(|e| {
            let (curl, python) = examples(&base, e);
            EndpointView {
                method: e.0,
                path: e.1,
                access: e.2,
                summary: e.3,
                curl,
                python,
            }
        })
        .collect();
    ApiPage {
        nav,
        base,
        endpoints,
    }
}
