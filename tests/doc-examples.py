#!/usr/bin/python3
# SPDX-License-Identifier: GPL-3.0-or-later
"""Run the example code blocks of a Markdown file, so documented examples
cannot rot.

    doc-examples.py [--cwd DIR] [--require LANG,...] FILE

A block runs when the line before its opening fence (blank lines aside) is
a marker comment naming its language:

    <!-- example: python -->
    ```python
    ...
    ```

Languages: python (run by /usr/bin/python3) and r (run by R --vanilla).
Each block runs as its own program in DIR (default: the current
directory); a block that exits non-zero fails the run.  --require lists
languages that must have at least one block (a file without them fails:
an extractor that finds nothing must not pass).
"""
import argparse
import os
import re
import subprocess
import sys
import tempfile

MARKER = re.compile(r"^\s*<!--\s*example:\s*([A-Za-z0-9_+-]+)\s*-->\s*$")
FENCE = re.compile(r"^(\s*)(`{3,}|~{3,})\s*([A-Za-z0-9_+-]*)")

RUNNERS = {
    "python": lambda path: ["/usr/bin/python3", path],
    "r": lambda path: [os.environ.get("R", "R"), "--vanilla", "--slave",
                       "-f", path],
}


def blocks(path):
    """(language, first line number, code) for every marked block."""
    with open(path, encoding="utf-8") as f:
        lines = f.read().split("\n")
    out = []
    i = 0
    while i < len(lines):
        m = MARKER.match(lines[i])
        i += 1
        if not m:
            continue
        lang = m.group(1).lower()
        marker_line = i
        while i < len(lines) and not lines[i].strip():
            i += 1
        f = FENCE.match(lines[i]) if i < len(lines) else None
        if not f:
            raise SystemExit("%s:%d: example marker not followed by a fenced "
                             "code block" % (path, marker_line))
        fence = f.group(2)
        start = i + 2
        i += 1
        code = []
        while i < len(lines) and not lines[i].strip().startswith(fence):
            code.append(lines[i][len(f.group(1)):]
                        if lines[i].startswith(f.group(1)) else lines[i])
            i += 1
        if i >= len(lines):
            raise SystemExit("%s:%d: unterminated code block"
                             % (path, start - 1))
        i += 1
        out.append((lang, start, "\n".join(code) + "\n"))
    return out


def main():
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    ap.add_argument("file")
    ap.add_argument("--cwd", default=".")
    ap.add_argument("--require", default="")
    args = ap.parse_args()
    found = blocks(args.file)
    failures = 0
    langs = set()
    for lang, line, code in found:
        where = "%s:%d (%s)" % (args.file, line, lang)
        if lang not in RUNNERS:
            print("FAIL: %s: no runner for language %r" % (where, lang))
            failures += 1
            continue
        langs.add(lang)
        suffix = ".py" if lang == "python" else ".R"
        with tempfile.NamedTemporaryFile("w", suffix=suffix,
                                         delete=False) as tmp:
            tmp.write(code)
        try:
            print("=== %s" % where, flush=True)
            rc = subprocess.run(RUNNERS[lang](tmp.name), cwd=args.cwd).returncode
        finally:
            os.unlink(tmp.name)
        if rc != 0:
            print("FAIL: %s exited with status %d" % (where, rc))
            failures += 1
        else:
            print("ok: %s" % where)
    for lang in filter(None, args.require.split(",")):
        if lang not in langs:
            print("FAIL: %s has no '<!-- example: %s -->' block"
                  % (args.file, lang))
            failures += 1
    print("%d example block(s), %d failed" % (len(found), failures))
    return 1 if failures else 0


if __name__ == "__main__":
    sys.exit(main())
