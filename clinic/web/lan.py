"""Serving phones on the clinic's Wi-Fi over HTTPS, with a certificate authority of our own.

Phones only run the service worker (offline pages, the outbox) on a secure origin, and a
laptop on a clinic network has no public name for a public certificate. So each
installation makes its own small certificate authority (CA) once, phones install and trust
that CA (the setup page, clinic/web/setup_views.py), and the laptop's server certificate is
signed by it.

Files, all in ``<data>/tls/`` (folder 0700, keys 0600)::

    ca.key      the CA's private key (ECDSA P-256). Anyone holding it can make certificates the
                phones trust, so it never leaves the laptop (no passphrase: the server starts unattended).
    ca.crt      the CA certificate (10 years); what phones install
    server.key  the server's private key
    server.crt  the server certificate: SANs = the laptop's addresses + hostname + localhost;
                390 days (phones refuse server certificates valid for more than 397 days);
                made again when the addresses change or 30 days before it ends

The CA carries name constraints (private IPv4/IPv6 ranges, loopback, ``localhost``, the
laptop's hostname and ``.local``/``.lan``/``.home.arpa`` names, and whichever of the
laptop's addresses lie outside the private ranges on the day the CA is made), so a phone that trusts it
does not trust it for any public site, even if the key were copied off the laptop. Clients
that do not know the extension ignore it (it is not marked critical).

The server is cheroot's threaded WSGI server (the CherryPy project's production server,
pure Python, TLS through the standard ``ssl`` module), TLS 1.2 at least. Beside it, a plain
HTTP listener (``setup_port``, by default the HTTPS port + 1) serves only the setup pages,
the CA certificate and the static files the setup page needs: a phone that does not yet
trust the CA starts there. Every other path redirects to the HTTPS address. Requests from
the laptop itself (loopback) get the whole app on that port too, so the laptop's own
browser can use http://127.0.0.1:<setup_port>/ (a secure context) without a warning.
"""
from __future__ import annotations

import datetime as dt
import ipaddress
import logging
import os
import socket
import ssl
import sys
import threading
from dataclasses import dataclass
from pathlib import Path

from cryptography import x509
from cryptography.exceptions import InvalidSignature
from cryptography.hazmat.primitives import hashes, serialization
from cryptography.hazmat.primitives.asymmetric import ec
from cryptography.x509.oid import ExtendedKeyUsageOID, NameOID

from clinic.signing.files import atomic_write

log = logging.getLogger(__name__)

TLS_DIR = "tls"
CA_DAYS = 3650
SERVER_DAYS = 390          # below the 397-day ceiling phones and browsers apply to server certificates
RENEW_BEFORE_DAYS = 30
CLOCK_SKEW = dt.timedelta(hours=1)   # a phone's clock may run behind
PERMITTED_NETWORKS = ("10.0.0.0/8", "172.16.0.0/12", "192.168.0.0/16", "127.0.0.0/8", "169.254.0.0/16",
                      "100.64.0.0/10", "fc00::/7", "fe80::/10", "::1/128")
PERMITTED_DNS_SUFFIXES = ("localhost", "local", "lan", "home.arpa", "internal")
DEFAULT_SETUP_PORT_OFFSET = 1


class TLSError(RuntimeError):
    """The certificate files are unusable (unreadable, or not ours); the message says what to do."""


@dataclass(frozen=True)
class TLSPaths:
    """Where the certificate authority and the server certificate are kept."""

    dir: Path
    ca_cert: Path
    ca_key: Path
    server_cert: Path
    server_key: Path


def tls_paths(data_dir) -> TLSPaths:
    d = Path(data_dir) / TLS_DIR
    return TLSPaths(d, d / "ca.crt", d / "ca.key", d / "server.crt", d / "server.key")


# --- the laptop's addresses ----------------------------------------------------------------

def _usable(ip: str) -> bool:
    try:
        a = ipaddress.ip_address(ip.split("%", 1)[0])
    except ValueError:
        return False
    return not (a.is_loopback or a.is_unspecified or a.is_multicast or a.is_link_local)


def _linux_ipv4() -> list[str]:
    """IPv4 address of every interface that is up (ioctl SIOCGIFADDR; Linux only)."""
    try:
        import fcntl
        import struct
    except ImportError:
        return []
    out = []
    s = socket.socket(socket.AF_INET, socket.SOCK_DGRAM)
    try:
        for _, name in socket.if_nameindex():
            try:
                packed = fcntl.ioctl(s.fileno(), 0x8915, struct.pack("256s", name.encode()[:15]))
            except OSError:
                continue  # no IPv4 address on this interface
            out.append(socket.inet_ntoa(packed[20:24]))
    finally:
        s.close()
    return out


def _route_ipv4() -> list[str]:
    """The source address the laptop would use towards a private network. A UDP "connect"
    only picks a route: no packet is sent."""
    out = []
    for target in ("192.168.255.255", "10.255.255.255", "172.31.255.255"):
        s = socket.socket(socket.AF_INET, socket.SOCK_DGRAM)
        try:
            s.connect((target, 9))
            out.append(s.getsockname()[0])
        except OSError:
            pass
        finally:
            s.close()
    return out


def lan_addresses() -> list[str]:
    """The laptop's own IP addresses a phone on the same network could reach (no loopback,
    no link-local), IPv4 first. Found without sending anything on the network."""
    found: list[str] = []
    found += _linux_ipv4()
    found += _route_ipv4()
    try:
        for info in socket.getaddrinfo(socket.gethostname(), None):
            found.append(str(info[4][0]))
    except OSError:
        pass
    seen, out = set(), []
    for ip in found:
        ip = ip.split("%", 1)[0]
        if ip not in seen and _usable(ip):
            seen.add(ip)
            out.append(ip)
    return sorted(out, key=lambda a: (ipaddress.ip_address(a).version, ipaddress.ip_address(a)))


def hostname() -> str:
    return socket.gethostname().strip().lower()


# --- certificates ----------------------------------------------------------------------------

def _key_pem(key) -> bytes:
    return key.private_bytes(serialization.Encoding.PEM, serialization.PrivateFormat.PKCS8,
                             serialization.NoEncryption())


def _load_key(path: Path):
    try:
        return serialization.load_pem_private_key(path.read_bytes(), password=None)
    except (ValueError, TypeError) as e:
        raise TLSError(f"{path} is not a readable private key ({e}); move the {path.parent} folder "
                       f"away to make a new CA (phones must then install the new one)") from None


def _load_cert(path: Path) -> x509.Certificate:
    try:
        return x509.load_pem_x509_certificate(path.read_bytes())
    except ValueError as e:
        raise TLSError(f"{path} is not a readable certificate ({e})") from None


def _split_hosts(hosts) -> tuple[list[str], list[ipaddress._BaseAddress]]:
    names, ips = [], []
    for h in hosts:
        h = str(h).strip().strip("[]").lower()
        if not h:
            continue
        try:
            ip = ipaddress.ip_address(h.split("%", 1)[0])
        except ValueError:
            if h not in names:
                names.append(h)
        else:
            if ip not in ips:
                ips.append(ip)
    return names, ips


def _dns_permitted(name: str, permitted: list[str]) -> bool:
    return any(name == p or name.endswith("." + p) for p in permitted)


def _ca_constraints(host: str, hosts) -> x509.NameConstraints:
    """Private ranges and local names, plus the laptop's own name and any of its current
    addresses outside the private ranges (some clinic networks use such addresses)."""
    dns = list(PERMITTED_DNS_SUFFIXES)
    names, ips = _split_hosts(list(hosts) + [host])
    for n in names:
        if n not in dns and not _dns_permitted(n, dns):
            dns.append(n)
    nets = [ipaddress.ip_network(n) for n in PERMITTED_NETWORKS]
    for ip in ips:
        if not any(ip.version == n.version and ip in n for n in nets):
            nets.append(ipaddress.ip_network(ip))
    return x509.NameConstraints(
        permitted_subtrees=[x509.DNSName(d) for d in dns] + [x509.IPAddress(n) for n in nets],
        excluded_subtrees=None)


def _make_ca(paths: TLSPaths, hosts, now: dt.datetime) -> tuple:
    key = ec.generate_private_key(ec.SECP256R1())
    host = hostname()
    name = x509.Name([
        x509.NameAttribute(NameOID.COMMON_NAME, f"rhledger clinic CA ({host or 'laptop'})"[:64]),
        x509.NameAttribute(NameOID.ORGANIZATION_NAME, "rhledger – this laptop only"),
    ])
    ski = x509.SubjectKeyIdentifier.from_public_key(key.public_key())
    cert = (x509.CertificateBuilder()
            .subject_name(name).issuer_name(name)
            .public_key(key.public_key())
            .serial_number(x509.random_serial_number())
            .not_valid_before(now - CLOCK_SKEW)
            .not_valid_after(now + dt.timedelta(days=CA_DAYS))
            .add_extension(x509.BasicConstraints(ca=True, path_length=0), critical=True)
            .add_extension(x509.KeyUsage(digital_signature=False, content_commitment=False, key_encipherment=False,
                                         data_encipherment=False, key_agreement=False, key_cert_sign=True,
                                         crl_sign=True, encipher_only=False, decipher_only=False), critical=True)
            .add_extension(ski, critical=False)
            .add_extension(x509.AuthorityKeyIdentifier.from_issuer_subject_key_identifier(ski), critical=False)
            .add_extension(_ca_constraints(host, hosts), critical=False)
            .sign(key, hashes.SHA256()))
    atomic_write(paths.ca_key, _key_pem(key), 0o600)
    atomic_write(paths.ca_cert, cert.public_bytes(serialization.Encoding.PEM), 0o644)
    log.warning("made a new certificate authority in %s: phones must install %s once", paths.dir, paths.ca_cert)
    return key, cert


def _cert_sans(cert: x509.Certificate) -> tuple[set[str], set]:
    try:
        san = cert.extensions.get_extension_for_class(x509.SubjectAlternativeName).value
    except x509.ExtensionNotFound:
        return set(), set()
    return set(san.get_values_for_type(x509.DNSName)), set(san.get_values_for_type(x509.IPAddress))


def _permitted_by(ca_cert: x509.Certificate) -> tuple[list[str], list] | None:
    try:
        nc = ca_cert.extensions.get_extension_for_class(x509.NameConstraints).value
    except x509.ExtensionNotFound:
        return None
    subtrees = nc.permitted_subtrees or []
    return ([g.value for g in subtrees if isinstance(g, x509.DNSName)],
            [g.value for g in subtrees if isinstance(g, x509.IPAddress)])


def _server_names(hosts, ca_cert) -> tuple[list[str], list]:
    names, ips = _split_hosts(list(hosts) + ["localhost", "127.0.0.1", "::1"])
    allowed = _permitted_by(ca_cert)
    if allowed is not None:
        dns_ok, nets = allowed
        dropped = [n for n in names if not _dns_permitted(n, dns_ok)] + \
                  [str(i) for i in ips if not any(i.version == n.version and i in n for n in nets)]
        if dropped:
            log.warning("not putting %s in the server certificate: the clinic CA was made for other "
                        "addresses (private ranges, local names and the laptop's addresses of that day); "
                        "phones cannot use these addresses until %s is moved away and a new CA installed",
                        ", ".join(dropped), "<data>/tls")
        names = [n for n in names if _dns_permitted(n, dns_ok)]
        ips = [i for i in ips if any(i.version == n.version and i in n for n in nets)]
    return names, ips


def _make_server(paths: TLSPaths, ca_key, ca_cert, names, ips, now: dt.datetime) -> x509.Certificate:
    key = ec.generate_private_key(ec.SECP256R1())
    first = names[0] if names else str(ips[0])
    cert = (x509.CertificateBuilder()
            .subject_name(x509.Name([x509.NameAttribute(NameOID.COMMON_NAME, first[:64]),
                                     x509.NameAttribute(NameOID.ORGANIZATION_NAME, "rhledger clinic laptop")]))
            .issuer_name(ca_cert.subject)
            .public_key(key.public_key())
            .serial_number(x509.random_serial_number())
            .not_valid_before(now - CLOCK_SKEW)
            .not_valid_after(now - CLOCK_SKEW + dt.timedelta(days=SERVER_DAYS))
            .add_extension(x509.BasicConstraints(ca=False, path_length=None), critical=True)
            .add_extension(x509.KeyUsage(digital_signature=True, content_commitment=False, key_encipherment=False,
                                         data_encipherment=False, key_agreement=False, key_cert_sign=False,
                                         crl_sign=False, encipher_only=False, decipher_only=False), critical=True)
            .add_extension(x509.ExtendedKeyUsage([ExtendedKeyUsageOID.SERVER_AUTH]), critical=False)
            .add_extension(x509.SubjectAlternativeName([x509.DNSName(n) for n in names] +
                                                       [x509.IPAddress(i) for i in ips]), critical=False)
            .add_extension(x509.SubjectKeyIdentifier.from_public_key(key.public_key()), critical=False)
            .add_extension(x509.AuthorityKeyIdentifier.from_issuer_public_key(ca_key.public_key()), critical=False)
            .sign(ca_key, hashes.SHA256()))
    atomic_write(paths.server_key, _key_pem(key), 0o600)
    atomic_write(paths.server_cert, cert.public_bytes(serialization.Encoding.PEM), 0o644)
    log.info("server certificate for %s", ", ".join(names + [str(i) for i in ips]))
    return cert


def _signed_by(cert: x509.Certificate, ca_cert: x509.Certificate) -> bool:
    try:
        cert.verify_directly_issued_by(ca_cert)
    except (InvalidSignature, ValueError, TypeError):
        return False
    return True


def ensure_certificates(data_dir, hosts, *, now: dt.datetime | None = None) -> TLSPaths:
    """Make the CA once, and a server certificate for ``hosts`` (+ localhost) signed by it,
    made again when the names differ, when it ends within 30 days, or when it is not the
    CA's. Returns the paths. Keys are written with mode 0600 in a 0700 folder."""
    now = now or dt.datetime.now(dt.timezone.utc)
    paths = tls_paths(data_dir)
    paths.dir.mkdir(mode=0o700, parents=True, exist_ok=True)
    os.chmod(paths.dir, 0o700)
    if paths.ca_key.exists() and paths.ca_cert.exists():
        ca_key, ca_cert = _load_key(paths.ca_key), _load_cert(paths.ca_cert)
        if ca_cert.not_valid_after_utc - now < dt.timedelta(days=RENEW_BEFORE_DAYS):
            raise TLSError(f"the clinic CA in {paths.ca_cert} ends on {ca_cert.not_valid_after_utc:%Y-%m-%d}; "
                           f"move {paths.dir} away to make a new one, then install it on every phone again")
    elif paths.ca_key.exists() or paths.ca_cert.exists():
        raise TLSError(f"{paths.dir} holds only half of the CA (ca.key and ca.crt go together); "
                       f"move the folder away to make a new CA")
    else:
        ca_key, ca_cert = _make_ca(paths, hosts, now)
    for p in (paths.ca_key, paths.server_key):
        if p.exists():
            os.chmod(p, 0o600)
    names, ips = _server_names(hosts, ca_cert)
    if not names and not ips:
        raise TLSError("no host name or address to put in the server certificate")
    fresh = True
    if paths.server_cert.exists() and paths.server_key.exists():
        cert = _load_cert(paths.server_cert)
        have_dns, have_ips = _cert_sans(cert)
        fresh = not (have_dns == set(names) and have_ips == set(ips)
                     and cert.not_valid_after_utc - now > dt.timedelta(days=RENEW_BEFORE_DAYS)
                     and cert.not_valid_before_utc <= now
                     and _signed_by(cert, ca_cert))
    if fresh:
        _make_server(paths, ca_key, ca_cert, names, ips, now)
    return paths


def ca_fingerprint(data_dir) -> str | None:
    """SHA-256 of the CA certificate as phones show it (AA:BB:...), or None before it exists."""
    p = tls_paths(data_dir).ca_cert
    if not p.exists():
        return None
    return _load_cert(p).fingerprint(hashes.SHA256()).hex(":").upper()


def ca_der(data_dir) -> bytes | None:
    p = tls_paths(data_dir).ca_cert
    return _load_cert(p).public_bytes(serialization.Encoding.DER) if p.exists() else None


def server_context(paths: TLSPaths) -> ssl.SSLContext:
    ctx = ssl.SSLContext(ssl.PROTOCOL_TLS_SERVER)
    ctx.minimum_version = ssl.TLSVersion.TLSv1_2
    ctx.load_cert_chain(str(paths.server_cert), str(paths.server_key))
    return ctx


# --- serving ---------------------------------------------------------------------------------

LOOPBACK = ("127.0.0.1", "::1", "::ffff:127.0.0.1")
SETUP_PREFIXES = ("/setup/", "/static/")
SETUP_PATHS = ("/setup", "/favicon.ico", "/manifest.webmanifest", "/net/ping")


class SetupOnly:
    """The plain-HTTP side: the setup pages for phones that do not trust the CA yet, the
    whole app for the laptop itself, a redirect to HTTPS for everything else."""

    def __init__(self, app, https_port: int):
        self.app = app
        self.https_port = https_port

    def __call__(self, environ, start_response):
        path = environ.get("PATH_INFO", "") or "/"
        if environ.get("REMOTE_ADDR", "") in LOOPBACK or path.startswith(SETUP_PREFIXES) or path in SETUP_PATHS:
            return self.app(environ, start_response)
        host = environ.get("HTTP_HOST") or environ.get("SERVER_NAME", "localhost")
        if host.startswith("["):
            host = host[:host.index("]") + 1]
        else:
            host = host.rsplit(":", 1)[0]
        query = environ.get("QUERY_STRING", "")
        target = f"https://{host}:{self.https_port}{path}" + (f"?{query}" if query else "")
        body = f"rhledger is served at {target}\n".encode()
        start_response("302 Found", [("Location", target), ("Content-Type", "text/plain; charset=utf-8"),
                                     ("Content-Length", str(len(body))), ("Cache-Control", "no-store")])
        return [body]


def certificate_hosts(host: str) -> list[str]:
    hosts = lan_addresses() + [hostname()]
    if host not in ("", "0.0.0.0", "::"):
        hosts.append(host)
    return hosts


class CertificateWatcher:
    """Keeps the server certificate in step with the laptop's addresses while it serves: a
    laptop on DHCP may get a new address during the day. ``check()`` (every ``interval``
    seconds in a thread) makes a new certificate when the addresses differ and loads it into
    the running server's TLS context; connections made after that use it."""

    def __init__(self, context: ssl.SSLContext, data_dir, host: str, interval: float = 30.0, hosts_fn=None):
        self.context = context
        self.data_dir = data_dir
        self.host = host
        self.interval = interval
        self.hosts_fn = hosts_fn or (lambda: certificate_hosts(host))
        self.hosts = sorted(set(self.hosts_fn()))
        self._stop = threading.Event()
        self._thread = None

    def check(self) -> bool:
        """True when a new certificate was loaded."""
        hosts = sorted(set(self.hosts_fn()))
        if hosts == self.hosts:
            return False
        paths = ensure_certificates(self.data_dir, hosts)
        self.context.load_cert_chain(str(paths.server_cert), str(paths.server_key))
        log.warning("the laptop's addresses changed (%s): new server certificate loaded", ", ".join(hosts))
        self.hosts = hosts
        return True

    def _run(self) -> None:
        while not self._stop.wait(self.interval):
            try:
                self.check()
            except (OSError, TLSError, ssl.SSLError) as e:
                log.error("could not renew the server certificate for the new addresses: %s", e)

    def start(self) -> None:
        self._thread = threading.Thread(target=self._run, name="rhledger-cert-watch", daemon=True)
        self._thread.start()

    def stop(self) -> None:
        self._stop.set()
        if self._thread is not None:
            self._thread.join(timeout=5)


def make_servers(app, host: str, port: int, data_dir, *, setup_port: int | None = None,
                 numthreads: int = 12):
    """The HTTPS server and (unless ``setup_port`` is 0) the plain-HTTP setup server, not
    started. ``setup_port`` None means ``port + 1``. Returns (https_server, setup_server|None, paths)."""
    from cheroot import wsgi
    from cheroot.ssl.builtin import BuiltinSSLAdapter

    paths = ensure_certificates(data_dir, certificate_hosts(host))
    if setup_port is None:
        setup_port = port + DEFAULT_SETUP_PORT_OFFSET if port else 0
    https = wsgi.Server((host, port), app, numthreads=numthreads, server_name="rhledger",
                        shutdown_timeout=2, timeout=30)
    adapter = BuiltinSSLAdapter(str(paths.server_cert), str(paths.server_key))
    adapter.context = server_context(paths)
    https.ssl_adapter = adapter
    plain = None
    if setup_port:
        plain = wsgi.Server((host, setup_port), SetupOnly(app, port), numthreads=4,
                            server_name="rhledger-setup", shutdown_timeout=2, timeout=30)
    app.config["LAN_HTTPS_PORT"] = port
    app.config["LAN_SETUP_PORT"] = setup_port or None
    app.config["SESSION_COOKIE_SECURE"] = True  # the session cookie travels over HTTPS only
    return https, plain, paths


def serve_https(app, host: str, port: int, data_dir, *, setup_port: int | None = None,
                ready=None) -> None:
    """Serve ``app`` over HTTPS on host:port until interrupted (Ctrl+C), and the phone setup
    page over plain HTTP on ``setup_port`` (default port + 1; 0 for none). ``ready`` is called
    with (https_server, setup_server) once both listen (tests use it to learn the ports)."""
    https, plain, paths = make_servers(app, host, port, data_dir, setup_port=setup_port)
    https.prepare()
    if plain is not None:
        plain.prepare()
        app.config["LAN_SETUP_PORT"] = plain.bind_addr[1]
    app.config["LAN_HTTPS_PORT"] = https.bind_addr[1]
    threads = []
    watcher = CertificateWatcher(https.ssl_adapter.context, data_dir, host)
    watcher.start()
    if plain is not None:
        t = threading.Thread(target=plain.serve, name="rhledger-setup-http", daemon=True)
        t.start()
        threads.append(t)
    addrs = lan_addresses()
    shown = addrs[0] if addrs else "127.0.0.1"
    print(f"rhledger on the clinic network: https://{shown}:{app.config['LAN_HTTPS_PORT']}/", file=sys.stderr)
    if plain is not None:
        print(f"phones start at http://{shown}:{app.config['LAN_SETUP_PORT']}/setup/ "
              f"(the laptop: http://127.0.0.1:{app.config['LAN_SETUP_PORT']}/setup/qr shows it as a QR code)",
              file=sys.stderr)
    print(f"CA certificate: {paths.ca_cert} (SHA-256 {ca_fingerprint(data_dir)})", file=sys.stderr)
    if ready is not None:
        ready(https, plain)
    try:
        https.serve()
    except KeyboardInterrupt:
        pass
    finally:
        watcher.stop()
        https.stop()
        if plain is not None:
            plain.stop()
        for t in threads:
            t.join(timeout=5)
