#!/usr/bin/env python3
"""Compare Spinney's parse of every fixture with outside references.

    python3 tests/reference/check_parsing.py              # all checks
    python3 tests/reference/check_parsing.py --manifest   # also check kinds, flags, notices
    python3 tests/reference/check_parsing.py --only dates # fixtures whose label contains "dates"

Spinney's binary is $SPINNEY_BIN (default /work/main/target/debug/spinney), run as
    $SPINNEY_BIN inspect FILE [--sheet NAME] [--missing=TOKEN]... --json --cells
(--missing=TOKEN, with "=", so that a token such as -999 is not taken for a flag).

The outside references, each named where it is used:
  * Python 3.11 csv module (csv.reader, newline="" as its documentation requires),
  * pandas.read_csv (pandas 2.x/3.x, C engine), pandas.read_excel with openpyxl / odfpy,
  * Python hashlib.sha256 (FIPS 180-4) for the fingerprint,
  * Python codecs for the encodings, float() for decimal numbers (IEEE 754 double,
    correctly rounded), datetime.date.fromisoformat / datetime.fromisoformat (ISO 8601).
Checks whose expected value is only our own judgement say "common practice, no source".

Output: one "PASS <name>" or "FAIL <name>: <reason>" per check ("SKIP <name>: <why>" lines
are information, not checks), then exactly one line "N passed, N failed".
Exit status 1 if any check failed.
"""

import argparse
import csv
import datetime as dt
import hashlib
import json
import math
import os
import re
import subprocess
import sys
import time

HERE = os.path.dirname(os.path.abspath(__file__))
FIXTURES = os.path.normpath(os.path.join(HERE, "..", "fixtures"))
DEFAULT_BIN = "/work/main/target/debug/spinney"

# Spinney's default missing tokens, matched case-insensitively after trimming spaces.
# This list is Spinney's own design (common practice, no source), not an outside reference.
DEFAULT_TOKENS = ["", "NA", "N/A", "NaN", "null", "None", ".", "?", "#N/A"]

# Manifest encoding names -> Python codec names (Python 3.11 codecs: "utf-8-sig" drops a
# UTF-8 BOM; "utf-16" reads the BOM to choose the byte order and drops it).
CODECS = {"utf-8": "utf-8", "utf-8 with BOM": "utf-8-sig", "utf-16le": "utf-16",
          "utf-16be": "utf-16", "windows-1252": "cp1252"}

EPOCH = dt.datetime(1970, 1, 1)
NUMERIC_KINDS = ("number", "whole number")
STRING_KINDS = ("yes/no", "category", "text")
ALL_KINDS = NUMERIC_KINDS + ("date", "date-time") + STRING_KINDS
REL_TOL = 1e-12


# ------------------------------------------------------------------ reporting

class Report:
    def __init__(self):
        self.passed = 0
        self.failed = 0

    def check(self, name, problems):
        """problems: list of strings (empty = pass)."""
        if problems:
            self.failed += 1
            more = " (+%d more)" % (len(problems) - 3) if len(problems) > 3 else ""
            print("FAIL %s: %s%s" % (name, "; ".join(problems[:3]), more), flush=True)
        else:
            self.passed += 1
            print("PASS %s" % name, flush=True)

    def skip(self, name, why):
        print("SKIP %s: %s" % (name, why), flush=True)


def short(v, n=60):
    r = repr(v)
    return r if len(r) <= n else r[:n] + "...'"


# ------------------------------------------------------------------ pandas

def import_pandas():
    """Import pandas, installing it if missing. Another process may be installing it at the
    same moment: wait and retry instead of starting a second install straight away."""
    installed = False
    for attempt in range(8):
        try:
            import pandas  # noqa: F401
            return pandas
        except ImportError:
            pass
        if attempt >= 1 and not installed:
            r = subprocess.run([sys.executable, "-m", "pip", "install", "-q", "pandas"],
                               stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
            installed = r.returncode == 0
        time.sleep(5 if attempt == 0 else 15)
    return None


# ------------------------------------------------------------------ value parsing

def tokens_for(entry):
    return DEFAULT_TOKENS + list(entry.get("missing_tokens", []))


def is_token(s, tokens_lower):
    return s.strip().lower() in tokens_lower


def parse_number(s, decimal=".", thousands=None):
    """Reference number parse: strip a thousands separator only where it groups digits in
    threes, switch a decimal comma to a point, then Python float() (IEEE 754 double)."""
    t = s.strip()
    if thousands:
        pat = r"[+-]?\d{1,3}(?:%s\d{3})+(?:%s\d+)?" % (re.escape(thousands), re.escape(decimal))
        if re.fullmatch(pat, t):
            t = t.replace(thousands, "")
    if decimal != ".":
        t = t.replace(decimal, ".")
    return float(t)


def parse_date_days(s):
    """Days since 1970-01-01 by Python datetime: ISO 8601 yyyy-mm-dd
    (date.fromisoformat), else day-first dd/mm/yyyy (strptime %d/%m/%Y)."""
    s = s.strip()
    try:
        d = dt.date.fromisoformat(s)
    except ValueError:
        d = dt.datetime.strptime(s, "%d/%m/%Y").date()
    return float((d - EPOCH.date()).days)


def parse_datetime_days(s):
    """Fractional days since 1970-01-01T00:00 (naive), Python 3.11 datetime.fromisoformat
    (ISO 8601, space or T separator)."""
    d = dt.datetime.fromisoformat(s.strip())
    return (d - EPOCH) / dt.timedelta(days=1)


def close(a, b):
    return math.isclose(a, b, rel_tol=REL_TOL, abs_tol=0.0) or a == b


def is_json_number(v):
    return isinstance(v, (int, float)) and not isinstance(v, bool)


YES_WORDS = {"yes", "y", "true", "t", "1", "1.0"}
NO_WORDS = {"no", "n", "false", "f", "0", "0.0"}


def yes_no_meaning(v):
    """Spinney stores yes/no columns as 0/1 and shows each side's most frequent spelling, so a
    yes/no cell is compared on its meaning, not its case (our judgement, no source)."""
    t = str(v).strip().lower()
    return True if t in YES_WORDS else False if t in NO_WORDS else None


def compare_to_text(kind, got, ref, entry):
    """got: Spinney's cell; ref: the reference's trimmed text or None for missing.
    Returns None when they agree, else a reason."""
    if ref is None or got is None:
        return None if ref is None and got is None else "got %s, reference %s" % (
            short(got), "missing" if ref is None else short(ref))
    if kind == "yes/no":
        ok = yes_no_meaning(got) is not None and yes_no_meaning(got) == yes_no_meaning(ref)
        return None if ok else "got %s, reference %s" % (short(got), short(ref))
    try:
        if kind in NUMERIC_KINDS:
            want = parse_number(ref, entry.get("decimal", "."), entry.get("thousands"))
        elif kind == "date":
            want = parse_date_days(ref)
        elif kind == "date-time":
            want = parse_datetime_days(ref)
        elif kind in STRING_KINDS:
            if entry.get("nul_dropped"):
                # Spinney drops NUL bytes (with a notice); the csv module keeps them.
                ref = ref.replace("\x00", "")
            return None if got == ref else "got %s, reference %s" % (short(got), short(ref))
        else:
            return "unknown kind %r" % kind
    except ValueError:
        return "reference text %s does not parse as %s" % (short(ref), kind)
    if not is_json_number(got):
        return "got %s, expected a number for kind %s" % (short(got), kind)
    return None if close(float(got), want) else "got %r, reference %r (from %s)" % (
        got, want, short(ref))


# ------------------------------------------------------------------ references

def read_with_csv_module(path, entry):
    """Python 3.11 csv module, RFC 4180 style dialect (delimiter from the manifest, quote '"',
    doubled quotes).  Returns (header, rows) of trimmed strings, None for missing."""
    codec = CODECS[entry.get("encoding", "utf-8")]
    # The csv module refuses fields over 128 KiB by default (csv.field_size_limit);
    # long_line.csv has a 1 MiB field, so raise the limit.
    csv.field_size_limit(64 * 1024 * 1024)
    with open(path, encoding=codec, newline="") as f:
        records = list(csv.reader(f, delimiter=entry.get("delimiter", ",")))
    # csv.reader yields [] for an empty line.  Empty lines are skipped, as pandas'
    # skip_blank_lines=True does (common practice, no source for the trailing ones).
    records = [r for r in records if r != []]
    if not records:
        raise ValueError("no header line")
    header = [h.strip() for h in records[0]]
    low = {t.lower() for t in tokens_for(entry)}
    rows = []
    for i, r in enumerate(records[1:], 1):
        if len(r) != len(header):
            raise ValueError("record %d has %d fields, header has %d" % (i, len(r), len(header)))
        rows.append([None if is_token(v, low) else v.strip() for v in r])
    return header, rows


def pandas_na_values(entry):
    # pandas matches na_values exactly and case-sensitively, so pass the usual letter cases
    # of each token; anything it still keeps (e.g. " NA " with spaces) is normalised after.
    vals = set()
    for t in tokens_for(entry):
        vals.update({t, t.lower(), t.upper(), t.title()})
    return sorted(vals)


def read_with_pandas(pd, path, entry):
    """pandas.read_csv, C engine, dtype inferred, keep_default_na=False with our tokens."""
    kw = dict(sep=entry.get("delimiter", ","), encoding=CODECS[entry.get("encoding", "utf-8")],
              keep_default_na=False, na_values=pandas_na_values(entry))
    if entry.get("decimal", ".") != ".":
        kw["decimal"] = entry["decimal"]
    if entry.get("thousands"):
        kw["thousands"] = entry["thousands"]
    return pd.read_csv(path, **kw)


def read_sheet_with_pandas(pd, path, entry):
    """pandas.read_excel with openpyxl (xlsx) or odfpy (ods)."""
    engine = "odf" if path.endswith(".ods") else "openpyxl"
    return pd.read_excel(path, sheet_name=entry.get("sheet", 0), engine=engine,
                         keep_default_na=False, na_values=pandas_na_values(entry))


def pandas_value(pd, v, low):
    """Normalise one pandas cell: None for missing, trimmed str, bool, float or Timestamp."""
    if v is None:
        return None
    if hasattr(v, "item") and not isinstance(v, pd.Timestamp):
        v = v.item()  # numpy scalar -> Python scalar
    if isinstance(v, float) and math.isnan(v):
        return None
    if v is pd.NaT or (isinstance(v, pd.Timestamp) and pd.isna(v)):
        return None
    if isinstance(v, str):
        t = v.strip()
        return None if t.lower() in low else t
    if isinstance(v, (dt.datetime, dt.date)) and not isinstance(v, pd.Timestamp):
        return pd.Timestamp(v)
    return v


def compare_to_pandas(pd, kind, got, ref, entry):
    if ref is None or got is None:
        return None if ref is None and got is None else "got %s, pandas %s" % (
            short(got), "missing" if ref is None else short(ref))
    if kind == "yes/no":
        ok = yes_no_meaning(got) is not None and yes_no_meaning(got) == yes_no_meaning(ref)
        return None if ok else "got %s, pandas %s" % (short(got), short(ref))
    if kind in STRING_KINDS:
        if isinstance(ref, bool):  # pandas turns true/false/TRUE/False into bool
            ok = isinstance(got, str) and got.lower() == str(ref).lower()
        elif isinstance(ref, (int, float)):  # pandas turns 0/1 and numeric codes into numbers
            try:
                ok = isinstance(got, str) and float(got) == float(ref)
            except ValueError:
                ok = False
        else:
            want = str(ref).replace("\x00", "") if entry.get("nul_dropped") else str(ref)
            ok = got == want
        return None if ok else "got %s, pandas %s" % (short(got), short(ref))
    if kind not in ALL_KINDS:
        return "unknown kind %r" % kind
    if not is_json_number(got):
        return "got %s, expected a number for kind %s" % (short(got), kind)
    try:
        if kind in NUMERIC_KINDS:
            if isinstance(ref, bool):
                return "pandas read %r as a boolean" % ref
            # pandas leaves some numeric text as str (e.g. padded with spaces): parse it.
            want = parse_number(ref, entry.get("decimal", "."), entry.get("thousands")) \
                if isinstance(ref, str) else float(ref)
        else:
            if isinstance(ref, str):
                # pandas' own date parser: ISO 8601, else day-first dd/mm/yyyy.
                if re.match(r"^\d{4}-\d{2}-\d{2}", ref):
                    ts = pd.Timestamp(ref)
                else:
                    ts = pd.to_datetime(ref, format="%d/%m/%Y")
            elif isinstance(ref, pd.Timestamp):
                ts = ref
            else:
                return "pandas value %s is not a date" % short(ref)
            want = (ts - pd.Timestamp("1970-01-01")) / pd.Timedelta(days=1)
    except (ValueError, TypeError) as e:
        return "pandas value %s does not parse as %s (%s)" % (short(ref), kind, e)
    return None if close(float(got), float(want)) else "got %r, pandas %r (from %s)" % (
        got, want, short(ref))


def renamed_positions(header):
    """Columns Spinney must rename: blank names and repeats of an earlier name."""
    seen, out = set(), set()
    for i, h in enumerate(header):
        if h == "" or h in seen:
            out.add(i)
        seen.add(h)
    return out


# ------------------------------------------------------------------ Spinney

def run_spinney(binary, path, entry, timeout=120):
    cmd = [binary, "inspect", path]
    if entry.get("sheet"):
        cmd += ["--sheet", entry["sheet"]]
    for t in entry.get("missing_tokens", []):
        cmd.append("--missing=" + t)
    cmd += ["--json", "--cells"]
    try:
        p = subprocess.run(cmd, capture_output=True, timeout=timeout)
    except subprocess.TimeoutExpired:
        return None, "", "timed out after %d s" % timeout
    return p.returncode, p.stdout.decode("utf-8", "replace"), p.stderr.decode("utf-8", "replace")


def crash_problems(rc, err):
    out = []
    if rc is None:
        out.append(err)
    elif rc not in (0, 1):
        out.append("crashed: exit status %d" % rc)
    if "panicked" in err:
        out.append("panicked: " + err.strip().splitlines()[0][:200])
    return out


def check_json_shape(j):
    """Spinney's own contract (our design, no outside source)."""
    p = []
    if j.get("format") != "spinney-inspect" or j.get("version") != 1:
        p.append("format/version is %r/%r" % (j.get("format"), j.get("version")))
    cols, cells = j.get("columns"), j.get("cells")
    if not isinstance(cols, list) or not isinstance(cells, list):
        return p + ["no columns or no cells (was --cells honoured?)"]
    if j.get("rows") != len(cells):
        p.append("rows is %r but there are %d cell rows" % (j.get("rows"), len(cells)))
    for i, row in enumerate(cells):
        if not isinstance(row, list) or len(row) != len(cols):
            p.append("cell row %d has %s cells, %d columns" % (
                i + 1, len(row) if isinstance(row, list) else "no", len(cols)))
            break
    for c in cols:
        if c.get("kind") not in ALL_KINDS:
            p.append("column %r has kind %r" % (c.get("name"), c.get("kind")))
    names = [c.get("name") for c in cols]
    if len(set(names)) != len(names) or any(not n for n in names):
        p.append("column names not unique and non-empty: %r" % names)
    return p


def compare_table(j, header, rows, cmp, who):
    """Shared by both references: shape, names, missing counts and every cell."""
    p = []
    cols = j["columns"]
    if len(rows) != j["rows"]:
        p.append("%d rows, %s has %d" % (j["rows"], who, len(rows)))
    if len(cols) != len(header):
        p.append("%d columns, %s has %d" % (len(cols), who, len(header)))
        return p
    renamed = renamed_positions(header)
    for i, (c, h) in enumerate(zip(cols, header)):
        if i not in renamed and c["name"] != h:
            p.append("column %d named %r, %s %r" % (i + 1, c["name"], who, h))
    for ci, c in enumerate(cols):
        ref_missing = sum(1 for r in rows if r[ci] is None)
        if c.get("missing") != ref_missing:
            p.append("column %r: summary says %r missing, %s %d" % (
                c["name"], c.get("missing"), who, ref_missing))
    bad = 0
    for ri, (got_row, ref_row) in enumerate(zip(j["cells"], rows)):
        for ci, c in enumerate(cols):
            why = cmp(c["kind"], got_row[ci], ref_row[ci])
            if why:
                bad += 1
                if bad <= 3:
                    p.append("row %d column %r: %s" % (ri + 1, c["name"], why))
    if bad > 3:
        p.append("%d cells differ in all" % bad)
    return p


# ------------------------------------------------------------------ the checks

def label_of(e):
    return e["file"] + ("#" + e["sheet"] if e.get("sheet") else "")


def is_spreadsheet(name):
    return name.lower().endswith((".xlsx", ".ods"))


def manifest_vs_references(e, csv_ref, pd_ref):
    """The manifest itself against the references, so a wrong manifest is caught even
    before Spinney exists."""
    p = []
    header, rows = csv_ref
    names = [c["name"] for c in e["columns"]]
    if len(rows) != e["rows"]:
        p.append("manifest says %d rows, csv module %d" % (e["rows"], len(rows)))
    if len(header) != len(names):
        p.append("manifest says %d columns, csv module %d" % (len(names), len(header)))
    else:
        renamed = renamed_positions(header)
        for i, (n, h) in enumerate(zip(names, header)):
            if i not in renamed and n != h:
                p.append("manifest column %d %r, csv module %r" % (i + 1, n, h))
        for i, n in enumerate(names):
            want = e.get("missing", {}).get(n, 0)
            got = sum(1 for r in rows if r[i] is None)
            if want != got:
                p.append("manifest says %r has %d missing, csv module %d" % (n, want, got))
    if pd_ref is not None and pd_ref.shape != (e["rows"], len(names)):
        p.append("manifest shape %r, pandas %r" % ((e["rows"], len(names)), pd_ref.shape))
    return p


def manifest_problems(e, j):
    """--manifest: Spinney against our expectations (kinds, flags, notices): our judgement,
    common practice, no source."""
    p = []
    if j.get("rows") != e["rows"]:
        p.append("rows %r, manifest %d" % (j.get("rows"), e["rows"]))
    got = {c.get("name"): c for c in j.get("columns", [])}
    names = [c.get("name") for c in j.get("columns", [])]
    want_names = [c["name"] for c in e["columns"]]
    if names != want_names:
        p.append("names %r, manifest %r" % (names, want_names))
    for c in e["columns"]:
        g = got.get(c["name"])
        if g is None:
            continue
        if g.get("kind") != c["kind"]:
            p.append("%r kind %r, manifest %r" % (c["name"], g.get("kind"), c["kind"]))
        want_missing = e.get("missing", {}).get(c["name"], 0)
        if g.get("missing") != want_missing:
            p.append("%r missing %r, manifest %d" % (c["name"], g.get("missing"), want_missing))
        for f in e.get("flags", {}).get(c["name"], []):
            if f not in (g.get("flags") or []):
                p.append("%r lacks flag %r (has %r)" % (c["name"], f, g.get("flags")))
    notices = " | ".join(j.get("notices") or []).lower()
    for s in e.get("notices_contain", []):
        if s.lower() not in notices:
            p.append("no notice contains %r (notices: %s)" % (s, short(notices, 120)))
    return p


def source_problems(e, j):
    """What Spinney detected against what the references were told (from the manifest)."""
    p = []
    s = j.get("source") or {}
    name = e["file"]
    if is_spreadsheet(name):
        fmt = "ods" if name.endswith(".ods") else "xlsx"
        if s.get("kind") != "spreadsheet" or s.get("format") != fmt:
            p.append("source %r, expected spreadsheet %s" % (s, fmt))
        sheets = e.get("sheets")
        if sheets:
            if s.get("sheets") != sheets:
                p.append("sheets %r, file has %r" % (s.get("sheets"), sheets))
            if s.get("sheet") != e.get("sheet", sheets[0]):
                p.append("sheet %r, expected %r" % (s.get("sheet"), e.get("sheet", sheets[0])))
        return p
    if s.get("kind") != "delimited":
        return ["source kind %r, expected delimited" % s.get("kind")]
    if len(e["columns"]) > 1 and s.get("delimiter") != e.get("delimiter", ","):
        p.append("delimiter %r, references read with %r" % (s.get("delimiter"), e.get("delimiter")))
    if str(s.get("encoding", "")).lower() != e.get("encoding", "utf-8").lower():
        p.append("encoding %r, references read as %r" % (s.get("encoding"), e.get("encoding")))
    if s.get("decimal", ".") != e.get("decimal", "."):
        p.append("decimal %r, references read with %r" % (s.get("decimal"), e.get("decimal", ".")))
    return p


def main():
    ap = argparse.ArgumentParser(description="Compare Spinney's parsing with outside references.")
    ap.add_argument("--fixtures", default=FIXTURES)
    ap.add_argument("--manifest", action="store_true",
                    help="also check kinds, missing counts, flags and notices against manifest.json")
    ap.add_argument("--only", default="", help="only fixtures whose label contains this")
    args = ap.parse_args()

    rep = Report()
    binary = os.environ.get("SPINNEY_BIN", DEFAULT_BIN)
    have_bin = os.path.isfile(binary) and os.access(binary, os.X_OK)
    with open(os.path.join(args.fixtures, "manifest.json"), encoding="utf-8") as f:
        entries = [e for e in json.load(f) if args.only in label_of(e)]

    pd = import_pandas()
    if pd is None:
        rep.check("pandas", ["pandas could not be imported or installed"])

    if not have_bin:
        rep.check("spinney-binary", ["not found or not executable at %s (set SPINNEY_BIN); "
                                     "only the manifest-vs-reference checks ran" % binary])

    for e in entries:
        label = label_of(e)
        path = os.path.join(args.fixtures, e["file"])
        data = open(path, "rb").read()
        delimited = not is_spreadsheet(e["file"])

        # ---- references read the file on their own (no Spinney needed)
        csv_ref = pd_ref = None
        if e["expect"] == "table" and delimited:
            try:
                csv_ref = read_with_csv_module(path, e)
            except Exception as ex:  # a fixture that expects a table must be readable
                rep.check(label + " csv-module-read", ["csv module cannot read it: %s" % ex])
            if pd is not None:
                try:
                    pd_ref = read_with_pandas(pd, path, e)
                except Exception as ex:
                    rep.check(label + " pandas-read", ["pandas.read_csv cannot read it: %s" % ex])
            if csv_ref is not None:
                rep.check(label + " manifest-vs-references", manifest_vs_references(e, csv_ref, pd_ref))
        elif e["expect"] == "table" and pd is not None:
            try:
                pd_ref = read_sheet_with_pandas(pd, path, e)
            except ImportError as ex:
                # openpyxl / odfpy are optional pandas engines; without one pandas cannot
                # read this format at all.
                rep.skip(label + " pandas", "pandas.read_excel engine missing (%s)" % ex)
            except Exception as ex:
                rep.check(label + " pandas-read", ["pandas.read_excel cannot read it: %s" % ex])

        if not have_bin:
            continue

        # ---- Spinney
        rc, out, err = run_spinney(binary, path, e)
        crash = crash_problems(rc, err)

        if e["expect"] == "error":
            p = list(crash)
            if rc == 0:
                p.append("exit status 0, expected 1 (a data error)")
            elif not crash:
                msg = "\n".join(l for l in err.splitlines() if l.startswith("error:"))
                if not msg:
                    p.append("stderr has no 'error: ' line: %s" % short(err, 120))
                for s in e.get("message_contains", []):
                    if s.lower() not in msg.lower():
                        p.append("message lacks %r: %s" % (s, short(msg, 160)))
            rep.check(label + " error", p)
            continue

        p = list(crash)
        j = None
        if rc not in (None, 0) and not crash:
            p.append("exit status %d: %s" % (rc, short(err.strip(), 200)))
        elif rc == 0:
            try:
                j = json.loads(out)
                p += check_json_shape(j)
            except ValueError as ex:
                p.append("stdout is not one JSON object: %s" % ex)
        rep.check(label + " run", p)
        if j is None or p:
            continue

        # Python hashlib.sha256 (FIPS 180-4) of the file's bytes; size from len(bytes).
        fp = []
        if str(j.get("fingerprint_sha256", "")).lower() != hashlib.sha256(data).hexdigest():
            fp.append("fingerprint %s, hashlib.sha256 %s" % (
                j.get("fingerprint_sha256"), hashlib.sha256(data).hexdigest()))
        if j.get("bytes") != len(data):
            fp.append("bytes %r, file has %d" % (j.get("bytes"), len(data)))
        rep.check(label + " fingerprint", fp)

        rep.check(label + " source", source_problems(e, j))

        if delimited:
            if csv_ref is not None:
                header, rows = csv_ref
                rep.check(label + " csv-module", compare_table(
                    j, header, rows, lambda k, g, r: compare_to_text(k, g, r, e), "csv module"))
            if pd_ref is not None:
                low = {t.lower() for t in tokens_for(e)}
                prow = [[pandas_value(pd, v, low) for v in r]
                        for r in pd_ref.itertuples(index=False, name=None)]
                pheader = [str(c).strip() for c in pd_ref.columns]
                # pandas renames blank and repeated names itself ("Unnamed: 0", "score.1");
                # take those positions from the csv module's header so they are skipped.
                if csv_ref is not None and len(csv_ref[0]) == len(pheader):
                    for i in renamed_positions(csv_ref[0]):
                        pheader[i] = csv_ref[0][i]
                rep.check(label + " pandas", compare_table(
                    j, pheader, prow, lambda k, g, r: compare_to_pandas(pd, k, g, r, e),
                    "pandas.read_csv"))
        else:
            # The csv module cannot read a zip-based spreadsheet in principle.
            rep.skip(label + " csv-module", "a spreadsheet is a zip archive, not delimited text")
            if pd_ref is not None:
                low = {t.lower() for t in tokens_for(e)}
                prow = [[pandas_value(pd, v, low) for v in r]
                        for r in pd_ref.itertuples(index=False, name=None)]
                pheader = [str(c).strip() for c in pd_ref.columns]
                rep.check(label + " pandas", compare_table(
                    j, pheader, prow, lambda k, g, r: compare_to_pandas(pd, k, g, r, e),
                    "pandas.read_excel"))

        if args.manifest:
            rep.check(label + " manifest", manifest_problems(e, j))

    print("%d passed, %d failed" % (rep.passed, rep.failed))
    return 1 if rep.failed else 0


if __name__ == "__main__":
    sys.exit(main())
