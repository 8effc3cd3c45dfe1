"""The team server's accounts and project roles (the account half of :class:`ServerStore`).

Who may do what, checked here in the core whatever calls it (the app, the `fieldtl team`
command): the server's own handle and administrators create accounts and see them all; a
project's owners grant and revoke roles on it and may list the accounts to choose from; anyone
with a role on a project sees its members; every account changes its own password, giving the
current one. A project always keeps at least one owner.
"""

from __future__ import annotations

import functools
from dataclasses import dataclass
from typing import Any

from fieldtl.errors import InputError
from fieldtl.store.errors import PermissionDenied
from fieldtl.store.pg_schema import PROJECT_ROLES
from fieldtl.store.schema import check_text, utc_now
from fieldtl.validate import NAME_CHARS, choice, echo

MIN_PASSWORD_CHARS = 10      # common practice (at least 8 is the usual floor for user-chosen passwords)
OWNER = frozenset({"owner"})
READ = frozenset(PROJECT_ROLES)


@dataclass(frozen=True, slots=True)
class Account:
    id: int
    name: str
    is_admin: bool


@dataclass(frozen=True, slots=True)
class Member:
    """An account's role on one project."""

    name: str
    role: str                  # owner | tester | reviewer
    is_admin: bool


class AccountRules:
    """Mixed into ServerStore: ``account`` (None: the server's handle), ``_database``, ``_write``, ``_guard``."""

    account: Account | None
    _database: Any

    def create_account(self, name: str, password: str, *, admin: bool = False) -> Account:
        """A new account (server handle or an admin account only); the password is stored as an Argon2 hash."""
        self._require_admin("create accounts")
        check_text(name, "account name", max_chars=NAME_CHARS, empty=False)
        check_password(password)
        with self._write() as db:  # type: ignore[attr-defined]
            if db.execute("SELECT 1 FROM users WHERE name = ?", (name,)).fetchone() is not None:
                raise InputError(f"account {echo(name)} exists already")
            row = db.execute("INSERT INTO users (name, password_hash, is_admin, created_at) VALUES (?, ?, ?, ?) "
                             "RETURNING id", (name, hasher().hash(password), bool(admin), utc_now())).fetchone()
        return Account(int(row[0]), name, bool(admin))

    def login(self, name: str, password: str) -> Any:
        """The account's handle (sharing this store's pool); PermissionDenied if name or password is wrong."""
        account = self._verified(name, password)
        return type(self)(self._database, cache_dir=self.cache_dir, max_take_bytes=self.max_take_bytes,  # type: ignore[call-arg,attr-defined]
                          account=account, owns_database=False)

    def change_password(self, current_password: str, new_password: str) -> None:
        """This account's own password; the current one must be given (PermissionDenied when wrong)."""
        if self.account is None:
            raise InputError("the server's own handle has no password; sign in to an account to change its password")
        self._verified(self.account.name, current_password)
        check_password(new_password)
        with self._write() as db:  # type: ignore[attr-defined]
            db.execute("UPDATE users SET password_hash = ? WHERE id = ?", (hasher().hash(new_password), self.account.id))

    def accounts(self) -> tuple[Account, ...]:
        """Every account by name (administrators, and owners of a project choosing whom to grant a role)."""
        with self._database.read() as db:
            if self.account is not None and not self.account.is_admin and db.execute(
                    "SELECT 1 FROM project_roles WHERE user_id = ? AND role = 'owner'", (self.account.id,)).fetchone() is None:
                raise PermissionDenied(f"account {echo(self.account.name)} may not list accounts "
                                       "(administrators and project owners only)")
            found = db.execute("SELECT id, name, is_admin FROM users ORDER BY name").fetchall()
        return tuple(Account(int(r[0]), r[1], bool(r[2])) for r in found)

    def members(self, project_id: int) -> tuple[Member, ...]:
        """The project's accounts with their roles (owners first, then by name); any role on it may ask."""
        with self._guard("list members", "project", project_id, READ), self._read() as db:  # type: ignore[attr-defined]
            self._project(db, project_id)  # type: ignore[attr-defined]
            found = db.execute("SELECT u.name, r.role, u.is_admin FROM project_roles r JOIN users u ON u.id = r.user_id "
                               "WHERE r.project_id = ? ORDER BY r.role = 'owner' DESC, u.name", (project_id,)).fetchall()
        return tuple(Member(r[0], r[1], bool(r[2])) for r in found)

    def grant(self, project_id: int, account_name: str, role: str) -> None:
        """Give ``account_name`` ``role`` on the project (replacing its role there); owners and admins only."""
        choice(role, PROJECT_ROLES, "role")
        with self._guard("grant", "project", project_id, OWNER), self._write() as db:  # type: ignore[attr-defined]
            user = self._user(db, project_id, account_name)
            if role != "owner":
                _keep_an_owner(db, project_id, user, account_name)
            db.execute("INSERT INTO project_roles (project_id, user_id, role) VALUES (?, ?, ?) "
                       "ON CONFLICT (project_id, user_id) DO UPDATE SET role = EXCLUDED.role", (project_id, user, role))

    def revoke(self, project_id: int, account_name: str) -> None:
        """Take ``account_name``'s role on the project away; owners and admins only, never the last owner."""
        with self._guard("revoke", "project", project_id, OWNER), self._write() as db:  # type: ignore[attr-defined]
            user = self._user(db, project_id, account_name)
            _keep_an_owner(db, project_id, user, account_name)
            gone = db.execute("DELETE FROM project_roles WHERE project_id = ? AND user_id = ? RETURNING role",
                              (project_id, user)).fetchone()
            if gone is None:
                raise InputError(f"account {echo(account_name)} has no role on project {project_id}")

    def role_on(self, project_id: int) -> str | None:
        """This account's role on the project (None: no role; the server handle: "owner")."""
        if self.account is None:
            return "owner"
        with self._database.read() as db:
            row = db.execute("SELECT role FROM project_roles WHERE project_id = ? AND user_id = ?",
                             (project_id, self.account.id)).fetchone()
        return None if row is None else row[0]

    def _user(self, db: Any, project_id: int, account_name: str) -> int:
        user = db.execute("SELECT id FROM users WHERE name = ?", (account_name,)).fetchone()
        if user is None:
            raise InputError(f"no account named {echo(account_name)}")
        self._project(db, project_id)  # type: ignore[attr-defined]
        return int(user[0])

    def _verified(self, name: str, password: str) -> Account:
        check = hasher()
        import argon2
        with self._database.read() as db:
            row = db.execute("SELECT id, password_hash, is_admin FROM users WHERE name = ?", (name,)).fetchone()
        try:
            if row is None:
                check.hash(password)          # as slow as a wrong password: names cannot be probed by timing
                raise argon2.exceptions.VerificationError
            check.verify(row[1], password)
        except argon2.exceptions.VerificationError:
            raise PermissionDenied("account name or password not recognised") from None
        return Account(int(row[0]), name, bool(row[2]))

    def _require_admin(self, what: str) -> None:
        if self.account is not None and not self.account.is_admin:
            raise PermissionDenied(f"account {echo(self.account.name)} may not {what} (server administrators only)")


def _keep_an_owner(db: Any, project_id: int, user: int, account_name: str) -> None:
    """Refuse to leave the project without an owner (``user`` is about to lose the owner role)."""
    owners = {r[0] for r in db.execute("SELECT user_id FROM project_roles WHERE project_id = ? AND role = 'owner'",
                                       (project_id,))}
    if owners == {user}:
        raise InputError(f"account {echo(account_name)} is the only owner of project {project_id}; "
                         "make another account owner first")


def check_password(password: Any) -> None:
    check_text(password, "password", max_chars=NAME_CHARS, empty=False)
    if len(password) < MIN_PASSWORD_CHARS:
        raise InputError(f"password: at least {MIN_PASSWORD_CHARS} characters, please")


@functools.cache
def hasher() -> Any:
    """Argon2id with argon2-cffi's current default parameters (RFC 9106)."""
    try:
        import argon2
    except ImportError:
        raise InputError("accounts need the argon2-cffi package (pip install 'fieldtl[team]')") from None
    return argon2.PasswordHasher()
