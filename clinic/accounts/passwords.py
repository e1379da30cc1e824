"""Password hashes: Argon2id through argon2-cffi; older werkzeug hashes still verify once.

``hash_password`` always makes Argon2id with ``PARAMS`` (argon2-cffi's defaults, the low-memory
profile of RFC 9106: 3 passes over 64 MiB, 4 lanes). ``verify`` answers (ok, needs_rehash):
an older hash (werkzeug's pbkdf2/scrypt, written by earlier versions into config.toml) or an
Argon2 hash with other parameters verifies and asks to be re-hashed, which sign-in does.
"""
from __future__ import annotations

import secrets
from dataclasses import dataclass

from argon2 import PasswordHasher
from argon2.exceptions import InvalidHashError, VerificationError, VerifyMismatchError

MIN_LENGTH = 8
MAX_LENGTH = 256  # a longer "password" is a paste accident or an attack on the hasher


@dataclass(frozen=True)
class Params:
    time_cost: int = 3
    memory_cost: int = 65536  # KiB
    parallelism: int = 4


PARAMS = Params()
_hashers: dict[Params, PasswordHasher] = {}


def _hasher() -> PasswordHasher:
    p = PARAMS
    h = _hashers.get(p)
    if h is None:
        h = _hashers[p] = PasswordHasher(time_cost=p.time_cost, memory_cost=p.memory_cost,
                                         parallelism=p.parallelism)
    return h


class PasswordPolicyError(ValueError):
    """A new password that is too short or too long."""


def check_policy(password: str, field: str = "password") -> str:
    if not isinstance(password, str) or len(password) < MIN_LENGTH:
        raise PasswordPolicyError(f"{field}: use at least {MIN_LENGTH} characters")
    if len(password) > MAX_LENGTH:
        raise PasswordPolicyError(f"{field}: use at most {MAX_LENGTH} characters")
    return password


def hash_password(password: str) -> str:
    """An Argon2id hash of ``password`` (policy checked by the caller: one-time passwords are long)."""
    return _hasher().hash(password)


def is_argon2(stored: str) -> bool:
    return stored.startswith("$argon2")


def verify(stored: str, password: str) -> tuple[bool, bool]:
    """(the password matches, the stored hash should be replaced by a fresh Argon2id one)."""
    if not stored or not isinstance(password, str) or len(password) > MAX_LENGTH:
        return False, False
    if is_argon2(stored):
        try:
            _hasher().verify(stored, password)
        except VerifyMismatchError:
            return False, False
        except (VerificationError, InvalidHashError):
            return False, False
        return True, _hasher().check_needs_rehash(stored)
    # An older werkzeug hash (pbkdf2:..., scrypt:...) from a config.toml account.
    from werkzeug.security import check_password_hash

    try:
        ok = check_password_hash(stored, password)
    except ValueError:  # not a hash werkzeug knows
        return False, False
    return ok, ok


def one_time_password() -> str:
    """A password to print once: 4 groups of 4 letters and digits, easy to read out and type."""
    alphabet = "abcdefghjkmnpqrstuvwxyz23456789"  # no 0/o, 1/l/i
    return "-".join("".join(secrets.choice(alphabet) for _ in range(4)) for _ in range(4))


def dummy_verify() -> None:
    """Spend the time of one verification (a user name that does not exist answers as slowly)."""
    global _DUMMY
    if _DUMMY is None or not _DUMMY.startswith(f"$argon2id$v=19$m={PARAMS.memory_cost},t={PARAMS.time_cost},"):
        _DUMMY = hash_password(secrets.token_hex(8))
    verify(_DUMMY, "x" * 12)


_DUMMY: str | None = None
