-- Look-alike galaxy names: "X 214", "x-214", "X_214" and "Х 214" (with a Cyrillic Х) name one
-- galaxy as far as a reader can tell. Each galaxy keeps the key its name is compared by: the name
-- in Unicode NFC, lower case, mapped to its Unicode confusables skeleton (UTS #39), with spaces,
-- punctuation and accents left out (catalog::names::name_key). SQL cannot compute the skeleton,
-- so the catalog fills the column in Rust when it opens the database (rows left null here) and
-- with every new galaxy. Not unique: a submitter may confirm that a look-alike is a new galaxy.
alter table galaxy add column name_key text check (name_key is null or length(name_key) <= 1000);
create index galaxy_by_name_key on galaxy (name_key);
