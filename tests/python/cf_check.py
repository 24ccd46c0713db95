#!/usr/bin/env python3
"""Runs the IOOS compliance-checker (CF 1.8 suite) on a NetCDF file written by exobound.

Why this exists: "CF-1.8" in a file's Conventions is a promise; the checker is the tool users
run to see whether it holds. Every error (high priority) and warning (medium priority) the
checker reports fails this script unless docs/outputs.md quotes the finding word for word
(whitespace aside) with the reason we accept it, so that an accepted finding is always
explained to users. Suggestions (low priority) are printed but do not fail.

Usage: python3 tests/python/cf_check.py FILE DOCS_MD
Exit status: 0 no unexplained finding, 1 unexplained findings, 2 wrong usage or the checker
is not installed. Prints a JSON summary on stdout.
Needs: pip install compliance-checker (it brings netCDF4 and cf-units)
"""

import json
import os
import re
import sys
import tempfile

USAGE = "usage: python3 tests/python/cf_check.py FILE DOCS_MD"
SUITE = "cf:1.8"


def normalise(text):
    """Collapses runs of whitespace so that wrapped Markdown lines still match."""
    return re.sub(r"\s+", " ", text).strip()


def findings(path):
    """The checker's failed checks as (priority, section, message) triples."""
    from compliance_checker.runner import CheckSuite, ComplianceChecker

    CheckSuite().load_all_available_checkers()
    with tempfile.TemporaryDirectory() as tmp:
        report = os.path.join(tmp, "report.json")
        ComplianceChecker.run_checker(
            path, [SUITE], 0, "normal", output_filename=report, output_format="json"
        )
        with open(report, encoding="utf-8") as fh:
            result = json.load(fh)[SUITE]
    out = []
    for priority in ("high_priorities", "medium_priorities", "low_priorities"):
        for item in result.get(priority, []):
            for msg in item.get("msgs", []):
                out.append((priority.split("_")[0], item.get("name", ""), msg))
    return out


def main(argv):
    if len(argv) != 3:
        print(USAGE, file=sys.stderr)
        return 2
    path, docs = argv[1], argv[2]
    try:
        import compliance_checker  # noqa: F401
    except ImportError:
        print("compliance-checker is not installed (pip install compliance-checker)", file=sys.stderr)
        return 2
    with open(docs, encoding="utf-8") as fh:
        explained = normalise(fh.read())
    summary = {"file": path, "suite": SUITE, "unexplained": [], "explained": [], "suggestions": []}
    for priority, section, msg in findings(path):
        entry = {"priority": priority, "section": section, "message": msg}
        if priority == "low":
            summary["suggestions"].append(entry)
        elif normalise(msg) in explained:
            summary["explained"].append(entry)
        else:
            summary["unexplained"].append(entry)
    summary["ok"] = not summary["unexplained"]
    print(json.dumps(summary, indent=2))
    return 0 if summary["ok"] else 1


if __name__ == "__main__":
    sys.exit(main(sys.argv))
