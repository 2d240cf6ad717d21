"""Signatures and the sign-off block of an audit record.

Two seals, two purposes:

* ``content_sha256`` (see :func:`forecastaudit.record.document.content_digest`) is an
  unkeyed digest of the whole record. It catches accidental edits and truncation. Anyone can
  recompute it, so it proves nothing about who wrote the record.
* ``signatures`` holds Ed25519 signatures (RFC 8032, through the ``cryptography`` package),
  each over the record's canonical JSON without ``content_sha256`` and ``signatures`` (so
  the sign-off block is covered) together with the signer's key id, algorithm and time. A
  valid signature from a key the reader trusts proves that the holder of the private key
  signed exactly this content; it does not prove that the audit was run honestly, that the
  key was kept safe, or that the model is fit for purpose.

Keys are PEM files: the private key in PKCS #8, the public key as SubjectPublicKeyInfo.
"""

from __future__ import annotations

import base64
import copy
import datetime as _dt
import hashlib
import json
import os
from collections.abc import Iterable, Mapping
from pathlib import Path
from typing import TYPE_CHECKING, Any, Union

from forecastaudit.errors import RecordError

if TYPE_CHECKING:
    from cryptography.hazmat.primitives.asymmetric.ed25519 import (
        Ed25519PrivateKey,
        Ed25519PublicKey,
    )

__all__ = [
    "DECISIONS",
    "add_signoff",
    "check_decision",
    "generate_key_pair",
    "key_id",
    "load_private_key",
    "load_public_key",
    "sign_record",
    "signed_body_sha256",
    "signed_by",
    "signoff_block",
    "verify_signatures",
]

ALGORITHM = "ed25519"

#: The decisions a reviewer can record in the sign-off block.
DECISIONS = ("approved", "approved-with-conditions", "rejected")

#: Fields of the record that a signature does not cover (the digest is recomputed after
#: signing; a signature cannot cover itself).
UNSIGNED_FIELDS = ("content_sha256", "signatures")

PublicKeyLike = Union["Ed25519PublicKey", str, bytes, os.PathLike[str]]


def _canonical(value: Any) -> bytes:
    return json.dumps(value, sort_keys=True, separators=(",", ":"), allow_nan=False).encode("utf-8")


def _signed_body(record: Mapping[str, Any]) -> dict[str, Any]:
    return {k: v for k, v in record.items() if k not in UNSIGNED_FIELDS}


def signed_body_sha256(record: Mapping[str, Any]) -> str:
    """SHA-256 of the part of ``record`` that signatures cover (all but the seal and the
    signatures), in canonical JSON.

    Unlike the seal (``content_sha256``), it does not change when the record is signed, so a
    sign-off sheet written before signing names the same value as the signed record.
    """
    return hashlib.sha256(_canonical(_signed_body(record))).hexdigest()


def _message(record: Mapping[str, Any], signer: Mapping[str, Any]) -> bytes:
    """The exact bytes a signature is over: the record body and the signer's metadata."""
    return _canonical({"record": _signed_body(record), "signer": dict(signer)})


# ---------------------------------------------------------------------- keys
def _raw_public(public: Ed25519PublicKey) -> bytes:
    from cryptography.hazmat.primitives import serialization

    return public.public_bytes(serialization.Encoding.Raw, serialization.PublicFormat.Raw)


def key_id(public: Ed25519PublicKey) -> str:
    """A short, stable name of a public key: the first 16 hex digits of SHA-256 of its bytes."""
    return hashlib.sha256(_raw_public(public)).hexdigest()[:16]


def generate_key_pair(
    private_path: str | os.PathLike[str], public_path: str | os.PathLike[str]
) -> str:
    """Create an Ed25519 key pair and write it as two PEM files; returns the key id.

    The private key file is created with permissions 0600 (owner only) whatever the umask,
    because anyone who can read it can sign records in the reviewer's name. Existing files
    are never overwritten.

    Raises
    ------
    RecordError
        When either file exists already or cannot be written.
    """
    from cryptography.hazmat.primitives import serialization
    from cryptography.hazmat.primitives.asymmetric.ed25519 import Ed25519PrivateKey

    private_path, public_path = Path(private_path), Path(public_path)
    for path in (private_path, public_path):
        if path.exists():
            raise RecordError(
                f"{path} exists already; keys are never overwritten. Choose another file name "
                "or move the old key away first."
            )
    key = Ed25519PrivateKey.generate()
    private_pem = key.private_bytes(
        serialization.Encoding.PEM,
        serialization.PrivateFormat.PKCS8,
        serialization.NoEncryption(),
    )
    public_pem = key.public_key().public_bytes(
        serialization.Encoding.PEM, serialization.PublicFormat.SubjectPublicKeyInfo
    )
    try:
        fd = os.open(private_path, os.O_WRONLY | os.O_CREAT | os.O_EXCL, 0o600)
        with os.fdopen(fd, "wb") as handle:
            handle.write(private_pem)
        try:
            public_path.write_bytes(public_pem)
        except OSError:
            private_path.unlink(missing_ok=True)
            raise
    except OSError as exc:
        raise RecordError(f"Cannot write the key pair: {exc}. Choose a writable folder.") from exc
    return key_id(key.public_key())


def load_private_key(source: str | bytes | os.PathLike[str]) -> Ed25519PrivateKey:
    """An Ed25519 private key from a PEM file path or PEM bytes.

    Raises
    ------
    RecordError
        When the file cannot be read or is not an unencrypted Ed25519 private key.
    """
    from cryptography.hazmat.primitives import serialization
    from cryptography.hazmat.primitives.asymmetric.ed25519 import Ed25519PrivateKey

    data, where = _pem(source, "private key")
    try:
        key = serialization.load_pem_private_key(data, password=None)
    except (ValueError, TypeError) as exc:
        raise RecordError(
            f"{where} is not a readable, unencrypted PEM private key ({exc}). Give the file "
            "written by 'forecastaudit new-key'."
        ) from None
    if not isinstance(key, Ed25519PrivateKey):
        raise RecordError(
            f"{where} is not an Ed25519 key; create one with 'forecastaudit new-key'."
        )
    return key


def load_public_key(source: PublicKeyLike) -> Ed25519PublicKey:
    """An Ed25519 public key from a key object, a PEM file path or PEM bytes.

    Raises
    ------
    RecordError
        When the source cannot be read or is not an Ed25519 public key.
    """
    from cryptography.hazmat.primitives import serialization
    from cryptography.hazmat.primitives.asymmetric.ed25519 import Ed25519PublicKey

    if isinstance(source, Ed25519PublicKey):
        return source
    data, where = _pem(source, "public key")
    try:
        key = serialization.load_pem_public_key(data)
    except (ValueError, TypeError) as exc:
        raise RecordError(
            f"{where} is not a readable PEM public key ({exc}). Give the '.pub.pem' file "
            "written by 'forecastaudit new-key'."
        ) from None
    if not isinstance(key, Ed25519PublicKey):
        raise RecordError(
            f"{where} is not an Ed25519 key; create one with 'forecastaudit new-key'."
        )
    return key


def _pem(source: Any, what: str) -> tuple[bytes, str]:
    if isinstance(source, bytes):
        return source, f"the {what} given"
    if isinstance(source, str) and source.lstrip().startswith("-----BEGIN"):
        return source.encode("ascii", "replace"), f"the {what} given"
    if isinstance(source, str | os.PathLike):
        path = Path(source)
        try:
            data = path.read_bytes()
        except OSError as exc:
            raise RecordError(f"Cannot read the {what} {path}: {exc}.") from None
        if len(data) > 64_000:
            raise RecordError(f"{path} is too large to be a {what}; give the PEM key file.")
        return data, str(path)
    raise RecordError(
        f"A {what} must be a PEM file path, PEM bytes or a key object, not {type(source).__name__}."
    )


# ---------------------------------------------------------------------- sign-off
def signoff_block(
    *,
    reviewer: str,
    decision: str,
    policy_reference: str,
    comments: str = "",
    date: str | None = None,
) -> dict[str, str]:
    """The sign-off block, checked (see :func:`add_signoff` for the fields).

    Raises
    ------
    RecordError
        When a field is empty or of the wrong type, or the decision is not one of
        :data:`DECISIONS`.
    """
    for name, value in (
        ("reviewer", reviewer),
        ("policy_reference", policy_reference),
    ):
        if not isinstance(value, str) or not value.strip():
            raise RecordError(f"The sign-off needs a {name} (a non-empty text).")
    if not isinstance(comments, str):
        raise RecordError("The sign-off comments must be a text (use '' for none).")
    if decision not in DECISIONS:
        raise RecordError(
            f"The sign-off decision must be one of {', '.join(DECISIONS)}, not {decision!r}."
        )
    if date is None:
        date = _dt.datetime.now(_dt.UTC).date().isoformat()
    try:
        _dt.date.fromisoformat(str(date))
    except ValueError:
        raise RecordError(
            f"The sign-off date must be an ISO 8601 date such as 2026-12-03, not {date!r}."
        ) from None
    if len(str(date)) != 10:
        raise RecordError(f"The sign-off date must be written YYYY-MM-DD, not {date!r}.")
    return {
        "reviewer": reviewer.strip(),
        "date": str(date),
        "decision": decision,
        "policy_reference": policy_reference.strip(),
        "comments": comments,
    }


def check_decision(block: Mapping[str, str], verdict: str) -> None:
    """Refuse a decision that needs words it does not have.

    Approval with conditions must state the conditions, and approving an audit whose
    verdict is ``fail`` must say why the failure is accepted: both in ``comments``.

    Raises
    ------
    RecordError
        When the comments are empty in either case.
    """
    if block.get("comments", "").strip():
        return
    if block.get("decision") == "approved-with-conditions":
        raise RecordError(
            "An approval with conditions must state them: give the conditions in comments "
            "(--comments on the command line)."
        )
    if verdict == "fail" and block.get("decision") == "approved":
        raise RecordError(
            "This audit's verdict is fail; approving it must say why the failure is accepted "
            "(comments, --comments on the command line), or the decision is "
            "approved-with-conditions or rejected."
        )


def add_signoff(
    record: Mapping[str, Any],
    *,
    reviewer: str,
    decision: str,
    policy_reference: str,
    comments: str = "",
    date: str | None = None,
) -> dict[str, Any]:
    """A copy of ``record`` with its sign-off block filled in (the input is not changed).

    Parameters
    ----------
    record : dict
        A validated audit record (see :func:`forecastaudit.load_record`).
    reviewer : str
        Who reviewed the audit (name, and role if the policy asks for it).
    decision : {"approved", "approved-with-conditions", "rejected"}
        The reviewer's decision.
    policy_reference : str
        The model-risk policy (and section) the review was done under.
    comments : str
        Conditions, reservations or notes.
    date : str, optional
        ISO 8601 date of the decision (default: today, UTC).

    Raises
    ------
    RecordError
        When a field is empty or of the wrong type, the decision is not one of
        :data:`DECISIONS`, the record is already signed (a sign-off added afterwards would
        not be covered by those signatures; add it first, then sign), or the decision needs
        comments it does not have (see :func:`check_decision`).
    """
    from forecastaudit.record.document import content_digest, validate_record

    block = signoff_block(
        reviewer=reviewer,
        decision=decision,
        policy_reference=policy_reference,
        comments=comments,
        date=date,
    )
    if record.get("signatures"):
        raise RecordError(
            "This record is signed already; a sign-off added now would not be covered by its "
            "signatures. Add the sign-off to the unsigned record, then sign it."
        )
    if record.get("signoff") is not None:
        raise RecordError(
            "This record has a sign-off already; a record is signed off once. Re-run the "
            "audit for a new review."
        )
    check_decision(block, str(record.get("verdict", "")))
    out = copy.deepcopy(dict(record))
    out["signoff"] = block
    out["content_sha256"] = content_digest(out)
    validate_record(out)
    return out


# ---------------------------------------------------------------------- signatures
def sign_record(
    record: Mapping[str, Any],
    private_key: Ed25519PrivateKey | str | bytes | os.PathLike[str],
    *,
    signed_at: str | None = None,
) -> dict[str, Any]:
    """A copy of ``record`` with one more Ed25519 signature (the input is not changed).

    The signature covers everything except ``content_sha256`` and ``signatures``, including
    the sign-off block. The record is checked against its schema and seal first: a record
    that was changed after it was written is refused rather than signed.

    Raises
    ------
    RecordError
        When the record is invalid or its seal does not match, the key is not an Ed25519
        private key, or the same key signed it already.
    """
    from cryptography.hazmat.primitives.asymmetric.ed25519 import Ed25519PrivateKey

    from forecastaudit.record.document import check_seal, content_digest, validate_record

    validate_record(dict(record))
    check_seal(record, "The record")
    key = (
        private_key if isinstance(private_key, Ed25519PrivateKey) else load_private_key(private_key)
    )
    kid = key_id(key.public_key())
    existing = list(record.get("signatures") or [])
    if any(s.get("key_id") == kid for s in existing):
        raise RecordError(f"Key {kid} has signed this record already.")
    signer = {
        "algorithm": ALGORITHM,
        "key_id": kid,
        "signed_at": signed_at
        or _dt.datetime.now(_dt.UTC).replace(microsecond=0).isoformat().replace("+00:00", "Z"),
    }
    signature = key.sign(_message(record, signer))
    out = copy.deepcopy(dict(record))
    out["signatures"] = [
        *existing,
        {**signer, "signature": base64.b64encode(signature).decode("ascii")},
    ]
    out["content_sha256"] = content_digest(out)
    validate_record(out)
    return out


def _trusted(keys: Iterable[PublicKeyLike] | PublicKeyLike) -> dict[str, Ed25519PublicKey]:
    if isinstance(keys, str | bytes | os.PathLike) or not isinstance(keys, Iterable):
        keys = [keys]  # type: ignore[list-item]
    loaded = {}
    for source in keys:  # type: ignore[union-attr]
        public = load_public_key(source)
        loaded[key_id(public)] = public
    if not loaded:
        raise RecordError(
            "trusted_keys is empty: give at least one reviewer's public key, or leave it "
            "out to skip signature checks."
        )
    return loaded


def verify_signatures(
    record: Mapping[str, Any],
    trusted_keys: Iterable[PublicKeyLike] | PublicKeyLike,
    *,
    where: str = "The record",
) -> list[str]:
    """Check a record's signatures against trusted public keys; returns the trusted signers.

    Signatures by keys not in ``trusted_keys`` are ignored (they are neither trusted nor
    refused). At least one signature by a trusted key must be present and valid.

    Raises
    ------
    RecordError
        When the record carries no signature, none by a trusted key, or a signature by a
        trusted key that does not match the content (the record was changed after signing).
    """
    from cryptography.exceptions import InvalidSignature

    keys = _trusted(trusted_keys)
    signatures = record.get("signatures") or []
    if not signatures:
        raise RecordError(
            f"{where} is not signed, and signatures are required. Ask the reviewer to sign it "
            "with 'forecastaudit sign', or use the signed original."
        )
    good: list[str] = []
    for entry in signatures:
        kid = entry.get("key_id")
        if kid not in keys:
            continue
        signer = {k: entry.get(k) for k in ("algorithm", "key_id", "signed_at")}
        try:
            raw = base64.b64decode(str(entry.get("signature", "")), validate=True)
            keys[kid].verify(raw, _message(record, signer))
        except (InvalidSignature, ValueError):
            raise RecordError(
                f"{where} was changed after key {kid} signed it: the signature does not match "
                "its content. Use the signed original, or have the new record reviewed and "
                "signed."
            ) from None
        good.append(kid)
    if not good:
        seen = ", ".join(str(s.get("key_id")) for s in signatures)
        raise RecordError(
            f"{where} is signed only by keys that are not trusted ({seen}). Add the "
            "reviewer's public key to the trusted keys, or use a record signed by a trusted "
            "reviewer."
        )
    return good


def signed_by(record: Mapping[str, Any]) -> list[str]:
    """The key ids that claim to have signed ``record`` (not verified; see
    :func:`verify_signatures`)."""
    return [str(s.get("key_id")) for s in record.get("signatures") or []]
