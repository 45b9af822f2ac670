-- Exported row keys reveal nothing: a stored row key may hold an account's id and that
-- account's idempotency key ('<account id>:<client key>#<n>', migration 3), or a key a member
-- chose for a file row. Exports write instead 'rk-' followed by the SHA-256 (hex) of a fixed
-- domain-separation prefix and the stored key (catalog::galaxies::public_row_key); a key that
-- already has that form is its own digest, so an export imported into an empty catalog
-- exports again to the same text.
--
-- row_key_digest holds that exported key, so a file exported earlier is recognised when it
-- comes back: importing it into the catalog it came from adds nothing. Rows stored before this
-- migration get their digest when the database is opened (SQLite has no SHA-256 of its own).
alter table measurement add column row_key_digest text
    check (row_key_digest is null
           or (length(row_key_digest) = 67 and substr(row_key_digest, 1, 3) = 'rk-'));
create unique index measurement_row_key_digest on measurement (row_key_digest)
    where row_key_digest is not null;
