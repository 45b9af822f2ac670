-- Accounts at work: sessions, failed logins, login locks, and the public prefix of API tokens.
--
-- Times that the server compares (session expiry, failure windows, locks) are whole seconds since
-- 1970-01-01 UTC taken from the server's clock, so tests can move that clock forward; times that
-- people read (created_at) stay RFC 3339 UTC text like everywhere else.

-- The public part of an API token ('ml_<prefix>_<secret>'), shown in lists so people can tell
-- their tokens apart; tokens made before this column existed have ''.
alter table api_token add column prefix text not null default '' check (length(prefix) in (0, 8));
create index api_token_by_account on api_token (account_id);

-- A logged-in browser. The cookie carries a random 256-bit id; only its SHA-256 is stored, so a
-- copy of the database does not let anyone take over a session.
create table session (
    -- key
    session_id integer primary key,
    -- hex SHA-256 of the id in the cookie
    id_sha256 text not null unique check (length(id_sha256) = 64),
    -- who is logged in
    account_id integer not null references account (account_id),
    -- the anti-forgery token every form of this session must carry (hex, 256 bits)
    csrf_token text not null check (length(csrf_token) = 64),
    -- when the session began (seconds since 1970 UTC); fixes the absolute expiry
    created_unix integer not null,
    -- last request seen (seconds since 1970 UTC); fixes the idle expiry
    last_seen_unix integer not null check (last_seen_unix >= created_unix),
    -- the client address at login, for the account page
    client_ip text not null default '' check (length(client_ip) <= 64)
) strict;
create index session_by_account on session (account_id);

-- One failed login. Counted per name as typed (known or not, so an unknown name behaves like a
-- known one) and per client address; rows older than the observation window are deleted.
create table login_failure (
    -- key
    login_failure_id integer primary key,
    -- the name as typed, cut to 64 characters
    username text not null check (length(username) <= 64),
    -- the peer address of the connection (never a forwarded header)
    client_ip text not null check (length(client_ip) <= 64),
    -- when (seconds since 1970 UTC)
    at_unix integer not null
) strict;
create index login_failure_by_name on login_failure (username, at_unix);
create index login_failure_by_ip on login_failure (client_ip, at_unix);

-- A temporary lock on a login name after too many failures. Each new lock lasts twice as long as
-- the one before; a successful login clears the row.
create table login_lock (
    -- the name as typed
    username text primary key check (length(username) <= 64),
    -- no login attempt for this name is checked before this time (seconds since 1970 UTC)
    locked_until_unix integer not null,
    -- how many locks in a row; the next lock lasts 2^lock_count times the base
    lock_count integer not null check (lock_count >= 1)
) strict;
