"""Checks an HTML report with Python's html.parser and prints a JSON summary.

Usage: report_html_check.py REPORT.html
Prints {"problems": [...], "charts": [{"class": ..., "points": {kind: count}}],
        "counts": {kind: count}, "ineligible_titles": [...], "doctype": bool}.
Balanced tags: every non-void element closed in order (HTML5 void elements excepted).
Every data point ("pt" element) must carry a known kind (POINT_KINDS, the classes the report
draws; DEVELOPERS.md lists them): an unknown one is a problem, so that a renamed class cannot
make a count silently zero.
"""
import json
import sys
from html.parser import HTMLParser

VOID = {"area", "base", "br", "col", "embed", "hr", "img", "input", "link", "meta", "source",
        "track", "wbr"}


POINT_KINDS = {"route-point", "candidate", "subset-best", "coef", "cooks-bin", "cooks-flagged",
               "density-cell", "resid-flagged", "hist-bar", "qq-point", "bar", "calibration-point"}
POINT_STATES = {"start", "add", "remove", "stop", "eligible", "chosen", "ineligible", "no-score"}


class Checker(HTMLParser):
    def __init__(self):
        super().__init__(convert_charrefs=True)
        self.stack = []
        self.problems = []
        self.charts = []
        self.counts = {}
        self.ineligible_titles = []
        self.doctype = False
        self.capture = None  # list collecting a <title> text of an ineligible point

    def handle_decl(self, decl):
        if decl.lower() == "doctype html":
            self.doctype = True

    def _point(self, tag, attrs, closed):
        classes = (dict(attrs).get("class") or "").split()
        if tag == "svg":
            self.charts.append({"class": dict(attrs).get("class", ""), "points": {}})
        if "pt" in classes:
            kinds = [c for c in classes if c != "pt"]
            if not any(kind in POINT_KINDS for kind in kinds) or any(
                    kind not in POINT_KINDS | POINT_STATES for kind in kinds):
                self.problems.append("line %d: point with unknown classes %s" % (self.getpos()[0], classes))
            for kind in kinds:
                self.counts[kind] = self.counts.get(kind, 0) + 1
                if self.charts:
                    points = self.charts[-1]["points"]
                    points[kind] = points.get(kind, 0) + 1
            if "ineligible" in kinds:
                if closed:
                    self.ineligible_titles.append("")
                else:
                    self.stack[-1] = self.stack[-1] + ("ineligible",)

    def handle_starttag(self, tag, attrs):
        if tag == "title" and self.stack and "ineligible" in self.stack[-1][1:]:
            self.capture = []
        if tag not in VOID:
            self.stack.append((tag,))
        self._point(tag, attrs, closed=tag in VOID)

    def handle_startendtag(self, tag, attrs):
        self._point(tag, attrs, closed=True)

    def handle_data(self, data):
        if self.capture is not None:
            self.capture.append(data)

    def handle_endtag(self, tag):
        if tag in VOID:
            return
        if not self.stack or self.stack[-1][0] != tag:
            open_tag = self.stack[-1][0] if self.stack else "(nothing)"
            self.problems.append("line %d: </%s> closes <%s>" % (self.getpos()[0], tag, open_tag))
            return
        self.stack.pop()
        if tag == "title" and self.capture is not None:
            self.ineligible_titles.append("".join(self.capture))
            self.capture = None


def main():
    with open(sys.argv[1], encoding="utf-8") as handle:
        text = handle.read()
    checker = Checker()
    checker.feed(text)
    checker.close()
    if checker.stack:
        checker.problems.append("unclosed at the end: " + ", ".join(t[0] for t in checker.stack))
    print(json.dumps({"problems": checker.problems, "charts": checker.charts,
                      "counts": checker.counts, "ineligible_titles": checker.ineligible_titles,
                      "doctype": checker.doctype}))


main()
