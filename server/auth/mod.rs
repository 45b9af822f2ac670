//! Who is asking, and what they may do.
//!
//! * [`Role`]: member ⊂ reviewer ⊂ admin. Members read and submit, reviewers also accept or
//!   reject (never their own submission, [`may_review`]), admins also manage accounts.
//! * [`Principal`]: the result of authenticating one request: nobody, a browser session, an API
//!   token, or a token that was presented but is not valid.
//! * [`Access`]: what a route asks of the principal; `startup::route_table` pairs every route with one,
//!   and `tests/access.toml` lists the expected answer for every route and kind of principal.
//! * [`password`]: Argon2id hashing off the async runtime, at most two at a time; the password
//!   rules. [`secret`]: session ids, anti-forgery tokens and API tokens. [`clock`]: the clock the
//!   session limits are measured with (tests move it). [`middleware`]: the layers that
//!   authenticate, limit rates, guard routes and refuse forged requests. [`rate`]: requests
//!   per minute per account or client address. [`accounts`]: creating an account (the
//!   `massline user add` command and the demo accounts).

pub mod accounts;
pub mod clock;
pub mod login;
pub mod middleware;
pub mod password;
pub mod rate;
pub mod secret;

use std::fmt;
use std::str::FromStr;

use crate::catalog::accounts::FailurePolicy;
use crate::catalog::galaxies::Unreviewed;

/// Idle limit of a member's or reviewer's session (ASVS 7.3.1; 15–30 min is the range the OWASP
/// Session Management Cheat Sheet gives for low-risk applications).
pub const IDLE_LIMIT_S: i64 = 30 * 60;
/// Idle limit of an admin's session (shorter: an admin session can change accounts).
pub const ADMIN_IDLE_LIMIT_S: i64 = 15 * 60;
/// Absolute limit of any session: a working day (ASVS 7.3.2; OWASP gives 4–8 h).
pub const ABSOLUTE_LIMIT_S: i64 = 8 * 3600;
/// A session's last-seen time is written at most this often (saves a write per page view).
pub const TOUCH_EVERY_S: i64 = 30;
/// Failed logins: at most 5 per name within 15 minutes, then a lock of 15 minutes that doubles
/// with each lock in a row (at most a day); at most 20 failures per client address within 15 min.
pub const FAILURE_POLICY: FailurePolicy = FailurePolicy {
    window_s: 15 * 60,
    max_per_name: 5,
    max_per_ip: 20,
    base_lock_s: 15 * 60,
    max_lock_s: 24 * 3600,
};

/// What an account may do. Each role includes the ones before it.
#[derive(Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord, Hash)]
pub enum Role {
    /// Reads the catalog, submits measurements, withdraws own pending submissions.
    Member,
    /// Also accepts or rejects submissions (never their own).
    Reviewer,
    /// Also manages accounts and reads the audit log.
    Admin,
}

impl Role {
    /// Every role, lowest first.
    pub const ALL: [Role; 3] = [Role::Member, Role::Reviewer, Role::Admin];

    /// The stored word.
    pub fn as_str(self) -> &'static str {
        match self {
            Self::Member => "member",
            Self::Reviewer => "reviewer",
            Self::Admin => "admin",
        }
    }

    /// Whether this role includes `other` (admin includes reviewer includes member).
    pub fn includes(self, other: Role) -> bool {
        self >= other
    }

    /// The idle limit of a session of this role, in seconds.
    pub fn idle_limit_s(self) -> i64 {
        match self {
            Self::Admin => ADMIN_IDLE_LIMIT_S,
            _ => IDLE_LIMIT_S,
        }
    }
}

impl fmt::Display for Role {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.pad(self.as_str())
    }
}

impl FromStr for Role {
    type Err = String;
    fn from_str(s: &str) -> Result<Self, String> {
        match s {
            "member" => Ok(Self::Member),
            "reviewer" => Ok(Self::Reviewer),
            "admin" => Ok(Self::Admin),
            _ => Err("the role must be member, reviewer or admin".into()),
        }
    }
}

/// What an API token may be used for.
#[derive(Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord, Hash)]
pub enum Scope {
    /// Read pages and GET endpoints.
    Read,
    /// Submit measurements (the write endpoints check it).
    Submit,
}

impl Scope {
    /// Every scope.
    pub const ALL: [Scope; 2] = [Scope::Read, Scope::Submit];

    /// The stored word.
    pub fn as_str(self) -> &'static str {
        match self {
            Self::Read => "read",
            Self::Submit => "submit",
        }
    }

    /// Parse a space-separated stored list; unknown words are an error.
    ///
    /// # Errors
    /// When a word is not a scope.
    pub fn parse_list(text: &str) -> Result<Vec<Scope>, String> {
        let mut scopes = Vec::new();
        for word in text.split_whitespace() {
            let scope = match word {
                "read" => Scope::Read,
                "submit" => Scope::Submit,
                other => return Err(format!("'{other}' is not a token scope (read, submit)")),
            };
            if !scopes.contains(&scope) {
                scopes.push(scope);
            }
        }
        scopes.sort();
        Ok(scopes)
    }

    /// The space-separated stored form.
    pub fn join(scopes: &[Scope]) -> String {
        scopes
            .iter()
            .map(|s| s.as_str())
            .collect::<Vec<_>>()
            .join(" ")
    }
}

/// A logged-in browser.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct SessionUser {
    /// Account key.
    pub account_id: i64,
    /// Login name.
    pub username: String,
    /// Role.
    pub role: Role,
    /// Key of the session row.
    pub session_id: i64,
    /// Anti-forgery token of this session.
    pub csrf_token: String,
}

/// A script using an API token.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct TokenUser {
    /// Account key of the owner.
    pub account_id: i64,
    /// Owner's login name.
    pub username: String,
    /// Owner's role.
    pub role: Role,
    /// Key of the token.
    pub api_token_id: i64,
    /// Scopes granted.
    pub scopes: Vec<Scope>,
}

/// Who is asking.
#[derive(Debug, Clone, PartialEq, Eq)]
pub enum Principal {
    /// Nobody logged in, no token.
    Anonymous,
    /// A browser session.
    Session(SessionUser),
    /// A valid API token.
    Token(TokenUser),
    /// An `Authorization: Bearer` header that is malformed, unknown, revoked, or whose account is
    /// disabled. Never treated as anonymous: the request is refused with 401.
    BadToken,
}

impl Principal {
    /// The account behind the request, if any.
    pub fn username(&self) -> Option<&str> {
        match self {
            Self::Session(s) => Some(&s.username),
            Self::Token(t) => Some(&t.username),
            _ => None,
        }
    }

    /// The role behind the request, if any.
    pub fn role(&self) -> Option<Role> {
        match self {
            Self::Session(s) => Some(s.role),
            Self::Token(t) => Some(t.role),
            _ => None,
        }
    }

    /// Whose unreviewed measurements (pending, or withdrawn before review) this reader may
    /// see: a reviewer or admin, by session or by token, everyone's, since reviewing them is
    /// their task; a member only their own, as on their own submission pages; a reader without
    /// an account (public read access) none.
    pub fn unreviewed_shown(&self) -> Unreviewed {
        match self {
            Self::Session(s) if s.role.includes(Role::Reviewer) => Unreviewed::All,
            Self::Token(t) if t.role.includes(Role::Reviewer) => Unreviewed::All,
            Self::Session(s) => Unreviewed::OwnOf(s.account_id),
            Self::Token(t) => Unreviewed::OwnOf(t.account_id),
            Self::Anonymous | Self::BadToken => Unreviewed::None,
        }
    }
}

/// What a route asks of the principal.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Access {
    /// Anyone: the login page, static files, the health check.
    Public,
    /// Read-only pages and GET endpoints: any session, a token with the `read` scope, or anyone
    /// when the server runs with public read access.
    Read,
    /// A logged-in browser of any role (forms that change the person's own things, logout).
    Session,
    /// A logged-in reviewer or admin (the review queue).
    Review,
    /// A logged-in admin.
    Admin,
    /// JSON endpoints about the caller: any session or any valid token.
    Api,
}

/// Why a principal may not use a route.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Denied {
    /// Nobody is logged in (pages redirect to the login page, the API answers 401).
    NotLoggedIn,
    /// The token presented is not valid (401).
    BadToken,
    /// Logged in, but not allowed (403).
    Forbidden,
}

/// Decide whether a principal may use a route.
///
/// # Errors
/// [`Denied`] says why not.
pub fn check_access(
    access: Access,
    principal: &Principal,
    public_read: bool,
) -> Result<(), Denied> {
    match (access, principal) {
        (Access::Public, _) => Ok(()),
        (_, Principal::BadToken) => Err(Denied::BadToken),
        (Access::Read, Principal::Anonymous) if public_read => Ok(()),
        (_, Principal::Anonymous) => Err(Denied::NotLoggedIn),
        (Access::Read | Access::Session | Access::Api, Principal::Session(_)) => Ok(()),
        (Access::Admin, Principal::Session(s)) => {
            if s.role.includes(Role::Admin) {
                Ok(())
            } else {
                Err(Denied::Forbidden)
            }
        }
        (Access::Review, Principal::Session(s)) => {
            if s.role.includes(Role::Reviewer) {
                Ok(())
            } else {
                Err(Denied::Forbidden)
            }
        }
        (Access::Read, Principal::Token(t)) => require_scope(&t.scopes, Scope::Read),
        (Access::Api, Principal::Token(_)) => Ok(()),
        // Forms and account management are for people in a browser, not for scripts.
        (Access::Session | Access::Review | Access::Admin, Principal::Token(_)) => {
            Err(Denied::Forbidden)
        }
    }
}

/// The guard of every token-authenticated action: the token must carry `needed`.
/// Write endpoints (submissions) call it with [`Scope::Submit`].
///
/// # Errors
/// [`Denied::Forbidden`] when the scope is missing.
pub fn require_scope(granted: &[Scope], needed: Scope) -> Result<(), Denied> {
    if granted.contains(&needed) {
        Ok(())
    } else {
        Err(Denied::Forbidden)
    }
}

/// The domain rule of reviewing: a reviewer (or admin) may accept or reject a submission, except
/// their own; a member may not review at all.
pub fn may_review(reviewer_role: Role, reviewer_account_id: i64, submitter: Option<i64>) -> bool {
    reviewer_role.includes(Role::Reviewer) && submitter != Some(reviewer_account_id)
}

/// Check a login name: 3 to 64 characters from letters a–z and A–Z, digits, '.', '_' and '-',
/// starting with a letter or digit. A narrow set keeps names readable in logs and URLs.
///
/// # Errors
/// One sentence saying what is wrong.
pub fn validate_username(name: &str) -> Result<(), String> {
    let n = name.chars().count();
    if !(3..=64).contains(&n) {
        return Err(format!(
            "The user name must be 3 to 64 characters long; it has {n}."
        ));
    }
    let ok_char = |c: char| c.is_ascii_alphanumeric() || matches!(c, '.' | '_' | '-');
    if !name.chars().all(ok_char) {
        return Err(
            "The user name may contain only letters a–z and A–Z, digits, '.', '_' and '-'.".into(),
        );
    }
    if !name.starts_with(|c: char| c.is_ascii_alphanumeric()) {
        return Err("The user name must start with a letter or a digit.".into());
    }
    Ok(())
}

/// Check a token label: 1 to 100 characters after trimming, no control characters.
///
/// # Errors
/// One sentence saying what is wrong.
pub fn validate_label(label: &str) -> Result<String, String> {
    let trimmed = label.trim();
    let n = trimmed.chars().count();
    if !(1..=100).contains(&n) {
        return Err(format!(
            "The token label must be 1 to 100 characters long; it has {n}."
        ));
    }
    if trimmed.chars().any(char::is_control) {
        return Err("The token label may not contain control characters.".into());
    }
    Ok(trimmed.to_string())
}

#[cfg(test)]
mod tests {
    use super::*;

    fn session(role: Role) -> Principal {
        Principal::Session(SessionUser {
            account_id: 1,
            username: "someone".into(),
            role,
            session_id: 1,
            csrf_token: "x".into(),
        })
    }

    fn token(scopes: &[Scope]) -> Principal {
        Principal::Token(TokenUser {
            account_id: 1,
            username: "someone".into(),
            role: Role::Admin,
            api_token_id: 1,
            scopes: scopes.to_vec(),
        })
    }

    #[test]
    fn roles_include_the_ones_below_them() {
        assert!(Role::Admin.includes(Role::Reviewer));
        assert!(Role::Admin.includes(Role::Member));
        assert!(Role::Reviewer.includes(Role::Member));
        assert!(!Role::Member.includes(Role::Reviewer));
        assert!(!Role::Reviewer.includes(Role::Admin));
        for r in Role::ALL {
            assert_eq!(r.as_str().parse::<Role>().unwrap(), r);
        }
        assert!("root".parse::<Role>().is_err());
    }

    #[test]
    fn admins_have_the_shorter_idle_limit() {
        assert_eq!(Role::Admin.idle_limit_s(), 15 * 60);
        assert_eq!(Role::Member.idle_limit_s(), 30 * 60);
        assert_eq!(Role::Reviewer.idle_limit_s(), 30 * 60);
    }

    #[test]
    fn a_reviewer_cannot_review_their_own_submission() {
        assert!(may_review(Role::Reviewer, 7, Some(8)));
        assert!(!may_review(Role::Reviewer, 7, Some(7)));
        assert!(!may_review(Role::Admin, 7, Some(7)));
        assert!(may_review(Role::Admin, 7, Some(8)));
        // A submission from the command line has no submitter; any reviewer may review it.
        assert!(may_review(Role::Reviewer, 7, None));
        assert!(!may_review(Role::Member, 7, Some(8)));
    }

    #[test]
    fn require_scope_needs_the_exact_scope() {
        assert!(require_scope(&[Scope::Read], Scope::Read).is_ok());
        assert_eq!(
            require_scope(&[Scope::Read], Scope::Submit),
            Err(Denied::Forbidden)
        );
        assert!(require_scope(&[Scope::Read, Scope::Submit], Scope::Submit).is_ok());
        assert_eq!(require_scope(&[], Scope::Read), Err(Denied::Forbidden));
    }

    #[test]
    fn scope_lists_parse_sorted_without_duplicates() {
        assert_eq!(
            Scope::parse_list("submit read submit").unwrap(),
            vec![Scope::Read, Scope::Submit]
        );
        assert_eq!(Scope::join(&[Scope::Read, Scope::Submit]), "read submit");
        assert!(Scope::parse_list("read admin").is_err());
    }

    #[test]
    fn access_rules_follow_role_and_scope() {
        use Access::*;
        let anon = Principal::Anonymous;
        assert_eq!(check_access(Public, &anon, false), Ok(()));
        assert_eq!(check_access(Read, &anon, false), Err(Denied::NotLoggedIn));
        assert_eq!(check_access(Read, &anon, true), Ok(()));
        assert_eq!(check_access(Session, &anon, true), Err(Denied::NotLoggedIn));
        assert_eq!(
            check_access(Admin, &session(Role::Reviewer), false),
            Err(Denied::Forbidden)
        );
        assert_eq!(check_access(Admin, &session(Role::Admin), false), Ok(()));
        assert_eq!(check_access(Read, &token(&[Scope::Read]), false), Ok(()));
        assert_eq!(
            check_access(Read, &token(&[Scope::Submit]), false),
            Err(Denied::Forbidden)
        );
        assert_eq!(
            check_access(Admin, &token(&[Scope::Read]), false),
            Err(Denied::Forbidden)
        );
        assert_eq!(
            check_access(Read, &Principal::BadToken, true),
            Err(Denied::BadToken)
        );
        assert_eq!(check_access(Public, &Principal::BadToken, false), Ok(()));
    }

    #[test]
    fn user_names_are_a_narrow_readable_set() {
        for ok in ["quill", "demo-admin", "j.smith_2"] {
            assert!(validate_username(ok).is_ok(), "{ok}");
        }
        for bad in [
            "ab",
            "<script>",
            "a b",
            "-lead",
            "é-accent",
            &"x".repeat(65),
        ] {
            assert!(validate_username(bad).is_err(), "{bad}");
        }
    }

    #[test]
    fn token_labels_refuse_control_characters_and_long_text() {
        assert_eq!(
            validate_label("  nightly import ").unwrap(),
            "nightly import"
        );
        assert!(validate_label("a\nb").is_err());
        assert!(validate_label("   ").is_err());
        assert!(validate_label(&"x".repeat(101)).is_err());
        assert!(validate_label("<script>alert(1)</script>").is_ok());
    }
}
