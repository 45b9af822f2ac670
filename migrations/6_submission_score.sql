-- Where each pending submission falls against the relations, computed once per catalog version
-- in the background (relations::version_analysis) so that the review queue orders and pages in
-- SQL instead of placing every pending submission at every visit. A row is a cache: it may be
-- missing or older than the catalog (the queue then shows the submission as not yet scored),
-- and it goes with its submission.
create table submission_score (
    -- the submission scored
    submission_id integer primary key references submission (submission_id) on delete cascade,
    -- catalog version whose fits it was placed against
    catalog_version integer not null check (catalog_version >= 0),
    -- largest |z| over the relations it could be placed on (0 without a mass)
    max_abs_z real not null check (max_abs_z >= 0 and max_abs_z < 1e6),
    -- 1 when it has a black-hole mass (submissions without one sort after those with one)
    has_mass integer not null check (has_mass in (0, 1))
) strict;
-- The queue's order: largest |z| first, oldest first among equals.
create index submission_score_order on submission_score (max_abs_z desc, submission_id);
