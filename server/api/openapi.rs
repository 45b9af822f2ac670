//! The OpenAPI 3.1 document of the API, served at `GET /api/v1/openapi.json`.
//!
//! It is generated from the code: each handler's `#[utoipa::path]` attribute (method, path,
//! parameters, answers) and each answer's `#[derive(ToSchema)]` (fields, their doc comments as
//! descriptions). A test compares its paths and methods with `startup::route_table()`, so a route
//! cannot be added without being documented, nor documented without being served.
//!
//! To add an endpoint: write the handler with `#[utoipa::path(...)]`, derive `ToSchema` on its
//! request and answer types, list the handler in [`ApiDoc`]'s `paths(...)`, add the route in
//! `api::door`'s routes and its row to `tests/access.toml`.

use std::sync::OnceLock;

use axum::http::header;
use axum::response::{IntoResponse, Response};
use utoipa::openapi::security::{HttpAuthScheme, HttpBuilder, SecurityScheme};
use utoipa::{Modify, OpenApi};

use super::problem::Problem;
use crate::error::FieldError;

/// Adds the bearer-token security scheme the operations refer to.
struct BearerScheme;

impl Modify for BearerScheme {
    fn modify(&self, openapi: &mut utoipa::openapi::OpenApi) {
        let components = openapi.components.get_or_insert_with(Default::default);
        components.add_security_scheme(
            "bearer",
            SecurityScheme::Http(
                HttpBuilder::new()
                    .scheme(HttpAuthScheme::Bearer)
                    .bearer_format("ml_<prefix>_<64 hex>")
                    .description(Some(
                        "An API token made on /account (scopes read, submit). A logged-in browser session works too.",
                    ))
                    .build(),
            ),
        );
    }
}

/// The API's OpenAPI document.
#[derive(OpenApi)]
#[openapi(
    info(
        title = "massline JSON API",
        version = "1",
        description = "The black-hole catalog and its scaling relations for scripts. Keys carry their units (log_mbh in log10 M☉, sigma_km_s, scatter_dex, distance_mpc); times are RFC 3339 UTC; every error is RFC 9457 problem details (application/problem+json), with field errors for invalid input. 401: no valid token or session; 403: the token lacks the scope or the role; 429 with Retry-After beyond the API rate of the account (all its tokens and sessions together) or, without an account, of the client address."
    ),
    paths(
        super::me::me,
        super::planning::my_resolutions,
        super::planning::save_resolution,
        super::planning::delete_resolution,
        super::planning::plan_candidates,
        super::planning::planning_reliability,
        super::relations::list_relations,
        super::relations::relation_fit,
        super::runs::start_run,
        super::runs::run_status_by_id,
        super::place::place_one,
        super::place::place_batch,
        super::galaxies::list_galaxies,
        super::galaxies::show_galaxy,
        super::fit::fit_sample,
        super::kinematics::fit_disk,
        super::catalog::catalog_csv,
        super::catalog::catalog_json,
        super::changes::catalog_changes,
        super::releases::list_releases,
        super::virial::virial_factor,
        super::virial::adopted,
        super::submissions::submit,
        super::submissions::status,
        openapi_json,
    ),
    components(schemas(
        Problem,
        FieldError,
        super::relations::EstimatorName,
        super::runs::RunKindWord,
        super::runs::RunRequest,
        super::runs::RunStatusWord,
        super::runs::RunAnswer,
        super::relations::MorphologyWord,
        super::relations::BulgeKindWord,
        super::relations::CentreKindWord,
        super::relations::MassMethodWord,
        super::relations::SoiWord,
        super::relations::SigmaWord,
        super::relations::LimitsWord,
        super::galaxies::LimitChoice,
        super::galaxies::SoiChoiceWord,
        super::galaxies::SortWord,
        super::galaxies::DirWord,
        super::virial::WidthWord,
        super::virial::CalibrationBulgeWord,
        super::virial::SlopeWord,
        super::kinematics::OffsetUnitWord,
    )),
    modifiers(&BearerScheme),
    tags(
        (name = "relations", description = "The scaling relations and their current fits"),
        (name = "place", description = "Where objects fall against the relations"),
        (name = "planning", description = "Ranking candidates by the probability that an instrument resolves their sphere of influence"),
        (name = "galaxies", description = "The catalog's galaxies and measurements"),
        (name = "fit", description = "Fitting a sample of your own"),
        (name = "catalog", description = "The accepted catalog as a file"),
        (name = "submissions", description = "Submitting measurements for review"),
        (name = "account", description = "The caller"),
        (name = "meta", description = "This document"),
    )
)]
pub struct ApiDoc;

/// The document as JSON text, built once.
pub fn document_json() -> &'static str {
    static TEXT: OnceLock<String> = OnceLock::new();
    TEXT.get_or_init(|| ApiDoc::openapi().to_pretty_json().unwrap_or_default())
}

/// The OpenAPI 3.1 document of this API.
#[utoipa::path(
    get,
    path = "/api/v1/openapi.json",
    tag = "meta",
    operation_id = "openapi_document",
    responses(
        (status = 200, description = "The OpenAPI 3.1 document", body = Object, content_type = "application/json"),
        (status = 429, description = "Too many requests from this account (or, without one, this address)", body = Problem, content_type = "application/problem+json"),
    )
)]
pub async fn openapi_json() -> Response {
    (
        [(header::CONTENT_TYPE, "application/json")],
        document_json(),
    )
        .into_response()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn the_document_is_openapi_3_1_with_the_problem_schema() {
        let doc: serde_json::Value = serde_json::from_str(document_json()).unwrap();
        assert_eq!(doc["openapi"], "3.1.0");
        assert!(doc["components"]["schemas"]["Problem"].is_object());
        assert_eq!(
            doc["components"]["securitySchemes"]["bearer"]["scheme"],
            "bearer"
        );
    }

    #[test]
    fn the_galaxy_and_place_answers_document_the_mass_ratio() {
        let doc: serde_json::Value = serde_json::from_str(document_json()).unwrap();
        let schemas = &doc["components"]["schemas"];
        for answer in ["GalaxyAnswer", "PlaceAnswer"] {
            let field = &schemas[answer]["properties"]["bulge_ratio"];
            assert!(field.is_object(), "{answer} has no bulge_ratio: {field}");
        }
        let ratio = &schemas["BulgeRatioAnswer"];
        for key in ["percent", "range_verdict", "relation", "sentence"] {
            assert!(ratio["properties"][key].is_object(), "{key}: {ratio}");
        }
        let text = ratio.to_string();
        assert!(text.contains("common practice"), "{text}");
        assert!(
            schemas["RelationRatioAnswer"]["properties"]["fit_id"].is_object(),
            "{schemas}"
        );
    }
}
