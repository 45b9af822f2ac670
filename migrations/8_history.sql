-- History: the catalog of any version since this migration can be rebuilt, so every fit made
-- at that version can be made again, byte for byte.
--
-- What a fit reads is a galaxy's properties (galaxy) and its adopted values (adopted_value).
-- Both tables keep holding the current state; triggers copy every change into a span table
-- that says from which catalog version a state held and until which (exclusive; null while it
-- still holds). Spans are never deleted, and the only change a span may see is its end being
-- set once. A writer bumps the catalog version *before* it changes anything in its
-- transaction (catalog::history::bump_version), so a change's span starts at the version that
-- made it.
--
-- A state is in force at version N when valid_from_version <= N and (valid_until_version is
-- null or valid_until_version > N). A span whose end equals its start never held at any
-- version (a value replaced within the transaction that adopted it).

alter table catalog_state add column history_from_version integer not null default 0
    check (history_from_version >= 0);
-- History starts at the version current now: earlier versions cannot be rebuilt.
update catalog_state set history_from_version = catalog_version;

-- When each catalog version was made (the time an export of it names).
create table catalog_version_made (
    -- the version
    catalog_version integer primary key check (catalog_version >= 0),
    -- when it became current (RFC 3339 UTC)
    made_at text not null default (strftime('%Y-%m-%dT%H:%M:%fZ', 'now'))
) strict;
insert into catalog_version_made (catalog_version, made_at)
    select catalog_version, changed_at from catalog_state;
create trigger catalog_version_made_on_bump after update of catalog_version on catalog_state
when new.catalog_version <> old.catalog_version
begin
    insert or ignore into catalog_version_made (catalog_version) values (new.catalog_version);
end;

-- A galaxy's properties over the versions.
create table galaxy_span (
    -- key
    galaxy_span_id integer primary key,
    -- the galaxy
    galaxy_id integer not null references galaxy (galaxy_id),
    -- the galaxy's name, URL form, kinds and adopted distance while the span holds
    -- (columns as in galaxy)
    name text not null,
    slug text not null,
    morphology text not null,
    bulge_kind text not null,
    centre_kind text not null,
    distance_mpc real not null,
    distance_err_mpc real not null,
    distance_method text not null,
    -- first catalog version at which this state holds
    valid_from_version integer not null check (valid_from_version >= 0),
    -- first catalog version at which it no longer holds; null while it holds
    valid_until_version integer check (valid_until_version is null
                                       or valid_until_version >= valid_from_version)
) strict;
create index galaxy_span_by_galaxy on galaxy_span (galaxy_id, valid_from_version);
create index galaxy_span_open on galaxy_span (galaxy_id) where valid_until_version is null;

-- Which measurement was adopted for a galaxy, quantity and band, over the versions.
create table adopted_value_span (
    -- key
    adopted_value_span_id integer primary key,
    -- the galaxy
    galaxy_id integer not null references galaxy (galaxy_id),
    -- the quantity adopted
    quantity text not null,
    -- photometric band for luminosities, empty otherwise
    band text not null,
    -- the measurement adopted
    measurement_id integer not null references measurement (measurement_id),
    -- first catalog version at which it is the adopted one
    valid_from_version integer not null check (valid_from_version >= 0),
    -- first catalog version at which it no longer is; null while it is
    valid_until_version integer check (valid_until_version is null
                                       or valid_until_version >= valid_from_version)
) strict;
create index adopted_value_span_by_galaxy
    on adopted_value_span (galaxy_id, quantity, band, valid_from_version);
create index adopted_value_span_by_version on adopted_value_span (valid_from_version);
create index adopted_value_span_by_end on adopted_value_span (valid_until_version);
create index adopted_value_span_quantity_band on adopted_value_span (quantity, band);

-- The history as it stands when it starts.
insert into galaxy_span (galaxy_id, name, slug, morphology, bulge_kind, centre_kind,
                         distance_mpc, distance_err_mpc, distance_method, valid_from_version)
    select galaxy_id, name, slug, morphology, bulge_kind, centre_kind, distance_mpc,
           distance_err_mpc, distance_method,
           (select catalog_version from catalog_state where catalog_state_id = 1)
      from galaxy;
insert into adopted_value_span (galaxy_id, quantity, band, measurement_id, valid_from_version)
    select galaxy_id, quantity, band, measurement_id,
           (select catalog_version from catalog_state where catalog_state_id = 1)
      from adopted_value;

-- Spans are append-only but for their end, set once.
create trigger galaxy_span_end_only before update on galaxy_span
when old.valid_until_version is not null
  or new.galaxy_span_id <> old.galaxy_span_id or new.galaxy_id <> old.galaxy_id
  or new.name <> old.name or new.slug <> old.slug or new.morphology <> old.morphology
  or new.bulge_kind <> old.bulge_kind or new.centre_kind <> old.centre_kind
  or new.distance_mpc <> old.distance_mpc or new.distance_err_mpc <> old.distance_err_mpc
  or new.distance_method <> old.distance_method
  or new.valid_from_version <> old.valid_from_version
begin
    select raise(abort, 'galaxy_span keeps history: only the end of an open span may be set');
end;
create trigger galaxy_span_no_delete before delete on galaxy_span
begin
    select raise(abort, 'galaxy_span keeps history and is never deleted from');
end;
create trigger adopted_value_span_end_only before update on adopted_value_span
when old.valid_until_version is not null
  or new.adopted_value_span_id <> old.adopted_value_span_id or new.galaxy_id <> old.galaxy_id
  or new.quantity <> old.quantity or new.band <> old.band
  or new.measurement_id <> old.measurement_id
  or new.valid_from_version <> old.valid_from_version
begin
    select raise(abort, 'adopted_value_span keeps history: only the end of an open span may be set');
end;
create trigger adopted_value_span_no_delete before delete on adopted_value_span
begin
    select raise(abort, 'adopted_value_span keeps history and is never deleted from');
end;

-- Every change of the current state opens a span (and closes the one it replaces).
create trigger galaxy_span_on_insert after insert on galaxy
begin
    insert into galaxy_span (galaxy_id, name, slug, morphology, bulge_kind, centre_kind,
                             distance_mpc, distance_err_mpc, distance_method, valid_from_version)
    values (new.galaxy_id, new.name, new.slug, new.morphology, new.bulge_kind, new.centre_kind,
            new.distance_mpc, new.distance_err_mpc, new.distance_method,
            (select catalog_version from catalog_state where catalog_state_id = 1));
end;
create trigger galaxy_span_on_update
after update of name, slug, morphology, bulge_kind, centre_kind, distance_mpc,
                distance_err_mpc, distance_method on galaxy
begin
    update galaxy_span
       set valid_until_version = (select catalog_version from catalog_state where catalog_state_id = 1)
     where galaxy_id = old.galaxy_id and valid_until_version is null;
    insert into galaxy_span (galaxy_id, name, slug, morphology, bulge_kind, centre_kind,
                             distance_mpc, distance_err_mpc, distance_method, valid_from_version)
    values (new.galaxy_id, new.name, new.slug, new.morphology, new.bulge_kind, new.centre_kind,
            new.distance_mpc, new.distance_err_mpc, new.distance_method,
            (select catalog_version from catalog_state where catalog_state_id = 1));
end;
create trigger galaxy_no_delete before delete on galaxy
begin
    select raise(abort, 'a galaxy is never deleted: past catalog versions refer to it');
end;
create trigger adopted_value_span_on_insert after insert on adopted_value
begin
    insert into adopted_value_span (galaxy_id, quantity, band, measurement_id, valid_from_version)
    values (new.galaxy_id, new.quantity, new.band, new.measurement_id,
            (select catalog_version from catalog_state where catalog_state_id = 1));
end;
create trigger adopted_value_span_on_update after update of measurement_id on adopted_value
when new.measurement_id <> old.measurement_id
begin
    update adopted_value_span
       set valid_until_version = (select catalog_version from catalog_state where catalog_state_id = 1)
     where galaxy_id = old.galaxy_id and quantity = old.quantity and band = old.band
       and valid_until_version is null;
    insert into adopted_value_span (galaxy_id, quantity, band, measurement_id, valid_from_version)
    values (new.galaxy_id, new.quantity, new.band, new.measurement_id,
            (select catalog_version from catalog_state where catalog_state_id = 1));
end;
create trigger adopted_value_span_on_delete after delete on adopted_value
begin
    update adopted_value_span
       set valid_until_version = (select catalog_version from catalog_state where catalog_state_id = 1)
     where galaxy_id = old.galaxy_id and quantity = old.quantity and band = old.band
       and valid_until_version is null;
end;

-- Named releases: a version the group quotes by name (e.g. in a paper).
create table catalog_release (
    -- key
    catalog_release_id integer primary key,
    -- the name, e.g. '2027A': letters, digits, '.', '-', '_'
    name text not null unique check (length(name) between 1 and 40
                                     and name not glob '*[^A-Za-z0-9._-]*'),
    -- the catalog version released
    catalog_version integer not null check (catalog_version >= 0),
    -- what the release is for
    note text not null default '' check (length(note) <= 2000),
    -- the admin who named it
    account_id integer references account (account_id),
    -- when it was named
    created_at text not null default (strftime('%Y-%m-%dT%H:%M:%fZ', 'now'))
) strict;
create index catalog_release_by_version on catalog_release (catalog_version);

-- Fits that were shown with an identifier to cite: what determines each, and its result when
-- first computed, so a later visit can recompute it and check.
create table cited_fit (
    -- the identifier (catalog::citations::fit_id)
    fit_id text primary key check (length(fit_id) between 8 and 80),
    -- relation slug
    relation text not null check (length(relation) between 1 and 64),
    -- estimator name
    method text not null check (length(method) between 1 and 64),
    -- the sample filter, canonical text
    sample_filter text not null check (length(sample_filter) <= 2000),
    -- pivots, log10 units of the host properties (the second for the plane)
    pivot_log real not null,
    pivot2_log real not null,
    -- the catalog version fitted
    catalog_version integer not null check (catalog_version >= 0),
    -- the fitting code's version
    code_version text not null check (length(code_version) between 1 and 40),
    -- the fitted parameters as first computed (JSON)
    result_json text not null,
    -- when it was first shown
    created_at text not null default (strftime('%Y-%m-%dT%H:%M:%fZ', 'now'))
) strict;
