-- Idempotency: a retried request or a re-imported file row adds nothing.
--
-- submission.idempotency_key (migration 1, unique) holds '<submitter>:<client key>', so two
-- members may choose the same key. request_sha256 is the SHA-256 of the request's canonical
-- content: a retry with the same key and the same content is answered with the first
-- submission; the same key with other content is refused.
alter table submission add column request_sha256 text
    check (request_sha256 is null or length(request_sha256) = 64);

-- Every measurement stored from now on has a row key: the CSV's row_key column, or the SHA-256
-- of the row's canonical cells when that column is blank, or '<request key>#<n>' for the n-th
-- measurement of a form or API request. Exports write it, so an export re-imports to the same
-- catalog and importing it again adds nothing.
alter table measurement add column row_key text
    check (row_key is null or length(row_key) between 1 and 200);
-- SHA-256 of the row's canonical cells (hex): a row key reused for other values is refused.
alter table measurement add column row_sha256 text
    check (row_sha256 is null or length(row_sha256) = 64);
create unique index measurement_row_key on measurement (row_key) where row_key is not null;

-- Measurements stored before this migration get a key from their id.
update measurement set row_key = 'measurement-' || measurement_id where row_key is null;
