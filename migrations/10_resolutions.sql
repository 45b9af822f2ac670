-- Instrument resolutions a member keeps for planning observations (/planning, the API's
-- /api/v1/me/resolutions, docs/methods.md §4.9). Nothing else about planning is stored: the
-- candidates and the ranked plan are computed per request and never kept.
create table account_resolution (
    -- key
    account_resolution_id integer primary key,
    -- the member who keeps it; nobody else sees or deletes it
    account_id integer not null references account (account_id),
    -- the member's own name for the instrument or set-up, e.g. 'ground AO, K band'
    label text not null check (length(label) between 1 and 40),
    -- the resolution (FWHM of the point-spread function or the resolution element) in
    -- arcseconds; above 100″ nothing in a galaxy's nucleus is resolved
    arcsec real not null check (arcsec > 0 and arcsec <= 100),
    -- when it was saved (RFC 3339 UTC)
    created_at text not null default (strftime('%Y-%m-%dT%H:%M:%fZ', 'now')),
    -- a member names each resolution once
    unique (account_id, label)
) strict;
