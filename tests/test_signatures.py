"""Signed records: the checksum catches edits anyone can re-digest; a signature does not.

Ed25519 is RFC 8032, used through the ``cryptography`` package.
"""

from __future__ import annotations

import copy
import json
from pathlib import Path

import pytest
from seeded_cases import optimiser_stops_short_series

import forecastaudit as fa
from forecastaudit.errors import RecordError
from forecastaudit.record.document import content_digest, dumps, load_record
from forecastaudit.record.signing import (
    add_signoff,
    generate_key_pair,
    load_public_key,
    sign_record,
    verify_signatures,
)


@pytest.fixture(scope="module")
def failing_record() -> dict:
    """A record whose verdict is fail: statsmodels stops short on this seeded series (see
    ``seeded_cases.optimiser_stops_short_series``; also asserted in test_verdict.py)."""
    return fa.audit(
        optimiser_stops_short_series(),
        fa.ModelSpec((0, 1, 1), (0, 1, 1), 12, transform="log"),
        estimators=["statsmodels-sarimax", "statsforecast"],
    ).to_dict()


@pytest.fixture(scope="module")
def keys(tmp_path_factory: pytest.TempPathFactory) -> dict[str, Path]:
    folder = tmp_path_factory.mktemp("keys")
    out = {}
    for who in ("reviewer", "stranger"):
        generate_key_pair(folder / f"{who}.pem", folder / f"{who}.pub.pem")
        out[who] = folder / f"{who}.pem"
        out[f"{who}_pub"] = folder / f"{who}.pub.pem"
    return out


def _forged(record: dict) -> dict:
    """The record edited from fail to pass, its findings removed and its digest recomputed."""
    forged = copy.deepcopy(record)
    forged["verdict"] = "pass"
    forged["findings"] = []
    forged["content_sha256"] = content_digest(forged)
    return forged


def _write(tmp_path: Path, name: str, record: dict) -> Path:
    path = tmp_path / name
    path.write_text(dumps(record), encoding="utf-8")
    return path


def test_the_failing_fixture_fails(failing_record: dict) -> None:
    assert failing_record["verdict"] == "fail"
    assert any(f["severity"] == "fail" for f in failing_record["findings"])


def test_redigested_edit_passes_the_checksum_but_not_the_signature_check(
    failing_record: dict, keys: dict[str, Path], tmp_path: Path
) -> None:
    forged = _write(tmp_path, "forged.json", _forged(failing_record))
    # The unkeyed checksum cannot tell: anyone can recompute it.
    assert load_record(forged)["verdict"] == "pass"
    # With signatures required, the unsigned forgery is refused.
    with pytest.raises(RecordError, match=r"not signed.*forecastaudit sign"):
        load_record(forged, trusted_keys=[keys["reviewer_pub"]])


def test_edit_after_signing_is_rejected(
    failing_record: dict, keys: dict[str, Path], tmp_path: Path
) -> None:
    signed = sign_record(failing_record, keys["reviewer"])
    forged = _write(tmp_path, "forged.json", _forged(signed))  # signature kept, digest redone
    with pytest.raises(RecordError, match=r"changed after key .* signed it"):
        load_record(forged, trusted_keys=[keys["reviewer_pub"]])
    with pytest.raises(RecordError, match="changed after key"):
        fa.compare_records(forged, failing_record, trusted_keys=[keys["reviewer_pub"]])


def test_signed_and_verified_record_is_accepted(
    failing_record: dict, keys: dict[str, Path], tmp_path: Path
) -> None:
    reviewed = add_signoff(
        failing_record,
        reviewer="R. Okafor, model validation",
        decision="rejected",
        policy_reference="MRM-7 section 4.2",
        comments="Estimators disagree beyond tolerance.",
        date="2026-12-03",
    )
    signed = sign_record(reviewed, keys["reviewer"], signed_at="2026-12-03T10:00:00Z")
    path = _write(tmp_path, "signed.json", signed)
    loaded = load_record(path, trusted_keys=[keys["reviewer_pub"]])
    assert loaded["signoff"]["decision"] == "rejected"
    assert verify_signatures(loaded, keys["reviewer_pub"]) == [signed["signatures"][0]["key_id"]]
    assert fa.compare_records(path, failing_record, trusted_keys=[keys["reviewer_pub"]])
    # The caller's record is not changed by signing off or signing.
    assert "signoff" not in failing_record and "signatures" not in failing_record


def test_signoff_is_covered_by_the_signature(
    failing_record: dict, keys: dict[str, Path], tmp_path: Path
) -> None:
    reviewed = add_signoff(
        failing_record, reviewer="R. Okafor", decision="rejected", policy_reference="MRM-7"
    )
    signed = sign_record(reviewed, keys["reviewer"])
    signed["signoff"]["decision"] = "approved"
    signed["content_sha256"] = content_digest(signed)
    with pytest.raises(RecordError, match="changed after key"):
        load_record(_write(tmp_path, "r.json", signed), trusted_keys=keys["reviewer_pub"])


def test_signature_by_an_untrusted_key_is_refused(
    failing_record: dict, keys: dict[str, Path], tmp_path: Path
) -> None:
    signed = sign_record(_forged(failing_record), keys["stranger"])
    with pytest.raises(RecordError, match="not trusted"):
        load_record(_write(tmp_path, "r.json", signed), trusted_keys=[keys["reviewer_pub"]])


def test_signoff_after_signing_is_refused(failing_record: dict, keys: dict[str, Path]) -> None:
    signed = sign_record(failing_record, keys["reviewer"])
    with pytest.raises(RecordError, match="Add the sign-off to the unsigned record"):
        add_signoff(signed, reviewer="x", decision="approved", policy_reference="p")


@pytest.mark.parametrize(
    ("fields", "match"),
    [
        ({"decision": "ok"}, "decision must be one of"),
        ({"reviewer": " "}, "needs a reviewer"),
        ({"date": "3 Dec"}, "ISO 8601 date"),
    ],
)
def test_bad_signoff_fields(failing_record: dict, fields: dict, match: str) -> None:
    args = {"reviewer": "R", "decision": "approved", "policy_reference": "MRM-7", **fields}
    with pytest.raises(RecordError, match=match):
        add_signoff(failing_record, **args)


def test_a_tampered_record_is_not_signed(failing_record: dict, keys: dict[str, Path]) -> None:
    edited = copy.deepcopy(failing_record)
    edited["verdict"] = "pass"
    with pytest.raises(RecordError, match="content_sha256"):
        sign_record(edited, keys["reviewer"])


def test_keys_are_never_overwritten_and_private_key_is_owner_only(keys: dict[str, Path]) -> None:
    assert keys["reviewer"].stat().st_mode & 0o077 == 0
    with pytest.raises(RecordError, match="never overwritten"):
        generate_key_pair(keys["reviewer"], keys["reviewer"].with_name("other.pub.pem"))


def test_a_non_key_file_is_named(tmp_path: Path) -> None:
    bad = tmp_path / "key.pem"
    bad.write_text("not a key")
    with pytest.raises(RecordError, match="not a readable PEM public key"):
        load_public_key(bad)


def test_signatures_require_trusted_keys(failing_record: dict, tmp_path: Path) -> None:
    path = _write(tmp_path, "r.json", failing_record)
    with pytest.raises(RecordError, match="trusted_keys"):
        load_record(path, require_signature=True)
    assert json.loads(path.read_text())["verdict"] == "fail"


def test_signoff_through_the_api_reaches_record_and_reports() -> None:
    import numpy as np

    y = 20 + np.random.default_rng(5).normal(size=60)
    result = fa.audit(y, "ARIMA(1,0,0) +mean", estimators=["statsmodels-sarimax"])
    assert "Sign-off" not in result.to_markdown()
    result.sign_off(
        reviewer="R. <b>Okafor</b>",
        decision="approved-with-conditions",
        policy_reference="MRM-7 4.2",
        comments="Re-audit after the next library upgrade.",
        date="2026-12-03",
    )
    record = result.to_dict()
    assert record["signoff"]["decision"] == "approved-with-conditions"
    html = result.to_html()
    assert 'id="signoff"' in html and "R. &lt;b&gt;Okafor&lt;/b&gt;" in html
    markdown = result.to_markdown()
    assert "### Sign-off" in markdown and "approved-with-conditions" in markdown
    with pytest.raises(RecordError, match="sign-off already"):
        result.sign_off(reviewer="x", decision="approved", policy_reference="p")


def test_cli_new_key_sign_off_sign_verify(
    failing_record: dict, tmp_path: Path, capsys: pytest.CaptureFixture
) -> None:
    from forecastaudit.cli import EXIT_PASS, EXIT_USAGE, main

    record = _write(tmp_path, "record.json", failing_record)
    assert main(["new-key", str(tmp_path / "okafor.pem")]) == EXIT_PASS
    public = tmp_path / "okafor.pub.pem"
    assert public.exists() and "key id" in capsys.readouterr().out
    # Unsigned: verify refuses (exit 2).
    assert main(["verify", str(record), "--trusted-key", str(public)]) == EXIT_USAGE
    assert "is not signed" in capsys.readouterr().err
    assert (
        main(
            [
                "sign-off",
                str(record),
                "--reviewer",
                "R. Okafor",
                "--decision",
                "rejected",
                "--policy",
                "MRM-7 4.2",
                "--date",
                "2026-12-03",
            ]
        )
        == EXIT_PASS
    )
    # The one-page sheet beside the record names the record's digest and the decision.
    sheet_html = (tmp_path / "record.signoff.html").read_text()
    sheet_md = (tmp_path / "record.signoff.md").read_text()
    from forecastaudit.record.signing import signed_body_sha256

    digest = signed_body_sha256(load_record(record))
    for sheet in (sheet_html, sheet_md):
        assert digest in sheet and "R. Okafor" in sheet and "MRM-7 4.2" in sheet
        assert "Rejected" in sheet and "FAIL" in sheet
    assert main(["sign", str(record), "--key", str(tmp_path / "okafor.pem")]) == EXIT_PASS
    capsys.readouterr()
    assert main(["verify", str(record), "--trusted-key", str(public)]) == EXIT_PASS
    out = capsys.readouterr().out
    assert "signature valid" in out and "sign-off rejected by R. Okafor on 2026-12-03" in out
    # The comparison with the signed-off record names its sign-off.
    changes = fa.compare_records(record, record, trusted_keys=[public])
    assert (
        "The old record was signed off: rejected by R. Okafor on 2026-12-03 under MRM-7 4.2."
        in str(changes)
    )
    # Signing changes the seal but not the digest the sheet names, which verify prints.
    assert load_record(record)["content_sha256"] not in sheet_md
    assert f"signed content SHA-256 {digest}" in out
    # The edited, re-digested record is refused by verify and by drift --trusted-key.
    forged = _write(tmp_path, "forged.json", _forged(load_record(record)))
    assert main(["verify", str(forged), "--trusted-key", str(public)]) == EXIT_USAGE
    assert "changed after key" in capsys.readouterr().err
    assert main(["drift", str(forged), str(record), "--trusted-key", str(public)]) == EXIT_USAGE
    assert "changed after key" in capsys.readouterr().err
    # A second sign-off on the signed record is refused and the file is unchanged.
    before = record.read_bytes()
    args = ["--reviewer", "x", "--decision", "approved", "--policy", "p"]
    assert main(["sign-off", str(record), *args]) == EXIT_USAGE
    assert record.read_bytes() == before


def test_signoff_sheet_escapes_and_can_be_left_out(failing_record: dict, tmp_path: Path) -> None:
    from forecastaudit.cli import EXIT_PASS, main

    record = _write(tmp_path, "a.json", failing_record)
    reviewer = "<script>alert(1)</script> | *Q*"
    args = ["--reviewer", reviewer, "--decision", "approved-with-conditions", "--policy", "P"]
    args += ["--comments", "Re-audit at the next data refresh."]
    assert main(["sign-off", str(record), *args, "--out", str(tmp_path / "b.json")]) == EXIT_PASS
    html = (tmp_path / "b.signoff.html").read_text()
    assert "<script>" not in html and "&lt;script&gt;" in html
    assert "Approved with conditions" in html
    assert "\\|" in (tmp_path / "b.signoff.md").read_text()  # a pipe cannot break the table
    assert json.loads(record.read_text()).get("signoff") is None  # --out leaves the input alone
    assert main(["sign-off", str(record), *args, "--no-sheet"]) == EXIT_PASS
    assert not (tmp_path / "a.signoff.html").exists()
    assert json.loads(record.read_text())["signoff"]["reviewer"] == reviewer


def test_a_decision_that_needs_words_must_have_them(failing_record: dict) -> None:
    """Conditions must be stated; approving a failing audit must say why."""
    base = {"reviewer": "R. Okafor", "policy_reference": "MRM-7"}
    with pytest.raises(RecordError, match="must state them"):
        add_signoff(failing_record, decision="approved-with-conditions", **base)
    with pytest.raises(RecordError, match="verdict is fail"):
        add_signoff(failing_record, decision="approved", **base)
    accepted = add_signoff(
        failing_record,
        decision="approved",
        comments="statsforecast is not used in production; accepted by the model owner.",
        **base,
    )
    assert accepted["signoff"]["decision"] == "approved"
    assert add_signoff(failing_record, decision="rejected", **base)["signoff"]["comments"] == ""
