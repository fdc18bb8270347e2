"""deploy/nginx/registry.conf with Debian's nginx: ``nginx -t`` passes, and served for real on
loopback, an uploaded file reaches a signed-in user through the X-Accel-Redirect hand-off with
``Cache-Control: private`` exactly once, and no answer names the nginx version (issue 11).

The site file is used as shipped, with only what a test must change: the certificate (a
self-signed one made here with openssl), the listening ports (free loopback ports), the log,
media and upstream addresses. The upstream is a tiny HTTP server that answers with the headers
Django's media view really sends (taken from the view through the test client). Skipped, with
the reason, where nginx or openssl is not installed (deploy/test.sh installs nginx).
"""

from __future__ import annotations

import http.client
import shutil
import socket
import ssl
import subprocess
import threading
import time
from http.server import BaseHTTPRequestHandler, HTTPServer
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]
SITE = ROOT / "deploy" / "nginx" / "registry.conf"
NGINX = shutil.which("nginx") or ("/usr/sbin/nginx" if Path("/usr/sbin/nginx").exists() else None)
OPENSSL = shutil.which("openssl")

pytestmark = pytest.mark.skipif(
    NGINX is None or OPENSSL is None,
    reason="nginx or openssl is not installed (Debian: apt-get install nginx openssl; deploy/test.sh does)",
)


def _free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


def _site_for_test(tmp: Path, *, https_port: int, http_port: int, upstream_port: int) -> Path:
    """The shipped site file with the machine-specific lines changed for a test run."""
    cert, key = tmp / "cert.pem", tmp / "key.pem"
    subprocess.run(
        [OPENSSL, "req", "-x509", "-newkey", "rsa:2048", "-nodes", "-days", "1", "-subj", "/CN=registry.example.org"]
        + ["-keyout", str(key), "-out", str(cert)],
        check=True,
        capture_output=True,
    )
    text = SITE.read_text()
    replacements = {
        "/etc/letsencrypt/live/registry.example.org/fullchain.pem": str(cert),
        "/etc/letsencrypt/live/registry.example.org/privkey.pem": str(key),
        "/var/log/nginx/registry.access.log": str(tmp / "access.log"),
        "/var/log/nginx/registry.error.log": str(tmp / "error.log"),
        "/srv/registry/var/media/": str(tmp / "media") + "/",
        "/srv/registry/var/static/": str(tmp / "static") + "/",
        "server 127.0.0.1:8001 max_fails=1 fail_timeout=10s;": f"server 127.0.0.1:{upstream_port} max_fails=1 fail_timeout=10s;",
        "listen 443 ssl http2;": f"listen 127.0.0.1:{https_port} ssl http2;",
        "listen 80;": f"listen 127.0.0.1:{http_port};",
        "listen [::]:443 ssl http2;": "",
        "listen [::]:80;": "",
    }
    for old, new in replacements.items():
        assert old in text, f"the site file no longer contains {old!r}; update this test"
        text = text.replace(old, new)
    (tmp / "registry.conf").write_text(text)
    main = tmp / "nginx.conf"
    temp_paths = "\n".join(
        f"    {name}_temp_path {tmp / name};" for name in ("client_body", "proxy", "fastcgi", "uwsgi", "scgi")
    )
    main.write_text(
        f"""daemon off;
master_process off;
pid {tmp / "nginx.pid"};
error_log {tmp / "error.log"};
events {{ worker_connections 64; }}
http {{
    include /etc/nginx/mime.types;
    default_type application/octet-stream;
{temp_paths}
    include {tmp / "registry.conf"};
}}
"""
    )
    return main


def test_nginx_accepts_the_site_file(tmp_path):
    main = _site_for_test(tmp_path, https_port=_free_port(), http_port=_free_port(), upstream_port=_free_port())
    proc = subprocess.run([NGINX, "-t", "-p", str(tmp_path), "-c", str(main)], capture_output=True, text=True)
    assert proc.returncode == 0, proc.stderr
    assert "syntax is ok" in proc.stderr and "test is successful" in proc.stderr


@pytest.fixture
def media_answer(db, viewer, client, settings, tmp_path):
    """The headers Django's media view sends in production (DEBUG off) for a signed-in viewer."""
    settings.DEBUG = False
    settings.MEDIA_ROOT = tmp_path / "django-media"
    (settings.MEDIA_ROOT / "photos").mkdir(parents=True)
    (settings.MEDIA_ROOT / "photos" / "kv-001.jpg").write_bytes(b"\xff\xd8invented photo\xff\xd9")
    client.force_login(viewer)
    response = client.get("/media/photos/kv-001.jpg")
    assert response.status_code == 200 and response["X-Accel-Redirect"] == "/_protected_media/photos/kv-001.jpg"
    return {k: v for k, v in response.items() if k.lower() not in ("content-length", "content-security-policy")}


def test_served_media_say_cache_control_private_once_and_no_version(tmp_path, media_answer):
    (tmp_path / "media" / "photos").mkdir(parents=True)
    (tmp_path / "media" / "photos" / "kv-001.jpg").write_bytes(b"\xff\xd8invented photo\xff\xd9")
    headers = media_answer

    class Upstream(BaseHTTPRequestHandler):
        def do_GET(self):  # noqa: N802 (http.server's name)
            self.send_response(200)
            for name, value in headers.items():
                self.send_header(name, value)
            self.send_header("Content-Length", "0")
            self.end_headers()

        def log_message(self, *args):
            pass

    upstream = HTTPServer(("127.0.0.1", 0), Upstream)
    threading.Thread(target=upstream.serve_forever, daemon=True).start()
    https_port = _free_port()
    main = _site_for_test(tmp_path, https_port=https_port, http_port=_free_port(), upstream_port=upstream.server_port)
    nginx = subprocess.Popen([NGINX, "-p", str(tmp_path), "-c", str(main)], stderr=subprocess.PIPE)
    try:
        context = ssl.create_default_context()
        context.check_hostname = False
        context.verify_mode = ssl.CERT_NONE  # the test's own self-signed certificate
        for _ in range(50):
            try:
                conn = http.client.HTTPSConnection("127.0.0.1", https_port, context=context, timeout=5)
                conn.request("GET", "/media/photos/kv-001.jpg", headers={"Host": "registry.example.org"})
                response = conn.getresponse()
                break
            except (ConnectionRefusedError, ssl.SSLError, OSError):
                time.sleep(0.1)
        else:
            pytest.fail("nginx did not answer: " + (tmp_path / "error.log").read_text())
        body = response.read()
        assert response.status == 200 and body == b"\xff\xd8invented photo\xff\xd9"
        assert response.msg.get_all("Cache-Control") == ["private"]
        assert response.getheader("Server") == "nginx"  # server_tokens off: no version
        assert response.getheader("Content-Type") == "image/jpeg"
        assert response.getheader("Content-Disposition") == "inline"
        assert "sandbox" in response.getheader("Content-Security-Policy")
        conn.close()
        # The internal location itself is not reachable from outside; the error page names no version.
        conn = http.client.HTTPSConnection("127.0.0.1", https_port, context=context, timeout=5)
        conn.request("GET", "/_protected_media/photos/kv-001.jpg", headers={"Host": "registry.example.org"})
        response = conn.getresponse()
        page = response.read().decode()
        assert response.status == 404 and "nginx/" not in page and response.getheader("Server") == "nginx"
        conn.close()
    finally:
        nginx.terminate()
        nginx.wait(timeout=10)
        upstream.shutdown()
