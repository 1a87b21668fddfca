"""The worked example of docs/scale.md (docs/examples/trailer_shards.py) runs, and its
merged-sketch answers are within the sketch's stated bound of the exact answers that
numpy computes from every raw row: numpy.quantile(x, 0.95, method="inverted_cdf") with
the true-rank distance as a share of n <= 0.005, and numpy.mean(x > 5.0) within 0.005.
"""

import importlib.util
import pathlib

ROOT = pathlib.Path(__file__).resolve().parents[2]


def test_trailer_shards_example_within_bound(tmp_path, extension_path, monkeypatch):
    monkeypatch.setenv("OGIVE_EXTENSION", extension_path)
    spec = importlib.util.spec_from_file_location("trailer_shards", ROOT / "docs" / "examples" / "trailer_shards.py")
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    report = module.run(tmp_path, days=3, out=lambda *_: None)
    assert [r[0] for r in report] == ["city", "coast", "north", "valley", "fleet"]
    for route, n, p95, exact, rank_error, share, exact_share in report:
        assert n > 0
        assert rank_error <= 0.005, (route, p95, exact, rank_error)
        assert abs(share - exact_share) <= 0.005, (route, share, exact_share)
