-- massline catalog schema, first version.
--
-- Conventions (DEVELOPERS.md, "Database"):
-- * tables are singular and STRICT; keys are <table>_id;
-- * every numeric column carries its unit in its name and a CHECK on its physical range;
-- * logarithmic quantities are log10 of the value in the stated unit; errors on them are in dex;
-- * timestamps are RFC 3339 UTC text written by SQLite itself (strftime below), so they sort;
-- * applied migrations are never edited: add a new numbered file instead.

-- The catalog version counts accepted changes. Fits are cached per version, so any change to
-- what is adopted must bump it (catalog::version::bump) in the same transaction.
create table catalog_state (
    -- always 1: a single-row table
    catalog_state_id integer primary key check (catalog_state_id = 1),
    -- number of accepted changes so far; starts at 0 on an empty catalog
    catalog_version integer not null default 0 check (catalog_version >= 0),
    -- when the version last changed
    changed_at text not null default (strftime('%Y-%m-%dT%H:%M:%fZ', 'now'))
) strict;
insert into catalog_state (catalog_state_id) values (1);

-- People who use the server. Filled by the accounts work; the demo load creates none.
create table account (
    -- key
    account_id integer primary key,
    -- login name, case-sensitive, unique
    username text not null unique check (length(username) between 1 and 64),
    -- argon2id PHC string
    password_hash text not null,
    -- what the account may do
    role text not null check (role in ('member', 'reviewer', 'admin')),
    -- 1 when the account may no longer log in or use tokens
    disabled integer not null default 0 check (disabled in (0, 1)),
    -- when the account was created (RFC 3339 UTC)
    created_at text not null default (strftime('%Y-%m-%dT%H:%M:%fZ', 'now')),
    -- last change of role, password or disabled flag
    updated_at text not null default (strftime('%Y-%m-%dT%H:%M:%fZ', 'now'))
) strict;

-- Tokens that scripts use instead of a session. Only a SHA-256 of the token is stored.
create table api_token (
    -- key
    api_token_id integer primary key,
    -- owner of the token
    account_id integer not null references account (account_id),
    -- the owner's own name for the token
    label text not null check (length(label) between 1 and 100),
    -- hex SHA-256 of the secret token
    token_sha256 text not null unique check (length(token_sha256) = 64),
    -- space-separated scopes, e.g. 'read submit'
    scopes text not null,
    -- when it was issued
    created_at text not null default (strftime('%Y-%m-%dT%H:%M:%fZ', 'now')),
    -- last time the token authenticated a request; null if never
    last_used_at text,
    -- when the owner or an admin revoked it; null while valid
    revoked_at text
) strict;

-- One host galaxy.
create table galaxy (
    -- key
    galaxy_id integer primary key,
    -- the name as the group writes it; unique
    name text not null unique check (length(name) between 1 and 100),
    -- URL form of the name (lowercase ASCII, digits, hyphens); unique
    slug text not null unique check (length(slug) between 1 and 100),
    -- Hubble type, coarse
    morphology text not null check (morphology in ('elliptical', 'lenticular', 'spiral', 'irregular', 'unknown')),
    -- classical bulge (or elliptical), pseudo bulge, or not known
    bulge_kind text not null check (bulge_kind in ('classical', 'pseudo', 'unknown')),
    -- inner surface-brightness profile: core (flattened) or power-law (cusp)
    centre_kind text not null check (centre_kind in ('core', 'power_law', 'unknown')),
    -- adopted distance, Mpc (0.005 Mpc admits the Galactic Centre; 2000 Mpc is z ~ 0.4;
    -- the same range as units::DISTANCE_MIN_MPC..DISTANCE_MAX_MPC)
    distance_mpc real not null check (distance_mpc between 0.005 and 2000),
    -- 1-sigma error of the adopted distance, Mpc
    distance_err_mpc real not null check (distance_err_mpc >= 0 and distance_err_mpc < distance_mpc),
    -- how the distance was measured
    distance_method text not null check (distance_method in ('sbf', 'cepheid', 'trgb', 'hubble_flow', 'maser', 'tully_fisher', 'other')),
    -- when the galaxy entered the catalog
    created_at text not null default (strftime('%Y-%m-%dT%H:%M:%fZ', 'now')),
    -- last change of its description or adopted distance
    updated_at text not null default (strftime('%Y-%m-%dT%H:%M:%fZ', 'now'))
) strict;

-- A batch of measurements someone put forward; reviewed as a whole.
create table submission (
    -- key
    submission_id integer primary key,
    -- who submitted; null for the demo load and admin imports run from the command line
    account_id integer references account (account_id),
    -- how it arrived
    source text not null check (source in ('form', 'csv', 'api', 'seed', 'import')),
    -- review state
    state text not null check (state in ('pending', 'accepted', 'rejected', 'withdrawn')),
    -- client-chosen key that makes a retried write harmless; null for pages that need none
    idempotency_key text unique,
    -- the submitter's note
    note text not null default '' check (length(note) <= 2000),
    -- when it was submitted
    created_at text not null default (strftime('%Y-%m-%dT%H:%M:%fZ', 'now')),
    -- last change of state
    updated_at text not null default (strftime('%Y-%m-%dT%H:%M:%fZ', 'now'))
) strict;

-- One measured quantity of one galaxy, as published, in canonical units.
-- Its status is the state of its submission.
create table measurement (
    -- key
    measurement_id integer primary key,
    -- the galaxy measured
    galaxy_id integer not null references galaxy (galaxy_id),
    -- the submission it came with; its state is this measurement's status
    submission_id integer not null references submission (submission_id),
    -- what was measured
    quantity text not null check (quantity in ('bh_mass', 'sigma', 'bulge_mass', 'bulge_luminosity')),
    -- log10 of the value: M_sun for masses, km/s for sigma, L_sun (of band) for luminosity
    log_value real not null,
    -- lower and upper 1-sigma errors, dex
    err_minus_dex real not null check (err_minus_dex between 0 and 2),
    err_plus_dex real not null check (err_plus_dex between 0 and 2),
    -- symmetric error used by the fits: mean of the two (common practice), dex
    err_dex real not null check (err_dex between 0 and 2),
    -- 1 when log_value is an upper limit
    upper_limit integer not null default 0 check (upper_limit in (0, 1)),
    -- confidence of an upper limit, in Gaussian sigmas (1, 2 or 3); null for detections
    limit_confidence_sigma real check (limit_confidence_sigma in (1, 2, 3)),
    -- how it was measured: black-hole masses by stellar_dynamics / gas_dynamics / maser /
    -- reverberation; bulge masses dynamical / photometric; empty otherwise
    method text not null default '' check (
        (quantity = 'bh_mass' and method in ('stellar_dynamics', 'gas_dynamics', 'maser', 'reverberation'))
        or (quantity = 'bulge_mass' and method in ('dynamical', 'photometric'))
        or (quantity in ('sigma', 'bulge_luminosity') and method = '')),
    -- for sigma: sigma_e (within the effective radius) or sigma_c (central); empty otherwise
    sigma_definition text not null default '' check (
        (quantity = 'sigma' and sigma_definition in ('sigma_e', 'sigma_c'))
        or (quantity <> 'sigma' and sigma_definition = '')),
    -- for sigma: the aperture as published (e.g. 'r_e', 'r_e/8'); free text
    aperture text not null default '' check (length(aperture) <= 100),
    -- for luminosity: the photometric band (e.g. 'V', 'K'); empty otherwise
    band text not null default '' check (
        (quantity = 'bulge_luminosity' and length(band) between 1 and 10)
        or (quantity <> 'bulge_luminosity' and band = '')),
    -- the distance the source assumed, Mpc; null when the quantity does not depend on it
    source_distance_mpc real check (source_distance_mpc between 0.005 and 2000),
    -- spatial resolution of the observation, arcsec (sphere-of-influence check); 1e-5 arcsec
    -- admits VLBI maser data (units::RESOLUTION_MIN_ARCSEC)
    resolution_arcsec real check (resolution_arcsec between 0.00001 and 10),
    -- where it was published
    reference text not null default '' check (length(reference) <= 300),
    -- free note
    note text not null default '' check (length(note) <= 2000),
    -- the value exactly as entered, e.g. '2.4e8 +0.6e8/-0.5e8'
    value_text text not null check (length(value_text) between 1 and 200),
    -- how the entered number was read: linear or log10
    value_scale text not null check (value_scale in ('linear', 'log10')),
    -- when it was stored
    created_at text not null default (strftime('%Y-%m-%dT%H:%M:%fZ', 'now')),
    -- plausible ranges of the canonical value (units.rs documents why)
    check (quantity <> 'bh_mass' or log_value between 3 and 11.5),
    check (quantity <> 'sigma' or log_value between 1.301029995663981 and 2.778151250383644),
    check (quantity <> 'bulge_mass' or log_value between 6 and 13.5),
    check (quantity <> 'bulge_luminosity' or log_value between 6 and 13.5),
    -- a limit carries no error bars
    check (upper_limit = 0 or (err_minus_dex = 0 and err_plus_dex = 0 and err_dex = 0)),
    check (upper_limit = 1 or limit_confidence_sigma is null)
) strict;
create index measurement_galaxy on measurement (galaxy_id, quantity);
create index measurement_submission on measurement (submission_id);

-- A reviewer's decision on a submission.
create table review (
    -- key
    review_id integer primary key,
    -- the submission decided on
    submission_id integer not null references submission (submission_id),
    -- the reviewer
    account_id integer not null references account (account_id),
    -- the outcome
    decision text not null check (decision in ('accepted', 'rejected')),
    -- the reviewer's reason, shown on the galaxy page
    note text not null default '' check (length(note) <= 2000),
    -- when the decision was made
    created_at text not null default (strftime('%Y-%m-%dT%H:%M:%fZ', 'now'))
) strict;

-- Which measurement the group uses for each galaxy, quantity and band.
create table adopted_value (
    -- the galaxy
    galaxy_id integer not null references galaxy (galaxy_id),
    -- the quantity adopted
    quantity text not null check (quantity in ('bh_mass', 'sigma', 'bulge_mass', 'bulge_luminosity')),
    -- photometric band for luminosities, empty otherwise
    band text not null default '',
    -- the measurement the group uses
    measurement_id integer not null unique references measurement (measurement_id),
    -- when it became the adopted one
    adopted_at text not null default (strftime('%Y-%m-%dT%H:%M:%fZ', 'now')),
    primary key (galaxy_id, quantity, band)
) strict;

-- Append-only history of everything that changed the catalog or accounts.
create table audit_event (
    -- key, increasing with time
    audit_event_id integer primary key,
    -- when it happened (RFC 3339 UTC)
    at text not null default (strftime('%Y-%m-%dT%H:%M:%fZ', 'now')),
    -- who did it; null for the system (demo load, command-line import)
    account_id integer references account (account_id),
    -- what happened, e.g. 'demo_loaded', 'submission_accepted'
    action text not null check (length(action) between 1 and 64),
    -- the kind of thing it happened to, e.g. 'galaxy', 'submission'
    entity text not null default '',
    -- its id; null when the event concerns the whole catalog
    entity_id integer,
    -- a human-readable sentence
    summary text not null default '' check (length(summary) <= 1000),
    -- the catalog version after the event
    catalog_version integer not null check (catalog_version >= 0)
) strict;
create trigger audit_event_no_update before update on audit_event
begin
    select raise(abort, 'audit_event is append-only');
end;
create trigger audit_event_no_delete before delete on audit_event
begin
    select raise(abort, 'audit_event is append-only');
end;

-- A stored fit: enough to reproduce it exactly.
create table fit_run (
    -- key
    fit_run_id integer primary key,
    -- 'm_sigma', 'm_mbulge', 'm_l_v', ...
    relation text not null check (length(relation) between 1 and 64),
    -- estimator name, e.g. 'structural'
    method text not null check (length(method) between 1 and 64),
    -- the sample filter as canonical JSON
    sample_filter text not null default '{}',
    -- pivot x0 in log10 units of the host property
    pivot_log real not null,
    -- fitted parameters (alpha, beta, eps, ... in log10 M_sun / dex) as JSON
    params_json text not null,
    -- covariance matrix with its parameter names as JSON
    cov_json text not null,
    -- detections and upper limits used
    n_detections integer not null check (n_detections >= 0),
    n_upper integer not null check (n_upper >= 0),
    -- catalog version the fit was made from
    catalog_version integer not null check (catalog_version >= 0),
    -- random seed (posterior and bootstrap runs); null for deterministic fits
    seed integer,
    -- every other setting as JSON
    settings_json text not null default '{}',
    -- when the fit was made
    created_at text not null default (strftime('%Y-%m-%dT%H:%M:%fZ', 'now'))
) strict;
create index fit_run_lookup on fit_run (relation, method, catalog_version);
