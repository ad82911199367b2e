#!/usr/bin/env python3
"""Trunk post-build hook: writes the list of the built page's files and a build version (the
SHA-256 of their contents) into offline-worker.js, the service worker that keeps a copy of the
page for use without a network. Run after csp_hashes.py, so index.html is in its final form."""
import hashlib
import json
import os
import sys

root = os.environ.get("TRUNK_STAGING_DIR", sys.argv[1] if len(sys.argv) > 1 else "dist")
worker = os.path.join(root, "offline-worker.js")
files = []
for base, _, names in os.walk(root):
    for name in names:
        path = os.path.join(base, name)
        rel = os.path.relpath(path, root).replace(os.sep, "/")
        if rel != "offline-worker.js":
            files.append(rel)
files.sort()
digest = hashlib.sha256()
for rel in files:
    digest.update(rel.encode("utf-8") + b"\0")
    with open(os.path.join(root, rel), "rb") as f:
        digest.update(f.read())
with open(worker, encoding="utf-8") as f:
    text = f.read()
for placeholder in ("'offline-build-version'", "['offline-file-list']"):
    if placeholder not in text:
        sys.exit("offline_list.py: the placeholder %s is missing from offline-worker.js" % placeholder)
listed = ["./"] + ["./" + rel for rel in files]
text = text.replace("'offline-build-version'", json.dumps(digest.hexdigest()[:16]))
text = text.replace("['offline-file-list']", json.dumps(listed))
with open(worker, "w", encoding="utf-8") as f:
    f.write(text)
print("offline_list.py: %d file(s) listed for the offline copy" % len(files))
