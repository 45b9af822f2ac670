-- no-transaction
-- AGN masses as measured (docs/methods.md §4): a galaxy's activity class, single-epoch masses
-- as their own method, the broad-line measurements behind a virial mass, and the group's
-- adopted mean virial factor over the catalog versions.
--
-- The measurement table is rebuilt to admit the method 'single_epoch' (SQLite cannot change a
-- check constraint in place). A rebuild needs foreign keys off, which SQLite allows only
-- outside a transaction: hence `no-transaction` above and the explicit transaction below.

pragma foreign_keys = off;
begin;

-- The galaxy's nucleus: quiescent, a kind of active nucleus, or not known. A sample filter and
-- a chart marker; it changes through a new catalog version like the other properties.
alter table galaxy add column activity text not null default 'unknown'
    check (activity in ('quiescent', 'seyfert1', 'seyfert2', 'liner', 'quasar', 'radio_galaxy', 'unknown'));
alter table galaxy_span add column activity text not null default 'unknown';

drop trigger galaxy_span_end_only;
create trigger galaxy_span_end_only before update on galaxy_span
when old.valid_until_version is not null
  or new.galaxy_span_id <> old.galaxy_span_id or new.galaxy_id <> old.galaxy_id
  or new.name <> old.name or new.slug <> old.slug or new.morphology <> old.morphology
  or new.bulge_kind <> old.bulge_kind or new.centre_kind <> old.centre_kind
  or new.distance_mpc <> old.distance_mpc or new.distance_err_mpc <> old.distance_err_mpc
  or new.distance_method <> old.distance_method or new.activity <> old.activity
  or new.valid_from_version <> old.valid_from_version
begin
    select raise(abort, 'galaxy_span keeps history: only the end of an open span may be set');
end;
drop trigger galaxy_span_on_insert;
create trigger galaxy_span_on_insert after insert on galaxy
begin
    insert into galaxy_span (galaxy_id, name, slug, morphology, bulge_kind, centre_kind,
                             distance_mpc, distance_err_mpc, distance_method, activity,
                             valid_from_version)
    values (new.galaxy_id, new.name, new.slug, new.morphology, new.bulge_kind, new.centre_kind,
            new.distance_mpc, new.distance_err_mpc, new.distance_method, new.activity,
            (select catalog_version from catalog_state where catalog_state_id = 1));
end;
drop trigger galaxy_span_on_update;
create trigger galaxy_span_on_update
after update of name, slug, morphology, bulge_kind, centre_kind, distance_mpc,
                distance_err_mpc, distance_method, activity on galaxy
begin
    update galaxy_span
       set valid_until_version = (select catalog_version from catalog_state where catalog_state_id = 1)
     where galaxy_id = old.galaxy_id and valid_until_version is null;
    insert into galaxy_span (galaxy_id, name, slug, morphology, bulge_kind, centre_kind,
                             distance_mpc, distance_err_mpc, distance_method, activity,
                             valid_from_version)
    values (new.galaxy_id, new.name, new.slug, new.morphology, new.bulge_kind, new.centre_kind,
            new.distance_mpc, new.distance_err_mpc, new.distance_method, new.activity,
            (select catalog_version from catalog_state where catalog_state_id = 1));
end;

-- The measurement table, as before but for the method 'single_epoch' (a black-hole mass from
-- one spectrum through a radius–luminosity relation or a published calibration).
create table measurement_new (
    -- key
    measurement_id integer primary key,
    -- the galaxy measured
    galaxy_id integer not null references galaxy (galaxy_id),
    -- the submission it came with; its state is this measurement's status
    submission_id integer not null references submission (submission_id),
    -- what was measured
    quantity text not null check (quantity in ('bh_mass', 'sigma', 'bulge_mass', 'bulge_luminosity')),
    -- log10 of the value: M_sun for masses, km/s for sigma, L_sun (of band) for luminosity.
    -- For a virial mass, the mass for the virial factor recorded in virial_measurement
    -- (assumed_log_f): what is shown and fitted is rescaled to the adopted factor.
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
    -- reverberation / single_epoch; bulge masses dynamical / photometric; empty otherwise
    method text not null default '' check (
        (quantity = 'bh_mass' and method in ('stellar_dynamics', 'gas_dynamics', 'maser', 'reverberation', 'single_epoch'))
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
    -- the row key of migration 3
    row_key text check (row_key is null or length(row_key) between 1 and 200),
    -- SHA-256 of the row's content (migration 3)
    row_sha256 text check (row_sha256 is null or length(row_sha256) = 64),
    -- the row key's digest (migration 4)
    row_key_digest text check (row_key_digest is null
           or (length(row_key_digest) = 67 and substr(row_key_digest, 1, 3) = 'rk-')),
    -- plausible ranges of the canonical value (units.rs documents why)
    check (quantity <> 'bh_mass' or log_value between 3 and 11.5),
    check (quantity <> 'sigma' or log_value between 1.301029995663981 and 2.778151250383644),
    check (quantity <> 'bulge_mass' or log_value between 6 and 13.5),
    check (quantity <> 'bulge_luminosity' or log_value between 6 and 13.5),
    -- a limit carries no error bars
    check (upper_limit = 0 or (err_minus_dex = 0 and err_plus_dex = 0 and err_dex = 0)),
    check (upper_limit = 1 or limit_confidence_sigma is null)
) strict;
insert into measurement_new (measurement_id, galaxy_id, submission_id, quantity, log_value,
        err_minus_dex, err_plus_dex, err_dex, upper_limit, limit_confidence_sigma, method,
        sigma_definition, aperture, band, source_distance_mpc, resolution_arcsec, reference,
        note, value_text, value_scale, created_at, row_key, row_sha256, row_key_digest)
    select measurement_id, galaxy_id, submission_id, quantity, log_value, err_minus_dex,
           err_plus_dex, err_dex, upper_limit, limit_confidence_sigma, method,
           sigma_definition, aperture, band, source_distance_mpc, resolution_arcsec, reference,
           note, value_text, value_scale, created_at, row_key, row_sha256, row_key_digest
      from measurement;
drop table measurement;
alter table measurement_new rename to measurement;
create index measurement_galaxy on measurement (galaxy_id, quantity);
create index measurement_submission on measurement (submission_id);
create unique index measurement_row_key on measurement (row_key) where row_key is not null;
create unique index measurement_row_key_digest on measurement (row_key_digest)
    where row_key_digest is not null;

-- What lies behind a reverberation or single-epoch mass (docs/methods.md §4.1, §4.2):
-- the measured lag and width, and the virial factor the stored mass assumed. Written once,
-- with its measurement; never changed.
create table virial_measurement (
    -- the black-hole mass (method reverberation or single_epoch)
    measurement_id integer primary key references measurement (measurement_id),
    -- the broad line, e.g. 'Hbeta'
    line text not null check (length(line) between 1 and 20),
    -- the width measure: line dispersion or full width at half maximum
    width_definition text not null check (width_definition in ('sigma_line', 'fwhm')),
    -- the spectrum the width was measured on
    width_spectrum text not null check (width_spectrum in ('rms', 'mean', 'single')),
    -- rest-frame lag, days, with its lower and upper 1-sigma errors; null when not given
    lag_days real check (lag_days > 0 and lag_days <= 10000),
    lag_err_minus_days real check (lag_err_minus_days >= 0),
    lag_err_plus_days real check (lag_err_plus_days >= 0),
    -- the line width, km/s, with its 1-sigma error; null when not given
    width_km_s real check (width_km_s between 10 and 100000),
    width_err_km_s real check (width_err_km_s >= 0),
    -- log10 of lambda L_lambda at 5100 A (host starlight removed), erg/s, at the measurement's
    -- source distance; with its error, dex; null when not given
    log_l5100_erg_s real check (log_l5100_erg_s between 38 and 49),
    log_l5100_err_dex real check (log_l5100_err_dex between 0 and 2),
    -- log10 of the virial factor the stored mass assumed: 0 when the stored value is the virial
    -- product itself; null when the source's factor is not known (then the mass is shown as
    -- published, never rescaled)
    assumed_log_f real check (assumed_log_f between -2 and 2),
    -- how a single-epoch mass was made: 'vp06' (the published Hbeta calibration, its own
    -- factor), 'r_l_bentz13' (radius-luminosity relation and the adopted factor); '' for
    -- reverberation
    calibration text not null default '' check (calibration in ('', 'vp06', 'r_l_bentz13')),
    check (lag_days is not null or (lag_err_minus_days is null and lag_err_plus_days is null)),
    check (width_km_s is not null or width_err_km_s is null)
) strict;

-- The group's adopted mean virial factor log <f> for each width measure, over the versions:
-- in force at version N is the row of largest from_version <= N. Append-only.
create table virial_factor (
    -- key
    virial_factor_id integer primary key,
    -- the width measure it belongs to
    width_definition text not null check (width_definition in ('sigma_line', 'fwhm')),
    -- log10 <f> (f dimensionless) and its 1-sigma error, dex
    log_f real not null check (log_f between -2 and 2),
    log_f_err_dex real not null check (log_f_err_dex between 0 and 2),
    -- the first catalog version at which it is adopted
    from_version integer not null check (from_version >= 0),
    -- where it comes from: a published value, or a calibration on the catalog (what, how)
    source text not null check (length(source) between 1 and 1000),
    -- the admin who adopted it; null for the values the migration starts with
    account_id integer references account (account_id),
    -- when it was adopted
    created_at text not null default (strftime('%Y-%m-%dT%H:%M:%fZ', 'now')),
    unique (width_definition, from_version)
) strict;
create trigger virial_factor_no_update before update on virial_factor
begin
    select raise(abort, 'virial_factor keeps history: adopt a new value instead');
end;
create trigger virial_factor_no_delete before delete on virial_factor
begin
    select raise(abort, 'virial_factor keeps history and is never deleted from');
end;
-- The factors in force before any calibration on the catalog (docs/methods.md §4.3):
-- sigma_line from Grier et al. 2013, ApJ 773, 90 (from memory); FWHM from Woo et al. 2015,
-- ApJ 801, 38 (abstract).
insert into virial_factor (width_definition, log_f, log_f_err_dex, from_version, source)
values ('sigma_line', 0.64, 0.11, 0,
        'Grier et al. 2013, ApJ 773, 90: log <f> = 0.64 +/- 0.11 for the line dispersion (from memory)'),
       ('fwhm', 0.05, 0.12, 0,
        'Woo et al. 2015, ApJ 801, 38: log <f> = 0.05 +/- 0.12 for the FWHM (abstract)');

commit;
pragma foreign_keys = on;
