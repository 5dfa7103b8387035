"""https for tablets: the log folder's own certificate authority and a second
server for the same app.

Browsers keep a page for offline use (a service worker) only on https or on
localhost. A tablet reaches the laptop by a LAN address, so ``serve --lan``
also serves the app over https (:func:`start_https`):

* The certificate authority (CA) is made once per log folder, in
  ``<folder>/tls/``: ``ca.key`` (mode 0600, never served, never leaves the
  laptop) and ``ca.crt``, the file a tablet installs once
  (``/pair/ca.crt``). Its SHA-256 fingerprint is shown on the laptop's devices
  page and on the tablet's pairing page so the two can be compared.
* The server certificate (``server.crt``, ``server.key`` mode 0600) is signed
  by that CA and names the laptop's LAN addresses, its host name (also as
  ``NAME.local``), ``localhost`` and ``127.0.0.1``, plus any ``--tls-name``.
  It is made again by itself when it has less than ``RENEW_BEFORE`` left or
  when the names it must carry change (a hotspot gave a new address); the
  running server checks every ``CHECK_EVERY_S`` and loads the new one for
  the next connection.
* TLS is served by cheroot (a maintained WSGI server from PyPI with wheels for
  Linux, macOS and Windows) with its builtin ``ssl`` adapter. waitress stays
  for plain http: the laptop's own browser, and tablets without the CA.

Validity: the CA 10 years; a server certificate 397 days at most, the limit
browsers apply to publicly trusted certificates (CA/Browser Forum; from
memory), here 180 days, renewed 30 days before the end (common practice).
"""
from __future__ import annotations

import datetime as dt
import hashlib
import ipaddress
import os
import socket
import threading
from dataclasses import dataclass, field
from pathlib import Path

TLS_DIR = "tls"
CA_KEY, CA_CERT = "ca.key", "ca.crt"
SERVER_KEY, SERVER_CERT = "server.key", "server.crt"
CA_LIFETIME = dt.timedelta(days=3650)
SERVER_LIFETIME = dt.timedelta(days=180)
RENEW_BEFORE = dt.timedelta(days=30)
CHECK_EVERY_S = 3600
DEFAULT_HTTPS_PORT_OFFSET = 363          # 8080 -> 8443


def _now() -> dt.datetime:
    return dt.datetime.now(dt.timezone.utc)


def _write_private(path: Path, data: bytes) -> None:
    """Write a key readable and writable by its owner only (0600), atomically."""
    tmp = path.with_name(path.name + ".tmp")
    if tmp.exists():
        tmp.unlink()
    fd = os.open(tmp, os.O_WRONLY | os.O_CREAT | os.O_EXCL, 0o600)
    with os.fdopen(fd, "wb") as f:
        f.write(data)
        f.flush()
        os.fsync(f.fileno())
    os.chmod(tmp, 0o600)                 # whatever the umask said
    os.replace(tmp, path)


def _write_public(path: Path, data: bytes) -> None:
    tmp = path.with_name(path.name + ".tmp")
    tmp.write_bytes(data)
    os.replace(tmp, path)


def tls_dir(data_dir) -> Path:
    d = Path(data_dir) / TLS_DIR
    d.mkdir(parents=True, exist_ok=True)
    try:
        os.chmod(d, 0o700)
    except OSError:
        pass
    return d


# ------------------------------------------------------------ the authority

def ensure_ca(data_dir):
    """The log folder's CA (certificate, private key), made on first use."""
    from cryptography import x509
    from cryptography.hazmat.primitives import hashes, serialization
    from cryptography.hazmat.primitives.asymmetric import ec
    from cryptography.x509.oid import NameOID

    d = tls_dir(data_dir)
    key_path, cert_path = d / CA_KEY, d / CA_CERT
    if key_path.exists() and cert_path.exists():
        key = serialization.load_pem_private_key(key_path.read_bytes(), password=None)
        cert = x509.load_pem_x509_certificate(cert_path.read_bytes())
        return cert, key
    key = ec.generate_private_key(ec.SECP256R1())
    host = (socket.gethostname() or "laptop")[:40]
    name = x509.Name([
        x509.NameAttribute(NameOID.ORGANIZATION_NAME, "fieldapp"),
        x509.NameAttribute(NameOID.COMMON_NAME, f"fieldapp log on {host}"),
    ])
    now = _now()
    ski = x509.SubjectKeyIdentifier.from_public_key(key.public_key())
    cert = (x509.CertificateBuilder()
            .subject_name(name).issuer_name(name)
            .public_key(key.public_key())
            .serial_number(x509.random_serial_number())
            .not_valid_before(now - dt.timedelta(hours=1))
            .not_valid_after(now + CA_LIFETIME)
            .add_extension(x509.BasicConstraints(ca=True, path_length=0), critical=True)
            .add_extension(x509.KeyUsage(digital_signature=False, content_commitment=False,
                                         key_encipherment=False, data_encipherment=False,
                                         key_agreement=False, key_cert_sign=True,
                                         crl_sign=True, encipher_only=False,
                                         decipher_only=False), critical=True)
            .add_extension(ski, critical=False)
            .sign(key, hashes.SHA256()))
    _write_private(key_path, key.private_bytes(serialization.Encoding.PEM,
                                               serialization.PrivateFormat.PKCS8,
                                               serialization.NoEncryption()))
    _write_public(cert_path, cert.public_bytes(serialization.Encoding.PEM))
    return cert, key


def ca_der(data_dir) -> bytes:
    """The CA certificate as DER, the form Android and iPadOS install from a download."""
    from cryptography.hazmat.primitives import serialization
    cert, _ = ensure_ca(data_dir)
    return cert.public_bytes(serialization.Encoding.DER)


def ca_fingerprint(data_dir) -> str:
    """SHA-256 of the CA certificate (DER), as settings screens show it: 'AB:CD:…'."""
    digest = hashlib.sha256(ca_der(data_dir)).hexdigest().upper()
    return ":".join(digest[i:i + 2] for i in range(0, len(digest), 2))


# ------------------------------------------------------------ the server certificate

def laptop_names(extra=()) -> tuple[list[str], list[str]]:
    """(DNS names, IP addresses) the server certificate must carry."""
    from .lan import lan_addresses
    dns = ["localhost"]
    host = (socket.gethostname() or "").strip().lower()
    if host and host != "localhost":
        dns += [host] if "." in host else [host, host + ".local"]
    ips = ["127.0.0.1"] + lan_addresses()
    for n in extra or ():
        n = n.strip().lower()
        if not n:
            continue
        try:
            ipaddress.ip_address(n)
            ips.append(n)
        except ValueError:
            dns.append(n)
    return sorted(set(dns)), sorted(set(ips), key=lambda a: ipaddress.ip_address(a))


def cert_names(cert) -> tuple[list[str], list[str]]:
    from cryptography import x509
    san = cert.extensions.get_extension_for_class(x509.SubjectAlternativeName).value
    return (sorted(san.get_values_for_type(x509.DNSName)),
            sorted((str(i) for i in san.get_values_for_type(x509.IPAddress)),
                   key=lambda a: ipaddress.ip_address(a)))


def _not_after(cert) -> dt.datetime:
    try:
        return cert.not_valid_after_utc
    except AttributeError:                # cryptography < 42
        return cert.not_valid_after.replace(tzinfo=dt.timezone.utc)


def ensure_server_cert(data_dir, dns: list[str], ips: list[str],
                       now: dt.datetime | None = None) -> tuple[Path, Path, bool]:
    """(certificate path, key path, renewed): a server certificate that names
    ``dns`` and ``ips`` and has more than RENEW_BEFORE left at ``now``,
    made again when it does not."""
    from cryptography import x509
    from cryptography.hazmat.primitives import hashes, serialization
    from cryptography.hazmat.primitives.asymmetric import ec
    from cryptography.x509.oid import ExtendedKeyUsageOID, NameOID

    now = now or _now()
    d = tls_dir(data_dir)
    cert_path, key_path = d / SERVER_CERT, d / SERVER_KEY
    want = (sorted(set(dns)), sorted(set(ips), key=lambda a: ipaddress.ip_address(a)))
    if cert_path.exists() and key_path.exists():
        try:
            old = x509.load_pem_x509_certificate(cert_path.read_bytes())
            if _not_after(old) - now > RENEW_BEFORE and cert_names(old) == want:
                return cert_path, key_path, False
        except (ValueError, x509.ExtensionNotFound):
            pass                          # unreadable: make a new one
    ca_cert, ca_key = ensure_ca(data_dir)
    key = ec.generate_private_key(ec.SECP256R1())
    first = want[0][0] if want[0] else "localhost"
    cert = (x509.CertificateBuilder()
            .subject_name(x509.Name([x509.NameAttribute(NameOID.ORGANIZATION_NAME, "fieldapp"),
                                     x509.NameAttribute(NameOID.COMMON_NAME, first)]))
            .issuer_name(ca_cert.subject)
            .public_key(key.public_key())
            .serial_number(x509.random_serial_number())
            .not_valid_before(now - dt.timedelta(hours=1))
            .not_valid_after(min(now + SERVER_LIFETIME, _not_after(ca_cert)))
            .add_extension(x509.SubjectAlternativeName(
                [x509.DNSName(n) for n in want[0]]
                + [x509.IPAddress(ipaddress.ip_address(a)) for a in want[1]]), critical=False)
            .add_extension(x509.BasicConstraints(ca=False, path_length=None), critical=True)
            .add_extension(x509.KeyUsage(digital_signature=True, content_commitment=False,
                                         key_encipherment=False, data_encipherment=False,
                                         key_agreement=False, key_cert_sign=False,
                                         crl_sign=False, encipher_only=False,
                                         decipher_only=False), critical=True)
            .add_extension(x509.ExtendedKeyUsage([ExtendedKeyUsageOID.SERVER_AUTH]),
                           critical=False)
            .add_extension(x509.AuthorityKeyIdentifier.from_issuer_public_key(
                ca_key.public_key()), critical=False)
            .sign(ca_key, hashes.SHA256()))
    _write_private(key_path, key.private_bytes(serialization.Encoding.PEM,
                                               serialization.PrivateFormat.PKCS8,
                                               serialization.NoEncryption()))
    # the chain a tablet needs: this certificate, then the CA it installed
    _write_public(cert_path, cert.public_bytes(serialization.Encoding.PEM)
                  + ca_cert.public_bytes(serialization.Encoding.PEM))
    return cert_path, key_path, True


# ------------------------------------------------------------ the https server

@dataclass
class HttpsServer:
    """The running https server: what to print, and how to stop it."""
    server: object
    data_dir: Path
    extra_names: tuple
    port: int
    _thread: threading.Thread | None = None
    _stop: threading.Event = field(default_factory=threading.Event)

    def renew_if_due(self, now: dt.datetime | None = None) -> bool:
        """Make and load a new certificate when due; True when one was made."""
        if self.server is None:
            return False
        dns, ips = laptop_names(self.extra_names)
        cert, key, renewed = ensure_server_cert(self.data_dir, dns, ips, now)
        if renewed:                        # the next connection gets the new one
            self.server.ssl_adapter.context.load_cert_chain(str(cert), str(key))
        return renewed

    def _watch(self):
        while not self._stop.wait(CHECK_EVERY_S):
            try:
                self.renew_if_due()
            except Exception as e:        # keep serving the old one; say why
                print(f"fieldapp: could not renew the https certificate: {e}", flush=True)

    def stop(self):
        self._stop.set()
        if self.server is not None:
            try:
                self.server.stop()
            except Exception:
                pass


def start_https(app, host: str, port: int, data_dir, extra_names=()) -> HttpsServer:
    """Serve ``app`` over https on ``host:port`` in background threads and
    keep its certificate current; the caller calls ``.stop()`` on the way out.
    Sets ``app.config`` HTTPS_PORT and CA_FINGERPRINT, which the pairing pages
    and ``web.pairing.start_lan`` read. When the port cannot be opened it says
    so and returns a handle that serves nothing: tablets keep plain http."""
    from cheroot import wsgi
    from cheroot.ssl.builtin import BuiltinSSLAdapter

    data_dir = Path(data_dir)
    try:
        ensure_ca(data_dir)
        dns, ips = laptop_names(extra_names)
        cert, key, _ = ensure_server_cert(data_dir, dns, ips)
    except OSError as e:                   # a read-only or full log folder
        print(f"fieldapp: https not started: cannot write the certificates in {data_dir} "
              f"({e.strerror or e}). Tablets use plain http.", flush=True)
        return HttpsServer(None, data_dir, tuple(extra_names or ()), port)
    server = wsgi.Server((host, port), app, numthreads=8, server_name="fieldapp",
                         timeout=30, shutdown_timeout=2)
    server.max_request_body_size = app.config.get("MAX_CONTENT_LENGTH") or 0
    server.ssl_adapter = BuiltinSSLAdapter(str(cert), str(key))
    try:
        server.prepare()                   # binds now
    except OSError as e:
        print(f"fieldapp: https not started: port {port} cannot be opened ({e.strerror or e}). "
              "Tablets use plain http; choose another port with --https-port.", flush=True)
        return HttpsServer(None, data_dir, tuple(extra_names or ()), port)
    app.config["HTTPS_PORT"] = port
    app.config["CA_FINGERPRINT"] = ca_fingerprint(data_dir)
    h = HttpsServer(server, data_dir, tuple(extra_names or ()), port)
    t = threading.Thread(target=server.serve, name="fieldapp-https", daemon=True)
    t.start()
    h._thread = t
    threading.Thread(target=h._watch, name="fieldapp-https-renew", daemon=True).start()
    return h
