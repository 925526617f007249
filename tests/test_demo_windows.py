"""The README's window demos answer instantly and trusted (issue: instant,
trusted answers for the windows users have).  The part is a 1:1:0.5 box, a
held-out shape that no model was fitted on; the wafer is a disk with edge
exclusion and a notch (non-convex)."""
import os

from nullatlas.lookup import csr_test
from nullatlas.lookup.patterns.readers import read_points
from nullatlas.lookup.patterns.windows import parse_window

HERE = os.path.dirname(os.path.abspath(__file__))
EXAMPLES = os.path.join(os.path.dirname(HERE), "examples")


def test_pores_part_gets_every_default_statistic_instantly_and_trusted():
    pts = read_points(os.path.join(EXAMPLES, "pores_part.csv"))
    w = parse_window("box:0,0,0,20,20,10")
    r = csr_test(pts, w, None, method="auto", seed=1)
    assert len(r.results) == 7
    for x in r.results:
        assert x.trusted and not x.method.startswith("mc"), (x.name, x.method, x.reason)
    assert r.primary.pvalue < 0.01          # the part's pores are clustered (demo data)


def test_notched_wafer_is_answered_from_the_tables():
    pts = read_points(os.path.join(EXAMPLES, "wafer_notched_lot.csv"))
    w = parse_window(os.path.join(EXAMPLES, "wafer_notched.wkt"))
    r = csr_test(pts, w, None, method="asymptotic", seed=1)
    trusted = {x.name for x in r.results if x.trusted}
    assert {"euler", "total0", "total1", "lfunc"} <= trusted, trusted
    assert all(x.details.get("route") == "model" for x in r.results)
    assert r.primary.pvalue > 0.05           # CSR by construction (demo data)
