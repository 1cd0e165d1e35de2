"""PAdES signatures on an issued calc's PDF (pyHanko, imported only when called).

Two empty signature fields, `Preparer` and `Checker`, are added first; the preparer then
certifies the document (DocMDP: later form filling and signing allowed) and the checker
adds an approval signature in an incremental update.  Validation trusts only the
certificates recorded at issue, so it works offline years later: the validation moment is
the signing time the signature itself records.
"""

from __future__ import annotations

import io

from cryptography.hazmat.primitives import serialization

from .keys import PersonKeys

FIELDS = {"preparer": "Preparer", "checker": "Checker"}


def _signer(keys: PersonKeys):
    from asn1crypto import keys as asn1_keys, x509 as asn1_x509
    from pyhanko.sign import signers
    from pyhanko_certvalidator.registry import SimpleCertificateStore

    der = lambda cert: cert.public_bytes(serialization.Encoding.DER)  # noqa: E731
    key_der = keys.pdf_key.private_bytes(serialization.Encoding.DER,
                                         serialization.PrivateFormat.PKCS8,
                                         serialization.NoEncryption())
    chain = [asn1_x509.Certificate.load(der(c)) for c in keys.chain]
    return signers.SimpleSigner(
        signing_cert=asn1_x509.Certificate.load(der(keys.certificate)),
        signing_key=asn1_keys.PrivateKeyInfo.load(key_der),
        cert_registry=SimpleCertificateStore.from_certs(chain))


def _sign_once(data: bytes, keys: PersonKeys, role: str, reason: str, *, certify: bool,
               add_fields: bool) -> bytes:
    from pyhanko.pdf_utils.incremental_writer import IncrementalPdfFileWriter
    from pyhanko.sign import fields, signers

    writer = IncrementalPdfFileWriter(io.BytesIO(data))
    if add_fields:
        for name in FIELDS.values():
            fields.append_signature_field(writer, fields.SigFieldSpec(sig_field_name=name))
    meta = signers.PdfSignatureMetadata(
        field_name=FIELDS[role], md_algorithm="sha256", reason=reason, name=keys.name,
        subfilter=fields.SigSeedSubFilter.PADES, certify=certify,
        docmdp_permissions=fields.MDPPerm.FILL_FORMS)
    out = io.BytesIO()
    signers.sign_pdf(writer, meta, signer=_signer(keys), existing_fields_only=True, output=out)
    return out.getvalue()


def sign_issued_pdf(data: bytes, preparer: PersonKeys, checker: PersonKeys, *,
                    calc: str, revision: str) -> bytes:
    """The PDF with both fields, certified by the preparer, approved by the checker."""
    certified = _sign_once(data, preparer, "preparer",
                           f"Prepared calc {calc} revision {revision}",
                           certify=True, add_fields=True)
    return _sign_once(certified, checker, "checker",
                      f"Checked calc {calc} revision {revision}", certify=False, add_fields=False)


def _asn1_cert(pem: str):
    from asn1crypto import pem as asn1_pem, x509 as asn1_x509
    _, _, der = asn1_pem.unarmor(pem.encode("ascii"))
    return asn1_x509.Certificate.load(der)


def check_pdf_signatures(data: bytes, certificates: dict[str, list[str]]) -> list[tuple[str, bool, str]]:
    """Validate the two PDF signatures against the recorded certificates.

    `certificates` maps role -> [signing certificate PEM, chain PEMs...].  Returns
    (item, passed, detail) rows, one per expected signature plus one for the count.
    """
    from pyhanko.pdf_utils.reader import PdfFileReader

    try:
        reader = PdfFileReader(io.BytesIO(data), strict=False)
        signatures = list(reader.embedded_signatures)
    except Exception as exc:   # any parse failure of a tampered file is a verdict, not a crash
        return [("pdf signatures", False, f"the PDF cannot be read ({exc})")]
    rows = [("pdf signature count", len(signatures) == 2,
             f"{len(signatures)} signature(s) found, expected 2 (Preparer, Checker)")]
    by_field = {sig.field_name: sig for sig in signatures}
    last = signatures[-1] if signatures else None
    for role, field_name in FIELDS.items():
        sig = by_field.get(field_name)
        if sig is None:
            rows.append((f"pdf signature {field_name}", False, "field is not signed"))
            continue
        rows.append(_check_one(sig, role, certificates.get(role, []), is_last=sig is last))
    return rows


def _check_one(sig, role: str, pems: list[str], *, is_last: bool) -> tuple[str, bool, str]:
    from pyhanko.sign.validation import validate_pdf_signature
    from pyhanko_certvalidator import ValidationContext

    item = f"pdf signature {FIELDS[role]}"
    if not pems:
        return item, False, f"no certificate recorded for the {role}"
    try:
        recorded = _asn1_cert(pems[0])
        roots = [_asn1_cert(p) for p in pems]
    except Exception as exc:   # a tampered record/people.json: a verdict, not a crash
        return item, False, (f"the {role}'s recorded certificate (or chain) is not a PEM "
                             f"X.509 certificate ({type(exc).__name__}): record/people.json "
                             "was edited")
    if sig.signer_cert is None or sig.signer_cert.dump() != recorded.dump():
        return item, False, f"signed with a certificate that is not the {role}'s recorded one"
    context = ValidationContext(trust_roots=roots, allow_fetching=False,
                                moment=sig.self_reported_timestamp)
    try:
        status = validate_pdf_signature(sig, context)
    except Exception as exc:   # malformed signature container after tampering
        return item, False, f"the signed bytes were changed or damaged: cannot validate ({exc})"
    problems = []
    if not status.intact:
        return item, False, "the signed bytes were changed"
    if not status.valid:
        problems.append("the cryptographic signature is invalid")
    if not status.trusted:
        problems.append("the certificate does not chain to the recorded certificates")
    if role == "preparer" and sig.docmdp_level is None:
        problems.append("it is not a certification signature")
    if role == "checker" and sig.docmdp_level is not None:
        problems.append("it should be an approval signature, not a certification")
    if is_last and status.coverage.name != "ENTIRE_FILE":
        problems.append("bytes were appended after the last signature")
    if not is_last and getattr(status, "docmdp_ok", True) is False:
        problems.append("later changes are not allowed by the certification")
    name = sig.signer_cert.subject.native.get("common_name", "?")
    if problems:
        return item, False, "; ".join(problems)
    return item, True, f"valid, intact, signed by {name} at {sig.self_reported_timestamp:%Y-%m-%d}"
