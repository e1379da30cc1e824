"""Serving phones on the clinic Wi-Fi: the local CA, the server certificate, HTTPS, the setup pages."""
from __future__ import annotations

import datetime as dt
import ipaddress
import os
import ssl
import stat
import threading
import urllib.error
import urllib.request
from types import SimpleNamespace

import pytest
from cryptography import x509
from cryptography.hazmat.primitives import serialization

from clinic.web import lan

HOSTS = ["192.168.8.20", "10.0.0.7", "clinic-laptop"]


def load(path):
    return x509.load_pem_x509_certificate(path.read_bytes())


def sans(cert):
    san = cert.extensions.get_extension_for_class(x509.SubjectAlternativeName).value
    return set(san.get_values_for_type(x509.DNSName)), {str(i) for i in san.get_values_for_type(x509.IPAddress)}


@pytest.fixture
def tls(tmp_path):
    return lan.ensure_certificates(tmp_path, HOSTS)


def test_ca_and_server_certificate_are_made(tls):
    ca = load(tls.ca_cert)
    assert ca.extensions.get_extension_for_class(x509.BasicConstraints).value.ca is True
    assert ca.subject == ca.issuer
    server = load(tls.server_cert)
    assert server.extensions.get_extension_for_class(x509.BasicConstraints).value.ca is False
    assert server.issuer == ca.subject


def test_server_certificate_chains_to_the_ca(tls):
    ca, server = load(tls.ca_cert), load(tls.server_cert)
    server.verify_directly_issued_by(ca)  # raises InvalidSignature otherwise
    aki = server.extensions.get_extension_for_class(x509.AuthorityKeyIdentifier).value.key_identifier
    ski = ca.extensions.get_extension_for_class(x509.SubjectKeyIdentifier).value.digest
    assert aki == ski


def test_server_certificate_names_the_given_hosts_and_localhost(tls):
    dns, ips = sans(load(tls.server_cert))
    assert {"clinic-laptop", "localhost"} <= dns
    assert {"192.168.8.20", "10.0.0.7", "127.0.0.1", "::1"} <= ips


def test_server_certificate_is_for_tls_servers_only(tls):
    server = load(tls.server_cert)
    eku = server.extensions.get_extension_for_class(x509.ExtendedKeyUsage).value
    assert list(eku) == [x509.oid.ExtendedKeyUsageOID.SERVER_AUTH]


def test_server_certificate_validity_is_what_phones_accept(tls):
    # Phones and browsers refuse server certificates valid for more than 397 days.
    server = load(tls.server_cert)
    span = server.not_valid_after_utc - server.not_valid_before_utc
    assert span <= dt.timedelta(days=397)
    assert server.not_valid_before_utc <= dt.datetime.now(dt.timezone.utc)


def test_private_keys_are_readable_by_the_owner_only(tls):
    for key in (tls.ca_key, tls.server_key):
        assert stat.S_IMODE(os.stat(key).st_mode) == 0o600
        serialization.load_pem_private_key(key.read_bytes(), password=None)
    assert stat.S_IMODE(os.stat(tls.dir).st_mode) == 0o700


def test_ca_is_limited_to_local_networks(tls, tmp_path):
    ca = load(tls.ca_cert)
    nc = ca.extensions.get_extension_for_class(x509.NameConstraints).value
    nets = [g.value for g in nc.permitted_subtrees if isinstance(g, x509.IPAddress)]
    assert ipaddress.ip_network("192.168.0.0/16") in nets
    assert not any(ipaddress.ip_address("8.8.8.8") in n for n in nets)
    # A public name asked for later is left out of the server certificate, not signed.
    again = lan.ensure_certificates(tmp_path, HOSTS + ["www.example.org"])
    dns, _ = sans(load(again.server_cert))
    assert "www.example.org" not in dns


def test_certificate_is_kept_while_the_addresses_stay(tls, tmp_path):
    before = tls.server_cert.read_bytes()
    lan.ensure_certificates(tmp_path, list(reversed(HOSTS)))
    assert tls.server_cert.read_bytes() == before


def test_certificate_is_made_again_when_an_address_changes(tls, tmp_path):
    ca_before = tls.ca_cert.read_bytes()
    paths = lan.ensure_certificates(tmp_path, ["192.168.8.31", "clinic-laptop"])
    _, ips = sans(load(paths.server_cert))
    assert "192.168.8.31" in ips and "192.168.8.20" not in ips
    assert paths.ca_cert.read_bytes() == ca_before  # phones keep the CA they installed


def test_certificate_is_renewed_before_it_ends(tls, tmp_path):
    before = load(tls.server_cert)
    later = before.not_valid_after_utc - dt.timedelta(days=10)
    paths = lan.ensure_certificates(tmp_path, HOSTS, now=later)
    assert load(paths.server_cert).not_valid_after_utc > before.not_valid_after_utc


def test_half_a_ca_is_refused_with_a_clear_message(tmp_path, tls):
    tls.ca_key.unlink()
    with pytest.raises(lan.TLSError, match="half of the CA"):
        lan.ensure_certificates(tmp_path, HOSTS)


def test_lan_addresses_are_reachable_kinds():
    for a in lan.lan_addresses():
        ip = ipaddress.ip_address(a)
        assert not ip.is_loopback and not ip.is_link_local and not ip.is_unspecified


@pytest.fixture
def running(app, data_dir):
    """serve_https's servers on free ports of 127.0.0.1, stopped afterwards."""
    https, plain, paths = lan.make_servers(app, "127.0.0.1", 0, data_dir, setup_port=0)
    https.prepare()
    threads = [threading.Thread(target=https.serve, daemon=True)]
    setup = None
    from cheroot import wsgi

    setup = wsgi.Server(("127.0.0.1", 0), lan.SetupOnly(app, https.bind_addr[1]), numthreads=2)
    setup.prepare()
    threads.append(threading.Thread(target=setup.serve, daemon=True))
    app.config["LAN_HTTPS_PORT"] = https.bind_addr[1]
    app.config["LAN_SETUP_PORT"] = setup.bind_addr[1]
    for t in threads:
        t.start()
    yield SimpleNamespace(port=https.bind_addr[1], setup_port=setup.bind_addr[1], paths=paths,
                          context=https.ssl_adapter.context)
    https.stop()
    setup.stop()
    for t in threads:
        t.join(timeout=10)
        assert not t.is_alive()


def test_https_request_with_the_ca_as_trust_root_succeeds(running):
    port, paths = running.port, running.paths
    ctx = ssl.create_default_context(cafile=str(paths.ca_cert))
    with urllib.request.urlopen(f"https://127.0.0.1:{port}/net/ping", context=ctx, timeout=10) as r:
        assert r.status == 204
    with urllib.request.urlopen(f"https://localhost:{port}/setup/ca.crt", context=ctx, timeout=10) as r:
        assert r.headers["Content-Type"] == "application/x-x509-ca-cert"
        assert x509.load_der_x509_certificate(r.read()) == load(paths.ca_cert)


def test_https_without_the_ca_is_not_trusted(running):
    port = running.port
    with pytest.raises(urllib.error.URLError, match="CERTIFICATE_VERIFY_FAILED"):
        urllib.request.urlopen(f"https://127.0.0.1:{port}/net/ping", context=ssl.create_default_context(), timeout=10)


def test_plain_http_serves_the_setup_page(running):
    setup_port, paths = running.setup_port, running.paths
    with urllib.request.urlopen(f"http://127.0.0.1:{setup_port}/setup/", timeout=10) as r:
        html = r.read().decode()
    assert lan.ca_fingerprint(paths.dir.parent) in html
    assert "Install a certificate" in html


def test_plain_http_sends_phones_to_https_except_setup(app):
    gate = lan.SetupOnly(app, 5443)
    seen = {}

    def start_response(status, headers):
        seen["status"], seen["headers"] = status, dict(headers)

    gate({"PATH_INFO": "/pregnancies/x", "QUERY_STRING": "a=1", "REMOTE_ADDR": "192.168.8.40",
          "HTTP_HOST": "192.168.8.20:5081", "REQUEST_METHOD": "GET"}, start_response)
    assert seen["status"].startswith("302")
    assert seen["headers"]["Location"] == "https://192.168.8.20:5443/pregnancies/x?a=1"


def test_setup_page_needs_no_sign_in_and_gives_both_phones_steps(anon, data_dir):
    lan.ensure_certificates(data_dir, ["192.168.8.20"])
    html = anon.get("/setup/").get_data(as_text=True)
    assert "Encryption &amp; credentials → Install a certificate → CA certificate" in html
    assert "Certificate Trust Settings" in html and "full trust" in html
    assert lan.ca_fingerprint(data_dir) in html


def test_ca_certificate_download(anon, data_dir):
    lan.ensure_certificates(data_dir, ["192.168.8.20"])
    r = anon.get("/setup/ca.crt")
    assert r.status_code == 200
    assert r.mimetype == "application/x-x509-ca-cert"
    assert x509.load_der_x509_certificate(r.data) == load(lan.tls_paths(data_dir).ca_cert)


def test_ca_certificate_before_there_is_one_says_what_to_do(anon):
    r = anon.get("/setup/ca.crt")
    assert r.status_code == 404
    assert "rhledger serve --lan" in r.get_data(as_text=True)


def test_qr_page_shows_the_setup_address_as_an_inline_svg(app, anon, data_dir):
    lan.ensure_certificates(data_dir, ["192.168.8.20"])
    app.config.update(LAN_HTTPS_PORT=5080, LAN_SETUP_PORT=5081)
    html = anon.get("/setup/qr").get_data(as_text=True)
    assert "<svg" in html and "<?xml" not in html
    assert ":5081/setup/" in html


def test_qr_page_without_lan_says_how_to_start_it(anon):
    html = anon.get("/setup/qr").get_data(as_text=True)
    assert "rhledger serve --lan" in html


def test_a_new_address_while_serving_loads_a_new_certificate(tmp_path):
    hosts = ["192.168.8.20", "clinic-laptop"]
    paths = lan.ensure_certificates(tmp_path, hosts)
    ctx = lan.server_context(paths)
    watcher = lan.CertificateWatcher(ctx, tmp_path, "0.0.0.0", hosts_fn=lambda: list(hosts))
    assert watcher.check() is False
    hosts[0] = "192.168.8.77"  # DHCP gave the laptop another address
    assert watcher.check() is True
    _, ips = sans(load(paths.server_cert))
    assert "192.168.8.77" in ips and "192.168.8.20" not in ips


def test_the_running_server_presents_the_new_certificate(running, data_dir):
    import socket

    port, paths = running.port, running.paths
    client = ssl.create_default_context(cafile=str(paths.ca_cert))

    def handshake(name):
        with socket.create_connection(("127.0.0.1", port), timeout=10) as sock:
            with client.wrap_socket(sock, server_hostname=name) as tls_sock:
                return tls_sock.version()

    with pytest.raises(ssl.SSLCertVerificationError):
        handshake("192.168.8.77")
    watcher = lan.CertificateWatcher(running.context, data_dir, "127.0.0.1",
                                     hosts_fn=lambda: ["192.168.8.77", "127.0.0.1"])
    watcher.hosts = []
    assert watcher.check() is True
    assert handshake("192.168.8.77") in ("TLSv1.2", "TLSv1.3")
