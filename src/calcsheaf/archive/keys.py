"""People's keys: an Ed25519 key for sign-offs and manifests, an X.509 key pair for PDFs.

Each person has one key file, `$XDG_CONFIG_HOME/calcsheaf/keys/<id>.json` (default
`~/.config/calcsheaf`), never inside a project.  The private keys in it are encrypted with
AES-256-GCM under a key derived from the passphrase by scrypt (cost 2**log2n, stored in
the file).  The PDF signing key is ECDSA P-256 with a self-signed certificate, or the key
and certificate chain of a PKCS#12 file the firm supplies (RSA or ECDSA).
"""

from __future__ import annotations

import datetime as _dt
import getpass
import json
import os
import re
from dataclasses import dataclass, field
from pathlib import Path

from cryptography import x509
from cryptography.exceptions import InvalidTag
from cryptography.hazmat.primitives import hashes, serialization
from cryptography.hazmat.primitives.asymmetric import ec, ed25519
from cryptography.hazmat.primitives.ciphers.aead import AESGCM
from cryptography.hazmat.primitives.kdf.scrypt import Scrypt
from cryptography.hazmat.primitives.serialization import pkcs12
from cryptography.x509.oid import NameOID

from calcsheaf import identifiers, settings
from calcsheaf.errors import ArchiveError

from .canonical import b64, unb64, write_atomic

KEY_FORMAT = "calcsheaf-key-1"
DEFAULT_LOG2N = 17            # scrypt cost 2**17, r=8: about 128 MiB and a fraction of a second
MIN_LOG2N = 10                # tests may go this low through CALCSHEAF_KDF_LOG2N
CERT_YEARS = 30


@dataclass
class PersonKeys:
    """A person's unlocked private keys and public material."""
    person_id: str
    name: str
    ed25519: ed25519.Ed25519PrivateKey
    pdf_key: object                     # private key matching `certificate`
    certificate: x509.Certificate
    chain: list[x509.Certificate] = field(default_factory=list)

    @property
    def public_key_b64(self) -> str:
        return public_key_b64(self.ed25519.public_key())

    @property
    def certificate_pem(self) -> str:
        return self.certificate.public_bytes(serialization.Encoding.PEM).decode("ascii")


def public_key_b64(key: ed25519.Ed25519PublicKey) -> str:
    """Base64 of the raw 32-byte Ed25519 public key (as written in project.toml)."""
    return b64(key.public_bytes(serialization.Encoding.Raw, serialization.PublicFormat.Raw))


def load_public_key(text: str) -> ed25519.Ed25519PublicKey:
    try:
        return ed25519.Ed25519PublicKey.from_public_bytes(unb64(text))
    except ValueError as exc:
        raise ArchiveError(f"public key is not a base64 Ed25519 key ({exc})", key="public_key",
                           fix="copy the public_key written by `calcsheaf keygen`") from None


def config_dir() -> Path:
    base = os.environ.get("XDG_CONFIG_HOME") or str(Path.home() / ".config")
    return Path(base) / "calcsheaf"


def check_person_id(person_id: str) -> str:
    """`person_id` when valid (identifiers.PERSON_ID, whole string); ArchiveError otherwise."""
    found = identifiers.problem("person id", person_id)
    if found:
        raise ArchiveError(found, key="id", fix=identifiers.fix("person id"))
    return person_id


def key_path(person_id: str) -> Path:
    return config_dir() / "keys" / f"{check_person_id(person_id)}.json"


def kdf_log2n_from_env() -> int:
    """scrypt cost exponent: CALCSHEAF_KDF_LOG2N if set (>= MIN_LOG2N), else DEFAULT_LOG2N."""
    return settings.kdf_log2n(DEFAULT_LOG2N, MIN_LOG2N)


def self_signed_certificate(key: ec.EllipticCurvePrivateKey, name: str,
                            person_id: str) -> x509.Certificate:
    """A self-signed signing certificate, valid from yesterday for CERT_YEARS years."""
    subject = x509.Name([
        x509.NameAttribute(NameOID.COMMON_NAME, name),
        x509.NameAttribute(NameOID.USER_ID, person_id),
        x509.NameAttribute(NameOID.ORGANIZATIONAL_UNIT_NAME, "calcsheaf signing key"),
    ])
    start = _dt.datetime.now(tz=_dt.timezone.utc).replace(microsecond=0) - _dt.timedelta(days=1)
    return (
        x509.CertificateBuilder()
        .subject_name(subject).issuer_name(subject)
        .public_key(key.public_key())
        .serial_number(x509.random_serial_number())
        .not_valid_before(start)
        .not_valid_after(start + _dt.timedelta(days=365 * CERT_YEARS))
        .add_extension(x509.BasicConstraints(ca=False, path_length=None), critical=True)
        .add_extension(x509.KeyUsage(
            digital_signature=True, content_commitment=True, key_encipherment=False,
            data_encipherment=False, key_agreement=False, key_cert_sign=False,
            crl_sign=False, encipher_only=False, decipher_only=False), critical=True)
        .add_extension(x509.SubjectKeyIdentifier.from_public_key(key.public_key()),
                       critical=False)
        .sign(key, hashes.SHA256())
    )


def generate(person_id: str, name: str, *, pkcs12_bundle=None) -> PersonKeys:
    """New keys: always a fresh Ed25519 key; the PDF key from `pkcs12_bundle` or new P-256."""
    check_person_id(person_id)
    if pkcs12_bundle is not None:
        pdf_key, certificate, chain = pkcs12_bundle
    else:
        pdf_key = ec.generate_private_key(ec.SECP256R1())
        certificate, chain = self_signed_certificate(pdf_key, name, person_id), []
    return PersonKeys(person_id, name, ed25519.Ed25519PrivateKey.generate(),
                      pdf_key, certificate, list(chain))


def load_pkcs12(path: Path, password: str) -> tuple:
    """(private key, certificate, CA chain) from a PKCS#12 file."""
    try:
        key, cert, chain = pkcs12.load_key_and_certificates(
            Path(path).read_bytes(), password.encode("utf-8") if password else None)
    except (ValueError, OSError) as exc:
        raise ArchiveError(f"cannot read PKCS#12 file ({exc})", file=path,
                           fix="check the file and its password (CALCSHEAF_PKCS12_PASSPHRASE)"
                           ) from None
    if key is None or cert is None:
        raise ArchiveError("PKCS#12 file holds no private key with certificate", file=path,
                           fix="export the signing key together with its certificate")
    if isinstance(key, ed25519.Ed25519PrivateKey):
        raise ArchiveError("PKCS#12 key is Ed25519, which PDF readers rarely verify", file=path,
                           fix="use an RSA or ECDSA signing certificate")
    return key, cert, list(chain or [])


def _der(key) -> bytes:
    return key.private_bytes(serialization.Encoding.DER, serialization.PrivateFormat.PKCS8,
                             serialization.NoEncryption())


def _derive(passphrase: str, salt: bytes, log2n: int) -> bytes:
    return Scrypt(salt=salt, length=32, n=2 ** log2n, r=8, p=1).derive(passphrase.encode("utf-8"))


def _header(keys: PersonKeys) -> dict:
    return {
        "format": KEY_FORMAT,
        "id": keys.person_id,
        "name": keys.name,
        "public_key": keys.public_key_b64,
        "certificate": keys.certificate_pem,
        "chain": [c.public_bytes(serialization.Encoding.PEM).decode("ascii") for c in keys.chain],
    }


def _aad(header: dict) -> bytes:
    return json.dumps({k: header[k] for k in ("format", "id", "public_key", "certificate")},
                      sort_keys=True).encode("utf-8")


def save(keys: PersonKeys, passphrase: str, *, log2n: int = DEFAULT_LOG2N) -> Path:
    """Encrypt and write the key file; refuses to replace an existing one."""
    if not passphrase:
        raise ArchiveError("an empty passphrase is not allowed", key="passphrase",
                           fix="choose a passphrase (or set CALCSHEAF_PASSPHRASE)")
    path = key_path(keys.person_id)
    if path.exists():
        raise ArchiveError(f"a key file for '{keys.person_id}' already exists", file=path,
                           fix="use that key, or move the file away to make a new one")
    salt, nonce = os.urandom(16), os.urandom(12)
    header = _header(keys)
    secret = json.dumps({"ed25519": b64(_der(keys.ed25519)),
                         "pdf_key": b64(_der(keys.pdf_key))}).encode("utf-8")
    box = AESGCM(_derive(passphrase, salt, log2n)).encrypt(nonce, secret, _aad(header))
    record = dict(header, kdf={"name": "scrypt", "log2n": log2n, "r": 8, "p": 1, "salt": b64(salt)},
                  cipher={"name": "AES-256-GCM", "nonce": b64(nonce)}, ciphertext=b64(box))
    path.parent.mkdir(parents=True, exist_ok=True)
    os.chmod(path.parent, 0o700)
    write_atomic(path, (json.dumps(record, indent=2) + "\n").encode("utf-8"))
    os.chmod(path, 0o600)
    return path


def read_header(person_id: str) -> dict:
    """The public part of a person's key file (no passphrase needed)."""
    path = key_path(person_id)
    try:
        record = json.loads(path.read_text(encoding="utf-8"))
    except FileNotFoundError:
        raise ArchiveError(f"no key file for '{person_id}' on this machine", file=path,
                           fix=f"run `calcsheaf keygen --id {person_id}` as that person, or "
                               "set XDG_CONFIG_HOME to where their key file is") from None
    if record.get("format") != KEY_FORMAT:
        raise ArchiveError("not a calcsheaf key file", file=path, fix="check the file")
    return record


def load(person_id: str, passphrase: str) -> PersonKeys:
    """Unlock a person's key file; a wrong passphrase is refused."""
    record = read_header(person_id)
    kdf = record["kdf"]
    try:
        secret = AESGCM(_derive(passphrase, unb64(kdf["salt"]), int(kdf["log2n"]))).decrypt(
            unb64(record["cipher"]["nonce"]), unb64(record["ciphertext"]), _aad(record))
    except InvalidTag:
        raise ArchiveError(f"wrong passphrase for '{person_id}'", file=key_path(person_id),
                           fix=f"type it again, or check {passphrase_env(person_id)}") from None
    keys = json.loads(secret)
    return PersonKeys(
        person_id=record["id"], name=record["name"],
        ed25519=serialization.load_der_private_key(unb64(keys["ed25519"]), None),
        pdf_key=serialization.load_der_private_key(unb64(keys["pdf_key"]), None),
        certificate=x509.load_pem_x509_certificate(record["certificate"].encode("ascii")),
        chain=[x509.load_pem_x509_certificate(c.encode("ascii")) for c in record["chain"]])


def passphrase_env(person_id: str) -> str:
    """Per-person environment variable: CALCSHEAF_PASSPHRASE_<ID>, ID upper-cased, '.-' -> '_'."""
    return "CALCSHEAF_PASSPHRASE_" + re.sub(r"[^A-Za-z0-9]", "_", person_id).upper()


def get_passphrase(person_id: str, name: str = "", *, confirm: bool = False) -> str:
    """From CALCSHEAF_PASSPHRASE_<ID>, else CALCSHEAF_PASSPHRASE, else a prompt."""
    for var in (passphrase_env(person_id), "CALCSHEAF_PASSPHRASE"):
        if os.environ.get(var):
            return os.environ[var]
    who = f"{name} ({person_id})" if name else person_id
    try:
        text = getpass.getpass(f"Passphrase for {who}: ")
        repeat = getpass.getpass("Repeat passphrase: ") if confirm else text
    except (EOFError, OSError):
        raise ArchiveError(f"no passphrase for {who}: there is no terminal to ask for it",
                           key="passphrase",
                           fix=f"set {passphrase_env(person_id)} (or CALCSHEAF_PASSPHRASE) in the "
                               "environment") from None
    if repeat != text:
        raise ArchiveError("the two passphrases differ", key="passphrase", fix="type it again")
    return text


def unlock(person_id: str) -> PersonKeys:
    """Load a person's keys, asking for (or reading) their passphrase."""
    header = read_header(person_id)
    return load(person_id, get_passphrase(person_id, header.get("name", "")))
