#!/usr/bin/env python3
"""Trunk post-build hook: fills the page's Content-Security-Policy with the SHA-256 hashes of
its inline scripts (Trunk writes one to start the wasm), replacing the placeholder
'inline-script-hashes'. Without it the policy would need 'unsafe-inline', which would let any
injected script run. Hash format: CSP Level 3, section 8.4 ('sha256-' + base64 of the digest)."""
import base64
import hashlib
import os
import re
import sys

html_path = os.path.join(os.environ.get("TRUNK_STAGING_DIR", sys.argv[1] if len(sys.argv) > 1 else "dist"), "index.html")
with open(html_path, encoding="utf-8") as f:
    html = f.read()
scripts = re.findall(r"<script(?![^>]*\bsrc=)[^>]*>(.*?)</script>", html, flags=re.S)
hashes = " ".join(
    "'sha256-%s'" % base64.b64encode(hashlib.sha256(s.encode("utf-8")).digest()).decode("ascii")
    for s in scripts
)
if "'inline-script-hashes'" not in html:
    sys.exit("csp_hashes.py: the placeholder 'inline-script-hashes' is missing from index.html")
html = html.replace("'inline-script-hashes'", hashes)
with open(html_path, "w", encoding="utf-8") as f:
    f.write(html)
print("csp_hashes.py: %d inline script(s) hashed into the Content-Security-Policy" % len(scripts))
